"""Design files: read, validate and normalise a vehicle description.

A design file is TOML, read with :mod:`tomllib` and never executed. Every value is SI and every
field carries its unit in its name (``mass_kg``, ``position_m``). :func:`load` collects every
problem in the file and raises one :class:`~kit.errors.DesignError` that lists each, as
``field path: bad value -> what is allowed``. Valid files give a frozen :class:`Design`.

The field reference is in README.md ("Design file"); the conventions (frames, spin signs) are
those of DESIGN.md: design frame x forward, y left, z up; every rotor thrusts along +z.
"""

from __future__ import annotations

import hashlib
import tomllib
import warnings
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from kit import design_expand
from kit.design_expand import Battery, BrysonLimits, DegradedCase  # noqa: F401 (re-exported)
from kit.design_rules import (  # noqa: F401 (constants re-exported for users of kit.design)
    _FIELDS,
    _GEOMETRY_FIELDS,
    _TOP,
    AXES,
    DEFAULT_DISTURBANCE_TIME_CONSTANT_S,
    DEFAULT_FAILURE_DETECTION_DELAY_S,
    DEFAULT_LOOP_RATE_HZ,
    DRAG_LAWS,
    FAILURE_SETS,
    ISA_SEA_LEVEL_DENSITY_KG_M3,
    MAX_FILE_BYTES,
    OPERATING_POINT_RULES,
    REVIEW_DEFAULTS,
    SHAPES,
    SPINS,
    STANDARD_GRAVITY_M_S2,
    _Collector,
    _cross_checks,
    _fmt,
    _validate,
)
from kit.errors import DesignError, DesignWarning

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
    motor_time_constant_s: float = 0.0
    min_thrust_n: float = 0.0


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
    operating_point: str = OPERATING_POINT_RULES[0]
    failure_detection_delay_s: float = DEFAULT_FAILURE_DETECTION_DELAY_S
    loop_rate_hz: float = DEFAULT_LOOP_RATE_HZ
    motor_time_constant_s: float = 0.0


@dataclass(frozen=True)
class Review:
    """Thresholds of the design checks."""

    min_thrust_to_weight: float = 2.0
    max_hover_thrust_fraction: float = 0.6
    gyro_full_scale_rad_s: float = 34.9
    max_spin_fraction_of_gyro: float = 0.8
    max_saturation_probability: float = 0.01
    failure_sets: str = "single"
    min_damping_ratio: float = 0.1
    min_lag_margin_s: float = 0.03
    max_height_loss_m: float = 5.0
    max_tilt_during_recovery_deg: float = 60.0
    #: Height lost at which a flown recovery counts as crashed and its integration stops, in m.
    crash_height_loss_m: float = 20.0
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
    #: Rotor coefficients fitted from stand data (kit.rotorfit.RotorFit), one per file.
    rotor_fits: tuple = ()
    battery: Battery | None = None
    degraded_cases: tuple[DegradedCase, ...] = ()
    #: ``review.degraded_fraction``: each rotor degraded to this fraction, one at a time.
    degraded_fraction: float | None = None
    #: The largest deviations the LQR weights were made from (Bryson's rule), if given so.
    bryson: BrysonLimits | None = None

    @property
    def rotor_names(self) -> tuple[str, ...]:
        return tuple(r.name for r in self.rotors)

    def rotor_index(self, name: str) -> int:
        return self.rotor_names.index(name)


# ---------------------------------------------------------------------------------------------


def _first(*values):
    """The first value that is not None (a field, then its file-level default)."""
    return next(x for x in values if x is not None)


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
    ctl = v["control"]
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
            motor_time_constant_s=_first(r.get("motor_time_constant_s"),
                                         ctl.get("motor_time_constant_s"), 0.0),
            min_thrust_n=_first(r.get("min_thrust_n"), 0.0),
        )
        for r in v["rotors"]
    )
    a = v["aero"]
    w = v["wheel"]
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
            operating_point=ctl.get("operating_point") or OPERATING_POINT_RULES[0],
            failure_detection_delay_s=_first(ctl.get("failure_detection_delay_s"),
                                             DEFAULT_FAILURE_DETECTION_DELAY_S),
            loop_rate_hz=_first(ctl.get("loop_rate_hz"), DEFAULT_LOOP_RATE_HZ),
            motor_time_constant_s=_first(ctl.get("motor_time_constant_s"), 0.0),
        ),
        review=review,
        failure_cases=cases,
        sha256=sha256,
        source=source,
        warnings=tuple(c.warnings),
    )


def loads(text: str, source: str = "<string>", sha256: str | None = None,
          base_dir: str | Path | None = None) -> Design:
    """Validate a design given as TOML text; see :func:`load`.

    Parameters
    ----------
    text : str
        TOML text of a design.
    source : str
        Name shown in error messages.
    sha256 : str or None
        Checksum to record (default: of ``text``).
    base_dir : str, Path or None
        Folder that stand-data paths are relative to (default: that of ``source`` when it
        names a file).
    """
    if sha256 is None:
        sha256 = hashlib.sha256(text.encode("utf-8", "surrogatepass")).hexdigest()
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise DesignError([f"TOML syntax: {exc} -> valid TOML (key = value lines, [table] and "
                           "[[array]] headers)"], path=source) from None
    return from_dict(data, source=source, sha256=sha256, base_dir=base_dir)


def from_dict(data: Any, source: str = "<dict>", sha256: str = "",
              base_dir: str | Path | None = None) -> Design:
    """Validate a design given as the nested dict that TOML parsing produces.

    Parameters
    ----------
    data : dict
        The parsed TOML document.
    source : str
        Name shown in error messages.
    sha256 : str
        Checksum to record.
    base_dir : str, Path or None
        Folder that stand-data paths are relative to (default: that of ``source`` when it
        names a file).
    """
    c = _Collector()
    if base_dir is None and source and not source.startswith("<") and Path(source).is_file():
        base_dir = Path(source).parent
    if not isinstance(data, dict):
        raise DesignError([f"(top level): {_fmt(data)} -> a TOML document (a table)"], path=source)
    ex = design_expand.Expansion(data=data)
    try:
        ex = design_expand.expand(data, c, None if base_dir is None else Path(base_dir))
        v = _validate(ex.data, c)
        if not c.problems:
            _cross_checks(v, c)
    except (TypeError, ValueError, AttributeError, KeyError, IndexError) as exc:  # pragma: no cover
        # A shape of input the checks above did not foresee: still one clear error.
        c.note(f"(file): could not be read as a design ({type(exc).__name__}: {exc})")
    if c.problems:
        raise DesignError(design_expand.name_problems(c.problems, ex.data), path=source)
    c.warnings = design_expand.name_problems(c.warnings, ex.data)
    design = _build(v, sha256, source, c)
    return _with_expansion(design, ex)


def _with_expansion(design: Design, ex: design_expand.Expansion) -> Design:
    """Attach what the shorthand added, and the sanity warnings (kit.sanity)."""
    from dataclasses import replace

    from kit import massprops, sanity

    design = replace(design, rotor_fits=ex.fits, battery=ex.battery,
                     degraded_cases=ex.degraded_cases, degraded_fraction=ex.degraded_fraction,
                     bryson=ex.bryson)
    extra = sanity.design_warnings(design, massprops.compute(design).com_m)
    return replace(design, warnings=design.warnings + tuple(extra)) if extra else design


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
