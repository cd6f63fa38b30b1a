"""Real-browser tests: a workbook live in JupyterLab, and an HTML record opened offline.

JupyterLab runs on 127.0.0.1 with a random token (see ``browser_helpers``); Debian's Chromium,
driven by Playwright, runs ``rotor_out.ipynb``, moves a control of the failure panel and sees
the readouts and the plot data change. A record of the same workbook is then opened from
``file://`` with every other request aborted. In both, any request to another host fails the
test. Screenshots go to ``artifacts/browser/`` (git-ignored).
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
    ROOT,
    SOURCE_DATA_JS,
    Offline,
    cache_dir,
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


def _failure_panel(page):
    """The output holding the failure panel's widget (its title and its sliders)."""
    return (page.locator(".jp-OutputArea-output")
            .filter(has=page.locator(".widget-slider"))
            .filter(has_text="Rotor failure:"))


def _relaxed_hover_text(panel) -> str:
    t = panel.locator("table.rb-kv").filter(has_text="Relaxed hover").first
    return t.inner_text(timeout=PAGE_MS)


def _thrust_data(page):
    return page.evaluate(SOURCE_DATA_JS, "thrust")


def test_rotor_out_live_in_lab(lab, browser):
    t0 = time.monotonic()
    offline = Offline(allow_file=False)
    sockets: list[str] = []
    console_errors: list[str] = []
    # tall enough for the whole failure panel (controls, readouts, figures) in one screenshot
    context = browser.new_context(viewport={"width": 1400, "height": 1900})
    context.route("**/*", offline)
    page = context.new_page()
    page.on("websocket", lambda ws: sockets.append(ws.url))
    page.on("console", lambda m: console_errors.append(m.text) if m.type == "error" else None)
    try:
        page.goto(f"{lab.url}/lab/tree/workbooks/rotor_out.ipynb?token={lab.token}",
                  timeout=PAGE_MS)
        page.wait_for_function(
            "() => window.jupyterapp && window.jupyterapp.shell.currentWidget"
            " && window.jupyterapp.shell.currentWidget.sessionContext"
            " && window.jupyterapp.shell.currentWidget.sessionContext.session"
            " && window.jupyterapp.shell.currentWidget.sessionContext.session.kernel"
            " && window.jupyterapp.shell.currentWidget.sessionContext.session.kernel.status"
            " === 'idle'", timeout=PAGE_MS)
        t_open = time.monotonic() - t0
        page.evaluate("() => { window.rbRunAll = window.jupyterapp.commands"
                      ".execute('notebook:run-all-cells').then(ok => { window.rbRunAllDone ="
                      " String(ok); }, err => { window.rbRunAllDone = 'error: ' + err; }); }")
        page.wait_for_function("() => window.rbRunAllDone !== undefined",
                               timeout=RUN_ALL_S * 1000)
        done = page.evaluate("() => window.rbRunAllDone")
        errors = page.locator(".jp-OutputArea-output[data-mime-type="
                              "'application/vnd.jupyter.stderr']").all_inner_texts()
        tracebacks = [e for e in errors if "Traceback" in e or "Error" in e]
        assert done == "true", f"run all cells did not succeed ({done}): {tracebacks[:2]}"
        t_run = time.monotonic() - t0 - t_open

        panel = _failure_panel(page)
        panel.first.wait_for(timeout=PAGE_MS)
        assert panel.count() == 1, "expected one failure panel widget in the page"
        panel.scroll_into_view_if_needed()
        # BokehJS came from kit.panels.serve and drew the panel's figures
        page.wait_for_function("() => window.Bokeh !== undefined && window.Bokeh.documents"
                               " && window.Bokeh.documents.length > 0", timeout=PAGE_MS)
        canvases = wait_until(lambda: [c for c in panel.evaluate(CANVASES_JS)
                                       if c["cw"] > 0 and c["ch"] > 0],
                              UPDATE_S, "a Bokeh canvas of non-zero size in the failure panel")
        assert len(canvases) >= 5, f"expected the panel's 5 figures to draw, saw {canvases}"

        before_text = _relaxed_hover_text(panel)
        before = _thrust_data(page)
        assert before and before["data"], f"no thrust source in Bokeh.documents: {before}"

        # 'thrust ratios' mode enables the ratio sliders of the working rotors
        panel.locator(".widget-toggle-button", has_text="thrust ratios").click()
        handle = panel.locator(".widget-slider:not(.mod-disabled)").filter(
            has_text=re.compile(r"^front_right")).locator(".noUi-handle")
        handle.wait_for(timeout=UPDATE_S * 1000)
        wait_until(lambda: _thrust_data(page)["embeds"] > before["embeds"], UPDATE_S,
                   "the panel to redraw after switching to thrust ratios")
        mid_text = _relaxed_hover_text(panel)
        mid = _thrust_data(page)

        slider = panel.locator(".widget-slider").filter(has_text=re.compile(r"^front_right"))
        readout = slider.locator(".widget-readout")
        r0 = readout.inner_text()
        handle.focus()
        page.keyboard.press("ArrowLeft" if r0.strip() == "1.00" else "ArrowRight")
        wait_until(lambda: readout.inner_text() != r0, UPDATE_S,
                   f"the front_right slider readout to move from {r0}")
        after = wait_until(lambda: (d := _thrust_data(page))["embeds"] > mid["embeds"] and d,
                           UPDATE_S, "the panel to redraw after the slider moved")
        after_text = wait_until(lambda: (t := _relaxed_hover_text(panel)) != mid_text and t,
                                UPDATE_S, "the relaxed-hover readout to change")
        assert after["data"]["thrust"] != mid["data"]["thrust"], (
            f"thrust bars did not change: {mid['data']['thrust']} -> {after['data']['thrust']}")
        assert after_text != before_text
        # redraws replace the panel's figure: BokehJS must not keep the old documents
        assert after["ndocs"] <= before["ndocs"], (
            f"Bokeh documents piled up: {before['ndocs']} -> {after['ndocs']}")
        canvases = [c for c in panel.evaluate(CANVASES_JS) if c["cw"] > 0 and c["ch"] > 0]
        assert len(canvases) >= 5, f"figures did not redraw after the change: {canvases}"
        t_interact = time.monotonic() - t0 - t_open - t_run

        ARTIFACTS.mkdir(parents=True, exist_ok=True)
        panel.evaluate("(el) => el.scrollIntoView({block: 'start'})")
        page.wait_for_timeout(300)  # let the notebook's windowed list settle after scrolling
        page.screenshot(path=str(ARTIFACTS / "rotor_out_lab.png"))
        print(f"\nlab: open {t_open:.1f} s, run all {t_run:.1f} s, interact {t_interact:.1f} s;"
              f" readout {r0} -> {readout.inner_text()}; thrust {mid['data']['thrust']} -> "
              f"{after['data']['thrust']}; {len(canvases)} canvases; Bokeh documents "
              f"{before['ndocs']} -> {after['ndocs']}; sockets {sockets}; "
              f"console errors {console_errors}")
    finally:
        context.close()
    assert not offline.aborted, f"the page tried to reach other hosts: {offline.aborted}"
    assert all(re.match(r"wss?://(127\.0\.0\.1|localhost)[:/]", u) for u in sockets), sockets


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
