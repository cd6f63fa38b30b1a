"""Comparing two design revisions (kit.compare, rotorbook compare, the comparison record).

The comparison computes no physics: its reference values are the two analyses themselves
(differences of ``analyze(...).to_dict()``) and the closed form of a centre-of-mass shift.
"""

import copy
import json
import math
import tomllib

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from kit.analysis.report import analyze
from kit.cli import main
from kit.compare import (
    DEFAULT_EROSION,
    EXIT_OK,
    EXIT_WORSE,
    compare,
    load_revision,
    revision_from_design,
    unit_of,
)
from kit.design import from_dict, load
from kit.models import ring_design
from kit.record.offline import external_references
from tests.conftest import DEMO_DESIGNS, ROOT

SURVEY = ROOT / "data" / "designs" / "survey_quad.toml"
REV_B = ROOT / "data" / "revisions" / "survey_quad_rev_b.toml"


@pytest.fixture(scope="module")
def analyses():
    """One analysis per demo design and per revision file, run once for the module."""
    cache = {}

    def get(path):
        if path not in cache:
            d = load(path)
            cache[path] = (d, analyze(d).to_dict())
        return cache[path]

    return get


def _rev(design, analysis):
    return revision_from_design(design, copy.deepcopy(analysis))


def _survey_variant(**review) -> tuple:
    """The survey quad with some [review] thresholds changed, as (design, analysis)."""
    data = tomllib.loads(SURVEY.read_text(encoding="utf-8"))
    data["review"].update(review)
    d = from_dict(data, source="survey variant", sha256="0" * 64)
    return d, analyze(d).to_dict()


# -- a design with itself -------------------------------------------------------------------------


@pytest.mark.parametrize("path", DEMO_DESIGNS, ids=lambda p: p.stem)
def test_demo_design_against_itself_changes_nothing(path, analyses):
    d, a = analyses(path)
    again = load(path)  # loaded a second time, from the file
    cmp = compare(_rev(d, a), _rev(again, a))
    assert cmp.unchanged
    assert cmp.exit_status == EXIT_OK
    assert cmp.inputs == [] and cmp.checks_changed == [] and cmp.checks_eroding == []
    assert cmp.verdict_text().startswith("NO CHANGE")


def test_two_runs_of_the_analysis_compare_equal(analyses):
    d, a = analyses(SURVEY)
    cmp = compare(_rev(d, a), _rev(d, analyze(d).to_dict()))
    assert cmp.unchanged and cmp.exit_status == EXIT_OK


@settings(max_examples=6, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(n=st.sampled_from([4, 6]), mass=st.floats(0.3, 2.0), arm=st.floats(0.08, 0.4),
       phase=st.sampled_from([0.0, 30.0, 45.0]), ixx=st.floats(2e-3, 2e-2),
       izz_factor=st.floats(1.2, 2.0))
def test_random_valid_design_against_itself_changes_nothing(n, mass, arm, phase, ixx,
                                                            izz_factor):
    d = ring_design(n_rotors=n, mass_kg=mass, arm_m=arm, phase_deg=phase,
                    inertia_kg_m2=(ixx, ixx, izz_factor * ixx), max_thrust_n=4.0 * mass,
                    failure_sets="none")
    a1 = analyze(d, wheel=False).to_dict()
    a2 = analyze(d, wheel=False).to_dict()
    cmp = compare(revision_from_design(d, a1), revision_from_design(d, a2))
    assert cmp.unchanged
    assert cmp.exit_status == EXIT_OK


def test_cli_compare_design_with_itself_exit_0(capsys):
    assert main(["compare", str(SURVEY), str(SURVEY), "--json"]) == EXIT_OK
    out = json.loads(capsys.readouterr().out)
    assert out["schema"] == "rotorbook.comparison/1"
    assert out["verdict"]["unchanged"] is True and out["verdict"]["exit_status"] == 0
    assert out["old"]["file_sha256"] == out["new"]["file_sha256"]


# -- the battery moved 3 cm aft -------------------------------------------------------------------


def test_battery_aft_centre_of_mass_change_is_the_closed_form(analyses):
    da, aa = analyses(SURVEY)
    db, ab = analyses(REV_B)
    cmp = compare(_rev(da, aa), _rev(db, ab))
    battery = next(p for p in da.parts if p.name == "battery")
    moved = next(p for p in db.parts if p.name == "battery")
    offset = [b - a for a, b in zip(battery.position_m, moved.position_m, strict=True)]
    assert offset == pytest.approx([-0.03, 0.0, 0.0], abs=1e-15)
    total = aa["mass_properties"]["mass_kg"]
    # closed form: shift of the centre of mass = m_battery * offset / total mass
    # (definition of the centre of mass; common practice, no source)
    expect = [battery.mass_kg * o / total for o in offset]
    for k in range(3):
        assert cmp.com_shift_m[k] == pytest.approx(expect[k], abs=1e-12)
        row = cmp.mass_properties[1 + k]
        assert row["change"] == pytest.approx(expect[k], abs=1e-12)
    # the only input changes: revision, notes and the battery's position
    changed = {(r["item"], r["field"]) for r in cmp.inputs}
    assert changed == {("design", "revision"), ("design", "notes"),
                       ('part "battery"', "position_m")}
    pos = next(r for r in cmp.inputs if r["field"] == "position_m")
    assert pos["unit"] == "m" and pos["delta"] == pytest.approx([-0.03, 0.0, 0.0], abs=1e-15)


def test_per_case_changes_are_the_difference_of_the_two_analyses(analyses):
    da, aa = analyses(SURVEY)
    db, ab = analyses(REV_B)
    cmp = compare(_rev(da, aa), _rev(db, ab))

    def key(c):
        return (frozenset(c["failed"]), json.dumps(c["thrust_ratio"], sort_keys=True))

    old = {key(c): c for c in aa["cases"]}
    new = {key(c): c for c in ab["cases"]}
    assert len(cmp.cases) == len(set(old) | set(new))
    fields = {"spin rate": "spin_rate_rad_s", "tilt of the spin axis": "tilt_deg",
              "controllability distance": "controllability_distance", "H2 norm": "h2_norm",
              "thrust-saturation rate": "saturation_rate_per_s"}
    checked = 0
    for case in cmp.cases:
        assert case["status"] == "both"
        c_old = next(c for k, c in old.items() if _label(c) == case["case"])
        c_new = next(c for k, c in new.items() if _label(c) == case["case"])
        for row in case["rows"]:
            if row["quantity"] not in fields or row["change"] is None:
                continue
            f = fields[row["quantity"]]
            assert row["old"] == c_old[f] and row["new"] == c_new[f]
            assert row["change"] == c_new[f] - c_old[f]
            checked += 1
    assert checked >= 20


def _label(c):
    names = ", ".join(sorted(c["failed"]))
    base = f"failed: {names}" if names else "no failure"
    if c["thrust_ratio"]:
        base += " (thrust ratio " + ", ".join(f"{k}={v:g}" for k, v in
                                              sorted(c["thrust_ratio"].items())) + ")"
    return base


def test_mass_property_relative_changes(analyses):
    da, aa = analyses(SURVEY)
    db, ab = analyses(REV_B)
    cmp = compare(_rev(da, aa), _rev(db, ab))
    izz = next(r for r in cmp.mass_properties if r["quantity"].startswith("inertia I_zz"))
    old = aa["mass_properties"]["inertia_kg_m2"][2][2]
    new = ab["mass_properties"]["inertia_kg_m2"][2][2]
    assert izz["relative_change"] == pytest.approx((new - old) / old, rel=1e-14)
    mass = cmp.mass_properties[0]
    assert mass["change"] == 0.0 and not mass["changed"]


# -- order in the file plays no part --------------------------------------------------------------


def test_reordering_parts_and_rotors_changes_nothing(analyses):
    d, a = analyses(SURVEY)
    data = tomllib.loads(SURVEY.read_text(encoding="utf-8"))
    data["part"] = data["part"][::-1]
    data["rotor"] = [data["rotor"][k] for k in (2, 0, 3, 1)]
    data["failure_case"] = data["failure_case"][::-1]
    data["failure_case"][1]["failed"] = data["failure_case"][1]["failed"][::-1]
    shuffled = from_dict(data, source="reordered", sha256="1" * 64)
    assert [p.name for p in shuffled.parts] != [p.name for p in d.parts]
    cmp = compare(_rev(d, a), revision_from_design(shuffled))
    assert cmp.inputs == []
    assert cmp.unchanged, cmp.summary_text()
    assert cmp.exit_status == EXIT_OK


# -- checks: regressions first, eroding, strict ---------------------------------------------------


def test_a_check_turning_to_fail_gives_exit_3_and_comes_first(analyses):
    # old: thrust-to-weight fails (limit 3); new: it passes (limit 2) but the gyro range is
    # halved, so spin-rate checks that passed now fail
    old = _survey_variant(min_thrust_to_weight=3.0)
    new = _survey_variant(gyro_full_scale_rad_s=20.0)
    cmp = compare(_rev(*old), _rev(*new))
    assert cmp.exit_status == EXIT_WORSE
    kinds = [c["change"] for c in cmp.checks_changed]
    assert kinds[0] == "pass -> fail"
    assert cmp.checks_changed[0]["name"] == "spin rate within gyro range"
    assert "fail -> pass" in kinds
    first_better = kinds.index("fail -> pass")
    assert all(k == "pass -> fail" for k in kinds[:first_better])
    tw = next(c for c in cmp.checks_changed if c["name"] == "thrust-to-weight")
    assert tw["change"] == "fail -> pass" and tw["old_passed"] is False
    assert cmp.verdict_text().startswith("WORSE")


def test_cli_exit_3_and_regression_listed_first(tmp_path, capsys):
    text = SURVEY.read_text(encoding="utf-8")
    worse = tmp_path / "worse.toml"
    worse.write_text(text.replace("min_thrust_to_weight = 2.0", "min_thrust_to_weight = 3.0"),
                     encoding="utf-8")
    assert main(["compare", str(SURVEY), str(worse)]) == EXIT_WORSE
    lines = capsys.readouterr().out.splitlines()
    assert lines[0].startswith("WORSE: 1 design check")
    i = lines.index("checks whose verdict changed:")
    assert "pass -> fail" in lines[i + 1] and "thrust-to-weight" in lines[i + 1]


def test_eroding_margin_counts_only_with_strict(analyses):
    d, a = analyses(SURVEY)
    # hover thrust fraction 0.396 against 0.6 -> against 0.45: still passing, 74 % of the
    # margin gone
    new = _survey_variant(max_hover_thrust_fraction=0.45)
    cmp = compare(_rev(d, a), _rev(*new))
    assert cmp.exit_status == EXIT_OK and not cmp.regressions
    er = [c for c in cmp.checks_eroding if c["name"] == "hover thrust fraction"]
    assert len(er) == 1
    frac = a["hover"]["hover_thrust_fraction"]
    assert er[0]["old_margin"] == pytest.approx(0.6 - frac, rel=1e-12)
    assert er[0]["shrink_fraction"] == pytest.approx(1 - (0.45 - frac) / (0.6 - frac), rel=1e-12)
    strict = compare(_rev(d, a), _rev(*new), strict=True)
    assert strict.exit_status == EXIT_WORSE
    loose = compare(_rev(d, a), _rev(*new), erosion=0.9)
    assert not [c for c in loose.checks_eroding if c["name"] == "hover thrust fraction"]
    assert DEFAULT_EROSION == 0.25


def test_analysis_json_inputs_give_the_same_results(analyses, tmp_path, capsys):
    for path, name in ((SURVEY, "a.json"), (REV_B, "b.json")):
        _d, a = analyses(path)
        (tmp_path / name).write_text(json.dumps(a), encoding="utf-8")
    from_json = compare(load_revision(tmp_path / "a.json"), load_revision(tmp_path / "b.json"))
    da, aa = analyses(SURVEY)
    db, ab = analyses(REV_B)
    from_designs = compare(_rev(da, aa), _rev(db, ab))
    assert from_json.cases == from_designs.cases
    assert from_json.checks_changed == from_designs.checks_changed
    assert from_json.mass_properties == from_designs.mass_properties
    assert from_json.inputs_note and from_json.old.kind == "analysis"
    # rotors unmoved, but their hubs about the CoM moved with the CoM
    assert {r["field"] for r in from_json.inputs} == {"position_m (about the CoM)"}
    assert main(["compare", str(tmp_path / "a.json"), str(tmp_path / "b.json")]) == EXIT_WORSE


def test_keys_added_later_are_used_when_present(analyses):
    d, a = analyses(SURVEY)
    b = copy.deepcopy(a)
    for c in b["cases"]:
        c["static_authority"] = 0.5
        c["min_damping_ratio"] = 0.3
    b["verdict"] = "PASS"
    cmp = compare(_rev(d, a), _rev(d, b))
    nominal = cmp.cases[0]
    labels = {r["quantity"]: r for r in nominal["rows"]}
    assert labels["static control authority"]["old"] is None
    assert labels["static control authority"]["new"] == 0.5
    assert labels["closed-loop damping ratio (smallest)"]["new"] == 0.3
    assert cmp.new.verdict == "PASS" and cmp.old.verdict == "FAIL"


# -- bad input ------------------------------------------------------------------------------------


@pytest.mark.parametrize("args", [
    ["compare", "/no/such/file.toml", str(SURVEY)],
    ["compare", str(SURVEY), str(SURVEY), "--erosion", "0"],
    ["compare", str(SURVEY), str(SURVEY), "--erosion", "nan"],
])
def test_bad_input_one_line_exit_2(args, capsys):
    assert main(args) == 2
    err = capsys.readouterr().err
    assert len(err.strip().splitlines()) == 1 and "Traceback" not in err


@pytest.mark.parametrize("content", ['{"schema": "other/1"}', "{not json", '{"schema": '
                                     '"rotorbook.analysis/1"}', "[[part]]\nname = 1\n"])
def test_bad_files_exit_2(tmp_path, content, capsys):
    bad = tmp_path / "bad.json"
    bad.write_text(content, encoding="utf-8")
    assert main(["compare", str(bad), str(SURVEY)]) == 2
    err = capsys.readouterr().err
    assert err.strip() and "Traceback" not in err


def test_unit_of_field_names():
    assert unit_of("mass_kg") == "kg"
    assert unit_of("inertia_kg_m2") == "kg m^2"
    assert unit_of("disturbance_torque_psd_n2_m2_s") == "N^2 m^2 s"
    assert unit_of("max_momentum_n_m_s") == "N m s"
    assert unit_of("gravity_m_s2") == "m/s^2"
    assert unit_of("weight_rate") == ""


# -- the record page, the index and the history ---------------------------------------------------


def test_comparison_record_is_offline_and_escapes_design_text(analyses):
    from kit.record.compare_page import render_comparison

    d, a = analyses(SURVEY)
    data = tomllib.loads(SURVEY.read_text(encoding="utf-8"))
    data["design"]["name"] = "<script>alert(1)</script> quad"
    data["part"][0]["name"] = "plate <b>&</b>"
    hostile = from_dict(data, source="hostile", sha256="2" * 64)
    cmp = compare(_rev(d, a), revision_from_design(hostile))
    page = render_comparison(cmp, date="2000-01-01", commit="")
    assert external_references(page) == []
    assert "<script>alert(1)</script>" not in page and "<b>&</b>" not in page
    assert "&lt;script&gt;alert(1)&lt;/script&gt; quad" in page
    assert d.sha256 in page and "2" * 64 in page
    # verdict before the tables, cautions at the end
    assert page.index('class="rb-verdict') < page.index("Input changes")
    assert page.index("Input changes") < page.index('class="rb-cautions"')
    assert 'content="unchanged"' not in page and "Bokeh.embed" in page


def test_record_previous_adds_the_page_to_the_index(analyses, tmp_path):
    from kit.record.compare_page import record_previous
    from kit.record.render import render_index

    da, aa = analyses(SURVEY)
    db, ab = analyses(REV_B)
    (tmp_path / "index.html").write_text(render_index(tmp_path, db, "2000-01-01", []),
                                         encoding="utf-8")
    cmp = compare(_rev(da, aa), _rev(db, ab))
    page = record_previous(cmp, tmp_path)
    assert page.name == "compare_A_to_B.html" and page.exists()
    index = (tmp_path / "index.html").read_text(encoding="utf-8")
    assert 'href="compare_A_to_B.html"' in index
    section = '<section class="rb-comparisons">'
    assert index.index(section) < index.index('<section class="rb-cautions">')
    record_previous(cmp, tmp_path)  # again: one section, not two
    assert (tmp_path / "index.html").read_text(encoding="utf-8").count(section) == 1


def test_revision_history_in_a_design_folder(tmp_path, capsys):
    folder = tmp_path / "survey"
    assert main(["new", str(folder), "--from", str(SURVEY)]) == 0
    assert (folder / "revisions" / "01-A.toml").exists()
    assert main(["history", str(folder), "--add", str(REV_B)]) == 0
    out = capsys.readouterr().out
    assert "added as revision 02" in out
    rdir = folder / "revisions"
    assert (rdir / "02-B.toml").read_bytes() == REV_B.read_bytes()
    assert (folder / "survey_quad.toml").read_bytes() == REV_B.read_bytes()
    import nbformat

    nb = nbformat.read(folder / "compare_revisions.ipynb", as_version=4)
    params = next(c for c in nb.cells if "parameters" in c.metadata.get("tags", []))
    assert 'PREVIOUS_PATH = "revisions/01-A.toml"' in params.source
    assert 'DESIGN_PATH = "survey_quad.toml"' in params.source
    index = (rdir / "index.html").read_text(encoding="utf-8")
    assert index.index("01-A.toml") < index.index("02-B.toml")
    assert 'href="compare_01_to_02.html"' in index and index.count("FAIL") >= 2
    page = (rdir / "compare_01_to_02.html").read_text(encoding="utf-8")
    assert external_references(page) == [] and "WORSE" in page
    # the same file again is not a new revision; a rebuild reuses the stored analyses
    assert main(["history", str(folder), "--add", str(REV_B)]) == 0
    assert "not added" in capsys.readouterr().out
    assert len(list(rdir.glob("*.toml"))) == 2
    other = tmp_path / "other.toml"
    other.write_text(SURVEY.read_text(encoding="utf-8").replace('name = "Demo survey quad"',
                                                                'name = "Another vehicle"'),
                     encoding="utf-8")
    assert main(["history", str(folder), "--add", str(other)]) == 2
    assert "differs from the folder" in capsys.readouterr().err


def test_compare_panel_follows_the_comparison(analyses):
    from kit.panels import ComparePanel
    from kit.panels.compare import compare_view, numeric_quantities

    da, aa = analyses(SURVEY)
    db, ab = analyses(REV_B)
    cmp = compare(_rev(da, aa), _rev(db, ab))
    panel = ComparePanel(cmp)
    assert "spin rate" in numeric_quantities(cmp)
    panel.quantity.value = "spin rate"
    rows = panel.view.rows
    expect = [(c["case"], next(r for r in c["rows"] if r["quantity"] == "spin rate"))
              for c in cmp.cases]
    assert [r[0] for r in rows] == [e[0] for e in expect]
    for r, (_case, row) in zip(rows, expect, strict=True):
        assert r[1] == row["old"] and r[2] == row["new"]
    bars = panel.sources["quantity"]["bars"].data
    assert len(bars["value"]) == 2 * len(cmp.cases)
    assert bars["value"][0] == pytest.approx(expect[0][1]["old"], rel=1e-5)
    panel.case.value = cmp.cases[1]["case"]
    thrust = panel.sources["thrust"]["bars"].data
    failed = cmp.cases[1]["case"].removeprefix("failed: ")
    i = thrust["x"].index((failed, "new"))
    assert thrust["thrust"][i] == 0.0  # the failed rotor carries nothing
    assert "text/html" in panel._repr_mimebundle_()
    with pytest.raises(ValueError, match="quantity"):
        compare_view(cmp, "no such quantity", cmp.cases[0]["case"])
    assert math.isfinite(bars["value"][1])


@pytest.mark.slow
def test_comparison_record_in_chromium_offline(analyses, tmp_path):
    from pathlib import Path

    from browser_helpers import (
        ARTIFACTS,
        CANVASES_JS,
        CHROMIUM,
        CHROMIUM_ARGS,
        Offline,
        wait_until,
    )

    if not Path(CHROMIUM).exists():
        pytest.skip(f"Debian's chromium is not installed at {CHROMIUM}")
    from playwright.sync_api import sync_playwright

    from kit.record.compare_page import write_comparison

    da, aa = analyses(SURVEY)
    db, ab = analyses(REV_B)
    page_path = write_comparison(compare(_rev(da, aa), _rev(db, ab)), tmp_path / "c.html")
    offline = Offline(allow_file=True)
    requested: list[str] = []
    with sync_playwright() as p:
        browser = p.chromium.launch(executable_path=CHROMIUM, headless=True, args=CHROMIUM_ARGS)
        try:
            context = browser.new_context(viewport={"width": 1280, "height": 900})
            context.route("**/*", offline)
            page = context.new_page()
            page.on("request", lambda r: requested.append(r.url))
            page.goto(page_path.as_uri(), wait_until="load", timeout=60_000)
            # the verdict is on the first screen, right under the header
            verdict = page.locator(".rb-verdict")
            assert verdict.inner_text().startswith("WORSE")
            assert verdict.bounding_box()["y"] < 900
            header = page.locator("header.rb-sheet-head").inner_text()
            assert da.sha256 in header and db.sha256 in header
            # layout, 7 cases x (thrust, poles), wheel curve: Bokeh drew them all
            canvases = wait_until(lambda: [c for c in page.evaluate(
                f"() => ({CANVASES_JS})(document.body)") if c["cw"] > 0 and c["ch"] > 0],
                30.0, "Bokeh canvases of non-zero size")
            assert len(canvases) >= 15, canvases
            ARTIFACTS.mkdir(parents=True, exist_ok=True)
            page.screenshot(path=str(ARTIFACTS / "comparison_first_screen.png"))
            context.close()
        finally:
            browser.close()
    assert not offline.aborted, offline.aborted
    assert all(u.startswith(("file:", "data:", "blob:", "about:")) for u in requested)
