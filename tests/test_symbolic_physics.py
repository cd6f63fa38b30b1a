"""Physics checks of the derivation against independent formulations and classical results."""

from __future__ import annotations

import numpy as np
import pytest
import sympy as sp
from _reference_field import generated, random_params
from hypothesis import given, settings
from hypothesis import strategies as st
from sympy.physics import mechanics as me

from kit.symbolic.reduced import reduced_model
from kit.symbolic.rigid_body import rigid_body, symbols_for
from kit.symbolic.structure import Structure

# ---- Euler's equations with spinning rotors vs sympy.physics.mechanics.KanesMethod -----------


def _kane_omega_dot(n_rotors: int, wheel: bool):
    """Body + N rotor disks (+ wheel disk) at constant relative spin about z_B, by Kane's method.

    The body's own inertia is J minus the disks' spin inertias, so the total matches the kit's
    convention (J includes rotor spin inertia). The disks are massless at r_i with spin-axis
    inertia only; the relative rates Omega_i = s_i sqrt(f_i / kf_i) (wheel: hw / I_w) are held.
    Kane & Levinson, Dynamics: Theory and Applications, 1985, ch. 6 (from memory).
    """
    stc = Structure(n_rotors, wheel, "linear")
    sym = symbols_for(stc)
    q1, q2, q3 = me.dynamicsymbols("q1:4")
    u1, u2, u3 = me.dynamicsymbols("u1:4")
    N = me.ReferenceFrame("N")
    B = N.orientnew("B", "Body", (q1, q2, q3), "123")
    B.set_ang_vel(N, u1 * B.x + u2 * B.y + u3 * B.z)
    origin = me.Point("O")
    origin.set_vel(N, 0)
    f, x, y = sym.f, sym.rotor("x"), sym.rotor("y")
    s, kappa, kf, ip = sym.rotor("s"), sym.rotor("kappa"), sym.rotor("kf"), sym.rotor("IP")
    zz = me.outer(B.z, B.z)
    disks = [(ip[i], s[i] * sp.sqrt(f[i] / kf[i]), x[i], y[i]) for i in range(n_rotors)]
    if wheel:
        iw = sp.Symbol("I_w", positive=True)
        disks.append((iw, sym["hw"] / iw, 0, 0))
    J = sym.J
    body_inertia = me.inertia(B, J[0, 0], J[1, 1], J[2, 2], J[0, 1], J[1, 2], J[0, 2])
    for i_p, _, _, _ in disks:
        body_inertia = body_inertia - i_p * zz
    bodies = [me.RigidBody("body", origin, B, sp.Symbol("M"), (body_inertia, origin))]
    loads = []
    for k, (i_p, rate, xi, yi) in enumerate(disks):
        R = me.ReferenceFrame(f"R{k}")
        R.set_ang_vel(B, rate * B.z)
        R.set_ang_vel(N, B.ang_vel_in(N) + rate * B.z)
        P = origin.locatenew(f"P{k}", xi * B.x + yi * B.y)
        P.v2pt_theory(origin, N, B)
        bodies.append(me.RigidBody(f"disk{k}", P, R, 0, (i_p * zz, P)))
        if k < n_rotors:
            loads.append((P, f[k] * B.z))
    tau = -sum(s[i] * kappa[i] * f[i] for i in range(n_rotors)) * B.z
    tau += -(sym["gx"] * u1 * B.x + sym["gy"] * u2 * B.y + sym["gz"] * u3 * B.z)
    loads.append((B, tau))
    # B's angular velocity is set directly from u, so the kinematic equations only need to be
    # invertible: q' = u gives the same dynamic equations for u'.
    kd = [q1.diff() - u1, q2.diff() - u2, q3.diff() - u3]
    kane = me.KanesMethod(N, q_ind=[q1, q2, q3], u_ind=[u1, u2, u3], kd_eqs=kd)
    kane.kanes_equations(bodies, loads)
    return kane.mass_matrix, kane.forcing, (u1, u2, u3), sym, disks


@pytest.mark.parametrize(("n", "wheel"), [(4, False), (3, True)])
def test_euler_with_rotors_matches_kanes_method(n, wheel):
    mass, forcing, us, sym, disks = _kane_omega_dot(n, wheel)
    stc = Structure(n, wheel, "linear")
    rb = rigid_body(stc)
    rng = np.random.default_rng(42 + n)
    for _ in range(3):
        par = random_params(rng, n, wheel)
        omega = rng.uniform(-4, 4, 3)
        f = rng.uniform(0.5, 6.0, n)
        subs = dict(zip(sym.par, par, strict=True))
        subs.update(zip(sym.f, f, strict=True))
        subs.update(zip(us, omega, strict=True))
        subs.update(zip(sym.omega, omega, strict=True))
        if wheel:
            subs[sp.Symbol("I_w", positive=True)] = 0.004
        Mn = np.array(mass.xreplace(subs).evalf(), dtype=float)
        Fn = np.array(forcing.xreplace(subs).evalf(), dtype=float).ravel()
        kane = np.linalg.solve(Mn, Fn)
        kit_val = np.array(
            rb.omega_dot.xreplace(sym.jinv_subs).xreplace(subs).evalf(), dtype=float
        ).ravel()
        np.testing.assert_allclose(kit_val, kane, rtol=1e-10, atol=1e-12)
        gen = generated(n, wheel).omega_dot(omega, f, par)
        np.testing.assert_allclose(gen, kane, rtol=1e-10, atol=1e-12)


# ---- torque-free spin about a principal axis --------------------------------------------------


@pytest.mark.parametrize("axis", [0, 1, 2])
def test_principal_axis_spin_stability(axis):
    # Torque-free rigid body spinning at Omega about principal axis k: the linearised rates grow
    # as exp(lambda t) with lambda = Omega sqrt((I2 - I1)(I3 - I2) / (I1 I3)) about the
    # intermediate axis; the other two axes are neutrally stable (eigenvalues on the imaginary
    # axis). Landau & Lifshitz, Mechanics, 3rd ed., sec. 37, problem 1; Thornton & Marion,
    # Classical Dynamics, 5th ed., sec. 11.12 (both from memory).
    stc = Structure(3, False, "linear")
    sym = symbols_for(stc)
    rb = rigid_body(stc)
    jac = rb.omega_dot.jacobian(sym.omega).xreplace(sym.jinv_subs)
    I1, I2, I3, Omega = 0.02, 0.03, 0.045, 7.0  # I1 < I2 < I3, axis 1 intermediate
    inertia = [I1, I2, I3]
    values = {sym["Jxx"]: I1, sym["Jyy"]: I2, sym["Jzz"]: I3,
              sym["Jxy"]: 0, sym["Jxz"]: 0, sym["Jyz"]: 0,
              sym["gx"]: 0, sym["gy"]: 0, sym["gz"]: 0}
    for i in range(3):
        values.update({sym[f"IP_{i}"]: 0, sym[f"x_{i}"]: 0, sym[f"y_{i}"]: 0,
                       sym[f"kappa_{i}"]: 0, sym[f"s_{i}"]: 1, sym[f"kf_{i}"]: 1e-5})
    omega0 = [0.0, 0.0, 0.0]
    omega0[axis] = Omega
    values.update(zip(sym.omega, omega0, strict=True))
    values.update({fi: 1.0 for fi in sym.f})
    A = np.array(jac.xreplace(values).evalf(), dtype=float)
    eig = np.linalg.eigvals(A)
    others = [inertia[k] for k in range(3) if k != axis]
    Ia = inertia[axis]
    growth2 = Omega**2 * (Ia - others[0]) * (others[1] - Ia) / (others[0] * others[1])
    if axis == 1:
        expect = Omega * np.sqrt((I2 - I1) * (I3 - I2) / (I1 * I3))
        assert np.max(eig.real) == pytest.approx(expect, rel=1e-12)
        assert np.min(eig.real) == pytest.approx(-expect, rel=1e-12)
    else:
        assert growth2 < 0
        assert np.max(np.abs(eig.real)) < 1e-12
        assert np.sort(np.abs(eig.imag))[-1] == pytest.approx(np.sqrt(-growth2), rel=1e-12)


# ---- degenerate inertia of a '+' quadrotor that lost two opposite rotors ----------------------


def _degenerate_det(with_rotor_momentum: bool):
    """Controllability determinant of the reduced model, derived symbolically.

    '+' vehicle: rotors at (L, 0), (0, L), (-L, 0), (0, -L); rotors 1 and 3 lost; the pair on
    the x arm (both spin sense s) balances its yaw reaction torque with yaw drag while spinning
    at r about z, level (n = z). Diagonal inertia. The effective input is the thrust
    difference (the common thrust only lifts); det [b, Ab, A^2 b, A^3 b].
    """
    stc = Structure(4, False, "linear")
    sym = symbols_for(stc)
    red = reduced_model(stc)
    L, F, s = sp.symbols("L F s", positive=True)
    r = sym.omega[2]
    values = {sym["Jxy"]: 0, sym["Jxz"]: 0, sym["Jyz"]: 0}
    pos = [(L, 0), (0, L), (-L, 0), (0, -L)]
    for i, (xi, yi) in enumerate(pos):
        values.update({sym[f"x_{i}"]: xi, sym[f"y_{i}"]: yi, sym[f"s_{i}"]: s})
        if not with_rotor_momentum:
            values[sym[f"IP_{i}"]] = 0
    p, q, nx, ny = red.state
    point = {p: 0, q: 0, nx: 0, ny: 0, sym.f[0]: F, sym.f[2]: F, sym.f[1]: 0, sym.f[3]: 0}
    jinv = {k: v.xreplace(values) for k, v in sym.jinv_subs.items()}
    A = red.A.xreplace(jinv).xreplace(values).xreplace(point)
    B = red.B[:, [0, 2]].xreplace(jinv).xreplace(values).xreplace(point)
    b = (B[:, 0] - B[:, 1]) / 2
    C = sp.Matrix.hstack(b, A * b, A * A * b, A * A * A * b)
    return C.det(method="berkowitz"), sym, (L, F, s, r)


def _is_zero(expr) -> bool:
    """Exact zero test: expand the numerator (sqrt terms act as independent generators)."""
    return sp.expand(sp.numer(sp.together(expr))) == 0


def test_degenerate_inertia_without_rotor_momentum():
    # Classical result, derived here: with IP = 0 the determinant vanishes for isotropic inertia,
    # and for a flat plate (Jzz = Jxx + Jyy) when there is no drag about the arm axis (gx = 0).
    # Mueller & D'Andrea, Int. J. Robotics Research 35(8), 2016, sec. 6 (from memory).
    det, sym, (L, F, s, r) = _degenerate_det(False)
    Jxx, Jyy, Jzz, gx = sym["Jxx"], sym["Jyy"], sym["Jzz"], sym["gx"]
    assert not _is_zero(det)
    assert _is_zero(det.xreplace({Jyy: Jxx, Jzz: Jxx}))
    assert _is_zero(det.xreplace({Jzz: Jxx + Jyy, gx: 0}))
    assert not _is_zero(det.xreplace({Jzz: Jxx + Jyy}))  # drag about the arm axis helps


def test_degenerate_inertia_moves_with_rotor_momentum():
    # With rotor momentum h = s IP (sqrt(F/kf_0) + sqrt(F/kf_2)) along z, the body spins at r and
    # the degenerate Jzz moves by -h / r (H_z = Jzz r + h = (Jzz + h/r) r). Derived here.
    det, sym, (L, F, s, r) = _degenerate_det(True)
    Jxx, Jyy, Jzz, gx = sym["Jxx"], sym["Jyy"], sym["Jzz"], sym["gx"]
    h = s * (sym["IP_0"] * sp.sqrt(F / sym["kf_0"]) + sym["IP_2"] * sp.sqrt(F / sym["kf_2"]))
    assert _is_zero(det.xreplace({Jyy: Jxx, Jzz: Jxx - h / r}))
    assert _is_zero(det.xreplace({Jzz: Jxx + Jyy - h / r, gx: 0}))
    assert not _is_zero(det.xreplace({Jzz: Jxx + Jyy, gx: 0}))  # old condition no longer
    assert not _is_zero(det.xreplace({Jyy: Jxx, Jzz: Jxx}))


# ---- attitude block eigenvalues at equilibria -------------------------------------------------


@settings(max_examples=60, deadline=None)
@given(
    w=st.floats(-30, 30).filter(lambda v: abs(v) > 1e-3),
    nx=st.floats(-0.6, 0.6),
    ny=st.floats(-0.6, 0.6),
)
def test_attitude_block_eigenvalues_are_plus_minus_jw(w, nx, ny):
    # With omega = w n, the (nx, ny) block of A is [[w nx ny/nz, w(nz + ny^2/nz)],
    # [-w(nz + nx^2/nz), -w nx ny/nz]]: trace 0, det w^2 |n|^2 = w^2 -> eigenvalues +-j w.
    # Derived here from n_dot = -omega x n.
    mod = generated(4, False)
    nz = np.sqrt(1 - nx * nx - ny * ny)
    par = random_params(np.random.default_rng(0), 4, False)
    A, _ = mod.reduced_AB([w * nx, w * ny, w * nz, nx, ny], np.full(4, 2.0), par)
    eig = np.linalg.eigvals(A[2:, 2:])
    assert np.max(np.abs(eig.real)) <= 1e-9 * abs(w)
    np.testing.assert_allclose(np.sort(eig.imag), [-abs(w), abs(w)], rtol=1e-9)


# ---- invariants (hypothesis) ------------------------------------------------------------------


@settings(max_examples=40, deadline=None)
@given(seed=st.integers(0, 2**32 - 1), wheel=st.booleans())
def test_torque_free_motion_conserves_energy_and_momentum(seed, wheel):
    # No applied torque (rotors at the CoM, no reaction torque, no drag): kinetic energy
    # w.Jw/2 and |Jw + h z| are constant along solutions, i.e. w.J w_dot = 0 and
    # H.(J w_dot) = 0. Goldstein, Classical Mechanics, 3rd ed., sec. 5.6 (from memory).
    rng = np.random.default_rng(seed)
    n = 3
    par = random_params(rng, n, wheel)
    par[8:11] = 0.0
    base = 12 if wheel else 11
    for i in range(n):
        par[base + 6 * i + 0 : base + 6 * i + 2] = 0.0  # x_i, y_i
        par[base + 6 * i + 3] = 0.0  # kappa_i
    omega = rng.uniform(-5, 5, 3)
    f = rng.uniform(0.5, 5, n)
    J = np.array([[par[2], par[5], par[6]], [par[5], par[3], par[7]], [par[6], par[7], par[4]]])
    wd = generated(n, wheel).omega_dot(omega, f, par)
    H = J @ omega
    H[2] += (par[11] if wheel else 0.0) + sum(
        par[base + 6 * i + 2] * par[base + 6 * i + 5] * np.sqrt(f[i] / par[base + 6 * i + 4])
        for i in range(n)
    )
    scale = np.linalg.norm(J @ wd) * np.linalg.norm(H) + 1e-300
    assert abs(H @ (J @ wd)) <= 1e-12 * scale
    # The gyrostat with constant internal momentum also conserves w.Jw/2: w.(w x H) = 0.
    assert abs(omega @ (J @ wd)) <= 1e-12 * np.linalg.norm(omega) * np.linalg.norm(J @ wd) + 1e-15


@settings(max_examples=40, deadline=None)
@given(seed=st.integers(0, 2**32 - 1))
def test_n_dot_keeps_unit_length_and_equilibrium_residual_symmetry(seed):
    rng = np.random.default_rng(seed)
    mod = generated(4, False)
    par = random_params(rng, 4, False)
    n = rng.normal(size=3)
    n /= np.linalg.norm(n)
    rhs = mod.attitude_rhs(rng.uniform(-5, 5, 3), n, rng.uniform(0.5, 5, 4), par)
    assert abs(n @ rhs[3:]) <= 1e-12 * (np.linalg.norm(rhs[3:]) + 1)
    # Mirror symmetry: a vehicle mirrored in its x-z plane (y -> -y, spin senses flipped,
    # Jxy, Jyz -> -) at the mirrored state (w -> -w, ny -> -ny) has the mirrored residual
    # (x and z moments flip sign, y moment and vertical force unchanged). Derived here.
    z = np.concatenate([[rng.uniform(-5, 5)], rng.uniform(-0.5, 0.5, 2), rng.uniform(1, 5, 4)])
    mirror = par.copy()
    mirror[[5, 7]] *= -1
    for i in range(4):
        mirror[11 + 6 * i + 1] *= -1  # y_i
        mirror[11 + 6 * i + 2] *= -1  # s_i
    zm = z.copy()
    zm[0] *= -1
    zm[2] *= -1
    res = mod.eq_residual(z, par)
    res_m = mod.eq_residual(zm, mirror)
    np.testing.assert_allclose(res_m, res * np.array([-1, 1, -1, 1]), rtol=1e-10, atol=1e-10)
