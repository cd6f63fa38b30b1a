"""Benchmark: slider change to updated figure data, in process, warm (``make bench``).

Times ``slider.value = x`` until the handler has replaced ``source.data``, queued the figure
patch and rewritten the readouts (the kernel's side only; ``bench_browser.py`` times the
whole wait in JupyterLab and Chromium). Prints
medians and their ratios to the targets (failure panel 50 ms, wheel panel 20 ms); it never
fails on time.

Failure panel, thrust-ratio slider: "new" values were never computed in this panel (a full
:func:`kit.analysis.report.analyse_case` warm-started from the previous equilibrium); "revisit"
values come from the panel's cache of case results. The nonlinear simulation is not part of a
slider change: it runs behind the 'simulate' button (timed separately).
"""

from __future__ import annotations

import statistics
import time
from pathlib import Path

from kit.analysis.vehicle import Vehicle
from kit.analysis.wheel import momentum_grid, wheel_study
from kit.design import load
from kit.panels import FailurePanel, WheelPanel

ROOT = Path(__file__).resolve().parents[2]
FAILURE_TARGET_S = 0.050
WHEEL_TARGET_S = 0.020


def _time_changes(slider, values) -> list[float]:
    out = []
    for v in values:
        t0 = time.perf_counter()
        slider.value = v
        out.append(time.perf_counter() - t0)
    return out


def _report(label: str, times: list[float], target_s: float) -> None:
    med = statistics.median(times)
    print(f"{label:58s} median {1e3 * med:7.1f} ms  (n={len(times)}, "
          f"max {1e3 * max(times):.1f} ms)  ratio to {1e3 * target_s:.0f} ms target: "
          f"{med / target_s:.2f}")


def bench_failure() -> None:
    d = load(ROOT / "data" / "designs" / "survey_quad.toml")
    p = FailurePanel(d, failed=("front_left",), simulate=False)
    p.mode.value = "thrust ratios"
    s = p.ratios["rear_right"]
    start = s.value
    new = [round(start + k * 0.01, 2) for k in (-3, -2, -1, 1, 2, 3, 4, 0)]
    _time_changes(s, [start - 0.04, start])  # warm: model, first solve
    times_new = _time_changes(s, new)
    times_rev = _time_changes(s, list(reversed(new)) + new)
    found = p.view.eq.found
    _report("failure panel, ratio slider, new values", times_new, FAILURE_TARGET_S)
    _report("failure panel, ratio slider, revisited values (cached)", times_rev,
            FAILURE_TARGET_S)
    p.mode.value = "least effort"
    sets = [("front_left",), ("front_right",), ("front_left", "rear_right"), ("rear_left",)]
    times_sets = []
    for fs in sets:
        t0 = time.perf_counter()
        p.set_failed(fs)
        times_sets.append(time.perf_counter() - t0)
    _report("failure panel, failed-rotor choice, new sets (least effort)", times_sets,
            FAILURE_TARGET_S)
    p.horizon.value = 3.0
    t0 = time.perf_counter()
    p.simulate()
    el_ms = 1e3 * (time.perf_counter() - t0)
    print(f"{'failure panel, simulate button (3 s horizon)':58s} {el_ms:7.1f} ms"
          f"  (not part of a slider change; last equilibrium found: {found})")


def bench_wheel() -> None:
    d = load(ROOT / "data" / "designs" / "wheel_quad.toml")
    veh = Vehicle.from_design(d)
    hmax = d.wheel.max_momentum_n_m_s
    study = wheel_study(veh, cases=[((), None)], h_grid=momentum_grid(hmax, per_side=10))
    p = WheelPanel(d, study=study)
    values = [round(hmax * k / 50, 6) for k in range(-50, 51, 3)]
    _time_changes(p.h, values[:3])
    _report("wheel panel, momentum slider", _time_changes(p.h, values), WHEEL_TARGET_S)


if __name__ == "__main__":
    bench_failure()
    bench_wheel()
