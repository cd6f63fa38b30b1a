"""Design-file shorthand: rotor types, rings of rotors and arms, stand data, Bryson limits.

:func:`expand` turns a parsed design document that uses the shorthand into the plain document
that :mod:`kit.design_rules` validates (explicit ``[[rotor]]`` and ``[[part]]`` tables, LQR
weights), and collects what the plain format has no place for: rotor fits, the battery, degraded
failure cases. Problems are collected on the same collector as the rest of the validation.

Shorthand accepted (field reference in README.md, "Design file"):

- ``[[rotor_type]]`` with a ``name`` and any rotor field except ``name``, ``position_m`` and
  ``spin``; a ``[[rotor]]`` or ``[[rotor_ring]]`` names it in ``type``; its own fields win.
- ``[[rotor_ring]]``: ``count`` rotors on a circle of ``radius_m`` about the design origin at
  height ``height_m``, the first at ``first_angle_deg`` from +x (towards +y), then every
  ``angle_step_deg`` (default 360 / count); spins from the ``spins`` pattern, repeated; names
  ``name_prefix`` + 1, 2, ... (or a ``names`` list).
- ``[[arm_ring]]``: the same for parts; each arm's ``yaw_deg`` is its angle, ``axis`` is x.
- ``stand_data = "file.csv"`` on a rotor, rotor type or ring: coefficients fitted by
  :mod:`kit.rotorfit` from a file beside the design file.
- ``[control]`` ``max_rate_rad_s``, ``max_tilt_deg``, ``max_thrust_deviation_n``: Bryson's rule,
  weight = 1 / (largest acceptable value)^2 (Bryson & Ho, *Applied Optimal Control*, 1975,
  section 5.4, from memory).
- ``[battery]`` ``nominal_voltage_v``, ``end_voltage_v``; ``[[failure_case]]`` ``degraded``
  ``{rotor = fraction of max thrust}``; ``[review]`` ``degraded_fraction``.
"""

from __future__ import annotations

import copy
import difflib
import math
import re
from dataclasses import dataclass, field
from pathlib import Path, PurePosixPath
from typing import Any

from kit import rotorfit
from kit.design_rules import _FIELDS, SPINS, _Collector, _is_number

_ROTOR_SHARED = tuple(k for k in _FIELDS["rotor"] if k not in ("name", "position_m", "spin"))
_TYPE_KEYS = ("name", *_ROTOR_SHARED, "stand_data")
_RING_KEYS = ("count", "radius_m", "first_angle_deg", "angle_step_deg", "height_m", "spins",
              "name_prefix", "names", "first_index", "type", *_ROTOR_SHARED, "stand_data")
_ARM_KEYS = ("count", "radius_m", "first_angle_deg", "angle_step_deg", "height_m",
             "name_prefix", "names", "first_index",
             *(k for k in _FIELDS["part"] if k not in ("name", "position_m", "yaw_deg")))
_BRYSON = ("max_rate_rad_s", "max_tilt_deg", "max_thrust_deviation_n")
_WEIGHTS = ("weight_rate", "weight_attitude", "weight_thrust")


@dataclass(frozen=True)
class Battery:
    """Battery voltages for the low-battery load case, in V."""

    nominal_voltage_v: float
    end_voltage_v: float

    @property
    def thrust_scale(self) -> float:
        """Max-thrust factor at end of discharge, (V_end / V_nom)^2 (common practice, no
        source: thrust ~ speed^2, speed ~ voltage for a given motor and propeller)."""
        return (self.end_voltage_v / self.nominal_voltage_v) ** 2

    def _repr_html_(self) -> str:
        return (f"<p>Battery: {self.nominal_voltage_v:g} V nominal, {self.end_voltage_v:g} V at "
                f"end of discharge; max thrust derated by (V_end/V_nom)^2 = "
                f"{self.thrust_scale:.4g} for the low-battery load case (common practice, no "
                "source).</p>")


@dataclass(frozen=True)
class DegradedCase:
    """A failure case in which some rotors keep only a fraction of their max thrust."""

    failed: tuple[str, ...]
    degraded: tuple[tuple[str, float], ...]

    def fractions(self) -> dict[str, float]:
        return dict(self.degraded)

    @property
    def label(self) -> str:
        parts = [f"failed: {', '.join(self.failed)}"] if self.failed else []
        parts += [f"{n} at {100 * f:g} % thrust" for n, f in self.degraded]
        return "degraded: " + "; ".join(parts)


@dataclass(frozen=True)
class BrysonLimits:
    """Largest acceptable deviations and the LQR weights Bryson's rule makes of them."""

    max_rate_rad_s: float
    max_tilt_deg: float
    max_thrust_deviation_n: float

    @property
    def weights(self) -> dict[str, float]:
        """weight = 1 / max^2 (tilt converted to rad)."""
        return {"weight_rate": 1.0 / self.max_rate_rad_s ** 2,
                "weight_attitude": 1.0 / math.radians(self.max_tilt_deg) ** 2,
                "weight_thrust": 1.0 / self.max_thrust_deviation_n ** 2}

    def _repr_html_(self) -> str:
        w = self.weights
        rows = [("body rate p, q", f"{self.max_rate_rad_s:g} rad/s", w["weight_rate"]),
                ("tilt n_x, n_y", f"{self.max_tilt_deg:g} deg", w["weight_attitude"]),
                ("each thrust", f"{self.max_thrust_deviation_n:g} N", w["weight_thrust"])]
        body = "".join(f"<tr><td>{a}</td><td>{b}</td><td>{c:.4g}</td></tr>" for a, b, c in rows)
        return ("<table><caption>LQR weights by Bryson's rule, weight = 1 / max^2 (Bryson & Ho, "
                "Applied Optimal Control, 1975)</caption><tr><th>deviation</th><th>largest "
                f"acceptable</th><th>weight</th></tr>{body}</table>")


@dataclass(frozen=True)
class Expansion:
    """The plain document and what the shorthand added beside it."""

    data: dict
    fits: tuple[rotorfit.RotorFit, ...] = ()
    battery: Battery | None = None
    degraded_cases: tuple[DegradedCase, ...] = ()
    degraded_fraction: float | None = None
    bryson: BrysonLimits | None = None
    generated: dict = field(default_factory=dict)


def _tables(c: _Collector, data: dict, key: str) -> list[dict]:
    value = data.get(key)
    if value is None:
        return []
    if not (isinstance(value, list) and all(isinstance(t, dict) for t in value)):
        c.bad(key, value, f"an array of tables [[{key}]]")
        return []
    return value


def _unknown(c: _Collector, where: str, table: dict, allowed) -> None:
    for key in table:
        if key not in allowed:
            close = difflib.get_close_matches(str(key), list(allowed), n=1, cutoff=0.6)
            hint = f"did you mean '{close[0]}'?" if close else "allowed: " + ", ".join(allowed)
            c.bad(f"{where}.{key}", table[key], f"unknown key; {hint}")


def _label(kind: str, i: int, table: dict) -> str:
    name = table.get("name")
    return f"{kind} {name!r}" if isinstance(name, str) and name.strip() else f"{kind}[{i}]"


def _int(c: _Collector, where: str, value: Any, low: int) -> int | None:
    if isinstance(value, bool) or not isinstance(value, int) or value < low or value > 1000:
        c.bad(where, value, f"a whole number from {low} to 1000")
        return None
    return value


def _num(c: _Collector, where: str, value: Any, kind: str = "num") -> float | None:
    return c.number(where, value, kind)


def _ring_names(c: _Collector, where: str, ring: dict, count: int, default: str) -> list | None:
    if "names" in ring:
        names = ring["names"]
        if "name_prefix" in ring or "first_index" in ring:
            c.bad(f"{where}.names", names, "either names or name_prefix/first_index, not both")
            return None
        if not (isinstance(names, list) and len(names) == count
                and all(isinstance(n, str) and n.strip() for n in names)):
            c.bad(f"{where}.names", names, f"a list of {count} non-empty names")
            return None
        return [n.strip() for n in names]
    prefix = ring.get("name_prefix", default)
    if not isinstance(prefix, str) or not prefix.strip():
        c.bad(f"{where}.name_prefix", prefix, "a non-empty text string")
        return None
    first = _int(c, f"{where}.first_index", ring.get("first_index", 1), 0)
    if first is None:
        return None
    return [f"{prefix}{first + k}" for k in range(count)]


def _angles(c: _Collector, where: str, ring: dict) -> tuple[int, list[float], float, float] | None:
    if "count" not in ring:
        c.missing(f"{where}.count", "a whole number of items on the ring")
        return None
    count = _int(c, f"{where}.count", ring["count"], 1)
    if "radius_m" not in ring:
        c.missing(f"{where}.radius_m", "a number > 0 (ring radius about the design origin)")
        return None
    radius = _num(c, f"{where}.radius_m", ring["radius_m"], "pos")
    first = _num(c, f"{where}.first_angle_deg", ring.get("first_angle_deg", 0.0))
    height = _num(c, f"{where}.height_m", ring.get("height_m", 0.0))
    if count is None or radius is None or first is None or height is None:
        return None
    step = _num(c, f"{where}.angle_step_deg", ring.get("angle_step_deg", 360.0 / count))
    if step is None:
        return None
    return count, [(first + k * step) % 360.0 for k in range(count)], radius, height


def _xy(radius: float, angle_deg: float) -> tuple[float, float]:
    a = math.radians(angle_deg)
    return round(radius * math.cos(a), 12) + 0.0, round(radius * math.sin(a), 12) + 0.0


def _safe_relative(c: _Collector, where: str, value: Any, base_dir: Path | None) -> Path | None:
    if not isinstance(value, str) or not value.strip():
        c.bad(where, value, "a CSV file name, relative to the design file")
        return None
    rel = PurePosixPath(value.replace("\\", "/"))
    if rel.is_absolute() or ".." in rel.parts or re.match(r"^[A-Za-z]:", value):
        c.bad(where, value, "a path relative to the design file, inside its folder (no '..', "
                            "not absolute)")
        return None
    if base_dir is None:
        c.bad(where, value, "stand data need a design file on disk (the path is relative to it)")
        return None
    return base_dir.joinpath(*rel.parts)


def expand(data: dict, c: _Collector, base_dir: Path | None = None) -> Expansion:
    """Expand the shorthand of a parsed design document.

    Parameters
    ----------
    data : dict
        The parsed TOML document (not modified).
    c : _Collector
        Receives problems and warnings.
    base_dir : Path or None
        Folder of the design file; stand-data paths are relative to it.

    Returns
    -------
    Expansion
        ``data`` is the plain document, every shorthand key replaced.
    """
    shorthand = {"rotor_type", "rotor_ring", "arm_ring", "battery"}
    uses = shorthand & set(data)
    uses |= {"rotor"} if any(isinstance(r, dict) and ("type" in r or "stand_data" in r)
                             for r in (data.get("rotor") if isinstance(data.get("rotor"), list)
                                       else [])) else set()
    ctl0 = data.get("control")
    uses |= {"control"} if isinstance(ctl0, dict) and set(_BRYSON) & set(ctl0) else set()
    rv0 = data.get("review")
    uses |= {"review"} if isinstance(rv0, dict) and "degraded_fraction" in rv0 else set()
    fc0 = data.get("failure_case")
    uses |= {"failure_case"} if isinstance(fc0, list) and any(
        isinstance(f, dict) and "degraded" in f for f in fc0) else set()
    if not uses:
        return Expansion(data=data)
    out = copy.deepcopy(data)
    for key in shorthand:
        out.pop(key, None)

    # rotor types
    types: dict[str, dict] = {}
    for i, t in enumerate(_tables(c, data, "rotor_type")):
        where = _label("rotor_type", i, t)
        _unknown(c, where, t, _TYPE_KEYS)
        name = t.get("name")
        if not isinstance(name, str) or not name.strip():
            c.bad(f"{where}.name", name, "a non-empty text string")
            continue
        if name.strip() in types:
            c.bad(f"{where}.name", name, "a unique rotor type name")
            continue
        types[name.strip()] = {k: v for k, v in t.items() if k != "name"}

    def with_type(where: str, table: dict) -> dict:
        if "type" not in table:
            return dict(table)
        tname = table["type"]
        if not isinstance(tname, str) or tname.strip() not in types:
            close = difflib.get_close_matches(str(tname), list(types), n=1)
            hint = f"; did you mean '{close[0]}'?" if close else ""
            c.bad(f"{where}.type", tname, "a [[rotor_type]] name: " + (", ".join(types) or
                                                                      "(none given)") + hint)
            return {k: v for k, v in table.items() if k != "type"}
        merged = copy.deepcopy(types[tname.strip()])
        merged.update({k: v for k, v in table.items() if k != "type"})
        return merged

    rotors: list[dict] = []
    generated: dict[str, str] = {}
    raw_rotors = data.get("rotor")
    if raw_rotors is not None and not (isinstance(raw_rotors, list)
                                       and all(isinstance(t, dict) for t in raw_rotors)):
        rotors = raw_rotors  # left for the plain validation to report
    else:
        for i, r in enumerate(raw_rotors or []):
            rotors.append(with_type(_label("rotor", i, r), r))
    if isinstance(rotors, list):
        for i, ring in enumerate(_tables(c, data, "rotor_ring")):
            where = f"rotor_ring[{i}]"
            _unknown(c, where, ring, _RING_KEYS)
            geo = _angles(c, where, ring)
            if geo is None:
                continue
            count, angles, radius, height = geo
            names = _ring_names(c, where, ring, count, "rotor ")
            spins = ring.get("spins")
            if not (isinstance(spins, list) and spins
                    and all(isinstance(s, str) and s in SPINS for s in spins)):
                c.bad(f"{where}.spins", spins, "a list of 'ccw'/'cw', repeated round the ring")
                continue
            if names is None:
                continue
            base = with_type(where, {k: v for k, v in ring.items() if k not in _RING_KEYS[:9]})
            for k in range(count):
                x, y = _xy(radius, angles[k])
                rotor = {"name": names[k], "position_m": [x, y, height],
                         "spin": spins[k % len(spins)], **copy.deepcopy(base)}
                rotors.append(rotor)
                generated[names[k]] = where
        out["rotor"] = rotors if rotors or "rotor" in data else out.get("rotor")
        if not rotors and "rotor" not in data:
            out.pop("rotor", None)

    # arms
    arms = _tables(c, data, "arm_ring")
    if arms:
        parts = out.get("part")
        parts = parts if isinstance(parts, list) else []
        for i, ring in enumerate(arms):
            where = f"arm_ring[{i}]"
            _unknown(c, where, ring, _ARM_KEYS)
            geo = _angles(c, where, ring)
            if geo is None:
                continue
            count, angles, radius, height = geo
            names = _ring_names(c, where, ring, count, "arm ")
            if names is None:
                continue
            base = {k: v for k, v in ring.items() if k not in _ARM_KEYS[:8]}
            base.setdefault("axis", "x")
            for k in range(count):
                x, y = _xy(radius, angles[k])
                parts.append({"name": names[k], **copy.deepcopy(base),
                              "position_m": [x, y, height], "yaw_deg": angles[k]})
                generated[names[k]] = where
        if isinstance(data.get("part", []), list):
            out["part"] = parts

    # stand data
    fits: list[rotorfit.RotorFit] = []
    if isinstance(rotors, list):
        by_file: dict[str, list[int]] = {}
        for i, r in enumerate(rotors):
            if isinstance(r, dict) and "stand_data" in r:
                where = f"{_label('rotor', i, r)}.stand_data"
                for k in ("thrust_coeff_n_s2", "torque_per_thrust_m"):
                    if k in r:
                        c.bad(f"{_label('rotor', i, r)}.{k}", r[k],
                              "not given when stand_data is: the stand data give it")
                shown = r.pop("stand_data")
                path = _safe_relative(c, where, shown, base_dir)
                if path is not None:
                    by_file.setdefault(shown, (path, []))[1].append(i)
        for shown, (path, idx) in by_file.items():
            names = tuple(str(rotors[i].get("name")) for i in idx)
            try:
                f = rotorfit.fit(rotorfit.read_stand_file(path, shown), names)
            except rotorfit.StandDataError as exc:
                c.note(f"{_label('rotor', idx[0], rotors[idx[0]])}.stand_data: {exc}")
                for i in idx:  # the problem is recorded; no second "missing" line per rotor
                    rotors[i].setdefault("thrust_coeff_n_s2", 1.0)
                    rotors[i].setdefault("torque_per_thrust_m", 1.0)
                continue
            fits.append(f)
            for reason in f.poor:
                c.warn(f"stand data {shown}: poor fit ({reason}); check the data or the units")
            for i in idx:
                r = rotors[i]
                r["thrust_coeff_n_s2"] = f.thrust_coeff_n_s2
                r["torque_per_thrust_m"] = f.torque_per_thrust_m
                top = r.get("max_thrust_n")
                if _is_number(top) and top > 1.1 * f.max_measured_thrust_n:
                    c.warn(f"{_label('rotor', i, r)}.max_thrust_n = {top:g} N is beyond the "
                           f"largest measured thrust in {shown} ({f.max_measured_thrust_n:.4g} "
                           "N) by more than 10 %: the fit is extrapolated")

    # battery
    battery = None
    if "battery" in data:
        b = data["battery"]
        if not isinstance(b, dict):
            c.bad("battery", b, "a table [battery] with nominal_voltage_v and end_voltage_v")
        else:
            _unknown(c, "battery", b, ("nominal_voltage_v", "end_voltage_v"))
            vals = {}
            for k in ("nominal_voltage_v", "end_voltage_v"):
                if k not in b:
                    c.missing(f"battery.{k}", "a number > 0, in V")
                else:
                    vals[k] = c.number(f"battery.{k}", b[k], "pos")
            if len(vals) == 2 and None not in vals.values():
                if vals["end_voltage_v"] >= vals["nominal_voltage_v"]:
                    c.bad("battery.end_voltage_v", b["end_voltage_v"],
                          f"less than nominal_voltage_v ({vals['nominal_voltage_v']:g} V)")
                else:
                    battery = Battery(**vals)

    # Bryson's rule
    bryson = None
    ctl = out.get("control")
    if isinstance(ctl, dict) and set(_BRYSON) & set(ctl):
        given = [k for k in _WEIGHTS if k in ctl]
        if given:
            c.bad(f"control.{given[0]}", ctl[given[0]],
                  "either the weights or max_rate_rad_s, max_tilt_deg, max_thrust_deviation_n "
                  "(Bryson's rule), not both")
        vals = {}
        for k in _BRYSON:
            if k not in ctl:
                c.missing(f"control.{k}", "a number > 0 (all three limits for Bryson's rule)")
            else:
                vals[k] = c.number(f"control.{k}", ctl.pop(k), "pos")
        if len(vals) == 3 and None not in vals.values() and not given:
            bryson = BrysonLimits(**vals)
            ctl.update(bryson.weights)

    # degraded cases
    names_all = [r.get("name") for r in rotors if isinstance(r, dict)] \
        if isinstance(rotors, list) else []
    degraded: list[DegradedCase] = []
    cases = out.get("failure_case")
    if isinstance(cases, list):
        keep = []
        for i, fc in enumerate(cases):
            if not (isinstance(fc, dict) and "degraded" in fc):
                keep.append(fc)
                continue
            where = f"failure_case[{i}]"
            _unknown(c, where, fc, ("failed", "degraded"))
            failed = fc.get("failed", [])
            if not (isinstance(failed, list) and all(isinstance(n, str) and n in names_all
                                                     for n in failed)
                    and len(set(failed)) == len(failed)):
                c.bad(f"{where}.failed", failed, "a list of rotor names, each once: "
                      + ", ".join(map(str, names_all)))
                continue
            table = fc["degraded"]
            if not isinstance(table, dict) or not table:
                c.bad(f"{where}.degraded", table, "a table {rotor name = fraction of max "
                                                  "thrust, 0 to 1}")
                continue
            ok = True
            pairs = []
            for n, x in table.items():
                if n not in names_all or n in failed:
                    c.bad(f"{where}.degraded.{n}", x, "a working rotor's name: "
                          + ", ".join(str(m) for m in names_all if m not in failed))
                    ok = False
                elif not _is_number(x) or not 0 <= x <= 1:
                    c.bad(f"{where}.degraded.{n}", x, "a fraction of max thrust from 0 to 1")
                    ok = False
                else:
                    pairs.append((n, float(x)))
            if ok:
                degraded.append(DegradedCase(tuple(failed), tuple(pairs)))
        out["failure_case"] = keep
        if not keep:
            out.pop("failure_case")
    fraction = None
    rv = out.get("review")
    if isinstance(rv, dict) and "degraded_fraction" in rv:
        x = rv.pop("degraded_fraction")
        if not _is_number(x) or not 0 <= x < 1:
            c.bad("review.degraded_fraction", x, "a fraction of max thrust, 0 <= x < 1, for one "
                                                 "degraded rotor at a time")
        else:
            fraction = float(x)
    return Expansion(data=out, fits=tuple(fits), battery=battery,
                     degraded_cases=tuple(degraded), degraded_fraction=fraction, bryson=bryson,
                     generated=generated)


_INDEXED = re.compile(r"\b(part|rotor)\[(\d+)\]")


def name_problems(lines: list[str], data: Any) -> list[str]:
    """Replace ``part[i]`` / ``rotor[i]`` in messages by the part's or rotor's name.

    A name used once becomes ``part 'arm 1'``; a name used twice keeps its index as well
    (``part[1] 'body'``); an item without a usable name keeps ``part[i]``.

    Parameters
    ----------
    lines : list of str
        Problem or warning lines.
    data : dict
        The (expanded) document the lines refer to.
    """
    if not isinstance(data, dict):
        return list(lines)
    names: dict[str, list] = {}
    for label in ("part", "rotor"):
        items = data.get(label)
        items = items if isinstance(items, list) else []
        names[label] = [t.get("name") if isinstance(t, dict) and isinstance(t.get("name"), str)
                        and t.get("name").strip() else None for t in items]

    def sub(m: re.Match) -> str:
        label, i = m.group(1), int(m.group(2))
        seq = names[label]
        if i >= len(seq) or seq[i] is None:
            return m.group(0)
        name = seq[i].strip()
        if sum(1 for n in seq if n is not None and n.strip() == name) > 1:
            return f"{label}[{i}] {name!r}"
        return f"{label} {name!r}"

    return [_INDEXED.sub(sub, line) for line in lines]


# ---------------------------------------------------------------------------------------------
# The expanded document as TOML text (``rotorbook check --expanded``)
# ---------------------------------------------------------------------------------------------

_BARE = re.compile(r"^[A-Za-z0-9_-]+$")


def _key(k: str) -> str:
    return k if _BARE.match(k) else _toml_str(k)


def _toml_str(s: str) -> str:
    """A TOML basic string: quotes, backslashes, control characters (U+007F too) escaped, a lone
    surrogate (not encodable) as U+FFFD."""
    out = ['"']
    for c in s:
        o = ord(c)
        if c == '"':
            out.append('\\"')
        elif c == "\\":
            out.append("\\\\")
        elif (o < 0x20 and c != "\t") or o == 0x7F:
            out.append(f"\\u{o:04x}")
        elif 0xD800 <= o <= 0xDFFF:
            out.append("\\ufffd")
        else:
            out.append(c)
    out.append('"')
    return "".join(out)


def toml_value(v: Any) -> str:
    """One TOML value, inline (tables as inline tables; NaN and infinities as TOML spells them).

    Parameters
    ----------
    v : object
        A plain value (bool, int, float, str, list, dict); anything else is written as text.
    """
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, int):
        return str(v)
    if isinstance(v, float):
        if math.isnan(v):
            return "nan"
        if math.isinf(v):
            return "inf" if v > 0 else "-inf"
        return repr(v)
    if isinstance(v, str):
        return _toml_str(v)
    if isinstance(v, list):
        return "[" + ", ".join(toml_value(x) for x in v) + "]"
    if isinstance(v, dict):
        return "{ " + ", ".join(f"{_key(str(k))} = {toml_value(x)}" for k, x in v.items()) + " }"
    return _toml_str(str(v))


def to_toml(doc: dict) -> str:
    """TOML text of a plain document (tables, arrays of tables, scalars, lists, inline tables).

    Parameters
    ----------
    doc : dict
        The document.
    """
    lines: list[str] = []
    scalars = {k: v for k, v in doc.items() if not isinstance(v, dict)
               and not (isinstance(v, list) and v and all(isinstance(t, dict) for t in v))}
    for k, v in scalars.items():
        lines.append(f"{_key(k)} = {toml_value(v)}")
    for k, v in doc.items():
        if k in scalars:
            continue
        if isinstance(v, dict):
            lines += ["", f"[{_key(k)}]"]
            lines += [f"{_key(str(a))} = {toml_value(b)}" for a, b in v.items()]
        else:
            for t in v:
                lines += ["", f"[[{_key(k)}]]"]
                lines += [f"{_key(str(a))} = {toml_value(b)}" for a, b in t.items()]
    return "\n".join(lines).lstrip("\n") + "\n"


def expanded_text(data: dict, base_dir: Path | None = None, header: str = "") -> str:
    """The expanded document of a valid design as TOML, with fitted values and notes as comments.

    Parameters
    ----------
    data : dict
        The parsed design document.
    base_dir : Path or None
        Folder of the design file (for stand data).
    header : str
        A first comment line.
    """
    c = _Collector()
    ex = expand(data, c, base_dir)
    notes = [f"# {header}"] if header else []
    notes.append("# Expanded by rotorbook: rotor types, rings, stand data and Bryson limits "
                 "written out as plain fields.")
    for f in ex.fits:
        notes.append(f"# fitted from {f.file} (sha256 {f.sha256}): thrust_coeff_n_s2 "
                     f"{f.thrust_coeff_n_s2:.6g} +- {f.thrust_coeff_se_n_s2:.2g}, "
                     f"torque_per_thrust_m {f.torque_per_thrust_m:.6g} +- "
                     f"{f.torque_per_thrust_se_m:.2g} ({f.n_points} points)")
    if ex.bryson is not None:
        notes.append("# control weights by Bryson's rule from max_rate_rad_s "
                     f"{ex.bryson.max_rate_rad_s:g}, max_tilt_deg {ex.bryson.max_tilt_deg:g}, "
                     f"max_thrust_deviation_n {ex.bryson.max_thrust_deviation_n:g}")
    if ex.battery is not None:
        notes.append(f"# battery: {ex.battery.nominal_voltage_v:g} V nominal, "
                     f"{ex.battery.end_voltage_v:g} V end of discharge (max thrust x "
                     f"{ex.battery.thrust_scale:.4g})")
    for dc in ex.degraded_cases:
        notes.append(f"# failure case {dc.label}")
    if ex.degraded_fraction is not None:
        notes.append(f"# review: each rotor degraded to {ex.degraded_fraction:g} of max thrust")
    return "\n".join(notes) + "\n\n" + to_toml(ex.data)


__all__ = ["Battery", "BrysonLimits", "DegradedCase", "Expansion", "expand", "expanded_text",
           "name_problems", "to_toml"]
