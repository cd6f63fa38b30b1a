"""Benchmark of the symbolic layer: cold derivation, warm start, and evaluating (A, B).

Run as ``python tests/bench/bench_symbolic.py``; prints a table and ratios measured in this
run. Targets (never enforced): cold derivation of 4 rotors well under 10 s; warm start
<= 5 % of a cold start; generated (A, B) >= 1000x faster than sympy subs/evalf per point and
at most 1.5x slower than a hand-written numpy kernel.
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[2]
sys.path[:0] = [str(ROOT), str(ROOT / "tests")]

COLD = """
import json, time, tracemalloc
if {trace}:
    tracemalloc.start()
t0 = time.perf_counter()
from kit.symbolic.structure import Structure
from kit.symbolic.codegen import generate_source
text = generate_source(Structure({n}, True, "linear"), cse=True)
dt = time.perf_counter() - t0
peak = tracemalloc.get_traced_memory()[1] if {trace} else 0
print(json.dumps(dict(seconds=dt, peak=peak, chars=len(text))))
"""

START = """
import json, sys, time
t0 = time.perf_counter()
import numpy
from kit.numeric import load_model
from kit.symbolic import Structure
t1 = time.perf_counter()
load_model(Structure({n}, True, "linear"))
t2 = time.perf_counter()
print(json.dumps(dict(total=t2 - t0, load=t2 - t1, sympy="sympy" in sys.modules)))
"""


def _run(code: str, env=None) -> dict:
    out = subprocess.run([sys.executable, "-c", code], cwd=ROOT, env=env, check=True,
                         capture_output=True, text=True)
    return json.loads(out.stdout.strip().splitlines()[-1])


def _best(fun, repeat=5):
    times = []
    for _ in range(repeat):
        t0 = time.perf_counter()
        fun()
        times.append(time.perf_counter() - t0)
    return min(times)


def main() -> None:
    rows = []
    print("Cold derivation + code generation (fresh interpreter, sympy import included;")
    print("peak memory from a second run under tracemalloc, which slows it down)")
    print(f"{'rotors':>7} {'time [s]':>10} {'peak mem [MB]':>14} {'module [kB]':>12}")
    for n in (4, 6, 8, 12):
        r = _run(COLD.format(n=n, trace=False))
        peak = _run(COLD.format(n=n, trace=True))["peak"]
        rows.append(r)
        print(f"{n:>7} {r['seconds']:>10.2f} {peak / 1e6:>14.1f} {r['chars'] / 1e3:>12.1f}")

    print("\nload_model(4 rotors + wheel) in a fresh interpreter: 'load' is the call itself,")
    print("'total' adds importing numpy and kit.numeric, which every user of the kit pays")
    with tempfile.TemporaryDirectory() as tmp:
        env = dict(os.environ, ROTORBOOK_CACHE_DIR=tmp)
        cold = _run(START.format(n=4), env)
        warm = min((_run(START.format(n=4), env) for _ in range(3)), key=lambda r: r["load"])
    for name, r in (("cold", cold), ("warm", warm)):
        print(f"  {name}: load {r['load'] * 1e3:8.1f} ms   total {r['total'] * 1e3:8.1f} ms"
              f"   (sympy imported: {r['sympy']})")
    print(f"  warm / cold (load)  = {warm['load'] / cold['load']:.1%}   (target <= 5 %)")
    print(f"  warm / cold (total) = {warm['total'] / cold['total']:.1%}")

    print("\nEvaluating (A, B) of 4 rotors + wheel for 1e5 parameter sets")
    import sympy as sp
    from _reference_field import generated, random_params
    from _reference_field import reduced_AB as hand_AB

    from kit.symbolic.reduced import reduced_model
    from kit.symbolic.rigid_body import symbols_for
    from kit.symbolic.structure import Structure

    n, wheel, count = 4, True, 100_000
    rng = np.random.default_rng(0)
    par = random_params(rng, n, wheel, batch=(count,))
    xr = np.concatenate([rng.uniform(-2, 2, (count, 3)), rng.uniform(-0.4, 0.4, (count, 2))], -1)
    f = rng.uniform(0.5, 6.0, (count, n))
    mod = generated(n, wheel)
    t_gen = _best(lambda: mod.reduced_AB(xr, f, par))
    t_hand = _best(lambda: hand_AB(xr, f, par, n, wheel))

    st = Structure(n, wheel, "linear")
    sym = symbols_for(st)
    red = reduced_model(st)
    A_expr = red.A.xreplace(sym.jinv_subs)
    B_expr = red.B.xreplace(sym.jinv_subs)
    state = (*sym.omega, sym.n[0], sym.n[1])
    points = 100
    t0 = time.perf_counter()
    for k in range(points):
        vals = dict(zip(sym.par, par[k], strict=True))
        vals.update(zip(state, xr[k], strict=True))
        vals.update(zip(sym.f, f[k], strict=True))
        A_expr.subs(vals).evalf()
        B_expr.subs(vals).evalf()
    t_sympy = (time.perf_counter() - t0) / points * count
    print(f"  generated (vectorised)        {t_gen * 1e3:10.1f} ms")
    print(f"  hand-written numpy kernel     {t_hand * 1e3:10.1f} ms")
    print(f"  sympy subs/evalf (from {points} pts) {t_sympy:10.1f} s")
    print(f"  speed-up over subs/evalf      {t_sympy / t_gen:10.0f} x   (target >= 1000 x)")
    print(f"  generated / hand-written      {t_gen / t_hand:10.2f}     (target <= 1.5)")
    del sp


if __name__ == "__main__":
    main()
