"""Benchmark: the analyses of many failure cases, warm (``make bench``; never fails on time).

1. Every single and pair failure case of the demo hexacopter (21 cases) plus the no-failure
   case: equilibrium, linearisation, controllability, LQR, saturation risk, and the H2 norm at
   20 wheel momenta (a candidate wheel is added, since the demo hexacopter has none).
   Target: <= 2 s.
2. Cost against rotor count: every single failure of a synthetic ring vehicle with 4, 6, 8 and
   12 rotors (equilibrium, control, risk), per case.
Prints times and ratios to the target, measured in one run.
"""

from __future__ import annotations

import dataclasses
import time
from pathlib import Path

from kit.analysis.equilibrium import all_cases
from kit.analysis.report import analyse_case
from kit.analysis.sweep import default_executor
from kit.analysis.vehicle import Vehicle
from kit.analysis.wheel import momentum_grid, wheel_curve, wheel_study
from kit.design import Wheel, load
from kit.models import ring_design

ROOT = Path(__file__).resolve().parents[2]
TARGET_S = 2.0


def hexacopter_cases() -> None:
    design = load(ROOT / "data" / "designs" / "heavy_hex.toml")
    veh = Vehicle.from_design(design)
    cases = all_cases(veh)
    analyse_case(veh, *cases[1])  # warm: generated module loaded, caches filled
    t0 = time.perf_counter()
    for failed, ratio in cases:
        analyse_case(veh, failed, ratio)
    t_cases = time.perf_counter() - t0

    wheel = Wheel(inertia_kg_m2=0.01, max_speed_rad_s=600.0, mass_kg=0.8,
                  position_m=(0.0, 0.0, 0.05))
    wveh = Vehicle.from_design(dataclasses.replace(design, wheel=wheel))
    _ = wveh.model  # derive or load the generated module before timing
    grid = momentum_grid(wheel.max_momentum_n_m_s, per_side=10)[1:]  # 20 values, -h..h
    t0 = time.perf_counter()
    for failed, ratio in cases:
        wheel_curve(wveh, failed, ratio, grid)
    t_wheel = time.perf_counter() - t0
    with default_executor(2) as ex:
        wheel_study(wveh, cases=cases[:2], h_grid=grid, executor=ex)  # start the workers
        t0 = time.perf_counter()
        wheel_study(wveh, cases=cases, h_grid=grid, executor=ex)
        t_wheel_2 = time.perf_counter() - t0
    total = t_cases + t_wheel
    print(f"hexacopter, {len(cases)} cases (no failure + {len(cases) - 1} failure sets)")
    print(f"  equilibrium + control + risk          {t_cases:8.2f} s")
    print(f"  H2 at {len(grid)} wheel momenta per case      {t_wheel:8.2f} s")
    print(f"  total                                 {total:8.2f} s   "
          f"ratio to target {total / TARGET_S:5.2f} (target <= 2 s)")
    total2 = t_cases + t_wheel_2
    print(f"  the H2 part on 2 worker processes     {t_wheel_2:8.2f} s   (total {total2:.2f} s, "
          f"ratio to target {total2 / TARGET_S:5.2f})")


def rotor_count() -> None:
    print("cost against rotor count (single failures, equilibrium + control + risk)")
    print("  rotors  cases   total [s]   per case [ms]")
    base = None
    for n in (4, 6, 8, 12):
        veh = Vehicle.from_design(ring_design(n_rotors=n, mass_kg=0.3 * n, max_thrust_n=3.5,
                                              inertia_kg_m2=(1e-3 * n, 1e-3 * n, 1.8e-3 * n),
                                              rotor_inertia_kg_m2=3e-6))
        _ = veh.model
        names = veh.names
        analyse_case(veh, (names[0],))
        t0 = time.perf_counter()
        for name in names:
            analyse_case(veh, (name,))
        dt = time.perf_counter() - t0
        per = dt / len(names)
        base = base or per
        print(f"  {n:6d}  {len(names):5d}  {dt:10.2f}  {1e3 * per:12.1f}   x{per / base:4.2f}")


if __name__ == "__main__":  # the guard lets worker processes import this file
    hexacopter_cases()
    rotor_count()
