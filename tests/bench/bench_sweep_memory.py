"""Benchmark: memory and time of the largest sweep ``rotorbook sweep`` accepts.

Runs ``rotorbook sweep`` at the cap (:data:`kit.cli.MAX_SWEEP_POINTS` per side) on the heavy
hexacopter with one failed rotor, in a child process, and samples the resident memory of the
whole process tree (the command and its pool workers) every 0.25 s from ``/proc`` (Linux).
Prints the peak and the wall time; it never fails on time or memory. ``--points N`` runs a
smaller grid, ``--json`` measures the JSON output path as well.

Run ``python tests/bench/bench_sweep_memory.py`` (set ``ROTORBOOK_CACHE_DIR``); the grid at the
cap takes about ten minutes on two busy cores.
"""

from __future__ import annotations

import argparse
import os
import subprocess
import sys
import time
from pathlib import Path

from kit.cli import MAX_SWEEP_POINTS

ROOT = Path(__file__).resolve().parents[2]
DESIGN = ROOT / "data" / "designs" / "heavy_hex.toml"


def tree_rss_bytes(pid: int) -> int:
    """Summed resident memory of ``pid`` and all its descendants, in bytes."""
    children: dict[int, list[int]] = {}
    for entry in os.listdir("/proc"):
        if entry.isdigit():
            try:
                with open(f"/proc/{entry}/stat") as fh:
                    ppid = int(fh.read().rsplit(")", 1)[1].split()[1])
            except OSError:
                continue
            children.setdefault(ppid, []).append(int(entry))
    total, stack, page = 0, [pid], os.sysconf("SC_PAGE_SIZE")
    while stack:
        p = stack.pop()
        try:
            with open(f"/proc/{p}/statm") as fh:
                total += int(fh.read().split()[1]) * page
        except OSError:
            pass
        stack += children.get(p, [])
    return total


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--points", type=int, default=MAX_SWEEP_POINTS)
    ap.add_argument("--json", action="store_true")
    args = ap.parse_args()
    cmd = [sys.executable, "-m", "kit.cli", "sweep", str(DESIGN), "--part", "centre hub",
           "--failed", "m1", "--points", str(args.points)] + (["--json"] if args.json else [])
    t0 = time.perf_counter()
    proc = subprocess.Popen(cmd, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, cwd=ROOT)
    peak = 0
    while proc.poll() is None:
        peak = max(peak, tree_rss_bytes(proc.pid))
        time.sleep(0.25)
    wall = time.perf_counter() - t0
    err = proc.stderr.read().decode() if proc.stderr else ""
    if proc.stderr:
        proc.stderr.close()
    n = args.points ** 2
    print(f"sweep {args.points} x {args.points} ({n} points, heavy_hex, failed m1"
          f"{', --json' if args.json else ''}): exit {proc.returncode}, wall {wall:.1f} s "
          f"({1e3 * wall / n:.1f} ms per point), peak process-tree RSS {peak / 2**20:.1f} MiB")
    if proc.returncode:
        print(err)


if __name__ == "__main__":
    main()
