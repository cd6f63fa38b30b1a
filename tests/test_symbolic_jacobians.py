"""Generated A, B and equilibrium Jacobian against finite differences of independent code."""

from __future__ import annotations

import numpy as np
import pytest
from _reference_field import generated, random_params, reduced_field
from _reference_field import reduced_AB as hand_AB

CASES = [(3, False, "linear"), (4, True, "linear"), (6, False, "quadratic"), (4, True, "quadratic")]


def _random_state(rng):
    p, q, r = rng.uniform(-3.0, 3.0, 3)
    nx, ny = rng.uniform(-0.5, 0.5, 2)
    return np.array([p, q, r, nx, ny])


def _central_fd(fun, x, rel=1e-6):
    x = np.asarray(x, dtype=float)
    cols = []
    for k in range(x.size):
        h = rel * max(1.0, abs(x[k]))
        e = np.zeros_like(x)
        e[k] = h
        cols.append((fun(x + e) - fun(x - e)) / (2 * h))
    return np.stack(cols, axis=-1)


@pytest.mark.parametrize(("n", "wheel", "drag"), CASES)
def test_AB_match_finite_differences_of_reference_field(n, wheel, drag):
    # Central differences, truncation error O(h^2) ~ 1e-12, round-off ~ eps/h ~ 1e-10:
    # relative agreement 1e-6 (brief's tolerance) leaves a wide margin.
    mod = generated(n, wheel, drag)
    rng = np.random.default_rng(1000 + n)
    for _ in range(20):
        par = random_params(rng, n, wheel)
        xr = _random_state(rng)
        f = rng.uniform(1.0, 8.0, n)
        A, B = mod.reduced_AB(xr, f, par)
        x4 = xr[[0, 1, 3, 4]]
        r = xr[2]
        def field_x(x, r=r, f=f, par=par):
            return reduced_field(x, r, f, par, n, wheel, drag)

        def field_f(ff, x4=x4, r=r, par=par):
            return reduced_field(x4, r, ff, par, n, wheel, drag)

        A_fd = _central_fd(field_x, x4)
        B_fd = _central_fd(field_f, f)
        scale_A = np.max(np.abs(A_fd))
        scale_B = np.max(np.abs(B_fd))
        np.testing.assert_allclose(A, A_fd, rtol=1e-6, atol=1e-6 * scale_A)
        np.testing.assert_allclose(B, B_fd, rtol=1e-6, atol=1e-6 * scale_B)


@pytest.mark.parametrize(("n", "wheel", "drag"), CASES)
def test_reduced_rhs_matches_reference_field(n, wheel, drag):
    mod = generated(n, wheel, drag)
    rng = np.random.default_rng(7 + n)
    for _ in range(10):
        par = random_params(rng, n, wheel)
        xr = _random_state(rng)
        f = rng.uniform(0.5, 8.0, n)
        expect = reduced_field(xr[[0, 1, 3, 4]], xr[2], f, par, n, wheel, drag)
        np.testing.assert_allclose(mod.reduced_rhs(xr, f, par), expect, rtol=1e-10, atol=1e-12)


@pytest.mark.parametrize(("n", "wheel", "drag"), CASES)
def test_hand_written_AB_kernel_agrees(n, wheel, drag):
    mod = generated(n, wheel, drag)
    rng = np.random.default_rng(3)
    par = random_params(rng, n, wheel, batch=(50,))
    xr = np.stack([_random_state(rng) for _ in range(50)])
    f = rng.uniform(0.5, 8.0, (50, n))
    A, B = mod.reduced_AB(xr, f, par)
    A_ref, B_ref = hand_AB(xr, f, par, n, wheel, drag)
    np.testing.assert_allclose(A, A_ref, rtol=1e-10, atol=1e-12)
    np.testing.assert_allclose(B, B_ref, rtol=1e-10, atol=1e-12)


@pytest.mark.parametrize(("n", "wheel", "drag"), CASES)
def test_eq_jacobian_matches_finite_differences(n, wheel, drag):
    mod = generated(n, wheel, drag)
    rng = np.random.default_rng(11 * n)
    for _ in range(10):
        par = random_params(rng, n, wheel)
        z = np.concatenate([[rng.uniform(-5, 5)], rng.uniform(-0.5, 0.5, 2), rng.uniform(1, 8, n)])
        Jz = mod.eq_jacobian(z, par)
        J_fd = _central_fd(lambda zz, par=par: mod.eq_residual(zz, par), z)
        np.testing.assert_allclose(Jz, J_fd, rtol=1e-6, atol=1e-6 * np.max(np.abs(J_fd)))


def test_quadratic_drag_jacobian_is_finite_at_rest():
    # d(|w| w)/dw -> 0 as w -> 0; the generated A must be finite (not 0/0) at the hover point.
    mod = generated(4, False, "quadratic")
    rng = np.random.default_rng(5)
    par = random_params(rng, 4, False)
    A, B = mod.reduced_AB(np.zeros(5), np.full(4, 3.0), par)
    assert np.all(np.isfinite(A)) and np.all(np.isfinite(B))
    A_lin, _ = generated(4, False, "linear").reduced_AB(
        np.zeros(5), np.full(4, 3.0), par
    )
    # With zero drag gains in the linear law and omega = 0, both laws agree at rest.
    par0 = par.copy()
    par0[8:11] = 0.0
    np.testing.assert_allclose(
        mod.reduced_AB(np.zeros(5), np.full(4, 3.0), par0)[0],
        generated(4, False, "linear").reduced_AB(np.zeros(5), np.full(4, 3.0), par0)[0],
    )
    assert A_lin.shape == A.shape


def test_B_is_non_finite_for_a_stopped_rotor_with_spin_inertia():
    # d sqrt(f)/df is infinite at f = 0; the generated code returns non-finite without warning.
    mod = generated(4, False)
    rng = np.random.default_rng(9)
    par = random_params(rng, 4, False)
    xr = np.array([0.3, -0.2, 1.0, 0.1, 0.0])
    _, B = mod.reduced_AB(xr, np.array([0.0, 2.0, 2.0, 2.0]), par)
    assert not np.all(np.isfinite(B[:2, 0]))
    assert np.all(np.isfinite(B[:, 1:]))
