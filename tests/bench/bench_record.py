"""Benchmark: one calculation record per workbook (``make bench``; never fails on time).

Records each workbook template for the demo survey quad into a temporary folder and prints the
time and size per workbook, with the ratio to the target (15 s per workbook), measured in one
run. The first workbook also pays for the kernel start and the imports.
"""

from __future__ import annotations

import tempfile
import time
from pathlib import Path

from kit.record.render import record_design

ROOT = Path(__file__).resolve().parents[2]
TARGET_S = 15.0


def main() -> None:
    design = ROOT / "data" / "designs" / "survey_quad.toml"
    names = sorted(p.stem for p in (ROOT / "workbooks").glob("*.ipynb"))
    print(f"records of {design.name}, one workbook at a time")
    print("  workbook          time [s]  ratio to 15 s   HTML [MB]  notebook [kB]")
    with tempfile.TemporaryDirectory() as tmp:
        for name in names:
            out = Path(tmp) / name
            t0 = time.perf_counter()
            result = record_design(design, workbooks=[name], out_dir=out, force=True)
            dt = time.perf_counter() - t0
            html = out / f"{name}.html"
            nb = out / f"{name}.ipynb"
            state = "" if result.ok else "  FAILED"
            print(f"  {name:<16} {dt:9.1f}  {dt / TARGET_S:13.2f}   "
                  f"{html.stat().st_size / 1e6:9.2f}  {nb.stat().st_size / 1e3:13.0f}{state}")


if __name__ == "__main__":
    main()
