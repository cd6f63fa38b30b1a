"""Placement: move one part over a grid and map the failure risk or the controllability.

The map comes from :func:`kit.analysis.sweep.placement_sweep` (seconds to minutes, so it runs
when the "compute map" button is pressed, with a progress bar; the button is disabled while it
runs); choosing another quantity or case only recolours the stored map. The part first chosen is
the heaviest one (by mass). The map shows the failed hubs (a cross), the review threshold of
the quantity as a dashed contour where the design rules give one (:data:`THRESHOLDS`), and
the value of a cell clicked on the map.
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
    "probability of thrust saturation within 1 s (1)": "saturation_probability",
    "controllability distance (1)": "controllability_distance",
    "spin rate (rad/s)": "spin_rate_rad_s",
    "tilt of the spin axis (deg)": "tilt_deg",
    "H2 norm (rad per N m per sqrt(Hz))": "h2_norm",
    "busiest rotor, fraction of max thrust (1)": "max_thrust_fraction",
}
#: Threshold contour per mapped field: (label, function of the design's review rules -> value).
THRESHOLDS = {
    "saturation_probability": ("review limit max_saturation_probability",
                               lambda r: r.max_saturation_probability),
    "spin_rate_rad_s": ("review limit: max_spin_fraction_of_gyro x gyro_full_scale_rad_s",
                        lambda r: r.max_spin_fraction_of_gyro * r.gyro_full_scale_rad_s),
    "max_thrust_fraction": ("maximum thrust (fraction 1)", lambda r: 1.0),
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
    contour: object = None
    threshold: float | None = None
    threshold_label: str = ""


def map_view(design, pmap: PlacementMap, quantity: str, which: str = FAILURE_MAP) -> MapView:
    """Figure data of one quantity of a computed map (pure)."""
    cm = pmap.failure if which == FAILURE_MAP and pmap.failure is not None else pmap.hover
    values = np.asarray(getattr(cm, QUANTITIES[quantity]), float)
    xs = pmap.base_position_m[0] + pmap.x_offsets_m
    ys = pmap.base_position_m[1] + pmap.y_offsets_m
    hubs = np.array([r.position_m[:2] for r in design.rotors], float)
    data, lo, hi = plots.map_data(xs, ys, values, pmap.base_position_m[:2], hubs,
                                  design.rotor_names, failed=cm.failed)
    case = "no failure" if cm.failed == () else "failed: " + ", ".join(cm.failed)
    field = QUANTITIES[quantity]
    thr_label, thr = "", None
    if field in THRESHOLDS:
        thr_label, rule = THRESHOLDS[field]
        thr = float(rule(design.review))
    return MapView(data, lo, hi, f"{quantity}, {case}, moving {pmap.part}",
                   plots.contour_lines(xs, ys, values, thr), thr, thr_label)


def heaviest_part(design) -> str:
    """Name of the part of largest mass (the first one on a tie)."""
    return max(design.parts, key=lambda p: p.mass_kg).name


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
        self.figure, self.sources, self.mapper, self.colour_bar, self.contour = (
            plots.map_figure(ext, "Map not computed yet"))
        self.layout = plots.in_document(self.figure)
        self.notice = plots.add_notice(self.figure)
        self._cell = w.HTML()
        self.sources["cells"].selected.on_change("indices", self._on_tap)
        style = {"description_width": "initial"}
        self.part = w.Dropdown(options=parts, value=part or heaviest_part(d),
                               description="part", style=style)
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
                            w.HBox([self.quantity, self.which]), self._cell])
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
        b = self.compute_button
        b.disabled, b.description = True, "computing..."
        try:
            base_position(self.design, self.part.value)
            self.pmap = placement_sweep(self.design, self.part.value, offs, offs, f, r,
                                        executor=self.executor, progress=self.progress)
        except ValueError as exc:
            self.pmap = None
            self.message = str(exc)
        finally:
            b.disabled, b.description = False, "compute map"
        self.refresh()

    def _on_tap(self, _attr, _old, new) -> None:
        """The readout of the clicked cell (design frame position and value)."""
        self._cell.value = self.cell_html(new[0] if new else None)

    def cell_html(self, index) -> str:
        if index is None or self.view is None:
            return "<div class='rb-panel rb-note'>Click a cell of the map for its value.</div>"
        c = self.view.figure["cells"]
        if not 0 <= index < len(c["value"]):
            return ""
        x_b, y_b = c["sy"][index], -c["sx"][index]
        return (f"<div class='rb-panel'>clicked cell: part at x = {plots.fmt(x_b, 3, 'm')}, "
                f"y = {plots.fmt(y_b, 3, 'm')} (design frame): "
                f"{plots.html_escape(self.quantity.value)} = "
                f"{plots.html_escape(c['text'][index])}</div>")

    def update(self) -> str:
        if self.pmap is None:
            for src in self.sources.values():
                plots.set_data(src, {c: [] for c in src.data})
            self.contour.set_data(plots.contour_lines([], [], [], None))
            plots.set_notice(self.notice, "map not computed yet")
            raise ValueError("map not computed yet: choose a part and press 'compute map'")
        self.view = v = map_view(self.design, self.pmap, self.quantity.value, self.which.value)
        for k, data in v.figure.items():
            plots.set_data(self.sources[k], data)
        plots.set_notice(self.notice, "")
        self.contour.set_data(v.contour)
        drawn = v.threshold is not None and v.low < v.threshold < v.high
        plots.show_legend_item(self.figure, "threshold", drawn)
        plots.show_legend_item(self.figure, "failed rotor", bool(v.figure["failed"]["name"]))
        if (self.mapper.low, self.mapper.high) != (v.low, v.high):
            self.mapper.low, self.mapper.high = v.low, v.high
        if self.figure.title.text != v.label:
            self.figure.title.text = v.label
        if self.colour_bar.title != self.quantity.value:
            self.colour_bar.title = self.quantity.value
        self._cell.value = self.cell_html(
            (self.sources["cells"].selected.indices or [None])[0])
        note = ("<p class='rb-note'>The controls changed since this map was computed: press "
                "'compute map' to update it.</p>") if self._stale() else ""
        p = self.pmap
        rows = [("part", p.part),
                ("as designed at", ", ".join(plots.fmt(c, 3) for c in p.base_position_m) + " m"),
                ("grid", f"{p.x_offsets_m.size} x {p.y_offsets_m.size}"),
                ("colour range", f"{plots.fmt(v.low, 3)} .. {plots.fmt(v.high, 3)}"),
                ("dashed contour", f"{plots.fmt(v.threshold, 3)} ({v.threshold_label})"
                 if v.threshold is not None else "none for this quantity"),
                ("grey cells", "no equilibrium or no stabilising loop")]
        return kv_table(rows, "Placement map (design frame)") + note + p._repr_html_()
