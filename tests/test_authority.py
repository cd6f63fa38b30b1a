"""Static control authority (available control authority index) against published facts."""

from __future__ import annotations

import dataclasses
import itertools

import numpy as np
import pytest
from scipy.optimize import linprog

from kit.analysis.authority import authority_index, axis_distances, facets, static_authority
from kit.analysis.hover import allocation_matrix, analyse_hover
from kit.analysis.vehicle import Vehicle
from kit.models import ring_design

# The hexacopter of Du, Quan, Yang, Cai, J. Guidance Control Dyn. 38(5), 2015 (from memory):
# mass 1.535 kg, arm 0.275 m, maximum lift 6.1 N per rotor, k_mu = 0.1 m; rotors at 60 deg
# steps, rotor 1 forward. The figures are from memory; the results checked below depend on
# them only through the sign of the index.
MASS_KG, ARM_M, FMAX_N, KMU_M = 1.535, 0.275, 6.1, 0.1


def _hexacopter(spins) -> Vehicle:
    d = ring_design(n_rotors=6, mass_kg=MASS_KG, arm_m=ARM_M, max_thrust_n=FMAX_N,
                    torque_per_thrust_m=KMU_M, inertia_kg_m2=(1.75e-2, 1.75e-2, 3.18e-2))
    rotors = tuple(dataclasses.replace(r, spin=s) for r, s in zip(d.rotors, spins, strict=True))
    return Vehicle.from_design(dataclasses.replace(d, rotors=rotors))


def test_alternating_hexacopter_has_no_static_authority_after_any_single_failure():
    # Du et al. 2015 (J. Intell. Robot. Syst. and JGCD 38(5)), from memory: the PNPNPN
    # hexacopter with any one rotor failed is not controllable at hover: the opposite rotor
    # must sit at 0 N, the hover point lies on the boundary of the attainable set (index 0).
    veh = _hexacopter([1, -1, 1, -1, 1, -1])
    intact = static_authority(veh, ())
    assert intact.positive
    for name in veh.names:
        a = static_authority(veh, (name,))
        assert abs(a.index) <= 1e-9 * veh.weight_n, name
        assert not a.positive and a.static_hover
        np.testing.assert_array_equal(a.per_axis, 0.0)


def test_ppnnpn_hexacopter_keeps_authority_for_the_failures_the_paper_lists():
    # Du et al., JGCD 38(5) 2015, from memory: with the PPNNPN spin arrangement the index stays
    # positive when rotor 1, 2, 3 or 4 fails and is negative when rotor 5 or 6 fails.
    veh = _hexacopter([1, 1, -1, -1, 1, -1])
    for k in range(4):
        assert static_authority(veh, (veh.names[k],)).positive, veh.names[k]
    for k in (4, 5):
        a = static_authority(veh, (veh.names[k],))
        assert a.index < 0 and not a.static_hover


def test_per_axis_authority_equals_the_linear_programmes_of_hover():
    # The torque margins of hover.py come from linear programmes (HiGHS); the facet formula
    # must give the same distances along roll, pitch and yaw (derived relation).
    veh = Vehicle.from_design(ring_design(n_rotors=6, mass_kg=1.5, max_thrust_n=7.0))
    a = static_authority(veh, ())
    h = analyse_hover(veh)
    np.testing.assert_allclose(a.per_axis[1:], h.torque_margin_n_m, rtol=1e-9)
    # thrust: from m g up to the sum of the maxima, or down to 0, whichever is nearer
    assert a.per_axis[0] <= min(6 * 7.0 - veh.weight_n, veh.weight_n) + 1e-9


def test_index_equals_distance_to_the_boundary_by_linear_programming():
    # Derived relation: for an interior point the index is the smallest distance to a facet
    # hyperplane. Along the normal of the nearest facet the boundary is met at exactly that
    # distance, and along any other facet normal no sooner; so the smallest LP distance
    # (max t with G + t xi attainable, scipy.optimize.linprog / HiGHS) over all facet normals
    # equals the index.
    rng = np.random.default_rng(1)
    B = rng.normal(size=(4, 7))
    fmin, fmax = np.zeros(7), np.full(7, 2.0)
    G = B @ np.full(7, 0.9)
    rho = authority_index(B, fmin, fmax, G)
    assert rho > 0
    normals, _, _ = facets(B, fmin, fmax)
    assert normals.shape[0] == 35  # C(7, 3) facet pairs, generators in general position
    dist = []
    for xi in np.vstack([normals, -normals]):
        res = linprog(np.r_[np.zeros(7), -1.0], A_eq=np.c_[B, -xi],
                      b_eq=G, bounds=list(zip(fmin, fmax, strict=True)) + [(None, None)],
                      method="highs")
        dist.append(-res.fun)
    assert rho == pytest.approx(min(dist), rel=1e-7)


def test_axis_distances_by_linear_programming():
    rng = np.random.default_rng(2)
    B = rng.normal(size=(4, 6))
    fmin, fmax = np.zeros(6), np.full(6, 1.5)
    G = B @ np.full(6, 0.7)
    up, down = axis_distances(B, fmin, fmax, G)
    for j, sign in itertools.product(range(4), (1.0, -1.0)):
        u = np.zeros(4)
        u[j] = sign
        res = linprog(np.r_[np.zeros(6), -1.0], A_eq=np.c_[B, -u], b_eq=G,
                      bounds=[(0, 1.5)] * 6 + [(None, None)], method="highs")
        ref = -res.fun  # HiGHS optimum (scipy.optimize.linprog)
        assert (up if sign > 0 else down)[j] == pytest.approx(ref, rel=1e-8, abs=1e-10)


def test_flat_attainable_set_gives_zero_or_negative():
    # A quad with one rotor failed: three generators span at most three dimensions, so there
    # is no interior; the common-practice X quad (no source) cannot hold yaw with three rotors.
    veh = Vehicle.from_design(ring_design(phase_deg=45.0))
    a = static_authority(veh, ("r0",))
    assert a.rank == 3 and a.index < 0 and not a.static_hover
    d = a.to_dict()
    assert d["static_hover_exists"] is False
    assert set(d["static_authority_per_axis"]) == {"thrust_n", "roll_n_m", "pitch_n_m",
                                                   "yaw_n_m"}
    # the allocation used is the kit's own (hover.allocation_matrix)
    assert allocation_matrix(veh).shape == (4, 4)


def test_authority_is_shared_across_wheel_momenta_and_equals_a_fresh_computation():
    # the index depends on the working allocation, the limits and the weight alone: vehicles
    # that differ only in wheel momentum share it, and the shared value is the one computed
    # afresh (common practice, no source)
    from kit.analysis import authority as au

    d = ring_design(n_rotors=6, wheel={"inertia_kg_m2": 1e-4, "max_speed_rad_s": 500.0,
                                       "mass_kg": 0.05, "position_m": [0.0, 0.0, 0.02]})
    veh = Vehicle.from_design(d)
    for failed in [(), ("r0",), ("r0", "r3")]:
        a = static_authority(veh, failed)
        b = static_authority(veh.with_wheel_momentum(0.03), failed)
        assert a is b
        work = veh.working_mask(failed)
        B = allocation_matrix(veh)[:, work]
        fresh = au._static_authority.__wrapped__(
            failed, B.tobytes(), B.shape, bool(B.flags.f_contiguous and not B.flags.c_contiguous),
            veh.max_thrust_n[work].tobytes(), veh.weight_n)
        assert fresh.index == a.index and fresh.static_hover == a.static_hover
        np.testing.assert_array_equal(fresh.per_axis, a.per_axis)
        if a.rank == 4:  # (a flat set's index comes from bounded least squares instead)
            G = np.array([veh.weight_n, 0.0, 0.0, 0.0])
            fmax = veh.max_thrust_n[work]
            assert a.index == authority_index(B, np.zeros(fmax.size), fmax, G)
