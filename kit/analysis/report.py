"""Everything for one design, as one result: hover, every case, spin stability, wheel, checks.

``analyze(design)`` is what ``rotorbook analyze`` prints and what the design-review workbook
shows; its ``to_dict()`` is the JSON schema ``rotorbook.analysis/1`` (keys are added, never
renamed).
"""

from __future__ import annotations

import contextlib
import html
import math
import signal
import threading
import time
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from kit import __version__
from kit.analysis import checks as checks_mod
from kit.analysis.control import LinearControl, design_control
from kit.analysis.equilibrium import Equilibrium, all_cases, solve
from kit.analysis.hover import Hover, analyse_hover
from kit.analysis.htmltable import num, table
from kit.analysis.risk import SaturationRisk, saturation_risk
from kit.analysis.spin import (
    AXIS_NAMES,
    SpinAxisAlignment,
    SpinStability,
    principal_spin_stability,
    spin_axis_alignment,
)
from kit.analysis.vehicle import Vehicle
from kit.analysis.wheel import WheelStudy, wheel_study
from kit.design import Design, load
from kit.errors import AnalysisError, DesignError
from kit.massprops import rotor_table

SCHEMA = "rotorbook.analysis/1"

#: Longest time one case (equilibrium, control, risk) may take, in s; a case that runs longer is
#: reported as a result without an equilibrium, with the reason. A demo case takes well under
#: 1 s; 20 s leaves room for slow machines (common practice, no source).
CASE_TIME_LIMIT_S = 20.0
#: Longest time the wheel study of a design may take, in s (it solves every case at 21 wheel
#: momenta).
WHEEL_TIME_LIMIT_S = 120.0
#: Numerical failures that make a case a result with a reason instead of an exception.
NUMERICAL_ERRORS = (np.linalg.LinAlgError, ValueError, ArithmeticError, RecursionError,
                    AnalysisError)


@contextlib.contextmanager
def time_box(seconds: float, what: str):
    """Raise :class:`~kit.errors.AnalysisError` when the block runs past ``seconds`` of wall time.

    Uses ``SIGALRM`` and works in the main thread of a POSIX process only (a workbook kernel,
    the command line, a process-pool worker); elsewhere the block runs without a limit. An
    outer ``SIGALRM`` timer (another time box, a test's limit) is kept: when it is due first,
    its own handler runs, and it is re-armed with the time it has left afterwards.
    """
    usable = (seconds > 0 and hasattr(signal, "setitimer")
              and threading.current_thread() is threading.main_thread())
    if not usable:
        yield
        return
    outer_left = signal.getitimer(signal.ITIMER_REAL)[0]
    outer_first = 0.0 < outer_left < seconds
    start = time.monotonic()

    def _expired(signum, frame):
        if outer_first and callable(old):
            old(signum, frame)
        raise AnalysisError(f"{what}: stopped after the time limit of {seconds:g} s")

    old = signal.signal(signal.SIGALRM, _expired)
    signal.setitimer(signal.ITIMER_REAL, outer_left if outer_first else seconds)
    try:
        yield
    finally:
        signal.setitimer(signal.ITIMER_REAL, 0.0)
        signal.signal(signal.SIGALRM, old)
        if outer_left > 0.0:
            left = outer_left - (time.monotonic() - start)
            signal.setitimer(signal.ITIMER_REAL, max(left, 1e-3))


def _reason(exc: BaseException) -> str:
    if isinstance(exc, AnalysisError):
        return str(exc)
    text = str(exc).strip().splitlines()[0] if str(exc).strip() else ""
    return f"numerical failure ({type(exc).__name__}{': ' + text[:160] if text else ''})"


def finite_mass_properties(design: Design, mp) -> None:
    """Raise DesignError naming the figure when the mass properties are not finite numbers."""
    problems = []
    figures = (("mass_kg", "mass", mp.mass_kg), ("com_m", "centre of mass", mp.com_m),
               ("inertia_kg_m2", "inertia about the centre of mass", mp.inertia_kg_m2),
               ("principal_moments_kg_m2", "principal moments", mp.principal_moments_kg_m2),
               ("rotor_positions_m", "rotor positions about the centre of mass",
                mp.rotor_positions_m))
    for key, label, value in figures:
        arr = np.asarray(value, dtype=float)
        if not np.all(np.isfinite(arr)):
            problems.append(f"mass properties.{key}: the {label} is not a finite number -> part "
                            "and rotor masses, positions and sizes within the limits in README")
    if problems:
        raise DesignError(problems, path=design.source or None)


def plain(obj):
    """Plain JSON types: numpy scalars and arrays unwrapped, NaN and infinities as None."""
    if isinstance(obj, dict):
        return {str(k): plain(v) for k, v in obj.items()}
    if isinstance(obj, list | tuple):
        return [plain(v) for v in obj]
    if hasattr(obj, "tolist"):
        return plain(obj.tolist())
    if isinstance(obj, bool) or obj is None or isinstance(obj, str | int):
        return obj
    if isinstance(obj, float):
        return obj if math.isfinite(obj) else None
    raise TypeError(f"not JSON data: {type(obj).__name__}")


@dataclass(frozen=True, repr=False)
class CaseResult:
    """One equilibrium case with its control, risk and checks."""

    eq: Equilibrium
    ctl: LinearControl
    risk: SaturationRisk | None
    checks: tuple[checks_mod.Check, ...]

    def __repr__(self) -> str:
        return f"<CaseResult {self.eq.label}>"

    def to_dict(self) -> dict:
        d = self.eq.to_dict()
        c = self.ctl.to_dict()
        d.update({
            "reduced_model": c["reduced_model"],
            "controllable": c["controllable"],
            "controllability_distance": c["controllability_distance"],
            "lqr": c["lqr"],
            "h2_norm": c["h2_norm"],
            "control_note": c["note"],
            "saturation_probability_per_s": None if self.risk is None
            else float(self.risk.probability_per_s),
            "saturation_rate_per_s": None if self.risk is None
            else float(self.risk.crossing_rate_per_s),
            "saturation": None if self.risk is None else self.risk.to_dict(),
            "checks": [k.to_dict() for k in self.checks],
        })
        return d


def unsolved(veh: Vehicle, failed=(), thrust_ratio=None, reason: str = "") -> Equilibrium:
    """The result of a case that could not be solved: no equilibrium, with the reason."""
    from kit.analysis import equilibrium as eq_mod

    return eq_mod._make(veh, tuple(failed), thrust_ratio, False, reason)


def analyse_case(veh: Vehicle, failed=(), thrust_ratio=None, hint=None,
                 time_limit_s: float = CASE_TIME_LIMIT_S) -> CaseResult:
    """Equilibrium, linear control, saturation risk and checks for one failure case.

    A case whose solve fails numerically or runs past ``time_limit_s`` (s) is a result without
    an equilibrium whose reason says so; it fails the check "equilibrium within thrust limits".
    """
    c = veh.design.control
    try:
        with time_box(time_limit_s, "equilibrium and control of this case"):
            eq = solve(veh, failed, thrust_ratio, hint=hint)
            ctl = design_control(veh, eq)
            risk = saturation_risk(eq, ctl, c.disturbance_torque_psd_n2_m2_s,
                                   c.disturbance_time_constant_s)
            if risk is not None and not math.isfinite(risk.crossing_rate_per_s):
                raise AnalysisError("thrust-saturation rate is not a finite number (from "
                                    "control.disturbance_torque_psd_n2_m2_s and the LQR weights)")
    except NUMERICAL_ERRORS as exc:
        eq = unsolved(veh, failed, thrust_ratio, _reason(exc))
        ctl = design_control(veh, eq)
        risk = None
    return CaseResult(eq, ctl, risk, tuple(checks_mod.case_checks(eq, ctl, risk,
                                                                  veh.design.review)))


@dataclass(frozen=True, repr=False)
class SpinSection:
    """Torque-free spin stability at the spin rates found, and each spin axis's alignment."""

    stability: SpinStability
    alignment: SpinAxisAlignment

    def __repr__(self) -> str:
        return f"<SpinSection: {len(self.alignment.labels)} spinning equilibria>"

    def to_dict(self) -> list[dict]:
        """One entry per spinning equilibrium (the ``spin_stability`` list of the schema)."""
        out = []
        rates = list(self.stability.spin_rates_rad_s)
        for row in self.alignment.rows():
            m = rates.index(abs(row["spin_rate_rad_s"]))
            row["growth_rate_1_s"] = {AXIS_NAMES[k]: float(self.stability.growth_rate_1_s[k, m])
                                      for k in range(3)}
            out.append(row)
        return out

    def checks(self) -> list[checks_mod.Check]:
        return [checks_mod.is_true("spin axis away from the intermediate principal axis",
                                   not r["near_intermediate_axis"], r["case"])
                for r in self.alignment.rows()]

    def _repr_html_(self) -> str:
        return self.alignment._repr_html_() + self.stability._repr_html_()


def spin_section(veh: Vehicle, eqs) -> SpinSection:
    """Spin stability of the principal axes at every |spin rate| found, and alignments."""
    align = spin_axis_alignment(veh, eqs)
    rates = sorted({abs(float(w)) for w in align.spin_rates_rad_s})
    return SpinSection(principal_spin_stability(veh, rates), align)


@dataclass(frozen=True, repr=False)
class DesignReport:
    """The whole analysis of one design."""

    design: Design
    vehicle: Vehicle
    hover: Hover
    cases: tuple[CaseResult, ...]
    spin: SpinSection
    wheel: WheelStudy
    checks: tuple[checks_mod.Check, ...]

    def __repr__(self) -> str:
        n_fail = sum(not c.passed for c in self.checks)
        return (f"<DesignReport {self.design.name!r} rev {self.design.revision!r}: "
                f"{len(self.cases)} cases, {len(self.checks) - n_fail}/{len(self.checks)} checks "
                "passed>")

    @property
    def passed(self) -> bool:
        return all(c.passed for c in self.checks)

    @property
    def verdict(self) -> dict:
        """``{"result": "pass" | "fail", "checks", "failed", "failed_checks": [...]}``."""
        return checks_mod.verdict(self.checks)

    def case(self, failed=(), thrust_ratio=None) -> CaseResult | None:
        for c in self.cases:
            if set(c.eq.failed) == set(failed) and c.eq.thrust_ratio == thrust_ratio:
                return c
        return None

    def to_dict(self) -> dict:
        """The JSON document of schema ``rotorbook.analysis/1`` (plain types, SI)."""
        d, mp = self.design, self.vehicle.mp
        return plain({
            "schema": SCHEMA,
            "kit_version": __version__,
            "design": {"name": d.name, "revision": d.revision, "sha256": d.sha256},
            "mass_properties": mp.to_dict(),
            "rotors": rotor_table(d, mp),
            "hover": self.hover.to_dict(),
            "cases": [c.to_dict() for c in self.cases],
            "spin_stability": self.spin.to_dict(),
            "wheel_study": self.wheel.to_dict(),
            "checks": [c.to_dict() for c in self.checks],
            "verdict": self.verdict,
            "assumptions": [
                "rotor speeds follow thrust commands at once (no rotor acceleration torque)",
                "yaw rate is held at its equilibrium value in the reduced model",
                f"body drag torque law: {d.aero.drag_law}",
                "disturbance-torque time constant "
                + (f"{d.control.disturbance_time_constant_s:g} s (assumed default)"
                   if d.control.disturbance_time_constant_assumed
                   else f"{d.control.disturbance_time_constant_s:g} s"),
            ],
        })

    def summary_text(self) -> str:
        d, h = self.design, self.hover
        lines = [f"{d.name} (revision {d.revision})",
                 f"  hover: T/W {h.thrust_to_weight:.3g}, busiest rotor at "
                 f"{100 * h.hover_thrust_fraction:.1f} % of max thrust",
                 "  cases:"]
        for c in self.cases:
            eq = c.eq
            if not eq.found:
                lines.append(f"    {eq.label}: no equilibrium ({eq.reason})")
                continue
            rate = c.risk.crossing_rate_per_s if c.risk is not None else None
            lines.append(
                f"    {eq.label}: spin rate about n {num(eq.spin_rate_rad_s, 3)} rad/s, tilt "
                f"{num(eq.tilt_deg, 3)} deg, max thrust {num(float(eq.thrust_n.max()), 3)} N, "
                f"{'controllable' if c.ctl.controllable else 'NOT controllable'}, "
                f"thrust-saturation rate {num(rate, 2)} 1/s")
        if self.wheel.available:
            m = self.hover.torque_margin_n_m
            lines.append(f"  wheel: h_max {self.wheel.h_max_n_m_s:.3g} N m s, "
                         f"{len(self.wheel.flags)} flag(s); gyroscopic torque "
                         f"{num(self.wheel.gyro_torque_n_m, 3)} N m against roll/pitch "
                         f"authority {num(float(min(m[0], m[1])), 3)} N m")
        failed = [c for c in self.checks if not c.passed]
        v = self.verdict
        lines.insert(1, f"  verdict: {v['result'].upper()} ("
                     + (f"{v['failed']} of {v['checks']} design checks failed)" if v["failed"]
                        else f"all {v['checks']} design checks met)"))
        lines.append(f"  checks: {len(self.checks) - len(failed)} of {len(self.checks)} passed")
        for c in failed:
            lines.append(f"    FAIL {c.case + ': ' if c.case else ''}{c.name} = {num(c.value)} "
                         f"(limit {c.relation} {num(c.limit)} {c.unit})")
        return "\n".join(lines)

    def _repr_html_(self) -> str:
        rows = []
        for c in self.cases:
            eq = c.eq
            rows.append((eq.label, eq.found, eq.spin_rate_rad_s if eq.found else None,
                         eq.tilt_deg if eq.found else None,
                         float(eq.thrust_n.max()) if eq.found else None,
                         c.ctl.controllable, c.ctl.h2_norm,
                         c.risk.crossing_rate_per_s if c.risk is not None else None))
        t = table(["case", "equilibrium", "spin rate about n (rad/s)", "tilt (deg)",
                   "max thrust (N)", "controllable", "H2 norm (rad per N m per sqrt(Hz))",
                   "thrust-saturation rate (1/s)"], rows, "Cases")
        d = self.design
        v = self.verdict
        head = f"<h4>{html.escape(d.name)} (revision {html.escape(d.revision)})</h4>"
        line = (f"<p><b>Verdict: {v['result'].upper()}</b> &#8212; "
                + (f"{v['failed']} of {v['checks']} design checks failed"
                   if v["failed"] else f"all {v['checks']} design checks met")
                + " (the checks table is in the summary of the design checks).</p>")
        return head + line + t


def analyze(design: Design, wheel: bool = True, executor=None, progress=None) -> DesignReport:
    """Run every analysis of a design (hover, all cases, spin stability, wheel study, checks).

    Parameters
    ----------
    design : Design
    wheel : bool
        Run the wheel study (for a design with a wheel).
    executor : concurrent.futures.Executor or None
        Runs the wheel study's cases in parallel when given.
    progress : callable or None
        ``progress(done, total)`` over the equilibrium cases.
    """
    veh = Vehicle.from_design(design)
    finite_mass_properties(design, veh.mp)
    try:
        with time_box(CASE_TIME_LIMIT_S, "hover analysis"):
            hover = analyse_hover(veh)
    except NUMERICAL_ERRORS as exc:
        raise DesignError([f"hover analysis: {_reason(exc)} -> rotor positions, max_thrust_n "
                           "and masses within the limits in README"],
                          path=design.source or None) from None
    todo = all_cases(veh)
    results = []
    for i, (f, r) in enumerate(todo):
        results.append(analyse_case(veh, f, r))
        if progress is not None:
            progress(i + 1, len(todo))
    cases = tuple(results)
    spin = spin_section(veh, [c.eq for c in cases])
    try:
        with time_box(WHEEL_TIME_LIMIT_S, "wheel study"):
            # cases without an equilibrium already fail their check; the wheel study would
            # only search again at every wheel momentum
            solvable = [(c.eq.failed, c.eq.thrust_ratio) for c in cases if c.eq.found]
            study = (wheel_study(veh, cases=solvable, executor=executor) if wheel
                     else wheel_study(veh, cases=[]))
    except NUMERICAL_ERRORS as exc:
        study = WheelStudy(False, "wheel study not carried out: " + _reason(exc), 0.0, 0.0, 0.0,
                           0.0, 0.0, 0.0, ())
    checks = list(checks_mod.hover_checks(hover, design.review))
    for c in cases:
        checks += c.checks
    checks += spin.checks()
    checks += checks_mod.wheel_checks(study)
    return DesignReport(design, veh, hover, cases, spin, study, tuple(checks))


def analyze_file(path: str | Path, progress=None) -> DesignReport:
    """Load a design file and analyse it (DesignError for an invalid file).

    Parameters
    ----------
    path : str or Path
        The design file.
    progress : callable or None
        ``progress(done, total)`` over the equilibrium cases.
    """
    return analyze(load(path), progress=progress)
