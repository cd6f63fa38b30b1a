"""The controllability verdict does not depend on the units or the size of the inertia."""

from __future__ import annotations

import numpy as np
import pytest

from kit.analysis import control as C
from kit.analysis import equilibrium as E
from kit.analysis.vehicle import Vehicle
from kit.models import ring_design


@pytest.mark.parametrize("k", [-2, -1, 0, 1, 2])
def test_needle_body_with_every_rotor_working_is_controllable(k):
    # A needle-like body, inertia diag(1e-6, 0.05, 0.05) kg m^2 scaled by 10^k, every rotor
    # working: its hover is controllable (each rotor's thrust gives roll and pitch torque;
    # Hautus / PBH test, from memory), whatever the scale of the inertia.
    J = np.array([1e-6, 0.05, 0.05]) * 10.0**k
    veh = Vehicle.from_design(ring_design(inertia_kg_m2=tuple(J)))
    eq = E.solve(veh, ())
    ctl = C.design_control(veh, eq)
    assert ctl.controllability_rank == 4
    assert ctl.controllable
    assert ctl.controllability_distance > C.CONTROLLABILITY_TOL


def test_verdict_invariant_to_state_units():
    # Rank and the PBH test are invariant under a change of state units (a diagonal
    # similarity, Hautus, from memory): the verdict on the balanced system must be too, for a
    # controllable pair and for an uncontrollable one (a mode no input reaches).
    rng = np.random.default_rng(3)
    A = rng.normal(size=(4, 4))
    B = rng.normal(size=(4, 3))
    Au = np.diag([-1.0, -2.0, 0.5, -3.0])
    Bu = np.vstack([rng.normal(size=(3, 2)), np.zeros((1, 2))])
    for s in (1e-4, 1e-2, 1.0, 1e3, 1e5):
        T = np.diag([s, 1.0, 1.0 / s, 3.0])
        r, d = C.controllability(np.linalg.solve(T, A @ T), np.linalg.solve(T, B))
        assert r == 4 and d > 1e3 * C.CONTROLLABILITY_TOL
        r, d = C.controllability(np.linalg.solve(T, Au @ T), np.linalg.solve(T, Bu))
        assert r == 3 and d <= 1e-12


def test_pbh_distance_against_a_dense_search():
    # The distance to uncontrollability min_lam sigma_min([A - lam I, B]) (Eising 1984, from
    # memory) of a small system against a dense grid over lam (common practice, no source).
    rng = np.random.default_rng(4)
    A = rng.normal(size=(3, 3))
    B = rng.normal(size=(3, 1)) * 0.3
    _, d = C.controllability(A, B)
    Ab, Bb = C._balance(A, B)
    norm = np.linalg.norm(np.hstack([Ab, Bb]), 2)
    xs = np.linspace(-4, 4, 401)
    ys = np.linspace(0, 4, 201)
    best = np.inf
    for y in ys:
        lam = xs + 1j * y
        M = Ab[None] - lam[:, None, None] * np.eye(3)
        s = np.linalg.svd(np.concatenate([M, np.broadcast_to(Bb, (lam.size, 3, 1))], axis=2),
                          compute_uv=False)[:, -1]
        best = min(best, float(s.min()))
    assert d <= best / norm * (1 + 1e-9)
    assert d == pytest.approx(best / norm, rel=2e-3)
