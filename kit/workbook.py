"""Small display helpers for the workbook templates (a face: no physics here).

Each helper displays static content (HTML tables, LaTeX, the checks bundle) that renders the
same live in JupyterLab and in a calculation record.
"""

from __future__ import annotations

import html
import json
import math
import warnings
from dataclasses import dataclass
from pathlib import Path

from kit.analysis.htmltable import FAIL_COLOURS, PASS_COLOURS, num, table
from kit.design import Design, load
from kit.errors import DesignWarning
from kit.massprops import MassProperties, compute

#: MIME type of the design-checks bundle that the record template lifts to the top.
CHECKS_MIME = "application/vnd.rotorbook.checks+json"

CAUTIONS = (
    "This analysis is not a flight clearance: it rests on stated models (rigid body, rotor "
    "speeds following their commands at once, a simple drag-torque law) that a real vehicle "
    "departs from.",
    "Flight with failed rotors can hurt people. Flight-test failure cases tethered or in a net, "
    "with a kill switch, away from people.",
    "Follow your local aviation rules and licensed practice.",
)


@dataclass(frozen=True, repr=False)
class Opened:
    """A design opened in a workbook: the design, its mass properties and warnings."""

    path: Path
    design: Design
    mp: MassProperties
    warnings: tuple[str, ...]

    def __repr__(self) -> str:
        return f"<design {self.design.name!r} revision {self.design.revision!r}>"

    def _repr_html_(self) -> str:
        d, mp = self.design, self.mp
        rows = [("design", d.name), ("revision", d.revision), ("file", self.path.name),
                ("SHA-256", d.sha256), ("mass (kg)", mp.mass_kg),
                ("centre of mass, design frame (m)", ", ".join(num(v) for v in mp.com_m)),
                ("principal moments (kg m^2)",
                 ", ".join(num(v) for v in mp.principal_moments_kg_m2)),
                ("rotors", len(d.rotors)), ("wheel", "yes" if d.wheel else "no")]
        out = table(["item", "value"], rows, "Design")
        inertia = [[axis] + [float(v) for v in mp.inertia_kg_m2[i]]
                   for i, axis in enumerate("xyz")]
        out += table(["", "x", "y", "z"], inertia, "Inertia about the CoM (kg m^2)")
        if self.warnings:
            out += "<ul>" + "".join(f"<li>warning: {html.escape(w)}</li>"
                                    for w in self.warnings) + "</ul>"
        return out


def open_design(path) -> Opened:
    """Load a design and its mass properties; warnings are kept for display, not raised."""
    p = Path(path)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", DesignWarning)
        d = load(p)
    mp = compute(d)
    return Opened(p, d, mp, tuple(d.warnings) + tuple(mp.warnings))


class Equations:
    """Derived equations of a structure, one display formula per equation (Markdown + LaTeX).

    The element-by-element entries of A and B (long expansions, checked by the derivation
    tests and snapshots) are left out; the reduced model's matrices are shown numerically at
    each equilibrium instead.
    """

    #: Labels left out of the display (prefixes).
    SKIP = ("A[", "B[", "reduced p_dot", "reduced q_dot")

    def __init__(self, structure) -> None:
        from kit.symbolic.display import equations_text

        self.structure = structure
        self.notes: list[str] = []
        self.rows: list[tuple[str, str]] = []
        label = ""
        for line in equations_text(structure, latex=True).splitlines():
            if line.startswith("% structure"):
                continue
            if line.startswith("%"):
                label = line.lstrip("% ").strip()
            elif line.strip():
                if not label:
                    self.notes.append(line.strip())
                elif not label.startswith(self.SKIP):
                    self.rows.append((label, line.strip()))
                label = ""

    def __repr__(self) -> str:
        return f"<equations of structure {self.structure.key}>"

    def _repr_markdown_(self) -> str:
        parts = [f"Structure `{self.structure.key}`: {self.structure.n_rotors} rotors, "
                 f"{'a wheel' if self.structure.wheel else 'no wheel'}, "
                 f"{self.structure.drag_law} drag torque.", ""]
        for note in self.notes:
            parts += [f"$$ {note} $$", ""]
        for label, tex in self.rows:
            parts += ["", f"*{label}*", "", f"$$ {tex} $$"]
        parts += ["", "The reduced model's A and B are these right-hand sides differentiated "
                  "symbolically and evaluated at each equilibrium (tables below)."]
        return "\n".join(parts)


# Status colours: kit.analysis.htmltable.PASS_COLOURS / FAIL_COLOURS (blue and vermillion).
_PASS_STYLE = f"color:{PASS_COLOURS[0]};background:{PASS_COLOURS[1]}"
_FAIL_STYLE = f"color:{FAIL_COLOURS[0]};background:{FAIL_COLOURS[1]};font-weight:bold"
_CELL = "padding:.2rem .45rem;border:1px solid #c9c7bf;text-align:right;white-space:nowrap"
_HEAD = "padding:.2rem .45rem;border:1px solid #c9c7bf;text-align:left;vertical-align:bottom"


def check_rows(checks) -> list[dict]:
    """Design checks (``Check`` objects or their ``to_dict()``) as dicts with their ``margin``
    (see :func:`kit.analysis.checks.margin`), in the order given; odd entries are skipped."""
    from kit.analysis.checks import Check, margin

    rows = []
    for c in checks:
        d = c.to_dict() if hasattr(c, "to_dict") else c
        if not isinstance(d, dict):
            continue
        try:
            chk = Check(str(d.get("name", "")), d.get("value"), d.get("limit"),
                        d.get("passed") is True, str(d.get("unit") or ""),
                        str(d.get("case") or ""), str(d.get("relation") or ""))
            m = margin(chk)
        except (TypeError, ValueError):
            continue
        rows.append({"name": chk.name, "case": chk.case or "design", "value": chk.value,
                     "limit": chk.limit, "relation": chk.relation, "unit": chk.unit,
                     "passed": chk.passed, "margin": m, "note": str(d.get("note") or "")})
    return rows


def _value_text(row: dict) -> str:
    v = row["value"]
    if isinstance(v, bool) or row["relation"] == "==":
        return "yes" if row["passed"] else "no"
    return num(v)


def _limit_text(row: dict) -> str:
    if row["relation"] == "==":
        return "must hold"
    unit = f" {row['unit']}" if row["unit"] else ""
    return f"{row['relation']} {num(row['limit'])}{unit}".strip()


def verdict_html(rows: list[dict]) -> str:
    """The verdict line: PASS or FAIL, how many checks, the governing case, the failed ones."""
    e = html.escape
    if not rows:
        return ('<p class="rb-verdict rb-verdict-none" style="padding:.4rem .7rem;'
                'border:2px solid #5a5a55"><b>No design checks</b> in this workbook.</p>')
    failed = [r for r in rows if not r["passed"]]
    cases = _case_order(rows)
    gov = cases[0] if cases else ""
    if failed:
        style = f"{_FAIL_STYLE};border:2px solid {FAIL_COLOURS[0]}"
        text = (f"<b>&#10007; Verdict: FAIL</b> &#8212; {len(failed)} of {len(rows)} design "
                f"check{'s' if len(rows) != 1 else ''} not met; governing case: "
                f"<b>{e(gov)}</b>.")
        items = "".join(f"<li>{e(r['case'])}: {e(r['name'])} = {e(_value_text(r))} "
                        f"(limit {e(_limit_text(r))})"
                        + (f": {e(r['note'])}" if r.get("note") else "") + "</li>"
                        for r in failed)
        text += f'<ul style="margin:.3rem 0 0">{items}</ul>'
    else:
        style = f"{_PASS_STYLE};border:2px solid {PASS_COLOURS[0]}"
        text = (f"<b>&#10003; Verdict: PASS</b> &#8212; all {len(rows)} design check"
                f"{'s' if len(rows) != 1 else ''} met; governing case (smallest margin): "
                f"<b>{e(gov)}</b>.")
    return f'<div class="rb-verdict" style="padding:.5rem .8rem;{style}">{text}</div>'


def _case_order(rows: list[dict]) -> list[str]:
    """Cases, worst first: most failed checks, then the smallest margin to a limit."""
    stats: dict[str, list] = {}
    for i, r in enumerate(rows):
        s = stats.setdefault(r["case"], [0, math.inf, i])
        s[0] += not r["passed"]
        s[1] = min(s[1], r["margin"])
    return sorted(stats, key=lambda c: (-stats[c][0], stats[c][1], stats[c][2]))


def matrix_html(rows: list[dict]) -> str:
    """Cases x checks: rows are cases, worst first, the governing case marked; columns are the
    checks, worst first; cells the value, coloured and marked by pass/fail."""
    if not rows:
        return ""
    e = html.escape
    cases = _case_order(rows)
    worst: dict[str, float] = {}
    order: dict[str, int] = {}
    for i, r in enumerate(rows):
        worst[r["name"]] = min(worst.get(r["name"], math.inf), r["margin"])
        order.setdefault(r["name"], i)
    names = sorted(worst, key=lambda n: (worst[n], order[n]))
    cell = {(r["case"], r["name"]): r for r in rows}
    limits = {}
    for n in names:
        texts = {_limit_text(r) for r in rows if r["name"] == n}
        limits[n] = texts.pop() if len(texts) == 1 else "limit per case"
    head = "".join(f'<th style="{_HEAD}">{e(n)}<br><span style="font-weight:normal">'
                   f"{e(limits[n])}</span></th>" for n in names)
    body = []
    for k, case in enumerate(cases):
        mark = ('<br><span class="rb-governing" style="border:1px solid #1d1d1b;padding:0 .25rem;'
                'font-size:.8em;white-space:nowrap">&#9654; governing</span>') if k == 0 else ""
        tds = []
        for n in names:
            r = cell.get((case, n))
            if r is None:
                tds.append(f'<td style="{_CELL};color:#5a5a55" title="does not apply">'
                           "&#183;</td>")
                continue
            ok = r["passed"]
            tds.append(f'<td class="{"rb-pass" if ok else "rb-fail"}" style="{_CELL};'
                       f'{_PASS_STYLE if ok else _FAIL_STYLE}">'
                       f"{'&#10003;' if ok else '&#10007;'} {e(_value_text(r))}</td>")
        weight = "bold" if k == 0 else "normal"
        body.append(f'<tr><th scope="row" style="{_HEAD};font-weight:{weight}">{e(case)}{mark}'
                    f"</th>{''.join(tds)}</tr>")
    legend = ("Rows: cases, worst first (most checks not met, then the smallest margin to a "
              "limit); columns: checks, worst first. &#10003; met, &#10007; not met, &#183; does "
              "not apply.")
    return (f'<div class="rb-matrix-wrap" style="overflow-x:auto">'
            f'<table class="rb-matrix" style="border-collapse:collapse;font-size:.85rem;'
            f'margin:.5rem 0">'
            f'<caption style="caption-side:bottom;text-align:left;font-size:.8rem;'
            f'color:#5a5a55">{legend}</caption>'
            f'<thead><tr><th style="{_HEAD}">case</th>{head}</tr></thead>'
            f"<tbody>{''.join(body)}</tbody></table></div>")


def checks_table_html(rows: list[dict], open_: bool = False) -> str:
    """Every check once, in a collapsible block: case, check, value, limit, result."""
    if not rows:
        return ""
    e = html.escape
    trs = "".join(
        f"<tr><td>{e(r['case'])}</td><td>{e(r['name'])}</td>"
        f'<td style="text-align:right">{e(_value_text(r))}</td><td>{e(_limit_text(r))}</td>'
        f'<td class="{"rb-pass" if r["passed"] else "rb-fail"}" style="'
        f'{_PASS_STYLE if r["passed"] else _FAIL_STYLE};padding:0 .4rem">'
        f"{'&#10003; PASS' if r['passed'] else '&#10007; FAIL'}</td></tr>"
        for r in rows)
    return (f'<details class="rb-all-checks"{" open" if open_ else ""}><summary>All '
            f"{len(rows)} design checks, one row each</summary>"
            '<table class="rb-table rb-checks"><thead><tr><th>case</th><th>check</th>'
            "<th>value</th><th>limit</th><th>result</th></tr></thead>"
            f"<tbody>{trs}</tbody></table></details>")


class Checks:
    """Design checks: the verdict first, a cases x checks matrix (worst case first, the
    governing case marked), then every check once in a collapsible table. The bundle also
    carries the checks as JSON for records."""

    def __init__(self, checks) -> None:
        self.checks = list(checks)

    @property
    def passed(self) -> bool:
        return all(c.passed for c in self.checks)

    def _repr_mimebundle_(self, include=None, exclude=None):
        data = [c.to_dict() for c in self.checks]
        n_fail = sum(not c.passed for c in self.checks)
        if not self.checks:
            text = "no design checks"
        elif n_fail:
            text = f"FAIL: {n_fail} of {len(self.checks)} design checks not met"
        else:
            text = f"PASS: all {len(self.checks)} design checks met"
        rows = check_rows(self.checks)
        page = verdict_html(rows) + matrix_html(rows) + checks_table_html(rows)
        return {CHECKS_MIME: json.loads(json.dumps(data)),
                "text/html": f'<div class="rb-checks-block">{page}</div>',
                "text/plain": text}


class CasesTable:
    """One row per equilibrium case: spin, tilt, busiest rotor, control, risk."""

    def __init__(self, cases) -> None:
        self.cases = list(cases)

    def _repr_html_(self) -> str:
        rows = []
        for c in self.cases:
            eq = c.eq
            if not eq.found:
                rows.append((eq.label, "no: " + eq.reason, None, None, None, None, None, None))
                continue
            rows.append((eq.label, "yes", eq.spin_rate_rad_s, eq.tilt_deg,
                         float(eq.thrust_fraction[eq.working].max()), c.ctl.controllable,
                         c.ctl.controllability_distance,
                         None if c.risk is None else c.risk.crossing_rate_per_s))
        return table(["case", "equilibrium", "spin rate about n (rad/s)", "tilt (deg)",
                      "busiest rotor (fraction of max)", "controllable",
                      "controllability distance (relative)", "thrust-saturation rate (1/s)"],
                     rows, "Relaxed-hover cases")


class GyroscopicTorque:
    """The wheel's gyroscopic torque beside the vehicle's roll and pitch torque authority.

    The torque is ``h * omega`` (wheel momentum times the largest body rate of the study); the
    authority is the smaller of the roll and pitch torque margins in hover (both signs).
    """

    def __init__(self, study, hover) -> None:
        self.torque_n_m = float(study.gyro_torque_n_m)
        self.authority_n_m = float(min(hover.torque_margin_n_m[0], hover.torque_margin_n_m[1]))

    @property
    def ratio(self) -> float:
        return self.torque_n_m / self.authority_n_m if self.authority_n_m > 0 else math.inf

    def __repr__(self) -> str:
        return (f"<gyroscopic torque {num(self.torque_n_m)} N m against roll/pitch authority "
                f"{num(self.authority_n_m)} N m>")

    def _repr_html_(self) -> str:
        r = self.ratio
        verdict = ("within the authority" if r <= 1 else
                   "exceeds the authority: the rotors cannot hold it")
        return table(["figure", "value"], [
            ("gyroscopic torque of the wheel at the largest body rate (N m)", self.torque_n_m),
            ("roll/pitch torque authority in hover, smaller axis (N m)", self.authority_n_m),
            ("ratio (gyroscopic torque / authority)", r),
            ("result", verdict)], "Gyroscopic torque against the torque authority")


class Cautions:
    """The cautions that close every workbook and record."""

    def _repr_markdown_(self) -> str:
        return "### Cautions\n\n" + "\n".join(f"- {c}" for c in CAUTIONS)

    def _repr_html_(self) -> str:
        # data-rb-cautions: a record shows the cautions once, at its end, and drops this output
        return '<div data-rb-cautions="1"><h3>Cautions</h3><ul>' + "".join(
            f"<li>{html.escape(c)}</li>" for c in CAUTIONS) + "</ul></div>"


def fmt(x, sig: int = 4) -> str:
    """A number with ``sig`` significant figures (for printed summaries)."""
    return num(x, sig) if not (isinstance(x, float) and math.isnan(x)) else "-"
