"""Design files: read, validate and normalise a vehicle description.

A design file is TOML, read with :mod:`tomllib` and never executed. Every value is SI and every
field carries its unit in its name (``mass_kg``, ``position_m``). :func:`load` collects every
problem in the file and raises one :class:`~kit.errors.DesignError` that lists each, as
``field path: bad value -> what is allowed``. Valid files give a frozen :class:`Design`.

The field reference is in README.md ("Design file"); the conventions (frames, spin signs) are
those of DESIGN.md: design frame x forward, y left, z up; every rotor thrusts along +z.
"""

from __future__ import annotations

import difflib
import hashlib
import math
import tomllib
import warnings
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from kit.errors import DesignError, DesignWarning

#: Standard gravity, m/s^2 (3rd CGPM 1901; ISO 80000-3).
STANDARD_GRAVITY_M_S2 = 9.80665
#: Air density at sea level in the ISO standard atmosphere, kg/m^3 (ISO 2533:1975).
ISA_SEA_LEVEL_DENSITY_KG_M3 = 1.225
#: Largest design file accepted, bytes.
MAX_FILE_BYTES = 1024 * 1024

SHAPES = ("point", "box", "cylinder", "tube", "rod", "sphere", "disc")
AXES = ("x", "y", "z")
SPINS = {"ccw": 1, "cw": -1}
DRAG_LAWS = ("linear", "quadratic")
FAILURE_SETS = ("none", "single", "pairs", "single+pairs")

#: Review thresholds and their defaults (common practice, no source; the gyro range is
#: 2000 deg/s, a common MEMS gyro full scale).
REVIEW_DEFAULTS: dict[str, Any] = {
    "min_thrust_to_weight": 2.0,
    "max_hover_thrust_fraction": 0.6,
    "gyro_full_scale_rad_s": 34.9,
    "max_spin_fraction_of_gyro": 0.8,
    "max_saturation_probability": 0.01,
    "failure_sets": "single",
}
#: Assumed time constant of the disturbance-torque filter, s (an assumption, marked as such).
DEFAULT_DISTURBANCE_TIME_CONSTANT_S = 0.05


# ---------------------------------------------------------------------------------------------
# The frozen result
# ---------------------------------------------------------------------------------------------


@dataclass(frozen=True)
class Part:
    """A rigid part of the airframe; position is its centre in the design frame, in m."""

    name: str
    mass_kg: float
    shape: str
    position_m: tuple[float, float, float]
    size_m: tuple[float, float, float] | None = None
    radius_m: float | None = None
    outer_radius_m: float | None = None
    inner_radius_m: float | None = None
    length_m: float | None = None
    axis: str = "z"
    yaw_deg: float = 0.0


@dataclass(frozen=True)
class Body:
    """Measured whole-vehicle values; each replaces the computed one on its own."""

    mass_kg: float | None = None
    com_m: tuple[float, float, float] | None = None
    inertia_kg_m2: tuple[tuple[float, float, float], ...] | None = None


@dataclass(frozen=True)
class Rotor:
    """One rotor. ``spin`` is +1 for ccw (angular velocity along +z), -1 for cw."""

    name: str
    position_m: tuple[float, float, float]
    spin: int
    max_thrust_n: float
    torque_per_thrust_m: float
    thrust_coeff_n_s2: float
    rotor_inertia_kg_m2: float
    diameter_m: float | None = None
    mass_kg: float | None = None


@dataclass(frozen=True)
class Aero:
    """Body drag torque law: linear in N m s, quadratic in N m s^2, per body axis."""

    drag_law: str
    drag_torque_coeff: tuple[float, float, float]


@dataclass(frozen=True)
class Wheel:
    """Momentum wheel spinning about body z."""

    inertia_kg_m2: float
    max_speed_rad_s: float
    mass_kg: float
    position_m: tuple[float, float, float]

    @property
    def max_momentum_n_m_s(self) -> float:
        """Largest wheel angular momentum I_w * max_speed, in N m s."""
        return self.inertia_kg_m2 * self.max_speed_rad_s


@dataclass(frozen=True)
class Control:
    """LQR weights and the disturbance-torque model."""

    weight_rate: float
    weight_attitude: float
    weight_thrust: float
    disturbance_torque_psd_n2_m2_s: float
    disturbance_time_constant_s: float = DEFAULT_DISTURBANCE_TIME_CONSTANT_S
    disturbance_time_constant_assumed: bool = True


@dataclass(frozen=True)
class Review:
    """Thresholds of the design checks."""

    min_thrust_to_weight: float = 2.0
    max_hover_thrust_fraction: float = 0.6
    gyro_full_scale_rad_s: float = 34.9
    max_spin_fraction_of_gyro: float = 0.8
    max_saturation_probability: float = 0.01
    failure_sets: str = "single"
    defaulted: tuple[str, ...] = ()


@dataclass(frozen=True)
class FailureCase:
    """Rotors that have failed (by name) and, optionally, fixed ratios of the working thrusts."""

    failed: tuple[str, ...]
    thrust_ratio: tuple[tuple[str, float], ...] | None = None

    def ratio_dict(self) -> dict[str, float] | None:
        return None if self.thrust_ratio is None else dict(self.thrust_ratio)


@dataclass(frozen=True)
class Design:
    """A validated design: everything in SI, the design frame of DESIGN.md."""

    name: str
    revision: str
    prepared_by: str
    checked_by: str
    notes: str
    gravity_m_s2: float
    air_density_kg_m3: float
    parts: tuple[Part, ...]
    body: Body | None
    rotors: tuple[Rotor, ...]
    aero: Aero
    wheel: Wheel | None
    control: Control
    review: Review
    failure_cases: tuple[FailureCase, ...]
    sha256: str = ""
    source: str = ""
    warnings: tuple[str, ...] = field(default=())

    @property
    def rotor_names(self) -> tuple[str, ...]:
        return tuple(r.name for r in self.rotors)

    def rotor_index(self, name: str) -> int:
        return self.rotor_names.index(name)


# ---------------------------------------------------------------------------------------------
# Validation
# ---------------------------------------------------------------------------------------------

_TOP = {
    "design": "table",
    "environment": "table",
    "part": "array",
    "body": "table",
    "rotor": "array",
    "aero": "table",
    "wheel": "table",
    "control": "table",
    "review": "table",
    "failure_case": "array",
}

# field -> kind; kinds: str, pos (number > 0), nonneg (>= 0, zero warns), num, vec3, ...
_FIELDS: dict[str, dict[str, tuple[str, bool]]] = {
    # section: {field: (kind, required)}
    "design": {
        "name": ("str", True),
        "revision": ("str", True),
        "prepared_by": ("str", False),
        "checked_by": ("str", False),
        "notes": ("str", False),
    },
    "environment": {"gravity_m_s2": ("pos", False), "air_density_kg_m3": ("pos", False)},
    "part": {
        "name": ("str", True),
        "mass_kg": ("pos", True),
        "shape": ("str", True),
        "position_m": ("vec3", True),
        "size_m": ("vec3pos", False),
        "radius_m": ("pos", False),
        "outer_radius_m": ("pos", False),
        "inner_radius_m": ("nonneg_quiet", False),
        "length_m": ("pos", False),
        "axis": ("str", False),
        "yaw_deg": ("num", False),
    },
    "body": {"mass_kg": ("pos", False), "com_m": ("vec3", False), "inertia_kg_m2": ("mat3", False)},
    "rotor": {
        "name": ("str", True),
        "position_m": ("vec3", True),
        "spin": ("str", True),
        "max_thrust_n": ("pos", True),
        "torque_per_thrust_m": ("pos", True),
        "thrust_coeff_n_s2": ("pos", True),
        "rotor_inertia_kg_m2": ("nonneg", True),
        "diameter_m": ("pos", False),
        "mass_kg": ("pos", False),
    },
    "aero": {"drag_law": ("str", True), "drag_torque_coeff": ("nonneg_or_vec3", True)},
    "wheel": {
        "inertia_kg_m2": ("pos", True),
        "max_speed_rad_s": ("pos", True),
        "mass_kg": ("pos", True),
        "position_m": ("vec3", True),
    },
    "control": {
        "weight_rate": ("pos", True),
        "weight_attitude": ("pos", True),
        "weight_thrust": ("pos", True),
        "disturbance_torque_psd_n2_m2_s": ("pos", True),
        "disturbance_time_constant_s": ("pos", False),
    },
    "review": {
        "min_thrust_to_weight": ("pos", False),
        "max_hover_thrust_fraction": ("fraction", False),
        "gyro_full_scale_rad_s": ("pos", False),
        "max_spin_fraction_of_gyro": ("fraction", False),
        "max_saturation_probability": ("fraction", False),
        "failure_sets": ("str", False),
    },
    "failure_case": {"failed": ("strlist", True), "thrust_ratio": ("ratio_table", False)},
}

_SHAPE_FIELDS = {
    "point": (),
    "box": ("size_m",),
    "cylinder": ("radius_m", "length_m"),
    "tube": ("outer_radius_m", "inner_radius_m", "length_m"),
    "rod": ("length_m",),
    "sphere": ("radius_m",),
    "disc": ("radius_m",),
}
_GEOMETRY_FIELDS = ("size_m", "radius_m", "outer_radius_m", "inner_radius_m", "length_m")

_KIND_TEXT = {
    "str": "a text string",
    "pos": "a number > 0",
    "nonneg": "a number >= 0",
    "nonneg_quiet": "a number >= 0",
    "num": "a number",
    "fraction": "a number in (0, 1]",
    "vec3": "a list of 3 numbers [x, y, z]",
    "vec3pos": "a list of 3 numbers > 0",
    "mat3": "a 3x3 list of numbers",
    "strlist": "a list of rotor names",
    "ratio_table": "a table {rotor name = ratio >= 0}, at least one ratio > 0",
    "nonneg_or_vec3": "a number >= 0 or a list of 3 numbers >= 0",
}


def _fmt(value: Any) -> str:
    try:
        text = repr(value)
    except (ValueError, RecursionError):  # an int too long to print, a list nested too deep
        text = f"<{type(value).__name__} too large to show>"
    return text if len(text) <= 60 else text[:57] + "..."


def _is_number(value: Any) -> bool:
    return isinstance(value, int | float) and not isinstance(value, bool)


class _Collector:
    """Collects problems and warnings while a file is checked."""

    def __init__(self) -> None:
        self.problems: list[str] = []
        self.warnings: list[str] = []

    def bad(self, where: str, value: Any, allowed: str) -> None:
        self.problems.append(f"{where}: {_fmt(value)} -> {allowed}")

    def missing(self, where: str, allowed: str) -> None:
        self.problems.append(f"{where}: missing -> required, {allowed}")

    def note(self, text: str) -> None:
        self.problems.append(text)

    def warn(self, text: str) -> None:
        self.warnings.append(text)

    # --- typed readers; each returns None after recording a problem ---

    def number(self, where: str, value: Any, kind: str) -> float | None:
        if isinstance(value, str):
            self.bad(where, value, f"{_KIND_TEXT[kind]} in SI units, without a unit in the text")
            return None
        if not _is_number(value):
            self.bad(where, value, _KIND_TEXT[kind])
            return None
        try:
            x = float(value)
        except OverflowError:  # an integer beyond the float range
            x = math.inf
        if not math.isfinite(x):
            self.bad(where, value, f"a finite number ({_KIND_TEXT[kind]})")
            return None
        if kind == "pos" and x <= 0:
            self.bad(where, value, "a number > 0")
            return None
        if kind in ("nonneg", "nonneg_quiet") and x < 0:
            self.bad(where, value, "a number >= 0")
            return None
        if kind == "fraction" and not 0 < x <= 1:
            self.bad(where, value, "a number in (0, 1]")
            return None
        if kind == "nonneg" and x == 0:
            self.warn(f"{where} = 0 is an idealisation; check that it is meant")
        return x

    def vector(self, where: str, value: Any, positive: bool = False) -> tuple[float, ...] | None:
        if not isinstance(value, list) or len(value) != 3:
            self.bad(where, value, _KIND_TEXT["vec3pos" if positive else "vec3"])
            return None
        out = []
        for k, item in enumerate(value):
            x = self.number(f"{where}[{k}]", item, "pos" if positive else "num")
            if x is None:
                return None
            out.append(x)
        return tuple(out)


def _check_keys(c: _Collector, where: str, table: dict, allowed: dict) -> None:
    for key in table:
        if key not in allowed:
            close = difflib.get_close_matches(str(key), list(allowed), n=1, cutoff=0.6)
            hint = f"did you mean '{close[0]}'?" if close else "allowed: " + ", ".join(allowed)
            c.bad(f"{where}.{key}", table[key], f"unknown key; {hint}")


def _read_fields(c: _Collector, where: str, table: Any, section: str) -> dict[str, Any] | None:
    """Type-check the scalar fields of one table; return {field: value or None}."""
    if not isinstance(table, dict):
        c.bad(where, table, "a table ([" + section + "])")
        return None
    spec = _FIELDS[section]
    _check_keys(c, where, table, spec)
    out: dict[str, Any] = {}
    for name, (kind, required) in spec.items():
        path = f"{where}.{name}"
        if name not in table:
            if required:
                c.missing(path, _KIND_TEXT[kind])
            out[name] = None
            continue
        value = table[name]
        if kind == "str":
            if not isinstance(value, str) or (required and not value.strip()):
                c.bad(path, value, "a non-empty text string")
                out[name] = None
            else:
                out[name] = value.strip()
        elif kind in ("pos", "nonneg", "nonneg_quiet", "num", "fraction"):
            out[name] = c.number(path, value, kind)
        elif kind == "vec3":
            out[name] = c.vector(path, value)
        elif kind == "vec3pos":
            out[name] = c.vector(path, value, positive=True)
        elif kind == "nonneg_or_vec3":
            if isinstance(value, list):
                vec = c.vector(path, value)
                if vec is not None and any(v < 0 for v in vec):
                    c.bad(path, value, "drag coefficients >= 0")
                    vec = None
                if vec is not None and any(v == 0 for v in vec):
                    c.warn(f"{path} has a zero entry: no drag about that axis is an idealisation")
                out[name] = vec
            else:
                x = c.number(path, value, "nonneg")
                out[name] = None if x is None else (x, x, x)
        elif kind == "mat3":
            out[name] = _read_matrix(c, path, value)
        elif kind == "strlist":
            if (
                not isinstance(value, list)
                or not value
                or not all(isinstance(v, str) and v for v in value)
            ):
                c.bad(path, value, "a non-empty list of rotor names (strings)")
                out[name] = None
            else:
                out[name] = tuple(value)
        elif kind == "ratio_table":
            if not isinstance(value, dict) or not value:
                c.bad(path, value, _KIND_TEXT[kind])
                out[name] = None
            else:
                ratios = {}
                for key, r in value.items():
                    x = c.number(f"{path}.{key}", r, "nonneg_quiet")
                    if x is None:
                        ratios = None
                        break
                    ratios[key] = x
                if ratios is not None and sum(ratios.values()) <= 0:
                    c.bad(path, value, "at least one ratio > 0")
                    ratios = None
                out[name] = ratios
    return out


def _read_matrix(c: _Collector, where: str, value: Any) -> tuple | None:
    if not (
        isinstance(value, list)
        and len(value) == 3
        and all(isinstance(row, list) and len(row) == 3 for row in value)
    ):
        c.bad(where, value, _KIND_TEXT["mat3"])
        return None
    rows = []
    for i, row in enumerate(value):
        out_row = []
        for j, item in enumerate(row):
            x = c.number(f"{where}[{i}][{j}]", item, "num")
            if x is None:
                return None
            out_row.append(x)
        rows.append(tuple(out_row))
    m = rows
    if any(abs(m[i][j] - m[j][i]) > 1e-9 * max(1e-12, abs(m[i][j]) + abs(m[j][i])) for i in range(3)
           for j in range(3)):
        c.bad(where, value, "a symmetric matrix (I[i][j] == I[j][i])")
        return None
    eig = _sym_eigvals(m)
    if min(eig) <= 0:
        c.bad(where, value, "a positive-definite inertia (all principal moments > 0)")
        return None
    i1, i2, i3 = sorted(eig)
    if i1 + i2 < i3 * (1 - 1e-9):
        c.bad(
            where,
            value,
            f"principal moments {i1:.4g}, {i2:.4g}, {i3:.4g} break the triangle inequality "
            "I1 + I2 >= I3; no rigid body has them",
        )
        return None
    return tuple(rows)


def _sym_eigvals(m) -> list[float]:
    import numpy as np

    return [float(v) for v in np.linalg.eigvalsh(np.array(m, dtype=float))]


def _validate(data: dict, c: _Collector) -> dict[str, Any]:
    """Check the whole document; return normalised pieces (None where a problem was found)."""
    _check_keys(c, "(top level)", data, _TOP)
    for key, kind in _TOP.items():
        if key in data:
            if kind == "table" and not isinstance(data[key], dict):
                c.bad(key, data[key], f"a table [{key}]")
            if kind == "array" and not (
                isinstance(data[key], list) and all(isinstance(t, dict) for t in data[key])
            ):
                c.bad(key, data[key], f"an array of tables [[{key}]]")

    def table(name):
        value = data.get(name)
        return value if isinstance(value, dict) else None

    def array(name):
        value = data.get(name)
        if isinstance(value, list) and all(isinstance(t, dict) for t in value):
            return value
        return None

    out: dict[str, Any] = {}
    if "design" not in data:
        c.missing("design", "a [design] table with name and revision")
        out["design"] = None
    else:
        out["design"] = _read_fields(c, "design", table("design") or {}, "design") if table(
            "design") is not None else None

    env = _read_fields(c, "environment", table("environment") or {}, "environment")
    out["environment"] = env

    # parts
    parts = []
    for i, raw in enumerate(array("part") or []):
        where = f"part[{i}]"
        f = _read_fields(c, where, raw, "part")
        if f is None:
            continue
        shape = f["shape"]
        if shape is not None and shape not in SHAPES:
            close = difflib.get_close_matches(shape, SHAPES, n=1)
            hint = f" (did you mean '{close[0]}'?)" if close else ""
            c.bad(f"{where}.shape", shape, "one of " + ", ".join(SHAPES) + hint)
            shape = None
        axis = f["axis"] or "z"
        if f["axis"] is not None and f["axis"] not in AXES:
            c.bad(f"{where}.axis", f["axis"], "one of x, y, z")
        if shape is not None:
            need = _SHAPE_FIELDS[shape]
            for g in _GEOMETRY_FIELDS:
                if g in need and g not in raw:
                    c.missing(f"{where}.{g}", f"the {shape} shape needs " + ", ".join(need))
                elif g not in need and g in raw:
                    c.bad(f"{where}.{g}", raw[g], f"not used by shape '{shape}'; remove it")
            if (
                shape == "tube"
                and f["outer_radius_m"] is not None
                and f["inner_radius_m"] is not None
                and f["inner_radius_m"] >= f["outer_radius_m"]
            ):
                c.bad(
                    f"{where}.inner_radius_m",
                    raw["inner_radius_m"],
                    f"less than outer_radius_m ({f['outer_radius_m']})",
                )
        parts.append((f, shape, axis))
    out["parts"] = parts

    body = table("body")
    out["body"] = _read_fields(c, "body", body, "body") if body is not None else None

    rotors = []
    for i, raw in enumerate(array("rotor") or []):
        where = f"rotor[{i}]"
        f = _read_fields(c, where, raw, "rotor")
        if f is None:
            continue
        if f["spin"] is not None and f["spin"] not in SPINS:
            c.bad(f"{where}.spin", f["spin"], "'ccw' (angular velocity along +z) or 'cw'")
            f["spin"] = None
        rotors.append(f)
    if "rotor" not in data:
        c.missing("rotor", "at least three [[rotor]] tables")
    elif array("rotor") is not None and len(array("rotor")) < 3:
        c.bad("rotor", f"{len(array('rotor'))} rotor(s)", "at least three rotors")
    out["rotors"] = rotors

    if "aero" not in data:
        c.missing("aero", "an [aero] table with drag_law and drag_torque_coeff")
        out["aero"] = None
    else:
        a = _read_fields(c, "aero", table("aero") or {}, "aero") if table("aero") is not None \
            else None
        if a and a["drag_law"] is not None and a["drag_law"] not in DRAG_LAWS:
            c.bad("aero.drag_law", a["drag_law"], "'linear' (N m s) or 'quadratic' (N m s^2)")
            a["drag_law"] = None
        out["aero"] = a

    wheel = table("wheel")
    out["wheel"] = _read_fields(c, "wheel", wheel, "wheel") if wheel is not None else None

    if "control" not in data:
        c.missing("control", "a [control] table with the LQR weights and disturbance PSD")
        out["control"] = None
    else:
        out["control"] = _read_fields(c, "control", table("control") or {}, "control") if table(
            "control") is not None else None

    rv = _read_fields(c, "review", table("review") or {}, "review")
    if rv and rv["failure_sets"] is not None and rv["failure_sets"] not in FAILURE_SETS:
        c.bad("review.failure_sets", rv["failure_sets"], "one of " + ", ".join(FAILURE_SETS))
        rv["failure_sets"] = None
    out["review"] = rv

    cases = []
    for i, raw in enumerate(array("failure_case") or []):
        f = _read_fields(c, f"failure_case[{i}]", raw, "failure_case")
        if f is not None:
            cases.append(f)
    out["failure_cases"] = cases
    return out


def _cross_checks(v: dict[str, Any], c: _Collector) -> None:
    """Checks that span fields: names, hubs, failure cases, what defines the mass."""
    # unique names
    for label, items in (("part", v["parts"]), ("rotor", v["rotors"])):
        seen: dict[str, int] = {}
        for i, item in enumerate(items):
            f = item[0] if label == "part" else item
            name = f["name"]
            if name is None:
                continue
            if name in seen:
                c.bad(f"{label}[{i}].name", name, f"a unique name ({label}[{seen[name]}] has it)")
            else:
                seen[name] = i
    # coincident hubs
    hubs = [(i, r["position_m"]) for i, r in enumerate(v["rotors"]) if r["position_m"]]
    for a in range(len(hubs)):
        for b in range(a + 1, len(hubs)):
            (i, p), (j, q) = hubs[a], hubs[b]
            if math.dist(p[:2], q[:2]) < 1e-6:
                c.bad(f"rotor[{j}].position_m", list(q),
                      f"a hub apart from rotor[{i}] (coincident in x, y)")
    # parts or a full body
    body = v["body"] or {}
    full_body = all(body.get(k) is not None for k in ("mass_kg", "com_m", "inertia_kg_m2"))
    if not v["parts"] and not full_body:
        if v["body"] is None:
            c.missing("part", "at least one [[part]], or a [body] giving mass_kg, com_m and "
                      "inertia_kg_m2")
        else:
            for k in ("mass_kg", "com_m", "inertia_kg_m2"):
                if body.get(k) is None:
                    c.missing(f"body.{k}", "with no [[part]], [body] needs mass_kg, com_m and "
                              "inertia_kg_m2")
    # failure cases
    names = [r["name"] for r in v["rotors"] if r["name"]]
    for i, fc in enumerate(v["failure_cases"]):
        failed = fc["failed"]
        if failed is None:
            continue
        for name in failed:
            if name not in names:
                close = difflib.get_close_matches(name, names, n=1)
                hint = f"; did you mean '{close[0]}'?" if close else ""
                c.bad(f"failure_case[{i}].failed", name,
                      "a rotor name: " + ", ".join(names) + hint)
        if len(set(failed)) != len(failed):
            c.bad(f"failure_case[{i}].failed", list(failed), "each rotor named once")
        if names and set(failed) >= set(names):
            c.bad(f"failure_case[{i}].failed", list(failed),
                  "at least one working rotor (this case fails every rotor)")
        ratio = fc["thrust_ratio"]
        if ratio:
            for name in ratio:
                if name in failed:
                    c.bad(f"failure_case[{i}].thrust_ratio.{name}", ratio[name],
                          "ratios only for working rotors; this rotor has failed")
                elif name not in names:
                    c.bad(f"failure_case[{i}].thrust_ratio.{name}", ratio[name],
                          "a rotor name: " + ", ".join(names))
            working = [n for n in names if n not in failed]
            missing = [n for n in working if n not in ratio]
            if not any(n in failed or n not in names for n in ratio) and missing:
                c.missing(f"failure_case[{i}].thrust_ratio",
                          "a ratio for every working rotor: " + ", ".join(missing))


def _build(v: dict[str, Any], sha256: str, source: str, c: _Collector) -> Design:
    d = v["design"]
    env = v["environment"] or {}
    parts = tuple(
        Part(
            name=f["name"],
            mass_kg=f["mass_kg"],
            shape=shape,
            position_m=f["position_m"],
            size_m=f["size_m"],
            radius_m=f["radius_m"],
            outer_radius_m=f["outer_radius_m"],
            inner_radius_m=f["inner_radius_m"],
            length_m=f["length_m"],
            axis=axis,
            yaw_deg=f["yaw_deg"] or 0.0,
        )
        for f, shape, axis in v["parts"]
    )
    b = v["body"]
    body = (
        Body(mass_kg=b["mass_kg"], com_m=b["com_m"], inertia_kg_m2=b["inertia_kg_m2"])
        if b is not None
        else None
    )
    rotors = tuple(
        Rotor(
            name=r["name"],
            position_m=r["position_m"],
            spin=SPINS[r["spin"]],
            max_thrust_n=r["max_thrust_n"],
            torque_per_thrust_m=r["torque_per_thrust_m"],
            thrust_coeff_n_s2=r["thrust_coeff_n_s2"],
            rotor_inertia_kg_m2=r["rotor_inertia_kg_m2"],
            diameter_m=r["diameter_m"],
            mass_kg=r["mass_kg"],
        )
        for r in v["rotors"]
    )
    a = v["aero"]
    w = v["wheel"]
    ctl = v["control"]
    tau = ctl["disturbance_time_constant_s"]
    rv = v["review"] or {}
    defaulted = tuple(k for k in REVIEW_DEFAULTS if rv.get(k) is None)
    review = Review(
        **{k: (REVIEW_DEFAULTS[k] if rv.get(k) is None else rv[k]) for k in REVIEW_DEFAULTS},
        defaulted=defaulted,
    )
    cases = tuple(
        FailureCase(
            failed=fc["failed"],
            thrust_ratio=None if fc["thrust_ratio"] is None else tuple(fc["thrust_ratio"].items()),
        )
        for fc in v["failure_cases"]
    )
    return Design(
        name=d["name"],
        revision=d["revision"],
        prepared_by=d["prepared_by"] or "",
        checked_by=d["checked_by"] or "",
        notes=d["notes"] or "",
        gravity_m_s2=env.get("gravity_m_s2") or STANDARD_GRAVITY_M_S2,
        air_density_kg_m3=env.get("air_density_kg_m3") or ISA_SEA_LEVEL_DENSITY_KG_M3,
        parts=parts,
        body=body,
        rotors=rotors,
        aero=Aero(drag_law=a["drag_law"], drag_torque_coeff=a["drag_torque_coeff"]),
        wheel=None
        if w is None
        else Wheel(
            inertia_kg_m2=w["inertia_kg_m2"],
            max_speed_rad_s=w["max_speed_rad_s"],
            mass_kg=w["mass_kg"],
            position_m=w["position_m"],
        ),
        control=Control(
            weight_rate=ctl["weight_rate"],
            weight_attitude=ctl["weight_attitude"],
            weight_thrust=ctl["weight_thrust"],
            disturbance_torque_psd_n2_m2_s=ctl["disturbance_torque_psd_n2_m2_s"],
            disturbance_time_constant_s=tau if tau is not None
            else DEFAULT_DISTURBANCE_TIME_CONSTANT_S,
            disturbance_time_constant_assumed=tau is None,
        ),
        review=review,
        failure_cases=cases,
        sha256=sha256,
        source=source,
        warnings=tuple(c.warnings),
    )


def _has_none(v: Any) -> bool:
    """True when a normalised piece still holds a None where a value is required."""
    return v is None


def loads(text: str, source: str = "<string>", sha256: str | None = None) -> Design:
    """Validate a design given as TOML text; see :func:`load`."""
    if sha256 is None:
        sha256 = hashlib.sha256(text.encode("utf-8", "surrogatepass")).hexdigest()
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise DesignError([f"TOML syntax: {exc} -> valid TOML (key = value lines, [table] and "
                           "[[array]] headers)"], path=source) from None
    return from_dict(data, source=source, sha256=sha256)


def from_dict(data: Any, source: str = "<dict>", sha256: str = "") -> Design:
    """Validate a design given as the nested dict that TOML parsing produces."""
    c = _Collector()
    if not isinstance(data, dict):
        raise DesignError([f"(top level): {_fmt(data)} -> a TOML document (a table)"], path=source)
    try:
        v = _validate(data, c)
        if not c.problems:
            _cross_checks(v, c)
    except (TypeError, ValueError, AttributeError, KeyError, IndexError) as exc:  # pragma: no cover
        # A shape of input the checks above did not foresee: still one clear error.
        c.note(f"(file): could not be read as a design ({type(exc).__name__}: {exc})")
    if c.problems:
        raise DesignError(c.problems, path=source)
    design = _build(v, sha256, source, c)
    return design


def load(path: str | Path) -> Design:
    """Read and validate a design file.

    Parameters
    ----------
    path : str or Path
        The TOML design file (UTF-8, at most 1 MiB).

    Returns
    -------
    Design
        Frozen, SI, with ``sha256`` of the file's bytes and ``warnings`` (text lines).

    Raises
    ------
    DesignError
        Listing every problem found, one line each.
    """
    p = Path(path)
    try:
        return _load(p)
    except DesignError:
        raise
    except (OSError, ValueError) as exc:  # unreadable (permissions), a NUL byte in the path
        reason = getattr(exc, "strerror", None) or exc
        raise DesignError([f"file: {str(p)!r} cannot be read ({reason}) -> give the path of a "
                           "readable .toml design file"], path=str(p)) from None


def _load(p: Path) -> Design:
    if not p.exists():
        raise DesignError([f"file: {str(p)!r} does not exist -> give the path of a .toml design "
                           "file"], path=str(p))
    if not p.is_file():
        raise DesignError([f"file: {str(p)!r} is not a file -> give the path of a .toml design "
                           "file"], path=str(p))
    size = p.stat().st_size
    if size > MAX_FILE_BYTES:
        raise DesignError([f"file: {size} bytes -> at most {MAX_FILE_BYTES} bytes (1 MiB); a "
                           "design file holds data only"], path=str(p))
    raw = p.read_bytes()
    try:
        text = raw.decode("utf-8")
    except UnicodeDecodeError as exc:
        raise DesignError([f"file: not UTF-8 (byte {exc.start}) -> save the file as UTF-8"],
                          path=str(p)) from None
    design = loads(text, source=str(p), sha256=hashlib.sha256(raw).hexdigest())
    for text_warning in design.warnings:
        warnings.warn(f"{p.name}: {text_warning}", DesignWarning, stacklevel=3)
    return design
