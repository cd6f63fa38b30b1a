"""Placement: move one part over a grid and map the failure risk or the controllability.

The map comes from :func:`kit.analysis.sweep.placement_sweep` (seconds to minutes, so it runs
when the "compute map" button is pressed, with a progress bar); choosing another quantity or
case only recolours the stored map.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from kit import plots
from kit.analysis.equilibrium import all_cases
from kit.analysis.sweep import WHEEL, PlacementMap, base_position, placement_sweep
from kit.panels.base import Panel, as_vehicle, kv_table
from kit.panels.progress import WidgetProgress

#: Quantities that can be mapped: label -> CaseMap field.
QUANTITIES = {
    "saturation probability (per s)": "saturation_probability",
    "distance to uncontrollability (1)": "controllability_distance",
    "spin rate (rad/s)": "spin_rate_rad_s",
    "tilt of the spin axis (deg)": "tilt_deg",
    "H2 norm": "h2_norm",
    "busiest rotor, fraction of max thrust (1)": "max_thrust_fraction",
}
FAILURE_MAP = "failure case"
HOVER_MAP = "no failure"


@dataclass(frozen=True)
class MapView:
    """One quantity of a placement map, laid out as figure data (design frame, m)."""

    figure: dict
    low: float
    high: float
    label: str


def map_view(design, pmap: PlacementMap, quantity: str, which: str = FAILURE_MAP) -> MapView:
    """Figure data of one quantity of a computed map (pure)."""
    cm = pmap.failure if which == FAILURE_MAP and pmap.failure is not None else pmap.hover
    values = np.asarray(getattr(cm, QUANTITIES[quantity]), float)
    xs = pmap.base_position_m[0] + pmap.x_offsets_m
    ys = pmap.base_position_m[1] + pmap.y_offsets_m
    hubs = np.array([r.position_m[:2] for r in design.rotors], float)
    data, lo, hi = plots.map_data(xs, ys, values, pmap.base_position_m[:2], hubs,
                                  design.rotor_names)
    case = "no failure" if cm.failed == () else "failed: " + ", ".join(cm.failed)
    return MapView(data, lo, hi, f"{quantity}, {case}, moving {pmap.part}")


class PlacementPanel(Panel):
    """Pick a part and a failure case; compute the map over a grid of positions."""

    def __init__(self, design, part: str | None = None, failed=None, span_m: float | None = None,
                 points: int = 7, executor=None, compute: bool = False) -> None:
        import ipywidgets as w

        super().__init__()
        self.vehicle = veh = as_vehicle(design)
        d = self.design = veh.design
        self.executor = executor
        self.title = f"Placement: {d.name}"
        parts = [p.name for p in d.parts] + ([WHEEL] if d.wheel is not None else [])
        cases = {}
        for f, r in all_cases(veh)[1:]:
            label = ", ".join(f) + (" (thrust ratio)" if r else "")
            cases[label] = (f, r)
        cases["none (no failure only)"] = ((), None)
        self._cases = cases
        if failed is not None:
            match = [k for k, (f, r) in cases.items() if set(f) == set(failed) and r is None]
            first_case = match[0] if match else next(iter(cases))
        else:
            first_case = next(iter(cases))
        span = span_m if span_m is not None else round(0.5 * veh.arm_m, 3)
        ext = 1.3 * max(float(np.max(np.abs([r.position_m[:2] for r in d.rotors]))), span)
        self.figure, self.sources, self.mapper, self.colour_bar = plots.map_figure(
            ext, "Map not computed yet")
        self.layout = plots.in_document(self.figure)
        style = {"description_width": "initial"}
        self.part = w.Dropdown(options=parts, value=part or parts[0], description="part",
                               style=style)
        self.case = w.Dropdown(options=list(cases), value=first_case, description="failure",
                               style=style)
        self.quantity = w.Dropdown(options=list(QUANTITIES), description="map",
                                   value=next(iter(QUANTITIES)), style=style)
        self.which = w.ToggleButtons(options=[FAILURE_MAP, HOVER_MAP], value=FAILURE_MAP,
                                     style=style)
        self.span = w.FloatSlider(value=span, min=0.01, max=max(2 * span, 0.02), step=span / 20,
                                  description="offset range \u00b1 (m)", readout_format=".3g",
                                  continuous_update=False, style=style)
        self.points = w.IntSlider(value=points, min=3, max=21, step=2,
                                  description="points per side", continuous_update=False,
                                  style=style)
        self.compute_button = w.Button(description="compute map", icon="th")
        self.progress = WidgetProgress("placement sweep")
        self.controls = {"part": self.part, "case": self.case, "quantity": self.quantity,
                         "which": self.which, "span": self.span, "points": self.points}
        self.pmap: PlacementMap | None = None
        self.view: MapView | None = None
        self._observe(self.quantity, self.which, self.part, self.case, self.span, self.points)
        self.compute_button.on_click(lambda _b: self.compute())
        self._build_widget([w.HBox([self.part, self.case]),
                            w.HBox([self.span, self.points]),
                            w.HBox([self.compute_button, self.progress.widget]),
                            w.HBox([self.quantity, self.which])])
        if compute:
            self.compute()
        else:
            self.refresh()

    def control_values(self):
        return [("part", self.part.value), ("failure", self.case.value),
                ("offset range", "\u00b1" + plots.fmt(self.span.value, 3, "m")),
                ("points per side", str(self.points.value)), ("map", self.quantity.value),
                ("case shown", self.which.value)]

    def _stale(self) -> bool:
        p = self.pmap
        if p is None:
            return True
        f, r = self._cases[self.case.value]
        return (p.part != self.part.value or tuple(p.failure.failed if p.failure else ()) !=
                tuple(f) or p.x_offsets_m.size != self.points.value
                or not math.isclose(float(p.x_offsets_m[-1]), float(self.span.value)))

    def compute(self) -> None:
        """Run the sweep for the current controls (progress bar while it runs)."""
        f, r = self._cases[self.case.value]
        offs = np.linspace(-self.span.value, self.span.value, self.points.value)
        self.progress.reset()
        try:
            base_position(self.design, self.part.value)
            self.pmap = placement_sweep(self.design, self.part.value, offs, offs, f, r,
                                        executor=self.executor, progress=self.progress)
        except ValueError as exc:
            self.pmap = None
            self.message = str(exc)
        self.refresh()

    def update(self) -> str:
        if self.pmap is None:
            for src in self.sources.values():
                plots.set_data(src, {c: [] for c in src.data})
            raise ValueError("map not computed yet: choose a part and press 'compute map'")
        self.view = v = map_view(self.design, self.pmap, self.quantity.value, self.which.value)
        for k, data in v.figure.items():
            plots.set_data(self.sources[k], data)
        self.mapper.low, self.mapper.high = v.low, v.high
        self.figure.title.text = v.label
        note = ("<p class='rb-note'>The controls changed since this map was computed: press "
                "'compute map' to update it.</p>") if self._stale() else ""
        p = self.pmap
        rows = [("part", p.part),
                ("as designed at", ", ".join(plots.fmt(c, 3) for c in p.base_position_m) + " m"),
                ("grid", f"{p.x_offsets_m.size} x {p.y_offsets_m.size}"),
                ("colour range", f"{plots.fmt(v.low, 3)} .. {plots.fmt(v.high, 3)}"),
                ("grey cells", "no equilibrium or no stabilising loop")]
        return kv_table(rows, "Placement map (design frame)") + note + p._repr_html_()
