"""Relaxed-hover equilibria: residuals, derived exact relations and plausibility figures."""

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from kit.analysis import equilibrium as E
from kit.analysis.vehicle import Vehicle
from kit.models import ring_design

G = 9.80665  # standard gravity, CGPM 1901


def _invariants(veh, eq):
    assert eq.found, eq.reason
    assert eq.residual <= 1e-9
    # sum f n_z = m g
    assert float(eq.thrust_n.sum() * eq.n_bar[2]) == pytest.approx(veh.weight_n, rel=1e-9)
    # omega_bar parallel to n_bar, n_bar a unit vector
    assert np.linalg.norm(eq.n_bar) == pytest.approx(1.0, abs=1e-12)
    assert np.linalg.norm(np.cross(eq.omega_bar_rad_s, eq.n_bar)) <= 1e-9 * max(
        1.0, abs(eq.spin_rate_rad_s))
    assert np.all(eq.thrust_n >= -1e-12)
    assert np.all(eq.thrust_n <= eq.max_thrust_n * (1 + 1e-9))
    assert np.all(eq.thrust_n[~eq.working] == 0.0)


def test_balanced_quad_hover_carries_quarter_weight():
    # Derived exact relation: a balanced quad in hover carries m g / 4 per rotor, no spin.
    veh = Vehicle.from_design(ring_design(mass_kg=0.5))
    eq = E.solve(veh, ())
    _invariants(veh, eq)
    np.testing.assert_allclose(eq.thrust_n, 0.5 * G / 4, rtol=1e-9)
    assert eq.spin_rate_rad_s == pytest.approx(0.0, abs=1e-9)
    assert eq.free_directions == 3


def test_plus_quad_two_opposite_out_closed_form():
    # Derived exact relation: symmetric '+' quad, two opposite rotors out, linear drag:
    # each working rotor carries m g / 2, n_bar = e_z, |spin| = kappa m g / gamma_z.
    m, kappa, gz = 0.5, 0.012, 0.0015
    veh = Vehicle.from_design(ring_design(mass_kg=m, torque_per_thrust_m=kappa,
                                          drag=(0.0007, 0.0007, gz)))
    eq = E.solve(veh, ("r1", "r3"))
    _invariants(veh, eq)
    np.testing.assert_allclose(eq.thrust_n[[0, 2]], m * G / 2, rtol=1e-9)
    np.testing.assert_allclose(eq.n_bar, [0, 0, 1], atol=1e-9)
    assert abs(eq.spin_rate_rad_s) == pytest.approx(kappa * m * G / gz, rel=1e-9)
    # the working pair spins ccw (s = +1): reaction torque -kappa f along z -> spin negative
    assert eq.spin_rate_rad_s < 0


def test_half_kilogram_quad_plausibility():
    # Figures a practitioner expects (common practice, no source): a half-kilogram quad hovers
    # on about 1.2 N per rotor; with one rotor lost the loaded rotors carry about 2 N and it
    # spins near 18 rad/s (about 3 Hz); with two opposite rotors lost near 30 rad/s (about 5 Hz).
    # Tolerances are loose (30 %): the figures depend on drag and torque coefficients.
    veh = Vehicle.from_design(ring_design(mass_kg=0.5, rotor_inertia_kg_m2=6e-6,
                                          drag=(0.0008, 0.0008, 0.0019)))
    hover = E.solve(veh, ())
    assert hover.thrust_n.mean() == pytest.approx(1.2, rel=0.05)
    one = E.solve(veh, ("r0",))
    _invariants(veh, one)
    loaded = np.sort(one.thrust_n)[-2:]
    np.testing.assert_allclose(loaded, 2.0, rtol=0.3)
    assert abs(one.spin_rate_rad_s) == pytest.approx(18.0, rel=0.3)
    two = E.solve(veh, ("r0", "r2"))
    _invariants(veh, two)
    assert abs(two.spin_rate_rad_s) == pytest.approx(30.0, rel=0.3)


def test_fixed_thrust_ratio_is_honoured():
    veh = Vehicle.from_design(ring_design())
    ratio = {"r1": 1.0, "r2": 0.3, "r3": 1.0}
    eq = E.solve(veh, ("r0",), ratio)
    _invariants(veh, eq)
    assert eq.free_directions == 0
    f = eq.thrust_n
    assert f[2] / f[1] == pytest.approx(0.3, rel=1e-9)
    assert f[3] / f[1] == pytest.approx(1.0, rel=1e-9)


def test_no_equilibrium_is_a_result_with_reason():
    # Thrust limits far below the weight: no equilibrium, a reason, no exception.
    veh = Vehicle.from_design(ring_design(max_thrust_n=0.5))
    eq = E.solve(veh, ("r0",))
    assert not eq.found
    assert "thrust limits" in eq.reason
    d = eq.to_dict()
    assert d["equilibrium_found"] is False


def test_every_rotor_failed_is_a_result():
    veh = Vehicle.from_design(ring_design())
    eq = E.solve(veh, ("r0", "r1", "r2", "r3"))
    assert not eq.found and "every rotor" in eq.reason


def test_symmetric_design_gives_mirror_results():
    # Mirror symmetry of the hexacopter ring about x: failing r1 and r5 gives equal thrust sets
    # and opposite spins.
    veh = Vehicle.from_design(ring_design(n_rotors=6, mass_kg=1.5, max_thrust_n=7.0,
                                          inertia_kg_m2=(8e-3, 8e-3, 1.5e-2)))
    a = E.solve(veh, ("r1",))
    b = E.solve(veh, ("r5",))
    _invariants(veh, a)
    _invariants(veh, b)
    assert abs(a.spin_rate_rad_s) == pytest.approx(abs(b.spin_rate_rad_s), rel=1e-6)
    np.testing.assert_allclose(np.sort(a.thrust_n), np.sort(b.thrust_n), rtol=1e-6, atol=1e-9)


@settings(max_examples=8, deadline=None)
@given(
    mass=st.floats(0.3, 2.0),
    jz_over_jx=st.floats(1.3, 1.9),
    kappa=st.floats(0.008, 0.02),
)
def test_equilibrium_residual_property(mass, jz_over_jx, kappa):
    jx = 5e-3 * mass
    veh = Vehicle.from_design(ring_design(mass_kg=mass, inertia_kg_m2=(jx, jx, jz_over_jx * jx),
                                          torque_per_thrust_m=kappa, max_thrust_n=7.0 * mass,
                                          rotor_inertia_kg_m2=3e-6))
    for failed in [(), ("r0",), ("r0", "r2")]:
        eq = E.solve(veh, failed)
        _invariants(veh, eq)
        assert math.isfinite(eq.spin_rate_rad_s)


def test_plus_quad_two_opposite_out_quadratic_drag_closed_form():
    # Derived exact relation with the quadratic drag law tau_z = -gamma2 |omega| omega_z:
    # gamma2 w^2 = kappa m g, so |w| = sqrt(kappa m g / gamma2); thrusts m g / 2, n_bar = e_z.
    m, kappa, g2 = 0.5, 0.012, 6e-5
    veh = Vehicle.from_design(ring_design(mass_kg=m, torque_per_thrust_m=kappa,
                                          drag=(3e-5, 3e-5, g2), drag_law="quadratic"))
    eq = E.solve(veh, ("r1", "r3"))
    _invariants(veh, eq)
    np.testing.assert_allclose(eq.thrust_n[[0, 2]], m * G / 2, rtol=1e-9)
    assert abs(eq.spin_rate_rad_s) == pytest.approx(math.sqrt(kappa * m * G / g2), rel=1e-9)


def test_no_failure_case_is_the_non_spinning_hover_when_it_exists():
    # An unbalanced vehicle (CoM off the rotor centroid, a product of inertia) with quadratic
    # drag: the no-failure case is the non-spinning hover, not a slowly spinning member.
    d = ring_design(inertia_kg_m2=[[2.5e-3, 0, 2e-4], [0, 2.5e-3, 0], [2e-4, 0, 4.5e-3]],
                    drag=(3e-5, 3e-5, 6e-5), drag_law="quadratic")
    veh = Vehicle.from_design(d)
    eq = E.solve(veh, ())
    _invariants(veh, eq)
    assert eq.spin_rate_rad_s == 0.0
    np.testing.assert_allclose(eq.n_bar, [0.0, 0.0, 1.0], atol=1e-15)
