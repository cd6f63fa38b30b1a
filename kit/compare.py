"""Two revisions of a design side by side: what changed in the inputs, the results and the verdict.

:func:`compare` takes two :class:`Revision` objects, each a design (optional) and the JSON of its
analysis (``analyze(design).to_dict()``, schema ``rotorbook.analysis/1``), and returns a
:class:`Comparison`. Nothing here computes physics: every number is read from the two analyses
(or, for the inputs, from the two validated designs) and only subtracted.

What is matched, and how:

- inputs field by field, parts and rotors by their name and failure cases by their failed
  rotors' names, never by position in the file (reordering the file changes nothing);
- mass properties (mass, centre of mass in the design frame, inertia about the centre of mass,
  principal moments) with absolute and relative change;
- cases by the failed rotors' names (and the fixed thrust ratios, when a case has them); cases
  found in one revision only are listed as appeared or disappeared;
- design checks by (check name, case), so checks added to the kit later are compared too; a check
  that fails in the new revision and did not fail in the old one is a regression, listed first;
- a check that passes in both revisions is *eroding* when its margin to the limit (value minus
  limit for ``>=``, limit minus value for ``<=``) shrank by more than the stated fraction.

Keys that later versions of the analysis add (an operating-point label, static control
authority, closed-loop damping, a verdict) are used when present and skipped when absent.
Two numbers count as equal when they differ by less than :data:`SAME_REL` relative or
:data:`SAME_ABS` absolute (floating-point noise from summing in another order).
"""

from __future__ import annotations

import hashlib
import html
import json
import math
import warnings
from dataclasses import dataclass, field, fields
from pathlib import Path
from typing import Any

from kit.analysis.htmltable import num
from kit.design import Design
from kit.errors import DesignError, DesignWarning

SCHEMA = "rotorbook.comparison/1"
#: Default erosion threshold: a passing check whose margin shrank by more than this fraction of
#: its old margin is listed as eroding (common practice, no source).
DEFAULT_EROSION = 0.25
#: Relative and absolute tolerance under which two numbers count as the same.
SAME_REL = 1e-9
SAME_ABS = 1e-12

EXIT_OK = 0
EXIT_BAD_INPUT = 2
EXIT_WORSE = 3

#: Unit of a field from the end of its name (longest first), as the design file names them.
_UNIT_SUFFIXES = (
    ("_n2_m2_s", "N^2 m^2 s"), ("_kg_m2", "kg m^2"), ("_kg_m3", "kg/m^3"), ("_n_s2", "N s^2"),
    ("_n_m_s", "N m s"), ("_rad_s", "rad/s"), ("_m_s2", "m/s^2"), ("_n_m", "N m"),
    ("_per_s", "1/s"), ("_1_s", "1/s"), ("_deg", "deg"), ("_kg", "kg"), ("_m", "m"), ("_n", "N"),
    ("_s", "s"), ("_w", "W"), ("_j", "J"),
)
#: Review thresholds whose unit is not in their name.
_UNIT_OVERRIDES = {"max_saturation_probability": "1/s", "max_saturation_rate_per_s": "1/s"}


def unit_of(name: str) -> str:
    """The unit spelled by the end of a field name (``mass_kg`` -> ``kg``), "" when none."""
    if name in _UNIT_OVERRIDES:
        return _UNIT_OVERRIDES[name]
    for suffix, unit in _UNIT_SUFFIXES:
        if name.endswith(suffix):
            return unit
    return ""


# -- the two inputs -------------------------------------------------------------------------------


@dataclass(frozen=True, repr=False)
class Revision:
    """One side of a comparison: where it came from, its design (when a design file was given)
    and the JSON of its analysis."""

    source: str
    file_sha256: str
    kind: str  # "design" or "analysis"
    analysis: dict
    design: Design | None = None

    def __repr__(self) -> str:
        return (f"<Revision {self.name!r} rev {self.revision!r} from {self.kind} "
                f"{Path(self.source).name!r}>")

    @property
    def name(self) -> str:
        return str((self.analysis.get("design") or {}).get("name", ""))

    @property
    def revision(self) -> str:
        return str((self.analysis.get("design") or {}).get("revision", ""))

    @property
    def design_sha256(self) -> str:
        return str((self.analysis.get("design") or {}).get("sha256", ""))

    @property
    def checks(self) -> list[dict]:
        return [c for c in self.analysis.get("checks") or [] if isinstance(c, dict)]

    @property
    def verdict(self) -> str:
        """PASS or FAIL: the analysis's own verdict when it carries one, else all checks."""
        v = self.analysis.get("verdict")
        if isinstance(v, dict):
            v = v.get("verdict", v.get("status", v.get("passed")))
        if isinstance(v, bool):
            return "PASS" if v else "FAIL"
        if isinstance(v, str) and v.strip():
            return "PASS" if v.strip().lower() in ("pass", "passed", "ok") else "FAIL"
        return "PASS" if all(c.get("passed") is True for c in self.checks) else "FAIL"

    def describe(self) -> dict:
        return {"file": self.source, "file_sha256": self.file_sha256, "kind": self.kind,
                "name": self.name, "revision": self.revision,
                "design_sha256": self.design_sha256, "verdict": self.verdict}


def checks_of(rev: Revision) -> list:
    """The design checks of a revision's analysis as :class:`kit.analysis.checks.Check`."""
    from dataclasses import fields as dc_fields

    from kit.analysis.checks import Check

    names = {f.name for f in dc_fields(Check)}
    return [Check(**{k: v for k, v in c.items() if k in names}) for c in rev.checks
            if {"name", "value", "limit", "passed"} <= c.keys()]


def revision_from_design(design: Design, analysis: dict | None = None, source: str = "",
                         file_sha256: str = "") -> Revision:
    """A Revision of a validated design; its analysis is run here unless it is given.

    Parameters
    ----------
    design : Design
        The validated design.
    analysis : dict or None
        ``analyze(design).to_dict()`` when the caller has it already.
    source : str
        File name shown in the comparison (default: the design's source).
    file_sha256 : str
        SHA-256 of the file (default: the design's).
    """
    if analysis is None:
        from kit.analysis.report import analyze

        analysis = analyze(design).to_dict()
    return Revision(source=source or design.source, file_sha256=file_sha256 or design.sha256,
                    kind="design", analysis=analysis, design=design)


def _json_num(v) -> bool:
    """A finite JSON number (an integer too large for a float is not one)."""
    if isinstance(v, bool) or not isinstance(v, int | float):
        return False
    try:
        return math.isfinite(float(v))
    except OverflowError:
        return False


def _shown(v) -> str:
    text = json.dumps(v, allow_nan=True, default=str)
    return text if len(text) <= 60 else text[:57] + "..."


def analysis_problems(data: dict) -> list[str]:
    """What in an ``analyze --json`` document the comparison cannot read, one line each
    (``field: value -> what is allowed``); empty for the kit's own output."""
    out: list[str] = []

    def bad(where: str, value, allowed: str) -> None:
        out.append(f"{where}: {_shown(value)} -> {allowed} (as `rotorbook analyze --json` "
                   "writes it)")

    def num_or_none(where: str, v) -> None:
        if v is not None and not _json_num(v):
            bad(where, v, "a finite number or null")

    def vector(where: str, v, n: int) -> None:
        if v is None:
            return
        if not (isinstance(v, list) and len(v) == n):
            bad(where, v, f"a list of {n} numbers")
            return
        for i, x in enumerate(v):
            num_or_none(f"{where}[{i}]", x)

    design = data.get("design")
    if not isinstance(design, dict):
        bad("design", design, "a table with name, revision and sha256")
    else:
        for k in ("name", "revision", "sha256"):
            if not isinstance(design.get(k, ""), str):
                bad(f"design.{k}", design.get(k), "text")
    mp = data.get("mass_properties")
    if mp is not None and not isinstance(mp, dict):
        bad("mass_properties", mp, "a table of mass_kg, com_m, inertia_kg_m2, ...")
    elif isinstance(mp, dict):
        num_or_none("mass_properties.mass_kg", mp.get("mass_kg"))
        vector("mass_properties.com_m", mp.get("com_m"), 3)
        vector("mass_properties.principal_moments_kg_m2", mp.get("principal_moments_kg_m2"), 3)
        inertia = mp.get("inertia_kg_m2")
        if inertia is not None:
            if not (isinstance(inertia, list) and len(inertia) == 3):
                bad("mass_properties.inertia_kg_m2", inertia, "a 3 x 3 list of numbers")
            else:
                for i, row in enumerate(inertia):
                    vector(f"mass_properties.inertia_kg_m2[{i}]", row, 3)
    for key in ("hover", "wheel_study"):
        if data.get(key) is not None and not isinstance(data[key], dict):
            bad(key, data[key], "a table")
    for key in ("rotors",):
        v = data.get(key)
        if v is not None and not (isinstance(v, list) and all(isinstance(x, dict) for x in v)):
            bad(key, v, "a list of tables")
    for i, c in enumerate(data["checks"]):
        where = f"checks[{i}]"
        if not isinstance(c, dict):
            bad(where, c, "a table with name, value, limit, passed")
            continue
        if not isinstance(c.get("name"), str):
            bad(f"{where}.name", c.get("name"), "text")
        if not isinstance(c.get("passed"), bool):
            bad(f"{where}.passed", c.get("passed"), "true or false")
        for k in ("value", "limit"):
            if c.get(k) is not None and not (_json_num(c[k]) or isinstance(c[k], bool)):
                bad(f"{where}.{k}", c[k], "a finite number, true/false or null")
        for k in ("case", "relation", "unit"):
            if c.get(k) is not None and not isinstance(c[k], str):
                bad(f"{where}.{k}", c[k], "text or null")
    for i, c in enumerate(data["cases"]):
        where = f"cases[{i}]"
        if not isinstance(c, dict):
            bad(where, c, "a table with failed and the case's results")
            continue
        failed = c.get("failed")
        if failed is not None and not (isinstance(failed, list)
                                       and all(isinstance(n, str) for n in failed)):
            bad(f"{where}.failed", failed, "a list of rotor names")
        ratio = c.get("thrust_ratio")
        pairs = (list(ratio.items()) if isinstance(ratio, dict) else ratio
                 if isinstance(ratio, list) else None)
        if ratio is not None and not (pairs is not None and all(
                isinstance(p, list | tuple) and len(p) == 2 and isinstance(p[0], str)
                and _json_num(p[1]) for p in pairs)):
            bad(f"{where}.thrust_ratio", ratio, "null or a table of rotor name = number")
        if c.get("checks") is not None and not (isinstance(c["checks"], list) and all(
                isinstance(x, dict) for x in c["checks"])):
            bad(f"{where}.checks", c["checks"], "a list of tables")
    return out


def load_revision(path: str | Path, progress=None) -> Revision:
    """Read a design file (TOML; analysed here) or an ``analyze --json`` output.

    Parameters
    ----------
    path : str or Path
        A design file or the JSON that ``rotorbook analyze --json`` printed.
    progress : callable or None
        ``progress(done, total)`` over the analysis's cases (design files only).

    Raises
    ------
    DesignError
        The file cannot be read, is an invalid design, or is JSON of another kind.
    """
    p = Path(path)
    try:
        raw = p.read_bytes()
    except (OSError, ValueError) as exc:
        reason = getattr(exc, "strerror", None) or exc
        raise DesignError([f"file: {str(p)!r} cannot be read ({reason}) -> give a design file "
                           "(.toml) or the output of `rotorbook analyze --json`"],
                          path=str(p)) from None
    sha = hashlib.sha256(raw).hexdigest()
    if raw.lstrip()[:1] == b"{":
        try:
            data = json.loads(raw.decode("utf-8"))
        except (UnicodeDecodeError, ValueError) as exc:
            raise DesignError([f"file: not valid JSON ({exc}) -> the output of `rotorbook "
                               "analyze --json`, unchanged"], path=str(p)) from None
        schema = data.get("schema", "") if isinstance(data, dict) else ""
        if not (isinstance(schema, str) and schema.startswith("rotorbook.analysis/")):
            raise DesignError([f"schema: {schema!r} -> JSON of schema rotorbook.analysis/1 (the "
                               "output of `rotorbook analyze --json`)"], path=str(p))
        if not isinstance(data.get("checks"), list) or not isinstance(data.get("cases"), list):
            raise DesignError(["checks, cases: missing -> the whole output of `rotorbook "
                               "analyze --json`"], path=str(p))
        problems = analysis_problems(data)
        if problems:
            raise DesignError(problems, path=str(p))
        return Revision(source=str(p), file_sha256=sha, kind="analysis", analysis=data)
    from kit.analysis.report import analyze
    from kit.design import load

    with warnings.catch_warnings():
        warnings.simplefilter("ignore", DesignWarning)
        d = load(p)
    return Revision(source=str(p), file_sha256=sha, kind="design",
                    analysis=analyze(d, progress=progress).to_dict(), design=d)


# -- numbers --------------------------------------------------------------------------------------


def _is_num(v) -> bool:
    return isinstance(v, int | float) and not isinstance(v, bool) and math.isfinite(v)


def same(a, b) -> bool:
    """Equal values: numbers within the tolerances, lists element by element, else ``==``."""
    if _is_num(a) and _is_num(b):
        return abs(a - b) <= max(SAME_ABS, SAME_REL * max(abs(a), abs(b)))
    if isinstance(a, list | tuple) and isinstance(b, list | tuple):
        return len(a) == len(b) and all(same(x, y) for x, y in zip(a, b, strict=True))
    if isinstance(a, dict) and isinstance(b, dict):
        return a.keys() == b.keys() and all(same(a[k], b[k]) for k in a)
    return a == b


def delta(a, b):
    """``b - a`` for numbers (element by element for equal-length lists); None otherwise."""
    if _is_num(a) and _is_num(b):
        return b - a
    if isinstance(a, list | tuple) and isinstance(b, list | tuple) and len(a) == len(b):
        out = [delta(x, y) for x, y in zip(a, b, strict=True)]
        return out if all(v is not None for v in out) else None
    return None


def relative(a, b):
    """``(b - a) / |a|`` for numbers with ``a != 0``; None otherwise."""
    if _is_num(a) and _is_num(b) and a != 0:
        return (b - a) / abs(a)
    return None


def _plain(v):
    if isinstance(v, tuple | list):
        return [_plain(x) for x in v]
    if isinstance(v, float) and not math.isfinite(v):
        return None
    return v


# -- inputs ---------------------------------------------------------------------------------------


def _case_key(failed, ratio) -> str:
    """The case label of the analysis (``failed: a, b (thrust ratio a=1, ...)``), with the
    failed rotors and the ratios sorted by name so that the file's order plays no part."""
    base = "failed: " + ", ".join(sorted(str(n) for n in failed)) if failed else "no failure"
    if ratio:
        items = ratio.items() if isinstance(ratio, dict) else ratio
        base += " (thrust ratio " + ", ".join(f"{k}={v:g}" for k, v in sorted(items)) + ")"
    return base


def canonical_case_label(label: str) -> str:
    """A check's case label with its rotor names and ratios sorted (see :func:`_case_key`)."""
    if not label.startswith("failed: "):
        return label
    body, ratio = label[len("failed: "):], None
    if body.endswith(")") and " (thrust ratio " in body:
        body, rest = body.split(" (thrust ratio ", 1)
        try:
            ratio = {k: float(v) for k, v in (item.split("=", 1)
                                              for item in rest[:-1].split(", "))}
        except ValueError:
            return label
    return _case_key(body.split(", "), ratio)


def design_fields(d: Design) -> dict[tuple[str, str], tuple[Any, str]]:
    """Every input of a design as ``(item, field) -> (value, unit)``, parts and rotors by name.

    Parameters
    ----------
    d : Design
        A validated design.
    """
    out: dict[tuple[str, str], tuple[Any, str]] = {}

    def put(item, obj, skip=()):
        for f in fields(obj):
            if f.name in skip:
                continue
            v = getattr(obj, f.name)
            if v is None:
                continue
            out[(item, f.name)] = (_plain(v), unit_of(f.name))

    for k in ("name", "revision", "prepared_by", "checked_by", "notes"):
        out[("design", k)] = (getattr(d, k), "")
    out[("environment", "gravity_m_s2")] = (d.gravity_m_s2, "m/s^2")
    out[("environment", "air_density_kg_m3")] = (d.air_density_kg_m3, "kg/m^3")
    for p in d.parts:
        put(f'part "{p.name}"', p, skip=("name",))
    if d.body is not None:
        put("body", d.body)
    for r in d.rotors:
        put(f'rotor "{r.name}"', r, skip=("name", "spin"))
        out[(f'rotor "{r.name}"', "spin")] = ("ccw" if r.spin > 0 else "cw", "")
    out[("aero", "drag_law")] = (d.aero.drag_law, "")
    out[("aero", "drag_torque_coeff")] = (
        list(d.aero.drag_torque_coeff), "N m s" if d.aero.drag_law == "linear" else "N m s^2")
    if d.wheel is not None:
        put("wheel", d.wheel)
    put("control", d.control, skip=("disturbance_time_constant_assumed",))
    put("review", d.review, skip=("defaulted",))
    for fc in d.failure_cases:
        key = f"failure case {_case_key(fc.failed, None)[len('failed: '):]}"
        out[(key, "thrust_ratio")] = (
            dict(sorted(fc.thrust_ratio)) if fc.thrust_ratio else "least effort", "")
    return out


def compare_inputs(old: Design, new: Design) -> list[dict]:
    """Input changes, field by field: added, removed or changed, with both values and units.

    Parameters
    ----------
    old, new : Design
        The two validated designs.
    """
    a, b = design_fields(old), design_fields(new)
    rows = []
    order = list(a) + [k for k in b if k not in a]
    for key in order:
        item, name = key
        if key not in b:
            rows.append({"item": item, "field": name, "change": "removed", "old": a[key][0],
                         "new": None, "unit": a[key][1], "delta": None})
        elif key not in a:
            rows.append({"item": item, "field": name, "change": "added", "old": None,
                         "new": b[key][0], "unit": b[key][1], "delta": None})
        elif not same(a[key][0], b[key][0]):
            rows.append({"item": item, "field": name, "change": "changed", "old": a[key][0],
                         "new": b[key][0], "unit": b[key][1] or a[key][1],
                         "delta": delta(a[key][0], b[key][0])})
    rank = {"removed": 0, "added": 1, "changed": 2}
    # items sorted by name so that the order of the file plays no part
    rows.sort(key=lambda r: (r["item"] != "design", r["item"], rank[r["change"]], r["field"]))
    return rows


def compare_rotor_tables(old: list, new: list) -> list[dict]:
    """Rotor changes from the analyses' rotor tables (when no design file was given)."""
    a = {r.get("name"): r for r in old if isinstance(r, dict)}
    b = {r.get("name"): r for r in new if isinstance(r, dict)}
    rows = []
    for name in sorted(set(a) | set(b), key=str):
        item = f'rotor "{name}"'
        if name not in b:
            rows.append({"item": item, "field": "", "change": "removed", "old": name, "new": None,
                         "unit": "", "delta": None})
            continue
        if name not in a:
            rows.append({"item": item, "field": "", "change": "added", "old": None, "new": name,
                         "unit": "", "delta": None})
            continue
        for k in sorted(set(a[name]) | set(b[name])):
            if k == "name" or same(a[name].get(k), b[name].get(k)):
                continue
            label = "position_m (about the CoM)" if k == "position_m" else k
            rows.append({"item": item, "field": label, "change": "changed",
                         "old": a[name].get(k), "new": b[name].get(k), "unit": unit_of(k),
                         "delta": delta(a[name].get(k), b[name].get(k))})
    return rows


# -- results --------------------------------------------------------------------------------------


def _row(quantity: str, unit: str, old, new) -> dict:
    return {"quantity": quantity, "unit": unit, "old": old, "new": new, "change": delta(old, new),
            "relative_change": relative(old, new), "changed": not same(old, new)}


def compare_mass_properties(old: dict, new: dict) -> list[dict]:
    """Mass, centre of mass, inertia about the CoM and principal moments, old and new.

    Parameters
    ----------
    old, new : dict
        The ``mass_properties`` objects of the two analyses.
    """
    rows = [_row("mass", "kg", old.get("mass_kg"), new.get("mass_kg"))]
    ca, cb = old.get("com_m") or [None] * 3, new.get("com_m") or [None] * 3
    for i, ax in enumerate("xyz"):
        rows.append(_row(f"centre of mass {ax} (design frame)", "m", ca[i], cb[i]))
    ia, ib = old.get("inertia_kg_m2"), new.get("inertia_kg_m2")
    for (i, j) in ((0, 0), (1, 1), (2, 2), (0, 1), (0, 2), (1, 2)):
        va = ia[i][j] if ia else None
        vb = ib[i][j] if ib else None
        rows.append(_row(f"inertia I_{'xyz'[i]}{'xyz'[j]} about the CoM", "kg m^2", va, vb))
    pa = old.get("principal_moments_kg_m2") or [None] * 3
    pb = new.get("principal_moments_kg_m2") or [None] * 3
    for k, label in enumerate(("minor", "intermediate", "major")):
        rows.append(_row(f"principal moment, {label}", "kg m^2", pa[k], pb[k]))
    return rows


def com_shift_m(old: dict, new: dict) -> list[float] | None:
    """Centre-of-mass shift new - old in the design frame, in m (None when either is missing)."""
    return delta(old.get("com_m"), new.get("com_m"))


def compare_scalars(old: dict, new: dict, labels: dict[str, str] | None = None) -> list[dict]:
    """Every numeric scalar (and short numeric list, per component) present in both objects."""
    labels = labels or {}
    rows = []
    for k in [k for k in old if k in new]:
        a, b = old[k], new[k]
        if _is_num(a) or _is_num(b):
            rows.append(_row(labels.get(k, k), unit_of(k), a, b))
        elif (isinstance(a, list) and isinstance(b, list) and 0 < len(a) == len(b) <= 3
              and all(_is_num(v) or v is None for v in a + b)):
            names = ("roll x", "pitch y", "yaw z") if "torque" in k else ("x", "y", "z")
            for i in range(len(a)):
                rows.append(_row(f"{labels.get(k, k)}, {names[i]}", unit_of(k), a[i], b[i]))
    return rows


HOVER_LABELS = {
    "thrust_to_weight": "thrust-to-weight", "hover_thrust_fraction": "hover thrust fraction",
    "allocation_rank": "allocation rank", "torque_margin_n_m": "torque margin",
    "torque_max_n_m": "largest torque", "torque_min_n_m": "smallest torque",
    "induced_power_w": "induced hover power",
}
WHEEL_LABELS = {
    "h_max_n_m_s": "largest wheel momentum", "chosen_h_n_m_s": "chosen wheel momentum",
    "wheel_speed_rad_s": "wheel speed", "stored_energy_j": "stored energy",
    "max_body_rate_rad_s": "largest body rate", "gyro_torque_n_m": "gyroscopic torque",
}


def case_key(case: dict) -> str:
    """A case's key: its failed rotors' names (sorted) and its fixed thrust ratios, if any."""
    return _case_key(case.get("failed") or [], case.get("thrust_ratio"))


def _first(case: dict, keys) -> Any:
    for k in keys:
        if k in case and case[k] is not None:
            return case[k]
    return None


def _scalar(v, prefer=("value", "index", "min", "minimum")):
    """A number from a value that may be a number, a dict holding one, or a list (smallest)."""
    if _is_num(v) or isinstance(v, bool):
        return v
    if isinstance(v, dict):
        for k in prefer:
            if _is_num(v.get(k)):
                return v[k]
        for k, x in v.items():
            if _is_num(x) and ("authority" in k or "damping" in k):
                return x
        return None
    if isinstance(v, list):
        finite = [x for x in v if _is_num(x)]
        return min(finite) if finite else None
    return None


def _check_value(case: dict, *words) -> Any:
    for c in case.get("checks") or []:
        name = str(c.get("name", "")).lower()
        if all(w in name for w in words):
            return c.get("value")
    return None


def _operating_point(case: dict) -> str | None:
    v = case.get("operating_point")
    if isinstance(v, dict):
        v = v.get("kind", v.get("label", v.get("name")))
    if isinstance(v, str):
        return v
    found = case.get("equilibrium_found")
    return None if found is None else ("equilibrium found" if found else "no equilibrium")


#: The quantities compared per case: (label, unit, reader of a case dict).
CASE_QUANTITIES = (
    ("operating point", "", _operating_point),
    ("spin rate", "rad/s", lambda c: c.get("spin_rate_rad_s") if c.get("equilibrium_found",
                                                                        True) else None),
    ("tilt of the spin axis", "deg", lambda c: c.get("tilt_deg") if c.get("equilibrium_found",
                                                                         True) else None),
    ("busiest-rotor thrust margin", "of max thrust",
     lambda c: _scalar(_first(c, ("busiest_rotor_margin", "thrust_margin")))
     if _first(c, ("busiest_rotor_margin", "thrust_margin")) is not None
     else _check_value(c, "margin", "busiest")),
    ("static control authority", "",
     lambda c: _scalar(_first(c, ("static_authority", "static_control_authority",
                                  "available_control_authority", "control_authority")))),
    ("controllability distance", "", lambda c: c.get("controllability_distance")),
    ("closed-loop damping ratio (smallest)", "",
     lambda c: _scalar(_first(c, ("min_damping_ratio", "damping_ratio",
                                  "closed_loop_damping_ratio", "damping")))),
    ("thrust-saturation rate", "1/s",
     lambda c: _first(c, ("saturation_rate_per_s", "saturation_probability_per_s"))),
    ("H2 norm", "", lambda c: c.get("h2_norm")),
)


def case_values(case: dict) -> dict[str, Any]:
    """The compared quantities of one case, by label (absent ones left out)."""
    out = {}
    for label, _unit, read in CASE_QUANTITIES:
        try:
            v = read(case)
        except (TypeError, AttributeError, KeyError):
            v = None
        if v is not None:
            out[label] = v
    return out


def compare_cases(old: list, new: list) -> list[dict]:
    """Per case (matched by failed rotors' names): the quantities, old and new, with change."""
    a = {case_key(c): c for c in old if isinstance(c, dict)}
    b = {case_key(c): c for c in new if isinstance(c, dict)}
    order = list(a) + [k for k in b if k not in a]
    units = {label: unit for label, unit, _ in CASE_QUANTITIES}
    out = []
    for key in order:
        status = "both" if key in a and key in b else ("disappeared" if key in a else "appeared")
        va = case_values(a[key]) if key in a else {}
        vb = case_values(b[key]) if key in b else {}
        rows = [_row(label, units[label], va.get(label), vb.get(label))
                for label, _u, _r in CASE_QUANTITIES if label in va or label in vb]
        out.append({"case": key, "status": status, "rows": rows,
                    "changed": status != "both" or any(r["changed"] for r in rows)})
    return out


# -- checks ---------------------------------------------------------------------------------------


def check_key(c: dict) -> tuple[str, str]:
    """A check's identity: its name and its case (rotor names in the case sorted)."""
    return (str(c.get("name", "")), canonical_case_label(str(c.get("case", "") or "")))


def margin(c: dict) -> float | None:
    """Distance of a check's value from its limit on the passing side; None when not numeric."""
    v, lim, rel = c.get("value"), c.get("limit"), c.get("relation")
    if not (_is_num(v) and _is_num(lim)):
        return None
    if rel == ">=":
        return v - lim
    if rel == "<=":
        return lim - v
    return None


def compare_checks(old: list, new: list, erosion: float = DEFAULT_EROSION) -> tuple[list, list]:
    """Checks whose verdict changed (regressions first) and checks eroding while passing.

    Parameters
    ----------
    old, new : list of dict
        The ``checks`` lists of the two analyses.
    erosion : float
        Fraction of its old margin a passing check may lose before it is listed as eroding.
    """
    a = {check_key(c): c for c in old if isinstance(c, dict)}
    b = {check_key(c): c for c in new if isinstance(c, dict)}
    changed, eroding = [], []
    for key in list(a) + [k for k in b if k not in a]:
        ca, cb = a.get(key), b.get(key)
        pa = None if ca is None else ca.get("passed") is True
        pb = None if cb is None else cb.get("passed") is True
        ref = cb or ca or {}
        entry = {"name": key[0], "case": key[1], "old_passed": pa, "new_passed": pb,
                 "old_value": None if ca is None else ca.get("value"),
                 "new_value": None if cb is None else cb.get("value"),
                 "limit": ref.get("limit"), "relation": ref.get("relation", ""),
                 "unit": ref.get("unit", "")}
        if pb is False and pa is not False:
            entry["change"] = "pass -> fail" if pa else "new check, fails"
            entry["worse"] = True
            changed.append(entry)
        elif pa is False and pb is True:
            entry["change"] = "fail -> pass"
            entry["worse"] = False
            changed.append(entry)
        elif pa is not None and pb is None:
            entry["change"] = "check gone" + (" (was failing)" if pa is False else "")
            entry["worse"] = False
            changed.append(entry)
        elif pa is None and pb is True:
            entry["change"] = "new check, passes"
            entry["worse"] = False
            changed.append(entry)
        elif pa and pb:
            ma, mb = margin(ca), margin(cb)
            if ma is not None and mb is not None and ma > 0 and mb < ma and not same(ma, mb):
                shrink = (ma - mb) / ma
                if shrink > erosion:
                    entry.update({"old_margin": ma, "new_margin": mb, "shrink_fraction": shrink})
                    eroding.append(entry)
    rank = {"pass -> fail": 0, "new check, fails": 1, "fail -> pass": 2}
    changed.sort(key=lambda e: rank.get(e["change"], 3))
    eroding.sort(key=lambda e: -e["shrink_fraction"])
    return changed, eroding


# -- the comparison -------------------------------------------------------------------------------


@dataclass(frozen=True, repr=False)
class Comparison:
    """Two revisions compared; :meth:`to_dict` is the JSON of ``rotorbook compare --json``."""

    old: Revision
    new: Revision
    erosion: float
    strict: bool
    inputs: list
    inputs_note: str
    mass_properties: list
    com_shift_m: list | None
    hover: list
    cases: list
    checks_changed: list
    checks_eroding: list
    wheel: list
    notes: list = field(default_factory=list)

    def __repr__(self) -> str:
        return (f"<Comparison {self.old.name!r} rev {self.old.revision!r} -> rev "
                f"{self.new.revision!r}: {self.verdict_text()}>")

    @property
    def regressions(self) -> list[dict]:
        """Checks that fail in the new revision and did not fail in the old one."""
        return [c for c in self.checks_changed if c.get("worse")]

    @property
    def worse(self) -> bool:
        return bool(self.regressions) or (self.strict and bool(self.checks_eroding))

    @property
    def exit_status(self) -> int:
        return EXIT_WORSE if self.worse else EXIT_OK

    @property
    def unchanged(self) -> bool:
        """Nothing changed: no input, mass property, hover, case, check or wheel figure."""
        return not (self.inputs or self.checks_changed or self.checks_eroding
                    or any(r["changed"] for r in self.mass_properties + self.hover + self.wheel)
                    or any(c["changed"] for c in self.cases))

    def verdict_text(self) -> str:
        n = len(self.regressions)
        if n:
            return (f"WORSE: {n} design check{'s' if n != 1 else ''} now fail"
                    f"{'s' if n == 1 else ''} that did not fail in the old revision")
        if self.strict and self.checks_eroding:
            return (f"WORSE (strict): {len(self.checks_eroding)} passing check(s) lost more than "
                    f"{100 * self.erosion:g} % of their margin")
        if self.unchanged:
            return "NO CHANGE: the two revisions give the same inputs, results and verdicts"
        return "NOT WORSE: no design check turned to fail"

    def counts_text(self) -> str:
        """One line of counts: what changed where."""
        kinds = [c["change"] for c in self.checks_changed]
        n_cases = sum(c["changed"] for c in self.cases)
        return (f"inputs: {len(self.inputs)} changed; mass properties: "
                f"{sum(r['changed'] for r in self.mass_properties)} changed; cases: {n_cases} of "
                f"{len(self.cases)} changed; checks: {len(self.regressions)} now fail, "
                f"{kinds.count('fail -> pass')} now pass, "
                f"{sum(k.startswith('check gone') for k in kinds)} gone, "
                f"{len(self.checks_eroding)} eroding")

    def to_dict(self) -> dict:
        return {
            "schema": SCHEMA,
            "old": self.old.describe(),
            "new": self.new.describe(),
            "verdict": {"text": self.verdict_text(), "counts": self.counts_text(),
                        "worse": self.worse,
                        "unchanged": self.unchanged, "exit_status": self.exit_status,
                        "regressions": len(self.regressions),
                        "eroding": len(self.checks_eroding)},
            "erosion_threshold": self.erosion,
            "strict": self.strict,
            "inputs": self.inputs,
            "inputs_note": self.inputs_note,
            "mass_properties": self.mass_properties,
            "com_shift_m": self.com_shift_m,
            "hover": self.hover,
            "cases": self.cases,
            "checks_changed": self.checks_changed,
            "checks_eroding": self.checks_eroding,
            "wheel_study": self.wheel,
            "notes": self.notes,
        }

    def _repr_html_(self) -> str:
        """Static tables: verdict, checks that changed or erode, inputs, then what changed."""
        from kit.analysis.htmltable import table

        o, n = self.old, self.new
        cls = "rb-fail" if self.worse else "rb-pass"
        out = [f'<p><b class="{cls}">{html.escape(self.verdict_text())}</b></p>',
               table(["", "design", "revision", "file", "file SHA-256", "verdict"],
                     [(k, r.name, r.revision, Path(r.source).name, r.file_sha256, r.verdict)
                      for k, r in (("old", o), ("new", n))], "Revisions")]
        if self.checks_changed:
            out.append(table(["change", "case", "check", "old value", "new value", "limit"],
                             [(c["change"], c["case"] or "design", c["name"],
                               _text(c["old_value"]), _text(c["new_value"]),
                               f"{c['relation']} {_text(c['limit'])} {c['unit']}".strip())
                              for c in self.checks_changed], "Checks whose verdict changed"))
        if self.checks_eroding:
            out.append(table(["case", "check", "old margin", "new margin", "margin lost"],
                             [(c["case"] or "design", c["name"], c["old_margin"],
                               c["new_margin"], f"{100 * c['shrink_fraction']:.0f} %")
                              for c in self.checks_eroding],
                             f"Checks eroding (more than {100 * self.erosion:g} % of the "
                             "margin lost)"))
        if self.inputs:
            out.append(table(["item", "field", "change", "old", "new", "unit"],
                             [(r["item"], r["field"], r["change"], _text(r["old"]),
                               _text(r["new"]), r["unit"]) for r in self.inputs],
                             "Input changes"))
        rows = [(title, r["quantity"], _text(r["old"]), _text(r["new"]), r["change"],
                 r["relative_change"], r["unit"])
                for title, group in (("mass properties", self.mass_properties),
                                     ("hover", self.hover), ("wheel", self.wheel))
                for r in group if r["changed"]]
        rows += [(c["case"] + ("" if c["status"] == "both" else f" ({c['status']})"),
                  r["quantity"], _text(r["old"]), _text(r["new"]), r["change"],
                  r["relative_change"], r["unit"])
                 for c in self.cases for r in c["rows"] if r["changed"]]
        if rows:
            out.append(table(["where", "quantity", "old", "new", "change", "relative change",
                              "unit"], rows, "Results that changed"))
        return "".join(out)

    def summary_text(self) -> str:
        """The text ``rotorbook compare`` prints: verdict first, then only what changed."""
        o, n = self.old, self.new
        lines = [self.verdict_text(), self.counts_text(),
                 f"old: {o.name} (revision {o.revision}) {o.source}  sha256 {o.file_sha256[:12]}"
                 f"  verdict {o.verdict}",
                 f"new: {n.name} (revision {n.revision}) {n.source}  sha256 {n.file_sha256[:12]}"
                 f"  verdict {n.verdict}"]
        if self.checks_changed:
            lines.append("checks whose verdict changed:")
            for c in self.checks_changed:
                lines.append(f"  {c['change']:<18} {c['case'] + ': ' if c['case'] else ''}"
                             f"{c['name']}  {num(c['old_value'])} -> {num(c['new_value'])} "
                             + f"(limit {c['relation']} {num(c['limit'])} {c['unit']}".rstrip()
                             + ")")
        if self.checks_eroding:
            lines.append(f"checks eroding (margin shrank by more than {100 * self.erosion:g} %):")
            for c in self.checks_eroding:
                lines.append(f"  {c['case'] + ': ' if c['case'] else ''}{c['name']}  margin "
                             f"{num(c['old_margin'])} -> {num(c['new_margin'])} "
                             f"({100 * c['shrink_fraction']:.0f} % less)")
        if self.inputs:
            lines.append("input changes:")
            for r in self.inputs:
                lines.append(f"  {r['change']:<8} {r['item']}.{r['field']}: "
                             f"{_text(r['old'])} -> {_text(r['new'])} {r['unit']}".rstrip())
        if self.inputs_note:
            lines.append(f"  ({self.inputs_note})")
        for title, rows in (("mass properties", self.mass_properties), ("hover", self.hover),
                            ("wheel study", self.wheel)):
            changed = [r for r in rows if r["changed"]]
            if changed:
                lines.append(f"{title}:")
                lines += [_row_text(r) for r in changed]
        for c in self.cases:
            if not c["changed"]:
                continue
            lines.append(f"case {c['case']}" + ("" if c["status"] == "both"
                                                 else f" ({c['status']})") + ":")
            lines += [_row_text(r) for r in c["rows"] if r["changed"]]
        if self.unchanged:
            lines.append("(nothing changed)")
        return "\n".join(lines)


def _text(v) -> str:
    if v is None:
        return "\u2013"
    if isinstance(v, list | tuple):
        return "[" + ", ".join(_text(x) for x in v) + "]"
    if isinstance(v, dict):
        return "{" + ", ".join(f"{k} {_text(x)}" for k, x in v.items()) + "}"
    if isinstance(v, str):
        return v
    return num(v, 6)


def _row_text(r: dict) -> str:
    rel = r.get("relative_change")
    rel_s = f" ({100 * rel:+.3g} %)" if rel is not None else ""
    ch = f"  change {num(r['change'], 4)}" if _is_num(r.get("change")) else ""
    return (f"  {r['quantity']:<40} {_text(r['old'])} -> {_text(r['new'])} {r['unit']}"
            f"{ch}{rel_s}").rstrip()


def compare(old: Revision, new: Revision, erosion: float = DEFAULT_EROSION,
            strict: bool = False) -> Comparison:
    """Compare two revisions (see the module docstring for what is matched and how).

    Parameters
    ----------
    old, new : Revision
        The earlier and the later revision.
    erosion : float
        Threshold fraction of a passing check's margin (0 < erosion <= 1).
    strict : bool
        Count an eroding check as worse (exit status 3).
    """
    if not (_is_num(erosion) and 0 < erosion <= 1):
        raise ValueError(f"erosion: {erosion!r} -> a fraction in (0, 1]")
    A, B = old.analysis, new.analysis
    notes = []
    if old.design is not None and new.design is not None:
        inputs, note = compare_inputs(old.design, new.design), ""
    else:
        inputs = compare_rotor_tables(A.get("rotors") or [], B.get("rotors") or [])
        note = ("an analysis JSON carries no part list: inputs compared by the rotor table only;"
                " give both design files for a field-by-field comparison")
    if A.get("schema") != B.get("schema"):
        notes.append(f"analysis schemas differ: {A.get('schema')} and {B.get('schema')}")
    if A.get("kit_version") != B.get("kit_version"):
        notes.append(f"analysed by different kit versions: {A.get('kit_version')} and "
                     f"{B.get('kit_version')}; a change may come from the kit")
    mpa, mpb = A.get("mass_properties") or {}, B.get("mass_properties") or {}
    wa, wb = A.get("wheel_study") or {}, B.get("wheel_study") or {}
    changed, eroding = compare_checks(A.get("checks") or [], B.get("checks") or [], erosion)
    return Comparison(
        old=old, new=new, erosion=float(erosion), strict=bool(strict), inputs=inputs,
        inputs_note=note, mass_properties=compare_mass_properties(mpa, mpb),
        com_shift_m=com_shift_m(mpa, mpb),
        hover=compare_scalars(A.get("hover") or {}, B.get("hover") or {}, HOVER_LABELS),
        cases=compare_cases(A.get("cases") or [], B.get("cases") or []),
        checks_changed=changed, checks_eroding=eroding,
        wheel=compare_scalars(wa, wb, WHEEL_LABELS) if (wa.get("available")
                                                        or wb.get("available")) else [],
        notes=notes)
