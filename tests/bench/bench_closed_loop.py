"""Benchmark: the closed loop as flown (``make bench``; never fails on time).

1. Every failure case of the demo hexacopter flown with the full controller (outer loops,
   gain-scheduled recovery, horizon from the slowest pole and the spin-up): total time, and
   its ratio to one equilibrium solve.
2. The analysis of one case with motor lag (augmented model, robustness figures, gains)
   against the four-state analysis without them (the analysis before motor lag), per case.
Prints times and ratios measured in one run.
"""

from __future__ import annotations

import dataclasses
import time
from pathlib import Path

from kit.analysis import control as C
from kit.analysis import equilibrium as E
from kit.analysis import simulate as SIM
from kit.analysis.risk import saturation_risk
from kit.analysis.vehicle import Vehicle
from kit.design import load

ROOT = Path(__file__).resolve().parents[2]
LAG_S = 0.03  # a larger motor's thrust time constant (common practice, no source)


def fly_every_case(veh: Vehicle) -> None:
    cases = E.all_cases(veh)[1:]
    E.solve(veh, *cases[0])  # warm: generated module loaded
    t0 = time.perf_counter()
    reps = 5
    for _ in range(reps):
        E.solve(veh, *cases[0])
    t_eq = (time.perf_counter() - t0) / reps
    rows = []
    t0 = time.perf_counter()
    for failed, ratio in cases:
        t1 = time.perf_counter()
        r = SIM.simulate_failure(veh, failed, thrust_ratio=ratio)
        rows.append((", ".join(failed), r.t[-1], time.perf_counter() - t1, r.converged,
                     r.n_rhs_evaluations))
    total = time.perf_counter() - t0
    print(f"hexacopter: {len(cases)} failure cases flown (outer loops, scheduled recovery)")
    print("  case          horizon [s]   time [s]   converged   rhs evaluations")
    for name, hor, dt, conv, nfev in rows:
        print(f"  {name:<12} {hor:11.1f} {dt:10.2f}   {'yes' if conv else 'NO ':>9} {nfev:10d}")
    print(f"  one equilibrium solve            {t_eq:8.3f} s")
    print(f"  every case flown                 {total:8.2f} s   ratio to one solve "
          f"{total / t_eq:8.0f}   per case {total / len(cases) / t_eq:6.0f}")


def augmented_against_four_state(veh: Vehicle) -> None:
    d = veh.design
    lag = Vehicle.from_design(dataclasses.replace(d, rotors=tuple(
        dataclasses.replace(r, motor_time_constant_s=LAG_S) for r in d.rotors)))
    c = d.control
    cases = E.all_cases(veh)
    eqs = [E.solve(veh, f, r) for f, r in cases]
    eqs_lag = [E.solve(lag, f, r) for f, r in cases]

    def four_state():
        for eq in eqs:
            ctl = C.design_control(veh, eq, with_robustness=False)
            saturation_risk(eq, ctl, c.disturbance_torque_psd_n2_m2_s,
                            c.disturbance_time_constant_s)

    def augmented():
        for eq in eqs_lag:
            ctl = C.design_control(lag, eq)
            saturation_risk(eq, ctl, c.disturbance_torque_psd_n2_m2_s,
                            c.disturbance_time_constant_s)
            C.gains(lag, eq, ctl)

    four_state()
    augmented()
    t0 = time.perf_counter()
    four_state()
    t4 = time.perf_counter() - t0
    t0 = time.perf_counter()
    augmented()
    ta = time.perf_counter() - t0
    n = len(cases)
    print(f"analysis per case ({n} cases, equilibria solved beforehand)")
    print(f"  four-state LQR + risk (before motor lag)         {1e3 * t4 / n:8.1f} ms")
    print(f"  with motor lag {LAG_S:g} s: augmented LQR + risk +")
    print(f"  robustness (lag margin, channel margins) + gains {1e3 * ta / n:8.1f} ms   "
          f"ratio {ta / t4:5.2f}")


if __name__ == "__main__":
    hexa = Vehicle.from_design(load(ROOT / "data" / "designs" / "heavy_hex.toml"))
    augmented_against_four_state(hexa)
    fly_every_case(hexa)
