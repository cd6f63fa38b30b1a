"""Real-browser tests: the workbooks live in JupyterLab, and an HTML record opened offline.

JupyterLab runs on 127.0.0.1 with a random token (see ``browser_helpers``); Debian's Chromium,
driven by Playwright, runs each workbook and moves every control of its panels: the figure's
data in the page changes with no new Bokeh document (figures are updated in place), the page
logs no console error, and with every rotor failed the figures keep their axes and show the
reason over the plot. In thrust-ratio mode every single failure of the survey quad has an
equilibrium right after switching. A record is then opened from ``file://`` with every other
request aborted. Any request to another host fails a test. Each wait is bounded (module
constants). Screenshots go to ``artifacts/browser/`` (git-ignored).
"""

from __future__ import annotations

import re
import time
from pathlib import Path

import pytest
from browser_helpers import (
    ARTIFACTS,
    CANVASES_JS,
    CHROMIUM,
    CHROMIUM_ARGS,
    LIVE_DATA_JS,
    NOTICES_AND_RANGES_JS,
    ROOT,
    SOURCE_DATA_JS,
    Offline,
    cache_dir,
    open_and_run,
    panel_locator,
    start_lab,
    wait_until,
)

pytestmark = [
    pytest.mark.slow,
    pytest.mark.skipif(not Path(CHROMIUM).exists(),
                       reason=f"Debian's chromium is not installed at {CHROMIUM} "
                              "(`make test` installs it when run as root)"),
]

DESIGN = ROOT / "data" / "designs" / "survey_quad.toml"
#: Bounded waits, in ms (Playwright) or s (polling).
PAGE_MS = 60_000
RUN_ALL_S = 120.0
UPDATE_S = 30.0


@pytest.fixture(scope="module")
def lab(tmp_path_factory):
    server = start_lab(tmp_path_factory.mktemp("lab"))
    yield server
    server.stop()


@pytest.fixture(scope="module")
def browser():
    from playwright.sync_api import sync_playwright

    with sync_playwright() as p:
        b = p.chromium.launch(executable_path=CHROMIUM, headless=True, args=CHROMIUM_ARGS)
        try:
            yield b
        finally:
            b.close()


class LivePage:
    """One notebook open and run in its own workspace, with console errors and requests noted."""

    def __init__(self, browser, lab, nb: str) -> None:
        self.offline = Offline(allow_file=False)
        self.sockets: list[str] = []
        self.console_errors: list[str] = []
        self.context = browser.new_context(viewport={"width": 1400, "height": 1900})
        self.context.route("**/*", self.offline)
        self.page = page = self.context.new_page()
        page.on("websocket", lambda ws: self.sockets.append(ws.url))
        page.on("console", lambda m: self.console_errors.append(m.text)
                if m.type == "error" else None)
        page.on("pageerror", lambda e: self.console_errors.append(f"page error: {e}"))
        ws = nb.removesuffix(".ipynb")
        t0 = time.monotonic()
        open_and_run(page, f"{lab.url}/lab/workspaces/{ws}/tree/workbooks/{nb}?reset&token="
                     f"{lab.token}", timeout_s=RUN_ALL_S)
        self.run_s = time.monotonic() - t0

    def panel(self, title: str):
        p = panel_locator(self.page, title).first
        p.wait_for(state="attached", timeout=PAGE_MS)
        p.evaluate("(el) => el.scrollIntoView({block: 'start'})")
        p.wait_for(timeout=PAGE_MS)
        wait_until(lambda: len([c for c in p.evaluate(CANVASES_JS)
                                if c["cw"] > 0 and c["ch"] > 0]) > 0,
                   UPDATE_S, f"a Bokeh canvas in the {title} panel")
        return p

    def data(self, col: str) -> dict:
        return self.page.evaluate(LIVE_DATA_JS, col)

    def changed(self, col: str, before: dict, what: str) -> dict:
        """Wait until the source holding ``col`` differs from ``before``; no new document."""
        after = wait_until(lambda: (d := self.data(col))["data"] != before["data"] and d,
                           UPDATE_S, what)
        assert after["ndocs"] == before["ndocs"], (
            f"{what}: a new Bokeh document was embedded ({before['ndocs']} -> "
            f"{after['ndocs']})")
        return after

    def close(self) -> None:
        self.context.close()
        assert not self.console_errors, f"console errors: {self.console_errors[:5]}"
        assert not self.offline.aborted, f"the page tried other hosts: {self.offline.aborted}"
        assert all(re.match(r"wss?://(127\.0\.0\.1|localhost)[:/]", u)
                   for u in self.sockets), self.sockets


def _press(panel, label: str, key: str = "ArrowLeft") -> None:
    s = panel.locator(".widget-slider:not(.mod-disabled)").filter(
        has_text=re.compile(rf"^{re.escape(label)}")).first
    h = s.locator(".noUi-handle")
    now = float(h.get_attribute("aria-valuenow"))
    lo = float(h.get_attribute("aria-valuemin"))
    h.focus()
    h.press("ArrowRight" if now <= lo else key)


def _relaxed_hover_text(panel) -> str:
    return panel.locator("table.rb-kv").filter(has_text="Relaxed hover").first.inner_text(
        timeout=PAGE_MS)


def _checkbox(panel, name: str):
    return panel.locator(".widget-checkbox").filter(has_text=name).locator("input").first


def _set_failed(lp: LivePage, panel, names, rotors) -> None:
    """Tick exactly ``names``: untick first (never all at once ticked), then tick."""
    for n in rotors:
        box = _checkbox(panel, n)
        if box.is_checked() != (n in names):
            if n in names:
                continue
            box.click()
    for n in names:
        box = _checkbox(panel, n)
        if not box.is_checked():
            box.click()
    want = "failed: " + ", ".join(r for r in rotors if r in names)
    wait_until(lambda: want in _relaxed_hover_text(panel), UPDATE_S,
               f"the failure panel to show {want}")


ROTORS = ["front_left", "front_right", "rear_right", "rear_left"]


def test_failure_panel_live(lab, browser):
    lp = LivePage(browser, lab, "rotor_out.ipynb")
    try:
        panel = lp.panel("Rotor failure")
        canvases = [c for c in panel.evaluate(CANVASES_JS) if c["cw"] > 0 and c["ch"] > 0]
        assert len(canvases) >= 5, f"expected the panel's 5 figures to draw, saw {canvases}"
        height0 = panel.evaluate("(el) => el.getBoundingClientRect().height")
        # failed rotors: a checkbox per rotor
        d0 = lp.data("thrust")
        assert d0["data"], d0
        _set_failed(lp, panel, ["front_left"], ROTORS)
        d1 = lp.changed("thrust", d0, "thrust bars after failing front_left only")
        # equilibrium mode toggle
        # (the ratios start at the least-effort member: the same thrusts, sliders enabled)
        panel.locator(".widget-toggle-button", has_text="thrust ratios").click()
        panel.locator(".widget-slider:not(.mod-disabled)").filter(
            has_text=re.compile(r"^rear_left")).first.wait_for(timeout=UPDATE_S * 1000)
        lp.page.wait_for_timeout(500)
        d2 = lp.data("thrust")
        assert d2["ndocs"] == d1["ndocs"]
        # a ratio slider
        _press(panel, "rear_left")
        d3 = lp.changed("thrust", d2, "thrust bars after a ratio slider moved")
        # simulate (button), then the horizon slider marks the response out of date
        r0 = lp.data("spin")
        panel.locator("button", has_text="simulate").click()
        r1 = lp.changed("spin", r0, "the time response after 'simulate'")
        assert r1["data"]["t"], "no time response drawn"
        # the record's horizon (the default) off: the response is out of date, the horizon
        # slider is live, and a simulation then ends at its value
        panel.locator(".widget-checkbox").filter(has_text="horizon as in the record").locator(
            "input").click()
        r2 = lp.changed("spin", r1, "the time response cleared after the horizon changed")
        _press(panel, "horizon", "ArrowRight")
        h = float(panel.locator(".widget-slider").filter(has_text=re.compile(
            r"^horizon")).locator(".noUi-handle").first.get_attribute("aria-valuenow"))
        panel.locator("button", has_text="simulate").click()
        r3 = lp.changed("spin", r2, "the time response after 'simulate' with the slider's horizon")
        assert abs(r3["data"]["t"][-1] - h) < 0.05, (r3["data"]["t"][-1], h)
        # simulate on change
        panel.locator(".widget-checkbox").filter(has_text="simulate on change").locator(
            "input").click()
        # thrust-ratio mode: every single failure has an equilibrium after switching
        for name in ROTORS:
            _set_failed(lp, panel, [name], ROTORS)
            text = _relaxed_hover_text(panel)
            assert "free directions" in text, f"no equilibrium after failing {name}: {text}"
        d4 = lp.data("thrust")
        # no equilibrium: every rotor failed -> a notice over the figures, axes kept
        for name in ROTORS:
            box = _checkbox(panel, name)
            if not box.is_checked():
                box.click()
        lp.changed("thrust", d4, "thrust bars emptied with every rotor failed")
        st = wait_until(lambda: (x := lp.page.evaluate(NOTICES_AND_RANGES_JS)) and any(
            "every rotor has failed" in t for t in x["notices"]) and x, UPDATE_S,
            "the notice 'every rotor has failed' over the figures")
        assert not st["bad_ranges"], f"a figure lost its axes: {st['bad_ranges']}"
        canvases = [c for c in panel.evaluate(CANVASES_JS) if c["cw"] > 0 and c["ch"] > 0]
        assert len(canvases) >= 5, canvases
        # and back: the notice goes away
        _checkbox(panel, "rear_left").click()
        wait_until(lambda: not any("every rotor" in t for t in lp.page.evaluate(
            NOTICES_AND_RANGES_JS)["notices"]), UPDATE_S, "the notice to go away")
        height1 = panel.evaluate("(el) => el.getBoundingClientRect().height")
        ARTIFACTS.mkdir(parents=True, exist_ok=True)
        panel.evaluate("(el) => el.scrollIntoView({block: 'start'})")
        lp.page.wait_for_timeout(300)
        lp.page.screenshot(path=str(ARTIFACTS / "rotor_out_lab.png"))
        print(f"\nrotor_out: run {lp.run_s:.1f} s; thrust {d0['data']['thrust']} -> "
              f"{d3['data']['thrust']}; panel height {height0:.0f} -> {height1:.0f} px; "
              f"documents {d0['ndocs']}")
    finally:
        lp.close()


def test_hover_workbook_panels_live(lab, browser):
    lp = LivePage(browser, lab, "hover.ipynb")
    try:
        ov = lp.panel("Design overview")
        n0 = lp.data("label_sy")
        table0 = ov.locator("table.rb-kv").filter(has_text="Parts").first.inner_text()
        ov.locator(".widget-dropdown select").first.select_option(label="mass")
        wait_until(lambda: ov.locator("table.rb-kv").filter(has_text="Parts").first
                   .inner_text() != table0, UPDATE_S, "the parts table to re-sort")
        assert lp.data("label_sy")["ndocs"] == n0["ndocs"]
        hv = lp.panel("Hover")
        d0 = lp.data("threshold")
        _press(hv, "payload", "ArrowRight")
        lp.changed("threshold", d0, "hover thrust bars after the payload moved")
    finally:
        lp.close()


def test_wheel_panel_live(lab, browser):
    lp = LivePage(browser, lab, "momentum_wheel.ipynb")
    try:
        wp = lp.panel("Momentum wheel")
        m0 = lp.data("h,ratio")
        _press(wp, "wheel momentum")
        lp.changed("h,ratio", m0, "the wheel marker after the slider moved")
        sel = wp.locator(".widget-dropdown select").first
        opts = sel.locator("option").all_inner_texts()
        c0 = lp.data("fixed")
        sel.select_option(label=opts[-1])
        lp.changed("fixed", c0, "the wheel curve after another case")
    finally:
        lp.close()


def test_placement_panel_live(lab, browser):
    lp = LivePage(browser, lab, "design_review.ipynb")
    try:
        pp = lp.panel("Placement")
        v0 = lp.data("value")
        pp.locator(".widget-dropdown").filter(has_text="map").locator("select").first \
            .select_option(label="spin rate (rad/s)")
        v1 = lp.changed("value", v0, "the map after another quantity")
        pp.locator(".widget-toggle-button", has_text="no failure").click()
        lp.changed("value", v1, "the map after showing the no-failure case")
        # a click on the middle of the map reads out that cell
        canvas = pp.locator(".bk-Canvas, canvas").first
        box = pp.evaluate("""(el) => { let best = null; const walk = (n) => { if (!n) return;
            if (n.tagName === 'CANVAS') { const r = n.getBoundingClientRect();
              if (!best || r.width * r.height > best.width * best.height) best = r; }
            if (n.shadowRoot) walk(n.shadowRoot); for (const c of n.children || []) walk(c); };
            walk(el); return best && {x: best.x, y: best.y, w: best.width, h: best.height}; }""")
        assert box, canvas
        # the plot frame sits left of the colour bar and above the legend: aim at its centre
        lp.page.mouse.click(box["x"] + 0.45 * box["w"], box["y"] + 0.42 * box["h"])
        wait_until(lambda: "clicked cell" in pp.inner_text(), UPDATE_S,
                   "the readout of the clicked cell")
    finally:
        lp.close()


@pytest.fixture(scope="module")
def record(tmp_path_factory):
    """The rotor_out record of survey_quad, made once for the record tests (~5-10 s)."""
    from kit.record.render import record_design

    out = tmp_path_factory.mktemp("record")
    t0 = time.monotonic()
    with pytest.MonkeyPatch.context() as mp:
        mp.setenv("ROTORBOOK_CACHE_DIR", cache_dir())
        result = record_design(str(DESIGN), workbooks=["rotor_out"], out_dir=out, force=True)
    assert result.ok, result.lines()
    (rec,) = result.records
    assert Path(rec.html_path).is_file()
    return result, Path(rec.html_path), time.monotonic() - t0


def _open_offline(browser, html_path: Path):
    """A page showing ``html_path`` from file://, every other request aborted and noted."""
    offline = Offline(allow_file=True)
    requested: list[str] = []
    context = browser.new_context(viewport={"width": 1400, "height": 1000})
    context.route("**/*", offline)
    page = context.new_page()
    page.on("request", lambda r: requested.append(r.url))
    page.goto(html_path.as_uri(), wait_until="load", timeout=PAGE_MS)
    return context, page, offline, requested


def _assert_offline(offline: Offline, requested: list[str]) -> None:
    assert not offline.aborted, f"the record tried to load: {offline.aborted}"
    outside = [u for u in requested if not u.startswith(("file:", "data:", "blob:", "about:"))]
    assert not outside, f"the record made requests off the file system: {outside}"


def test_rotor_out_record_offline(browser, record):
    result, html_path, t_record = record
    context, page, offline, requested = _open_offline(browser, html_path)
    try:
        # header: design name and the design file's SHA-256
        header = page.locator("header.rb-sheet-head")
        header.wait_for(timeout=PAGE_MS)
        head_text = header.inner_text()
        assert result.design_name in head_text, head_text
        assert "SHA-256" in head_text and re.search(r"\b[0-9a-f]{64}\b", head_text), head_text
        cautions = page.locator("section.rb-cautions")
        assert cautions.locator("h2").inner_text().strip() == "Cautions"
        assert cautions.locator("li").count() >= 3
        # equations as MathML, laid out and visible
        maths = page.locator("math")
        n_math = maths.count()
        assert n_math > 0, "no MathML <math> element in the record"
        sizes = page.evaluate("() => Array.from(document.querySelectorAll('math'), m => {"
                              "const r = m.getBoundingClientRect(); return [r.width, r.height];})")
        assert all(w > 0 and h > 0 for w, h in sizes), f"a <math> with no size: {sizes}"
        assert page.locator("math[display=block]").first.is_visible()
        # Bokeh drew its canvases inside its shadow roots
        canvases = wait_until(lambda: [c for c in page.evaluate(
            f"() => ({CANVASES_JS})(document.body)") if c["cw"] > 0 and c["ch"] > 0],
            UPDATE_S, "a Bokeh canvas of non-zero size in the record")
        assert len(canvases) >= 5, f"expected the failure panel's 5 figures, saw {canvases}"
        data = page.evaluate(SOURCE_DATA_JS, "thrust")
        assert data and data["data"] and len(data["data"]["thrust"]) == 4, data
        ARTIFACTS.mkdir(parents=True, exist_ok=True)
        page.screenshot(path=str(ARTIFACTS / "rotor_out_record.png"), full_page=True)
        print(f"\nrecord: made in {t_record:.1f} s, {n_math} <math>, "
              f"{len(canvases)} canvases, {len(requested)} request(s)")
    finally:
        context.close()
    _assert_offline(offline, requested)


#: JavaScript: the equation cells of block MathML whose content starts right of the visible box
#: of the scrolling container (so a reader sees an empty row until scrolling sideways).
HIDDEN_EQUATIONS_JS = """() => {
  const hidden = [];
  for (const m of document.querySelectorAll('math[display=block]')) {
    const box = (m.closest('.rb-math') || m.parentElement).getBoundingClientRect();
    for (const td of m.querySelectorAll('mtd')) {
      const parts = Array.from(td.children, c => c.getBoundingClientRect())
          .filter(r => r.width > 0);
      if (!parts.length) continue;
      const left = Math.min(...parts.map(r => r.left));
      if (left >= box.right) hidden.push(td.textContent.slice(0, 40));
    }
  }
  return hidden;
}"""


def test_record_equations_visible_without_scrolling(browser, record):
    _result, html_path, _t = record
    context, page, offline, requested = _open_offline(browser, html_path)
    try:
        hidden = page.evaluate(HIDDEN_EQUATIONS_JS)
    finally:
        context.close()
    _assert_offline(offline, requested)
    assert not hidden, f"{len(hidden)} equation cell(s) start outside the visible box: {hidden[:5]}"
