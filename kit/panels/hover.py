"""Hover: thrust per rotor against its limit, torque authority, T/W and hover fraction.

The one control adds a payload (a point mass at the centre of mass) to the design and runs
:func:`kit.analysis.hover.analyse_hover` again: how much the vehicle can carry before a
review threshold is crossed.
"""

from __future__ import annotations

from dataclasses import dataclass, replace

from kit import plots
from kit.analysis import checks as checks_mod
from kit.analysis.hover import Hover, analyse_hover
from kit.analysis.htmltable import checks_html
from kit.analysis.vehicle import Vehicle
from kit.design import Part
from kit.panels.base import Panel, as_vehicle, kv_table

PAYLOAD_PART = "payload added in the hover panel"


@dataclass(frozen=True)
class HoverView:
    hover: Hover
    checks: tuple
    mass_kg: float
    figures: dict


def with_payload(veh: Vehicle, payload_kg: float) -> Vehicle:
    """The vehicle with a point mass ``payload_kg`` (kg) at its centre of mass."""
    if payload_kg <= 0:
        return veh
    d = veh.design
    part = Part(name=PAYLOAD_PART, mass_kg=float(payload_kg), shape="point",
                position_m=tuple(float(c) for c in veh.mp.com_m))
    return Vehicle.from_design(replace(d, parts=d.parts + (part,)))


def hover_view(veh: Vehicle, payload_kg: float = 0.0) -> HoverView:
    """Hover figures for the vehicle plus a payload at its CoM (pure)."""
    v = with_payload(veh, payload_kg)
    h = analyse_hover(v)
    review = v.design.review
    figs = {
        "thrust": plots.thrust_data(h.names, h.thrust_n, h.max_thrust_n, spin=v.spin,
                                    threshold_fraction=review.max_hover_thrust_fraction),
        "torque": plots.torque_data(h.torque_max_n_m, h.torque_min_n_m, h.torque_margin_n_m),
    }
    return HoverView(h, tuple(checks_mod.hover_checks(h, review)), float(v.mp.mass_kg), figs)


class HoverPanel(Panel):
    """Hover thrusts against limits, torque authority, T/W and hover fraction, with payload."""

    def __init__(self, design, max_payload_kg: float | None = None) -> None:
        import ipywidgets as w
        from bokeh.layouts import row

        super().__init__()
        self.vehicle = as_vehicle(design)
        d = self.vehicle.design
        self.title = f"Hover: {d.name}"
        self.thrust_fig, s1 = plots.thrust_figure(d.rotor_names, "Hover thrust per rotor")
        self.torque_fig, s2 = plots.torque_figure()
        self.sources = {"thrust": s1, "torque": s2}
        self.layout = plots.in_document(row(self.thrust_fig, self.torque_fig))
        top = max_payload_kg if max_payload_kg is not None else round(self.vehicle.mp.mass_kg, 2)
        measured = d.body is not None and d.body.mass_kg is not None
        self.payload = w.FloatSlider(value=0.0, min=0.0, max=float(top), step=float(top) / 50,
                                     description="payload (kg)", continuous_update=False,
                                     readout_format=".3g", disabled=measured,
                                     style={"description_width": "initial"})
        self.controls = {"payload": self.payload}
        self._observe(self.payload)
        self._build_widget([self.payload])
        self.view: HoverView | None = None
        self.refresh()

    def control_values(self):
        return [("payload at the CoM", plots.fmt(self.payload.value, 3, "kg"))]

    def update(self) -> str:
        self.view = v = hover_view(self.vehicle, self.payload.value)
        for name, data in v.figures.items():
            for k, dd in data.items():
                plots.set_data(self.sources[name][k], dd)
        h = v.hover
        m = h.torque_margin_n_m
        figures = kv_table([
            ("mass", plots.fmt(v.mass_kg, 4, "kg")),
            ("thrust-to-weight", plots.fmt(h.thrust_to_weight, 3)),
            ("hover thrust fraction (busiest rotor)", plots.fmt(h.hover_thrust_fraction, 3)),
            ("torque margin roll, pitch, yaw", ", ".join(plots.fmt(x, 3) for x in m) + " N m"),
            ("induced hover power (momentum theory)", plots.fmt(h.induced_power_w, 3, "W")),
            ("allocation rank", str(h.allocation_rank)),
        ], "Hover figures")
        note = "" if h.feasible else ("<p class='rb-note'>The weight cannot be held within the "
                                      "thrust limits: the thrusts shown are the closest.</p>")
        return figures + checks_html(v.checks) + note
