"""Degraded rotors and the low-battery case (kit.analysis.loadcases).

Check values: a degraded rotor at fraction 1 is the intact vehicle and at fraction 0 the failed
rotor (definition of the case, checked through the public solve API); the low-battery thrust
factor (V_end / V_nom)^2 (common practice, no source) scales the hover thrust-to-weight ratio
exactly (T/W = sum f_max / W).
"""

import tomllib
from pathlib import Path

import numpy as np
import pytest

from kit import design
from kit.analysis import loadcases
from kit.analysis.equilibrium import solve
from kit.analysis.hover import analyse_hover
from kit.analysis.report import analyse_case, analyze
from kit.analysis.vehicle import Vehicle
from kit.design import DegradedCase
from kit.errors import DesignError

ROOT = Path(__file__).resolve().parents[1]
SURVEY = ROOT / "data" / "designs" / "survey_quad.toml"


def _doc() -> dict:
    doc = tomllib.loads(SURVEY.read_text(encoding="utf-8"))
    doc["review"]["failure_sets"] = "none"
    doc.pop("failure_case")
    return doc


def _same_eq(a, b):
    assert a.found == b.found
    np.testing.assert_allclose(a.thrust_n, b.thrust_n, rtol=1e-9, atol=1e-12)
    assert a.spin_rate_rad_s == pytest.approx(b.spin_rate_rad_s, rel=1e-9, abs=1e-12)


def test_fraction_one_equals_intact():
    d = design.from_dict(_doc())
    veh = Vehicle.from_design(d)
    lc = loadcases.analyse_degraded(d, DegradedCase((), (("front_left", 1.0),)), veh)
    _same_eq(lc.cases[0].eq, solve(veh, ()))
    assert [c.passed for c in lc.checks] == [c.passed for c in analyse_case(veh, ()).checks]


def test_fraction_zero_equals_failed():
    d = design.from_dict(_doc())
    veh = Vehicle.from_design(d)
    lc = loadcases.analyse_degraded(d, DegradedCase((), (("front_left", 0.0),)), veh)
    assert lc.failed == ("front_left",)
    _same_eq(lc.cases[0].eq, solve(veh, ("front_left",)))


def test_half_thrust_rotor_stays_within_its_reduced_limit():
    d = design.from_dict(_doc())
    veh = Vehicle.from_design(d)
    lc = loadcases.analyse_degraded(d, DegradedCase((), (("front_left", 0.5),)), veh)
    eq = lc.cases[0].eq
    i = d.rotor_index("front_left")
    assert eq.max_thrust_n[i] == pytest.approx(0.5 * d.rotors[i].max_thrust_n)
    assert eq.found and eq.thrust_n[i] <= 0.5 * d.rotors[i].max_thrust_n * (1 + 1e-9)
    assert all(c.case.startswith("degraded: front_left at 50 % thrust") for c in lc.checks)
    # authority: the hover torque range shrinks (or stays) when one rotor's limit is halved
    full = analyse_hover(veh)
    assert np.all(lc.hover.torque_max_n_m <= full.torque_max_n_m + 1e-9)
    assert np.all(lc.hover.torque_min_n_m >= full.torque_min_n_m - 1e-9)
    assert lc.hover.torque_max_n_m[0] < full.torque_max_n_m[0] - 1e-6 or \
        lc.hover.torque_min_n_m[0] > full.torque_min_n_m[0] + 1e-6


def test_failure_case_and_review_fraction_in_the_file():
    doc = _doc()
    doc["failure_case"] = [{"degraded": {"front_left": 0.5}},
                           {"failed": ["rear_right"], "degraded": {"front_right": 0.8}}]
    doc["review"]["degraded_fraction"] = 0.7
    d = design.from_dict(doc)
    assert d.failure_cases == ()
    assert d.degraded_cases[1] == DegradedCase(("rear_right",), (("front_right", 0.8),))
    cases = loadcases.degraded_cases(d)
    assert len(cases) == 2 + 4
    assert cases[-1].label == "degraded: rear_left at 70 % thrust"


@pytest.mark.parametrize("table, fragment", [
    ({"nope": 0.5}, "failure_case[0].degraded.nope: 0.5 -> a working rotor's name"),
    ({"front_left": 1.5}, "failure_case[0].degraded.front_left: 1.5 -> a fraction"),
])
def test_bad_degraded_case_is_one_clear_line(table, fragment):
    doc = _doc()
    doc["failure_case"] = [{"degraded": table}]
    with pytest.raises(DesignError) as info:
        design.from_dict(doc)
    assert [p for p in info.value.problems if fragment in p], info.value.problems


def test_low_battery_scales_thrust_to_weight_and_the_worse_governs():
    doc = _doc()
    doc["battery"] = {"nominal_voltage_v": 22.2, "end_voltage_v": 18.0}
    d = design.from_dict(doc)
    scale = (18.0 / 22.2) ** 2
    assert d.battery.thrust_scale == pytest.approx(scale)
    veh = Vehicle.from_design(d)
    lc = loadcases.analyse_low_battery(d, veh)
    assert lc.hover.thrust_to_weight == pytest.approx(analyse_hover(veh).thrust_to_weight * scale)
    rep = analyze(d, wheel=False)
    assert rep.load_cases[-1].label == "low battery (18 V of 22.2 V)"
    tw = [c for c in rep.checks if c.name == "thrust-to-weight"]
    assert len(tw) == 2 and tw[0].passed and not tw[1].passed  # 2.6 nominal, 1.7 at 18 V
    assert not rep.passed
    out = rep.to_dict()
    assert out["battery"]["max_thrust_scale"] == pytest.approx(scale)
    assert out["load_cases"][0]["kind"] == "low battery"
    assert "low battery (18 V of 22.2 V):" in rep.summary_text()


def test_battery_end_voltage_must_be_lower():
    doc = _doc()
    doc["battery"] = {"nominal_voltage_v": 22.2, "end_voltage_v": 25.0}
    with pytest.raises(DesignError, match=r"battery.end_voltage_v: 25.0 -> less than "
                                          r"nominal_voltage_v \(22.2 V\)"):
        design.from_dict(doc)
