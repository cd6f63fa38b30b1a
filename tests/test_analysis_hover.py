"""Hover: allocation, least-effort thrusts, torque margins (closed forms), induced power."""

import math

import numpy as np
import pytest

from kit.analysis import hover as H
from kit.analysis.vehicle import Vehicle
from kit.models import ring_design

G = 9.80665


def test_plus_quad_hover_and_torque_margins_closed_form():
    # '+' quad, arm L, spins ccw/cw alternating: holding T = W with zero pitch and yaw torque
    # forces f_front = f_rear and f_left + f_right = W / 2, so the largest roll torque is
    # L W / 2 when f_max >= W / 2; the yaw torque is limited by kappa * (sum of one spin pair
    # at most W) (derived here from the allocation; classical statics).
    m, L, kappa = 0.5, 0.12, 0.012
    veh = Vehicle.from_design(ring_design(mass_kg=m, arm_m=L, torque_per_thrust_m=kappa,
                                          max_thrust_n=3.5))
    h = H.analyse_hover(veh)
    W = m * G
    np.testing.assert_allclose(h.thrust_n, W / 4, rtol=1e-12)
    assert h.allocation_rank == 4
    assert h.thrust_to_weight == pytest.approx(4 * 3.5 / W)
    assert h.hover_thrust_fraction == pytest.approx(W / 4 / 3.5)
    assert h.torque_margin_n_m[0] == pytest.approx(L * W / 2, rel=1e-9)
    assert h.torque_margin_n_m[1] == pytest.approx(L * W / 2, rel=1e-9)
    assert h.torque_margin_n_m[2] == pytest.approx(kappa * W, rel=1e-9)


def test_induced_power_momentum_theory():
    # Leishman, Principles of Helicopter Aerodynamics, 2nd ed., ch. 2: v_i = sqrt(T / (2 rho A)),
    # P = T v_i. For T = 10 N, D = 0.25 m, rho = 1.225: A = 0.049087 m^2, v_i = 9.1187 m/s,
    # P = 91.19 W (worked by hand from the formula).
    p = H.induced_power_w(np.array([10.0]), [0.25], 1.225)
    A = math.pi * 0.25**2 / 4
    assert p == pytest.approx(10.0 * math.sqrt(10.0 / (2 * 1.225 * A)), rel=1e-12)
    assert p == pytest.approx(91.19, abs=0.01)
    assert H.induced_power_w(np.array([1.0]), [None], 1.225) is None


def test_hexacopter_hover_equal_share():
    veh = Vehicle.from_design(ring_design(n_rotors=6, mass_kg=1.2, max_thrust_n=5.0))
    h = H.analyse_hover(veh)
    np.testing.assert_allclose(h.thrust_n, 1.2 * G / 6, rtol=1e-12)
    assert h.feasible
