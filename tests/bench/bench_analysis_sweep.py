"""Benchmark: placement sweep on a process pool (2 workers vs 1) and one failure simulation.

Run ``python tests/bench/bench_analysis_sweep.py`` (set ``ROTORBOOK_CACHE_DIR``). Prints times
and ratios measured in this run; it never fails on time. ``--single-rows k`` times the
one-worker run on the first ``k`` rows only and compares per-point throughput (the full 50 x 50
grid on one worker takes about twice as long as on two).
"""

from __future__ import annotations

import argparse
import time
from pathlib import Path

import numpy as np

from kit import design
from kit.analysis import simulate, sweep
from kit.analysis.vehicle import Vehicle

ROOT = Path(__file__).resolve().parents[2]
DESIGN = ROOT / "data" / "designs" / "survey_quad.toml"
FAILED = ("front_left", "rear_right")


def _sweep(d, xs, ys, workers: int) -> tuple[float, sweep.PlacementMap]:
    t0 = time.perf_counter()
    with sweep.default_executor(workers) as ex:
        m = sweep.placement_sweep(d, "battery", xs, ys, FAILED, executor=ex)
    return time.perf_counter() - t0, m


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__)
    ap.add_argument("--n", type=int, default=50, help="grid points per side (default 50)")
    ap.add_argument("--span-m", type=float, default=0.04, help="offset range +- (m)")
    ap.add_argument("--single-rows", type=int, default=10,
                    help="rows for the one-worker run (default: 10; the ratio is per point)")
    a = ap.parse_args()
    d = design.load(DESIGN)
    xs = ys = np.linspace(-a.span_m, a.span_m, a.n)
    pts = a.n * a.n
    t2, m2 = _sweep(d, xs, ys, 2)
    print(f"placement sweep {a.n} x {a.n} of 'battery' ({DESIGN.name}, failed "
          f"{', '.join(FAILED)} + no failure), 2 workers: {t2:.1f} s "
          f"({1e3 * t2 / pts:.0f} ms/point)")
    rows = a.n if a.single_rows is None else max(1, min(a.single_rows, a.n))
    t1, m1 = _sweep(d, xs, ys[:rows], 1)
    p1 = a.n * rows
    same = np.array_equal(m1.failure.spin_rate_rad_s, m2.failure.spin_rate_rad_s[:rows],
                          equal_nan=True)
    print(f"1 worker, {a.n} x {rows} grid: {t1:.1f} s ({1e3 * t1 / p1:.0f} ms/point); "
          f"speed-up 2 workers vs 1 (per point): {(t1 / p1) / (t2 / pts):.2f}; same numbers: "
          f"{same}")
    veh = Vehicle.from_design(d)
    simulate.simulate_failure(veh, FAILED, t_end=0.1)  # warm the model cache
    t0 = time.perf_counter()
    r = simulate.simulate_failure(veh, FAILED, t_end=5.0)
    ts = time.perf_counter() - t0
    print(f"failure simulation 5 s ({', '.join(FAILED)}): {ts:.2f} s wall "
          f"(equilibria + LQR + integration, {r.n_rhs_evaluations} rhs evaluations)")


if __name__ == "__main__":
    main()
