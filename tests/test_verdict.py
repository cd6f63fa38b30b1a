"""The verdict over design checks, the cases x checks matrix, the field limits and the rounding
of noise (no kernel)."""

from __future__ import annotations

import json
import re
import tomllib
from pathlib import Path

import pytest

from kit.analysis import checks as ck
from kit.analysis.htmltable import FAIL_COLOURS, PASS_COLOURS, num
from kit.design import from_dict
from kit.design_rules import BOUNDS, MAX_ROTORS
from kit.errors import DesignError
from kit.workbook import Checks, check_rows, matrix_html, verdict_html

ROOT = Path(__file__).resolve().parents[1]
DESIGN = ROOT / "data" / "designs" / "survey_quad.toml"


def _checks():
    return [
        ck.at_least("thrust-to-weight", 2.6, 2.0),
        ck.at_most("thrust-saturation rate", 0.002, 0.01, "1/s", "no failure"),
        ck.at_most("thrust-saturation rate", 0.5, 0.01, "1/s", "failed: m1"),
        ck.is_true("reduced model controllable", True, "failed: m1"),
        ck.at_most("thrust-saturation rate", 0.009, 0.01, "1/s", "failed: m2"),
        ck.is_true("reduced model controllable", False, "failed: m3"),
        ck.at_most("thrust-saturation rate", 0.02, 0.01, "1/s", "failed: m3"),
    ]


def test_margin_is_relative_to_the_limit():
    # hand-computed: (2.6 - 2.0) / 2.0 = 0.3; (0.01 - 0.5) / 0.01 = -49
    assert ck.margin(ck.at_least("a", 2.6, 2.0)) == pytest.approx(0.3)
    assert ck.margin(ck.at_most("b", 0.5, 0.01)) == pytest.approx(-49.0)
    assert ck.margin(ck.is_true("c", False)) == -1.0
    assert ck.margin(ck.at_most("d", float("nan"), 1.0)) == float("-inf")


def test_verdict_lists_the_failed_checks():
    v = ck.verdict(_checks())
    assert v["result"] == "fail" and v["checks"] == 7 and v["failed"] == 3
    assert [(c["case"], c["name"]) for c in v["failed_checks"]] == [
        ("failed: m1", "thrust-saturation rate"), ("failed: m3", "reduced model controllable"),
        ("failed: m3", "thrust-saturation rate")]
    assert ck.verdict([ck.at_least("a", 3.0, 2.0)])["result"] == "pass"
    assert ck.verdict([])["result"] == "none"
    json.dumps(v, allow_nan=False)


def test_matrix_worst_case_first_and_governing_marked():
    rows = check_rows(_checks())
    page = matrix_html(rows)
    # two failures, then one, then by the smallest margin: m2 0.1, design 0.3, no failure 0.8
    order = [page.index(f">{case}") for case in ("failed: m3", "failed: m1", "failed: m2",
                                                 "design", "no failure")]
    assert order == sorted(order)
    assert page.count("&#9654; governing") == 1
    assert page.index("governing") < page.index(">failed: m1")
    # a FAIL is never the colour of a PASS
    assert PASS_COLOURS[0] != FAIL_COLOURS[0] and PASS_COLOURS[1] != FAIL_COLOURS[1]
    fails = re.findall(r'class="rb-fail" style="([^"]*)"', page)
    passes = re.findall(r'class="rb-pass" style="([^"]*)"', page)
    assert len(fails) == 3 and len(passes) == 4
    assert all(FAIL_COLOURS[0] in s for s in fails)
    assert all(PASS_COLOURS[0] in s and FAIL_COLOURS[0] not in s for s in passes)


def test_checks_bundle_opens_with_the_verdict_and_shows_the_table_once():
    bundle = Checks(_checks())._repr_mimebundle_()
    page = bundle["text/html"]
    assert page.index("Verdict: FAIL") < page.index("rb-matrix") < page.index("<details")
    assert page.count("<details") == 1
    assert bundle["text/plain"] == "FAIL: 3 of 7 design checks not met"
    empty = Checks([])._repr_mimebundle_()
    assert "0 of 0" not in empty["text/html"] + empty["text/plain"]
    assert "No design checks" in verdict_html([])


def test_markup_in_check_names_is_escaped():
    rows = check_rows([ck.at_least("<b>x</b>", 1.0, 2.0, case="<script>alert(1)</script>")])
    page = verdict_html(rows) + matrix_html(rows)
    assert "<script>" not in page and "&lt;script&gt;" in page


def test_rounding_noise_prints_as_zero():
    assert num(1.11e-16) == "0" and num(-2e-15) == "0"
    assert num(9.1e-7) == "9.1e-07"  # a real small figure stays


def _doc():
    return tomllib.loads(DESIGN.read_text(encoding="utf-8"))


def _fields(doc, path=()):
    """(path, value) of every bounded number in the document."""
    if isinstance(doc, dict):
        for k, v in doc.items():
            yield from _fields(v, path + (k,))
    elif isinstance(doc, list):
        for i, v in enumerate(doc):
            yield from _fields(v, path + (i,))
    elif isinstance(doc, int | float) and not isinstance(doc, bool):
        names = [k for k in path if isinstance(k, str) and k in BOUNDS]
        if names:
            yield path, names[-1]


FIELDS = {name: path for path, name in _fields(_doc())}


@pytest.mark.parametrize("field", sorted(FIELDS))
def test_a_value_just_over_its_limit_is_refused_naming_the_field(field):
    doc = _doc()
    path = FIELDS[field]
    parent = doc
    for k in path[:-1]:
        parent = parent[k]
    lo, hi, _unit = BOUNDS[field]
    parent[path[-1]] = hi * 1.01
    with pytest.raises(DesignError) as info:
        from_dict(doc)
    assert any(field in p and "README, Limits" in p for p in info.value.problems), \
        info.value.problems
    parent[path[-1]] = hi  # at the limit: accepted as far as this field goes
    try:
        from_dict(doc)
    except DesignError as exc:
        assert not any(field in p and "Limits" in p for p in exc.problems), exc.problems


def test_too_many_rotors_is_refused():
    doc = _doc()
    base = doc["rotor"][0]
    doc["rotor"] = [dict(base, name=f"r{i}", position_m=[0.1 * (i + 1), 0.0, 0.0])
                    for i in range(MAX_ROTORS + 1)]
    with pytest.raises(DesignError, match=f"at most {MAX_ROTORS}"):
        from_dict(doc)


def test_time_box_stops_a_long_block_and_keeps_an_outer_timer():
    import signal
    import time

    from kit.analysis.report import time_box
    from kit.errors import AnalysisError

    with pytest.raises(AnalysisError, match="time limit of 0.2 s"):
        with time_box(0.2, "spin"):
            while True:
                time.sleep(0.01)
    fired = []
    old = signal.signal(signal.SIGALRM, lambda *a: fired.append(1))
    try:
        signal.setitimer(signal.ITIMER_REAL, 5.0)
        with time_box(1.0, "short"):
            pass
        left = signal.getitimer(signal.ITIMER_REAL)[0]
        assert 3.0 < left <= 5.0  # the outer timer is re-armed with what it had left
    finally:
        signal.setitimer(signal.ITIMER_REAL, 0.0)
        signal.signal(signal.SIGALRM, old)
    assert not fired


def test_verdict_lists_a_failed_check_with_its_note():
    # a crash or an idle-thrust violation explains the figure: the verdict line carries it
    import dataclasses

    crash = dataclasses.replace(ck.at_most("height lost in recovery", 20.0, 5.0, "m", "failed: m1"),
                                note="crashed at t = 2.61 s")
    page = verdict_html(check_rows([crash, ck.at_least("thrust-to-weight", 2.6, 2.0)]))
    assert "failed: m1: height lost in recovery = 20 (limit &lt;= 5 m): crashed at t = 2.61 s" \
        in page
