"""Nonlinear simulation: invariants, linear against nonlinear, failure recovery, thrust limits."""

from __future__ import annotations

import json
import math
from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest

from kit import design
from kit.analysis import control as C
from kit.analysis import equilibrium as E
from kit.analysis import simulate as SIM
from kit.analysis.vehicle import Vehicle
from kit.errors import EquilibriumNotFound

ROOT = Path(__file__).resolve().parents[1]
FAILED = ("front_left", "rear_right")


@pytest.fixture(scope="module")
def quad() -> Vehicle:
    # the survey quad with its (invented) motor lag and idle thrust removed: these tests are
    # about the four-state model and thrust that follows its command at once
    d = design.load(ROOT / "data" / "designs" / "survey_quad.toml")
    d = replace(d, rotors=tuple(replace(r, motor_time_constant_s=0.0, min_thrust_n=0.0)
                                for r in d.rotors))
    return Vehicle.from_design(d)


def test_simulate_about_refuses_a_lagged_law(quad):
    lagged = Vehicle.from_design(replace(quad.design, rotors=tuple(
        replace(r, motor_time_constant_s=0.02) for r in quad.design.rotors)))
    eq = E.solve(lagged)
    with pytest.raises(ValueError, match="motor lag"):
        SIM.simulate_about(lagged, eq, C.design_control(lagged, eq))
    # without a law given, it flies the four-state LQR of the same point
    r = SIM.simulate_about(lagged, eq, t_end=0.5, initial_disturbance=(0.1, 0.0, 0.0, 0.0))
    assert r.solver_ok


def test_quaternion_helpers():
    rng = np.random.default_rng(1)
    for _ in range(20):
        q = rng.normal(size=4)
        R = SIM.rotation_matrix(q)
        np.testing.assert_allclose(R @ R.T, np.eye(3), atol=1e-12)
        assert np.linalg.det(R) == pytest.approx(1.0, abs=1e-12)
        np.testing.assert_allclose(SIM.up_in_body(q), R.T @ [0, 0, 1], atol=1e-12)
        n = rng.normal(size=3)
        n /= np.linalg.norm(n)
        np.testing.assert_allclose(SIM.rotation_matrix(SIM.quat_from_up(n)) @ n, [0, 0, 1],
                                   atol=1e-12)
        # q (x) (0, v) (x) q* rotates v: the Hamilton product agrees with R
        v = rng.normal(size=3)
        qu = q / np.linalg.norm(q)
        rotated = SIM.quat_mul(SIM.quat_mul(qu, np.r_[0.0, v]), qu * [1, -1, -1, -1])
        np.testing.assert_allclose(rotated[1:], R @ v, atol=1e-12)


@pytest.mark.parametrize("omega0", [(0.3, 5.0, 0.2), (4.0, -1.0, 2.5)])
def test_torque_free_conserves_energy_and_momentum(quad, omega0):
    # Landau & Lifshitz, Mechanics, 3rd ed., sec. 36-37 (from memory): with no torque the kinetic
    # energy and the world-frame angular momentum are constants of the motion.
    r = SIM.simulate_torque_free(quad, omega0, 10.0, rtol=1e-12, atol=1e-12, method="DOP853")
    assert r.energy_drift < 1e-9
    assert r.momentum_drift < 1e-9
    assert r.quaternion_norm_drift < 1e-9
    json.dumps(r.to_dict())


def test_linear_against_nonlinear_decay(quad):
    eq = E.solve(quad, FAILED)
    ctl = C.design_control(quad, eq)
    slowest = float(np.min(-ctl.closed_loop_poles.real))  # about 1.5 1/s for this design
    r = SIM.simulate_about(quad, eq, ctl, t_end=6.0, initial_disturbance=(0.0, 0.0, 0.01, 0.0),
                           clip=False)
    # envelope: largest |x| over windows of one oscillation period of the slow pole pair
    period = 2 * math.pi / max(float(np.max(np.abs(ctl.closed_loop_poles.imag))), 1.0)
    norm = np.linalg.norm(r.deviation, axis=1)
    starts = np.arange(1.0, 5.5, period)
    env = np.array([norm[(r.t >= a) & (r.t < a + period)].max() for a in starts])
    rate = -np.polyfit(starts, np.log(env), 1)[0]
    assert rate == pytest.approx(slowest, rel=0.20)
    # attitude, rates and spin settle; without height and position loops the vehicle drifts,
    # so the run as a whole is honestly not converged
    assert not {"tilt", "body rates", "yaw rate"} & set(r.tolerances["not_settled"])
    assert r.final_spin_rate_rad_s == pytest.approx(eq.spin_rate_rad_s, rel=0.01)


def test_failure_recovery_converges(quad):
    # the spin-up is slow (yaw drag time constant J_zz / gamma_z ~ 2.3 s): the horizon is
    # chosen from it and the slowest pole (t_end None)
    r = SIM.simulate_failure(quad, FAILED, t_fail=0.5, detect_delay_s=0.05)
    assert r.solver_ok and r.converged
    assert r.t[-1] - r.t_switch_s >= 5 * 2.3
    assert r.spin_rate_error < 0.01
    assert np.all(r.peak_thrust_n <= r.max_thrust_n)
    i = [quad.names.index(n) for n in FAILED]
    assert np.all(r.thrust_n[r.t > r.t_fail_s][:, i] == 0.0)
    d = r.to_dict()
    json.dumps(d)
    assert d["converged"] is True and "t_s" not in d
    s = r.series(max_points=300)
    json.dumps(s)
    assert len(s["t_s"]) <= 301 and s["t_s"][-1] == pytest.approx(r.t[-1])
    assert "<table" in r._repr_html_()


def test_thrust_limits_hold_when_active(quad):
    # lower every rotor's limit to 7 N: the unclipped response would ask about 7.8 N
    d = quad.design
    low = replace(d, rotors=tuple(replace(rt, max_thrust_n=7.0) for rt in d.rotors))
    veh = Vehicle.from_design(low, quad.mp)
    # the direct switch to the relaxed-hover LQR (no schedule, no outer loop) asks the most
    r = SIM.simulate_failure(veh, FAILED, t_end=3.0, outer_loop=False, recovery="switch")
    assert np.all(r.thrust_n <= 7.0) and np.all(r.thrust_n >= 0.0)
    assert np.max(r.peak_thrust_n) == 7.0  # the limit was reached and held
    lagged = SIM.simulate_failure(veh, FAILED, t_end=3.0, motor_lag_s=0.02, outer_loop=False,
                                  recovery="switch")
    assert np.all(lagged.thrust_n <= 7.0 + 1e-12) and np.all(lagged.thrust_n >= 0.0)


def test_hover_holds(quad):
    r = SIM.simulate_failure(quad, (), initial_disturbance=(0.2, -0.1, 0.02, 0.0))
    assert r.converged and math.isnan(r.t_fail_s)
    assert abs(r.altitude_m[-1]) < 0.05
    short = SIM.simulate_failure(quad, (), t_end=1.0, initial_disturbance=(0.2, -0.1, 0.2, 0.0))
    assert not short.converged  # a horizon too short to settle is reported as such


def test_no_equilibrium_raises(quad):
    with pytest.raises(EquilibriumNotFound):
        SIM.simulate_failure(quad, quad.names, t_end=1.0)
    with pytest.raises(ValueError):
        SIM.simulate_failure(quad, (), t_end=1.0, initial_disturbance=(0.0, 0.0))
