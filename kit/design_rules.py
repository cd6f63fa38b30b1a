"""Validation rules of design files: the fields, their kinds, and the cross-field checks.

:func:`kit.design.from_dict` runs these rules over the parsed TOML document, collecting every
problem (``field path: bad value -> what is allowed``) before one
:class:`~kit.errors.DesignError` is raised. The constants of the file format live here too and
are re-exported by :mod:`kit.design`.
"""

from __future__ import annotations

import difflib
import math
from typing import Any

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
#: Rules that pick a case's operating point from its candidate equilibria
#: (``[control] operating_point``; the first is the default).
OPERATING_POINT_RULES = ("prefer-static", "least-effort", "least-power", "static-only")

#: Review thresholds and their defaults (common practice, no source; the gyro range is
#: 2000 deg/s, a common MEMS gyro full scale).
REVIEW_DEFAULTS: dict[str, Any] = {
    "min_thrust_to_weight": 2.0,
    "max_hover_thrust_fraction": 0.6,
    "gyro_full_scale_rad_s": 34.9,
    "max_spin_fraction_of_gyro": 0.8,
    "max_saturation_probability": 0.01,
    "failure_sets": "single",
    "min_damping_ratio": 0.1,
    "min_lag_margin_s": 0.03,
    "max_height_loss_m": 5.0,
    "max_tilt_during_recovery_deg": 60.0,
    "crash_height_loss_m": 20.0,
}
#: Time from a rotor failure to the recovery law taking over, s (common practice, no source).
DEFAULT_FAILURE_DETECTION_DELAY_S = 0.05
#: Rate of the flight controller's attitude loop, Hz (common practice, no source).
DEFAULT_LOOP_RATE_HZ = 500.0
#: Assumed time constant of the disturbance-torque filter, s (an assumption, marked as such).
DEFAULT_DISTURBANCE_TIME_CONSTANT_S = 0.05

#: Limits of the numbers in a design file: field name -> (smallest magnitude, largest
#: magnitude, unit). They lie far outside any multirotor that flies (a 1 mg part, a 10 t
#: vehicle, a 100 m frame) and keep every figure the kit derives from them (inertia ~ m l^2,
#: rotor speed sqrt(f / k_f), torques, Riccati solutions) well inside the float range. A value
#: of 0 stays allowed where the field allows 0. README, "Limits", lists them. (Common practice,
#: no source.)
BOUNDS: dict[str, tuple[float, float, str]] = {
    "mass_kg": (1e-6, 1e4, "kg"),
    "position_m": (0.0, 100.0, "m"),
    "com_m": (0.0, 100.0, "m"),
    "size_m": (1e-6, 100.0, "m"),
    "radius_m": (1e-6, 100.0, "m"),
    "outer_radius_m": (1e-6, 100.0, "m"),
    "inner_radius_m": (0.0, 100.0, "m"),
    "length_m": (1e-6, 100.0, "m"),
    "yaw_deg": (0.0, 360.0, "deg"),
    "diameter_m": (1e-3, 50.0, "m"),
    "max_thrust_n": (1e-3, 1e6, "N"),
    "torque_per_thrust_m": (1e-6, 1.0, "m"),
    "thrust_coeff_n_s2": (1e-12, 10.0, "N s^2"),
    "rotor_inertia_kg_m2": (0.0, 1e3, "kg m^2"),
    "inertia_kg_m2": (0.0, 1e6, "kg m^2"),
    "max_speed_rad_s": (1e-3, 1e5, "rad/s"),
    "gravity_m_s2": (0.1, 100.0, "m/s^2"),
    "air_density_kg_m3": (1e-4, 100.0, "kg/m^3"),
    "drag_torque_coeff": (0.0, 1e4, "N m s or N m s^2"),
    "weight_rate": (1e-9, 1e9, ""),
    "weight_attitude": (1e-9, 1e9, ""),
    "weight_thrust": (1e-9, 1e9, ""),
    "disturbance_torque_psd_n2_m2_s": (1e-15, 1e6, "N^2 m^2 s"),
    "disturbance_time_constant_s": (1e-4, 100.0, "s"),
    "min_thrust_to_weight": (1e-3, 100.0, ""),
    "gyro_full_scale_rad_s": (1e-3, 1e4, "rad/s"),
    "thrust_ratio": (0.0, 1e6, ""),
}
#: Most rotors, parts and failure cases in one file (an 18-rotor vehicle needs more; say so in
#: an issue). The analysis time grows with the rotor count (pairs of 16 rotors: 136 cases).
MAX_ROTORS = 16
MAX_PARTS = 500
MAX_FAILURE_CASES = 100


def _bound_field(where: str) -> str:
    """The field name of a problem path: ``rotor[2].position_m[1]`` -> ``position_m``;
    ``failure_case[0].thrust_ratio.m1`` -> ``thrust_ratio``."""
    parts = where.split(".")
    for part in reversed(parts):
        name = part.split("[", 1)[0]
        if name in BOUNDS:
            return name
    return ""


def _fmt_limit(x: float) -> str:
    return f"{x:g}"


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
        "motor_time_constant_s": ("nonneg_quiet", False),
        "min_thrust_n": ("nonneg_quiet", False),
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
        "operating_point": ("str", False),
        "motor_time_constant_s": ("nonneg_quiet", False),
        "failure_detection_delay_s": ("nonneg_quiet", False),
        "loop_rate_hz": ("pos", False),
    },
    "review": {
        "min_thrust_to_weight": ("pos", False),
        "max_hover_thrust_fraction": ("fraction", False),
        "gyro_full_scale_rad_s": ("pos", False),
        "max_spin_fraction_of_gyro": ("fraction", False),
        "max_saturation_probability": ("fraction", False),
        "failure_sets": ("str", False),
        "min_damping_ratio": ("fraction", False),
        "min_lag_margin_s": ("pos", False),
        "max_height_loss_m": ("pos", False),
        "max_tilt_during_recovery_deg": ("pos", False),
        "crash_height_loss_m": ("pos", False),
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
        bound = BOUNDS.get(_bound_field(where))
        if bound is not None and x != 0:
            lo, hi, unit = bound
            if not lo <= abs(x) <= hi:
                unit = f" {unit}" if unit else ""
                if kind in ("num", "vec3") or where.split(".")[-1].startswith("inertia_kg_m2["):
                    allowed = (f"a magnitude between {_fmt_limit(lo)} and {_fmt_limit(hi)}{unit}"
                               if lo > 0 else f"a number between -{_fmt_limit(hi)} and "
                               f"{_fmt_limit(hi)}{unit}")
                else:
                    allowed = f"a number between {_fmt_limit(lo)} and {_fmt_limit(hi)}{unit}"
                self.bad(where, value, allowed + " (limits in README, Limits)")
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
    for name, most in (("part", MAX_PARTS), ("rotor", MAX_ROTORS),
                       ("failure_case", MAX_FAILURE_CASES)):
        if array(name) is not None and len(array(name)) > most:
            c.bad(name, f"{len(array(name))} [[{name}]] tables",
                  f"at most {most} (limits in README, Limits)")
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
        ctl = out["control"]
        if ctl and ctl.get("operating_point") is not None and (
                ctl["operating_point"] not in OPERATING_POINT_RULES):
            c.bad("control.operating_point", ctl["operating_point"],
                  "one of " + ", ".join(OPERATING_POINT_RULES))
            ctl["operating_point"] = None

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


def _coaxial(a: dict, b: dict) -> bool:
    """Two rotors on one hub, one above the other, spinning opposite ways (a coaxial pair)."""
    return (a["spin"] is not None and b["spin"] is not None and a["spin"] != b["spin"]
            and abs(a["position_m"][2] - b["position_m"][2]) > 1e-6)


def _cross_checks(v: dict[str, Any], c: _Collector) -> None:
    """Checks that span fields: names, hubs, failure cases, what defines the mass."""
    # idle thrust below the largest thrust
    for i, r in enumerate(v["rotors"]):
        lo, hi = r.get("min_thrust_n"), r.get("max_thrust_n")
        if lo is not None and hi is not None and lo >= hi:
            c.bad(f"rotor[{i}].min_thrust_n", lo, f"a number below max_thrust_n ({hi!r})")
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
            if math.dist(p[:2], q[:2]) < 1e-6 and not _coaxial(v["rotors"][i], v["rotors"][j]):
                c.bad(f"rotor[{j}].position_m", list(q),
                      f"a hub apart from rotor[{i}] (coincident in x, y), or a coaxial pair "
                      "with it (opposite spins, one above the other)")
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
