"""Design overview: the layout seen from above and the parts with their share of the inertia."""

from __future__ import annotations

import html
from dataclasses import dataclass

import numpy as np

from kit import plots
from kit.panels.base import Panel, as_vehicle, kv_table

#: Orders of the parts table: label -> column index of the sort key (None: file order).
SORT_KEYS = {"file order": None, "mass": 0, "J_xx": 1, "J_yy": 2, "J_zz": 3}


@dataclass(frozen=True)
class OverviewView:
    """What the overview shows.

    Attributes
    ----------
    figure : dict
        Source data of :func:`kit.plots.top_view_figure`.
    parts : list of (name, mass_kg, (J_xx, J_yy, J_zz) about the CoM in kg m^2)
        From :meth:`kit.massprops.MassProperties.contribution_kg_m2`, in the chosen order.
    mass_kg, com_m, principal_moments_kg_m2 : totals from the mass properties.
    """

    figure: dict
    parts: list
    mass_kg: float
    com_m: tuple
    inertia_diag_kg_m2: tuple
    principal_moments_kg_m2: tuple
    warnings: tuple


def overview_view(veh, sort_by: str = "file order") -> OverviewView:
    """The overview of a vehicle (pure: mass properties in, figure data and table out)."""
    mp = veh.mp
    parts = [(n, float(m), tuple(float(v) for v in J)) for n, m, J in mp.contribution_kg_m2()]
    key = SORT_KEYS[sort_by]
    if key is not None:
        parts.sort(key=lambda p: -(p[1] if key == 0 else p[2][key - 1]))
    return OverviewView(
        figure=plots.top_view_data(veh.design, mp), parts=parts, mass_kg=float(mp.mass_kg),
        com_m=tuple(float(v) for v in mp.com_m),
        inertia_diag_kg_m2=tuple(float(v) for v in np.diag(mp.inertia_kg_m2)),
        principal_moments_kg_m2=tuple(float(v) for v in mp.principal_moments_kg_m2),
        warnings=tuple(mp.warnings) + tuple(veh.design.warnings))


def parts_table_html(view: OverviewView) -> str:
    J = np.array(view.inertia_diag_kg_m2)
    head = ("<tr><th>part</th><th>mass (kg)</th><th>share of mass</th><th>J_xx (kg m\u00b2)</th>"
            "<th>J_yy (kg m\u00b2)</th><th>J_zz (kg m\u00b2)</th><th>share of J_xx, J_yy, J_zz"
            "</th></tr>")
    rows = []
    for name, m, c in view.parts:
        share = ", ".join(f"{100 * ci / Ji:.3g} %" if Ji > 0 else "\u2013"
                          for ci, Ji in zip(c, J, strict=True))
        rows.append(f"<tr><td>{html.escape(name)}</td><td class='rb-num'>{plots.fmt(m, 4)}</td>"
                    f"<td class='rb-num'>{100 * m / view.mass_kg:.3g} %</td>"
                    + "".join(f"<td class='rb-num'>{plots.fmt(ci, 4)}</td>" for ci in c)
                    + f"<td class='rb-num'>{share}</td></tr>")
    note = ("<p class='rb-note'>Contributions are each part's inertia about the vehicle's centre "
            "of mass (parallel-axis theorem); rotor spin inertia is in the totals only.</p>")
    return (f"<table class='rb-kv'><caption>Parts</caption><thead>{head}</thead>"
            f"<tbody>{''.join(rows)}</tbody></table>{note}")


class OverviewPanel(Panel):
    """Top view of the layout (hubs, spin arrows, CoM, principal axes, wheel) and the parts."""

    title = "Design overview"

    def __init__(self, design) -> None:
        import ipywidgets as w

        super().__init__()
        self.vehicle = as_vehicle(design)
        self.title = f"Design overview: {self.vehicle.design.name}"
        self.figure, self.sources = plots.top_view_figure(
            plots.extent_of(self.vehicle.mp, self.vehicle.design),
            wheel=self.vehicle.design.wheel is not None)
        self.layout = self.figure
        self.sort_by = w.Dropdown(options=list(SORT_KEYS), value="file order",
                                  description="parts by")
        self.controls = {"sort_by": self.sort_by}
        self._observe(self.sort_by)
        self._build_widget([self.sort_by])
        self.view: OverviewView | None = None
        self.refresh()

    def control_values(self):
        return [("parts by", self.sort_by.value)]

    def update(self) -> str:
        self.view = v = overview_view(self.vehicle, self.sort_by.value)
        for k, data in v.figure.items():
            plots.set_data(self.sources[k], data)
        totals = kv_table([
            ("mass", plots.fmt(v.mass_kg, 4, "kg")),
            ("centre of mass (design frame)", ", ".join(plots.fmt(c, 3) for c in v.com_m) + " m"),
            ("J_xx, J_yy, J_zz about CoM", ", ".join(plots.fmt(c, 4) for c in
                                                     v.inertia_diag_kg_m2) + " kg m\u00b2"),
            ("principal moments", ", ".join(plots.fmt(c, 4) for c in v.principal_moments_kg_m2)
             + " kg m\u00b2"),
        ], "Mass properties")
        warn = "".join(f"<p class='rb-note'>{html.escape(t)}</p>" for t in v.warnings)
        return totals + parts_table_html(v) + warn
