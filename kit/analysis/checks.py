"""Design checks: each figure of the review against its threshold, as one pass/fail table.

Thresholds come from the design's ``[review]`` table (defaults: common practice, no source).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace

import numpy as np

#: Smallest thrust margin (1 - f / f_max) of the busiest rotor in a failure case (common
#: practice, no source): room for the controller to act.
MIN_FAILURE_THRUST_MARGIN = 0.05


@dataclass(frozen=True)
class Check:
    """One design check: ``passed`` is ``value`` compared with ``limit`` by ``relation``."""

    name: str
    value: float | bool | None
    limit: float | bool | None
    passed: bool
    unit: str = ""
    case: str = ""
    relation: str = ""
    #: Why the value is what it is, when the figure alone does not say (e.g. a crash).
    note: str = ""

    def to_dict(self) -> dict:
        def clean(v):
            if isinstance(v, bool) or v is None:
                return v
            return float(v) if math.isfinite(v) else None

        return {"name": self.name, "value": clean(self.value), "limit": clean(self.limit),
                "passed": bool(self.passed), "unit": self.unit, "case": self.case,
                "relation": self.relation, "note": self.note}


def at_least(name, value, limit, unit="", case="") -> Check:
    # +inf is at least any limit (e.g. a lag margin beyond the search: stable at every lag
    # searched); nan and None fail
    ok = value is not None and not math.isnan(value) and value >= limit
    return Check(name, value, limit, bool(ok), unit, case, ">=")


def at_most(name, value, limit, unit="", case="") -> Check:
    ok = value is not None and math.isfinite(value) and value <= limit
    return Check(name, value, limit, bool(ok), unit, case, "<=")


def is_true(name, value: bool, case="") -> Check:
    return Check(name, bool(value), True, bool(value), "", case, "==")


def hover_checks(hover, review) -> list[Check]:
    return [
        at_least("thrust-to-weight", hover.thrust_to_weight, review.min_thrust_to_weight),
        at_most("hover thrust fraction", hover.hover_thrust_fraction,
                review.max_hover_thrust_fraction),
        is_true("hover allocation has full rank (4)", hover.allocation_rank == 4),
    ]


def case_checks(eq, ctl, risk, review, min_thrust_n=None) -> list[Check]:
    """Checks of one equilibrium case (no-failure or failure).

    ``min_thrust_n`` (per rotor, N; None: 0) is the idle thrust a working rotor cannot go
    below: the operating point is searched within ``0 .. max_thrust_n``, so a point that asks a
    working rotor for less than its idle thrust fails "equilibrium within thrust limits", with
    the rotors named in the check's note (the point is still reported, so the figures show why).
    """
    case = eq.label
    within = is_true("equilibrium within thrust limits", eq.found, case)
    if eq.found and min_thrust_n is not None:
        fmin = np.asarray(min_thrust_n, dtype=float)
        low = [i for i in np.flatnonzero(eq.working) if eq.thrust_n[i] < fmin[i] * (1 - 1e-9)]
        if low:
            why = ", ".join(f"{eq.names[i]} {eq.thrust_n[i]:.3g} N < {fmin[i]:.3g} N"
                            for i in low)
            within = replace(within, value=False, passed=False,
                             note=f"below idle thrust: {why}")
    out = [within]
    if not eq.found:
        return out
    margin = float((1 - eq.thrust_fraction)[eq.working].min())
    out.append(at_least("thrust margin of busiest rotor", margin, MIN_FAILURE_THRUST_MARGIN,
                        "of max thrust", case))
    if eq.failed:
        gyro = review.gyro_full_scale_rad_s * review.max_spin_fraction_of_gyro
        out.append(at_most("spin rate within gyro range", abs(eq.spin_rate_rad_s), gyro,
                           "rad/s", case))
    out.append(is_true("reduced model controllable", ctl.controllable, case))
    out.append(is_true("LQR closed loop stable", ctl.stable, case))
    out += robustness_checks(ctl, review, case)
    # a rate, compared with the review's limit read as a rate (1/s); for rare saturation the
    # rate and the probability within one second agree (p = 1 - exp(-rate * 1 s))
    rate = risk.crossing_rate_per_s if risk is not None else math.nan
    out.append(at_most("thrust-saturation rate", rate, review.max_saturation_probability,
                       "1/s", case))
    return out


def margin(c: Check) -> float:
    """How far a check is from its limit, relative to the limit: >= 0 passes, < 0 fails.

    ``(value - limit) / |limit|`` for ``>=``, ``(limit - value) / |limit|`` for ``<=`` (the
    absolute difference when the limit is 0); +1 / -1 for a check that is true or false; -inf
    when there is no finite value.
    """
    if c.relation == "==" or isinstance(c.value, bool) or isinstance(c.limit, bool):
        return 1.0 if c.passed else -1.0
    if c.value is None or c.limit is None:
        return -math.inf
    v, lim = float(c.value), float(c.limit)
    if math.isnan(v) or not math.isfinite(lim):
        return -math.inf
    diff = v - lim if c.relation == ">=" else lim - v
    return diff / abs(lim) if lim != 0 else diff


def verdict(checks) -> dict:
    """The verdict over design checks: ``{"result": "pass" | "fail" | "none", "checks": n,
    "failed": n, "failed_checks": [{"name", "case", "value", "limit", "relation", "unit"}]}``.

    "none" when there is no check at all (nothing was judged).
    """
    checks = list(checks)
    failed = [c for c in checks if not c.passed]
    result = "none" if not checks else ("fail" if failed else "pass")
    rows = []
    for c in failed:
        d = c.to_dict()
        rows.append({k: d[k] for k in ("name", "case", "value", "limit", "relation", "unit")})
    return {"result": result, "checks": len(checks), "failed": len(failed),
            "failed_checks": rows}


def wheel_checks(study) -> list[Check]:
    """Checks of the wheel study: no degeneracy flag within -h_max..h_max, per case; and the
    wheel does not make the no-failure sensitivity worse at h_max."""
    if not study.available:
        return []
    out = []
    for c in study.curves:
        out.append(Check("wheel range clear of controllability degeneracies", len(c.flags),
                         0, not c.flags, "flags", c.label, "=="))
    nominal = study.curve(())
    if nominal is not None:
        top = float(nominal.h2_ratio[-1])
        out.append(at_most("H2 ratio at +h_max, no failure", top, 1.0, "", "no failure"))
    return out


def robustness_checks(ctl, review, case="") -> list[Check]:
    """Least closed-loop damping ratio and lag margin against the review thresholds (a loop
    that is only stable does not pass)."""
    rob = getattr(ctl, "robustness", None)
    if rob is None:
        return [is_true("robustness figures available (stabilising LQR)", False, case)]
    return [
        at_least("closed-loop damping ratio", rob.damping_ratio, review.min_damping_ratio, "",
                 case),
        at_least("lag margin", rob.lag_margin_s, review.min_lag_margin_s, "s", case),
    ]


def transient_checks(sim, review, case="") -> list[Check]:
    """Checks of the simulated recovery from a failure (a :class:`SimulationResult`).

    A run that crashed (``sim.crashed``: it sank ``[review] crash_height_loss_m`` and its
    integration stopped there) fails "recovery converged" with the crash as its note; its
    height lost and peak tilt are those up to the crash.
    """
    tr = sim.transient
    crashed = bool(getattr(sim, "crashed", False))
    note = sim.message if crashed else ""
    conv = is_true("recovery converged (tilt, rates, yaw rate, position, height, velocity)",
                   sim.converged and not crashed, case)
    lost = at_most("height lost in recovery", tr["height_lost_m"], review.max_height_loss_m,
                   "m", case)
    return [
        replace(conv, note=note),
        is_true("never inverted during recovery", not tr["inverted"], case),
        replace(lost, note=note),
        at_most("peak tilt during recovery", tr["peak_tilt_deg"],
                review.max_tilt_during_recovery_deg, "deg", case),
    ]
