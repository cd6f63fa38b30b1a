"""LQR and H2 against python-control and closed forms; controllability measures."""

import math

import control
import numpy as np
import pytest

from kit.analysis import control as C
from kit.analysis import equilibrium as E
from kit.analysis.vehicle import Vehicle
from kit.models import ring_design


def test_lqr_double_integrator_closed_form():
    # Double integrator, Q = I, R = 1: K = [1, sqrt(3)], poles -sqrt(3)/2 +- j/2.
    # (python-control's own test suite, control/tests/statefbk_test.py, LQR of a double
    # integrator; the closed form follows from the 2x2 Riccati equation.)
    A = np.array([[0.0, 1.0], [0.0, 0.0]])
    B = np.array([[0.0], [1.0]])
    K, _ = C.lqr(A, B, np.eye(2), np.eye(1))
    np.testing.assert_allclose(K, [[1.0, math.sqrt(3.0)]], rtol=1e-10)
    poles = np.sort_complex(np.linalg.eigvals(A - B @ K))
    np.testing.assert_allclose(poles, [-math.sqrt(3) / 2 - 0.5j, -math.sqrt(3) / 2 + 0.5j],
                               rtol=1e-10)


def test_lqr_scalar_closed_form():
    # A = 0, B = 1, Q = 10, R = 2: P^2 / 2 = 10 -> P = sqrt(20), K = P / 2 = sqrt(5)
    # (python-control test suite, statefbk_test.py, scalar LQR).
    K, P = C.lqr(np.zeros((1, 1)), np.ones((1, 1)), 10 * np.eye(1), 2 * np.eye(1))
    assert K[0, 0] == pytest.approx(math.sqrt(5.0), rel=1e-12)


@pytest.mark.parametrize("failed", [(), ("r0",), ("r0", "r2")])
def test_lqr_matches_python_control_on_reduced_model(failed):
    # python-control's lqr (a general-purpose reference library) on the same A, B, Q, R.
    veh = Vehicle.from_design(ring_design(rotor_inertia_kg_m2=2e-6))
    eq = E.solve(veh, failed)
    lc = C.design_control(veh, eq)
    K_ref, _, _ = control.lqr(lc.A, lc.B, lc.Q, lc.R)
    np.testing.assert_allclose(lc.K, K_ref, rtol=1e-8, atol=1e-10)


def test_h2_first_order_closed_form():
    # ||1/(s+1)||_2^2 = int |1/(jw+1)|^2 dw / (2 pi) = 1/2 (Zhou, Doyle & Glover, sec. 4.4;
    # classical closed form).
    assert C.h2_norm(-np.eye(1), np.eye(1), np.eye(1)) == pytest.approx(1 / math.sqrt(2), rel=1e-12)


@pytest.mark.parametrize("failed", [(), ("r1",), ("r1", "r3")])
def test_h2_matches_python_control_norm(failed):
    veh = Vehicle.from_design(ring_design(rotor_inertia_kg_m2=2e-6))
    eq = E.solve(veh, failed)
    lc = C.design_control(veh, eq)
    Cout = np.zeros((2, 4))
    Cout[0, 2] = Cout[1, 3] = 1.0
    sys = control.ss(lc.A - lc.B @ lc.K, lc.Bd, Cout, np.zeros((2, 2)))
    assert lc.h2_norm == pytest.approx(control.norm(sys, 2), rel=1e-8)


def test_closed_loop_poles_stable_and_controllable_for_demo_like_quad():
    veh = Vehicle.from_design(ring_design())
    for failed in [(), ("r0",), ("r0", "r2")]:
        lc = C.design_control(veh, E.solve(veh, failed))
        assert lc.controllable and lc.controllability_rank == 4
        assert np.all(lc.closed_loop_poles.real < 0)


def test_controllability_distance_detects_uncontrollable_pair():
    # An uncontrollable pair: the second state is untouched by the input.
    A = np.array([[-1.0, 0.0], [0.0, -2.0]])
    B = np.array([[1.0], [0.0]])
    rank, dist = C.controllability(A, B)
    assert rank == 1
    assert dist < 1e-9


def test_isotropic_plus_quad_two_opposite_out_is_uncontrollable():
    # Classical result, derived here: with rotor momentum neglected, a '+' quad spinning on one
    # opposite pair loses controllability when its inertia is isotropic.
    veh = Vehicle.from_design(ring_design(inertia_kg_m2=(3e-3, 3e-3, 3e-3)))
    lc = C.design_control(veh, E.solve(veh, ("r1", "r3")))
    assert not lc.controllable
    assert lc.controllability_distance < 1e-6


def test_distance_to_uncontrollability_matches_a_grid_search():
    # min over complex lambda of sigma_min([A - lambda I, B]) (Eising 1984), against a dense
    # grid search refined by hand: the local search from the eigenvalues finds the same minimum.
    rng = np.random.default_rng(7)
    A = rng.standard_normal((4, 4))
    B = 0.05 * rng.standard_normal((4, 1))
    rank, rel = C.controllability(A, B)
    norm = np.linalg.norm(np.hstack([A, B]), 2)
    re = np.linspace(-4, 4, 321)
    im = np.linspace(0, 4, 161)
    best = min(np.linalg.svd(np.hstack([A - complex(x, y) * np.eye(4), B]),
                             compute_uv=False)[-1] for x in re for y in im)
    assert rank == 4
    assert rel * norm <= best * (1 + 1e-9)
    assert rel * norm == pytest.approx(best, rel=0.05)
