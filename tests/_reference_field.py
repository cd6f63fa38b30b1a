"""Hand-written numpy reference of the attitude dynamics (independent of the generated code).

Written directly from the conventions in DESIGN.md, with ``numpy.linalg.solve`` for J^{-1}
and an analytic Jacobian written out by hand; used by the tests (finite differences) and the
benchmark (speed of the generated ``reduced_AB`` against a hand-written kernel).

Euler's equation for a gyrostat (Goldstein, Poole, Safko, Classical Mechanics, 3rd ed.,
sec. 5.5; Hughes, Spacecraft Attitude Dynamics, ch. 6; both from memory):
    J w' = tau - w x (J w + h z),  h = h_w + sum_i s_i IP_i sqrt(f_i / kf_i).
"""

from __future__ import annotations

import numpy as np

ROTOR_FIELDS = ("x", "y", "s", "kappa", "kf", "IP")


def unpack(par, n_rotors, wheel):
    """Split a parameter array (..., P) into named arrays; rotor fields get shape (..., N)."""
    par = np.asarray(par, dtype=float)
    out = {}
    names = ["m", "g", "Jxx", "Jyy", "Jzz", "Jxy", "Jxz", "Jyz", "gx", "gy", "gz"]
    for k, name in enumerate(names):
        out[name] = par[..., k]
    k = len(names)
    out["hw"] = par[..., k] if wheel else np.zeros(par.shape[:-1])
    k += int(wheel)
    rotors = par[..., k:].reshape(par.shape[:-1] + (n_rotors, 6))
    for j, name in enumerate(ROTOR_FIELDS):
        out[name] = rotors[..., j]
    J = np.empty(par.shape[:-1] + (3, 3))
    J[..., 0, 0], J[..., 1, 1], J[..., 2, 2] = out["Jxx"], out["Jyy"], out["Jzz"]
    J[..., 0, 1] = J[..., 1, 0] = out["Jxy"]
    J[..., 0, 2] = J[..., 2, 0] = out["Jxz"]
    J[..., 1, 2] = J[..., 2, 1] = out["Jyz"]
    out["J"] = J
    out["gamma"] = np.stack([out["gx"], out["gy"], out["gz"]], axis=-1)
    return out


def momentum_z(f, P):
    """Rotor plus wheel angular momentum along z_B, in N m s."""
    return P["hw"] + np.sum(P["s"] * P["IP"] * np.sqrt(f / P["kf"]), axis=-1)


def moment(omega, f, P, drag_law="linear"):
    """tau - omega x H, in N m (J omega_dot)."""
    omega = np.asarray(omega, dtype=float)
    f = np.asarray(f, dtype=float)
    tau = np.stack(
        [
            np.sum(P["y"] * f, axis=-1),
            -np.sum(P["x"] * f, axis=-1),
            -np.sum(P["s"] * P["kappa"] * f, axis=-1),
        ],
        axis=-1,
    )
    if drag_law == "linear":
        tau_d = -P["gamma"] * omega
    else:
        tau_d = -P["gamma"] * np.linalg.norm(omega, axis=-1, keepdims=True) * omega
    H = np.einsum("...ij,...j->...i", P["J"], omega)
    H[..., 2] += momentum_z(f, P)
    return tau + tau_d - np.cross(omega, H)


def omega_dot(omega, f, par, n_rotors, wheel, drag_law="linear"):
    """Body angular acceleration, rad/s^2."""
    P = unpack(par, n_rotors, wheel)
    return np.linalg.solve(P["J"], moment(omega, f, P, drag_law)[..., None])[..., 0]


def reduced_field(x, r, f, par, n_rotors, wheel, drag_law="linear"):
    """(p_dot, q_dot, nx_dot, ny_dot) for x = (p, q, nx, ny) and held r (single point)."""
    p, q, nx, ny = x
    nz = np.sqrt(1.0 - nx * nx - ny * ny)
    wd = omega_dot(np.array([p, q, r]), f, par, n_rotors, wheel, drag_law)
    n = np.array([nx, ny, nz])
    ndot = -np.cross(np.array([p, q, r]), n)
    return np.array([wd[0], wd[1], ndot[0], ndot[1]])


def _skew(v):
    S = np.zeros(v.shape[:-1] + (3, 3))
    S[..., 0, 1], S[..., 0, 2] = -v[..., 2], v[..., 1]
    S[..., 1, 0], S[..., 1, 2] = v[..., 2], -v[..., 0]
    S[..., 2, 0], S[..., 2, 1] = -v[..., 1], v[..., 0]
    return S


def reduced_AB(xr, f, par, n_rotors, wheel, drag_law="linear"):
    """Analytic A (..., 4, 4) and B (..., 4, N) of the reduced model, batched, by hand.

    d(-w x H)/dw = [H]x - [w]x J;  d tau_d/dw = -diag(gamma) (linear law).
    """
    xr = np.asarray(xr, dtype=float)
    f = np.asarray(f, dtype=float)
    P = unpack(par, n_rotors, wheel)
    omega = xr[..., 0:3]
    p, q, r, nx, ny = (xr[..., k] for k in range(5))
    batch = np.broadcast_shapes(xr.shape[:-1], f.shape[:-1], np.shape(P["m"]))
    Jinv = np.linalg.inv(P["J"])
    H = np.einsum("...ij,...j->...i", P["J"], omega)
    H[..., 2] += momentum_z(f, P)
    dM = _skew(H) - np.einsum("...ij,...jk->...ik", _skew(omega), P["J"])
    if drag_law == "linear":
        dM -= P["gamma"][..., :, None] * np.eye(3)
    else:
        wn = np.linalg.norm(omega, axis=-1)[..., None, None]
        with np.errstate(divide="ignore", invalid="ignore"):
            outer = np.where(wn > 0, omega[..., :, None] * omega[..., None, :] / wn, 0.0)
        dM -= P["gamma"][..., :, None] * (wn * np.eye(3) + outer)
    A = np.zeros(batch + (4, 4))
    A[..., 0:2, 0:2] = np.einsum("...ij,...jk->...ik", Jinv[..., 0:2, :], dM[..., :, 0:2])
    nz = np.sqrt(1.0 - nx * nx - ny * ny)
    A[..., 2, 1] = -nz
    A[..., 2, 2] = q * nx / nz
    A[..., 2, 3] = r + q * ny / nz
    A[..., 3, 0] = nz
    A[..., 3, 2] = -r - p * nx / nz
    A[..., 3, 3] = -p * ny / nz
    dh = P["s"] * P["IP"] / (2.0 * np.sqrt(P["kf"] * f))
    cols = np.stack(
        [P["y"] - q[..., None] * dh, -P["x"] + p[..., None] * dh, -P["s"] * P["kappa"]],
        axis=-2,
    )  # (..., 3, N): tau_i - omega x (dh_i z)
    B = np.zeros(batch + (4, n_rotors))
    B[..., 0:2, :] = np.einsum("...ij,...jk->...ik", Jinv[..., 0:2, :], cols)
    return A, B


def random_params(rng, n_rotors, wheel, batch=()):
    """Physically plausible random parameters (positive-definite J, f-independent ranges)."""
    m = rng.uniform(0.5, 3.0, batch)
    # J = R diag(I) R^T + a few rotor spin inertias: positive definite, off-diagonals non-zero.
    principal = rng.uniform(0.01, 0.05, batch + (3,))
    Q, _ = np.linalg.qr(rng.normal(size=batch + (3, 3)))
    J = np.einsum("...ij,...j,...kj->...ik", Q, principal, Q)
    cols = [m, rng.uniform(9.7, 9.9, batch), J[..., 0, 0], J[..., 1, 1], J[..., 2, 2],
            J[..., 0, 1], J[..., 0, 2], J[..., 1, 2]]
    cols += [rng.uniform(0.0, 0.02, batch) for _ in range(3)]
    if wheel:
        cols.append(rng.uniform(-0.05, 0.05, batch))
    for _ in range(n_rotors):
        cols += [
            rng.uniform(-0.3, 0.3, batch),
            rng.uniform(-0.3, 0.3, batch),
            rng.choice([-1.0, 1.0], batch),
            rng.uniform(0.005, 0.02, batch),
            rng.uniform(5e-6, 2e-5, batch),
            rng.uniform(1e-5, 5e-5, batch),
        ]
    return np.stack(np.broadcast_arrays(*cols), axis=-1)


# ---- test helper (not part of the reference physics): generated modules built in memory ----
_GENERATED = {}


def generated(n_rotors, wheel, drag_law="linear", cse=True):
    """Import the generated module of a structure from source, bypassing the disk cache."""
    from kit.symbolic.cache import module_from_source
    from kit.symbolic.codegen import generate_source
    from kit.symbolic.structure import Structure

    key = (n_rotors, wheel, drag_law, cse)
    if key not in _GENERATED:
        st = Structure(n_rotors, wheel, drag_law)
        text = generate_source(st, cse=cse, key="test")
        _GENERATED[key] = module_from_source(text, f"gen_test_{st.key.replace('-', '_')}_{cse}")
    return _GENERATED[key]
