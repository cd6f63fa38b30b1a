"""Two revisions side by side: pick a quantity and a case, see old against new.

The panel is built from a :class:`kit.compare.Comparison`. One dropdown picks the quantity
compared across every case (bars of the old and the new revision per case), another picks the
case whose thrusts and closed-loop poles are drawn over each other. The overlay figure builders
here (thrust bars, pole map, wheel trade curves, top view of both layouts, the quantity per case)
are also what the comparison record embeds. Nothing here computes physics: every number comes
from the two analyses that the comparison holds.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from kit import plots
from kit.compare import CASE_QUANTITIES, Comparison, case_key
from kit.panels.base import Panel, kv_table

#: Colours of the two revisions (Okabe & Ito 2008): old in sky blue, new in vermillion.
OLD_COLOUR = plots.OKABE_ITO["sky_blue"]
NEW_COLOUR = plots.OKABE_ITO["vermillion"]
REVS = ("old", "new")


def numeric_quantities(cmp: Comparison) -> list[str]:
    """The case quantities that are numbers in at least one case of either revision."""
    found = []
    for label, _unit, _read in CASE_QUANTITIES:
        for c in cmp.cases:
            row = next((r for r in c["rows"] if r["quantity"] == label), None)
            if row is None:
                continue
            if any(isinstance(v, int | float) and not isinstance(v, bool)
                   for v in (row["old"], row["new"])):
                found.append(label)
                break
    return found


def _cases(analysis: dict) -> dict[str, dict]:
    return {case_key(c): c for c in analysis.get("cases") or [] if isinstance(c, dict)}


def _finite(v) -> float:
    ok = isinstance(v, int | float) and not isinstance(v, bool) and math.isfinite(v)
    return float(v) if ok else float("nan")


# --- the quantity across every case ---------------------------------------------------------


def quantity_figure(case_names):
    """Old and new value of one quantity per case, as paired bars."""
    from bokeh.models import FactorRange

    factors = [(c, r) for c in case_names for r in REVS]
    p = plots.new_figure("Quantity per case, old against new", "case", "",
                         width=760, height=320, x_range=FactorRange(*factors))
    p.xaxis.major_label_orientation = 0.6
    p.xaxis.group_text_font_size = "9px"
    s = {"bars": plots._source(x=[], value=[], colour=[], rev=[], text=[])}
    p.vbar(x="x", top="value", width=0.8, source=s["bars"], fill_color="colour",
           line_color=None, legend_field="rev")
    plots._legend_style(p, "top_left")
    return p, s


def quantity_data(cmp: Comparison, quantity: str) -> dict[str, dict]:
    """Source data of :func:`quantity_figure` for one case quantity (nan where absent)."""
    x, value, colour, rev, text = [], [], [], [], []
    for c in cmp.cases:
        row = next((r for r in c["rows"] if r["quantity"] == quantity), None)
        for k, col in zip(REVS, (OLD_COLOUR, NEW_COLOUR), strict=True):
            v = None if row is None else row[k]
            x.append((c["case"], k))
            value.append(_finite(v))
            colour.append(col)
            rev.append(f"{k} revision")
            text.append(plots.fmt(v, 4))
    return {"bars": {"x": x, "value": plots.rounded(value), "colour": colour, "rev": rev,
                     "text": text}}


# --- thrust bars and poles of one case ------------------------------------------------------


def thrust_overlay_figure(rotor_names, title: str = "Thrust per rotor, old against new"):
    """Paired bars per rotor (old, new); each revision's limit as a black tick."""
    from bokeh.models import FactorRange

    factors = [(n, r) for n in rotor_names for r in REVS]
    p = plots.new_figure(title, "rotor", "thrust (N)", width=380, height=300,
                         x_range=FactorRange(*factors))
    p.xaxis.major_label_orientation = 0.0
    p.xaxis.group_text_font_size = "9px"
    s = {"bars": plots._source(x=[], thrust=[], colour=[], rev=[], limit=[])}
    p.vbar(x="x", top="thrust", width=0.8, source=s["bars"], fill_color="colour",
           line_color=None, legend_field="rev")
    p.scatter(x="x", y="limit", source=s["bars"], marker="dash", size=16, line_width=3,
              line_color=plots.COLOURS["limit"], legend_label="max thrust")
    p.y_range.start = 0
    plots._legend_style(p, "top_left")
    p.legend.orientation = "horizontal"
    p.add_layout(p.legend[0], "below")
    return p, s


def rotor_union(cmp: Comparison) -> list[str]:
    """Rotor names of both revisions: the new revision's order, then removed rotors."""
    names = [r.get("name") for r in cmp.new.analysis.get("rotors") or []]
    names += [r.get("name") for r in cmp.old.analysis.get("rotors") or [] if r.get("name")
              not in names]
    return [str(n) for n in names]


def _max_thrust(rev) -> dict[str, float]:
    out = {}
    for r in rev.analysis.get("rotors") or []:
        if isinstance(r.get("max_thrust_n"), int | float):
            out[r["name"]] = float(r["max_thrust_n"])
    if rev.design is not None:
        out.update({r.name: r.max_thrust_n for r in rev.design.rotors})
    return out


def thrust_overlay_data(cmp: Comparison, case: str) -> dict[str, dict]:
    """Source data of :func:`thrust_overlay_figure` for one case key (N; 0 for a failed rotor)."""
    x, thrust, colour, rev, limit = [], [], [], [], []
    sides = {"old": (cmp.old, _cases(cmp.old.analysis).get(case)),
             "new": (cmp.new, _cases(cmp.new.analysis).get(case))}
    limits = {k: _max_thrust(r) for k, (r, _c) in sides.items()}
    for name in rotor_union(cmp):
        for k, col in zip(REVS, (OLD_COLOUR, NEW_COLOUR), strict=True):
            c = sides[k][1]
            f = None
            if c is not None and c.get("equilibrium_found", True):
                f = (c.get("thrust_n") or {}).get(name)
            x.append((name, k))
            thrust.append(_finite(f))
            colour.append(col)
            rev.append(f"{k} revision")
            limit.append(_finite(limits[k].get(name)))
    return {"bars": {"x": x, "thrust": plots.rounded(thrust), "colour": colour, "rev": rev,
                     "limit": plots.rounded(limit)}}


def poles_overlay_figure(title: str = "Closed-loop poles (LQR), old against new"):
    """Closed-loop poles of one case in both revisions, in 1/s."""
    from bokeh.models import Span

    p = plots.new_figure(title, "real part (1/s)", "imaginary part (1/s)", width=320,
                         height=300)
    s = {"old": plots._source(re=[], im=[]), "new": plots._source(re=[], im=[])}
    p.add_layout(Span(location=0, dimension="height", line_color="#888888", line_width=1))
    p.add_layout(Span(location=0, dimension="width", line_color="#888888", line_width=1))
    p.scatter(x="re", y="im", source=s["old"], marker="circle", size=12, fill_color=None,
              line_color=OLD_COLOUR, line_width=2, legend_label="old revision")
    p.scatter(x="re", y="im", source=s["new"], marker="x", size=10, line_width=2,
              line_color=NEW_COLOUR, legend_label="new revision")
    plots._legend_style(p, "top_left")
    return p, s


def _poles(case: dict | None) -> dict[str, list]:
    lqr = (case or {}).get("lqr") or {}
    pts = [p for p in lqr.get("closed_loop_poles") or [] if isinstance(p, list) and len(p) == 2
           and all(isinstance(v, int | float) for v in p)]
    return {"re": plots.rounded([p[0] for p in pts]), "im": plots.rounded([p[1] for p in pts])}


def poles_overlay_data(cmp: Comparison, case: str) -> dict[str, dict]:
    """Source data of :func:`poles_overlay_figure` for one case key (empty when none)."""
    return {"old": _poles(_cases(cmp.old.analysis).get(case)),
            "new": _poles(_cases(cmp.new.analysis).get(case))}


# --- wheel trade curves ---------------------------------------------------------------------


def wheel_overlay_figure():
    """H2 ratio against wheel momentum for the no-failure case of both revisions."""
    from bokeh.models import Span

    p = plots.new_figure("Wheel trade: H2 ratio against wheel momentum, old against new",
                         "wheel momentum h (N m s)", "H2 ratio to h = 0 (1)", width=520,
                         height=300)
    s = {"old": plots._source(h=[], ratio=[]), "new": plots._source(h=[], ratio=[])}
    p.add_layout(Span(location=1.0, dimension="width", line_color="#888888",
                      line_dash="dotted"))
    p.line(x="h", y="ratio", source=s["old"], line_color=OLD_COLOUR, line_width=2,
           line_dash="dashed", legend_label="old revision")
    p.line(x="h", y="ratio", source=s["new"], line_color=NEW_COLOUR, line_width=2,
           legend_label="new revision")
    plots._legend_style(p, "top_left")
    return p, s


def wheel_overlay_data(cmp: Comparison) -> dict[str, dict]:
    """Source data of :func:`wheel_overlay_figure` (the nominal curve of each revision)."""
    out = {}
    for k, rev in (("old", cmp.old), ("new", cmp.new)):
        w = rev.analysis.get("wheel_study") or {}
        h, ratio = w.get("h_n_m_s") or [], w.get("h2_ratio") or []
        n = min(len(h), len(ratio))
        out[k] = {"h": plots.rounded([_finite(v) for v in h[:n]]),
                  "ratio": plots.rounded([_finite(v) for v in ratio[:n]])}
    return out


def has_wheel_curves(cmp: Comparison) -> bool:
    return any((r.analysis.get("wheel_study") or {}).get("h_n_m_s") for r in (cmp.old, cmp.new))


# --- top view of both layouts ---------------------------------------------------------------


def _layout_points(rev) -> dict[str, list]:
    """Rotor hubs, centre of mass and part centres in the design frame, as plot coordinates."""
    mp = rev.analysis.get("mass_properties") or {}
    com = mp.get("com_m") or [0.0, 0.0, 0.0]
    hubs = [(r.get("name"), [p + c for p, c in zip(r.get("position_m") or [0, 0, 0], com,
                                                    strict=True)])
            for r in rev.analysis.get("rotors") or []]
    parts = []
    if rev.design is not None:
        parts = [(p.name, list(p.position_m)) for p in rev.design.parts]
    return {"hub_sx": [-h[1][1] for h in hubs], "hub_sy": [h[1][0] for h in hubs],
            "hub_name": [str(h[0]) for h in hubs],
            "part_sx": [-p[1][1] for p in parts], "part_sy": [p[1][0] for p in parts],
            "part_name": [p[0] for p in parts], "com": [-com[1], com[0]]}


def layout_extent(cmp: Comparison) -> float:
    """Half-width of a square view holding both revisions' hubs, in m."""
    reach = 0.1
    for rev in (cmp.old, cmp.new):
        pts = _layout_points(rev)
        for v in pts["hub_sx"] + pts["hub_sy"] + pts["part_sx"] + pts["part_sy"]:
            reach = max(reach, abs(v))
    return 1.25 * reach


def layout_overlay_figure(extent_m: float):
    """Top view of both layouts in the design frame: forward up the page, right to the right."""
    from bokeh.models import LabelSet, Range1d

    e = float(extent_m)
    p = plots.new_figure("Both layouts seen from above (design frame)", "right, \u2212y (m)",
                         "forward, x (m)", width=560, height=420, match_aspect=True,
                         x_range=Range1d(-e, e), y_range=Range1d(-e, e))
    s = {k: plots._source(sx=[], sy=[], name=[]) for k in
         ("old_hubs", "new_hubs", "old_parts", "new_parts", "old_com", "new_com")}
    p.scatter(x="sx", y="sy", source=s["old_hubs"], marker="circle", size=22, fill_color=None,
              line_color=OLD_COLOUR, line_width=2, line_dash="dashed",
              legend_label="rotor hub, old")
    p.scatter(x="sx", y="sy", source=s["new_hubs"], marker="circle", size=16,
              fill_color=NEW_COLOUR, fill_alpha=0.35, line_color=NEW_COLOUR,
              legend_label="rotor hub, new")
    p.add_layout(LabelSet(x="sx", y="sy", text="name", source=s["new_hubs"], y_offset=12,
                          text_font_size="10px", text_align="center"))
    p.scatter(x="sx", y="sy", source=s["old_parts"], marker="square", size=9, fill_color=None,
              line_color=OLD_COLOUR, line_width=1.5, legend_label="part centre, old")
    p.scatter(x="sx", y="sy", source=s["new_parts"], marker="square", size=7,
              fill_color=NEW_COLOUR, line_color=NEW_COLOUR, legend_label="part centre, new")
    p.scatter(x="sx", y="sy", source=s["old_com"], marker="circle_cross", size=16,
              fill_color="white", line_color=OLD_COLOUR, line_width=2,
              legend_label="centre of mass, old")
    p.scatter(x="sx", y="sy", source=s["new_com"], marker="circle_cross", size=12,
              fill_color="white", line_color=NEW_COLOUR, line_width=2,
              legend_label="centre of mass, new")
    plots._legend_style(p, "bottom_left")
    p.add_layout(p.legend[0], "right")
    p.frame_width = p.frame_height = 360
    return p, s


def layout_overlay_data(cmp: Comparison) -> dict[str, dict]:
    """Source data of :func:`layout_overlay_figure`."""
    out = {}
    for k, rev in (("old", cmp.old), ("new", cmp.new)):
        pts = _layout_points(rev)
        out[f"{k}_hubs"] = {"sx": plots.rounded(pts["hub_sx"]),
                            "sy": plots.rounded(pts["hub_sy"]), "name": pts["hub_name"]}
        out[f"{k}_parts"] = {"sx": plots.rounded(pts["part_sx"]),
                             "sy": plots.rounded(pts["part_sy"]), "name": pts["part_name"]}
        out[f"{k}_com"] = {"sx": plots.rounded([pts["com"][0]]),
                           "sy": plots.rounded([pts["com"][1]]), "name": ["centre of mass"]}
    return out


# --- the panel ------------------------------------------------------------------------------


@dataclass(frozen=True)
class CompareView:
    """What the panel shows for one choice: rows of the chosen quantity and figure data."""

    quantity: str
    case: str
    rows: tuple
    figures: dict


def compare_view(cmp: Comparison, quantity: str, case: str) -> CompareView:
    """The chosen quantity across cases and the chosen case's overlays (pure).

    Parameters
    ----------
    cmp : Comparison
        Two revisions compared.
    quantity : str
        A label of :data:`kit.compare.CASE_QUANTITIES`.
    case : str
        A case key (failed rotors' names), as in ``cmp.cases``.
    """
    labels = [q[0] for q in CASE_QUANTITIES]
    if quantity not in labels:
        raise ValueError(f"quantity: {quantity!r} -> one of: {', '.join(labels)}")
    keys = [c["case"] for c in cmp.cases]
    if case not in keys:
        raise ValueError(f"case: {case!r} -> one of: {', '.join(keys)}")
    rows = []
    for c in cmp.cases:
        row = next((r for r in c["rows"] if r["quantity"] == quantity), None)
        rows.append((c["case"], None if row is None else row["old"],
                     None if row is None else row["new"],
                     None if row is None else row["change"]))
    figs = {"quantity": quantity_data(cmp, quantity),
            "thrust": thrust_overlay_data(cmp, case),
            "poles": poles_overlay_data(cmp, case)}
    return CompareView(quantity, case, tuple(rows), figs)


class ComparePanel(Panel):
    """Old against new: one quantity across every case, and one case's thrusts and poles."""

    def __init__(self, comparison: Comparison, quantity: str | None = None,
                 case: str | None = None) -> None:
        import ipywidgets as w
        from bokeh.layouts import column, row

        super().__init__()
        self.comparison = cmp = comparison
        self.title = (f"Compare revisions: {cmp.old.name} rev. {cmp.old.revision} -> "
                      f"{cmp.new.name} rev. {cmp.new.revision}")
        names = [c["case"] for c in cmp.cases]
        self.quantity_fig, s1 = quantity_figure(names)
        self.thrust_fig, s2 = thrust_overlay_figure(rotor_union(cmp))
        self.poles_fig, s3 = poles_overlay_figure()
        self.sources = {"quantity": s1, "thrust": s2, "poles": s3}
        self._fit_ranges()
        self.layout = plots.in_document(column(self.quantity_fig,
                                               row(self.thrust_fig, self.poles_fig)))
        options = numeric_quantities(cmp) or [CASE_QUANTITIES[1][0]]
        style = {"description_width": "initial"}
        self.quantity = w.Dropdown(options=options, value=quantity or options[0],
                                   description="quantity to compare", style=style)
        self.case = w.Dropdown(options=names, value=case or names[0],
                               description="case for thrusts and poles", style=style)
        self.controls = {"quantity": self.quantity, "case": self.case}
        self._observe(self.quantity, self.case)
        self._build_widget([w.HBox([self.quantity, self.case])])
        self.view: CompareView | None = None
        self.refresh()

    def _fit_ranges(self) -> None:
        """Ranges set in the kernel with the data (one patch, one repaint; see kit.plots)."""
        from bokeh.models import Range1d

        s1, s2, s3 = (self.sources[k] for k in ("quantity", "thrust", "poles"))
        zero = plots._source(y=[0.0])  # the bars' base stays in view
        self.quantity_fig.y_range = Range1d(0, 1)
        plots.fit_axes(self.quantity_fig, "y", [(s1["bars"], "value"), (zero, "y")])
        self.thrust_fig.y_range = Range1d(0, 1)
        plots.fit_axes(self.thrust_fig, "y", [(s2["bars"], "thrust"), (s2["bars"], "limit")],
                       start=0.0)
        self.poles_fig.x_range, self.poles_fig.y_range = Range1d(-1, 1), Range1d(-1, 1)
        plots.fit_axes(self.poles_fig, "x", [(s3[k], "re") for k in REVS] + [(zero, "y")],
                       pad=0.1)
        plots.fit_axes(self.poles_fig, "y", [(s3[k], "im") for k in REVS] + [(zero, "y")],
                       pad=0.1, symmetric=True)

    def control_values(self):
        return [("quantity to compare", self.quantity.value),
                ("case for thrusts and poles", self.case.value)]

    def update(self) -> str:
        self.view = v = compare_view(self.comparison, self.quantity.value, self.case.value)
        for name, data in v.figures.items():
            for k, dd in data.items():
                plots.set_data(self.sources[name][k], dd)
        unit = dict((q[0], q[1]) for q in CASE_QUANTITIES)[v.quantity]
        self.quantity_fig.yaxis.axis_label = f"{v.quantity}" + (f" ({unit})" if unit else "")
        self.thrust_fig.title.text = f"Thrust per rotor, {v.case}"
        rows = [(case, f"{plots.fmt(o, 4)} -> {plots.fmt(n, 4)}"
                 + (f" (change {plots.fmt(d, 3)})" if d is not None else ""))
                for case, o, n, d in v.rows]
        return kv_table(rows, f"{v.quantity}, old -> new")

