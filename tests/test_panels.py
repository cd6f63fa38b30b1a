"""Panels, headless: set a control's value, the figure data and readouts follow kit.analysis."""

import html
import subprocess
import sys
from concurrent.futures import ThreadPoolExecutor

import numpy as np
import pytest

from kit import plots
from kit.analysis.equilibrium import solve
from kit.analysis.hover import analyse_hover
from kit.analysis.report import analyse_case
from kit.analysis.sweep import placement_sweep
from kit.analysis.vehicle import Vehicle
from kit.analysis.wheel import momentum_grid, wheel_study
from kit.design import load
from kit.panels import (
    FailurePanel,
    HoverPanel,
    OverviewPanel,
    PlacementPanel,
    TextProgress,
    WheelPanel,
)
from kit.panels.hover import with_payload
from tests.conftest import ROOT

DESIGNS = ROOT / "data" / "designs"


@pytest.fixture(scope="module")
def survey():
    return load(DESIGNS / "survey_quad.toml")


@pytest.fixture(scope="module")
def wheel_quad():
    return load(DESIGNS / "wheel_quad.toml")


def _snapshot_ok(panel, *values):
    bundle = panel._repr_mimebundle_()
    assert "application/vnd.jupyter.widget-view+json" in bundle
    text = bundle["text/html"]
    assert text.count("Bokeh.embed.embed_items") >= 1 and 'class="rb-figure"' in text
    for v in values:
        assert v in text and v in bundle["text/plain"]
    return text


def test_import_has_no_side_effects_and_stays_light():
    code = ("import sys, kit.panels, kit.panels.progress, kit.plots; "
            "print(sorted(m for m in ('bokeh', 'ipywidgets') if m in sys.modules))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         check=True)
    assert out.stdout.strip() == "[]" and out.stderr == ""


def test_overview(survey):
    p = OverviewPanel(survey)
    veh = p.vehicle
    data = p.sources["rotors"].data
    np.testing.assert_allclose(data["sy"], veh.mp.rotor_positions_m[:, 0], rtol=1e-5)
    p.sort_by.value = "mass"
    masses = [m for _, m, _ in p.view.parts]
    assert masses == sorted(masses, reverse=True)
    contrib = {n: (m, J) for n, m, J in veh.mp.contribution_kg_m2()}
    for name, m, J in p.view.parts:
        assert m == contrib[name][0]
        np.testing.assert_allclose(J, contrib[name][1])
    text = _snapshot_ok(p, "mass")
    assert "battery" in text and "kg m\u00b2" in text


def test_hover_payload_slider(survey):
    p = HoverPanel(survey)
    veh = p.vehicle
    h0 = analyse_hover(veh)
    np.testing.assert_allclose(p.sources["thrust"]["bars"].data["thrust"], h0.thrust_n,
                               rtol=1e-5)
    p.payload.value = 0.4
    h1 = analyse_hover(with_payload(veh, 0.4))
    np.testing.assert_allclose(p.sources["thrust"]["bars"].data["thrust"], h1.thrust_n,
                               rtol=1e-5)
    np.testing.assert_allclose(p.sources["torque"]["bars"].data["margin"],
                               h1.torque_margin_n_m, rtol=1e-5)
    assert p.view.hover.thrust_to_weight == pytest.approx(h1.thrust_to_weight)
    assert plots.fmt(h1.thrust_to_weight, 3) in p.readout_html
    _snapshot_ok(p, "0.4 kg")


def test_failure_panel_follows_analyse_case(survey):
    p = FailurePanel(survey, failed=("front_left",), simulate=False)
    veh = p.vehicle
    c = analyse_case(veh, ("front_left",))
    np.testing.assert_allclose(p.sources["thrust"]["bars"].data["thrust"], c.eq.thrust_n,
                               rtol=1e-4, atol=1e-6)
    np.testing.assert_allclose(sorted(p.sources["poles"]["closed"].data["re"]),
                               sorted(c.ctl.closed_loop_poles.real), rtol=1e-4)
    assert plots.fmt(c.eq.spin_rate_rad_s, 3, "rad/s") in p.readout_html
    # the static-hover authority of this failure set and the rule's reason (kit.analysis)
    assert plots.fmt(c.eq.authority.index, 3) in p.readout_html
    assert html.escape(c.eq.chosen_by) in p.readout_html
    # the circle is drawn in mm
    assert p.sources["circle"]["path"].data["x"][0] == pytest.approx(
        1e3 * c.eq.circle_radius_m, rel=1e-5)
    # another failure set
    p.set_failed(("front_left", "rear_right"))
    c2 = analyse_case(veh, ("front_left", "rear_right"))
    np.testing.assert_allclose(p.sources["thrust"]["bars"].data["thrust"], c2.eq.thrust_n,
                               rtol=1e-4, atol=1e-6)
    assert p.sources["thrust"]["bars"].data["colour"][0] == plots.COLOURS["failed"]
    assert p.message == ""
    _snapshot_ok(p, "front_left, rear_right")


def test_failure_panel_thrust_ratio_sliders(survey):
    p = FailurePanel(survey, failed=("front_left",), simulate=False)
    p.mode.value = "thrust ratios"  # starts from the least-effort member, rounded to 0.01
    ratio = p.thrust_ratio()
    assert set(ratio) == {"front_right", "rear_right", "rear_left"}
    assert p.ratios["front_left"].disabled
    p.ratios["rear_right"].value = 0.22
    eq = solve(p.vehicle, ("front_left",), p.thrust_ratio())
    assert p.view.eq.found == eq.found
    if eq.found:
        assert p.view.eq.spin_rate_rad_s == pytest.approx(eq.spin_rate_rad_s, rel=1e-6)
    _snapshot_ok(p, "rear_right 0.22")


def test_failing_every_rotor_shows_a_message(survey):
    p = FailurePanel(survey, failed=("front_left",), simulate=False)
    p.set_failed(survey.rotor_names)
    assert "every rotor has failed" in p.message
    assert "every rotor has failed" in p._repr_mimebundle_()["text/html"]
    assert p.sources["thrust"]["bars"].data["thrust"] == [0.0] * 4  # bars kept at zero
    assert p.sources["thrust"]["bars"].data["colour"] == [plots.COLOURS["failed"]] * 4
    p.set_failed(("front_left",))  # and it recovers
    assert p.message == "" and p.view.eq.found


def test_failure_panel_simulation(survey):
    p = FailurePanel(survey, failed=("front_left", "rear_right"), simulate=False, horizon_s=1.0)
    assert p.sources["response"]["series"].data["t"] == []
    p.simulate()
    t = p.sources["response"]["series"].data["t"]
    assert t[0] == 0.0 and t[-1] == pytest.approx(1.0)
    assert p.sim is not None and "final spin rate" in p.readout_html
    p.horizon.value = 1.5  # a change marks the response out of date
    assert p.sim is None and p.sources["response"]["series"].data["t"] == []


@pytest.fixture(scope="module")
def small_study(wheel_quad):
    veh = Vehicle.from_design(wheel_quad)
    grid = momentum_grid(wheel_quad.wheel.max_momentum_n_m_s, per_side=4)
    return wheel_study(veh, cases=[((), None), (("left", "right"), None)], h_grid=grid)


def test_wheel_panel_marker_and_sizing(wheel_quad, small_study):
    p = WheelPanel(wheel_quad, study=small_study)
    curve = small_study.curves[0]
    np.testing.assert_allclose(p.sources["curve"].data["h"], curve.h_n_m_s, rtol=1e-5)
    h = 0.3 * small_study.h_max_n_m_s
    p.h.value = h
    h = p.h.value  # the slider's step
    ok = np.isfinite(curve.h2_ratio)
    expect = np.interp(h, curve.h_n_m_s[ok], curve.h2_ratio[ok])
    assert p.sources["marker"].data["h"] == [pytest.approx(h, rel=1e-5)]
    assert p.sources["marker"].data["ratio"][0] == pytest.approx(expect, rel=1e-5)
    sizing = wheel_study(p.vehicle, cases=[], chosen_h_n_m_s=h)
    assert p.view.wheel_speed_rad_s == pytest.approx(sizing.wheel_speed_rad_s)
    assert p.view.stored_energy_j == pytest.approx(sizing.stored_energy_j)
    assert p.view.gyro_torque_n_m == pytest.approx(abs(h) * small_study.max_body_rate_rad_s)
    assert plots.fmt(sizing.stored_energy_j, 3, "J") in p.readout_html
    p.case.value = "failed: left, right"
    np.testing.assert_allclose(p.sources["curve"].data["ratio"],
                               small_study.curves[1].h2_ratio, rtol=1e-5)
    _snapshot_ok(p, "failed: left, right")


def test_wheel_panel_without_a_wheel_shows_no_figure(survey):
    p = WheelPanel(survey)
    assert "no [wheel]" in p.message and p.h.disabled
    assert p.figure_widget is None and not p.show_figure
    text = p._repr_mimebundle_()["text/html"]
    assert "no [wheel]" in text and "rb-figure" not in text


def test_sliders_update_on_release(survey, wheel_quad, small_study):
    """Throttling rule: every slider of every panel updates on release only."""
    import ipywidgets as w

    panels = [HoverPanel(survey), FailurePanel(survey, simulate=False),
              WheelPanel(wheel_quad, study=small_study), PlacementPanel(survey, points=3)]
    sliders = [c for p in panels for c in p.controls.values()
               if isinstance(c, w.FloatSlider | w.IntSlider)]
    assert len(sliders) >= 8
    assert not [s.description for s in sliders if s.continuous_update]


def _patches(panel, monkeypatch):
    """Record the messages the panel's live figure sends (jupyter_bokeh patch messages)."""
    sent = []
    monkeypatch.setattr(panel.figure_widget, "send",
                        lambda content, buffers=None: sent.append(content))
    return sent


def test_a_change_pushes_one_patch_and_never_re_embeds(survey, monkeypatch):
    import json

    p = FailurePanel(survey, failed=("front_left",), simulate=False)
    bundle = p.figure_widget.render_bundle
    sent = _patches(p, monkeypatch)
    before = list(p.sources["thrust"]["bars"].data["thrust"])
    p.set_failed(("front_right",))
    assert p.sources["thrust"]["bars"].data["thrust"] != before
    # one PATCH-DOC message (header, metadata, content, then its buffers), no new bundle
    headers = [json.loads(m["payload"]) for m in sent if "payload" in m
               and '"msgtype"' in str(m["payload"])]
    assert [h["msgtype"] for h in headers] == ["PATCH-DOC"]
    assert p.figure_widget.render_bundle is bundle
    # nothing changed: nothing sent
    sent.clear()
    p.refresh()
    assert sent == []


def test_thrust_ratio_mode_resets_ratios_for_every_single_failure(survey):
    p = FailurePanel(survey, failed=("front_left",), simulate=False)
    p.mode.value = "thrust ratios"
    assert p.view.eq.found
    for name in survey.rotor_names:
        p.set_failed((name,))
        ratio = p.thrust_ratio()
        assert name not in ratio and min(ratio.values()) > 0, ratio
        assert p.view.eq.found, (name, p.message)
        assert p.message == "" and not p.notices["thrust"].visible
    # one checkbox at a time, as a user ticks them
    p.failed_boxes["front_left"].value = False
    p.failed_boxes["front_left"].value = True
    assert p.failed_set() == ("front_left", survey.rotor_names[-1]) or p.failed_set()


def test_no_equilibrium_keeps_the_axes_and_says_so_over_the_figure(survey):
    p = FailurePanel(survey, failed=("front_left",), simulate=False)
    p.set_failed(survey.rotor_names)
    note = p.notices["poles"]
    assert note.visible and "every rotor has failed" in note.text
    # the invisible anchor point keeps each data range defined
    assert p.sources["poles"]["anchor"].data == {"re": [0.0], "im": [0.0]}
    assert p.sources["circle"]["anchor"].data == {"x": [0.0], "y": [0.0]}
    p.set_failed(("front_left",))
    assert not note.visible and note.text == ""


def test_simulate_button_is_disabled_while_it_runs(survey, monkeypatch):
    import kit.analysis.simulate as sim_mod

    p = FailurePanel(survey, failed=("front_left",), simulate=False, horizon_s=0.5)
    seen = []
    real = sim_mod.simulate_failure

    def spy(*a, **k):
        seen.append(p.simulate_button.disabled)
        return real(*a, **k)

    monkeypatch.setattr(sim_mod, "simulate_failure", spy)
    p.simulate()
    assert seen == [True] and not p.simulate_button.disabled


def test_failure_thrust_legend_has_no_threshold(survey):
    p = FailurePanel(survey, simulate=False)
    labels = [i.label.value for i in p.thrust_fig.legend[0].items
              if hasattr(i.label, "value")]
    assert "review threshold" not in labels and "limit" in labels


def test_stale_design_file_is_noticed(survey, tmp_path):
    src = (DESIGNS / "survey_quad.toml").read_text()
    path = tmp_path / "quad.toml"
    path.write_text(src)
    p = HoverPanel(load(path))
    assert p.stale_message == ""
    path.write_text(src + "\n# edited\n")
    p.payload.value = p.payload.step
    assert "changed since it was loaded" in p.stale_message
    assert "changed since it was loaded" in p._repr_mimebundle_()["text/html"]


def test_placement_panel(survey):
    with ThreadPoolExecutor(2) as ex:
        p = PlacementPanel(survey, part="battery", failed=("front_left",), span_m=0.02,
                           points=3, executor=ex)
        assert "not computed" in p.message
        p.compute()
        assert p.progress.bar.value == p.progress.bar.max == 9
        ref = placement_sweep(survey, "battery", [-0.02, 0, 0.02], [-0.02, 0, 0.02],
                              ("front_left",), executor=ex)
    np.testing.assert_allclose(p.sources["cells"].data["value"],
                               ref.failure.saturation_probability.ravel(), rtol=1e-5)
    p.quantity.value = "spin rate (rad/s)"
    np.testing.assert_allclose(p.sources["cells"].data["value"],
                               ref.failure.spin_rate_rad_s.ravel(), rtol=1e-5)
    assert p.mapper.low == pytest.approx(np.nanmin(ref.failure.spin_rate_rad_s), rel=1e-5)
    # the failed hub is marked, the review threshold drawn as a contour where it is crossed
    assert p.sources["failed"].data["name"] == ["front_left"]
    thr = p.view.threshold
    assert thr == pytest.approx(survey.review.max_spin_fraction_of_gyro
                                * survey.review.gyro_full_scale_rad_s)
    crossed = np.nanmin(ref.failure.spin_rate_rad_s) < thr < np.nanmax(ref.failure.spin_rate_rad_s)
    xs = p.contour.line_renderer.data_source.data["xs"]
    assert bool(len(xs) and len(xs[0])) == crossed
    # a clicked cell is read out
    p.sources["cells"].selected.indices = [4]
    assert "clicked cell" in p._cell.value and p.sources["cells"].data["text"][4] in p._cell.value
    assert p.colour_bar.title == "spin rate (rad/s)"
    p.points.value = 5
    assert "press 'compute map'" in p.readout_html
    _snapshot_ok(p, "battery", "spin rate (rad/s)")


def test_placement_starts_with_the_heaviest_part(survey):
    p = PlacementPanel(survey, points=3)
    heaviest = max(survey.parts, key=lambda q: q.mass_kg)
    assert p.part.value == heaviest.name


def test_placement_button_disabled_while_computing(survey, monkeypatch):
    import kit.panels.placement as pl

    p = PlacementPanel(survey, part="battery", points=3, span_m=0.01)
    seen = []

    def fake_sweep(*a, **k):
        seen.append(p.compute_button.disabled)
        raise ValueError("stopped by the test")

    monkeypatch.setattr(pl, "placement_sweep", fake_sweep)
    p.compute()
    assert seen == [True] and not p.compute_button.disabled


def test_text_progress():
    import io

    s = io.StringIO()
    bar = TextProgress("sweep", stream=s, width=10)
    bar(0, 4)
    bar(2, 4)
    bar(4, 4)
    out = s.getvalue()
    assert "[#####.....] 2/4" in out and out.endswith("\n") and "[##########] 4/4" in out


def test_bokehjs_is_served_by_the_extension():
    from kit.panels import serve

    class App:
        def __init__(self):
            from tornado.web import Application

            self.web_app = Application(base_url="/")
            self.log = __import__("logging").getLogger("test")

    app = App()
    serve._load_jupyter_server_extension(app)
    patterns = [r.matcher.regex.pattern for rule in app.web_app.default_router.rules
                for r in getattr(rule.target, "rules", [rule])]
    assert any("rotorbook/bokehjs" in p for p in patterns)


def test_ranges_follow_the_data_in_the_same_patch(survey, monkeypatch):
    import json

    p = FailurePanel(survey, failed=("front_left",), simulate=False)
    sent = _patches(p, monkeypatch)
    p.set_failed(("front_right",))
    # one PATCH-DOC holding the data and the ranges fitted in the kernel (the page does not
    # fit them after drawing, which would cost a second layout and repaint)
    content = [json.loads(m["payload"]) for m in sent if "payload" in m
               and '"events"' in str(m["payload"])]
    assert len(content) == 1
    attrs = {e.get("attr") for e in content[0]["events"]}
    assert "data" in attrs or any(e["kind"] == "ColumnDataChanged" for e in content[0]["events"])
    poles = p.sources["poles"]["closed"].data
    xr, yr = p.poles_fig.x_range, p.poles_fig.y_range
    assert xr.start <= min(poles["re"]) and max(poles["re"] + [0.0]) <= xr.end
    assert yr.start == -yr.end and max(abs(v) for v in poles["im"]) <= yr.end
    # the circle: one range on both axes of a square frame (round, whole)
    c = p.circle_fig
    assert (c.x_range.start, c.x_range.end) == (c.y_range.start, c.y_range.end)
    assert c.frame_width == c.frame_height
    r_mm = max(abs(v) for v in p.sources["circle"]["path"].data["x"])
    assert c.x_range.end >= r_mm
    thrust = p.thrust_fig.y_range
    assert thrust.start == 0 and thrust.end >= max(p.sources["thrust"]["bars"].data["limit"])


def test_nice_bounds_round_out_and_keep_the_axis_for_small_moves():
    # steps of 1, 2, 2.5, 5 x 10^k (common practice, no source)
    assert plots.nice_bounds([0.0, 9.3], pad=0.05, start=0.0) == (0.0, 10.0)
    assert plots.nice_bounds([-23.3, 0.0], pad=0.1) == (-30.0, 10.0)  # step 10
    assert plots.nice_bounds([-23.1, 0.0], pad=0.1) == plots.nice_bounds([-23.3, 0.0], pad=0.1)
    assert plots.nice_bounds([1.0, -3.0], symmetric=True) == (-4.0, 4.0)  # step 2
    assert plots.nice_bounds([float("nan")]) is None  # no data: the figure keeps its range


def test_page_echo_of_a_patch_is_ignored_a_selection_is_taken(survey):
    pp = PlacementPanel(survey)
    fw = pp.figure_widget
    src = pp.sources["hubs"]
    before = dict(src.data)
    # jupyter_bokeh's view sends back what it applied: not taken (stale by the time it lands)
    fw._sync_model(fw, {"event": "jsevent", "kind": "ModelChanged", "model": {"id": src.id},
                        "attr": "data", "new": {"type": "map", "entries": [["sx", [9.0]]]}}, [])
    assert dict(src.data) == before
    sel = pp.sources["cells"].selected
    fw._sync_model(fw, {"event": "jsevent", "kind": "ModelChanged", "model": {"id": sel.id},
                        "attr": "indices", "new": [0]}, [])
    assert list(sel.indices) == [0]


def test_failure_simulation_uses_the_record_horizon_by_default(survey):
    from kit.analysis.simulate import simulate_failure

    p = FailurePanel(survey, failed=("front_left",), simulate=False)
    assert p.record_horizon.value and p.horizon.disabled and p.t_end_s() is None
    p.simulate()
    ref = simulate_failure(p.vehicle, ("front_left",))  # what the record's analysis runs
    assert p.sim.t[-1] == pytest.approx(ref.t[-1])
    assert "simulated" in p.sim_status.value
    assert "the record's horizon" in html.unescape(p.readout_html)
    p.record_horizon.value = False  # the slider's horizon; the response is out of date
    assert not p.horizon.disabled and p.t_end_s() == p.horizon.value and p.sim is None
