"""Benchmark: the operating point (equilibrium + control + risk) against its targets and the
old search (``make bench``; prints ratios measured in one run, never fails on time).

Targets (issue 10): equilibrium + control + risk per case <= 5 ms median; the 22 hexacopter
cases plus a 20-point wheel study <= 0.4 s serial; all single and pair failures of a 12-rotor
vehicle (78 cases) <= 1.5 s; a 50 x 50 placement sweep <= 3 s on 2 cores. The old code is
the multi-start SLSQP search with continuation hints and the BFGS controllability distance,
kept in ``legacy_operating_point.py``; both run here, in this process, one after the other.
``--sweep-n`` sets the new sweep's grid (default 50); the old sweep runs on ``--old-sweep-n``
(default 8) and is compared per point.
"""

from __future__ import annotations

import os

from kit import BLAS_THREAD_VARS  # imports nothing: numpy is not loaded yet

# one BLAS thread, before numpy loads it: the matrices are small, and threaded BLAS on a busy
# machine spends its time waiting (as in the sweep's workers)
for _var in BLAS_THREAD_VARS:
    os.environ.setdefault(_var, "1")

import argparse  # noqa: E402
import contextlib  # noqa: E402
import dataclasses  # noqa: E402
import sys  # noqa: E402
import time  # noqa: E402
from pathlib import Path  # noqa: E402

import numpy as np  # noqa: E402

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))

import legacy_operating_point as legacy  # noqa: E402

from kit.analysis import control as C  # noqa: E402
from kit.analysis import equilibrium as E  # noqa: E402
from kit.analysis import risk as R  # noqa: E402
from kit.analysis import sweep  # noqa: E402
from kit.analysis import wheel as W  # noqa: E402
from kit.analysis.vehicle import Vehicle  # noqa: E402
from kit.design import Wheel, load  # noqa: E402
from kit.massprops import compute  # noqa: E402
from kit.models import ring_design  # noqa: E402

ROOT = HERE.parents[1]


def _legacy_solve(veh, failed=(), thrust_ratio=None, hint=None, rule=None, complete=True):
    """The old search under the new call (it has no rule and always searches everything)."""
    del rule, complete
    return legacy.solve(veh, failed, thrust_ratio, hint=hint)


@contextlib.contextmanager
def old_code():
    """Swap in the old search and controllability distance (module attributes)."""
    saved = (E.solve, C.controllability)
    E.solve, C.controllability = _legacy_solve, legacy.controllability_old
    try:
        yield
    finally:
        E.solve, C.controllability = saved


def one_case(veh, failed, ratio):
    """(equilibrium, control, risk) times of one case, in s."""
    c = veh.design.control
    t0 = time.perf_counter()
    eq = E.solve(veh, failed, ratio)
    t1 = time.perf_counter()
    ctl = C.design_control(veh, eq)
    t2 = time.perf_counter()
    R.saturation_risk(eq, ctl, c.disturbance_torque_psd_n2_m2_s, c.disturbance_time_constant_s)
    t3 = time.perf_counter()
    return t1 - t0, t2 - t1, t3 - t2


def cases_times(veh, cases):
    rows = [one_case(veh, f, r) for f, r in cases]
    return np.array(rows)


def line(label, value, unit, target, old):
    print(f"  {label:<46} {value:9.4g} {unit:<3} target {target:g} {unit}: ratio "
          f"{value / target:6.3g}   old {old:9.4g} {unit}: new/old {value / old:6.3g}")


def per_case_and_hexacopter(wheel_points: int) -> None:
    design = load(ROOT / "data" / "designs" / "heavy_hex.toml")
    veh = Vehicle.from_design(design)
    cases = E.all_cases(veh)
    one_case(veh, *cases[1])
    with old_code():
        one_case(veh, *cases[1])
        t_old = cases_times(veh, cases)
    t_new = cases_times(veh, cases)
    med_new = float(np.median(t_new.sum(axis=1))) * 1e3
    med_old = float(np.median(t_old.sum(axis=1))) * 1e3
    print(f"heavy hexacopter, {len(cases)} cases: equilibrium + control + risk per case")
    line("median per case", med_new, "ms", 5.0, med_old)
    for k, name in enumerate(("equilibrium", "control (LQR, PBH, H2)", "risk")):
        print(f"    {name:<28} median {1e3 * np.median(t_new[:, k]):8.3f} ms   "
              f"(old {1e3 * np.median(t_old[:, k]):8.3f} ms)")

    wheel = Wheel(inertia_kg_m2=0.01, max_speed_rad_s=600.0, mass_kg=0.8,
                  position_m=(0.0, 0.0, 0.05))
    wveh = Vehicle.from_design(dataclasses.replace(design, wheel=wheel))
    _ = wveh.model
    grid = W.momentum_grid(wheel.max_momentum_n_m_s, per_side=wheel_points // 2)[1:]

    def study():
        t0 = time.perf_counter()
        cases_times(veh, cases)
        for f, r in cases:
            W.wheel_curve(wveh, f, r, grid)
        return time.perf_counter() - t0

    with old_code():
        old = study()
    new = study()
    print(f"  {len(cases)} cases + H2 at {len(grid)} wheel momenta each, serial")
    line("total", new, "s", 0.4, old)


def twelve_rotors() -> None:
    veh = Vehicle.from_design(ring_design(
        n_rotors=12, mass_kg=3.6, max_thrust_n=3.5, inertia_kg_m2=(1.2e-2, 1.2e-2, 2.2e-2),
        rotor_inertia_kg_m2=3e-6, failure_sets="single+pairs"))
    cases = E.all_cases(veh)
    one_case(veh, *cases[1])
    t0 = time.perf_counter()
    cases_times(veh, cases)
    new = time.perf_counter() - t0
    # the old search on a sample of the cases (every sixth), scaled to all of them
    sample = cases[::6]
    with old_code():
        one_case(veh, *cases[1])
        t0 = time.perf_counter()
        cases_times(veh, sample)
        old = (time.perf_counter() - t0) * len(cases) / len(sample)
    print(f"12-rotor ring, {len(cases)} cases (no failure, single and pair failures)")
    line("total (old: every sixth case, scaled)", new, "s", 1.5, old)


def _old_row_task(design, part, dy_m, x_offsets_m, failed, ratio):
    """The old sweep row: continuation from the left neighbour with the old search."""
    E.solve, C.controllability = legacy.solve, legacy.controllability_old
    out = []
    hints = {}
    for dx in x_offsets_m:
        d = sweep.moved(design, part, float(dx), float(dy_m))
        veh = Vehicle.from_design(d, compute(d))
        for f in ([failed] if failed else []) + [()]:
            eq = legacy.solve(veh, f, ratio if f else None, hint=hints.get(f))
            if eq.found:
                hints[f] = (eq.spin_rate_rad_s, eq.n_bar)
                ctl = C.design_control(veh, eq)
                c = veh.design.control
                R.saturation_risk(eq, ctl, c.disturbance_torque_psd_n2_m2_s,
                                  c.disturbance_time_constant_s)
        out.append(dx)
    return out


def placement(n_new: int, n_old: int) -> None:
    d = load(ROOT / "data" / "designs" / "survey_quad.toml")
    failed = ("front_left", "rear_right")
    xs = np.linspace(-0.04, 0.04, n_new)
    with sweep.default_executor(2) as ex:
        sweep.placement_sweep(d, "battery", xs[:2], xs[:2], failed, executor=ex)  # warm
        t0 = time.perf_counter()
        sweep.placement_sweep(d, "battery", xs, xs, failed, executor=ex)
        new = time.perf_counter() - t0
        xo = np.linspace(-0.04, 0.04, n_old)
        ex.submit(_old_row_task, d, "battery", 0.0, tuple(xo[:1]), failed, None).result()
        t0 = time.perf_counter()
        futs = [ex.submit(_old_row_task, d, "battery", float(dy), tuple(xo), failed, None)
                for dy in xo]
        for f in futs:
            f.result()
        old = (time.perf_counter() - t0) * (n_new * n_new) / (n_old * n_old)
    print(f"placement sweep {n_new} x {n_new} (battery, survey quad, {', '.join(failed)} + "
          f"no failure), 2 worker processes")
    line(f"total (old: {n_old} x {n_old} grid, scaled per point)", new, "s", 3.0, old)


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__)
    ap.add_argument("--sweep-n", type=int, default=50)
    ap.add_argument("--old-sweep-n", type=int, default=8)
    ap.add_argument("--wheel-points", type=int, default=20)
    a = ap.parse_args()
    from threadpoolctl import threadpool_limits

    threadpool_limits(1)  # as in the sweep's workers: small matrices, no BLAS threads
    t0 = time.perf_counter()
    per_case_and_hexacopter(a.wheel_points)
    twelve_rotors()
    placement(a.sweep_n, a.old_sweep_n)
    print(f"(benchmark wall time {time.perf_counter() - t0:.1f} s)")


if __name__ == "__main__":  # the guard lets worker processes import this file
    main()
