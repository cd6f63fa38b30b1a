"""The long fuzz run (``make fuzz``): mutated inputs through every command, in this process.

Targets (``--target``, several allowed; default ``designs``):

- ``designs``: demo designs with one to three mutations (``tests/fuzzing.py``) through
  ``rotorbook check --json`` and, when the file loads, ``rotorbook analyze --json``;
- ``stand``: the demo hexacopter beside a mutated thrust-stand CSV (missing columns, NaN,
  negative thrust, shuffled speeds, too few points, huge files, BOM and other encodings, wrong
  units) through ``check --json`` and ``check --expanded``;
- ``shorthand``: mutated rotor types, rotor and arm rings, battery, Bryson limits and degraded
  cases through ``check --json`` and ``check --expanded``;
- ``compare``: pairs of ``analyze --json`` documents (mutated, revisions renamed, other
  designs, cases and checks dropped) through ``compare --json`` and ``compare --html``;
- ``history``: design folders with a corrupt analysis cache, a bad revision file or a bad file
  to add, through ``history``;
- ``options``: wrong options and arguments of every command, and random edits of them.

Prints per command the number of runs and the outcomes by kind: ``ok`` (a result),
``rejected`` (exit 2, each stderr line naming the field and the fix), and the problems:
``traceback:<type>`` (an exception escaped), ``multi-line`` (a usage block or a message broken
over lines), ``unclear`` (no fix named), ``silent-exit-2``, ``hang``, ``bad-json``, ``warning``,
``exit-<n>``. Never fails on time; exits 1 when a problem was seen.

    .venv/bin/python tests/bench/fuzz_designs.py --cases 10000 --seed 1
    .venv/bin/python tests/bench/fuzz_designs.py --target stand shorthand compare history \
        options --cases 2000
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

TARGETS = ("designs", "stand", "shorthand", "compare", "history", "options")
GOOD = ("ok", "rejected")


def _designs(ch, folder, args):
    doc, kinds = fuzzing.mutated(ch, fuzzing.demo_documents())
    outs = fuzzing.run_case(doc, folder, analysis=not args.no_analysis,
                            time_limit_s=args.time_limit_s)
    return kinds, outs


def _stand(ch, folder, args):
    data, kinds = fuzzing.mutate_stand(ch)
    return kinds, fuzzing.run_stand_case(data, folder, args.time_limit_s)


def _shorthand(ch, folder, args):
    doc, kinds = fuzzing.mutated_shorthand(ch)
    return kinds, fuzzing.run_shorthand_case(doc, folder, args.time_limit_s)


def _compare(ch, folder, args):
    old, new, kinds = fuzzing.compare_pair(ch)
    return kinds, fuzzing.run_compare_case(old, new, folder, args.time_limit_s,
                                           html=ch.integer(0, 9) == 0)


def _history(ch, folder, args):
    kinds, out = fuzzing.run_history_case(
        ch, folder, args.time_limit_s,
        fuzzing.HISTORY_KINDS if args.slow_history else fuzzing.QUICK_HISTORY_KINDS)
    return kinds, [out]


def _options(ch, folder, args):
    fixed = fuzzing.option_cases(folder)
    if ch.integer(0, 1):
        argv = fixed[ch.integer(0, len(fixed) - 1)]
    else:
        argv = fuzzing.mutated_argv(ch, folder)
        if not fuzzing.argv_is_quick(argv):
            return ["skipped"], []
    return [" ".join(argv)[:80]], [fuzzing.run_option_case(argv, args.time_limit_s)]


RUNNERS = {"designs": _designs, "stand": _stand, "shorthand": _shorthand, "compare": _compare,
           "history": _history, "options": _options}


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--cases", type=int, default=10000, help="cases per target")
    ap.add_argument("--seed", type=int, default=1)
    ap.add_argument("--target", nargs="+", choices=TARGETS, default=["designs"])
    ap.add_argument("--time-limit-s", type=float, default=60.0,
                    help="wall time after which a command counts as a hang (default 60 s)")
    ap.add_argument("--slow-history", action="store_true",
                    help="history: also corrupt analysis caches (each makes the revision be "
                         "analysed again, about a minute)")
    ap.add_argument("--no-analysis", action="store_true", help="designs: run check only")
    ap.add_argument("--show", type=int, default=5, help="examples printed per problem kind")
    args = ap.parse_args(argv)

    problems = 0
    for target in args.target:
        problems += _run_target(target, args)
    print(f"problems in all: {problems}")
    return 1 if problems else 0


def _run_target(target: str, args) -> int:
    counts: dict[str, collections.Counter] = collections.defaultdict(collections.Counter)
    examples: dict[str, list[str]] = collections.defaultdict(list)
    slow: list[tuple[float, int, str]] = []
    t0 = time.perf_counter()
    for i in range(args.cases):
        ch = fuzzing.RandomChooser(args.seed * 1_000_003 + i)
        with tempfile.TemporaryDirectory(prefix="rotorbook-fuzz-") as tmp:
            t = time.perf_counter()
            kinds, outcomes = RUNNERS[target](ch, Path(tmp), args)
            dt = time.perf_counter() - t
        label = "+".join(map(str, kinds))
        slow.append((dt, i, label))
        for o in outcomes:
            counts[o.command][o.kind] += 1
            key = f"{o.command} {o.kind}"
            if o.kind not in GOOD and len(examples[key]) < args.show:
                examples[key].append(f"case {i} ({label}): {o.detail}")
        if (i + 1) % 500 == 0:
            print(f"  {target}: {i + 1} cases, {time.perf_counter() - t0:.0f} s",
                  file=sys.stderr, flush=True)
    total = time.perf_counter() - t0
    print(f"fuzz {target}: {args.cases} cases (seed {args.seed}), {total:.0f} s "
          f"({1000 * total / max(args.cases, 1):.0f} ms per case)")
    problems = 0
    for command, c in sorted(counts.items()):
        print(f"  {command}: {sum(c.values())} runs")
        for kind, n in sorted(c.items(), key=lambda kv: (-kv[1], kv[0])):
            bad = kind not in GOOD
            problems += n if bad else 0
            print(f"    {kind:<40} {n:>6}{'   <- problem' if bad else ''}")
    hangs = sum(c.get("hang", 0) for c in counts.values())
    print(f"  hangs (over {args.time_limit_s:g} s): {hangs}")
    print(f"  problems: {problems}")
    for key, lines in examples.items():
        print(f"  examples of {key}:")
        for line in lines:
            print(f"    {line}")
    slow.sort(reverse=True)
    print("  slowest cases: " + ", ".join(f"#{i} {dt:.1f} s ({k[:60]})" for dt, i, k in slow[:5]))
    return problems


if __name__ == "__main__":
    sys.exit(main())
