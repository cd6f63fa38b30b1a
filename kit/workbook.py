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

from kit.analysis.htmltable import checks_html, num, table
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


class Checks:
    """Design checks as a pass/fail table, plus the machine-readable bundle for records."""

    def __init__(self, checks) -> None:
        self.checks = list(checks)

    @property
    def passed(self) -> bool:
        return all(c.passed for c in self.checks)

    def _repr_mimebundle_(self, include=None, exclude=None):
        data = [c.to_dict() for c in self.checks]
        n_fail = sum(not c.passed for c in self.checks)
        text = f"{len(self.checks) - n_fail} of {len(self.checks)} checks passed"
        return {CHECKS_MIME: json.loads(json.dumps(data)),
                "text/html": f"<p><b>{text}</b></p>" + checks_html(self.checks),
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
                         None if c.risk is None else c.risk.probability_per_s))
        return table(["case", "equilibrium", "spin rate (rad/s)", "tilt (deg)",
                      "busiest rotor (fraction of max)", "controllable",
                      "PBH distance (relative)", "P(saturation) per s"], rows,
                     "Relaxed-hover cases")


class Cautions:
    """The cautions that close every workbook and record."""

    def _repr_markdown_(self) -> str:
        return "### Cautions\n\n" + "\n".join(f"- {c}" for c in CAUTIONS)

    def _repr_html_(self) -> str:
        return "<h3>Cautions</h3><ul>" + "".join(f"<li>{html.escape(c)}</li>"
                                                for c in CAUTIONS) + "</ul>"


def fmt(x, sig: int = 4) -> str:
    """A number with ``sig`` significant figures (for printed summaries)."""
    return num(x, sig) if not (isinstance(x, float) and math.isnan(x)) else "-"
