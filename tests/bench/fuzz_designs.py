"""The long fuzz run (``make fuzz``): mutated demo designs through ``check`` and ``analyze``.

Each case is a demo design with one to three mutations (see ``tests/fuzzing.py``), written as a
TOML file and run through ``rotorbook check --json`` and, when it loads, ``rotorbook analyze
--json``, in this process. Prints the number of cases, the outcomes by kind (``ok``: a result;
``rejected``: exit 2 with a line on stderr; anything else is a problem: an exception that
escaped, a hang past the time limit, JSON with NaN/Infinity, exit 2 without a line, a Python
warning on stderr) and the slowest cases. Never fails on time; exits 1 when a problem was seen.

    .venv/bin/python tests/bench/fuzz_designs.py --cases 10000 --seed 1
"""

from __future__ import annotations

import argparse
import collections
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

import fuzzing  # noqa: E402


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--cases", type=int, default=10000)
    ap.add_argument("--seed", type=int, default=1)
    ap.add_argument("--time-limit-s", type=float, default=60.0,
                    help="wall time after which a command counts as a hang (default 60 s)")
    ap.add_argument("--no-analysis", action="store_true", help="run check only")
    ap.add_argument("--show", type=int, default=5, help="examples printed per problem kind")
    args = ap.parse_args(argv)

    docs = fuzzing.demo_documents()
    counts: dict[str, collections.Counter] = collections.defaultdict(collections.Counter)
    examples: dict[str, list[str]] = collections.defaultdict(list)
    slow: list[tuple[float, int, str]] = []
    t0 = time.perf_counter()
    with tempfile.TemporaryDirectory(prefix="rotorbook-fuzz-") as tmp:
        for i in range(args.cases):
            ch = fuzzing.RandomChooser(args.seed * 1_000_003 + i)
            doc, kinds = fuzzing.mutated(ch, docs)
            t = time.perf_counter()
            outcomes = fuzzing.run_case(doc, Path(tmp), analysis=not args.no_analysis,
                                        time_limit_s=args.time_limit_s)
            dt = time.perf_counter() - t
            slow.append((dt, i, "+".join(kinds)))
            for o in outcomes:
                counts[o.command][o.kind] += 1
                if not o.good and len(examples[o.kind]) < args.show:
                    examples[o.kind].append(f"case {i} ({'+'.join(kinds)}) {o.command}: "
                                            f"{o.detail}")
            if (i + 1) % 500 == 0:
                print(f"  {i + 1} cases, {time.perf_counter() - t0:.0f} s", file=sys.stderr,
                      flush=True)
    total = time.perf_counter() - t0
    print(f"fuzz: {args.cases} cases (seed {args.seed}), {total:.0f} s "
          f"({1000 * total / max(args.cases, 1):.0f} ms per case)")
    problems = 0
    for command in ("check", "analyze"):
        c = counts.get(command)
        if not c:
            continue
        print(f"  {command}: {sum(c.values())} runs")
        for kind, n in sorted(c.items(), key=lambda kv: (-kv[1], kv[0])):
            bad = kind not in ("ok", "rejected")
            problems += n if bad else 0
            print(f"    {kind:<40} {n:>6}{'   <- problem' if bad else ''}")
    hangs = sum(c.get("hang", 0) for c in counts.values())
    print(f"  hangs (over {args.time_limit_s:g} s): {hangs}")
    print(f"  problems in all: {problems}")
    for kind, lines in examples.items():
        print(f"  examples of {kind}:")
        for line in lines:
            print(f"    {line}")
    slow.sort(reverse=True)
    print("  slowest cases: " + ", ".join(f"#{i} {dt:.1f} s ({k})" for dt, i, k in slow[:5]))
    return 1 if problems else 0


if __name__ == "__main__":
    sys.exit(main())
