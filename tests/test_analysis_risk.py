"""Saturation risk: Lyapunov statistics and Rice's formula against a Monte Carlo simulation."""

import math

import numpy as np
import pytest
import scipy.linalg as sla

from kit.analysis import control as C
from kit.analysis import equilibrium as E
from kit.analysis import risk as R
from kit.analysis.vehicle import Vehicle
from kit.models import ring_design


def _discretise(F, G, S, dt):
    """Exact zero-order discretisation of dx = F x dt + G dw (Van Loan, IEEE TAC 23 (1978))."""
    n = F.shape[0]
    M = np.block([[-F, G @ G.T * S], [np.zeros((n, n)), F.T]]) * dt
    E_ = sla.expm(M)
    Phi = E_[n:, n:].T
    Qd = Phi @ E_[:n, n:]
    return Phi, 0.5 * (Qd + Qd.T)


def test_rice_rate_formula():
    # Rice (1945): zero-level up-crossing rate of a Gaussian process = sigma_dot / (2 pi sigma).
    assert R.rice_rate(2.0, 3.0, 0.0) == pytest.approx(3.0 / (4 * math.pi), rel=1e-15)
    assert R.rice_rate(1.0, 1.0, 2.0) == pytest.approx(math.exp(-2.0) / (2 * math.pi), rel=1e-15)


def test_risk_statistics_and_crossing_rate_against_monte_carlo():
    veh = Vehicle.from_design(ring_design(rotor_inertia_kg_m2=3e-6))
    eq = E.solve(veh, ("r0",))
    ctl = C.design_control(veh, eq)
    psd, tau = 2e-5, 0.05
    risk = R.saturation_risk(eq, ctl, psd, tau)
    F, G = R.closed_loop_with_filter(ctl, tau)
    dt = 2e-3
    Phi, Qd = _discretise(F, G, psd, dt)
    L = np.linalg.cholesky(Qd + 1e-30 * np.eye(len(Qd)))
    rng = np.random.default_rng(20261202)
    chains, steps, burn = 64, 30000, 500
    X = np.zeros((chains, F.shape[0]))
    Cu = np.hstack([-ctl.K, np.zeros((ctl.K.shape[0], 2))])
    i = int(np.argmax(risk.thrust_std_n))  # the busiest rotor
    sig, sig_dot = risk.thrust_std_n[i], risk.thrust_rate_std_n_s[i]
    level = 1.5 * sig
    u_prev = None
    crossings = 0
    acc = np.zeros(2)
    for k in range(steps):
        X = X @ Phi.T + rng.standard_normal(X.shape) @ L.T
        u = X @ Cu[i]
        if k >= burn:
            acc += [np.sum(u * u), u.size]
            if u_prev is not None:
                crossings += int(np.sum((u_prev < level) & (u >= level)))
        u_prev = u if k >= burn else None
    t_total = chains * (steps - burn - 1) * dt
    # variance: the Lyapunov value within the Monte Carlo error (about 3 % here)
    assert math.sqrt(acc[0] / acc[1]) == pytest.approx(sig, rel=0.05)
    # crossing rate: Rice's value within 4 standard errors of a Poisson count (clustering of
    # crossings makes the true error somewhat larger; sampling at dt misses a few)
    nu = R.rice_rate(sig, sig_dot, level)
    expected = nu * t_total
    assert abs(crossings - expected) <= 4 * math.sqrt(expected) + 0.05 * expected
    assert risk.probability_per_s == pytest.approx(1 - math.exp(-risk.crossing_rate_per_s))


def test_risk_grows_with_disturbance_and_is_none_without_loop():
    veh = Vehicle.from_design(ring_design())
    eq = E.solve(veh, ("r0", "r2"))
    ctl = C.design_control(veh, eq)
    p = [R.saturation_risk(eq, ctl, s, 0.05).probability_per_s for s in (1e-5, 1e-4, 1e-3)]
    assert p[0] < p[1] < p[2]
    bad = E.solve(veh, ("r0", "r1", "r2", "r3"))
    assert R.saturation_risk(bad, C.design_control(veh, bad), 1e-4, 0.05) is None
