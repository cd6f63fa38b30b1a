"""Load cases with reduced thrust limits: degraded rotors and the low-battery case.

Both are the design's own analyses (:func:`kit.analysis.report.analyse_case`, the public
equilibrium solve) run on a copy of the design whose maximum thrusts are scaled:

.. math::

    f_{\\max,i}' = s_i\\, f_{\\max,i}, \\qquad
    s_i = \\begin{cases} \\text{the stated fraction} & \\text{degraded rotor } i \\\\
    (V_\\text{end} / V_\\text{nom})^2 & \\text{every rotor, low battery} \\end{cases}

A fraction of 0 is a failed rotor (its thrust is fixed at 0 and it gives no authority), so a
degraded case at 0 is the failure case and at 1 the intact case. The low-battery factor holds
because thrust goes roughly as the square of rotor speed and speed roughly as voltage for a
given motor and propeller (common practice, no source). Mass properties, coefficients and the
control weights are unchanged.

References
----------
Common practice, no source (the voltage scaling); the equilibria, control and checks are those
of :mod:`kit.analysis.equilibrium`, :mod:`kit.analysis.control` and :mod:`kit.analysis.checks`.
"""

from __future__ import annotations

from dataclasses import dataclass, replace

from kit.analysis import checks as checks_mod
from kit.analysis.equilibrium import all_cases
from kit.analysis.hover import Hover, analyse_hover
from kit.analysis.vehicle import Vehicle
from kit.design import DegradedCase, Design


@dataclass(frozen=True, repr=False)
class LoadCase:
    """One load case with scaled thrust limits: its equilibria, control, risk and checks."""

    label: str
    kind: str
    max_thrust_scale: tuple[tuple[str, float], ...]
    failed: tuple[str, ...]
    hover: Hover | None
    cases: tuple
    checks: tuple[checks_mod.Check, ...]

    def __repr__(self) -> str:
        bad = sum(not c.passed for c in self.checks)
        return f"<LoadCase {self.label}: {len(self.checks) - bad}/{len(self.checks)} passed>"

    @property
    def passed(self) -> bool:
        return all(c.passed for c in self.checks)

    def to_dict(self) -> dict:
        return {
            "label": self.label, "kind": self.kind,
            "max_thrust_scale": dict(self.max_thrust_scale), "failed": list(self.failed),
            "hover": None if self.hover is None else self.hover.to_dict(),
            "cases": [c.to_dict() for c in self.cases],
            "checks": [c.to_dict() for c in self.checks],
        }


def derated(design: Design, scale: dict[str, float]) -> Design:
    """The design with each named rotor's ``max_thrust_n`` multiplied by its factor.

    Parameters
    ----------
    design : Design
        The design.
    scale : dict
        Rotor name -> factor on its max thrust (> 0), dimensionless.
    """
    rotors = tuple(replace(r, max_thrust_n=r.max_thrust_n * scale[r.name])
                   if r.name in scale else r for r in design.rotors)
    return replace(design, rotors=rotors)


def split_degraded(case: DegradedCase) -> tuple[tuple[str, ...], dict[str, float]]:
    """Failed rotors (those given and those at fraction 0) and the factors of the others.

    Parameters
    ----------
    case : DegradedCase
        The degraded case.
    """
    failed = tuple(case.failed) + tuple(n for n, f in case.degraded if f == 0)
    return failed, {n: f for n, f in case.degraded if f > 0}


def degraded_cases(design: Design) -> list[DegradedCase]:
    """The design's degraded cases, then one per rotor at ``review.degraded_fraction``."""
    out = list(design.degraded_cases)
    if design.degraded_fraction is not None:
        for name in design.rotor_names:
            dc = DegradedCase((), ((name, design.degraded_fraction),))
            if dc not in out:
                out.append(dc)
    return out


def _relabel(checks, label: str) -> tuple[checks_mod.Check, ...]:
    return tuple(replace(c, case=label + (f" / {c.case}" if c.case else "")) for c in checks)


def analyse_degraded(design: Design, case: DegradedCase, vehicle: Vehicle | None = None
                     ) -> LoadCase:
    """Equilibrium, control, risk and checks with some rotors at a fraction of their thrust.

    Parameters
    ----------
    design : Design
        The design.
    case : DegradedCase
        Failed rotors and degraded fractions.
    vehicle : Vehicle or None
        The intact vehicle (its mass properties are reused).
    """
    from kit.analysis.report import analyse_case

    failed, scale = split_degraded(case)
    mp = vehicle.mp if vehicle is not None else None
    veh = Vehicle.from_design(derated(design, scale), mp)
    res = analyse_case(veh, failed)
    hover = analyse_hover(veh) if not failed else None  # torque authority with every rotor on
    return LoadCase(case.label, "degraded", tuple(scale.items()), failed, hover, (res,),
                    _relabel(res.checks, case.label))


def analyse_low_battery(design: Design, vehicle: Vehicle | None = None) -> LoadCase | None:
    """Hover, every case and their checks at end of discharge (None without a battery).

    Parameters
    ----------
    design : Design
        The design (with ``battery``).
    vehicle : Vehicle or None
        The intact vehicle (its mass properties are reused).
    """
    from kit.analysis.report import analyse_case

    b = design.battery
    if b is None:
        return None
    s = b.thrust_scale
    scale = {n: s for n in design.rotor_names}
    mp = vehicle.mp if vehicle is not None else None
    veh = Vehicle.from_design(derated(design, scale), mp)
    label = f"low battery ({b.end_voltage_v:g} V of {b.nominal_voltage_v:g} V)"
    hover = analyse_hover(veh)
    checks = list(checks_mod.hover_checks(hover, design.review))
    cases = []
    for failed, ratio in all_cases(veh):
        res = analyse_case(veh, failed, ratio)
        cases.append(res)
        checks += res.checks
    return LoadCase(label, "low battery", tuple(scale.items()), (), hover, tuple(cases),
                    _relabel(checks, label))


def load_cases(design: Design, vehicle: Vehicle | None = None) -> list[LoadCase]:
    """Every degraded case and the low-battery case of a design, in that order.

    Parameters
    ----------
    design : Design
        The design.
    vehicle : Vehicle or None
        The intact vehicle (its mass properties are reused).
    """
    out = [analyse_degraded(design, dc, vehicle) for dc in degraded_cases(design)]
    low = analyse_low_battery(design, vehicle)
    if low is not None:
        out.append(low)
    return out
