"""A flown run ends when the vehicle has crashed: the crash event, its reason, its checks."""

from __future__ import annotations

import dataclasses
import json
import math
import tomllib
from pathlib import Path

import numpy as np
import pytest

from kit.analysis import checks as CH
from kit.analysis import control as C
from kit.analysis import equilibrium as E
from kit.analysis import simulate as SIM
from kit.analysis.vehicle import Vehicle
from kit.design import DesignError, from_dict
from kit.models import ring_design

SURVEY = Path(__file__).resolve().parents[1] / "data" / "designs" / "survey_quad.toml"
CONVERGED = "recovery converged (tilt, rates, yaw rate, position, height, velocity)"


def plausible_quad():
    """0.5 kg '+' quad of our own (as in test_closed_loop; common practice, no source)."""
    return ring_design(drag=(0.0007, 0.0007, 0.0018), name="plausible plus quad")


def bad_quad():
    """Weak yaw drag, thin thrust margin, long detection delay: it falls (test_closed_loop)."""
    d = ring_design(drag=(0.0007, 0.0007, 0.0002), max_thrust_n=2.0, name="bad quad")
    return dataclasses.replace(d, control=dataclasses.replace(d.control,
                                                              failure_detection_delay_s=0.5))


@pytest.fixture(scope="module")
def quad() -> Vehicle:
    return Vehicle.from_design(plausible_quad())


@pytest.fixture(scope="module")
def bad() -> Vehicle:
    return Vehicle.from_design(bad_quad())


def test_free_fall_crash_time_is_the_closed_form(quad):
    # every rotor gives no thrust from t = 0: z = -g t^2 / 2, so the crash floor h is reached
    # at t = sqrt(2 h / g) (free fall from rest, closed form; common practice, no source)
    eq = E.solve(quad)
    ctl = C.design_control(quad, eq, with_robustness=False)
    flight = SIM._Flight(quad, np.zeros(quad.n), None, np.zeros(3))
    seg = SIM._segment(quad, 0.0, 10.0, SIM._single(eq, ctl, quad.n), np.zeros(quad.n, bool))
    h = 7.5
    t, Y, _, ok, _, _, t_crash = SIM._fly(flight, [seg], np.zeros(3), np.r_[0.0, 0.0, 1.0],
                                          np.zeros(quad.n), 1e-8, 0.05, 0.01, h)
    g = quad.design.gravity_m_s2
    assert ok and t_crash == pytest.approx(math.sqrt(2 * h / g), rel=1e-7)
    assert t[-1] == t_crash and Y[-1, 2] == pytest.approx(-h, abs=1e-7)
    assert np.allclose(Y[:, 2], -0.5 * g * t**2, atol=1e-7)
    assert np.allclose(Y[:, 5], -g * t, atol=1e-7)  # v = -g t


def test_falling_case_stops_at_the_crash_with_its_reason(bad):
    floor = bad.design.review.crash_height_loss_m
    assert floor == 20.0  # the stated default
    r = SIM.simulate_failure(bad, ("r0",))
    assert r.crashed and not r.converged
    assert r.message.startswith(f"crashed at t = {r.t[-1]:.3g} s")
    assert f"after falling {floor:.3g} m" in r.message
    assert r.crash_time_s == r.t[-1]
    assert r.altitude_m[-1] == pytest.approx(-floor, abs=1e-6)
    assert r.transient["height_lost_m"] == pytest.approx(floor, abs=1e-6)
    assert r.transient["crashed"] and math.isnan(r.transient["time_to_settle_s"])
    # the run ends well before the horizon it would have flown
    ctl0 = C.design_control(bad, E.solve(bad), with_robustness=False)
    ctl1 = C.design_control(bad, E.solve(bad, ("r0",)), with_robustness=False)
    assert r.t[-1] < r.t_switch_s + SIM.horizon_s(bad, ctl0, ctl1, None)[0]
    checks = {k.name: k for k in CH.transient_checks(r, bad.design.review, "r0")}
    assert not checks[CONVERGED].passed and checks[CONVERGED].note == r.message
    assert not checks["height lost in recovery"].passed
    assert checks["height lost in recovery"].note == r.message
    d = r.to_dict()
    json.dumps(d)
    assert d["crashed"] and d["crash_time_s"] == r.t[-1] and d["crash_height_loss_m"] == floor
    assert d["transient"]["crashed"]
    assert r.message in r._repr_html_()


def test_crash_event_does_not_change_the_flight_before_it(bad):
    # the same run without a floor: the samples up to the crash are the same
    r = SIM.simulate_failure(bad, ("r0",), t_end=4.0, crash_height_loss_m=6.0)
    free = SIM.simulate_failure(bad, ("r0",), t_end=4.0, crash_height_loss_m=math.inf)
    assert r.crashed and not free.crashed and free.t[-1] == 4.0
    k = r.t.size - 1
    assert np.array_equal(r.t[:k], free.t[:k])
    assert np.allclose(r.position_m[:k], free.position_m[:k], rtol=0, atol=1e-12)
    # the crash sample lies between two samples of the free run, on its trajectory
    j = np.searchsorted(free.t, r.t[-1])
    assert free.altitude_m[j - 1] > -6.0 >= free.altitude_m[j]
    assert free.transient["height_lost_m"] > r.transient["height_lost_m"]


def test_recovering_case_is_unchanged_by_the_crash_floor(quad):
    r = SIM.simulate_failure(quad, ("r0",), t_end=6.0)
    free = SIM.simulate_failure(quad, ("r0",), t_end=6.0, crash_height_loss_m=math.inf)
    assert not r.crashed and math.isnan(r.crash_time_s) and r.t[-1] == 6.0
    assert np.array_equal(r.t, free.t)
    assert np.array_equal(r.position_m, free.position_m)
    assert r.transient == {**free.transient}
    conv = next(k for k in CH.transient_checks(r, quad.design.review) if k.name == CONVERGED)
    assert conv.note == ""
    assert "at the horizon" in r._repr_html_()


def test_crash_floor_is_a_review_field():
    base = ring_design()
    assert base.review.crash_height_loss_m == 20.0
    assert "crash_height_loss_m" in base.review.defaulted
    doc = tomllib.loads(SURVEY.read_text(encoding="utf-8"))
    doc["review"]["crash_height_loss_m"] = 12.0
    assert from_dict(doc).review.crash_height_loss_m == 12.0
    doc["review"]["crash_height_loss_m"] = -1.0
    with pytest.raises(DesignError, match=r"review.crash_height_loss_m"):
        from_dict(doc)


def test_zero_detection_delay_flies(quad):
    # the empty segment between the failure and the switch is skipped; the samples still map
    # to their controllers (the recovery law from the failure on)
    r = SIM.simulate_failure(quad, ("r0",), detect_delay_s=0.0, t_end=3.0)
    late = SIM.simulate_failure(quad, ("r0",), detect_delay_s=0.05, t_end=3.0)
    assert r.t_switch_s == r.t_fail_s and r.solver_ok and not r.crashed
    assert r.transient["peak_tilt_deg"] <= late.transient["peak_tilt_deg"] + 1e-6


def test_infinite_lag_margin_passes_its_check():
    # a loop stable at every lag searched has lag margin inf: at least any limit; nan fails
    assert CH.at_least("lag margin", math.inf, 0.03, "s").passed
    assert CH.margin(CH.at_least("lag margin", math.inf, 0.03, "s")) == math.inf
    assert not CH.at_least("lag margin", math.nan, 0.03, "s").passed
    assert not CH.at_least("lag margin", -math.inf, 0.03, "s").passed
    assert not CH.at_most("height lost in recovery", math.inf, 5.0, "m").passed


def test_rates_text_prints_rounding_noise_as_zero():
    # a symmetric pair failure's roll and yaw peaks are ~1e-15 beside 7.38 rad/s of pitch:
    # rounding noise, printed as 0 (common practice, no source)
    from kit.analysis.simulate import rates_text

    assert rates_text([3.16e-15, 7.38, 1.05e-15]) == "0, 7.38, 0"
    assert rates_text([6.17, 3.87, 0.287]) == "6.17, 3.87, 0.287"
    assert rates_text([0.0, 0.0, 0.0]) == "0, 0, 0"
