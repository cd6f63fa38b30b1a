"""Benchmark: panel latency where the user sees it, in JupyterLab driven in Chromium.

JupyterLab runs on 127.0.0.1 with a token (``tests/browser_helpers.py``); Playwright for Python
drives Debian's Chromium (``/usr/bin/chromium``, never a downloaded browser). Each workbook is
run once, then every control of every panel is moved several times. A sample is the time from
the input event (its ``timeStamp``) to the first animation frame after the last change of the
panel's figures (a change event of a live Bokeh document, or a new embed for a panel that
re-embeds), so it holds the kernel's work, the messages both ways and BokehJS's redraw. The
kernel part is the panel's own ``last_update_s`` read from the kernel after each sample; the
browser part is the rest. Also printed: the smallest and largest height of the panel's output
while updating (equal when nothing collapses).

Targets: median <= 50 ms and max <= 150 ms per control; printed as ratios (1.00 = on target),
never a failure. "simulate" and "compute map" show progress and are not timed.

A second table breaks each change down (medians per change): kernel messages to the page and
back and their bytes, counted on the page's WebSocket (status messages left out), of which
figure patches and page-to-kernel figure events; BokehJS's time applying patches; the number
of plot paints and their time; the time from the input to the first patch applied. Run with
notebook names (``hover.ipynb``) to time only those.
"""

from __future__ import annotations

import math
import re
import statistics
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT / "tests"))

from browser_helpers import (  # noqa: E402
    BOKEH_TIMING_JS,
    CHROMIUM,
    CHROMIUM_ARGS,
    FRAMES_JS,
    KERNEL_EXEC_JS,
    WS_LOG_INIT_JS,
    measure,
    open_and_run,
    panel_locator,
    start_lab,
)

MEDIAN_TARGET_MS = 50.0
MAX_TARGET_MS = 150.0
#: Samples per control.
REPEATS = 6

PANEL_CLASSES = {"Design overview": "OverviewPanel", "Hover": "HoverPanel",
                 "Rotor failure": "FailurePanel", "Momentum wheel": "WheelPanel",
                 "Placement": "PlacementPanel"}


def kernel_ms(page, cls: str) -> float | None:
    code = ("import gc as _gc\nfrom kit.panels.base import Panel as _P\n"
            "_rb = [o for o in _gc.get_objects() if isinstance(o, _P) and "
            f"type(o).__name__ == {cls!r}]\nprint(1e3 * _rb[-1].last_update_s if _rb else -1)")
    out = page.evaluate(KERNEL_EXEC_JS, code).strip()
    try:
        v = float(out.splitlines()[-1])
    except (ValueError, IndexError):
        return None
    return v if v >= 0 else None


def slider_act(panel, label: str, k: int):
    s = panel.locator(".widget-slider:not(.mod-disabled)").filter(
        has_text=re.compile(rf"^{re.escape(label)}")).first
    handle = s.locator(".noUi-handle")
    now = float(handle.get_attribute("aria-valuenow") or "nan")
    top = float(handle.get_attribute("aria-valuemax") or "nan")
    key = "ArrowLeft" if (k % 2 or now >= top) else "ArrowRight"

    def act():
        handle.focus()
        handle.press(key)
    return act


def dropdown_act(panel, label: str, k: int):
    sel = panel.locator(".widget-dropdown").filter(has_text=label).locator("select").first
    opts = sel.locator("option").all_inner_texts()
    cur = sel.evaluate("(s) => s.options[s.selectedIndex] ? s.options[s.selectedIndex].text"
                       " : ''")
    others = [o for o in opts if o != cur]
    target = others[k % len(others)]
    return lambda: sel.select_option(label=target)


def toggle_act(panel, options: list[str], k: int):
    box = panel.locator(".widget-toggle-buttons").filter(has_text=options[0]).first
    cur = [o for o in options if box.locator(".widget-toggle-button.mod-active",
                                                has_text=o).count()]
    target = [o for o in options if o not in cur][0]
    return lambda: box.locator(".widget-toggle-button", has_text=target).click()


def failed_act(panel, names: list[str], k: int):
    """One change of the failed set: a checkbox (or, in the older picker, a selection)."""
    multi = panel.locator(".widget-select-multiple select")
    if multi.count():
        target = names[(k + 1) % len(names)]
        return lambda: multi.first.select_option(label=target)
    # checkboxes: alternate adding and removing the last rotor to the first one's failure
    box = panel.locator(".widget-checkbox").filter(has_text=names[-1]).locator("input").first
    return lambda: box.click()


def run_panel(page, title: str, controls) -> list[tuple]:
    panel = panel_locator(page, title).first
    try:
        panel.wait_for(state="attached", timeout=60_000)
    except Exception:
        print(page.evaluate("() => Array.from(document.querySelectorAll("
                            "'.jp-OutputArea-output'), e => e.innerText.slice(0, 80))"))
        raise
    panel.evaluate("(el) => el.scrollIntoView({block: 'start'})")
    panel.wait_for(timeout=20_000)
    page.wait_for_timeout(500)
    rows = []
    page.evaluate(BOKEH_TIMING_JS)
    for label, make in controls:
        samples, kms, hmin, hmax, parts = [], [], float("inf"), 0.0, []
        for k in range(REPEATS):
            i0 = page.evaluate("() => (window.__rbWsLog || []).length")
            b0 = page.evaluate("() => (window.__rbBkLog || []).length")
            r = measure(page, panel, make(panel, k))
            if r["ms"] is not None:
                samples.append(r["ms"])
                parts.append(breakdown(page, i0, b0))
                km = kernel_ms(page, PANEL_CLASSES[title])
                if km is not None:
                    kms.append(km)
            hmin, hmax = min(hmin, r["hmin"]), max(hmax, r["hmax"])
            page.wait_for_timeout(150)
        rows.append((f"{title.lower()}: {label}", samples, kms, hmin, hmax, parts))
    return rows


def breakdown(page, i0: int, b0: int) -> dict:
    """Messages, bytes, patch and paint times of one change (from the logs' indices i0, b0)."""
    t0 = page.evaluate("() => window.__rbLatency.t0")
    frames = [f for f in page.evaluate(FRAMES_JS, i0) if not f["kind"].startswith("status")]
    bk = page.evaluate(f"() => (window.__rbBkLog || []).slice({b0})")
    ins = [f for f in frames if f["dir"] == "in"]
    outs = [f for f in frames if f["dir"] == "out"]
    patches = [b for b in bk if b["what"] == "patch"]
    paints = [b for b in bk if b["what"] == "paint"]
    return {
        "in_n": len(ins), "in_kb": sum(f["size"] for f in ins) / 1e3,
        "patch_msgs": sum(1 for f in ins if f["kind"].endswith(":patch")),
        "out_n": len(outs), "out_kb": sum(f["size"] for f in outs) / 1e3,
        "echo_msgs": sum(1 for f in outs if f["kind"].endswith(":jsevent")),
        "apply_ms": sum(b["ms"] for b in patches),
        "paints": len(paints), "paint_ms": sum(b["ms"] for b in paints),
        "first_patch_ms": (patches[0]["t"] - t0) if patches and t0 is not None else math.nan,
    }


def main(only=()) -> int:
    from playwright.sync_api import sync_playwright

    if not Path(CHROMIUM).exists():
        print(f"skipped: Debian's chromium is not installed at {CHROMIUM}")
        return 0
    rotors = ["front_left", "front_right", "rear_left", "rear_right"]
    plan = {
        "hover.ipynb": [
            ("Design overview", [("parts by", lambda p, k: dropdown_act(p, "parts by", k))]),
            ("Hover", [("payload", lambda p, k: slider_act(p, "payload", k))]),
        ],
        "rotor_out.ipynb": [
            ("Rotor failure", [
                ("failed rotors", lambda p, k: failed_act(p, rotors, k)),
                ("equilibrium mode", lambda p, k: toggle_act(
                    p, ["least effort", "thrust ratios"], k)),
                ("horizon", lambda p, k: slider_act(p, "horizon", k)),
            ]),
        ],
        "momentum_wheel.ipynb": [
            ("Momentum wheel", [
                ("momentum", lambda p, k: slider_act(p, "wheel momentum", k)),
            ]),
        ],
        "design_review.ipynb": [
            ("Placement", [
                ("map quantity", lambda p, k: dropdown_act(p, "map", k)),
                ("case shown", lambda p, k: toggle_act(p, ["failure case", "no failure"], k)),
            ]),
        ],
    }
    rows = []
    with tempfile.TemporaryDirectory() as tmp:
        lab = start_lab(Path(tmp))
        try:
            with sync_playwright() as pw:
                browser = pw.chromium.launch(executable_path=CHROMIUM, headless=True,
                                             args=["--headless", *CHROMIUM_ARGS])
                try:
                    for nb, panels in plan.items():
                        if only and nb not in only:
                            continue
                        ctx = browser.new_context(viewport={"width": 1400, "height": 1600})
                        ctx.add_init_script(WS_LOG_INIT_JS)
                        page = ctx.new_page()
                        t0 = time.monotonic()
                        try:
                            # a workspace of its own: no tab of an earlier notebook restored
                            ws = nb.removesuffix(".ipynb")
                            open_and_run(page, f"{lab.url}/lab/workspaces/{ws}/tree/workbooks/"
                                         f"{nb}?reset&token={lab.token}")
                        except Exception:
                            art = ROOT / "artifacts" / "browser"
                            art.mkdir(parents=True, exist_ok=True)
                            page.screenshot(path=str(art / f"bench_fail_{nb}.png"))
                            print(lab.log_tail(), flush=True)
                            raise
                        print(f"{nb}: opened and run in {time.monotonic() - t0:.1f} s",
                              flush=True)
                        for title, controls in panels:
                            if title == "Rotor failure":
                                # the horizon slider is live once the record's horizon is off
                                box = panel_locator(page, title).first.locator(
                                    ".widget-checkbox").filter(
                                    has_text="horizon as in the record").locator("input")
                                if box.count() and box.first.is_checked():
                                    box.first.click()
                                    page.wait_for_timeout(1500)
                            rows += run_panel(page, title, controls)
                            if title == "Rotor failure":
                                # ratio sliders: in thrust-ratio mode (left there by the toggle
                                # runs when REPEATS is odd; set it explicitly)
                                p = panel_locator(page, title).first
                                box = p.locator(".widget-toggle-button",
                                                has_text="thrust ratios")
                                if "mod-active" not in (box.get_attribute("class") or ""):
                                    box.click()
                                    page.wait_for_timeout(1500)
                                rows += run_panel(page, title, [
                                    ("ratio sliders", lambda p, k: slider_act(
                                        p, rotors[1 + k % 3], k))])
                        ctx.close()
                finally:
                    browser.close()
        finally:
            lab.stop()
    print(f"\n{'panel: control':34s} {'n':>2s} {'median ms':>9s} {'max ms':>8s} "
          f"{'kernel med':>10s} {'browser med':>11s} {'median/50':>9s} {'max/150':>8s} "
          f"{'height min..max px':>20s}")
    for label, s, kms, hmin, hmax, _parts in rows:
        if not s:
            print(f"{label:34s}  0  (no figure change seen)")
            continue
        med, mx = statistics.median(s), max(s)
        kmed = statistics.median(kms) if kms else float("nan")
        print(f"{label:34s} {len(s):2d} {med:9.0f} {mx:8.0f} {kmed:10.1f} {med - kmed:11.0f} "
              f"{med / MEDIAN_TARGET_MS:9.2f} {mx / MAX_TARGET_MS:8.2f} "
              f"{hmin:9.0f}..{hmax:<9.0f}")
    print("\nper change (medians): kernel -> page messages and kB (of which figure-patch "
          "messages),\npage -> kernel messages and kB (of which figure events sent back), "
          "BokehJS patch apply ms,\nplot paints and their ms, input to first patch applied ms")
    print(f"{'panel: control':34s} {'in n':>5s} {'in kB':>6s} {'patch':>5s} {'out n':>5s} "
          f"{'out kB':>6s} {'back':>5s} {'apply':>6s} {'paints':>6s} {'paint ms':>8s} "
          f"{'1st patch':>9s}")
    for label, _s, _k, _a, _b, parts in rows:
        if not parts:
            continue

        def m(key, parts=parts):
            vals = [p[key] for p in parts if not math.isnan(p[key])]
            return statistics.median(vals) if vals else math.nan
        print(f"{label:34s} {m('in_n'):5.0f} {m('in_kb'):6.1f} {m('patch_msgs'):5.0f} "
              f"{m('out_n'):5.0f} {m('out_kb'):6.1f} {m('echo_msgs'):5.0f} {m('apply_ms'):6.1f} "
              f"{m('paints'):6.0f} {m('paint_ms'):8.1f} {m('first_patch_ms'):9.0f}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main(sys.argv[1:]))
