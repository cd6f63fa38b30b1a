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
from kit.analysis.control import Gains, LinearControl, design_control, gains
from kit.analysis.equilibrium import Equilibrium, all_cases, solve
from kit.analysis.hover import Hover, analyse_hover
from kit.analysis.htmltable import num, table
from kit.analysis.montecarlo import GustMonteCarlo, gust_monte_carlo
from kit.analysis.risk import SaturationRisk, saturation_risk
from kit.analysis.simulate import SimulationResult, rates_text, simulate_failure
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
from kit.errors import AnalysisError, DesignError, EquilibriumNotFound
from kit.massprops import rotor_table

SCHEMA = "rotorbook.analysis/1"

#: Longest time one case (equilibrium, control, risk) may take, in s; a case that runs longer is
#: reported as a result without an equilibrium, with the reason. A demo case takes well under
#: 1 s; 20 s leaves room for slow machines (common practice, no source).
CASE_TIME_LIMIT_S = 20.0
#: Longest time the wheel study of a design may take, in s (it solves every case at 21 wheel
#: momenta).
WHEEL_TIME_LIMIT_S = 120.0
#: Longest time the flown recovery of one failure case may take, in s, and all flown recoveries
#: of one design together (a demo case flies in 2-12 s; common practice, no source). A case past
#: either limit is "not simulated" with the reason and fails the check "recovery simulated".
#: Both are guards against a run that never ends, set well above the normal cost on a loaded
#: machine (the demo hexacopter's 21 flown cases take 40-100 s on 2 busy cores), so that the
#: verdict of a design does not depend on how busy the machine is.
SIM_TIME_LIMIT_S = 60.0
SIM_BUDGET_S = 900.0
#: Longest time of the Monte-Carlo gust comparison, in s.
GUST_TIME_LIMIT_S = 30.0
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
    transient: SimulationResult | None = None
    gains: Gains | None = None
    simulation_note: str = ""

    def __repr__(self) -> str:
        return f"<CaseResult {self.eq.label}>"

    @property
    def failed_checks(self) -> int:
        return sum(not k.passed for k in self.checks)

    def severity(self) -> tuple:
        """Sort key, worst first: failed checks, then not converged, then height lost."""
        tr = self.transient.transient if self.transient is not None else None
        lost = tr["height_lost_m"] if tr is not None else math.inf
        conv = self.transient.converged if self.transient is not None else False
        return (-self.failed_checks, conv, -lost)

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
            "robustness": c["robustness"],
            "gains": None if self.gains is None else self.gains.to_dict(),
            "transient": None if self.transient is None else self.transient.to_dict(),
            "simulation_note": self.simulation_note,
        })
        return d


def unsolved(veh: Vehicle, failed=(), thrust_ratio=None, reason: str = "") -> Equilibrium:
    """The result of a case that could not be solved: no equilibrium, with the reason."""
    from kit.analysis import equilibrium as eq_mod

    return eq_mod._make(veh, tuple(failed), thrust_ratio, False, reason)


def analyse_case(veh: Vehicle, failed=(), thrust_ratio=None, hint=None,
                 simulate: bool = False,
                 time_limit_s: float = CASE_TIME_LIMIT_S,
                 sim_time_limit_s: float = SIM_TIME_LIMIT_S) -> CaseResult:
    """Equilibrium, linear control, saturation risk, gains and checks for one failure case.

    A case whose solve fails numerically or runs past ``time_limit_s`` (s) is a result without
    an equilibrium whose reason says so; it fails the check "equilibrium within thrust limits".

    Parameters
    ----------
    veh : Vehicle
        The vehicle.
    failed : sequence of str
        Failed rotors.
    thrust_ratio : dict or None
        Fixed thrust ratios of the working rotors.
    hint : tuple or None
        Accepted for compatibility; the operating point depends on the design alone.
    simulate : bool
        For a failure case, simulate the recovery from hover
        (:func:`kit.analysis.simulate.simulate_failure`) and add its checks.
    time_limit_s : float
        Time box of the equilibrium, control and risk of this case, in s.
    sim_time_limit_s : float
        Time box of the flown recovery, in s; 0 or less: not simulated (time budget spent).
    """
    c = veh.design.control
    fmin = [r.min_thrust_n for r in veh.design.rotors]
    try:
        with time_box(time_limit_s, "equilibrium and control of this case"):
            eq = solve(veh, failed, thrust_ratio, hint=hint)
            ctl = design_control(veh, eq)
            risk = saturation_risk(eq, ctl, c.disturbance_torque_psd_n2_m2_s,
                                   c.disturbance_time_constant_s, min_thrust_n=fmin)
            if risk is not None and not math.isfinite(risk.crossing_rate_per_s):
                raise AnalysisError("thrust-saturation rate is not a finite number (from "
                                    "control.disturbance_torque_psd_n2_m2_s and the LQR weights)")
    except NUMERICAL_ERRORS as exc:
        eq = unsolved(veh, failed, thrust_ratio, _reason(exc))
        ctl = design_control(veh, eq)
        risk = None
    checks = checks_mod.case_checks(eq, ctl, risk, veh.design.review, min_thrust_n=fmin)
    sim, note = None, ""
    if simulate and failed:
        try:
            if sim_time_limit_s <= 0:
                raise AnalysisError("the analysis's time budget for flown recoveries "
                                    f"({SIM_BUDGET_S:g} s) was spent on earlier cases")
            with time_box(sim_time_limit_s, "flown recovery"):
                sim = simulate_failure(veh, failed, thrust_ratio=thrust_ratio)
        except (EquilibriumNotFound, *NUMERICAL_ERRORS) as exc:
            sim = None
            why = exc if isinstance(exc, EquilibriumNotFound) else _reason(exc)
            note = f"not simulated: {why}"
            checks.append(checks_mod.is_true("recovery simulated", False, eq.label))
        if sim is not None:
            checks += checks_mod.transient_checks(sim, veh.design.review, eq.label)
    return CaseResult(eq, ctl, risk, tuple(checks), sim,
                      gains(veh, eq, ctl) if eq.found else None, note)


def transients_html(cases) -> str:
    """Transient summary of the simulated failure cases, worst first (an HTML table).

    Parameters
    ----------
    cases : sequence of CaseResult
        Analysed cases (those without a failure are left out).
    """
    head = ["case", "converged", "checks failed", "peak tilt (deg)", "least n_z",
            "height lost (m)", "largest horizontal excursion (m)", "time to settle (s)",
            "time saturated (s)", "peak p, q, r (rad/s)"]
    rows = []
    for c in worst_first(cases):
        if c.transient is None:
            rows.append((c.eq.label, "not simulated", c.failed_checks, *[None] * 7))
            continue
        tr = c.transient.transient
        rows.append((c.eq.label, c.transient.converged if not c.transient.crashed
                     else f"no: {c.transient.message}", c.failed_checks,
                     tr["peak_tilt_deg"],
                     f"{tr['least_n_z']:.3g}" + (" (inverted)" if tr["inverted"] else ""),
                     tr["height_lost_m"], tr["largest_horizontal_excursion_m"],
                     tr["time_to_settle_s"] if math.isfinite(tr["time_to_settle_s"])
                     else "not settled", tr["time_saturated_s"],
                     rates_text(tr["peak_body_rate_rad_s"])))
    return table(head, rows, "Recovery from each failure, worst first (nonlinear, flown)")


def worst_first(cases) -> tuple:
    """Failure cases sorted worst first (:meth:`CaseResult.severity`).

    Parameters
    ----------
    cases : sequence of CaseResult
        Analysed cases.
    """
    return tuple(sorted((c for c in cases if c.eq.failed), key=CaseResult.severity))


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
    #: Degraded-rotor and low-battery cases (kit.analysis.loadcases.LoadCase).
    load_cases: tuple = ()
    gust: GustMonteCarlo | None = None

    @property
    def worst_first(self) -> tuple[CaseResult, ...]:
        """Failure cases, worst first (failed checks, not converged, height lost)."""
        return worst_first(self.cases)

    def transients_html(self) -> str:
        """Transient summary of every simulated failure case, worst first."""
        return transients_html(self.cases)

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
            "operating_point_rule": d.control.operating_point,
            "checks": [c.to_dict() for c in self.checks],
            "load_cases": [lc.to_dict() for lc in self.load_cases],
            "rotor_fits": [f.to_dict() for f in d.rotor_fits],
            "battery": None if d.battery is None else {
                "nominal_voltage_v": d.battery.nominal_voltage_v,
                "end_voltage_v": d.battery.end_voltage_v,
                "max_thrust_scale": d.battery.thrust_scale},
            "control_weights_from_limits": None if d.bryson is None else {
                "max_rate_rad_s": d.bryson.max_rate_rad_s, "max_tilt_deg": d.bryson.max_tilt_deg,
                "max_thrust_deviation_n": d.bryson.max_thrust_deviation_n,
                **d.bryson.weights},
            "transients_worst_first": [
                {"case": c.eq.label, "converged": None if c.transient is None
                 else c.transient.converged, "checks_failed": c.failed_checks,
                 "transient": None if c.transient is None else c.transient.to_dict()["transient"]}
                for c in self.worst_first],
            "gust_monte_carlo": None if self.gust is None else self.gust.to_dict(),
            "gains": [c.gains.to_dict() for c in self.cases if c.gains is not None],
            "verdict": self.verdict,
            "assumptions": [
                "rotor speeds follow thrust commands at once (no rotor acceleration torque)"
                if not any(r.motor_time_constant_s > 0 for r in d.rotors) else
                "rotor thrusts follow their commands through first-order lags "
                "(motor_time_constant_s); no rotor acceleration torque",
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
            if eq.authority is not None:
                lines.append(f"      static authority {eq.authority.index:.3g}; {eq.chosen_by}")
            if eq.runner_up is not None:
                ru = eq.runner_up
                lines.append(f"      runner-up within 5 %: {ru.kind}, spin "
                             f"{ru.spin_rate_rad_s:+.3g} rad/s, effort {ru.effort_n2:.4g} N^2")
        for lc in self.load_cases:
            bad = sum(not k.passed for k in lc.checks)
            lines.append(f"    {lc.label}: {len(lc.checks) - bad} of {len(lc.checks)} checks "
                         "passed")
        for f in d.rotor_fits:
            lines.append(f"  fitted from {f.file} (sha256 {f.sha256[:12]}): thrust_coeff_n_s2 "
                         f"{f.thrust_coeff_n_s2:.4g}, torque_per_thrust_m "
                         f"{f.torque_per_thrust_m:.4g}")
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
                         + f"(limit {c.relation} {num(c.limit)} {c.unit}".rstrip() + ")"
                         + (f": {c.note}" if c.note else ""))
        sims = [c for c in self.worst_first if c.transient is not None]
        if sims:
            lines.append("  recovery from each failure, worst first:")
        for c in sims:
            tr = c.transient.transient
            settle = tr["time_to_settle_s"]
            lines.append(
                f"    {c.eq.label}: {'converged' if c.transient.converged else 'NOT converged'}"
                f", peak tilt {tr['peak_tilt_deg']:.3g} deg"
                f"{' (INVERTED)' if tr['inverted'] else ''}, height lost "
                f"{tr['height_lost_m']:.3g} m, settle "
                + (f"{settle:.3g} s" if math.isfinite(settle) else "never")
                + (f"; {c.transient.message}" if c.transient.crashed else ""))
        if self.gust is not None:
            g = self.gust
            lines.append(f"  gust Monte-Carlo ({g.case}): nonlinear/linear crossing rate "
                         f"{g.ratio:.3g} +- {g.standard_error_ratio:.2g}")
        return "\n".join(lines)

    def _repr_html_(self) -> str:
        rows = []
        for c in self.cases:
            eq = c.eq
            rows.append((eq.label, eq.found, eq.spin_rate_rad_s if eq.found else None,
                         eq.tilt_deg if eq.found else None,
                         float(eq.thrust_n.max()) if eq.found else None,
                         c.ctl.controllable, c.ctl.h2_norm,
                         c.risk.crossing_rate_per_s if c.risk is not None else None,
                         eq.authority.index if eq.authority is not None else None,
                         eq.chosen_by or None,
                         None if eq.runner_up is None else
                         f"{eq.runner_up.kind}, spin {eq.runner_up.spin_rate_rad_s:+.3g} rad/s"))
        t = table(["case", "equilibrium", "spin rate about n (rad/s)", "tilt (deg)",
                   "max thrust (N)", "controllable", "H2 norm (rad per N m per sqrt(Hz))",
                   "thrust-saturation rate (1/s)", "static authority",
                   f"chosen by (rule {self.design.control.operating_point})",
                   "runner-up within 5 %"], rows, "Cases")
        d = self.design
        v = self.verdict
        head = f"<h4>{html.escape(d.name)} (revision {html.escape(d.revision)})</h4>"
        line = (f"<p><b>Verdict: {v['result'].upper()}</b> &#8212; "
                + (f"{v['failed']} of {v['checks']} design checks failed"
                   if v["failed"] else f"all {v['checks']} design checks met")
                + " (the checks table is in the summary of the design checks).</p>")
        if self.load_cases:
            t += table(["load case", "checks passed", "of"],
                       [(lc.label, sum(k.passed for k in lc.checks), len(lc.checks))
                        for lc in self.load_cases], "Degraded-rotor and low-battery load cases")
        extra = self.transients_html() if any(c.eq.failed for c in self.cases) else ""
        return head + line + t + extra


def analyze(design: Design, wheel: bool = True, executor=None, progress=None,
            simulate: bool = True, gusts: bool = True) -> DesignReport:
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
    simulate : bool
        Simulate the recovery from every failure case (transient summary and its checks).
    gusts : bool
        Run the Monte-Carlo gust comparison at the no-failure operating point.
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
    sim_left = SIM_BUDGET_S
    for i, (f, r) in enumerate(todo):
        start = time.monotonic()
        results.append(analyse_case(veh, f, r, simulate=simulate,
                                    sim_time_limit_s=min(SIM_TIME_LIMIT_S, sim_left)))
        if simulate and f:
            sim_left -= time.monotonic() - start
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
    from kit.analysis.loadcases import load_cases

    extra = tuple(load_cases(design, veh))
    for lc in extra:
        checks += lc.checks
    gust = None
    if gusts and cases and cases[0].eq.found and cases[0].ctl.K is not None:
        try:
            with time_box(GUST_TIME_LIMIT_S, "gust Monte-Carlo"):
                gust = gust_monte_carlo(veh, cases[0].eq, cases[0].ctl)
        except NUMERICAL_ERRORS:
            gust = None
    return DesignReport(design, veh, hover, cases, spin, study, tuple(checks), extra, gust)


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


GAINS_SCHEMA = "rotorbook.gains/1"


def gains_document(design: Design) -> dict:
    """The LQR gains of every case of a design, for a flight controller (plain JSON types).

    Parameters
    ----------
    design : Design
        The design.
    """
    veh = Vehicle.from_design(design)
    cases = []
    for f, r in all_cases(veh):
        c = analyse_case(veh, f, r)
        entry = {"case": c.eq.label, "failed": list(c.eq.failed),
                 "thrust_ratio": c.eq.thrust_ratio}
        if c.gains is None:
            entry["gains"] = None
            entry["note"] = c.eq.reason if not c.eq.found else c.ctl.note
        else:
            entry["gains"] = c.gains.to_dict()
        cases.append(entry)
    return plain({
        "schema": GAINS_SCHEMA,
        "kit_version": __version__,
        "design": {"name": design.name, "revision": design.revision, "sha256": design.sha256},
        "frames": "body x forward, y left, z up along the thrust; n = world up in body axes",
        "cases": cases,
    })
