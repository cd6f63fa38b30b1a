r"""Linear control about an equilibrium: reduced model, controllability, LQR, H2 sensitivity.

Reduced attitude model (DESIGN.md): state ``x = (p, q, n_x, n_y)`` as deviations from the
equilibrium, yaw rate ``r`` held at ``r_bar`` (the yaw-rate channel is outside this model), input
``u`` = thrust deviations of the working rotors; ``A, B`` are the Jacobians of the generated
right-hand side. LQR: ``u = -K x`` minimising

.. math::

    \int_0^\infty x^{\mathsf T} Q x + u^{\mathsf T} R u \, dt, \qquad
    A^{\mathsf T} P + P A - P B R^{-1} B^{\mathsf T} P + Q = 0, \qquad K = R^{-1} B^{\mathsf T} P,

with ``Q = diag(w_rate, w_rate, w_att, w_att)``, ``R = w_thrust I``. Controllability: rank of
``[B, AB, A^2B, A^3B]`` on a scaled system and the distance to uncontrollability
``min_{lambda in C} sigma_min([A - lambda I, B])`` (PBH test, Eising 1984), relative to
``||[A, B]||``, both on the balanced system (diagonal scaling, so the verdict does not depend
on the units of the states), minimised by damped Newton steps (analytic gradient of a simple
eigenvalue) started at each eigenvalue of ``A``. H2 norm from body torques about x_B, y_B to
``(n_x, n_y)``:

.. math::

    \|G\|_2^2 = \operatorname{tr}(C W C^{\mathsf T}), \qquad A_{cl} W + W A_{cl}^{\mathsf T}
    + B_d B_d^{\mathsf T} = 0 .

Motor lag (DESIGN.md, "Motor dynamics"): with any working rotor's time constant ``tau_i > 0``
the state grows to ``(p, q, n_x, n_y, f_1 .. f_k)`` (thrust deviations of the working rotors),
the input is the commanded thrusts, ``A_aug = [[A, B], [0, -Lambda]]``, ``B_aug = [[0],
[Lambda]]`` (generated ``augmented_AB``), ``Q_aug = diag(Q, 0)``. With every lag 0 the model is
the four-state one above. The controller is taken to measure the thrusts (rotor speed).

Robustness per case: damping ratio ``zeta = -Re(s) / |s|`` of every closed-loop pole (the least
is reported) and decay rate ``-Re(s)`` of the slowest pole; the lag margin, the largest motor
time constant ``tau`` common to every working rotor for which the loop with the design's ``K``
stays stable, found by a scan and bisection on

.. math::

    \dot x = A x + B f, \qquad \tau \dot f = -K_x x - (I + K_f) f ;

and the loop-at-the-input margins: for rotor ``i``, with the other loops closed,
``L_i(s) = K_i (sI - A + B_{-i} K_{-i})^{-1} B_i``; gain margin ``1 / |L_i|`` where the phase
crosses -180 deg, phase margin ``180 deg + arg L_i`` where ``|L_i| = 1``.

Gains for the flight controller: ``K`` continuous, and the discrete LQR of the zero-order-hold
discretisation at the loop rate (``scipy.signal.cont2discrete``; discrete Riccati equation).

References
----------
K. Ogata, Modern Control Engineering, 5th ed., ch. 5 (Routh-Hurwitz stability criterion) and
ch. 7 (gain and phase margins) (from memory). G. F. Franklin, J. D. Powell, M. Workman,
Digital Control of Dynamic Systems, 3rd ed., sec. 4.3 (zero-order-hold equivalent) and
sec. 9.3 (discrete LQR) (from memory).
Anderson & Moore, Optimal Control: Linear Quadratic Methods, 1990, ch. 3 (from memory).
Zhou, Doyle & Glover, Robust and Optimal Control, 1996, sec. 4.4 (H2 norm via the
controllability Gramian; from memory). R. Eising, "Between controllable and uncontrollable",
Systems & Control Letters 4 (1984) (from memory). Hautus, PBH test (from memory).
"""

from __future__ import annotations

import dataclasses
import functools
import math
from dataclasses import dataclass

import numpy as np
import scipy.linalg as sla
from scipy.optimize import brentq
from scipy.signal import cont2discrete

from kit.analysis.equilibrium import Equilibrium
from kit.analysis.vehicle import Vehicle

STATE_NAMES = ("p", "q", "n_x", "n_y")
#: Unit of each gain column: thrust (N) per state unit.
STATE_GAIN_UNITS = {"p": "N s/rad", "q": "N s/rad", "n_x": "N", "n_y": "N"}
#: Largest motor time constant the lag-margin search looks at, s.
LAG_SEARCH_MAX_S = 10.0
#: Relative distance to uncontrollability below which a case counts as uncontrollable.
CONTROLLABILITY_TOL = 1e-6


@dataclass(frozen=True, repr=False)
class LinearControl:
    """Reduced model, controllability and LQR at one equilibrium.

    Attributes
    ----------
    A : ndarray (4, 4)
    B : ndarray (4, k)
        Columns are the working rotors, in file order (``inputs``).
    Bd : ndarray (4, 2)
        Body torques about x_B, y_B (N m) into the state.
    controllable : bool
    controllability_rank : int
    controllability_distance : float
        Relative distance to uncontrollability (0: uncontrollable).
    K : ndarray (k, 4) or None
        LQR gain, ``u = -K x``; None when not stabilisable.
    closed_loop_poles : ndarray (4,) complex or None
    h2_norm : float
        From torques about x_B, y_B to (n_x, n_y), in rad/(N m) per sqrt(Hz); nan when no K.
    """

    inputs: tuple[str, ...]
    A: np.ndarray
    B: np.ndarray
    Bd: np.ndarray
    Q: np.ndarray
    R: np.ndarray
    controllable: bool
    controllability_rank: int
    controllability_distance: float
    K: np.ndarray | None
    closed_loop_poles: np.ndarray | None
    h2_norm: float
    note: str = ""
    state_names: tuple[str, ...] = STATE_NAMES
    motor_time_constant_s: np.ndarray | None = None
    A4: np.ndarray | None = None
    B4: np.ndarray | None = None
    robustness: Robustness | None = None

    def __repr__(self) -> str:
        state = "controllable" if self.controllable else "not controllable"
        stab = "LQR stable" if self.stable else "no stabilising LQR"
        return (f"<LinearControl: {state} (controllability distance "
                f"{self.controllability_distance:.3g}), {stab}, H2 {self.h2_norm:.4g}>")

    @property
    def open_loop_poles(self) -> np.ndarray:
        return np.linalg.eigvals(self.A)

    @property
    def stable(self) -> bool:
        return self.closed_loop_poles is not None and bool(
            np.all(self.closed_loop_poles.real < 0))

    @property
    def n_states(self) -> int:
        return len(self.state_names)

    @property
    def has_motor_lag(self) -> bool:
        return self.n_states > 4

    @property
    def output_matrix(self) -> np.ndarray:
        """C picking ``(n_x, n_y)`` from the state."""
        C = np.zeros((2, self.n_states))
        C[0, 2] = C[1, 3] = 1.0
        return C

    @property
    def thrust_output(self) -> np.ndarray:
        """Map from the state to the working rotors' thrust deviations (None without K).

        With motor lag the thrusts are states; without, they are the commands ``-K x``.
        """
        if self.has_motor_lag:
            k = self.n_states - 4
            return np.hstack([np.zeros((k, 4)), np.eye(k)])
        return -self.K

    def to_dict(self) -> dict:
        lqr = None
        if self.K is not None:
            lqr = {
                "Q": self.Q.tolist(),
                "R": self.R.tolist(),
                "K": self.K.tolist(),
                "closed_loop_poles": [[float(p.real), float(p.imag)]
                                      for p in self.closed_loop_poles],
            }
        return {
            "reduced_model": {"state": list(self.state_names), "inputs": list(self.inputs),
                              "A": self.A.tolist(), "B": self.B.tolist()},
            "controllable": self.controllable,
            "controllability_rank": self.controllability_rank,
            "controllability_distance": float(self.controllability_distance),
            "lqr": lqr,
            "h2_norm": None if not math.isfinite(self.h2_norm) else float(self.h2_norm),
            "note": self.note,
            "robustness": None if self.robustness is None else self.robustness.to_dict(),
        }

    def _repr_html_(self) -> str:
        from kit.analysis.htmltable import control_html

        extra = "" if self.robustness is None else self.robustness._repr_html_()
        return control_html(self) + extra


def reduced_model(veh: Vehicle, eq: Equilibrium) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """A (4x4), B (4xk, working rotors) and Bd (4x2) at an equilibrium."""
    w = eq.omega_bar_rad_s
    xr = np.array([w[0], w[1], w[2], eq.n_bar[0], eq.n_bar[1]])
    A, B = veh.model.reduced_AB(xr, eq.thrust_n, veh.par)
    B = B[:, eq.working]
    Jinv = veh.inertia_inv
    Bd = np.zeros((4, 2))
    Bd[:2, :] = Jinv[:2, :2]
    return np.asarray(A, float), np.asarray(B, float), Bd


def lqr(A, B, Q, R) -> tuple[np.ndarray, np.ndarray]:
    """Continuous LQR gain K (u = -K x) and the Riccati solution P (scipy's CARE solver)."""
    P = sla.solve_continuous_are(A, B, Q, R)
    K = np.linalg.solve(R, B.T @ P)
    return K, P


def h2_norm(A, B, C) -> float:
    """H2 norm of (A, B, C, 0) through the controllability Gramian; inf when A is not stable."""
    if np.any(np.linalg.eigvals(A).real >= 0):
        return math.inf
    W = sla.solve_continuous_lyapunov(A, -B @ B.T)
    return float(math.sqrt(max(np.trace(C @ W @ C.T), 0.0)))


def _scales(veh: Vehicle, eq: Equilibrium) -> tuple[np.ndarray, np.ndarray]:
    """State and input scales: rates by 1 rad/s (or the spin rate), n by 1, thrust by m g / k."""
    k = int(eq.working.sum())
    rate = max(1.0, abs(eq.spin_rate_rad_s))
    return np.array([rate, rate, 1.0, 1.0]), np.full(k, veh.weight_n / k)


def _balance(A, B) -> tuple[np.ndarray, np.ndarray]:
    """A diagonal similarity of the states (and a diagonal scaling of the inputs) that evens
    the row and column norms of ``[[A, B], [0, 0]]`` (LAPACK's balancing, powers of 2).

    Rank and the PBH test are invariant under it; the distance to uncontrollability, relative
    to ``||[A, B]||``, then no longer depends on the units of the states (a needle-like body
    with one tiny moment of inertia has rows 10^5 apart otherwise).
    """
    n, k = B.shape
    M = np.zeros((n + k, n + k))
    M[:n, :n] = A
    M[:n, n:] = B
    if not np.all(np.isfinite(M)) or not np.any(M):
        return A, B
    _, _, _, scale, info = sla.lapack.dgebal(M, scale=1, permute=0)
    if info != 0 or not np.all(np.isfinite(scale)) or np.any(scale <= 0):
        return A, B
    sx, su = scale[:n], scale[n:]
    return A * sx[None, :] / sx[:, None], B * su[None, :] / sx[:, None]


def _pbh_minimum(A, B, starts, span) -> float:
    """Smallest ``sigma_min([A - lam I, B])`` near each start (complex ``lam = x + i y``).

    ``sigma_min^2 = f(lam)``, the least eigenvalue of the Hermitian
    ``H = (A - lam I)(A - lam I)^H + B B^H``, with the gradient of a simple eigenvalue
    ``(df/dx, df/dy) = (-2 Re u^H M u, -2 Im u^H M u)`` (``M = A - lam I``, ``u`` its
    eigenvector) and the Hessian by differences of the gradient: damped Newton steps, every
    start in one batched ``eigh`` per evaluation.
    """
    n = A.shape[0]
    eye = np.eye(n)
    BB = B @ B.T

    def f_grad(lam):
        M = A[None] - lam[:, None, None] * eye
        H = M @ np.conj(np.swapaxes(M, -1, -2)) + BB
        w, V = np.linalg.eigh(H)
        u = V[..., 0]
        q = np.einsum("mi,mij,mj->m", np.conj(u), M, u)
        return w[:, 0], np.stack([-2 * q.real, -2 * q.imag], axis=1)

    lam = np.asarray(starts, complex)
    f, g = f_grad(lam)
    best = f.copy()
    h = 1e-6 * span
    for _ in range(12):
        # both differences in one batched evaluation
        _, gxy = f_grad(np.concatenate((lam + h, lam + 1j * h)))
        gx, gy = gxy[:lam.size], gxy[lam.size:]
        Hs = np.stack([(gx - g) / h, (gy - g) / h], axis=2)
        Hs = 0.5 * (Hs + np.swapaxes(Hs, 1, 2))
        step = np.empty_like(g)
        convex = np.linalg.eigvalsh(Hs)[:, 0] > 0
        if np.any(convex):
            step[convex] = -np.linalg.solve(Hs[convex], g[convex][..., None])[..., 0]
        for m in np.flatnonzero(~convex):  # not convex here: a gradient step of the span's size
            step[m] = -g[m] / max(float(np.linalg.norm(g[m])), 1e-300) * 0.1 * span
        dl = step[:, 0] + 1j * step[:, 1]
        t = np.ones(lam.size)
        for _ in range(6):
            cand = lam + t * dl
            cand = cand.real + 1j * np.abs(cand.imag)  # conj(lam): the same value
            fn, gn = f_grad(cand)
            worse = fn > f
            if not np.any(worse):
                break
            t = np.where(worse, t / 4, t)
        ok = fn <= f
        if not np.any(ok & (fn < f - 1e-15 * np.maximum(f, 1e-300))):
            break  # no start improves: converged to rounding
        lam = np.where(ok, cand, lam)
        f = np.where(ok, fn, f)
        g = np.where(ok[:, None], gn, g)
        best = np.minimum(best, f)
        if np.all(np.abs(t * dl) <= 1e-10 * span) or np.all(np.linalg.norm(g, axis=1) <= 1e-14 * (
                span * span)):
            break
    return float(math.sqrt(max(float(np.min(best)), 0.0)))


def controllability(A, B) -> tuple[int, float]:
    """Rank of the controllability matrix and relative distance to uncontrollability.

    Both on the balanced system (:func:`_balance`), so the verdict does not depend on the
    units or the size of the states: scaling the inertia by 10^k leaves it unchanged.
    """
    A, B = _balance(np.asarray(A, float), np.asarray(B, float))
    n = A.shape[0]
    # Krylov blocks of A / ||A|| (a change of time scale): the blocks stay of one size
    a_norm = float(np.linalg.norm(A, 2))
    At = A / a_norm if a_norm > 0 else A
    blocks = [B]
    for _ in range(n - 1):
        blocks.append(At @ blocks[-1])
    C = np.hstack(blocks)
    s = np.linalg.svd(C, compute_uv=False)
    rank = int(np.sum(s > s[0] * 1e-9)) if s[0] > 0 else 0
    norm = np.linalg.norm(np.hstack([A, B]), 2)
    if norm == 0:
        return 0, 0.0
    # the minimum lies near an eigenvalue of A (where A - lam I loses rank); search from the
    # eigenvalues in the upper half-plane, conj(lam) giving the same value
    eigs = np.linalg.eigvals(A)
    starts: list[complex] = []
    for lam in eigs[eigs.imag >= -1e-12 * norm]:
        if all(abs(lam - s) > 1e-9 * norm for s in starts):
            starts.append(complex(lam.real, abs(lam.imag)))
    span = 0.25 * max(norm, float(np.max(np.abs(eigs))))
    best = _pbh_minimum(A, B, starts, span)
    return rank, best / norm


def motor_time_constants(veh: Vehicle, eq: Equilibrium) -> np.ndarray:
    """Motor time constants of the working rotors, in s (file order)."""
    return np.array([r.motor_time_constant_s for r in veh.design.rotors])[eq.working]


def augmented_model(veh: Vehicle, eq: Equilibrium,
                    tau_s: np.ndarray | None = None) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """A, B, Bd of the reduced model with first-order motor lag on the working rotors.

    Parameters
    ----------
    veh : Vehicle
        The vehicle.
    eq : Equilibrium
        Operating point.
    tau_s : ndarray (k,) or None
        Motor time constants of the working rotors, in s (None: the design's). With every one
        0 the four-state model of :func:`reduced_model` is returned.
    """
    tau = motor_time_constants(veh, eq) if tau_s is None else np.asarray(tau_s, float)
    A, B, Bd = reduced_model(veh, eq)
    if not np.any(tau > 0):
        return A, B, Bd
    if not np.all(tau > 0):
        raise ValueError("motor_time_constant_s: every working rotor needs a lag > 0 once one "
                         "has one (or set them all to 0)")
    w = eq.omega_bar_rad_s
    xr = np.array([w[0], w[1], w[2], eq.n_bar[0], eq.n_bar[1]])
    lam = np.ones(eq.working.size)
    lam[eq.working] = 1.0 / tau
    Aa, Ba = veh.model.augmented_AB(xr, eq.thrust_n, lam, veh.par)
    idx = np.r_[np.arange(4), 4 + np.flatnonzero(eq.working)]
    Aa = np.asarray(Aa, float)[np.ix_(idx, idx)]
    Ba = np.asarray(Ba, float)[idx][:, eq.working]
    return Aa, Ba, np.vstack([Bd, np.zeros((tau.size, 2))])


def _is_stable(M: np.ndarray) -> bool:
    return bool(np.all(np.linalg.eigvals(M).real < 0))


def lag_closed_loop(A: np.ndarray, B: np.ndarray, Kx: np.ndarray, Kf: np.ndarray | None,
                    tau_s: float) -> np.ndarray:
    """Closed-loop matrix of ``x' = A x + B f``, ``tau f' = -Kx x - (I + Kf) f`` (``tau >= 0``).

    Parameters
    ----------
    A, B : ndarray
        Four-state (or any) plant without motor lag.
    Kx : ndarray (k, n)
        Gain on the plant state.
    Kf : ndarray (k, k) or None
        Gain on the thrust states (None: 0).
    tau_s : float
        Motor time constant common to every input, in s; 0 closes ``f = -(I + Kf)^-1 Kx x``.
    """
    k = B.shape[1]
    Kf = np.zeros((k, k)) if Kf is None else Kf
    if tau_s <= 0:
        return A - B @ np.linalg.solve(np.eye(k) + Kf, Kx)
    return _lag_closed_loops(A, B, Kx, Kf, np.array([tau_s], float))[0]


def _lag_closed_loops(A, B, Kx, Kf, taus) -> np.ndarray:
    """:func:`lag_closed_loop` at every ``tau > 0`` of ``taus``, stacked (the same entries)."""
    n, k = B.shape
    t = taus[:, None, None]
    M = np.empty((taus.size, n + k, n + k))
    M[:, :n, :n] = A
    M[:, :n, n:] = B
    M[:, n:, :n] = -Kx / t
    M[:, n:, n:] = -(np.eye(k) + Kf) / t
    return M


def lag_margin(A: np.ndarray, B: np.ndarray, Kx: np.ndarray, Kf: np.ndarray | None = None,
               tau_max_s: float = LAG_SEARCH_MAX_S, rtol: float = 1e-6) -> float:
    """Largest common motor time constant with a stable loop, in s (inf beyond ``tau_max_s``).

    One-dimensional search: a geometric scan from 1e-5 s to ``tau_max_s``, then bisection
    (:func:`scipy.optimize.brentq` on the largest real part) at the first stable-to-unstable
    step. 0 when the loop is unstable without lag.

    Parameters
    ----------
    A, B : ndarray
        Plant without motor lag.
    Kx, Kf : ndarray
        Gains as in :func:`lag_closed_loop`.
    tau_max_s : float
        End of the search, in s.
    rtol : float
        Relative tolerance of the bisection.
    """
    def growth(tau):
        return float(np.max(np.linalg.eigvals(lag_closed_loop(A, B, Kx, Kf, tau)).real))

    if growth(0.0) >= 0:
        return 0.0
    grid = np.r_[0.0, np.geomspace(1e-5, tau_max_s, 80)]
    # the scan's closed loops in batched eigenvalue calls (LAPACK per matrix, as one by one),
    # a block of the grid at a time up to the first unstable point
    k = B.shape[1]
    Kf0 = np.zeros((k, k)) if Kf is None else Kf
    for start in range(1, grid.size, _LAG_SCAN_BLOCK):
        taus = grid[start:start + _LAG_SCAN_BLOCK]
        growths = np.max(np.linalg.eigvals(_lag_closed_loops(A, B, Kx, Kf0, taus)).real,
                         axis=1)
        unstable = np.flatnonzero(growths >= 0)
        if unstable.size:
            j = start + int(unstable[0])
            return float(brentq(growth, grid[j - 1], grid[j], rtol=rtol, xtol=1e-12))
    return math.inf


#: Grid points of the lag-margin scan per batched eigenvalue call.
_LAG_SCAN_BLOCK = 16


def _freq_response(A, B, C, w):
    """``C (j w I - A)^-1 B`` for scalar input and output, at the frequencies ``w`` (rad/s)."""
    return _freq_response_fn(A, B, C)(w)


def _freq_response_fn(A, B, C):
    """:func:`_freq_response` of one system as a function of ``w``: the modal decomposition
    (or the fallback's matrices) computed once, for the many evaluations of a root search."""
    lam, V = np.linalg.eig(A)
    if np.linalg.cond(V) < 1e8:
        cb = (C @ V).ravel() * np.linalg.solve(V, B).ravel()

        def modal(w):
            return (cb[None, :] / (1j * w[:, None] - lam[None, :])).sum(axis=1)

        return modal
    n = A.shape[0]

    def direct(w):
        return np.array([(C @ np.linalg.solve(1j * x * np.eye(n) - A, B)).item() for x in w])

    return direct


def channel_margins(A: np.ndarray, B: np.ndarray, K: np.ndarray,
                    w_min: float = 1e-3, w_max: float = 1e5,
                    points: int = 3000) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """Loop-at-the-input gain and phase margins of each input channel, others closed.

    Parameters
    ----------
    A, B, K : ndarray
        Plant and state-feedback gain (``u = -K x``).
    w_min, w_max : float
        Frequency range searched, in rad/s.
    points : int
        Grid points before the crossings are refined with :func:`scipy.optimize.brentq`.

    Returns
    -------
    gain_margin, phase_margin_deg, phase_crossover_rad_s, gain_crossover_rad_s : ndarray (k,)
        Gain margin as a factor (inf: no phase crossover), phase margin in deg (inf: no gain
        crossover), and the frequencies where they are read, in rad/s (nan when absent). With
        several crossings, the smallest margin is kept.
    """
    k = B.shape[1]
    gm = np.full(k, math.inf)
    pm = np.full(k, math.inf)
    wpc = np.full(k, math.nan)
    wgc = np.full(k, math.nan)
    w = _frequency_grid(w_min, w_max, points)
    for i in range(k):
        others = [j for j in range(k) if j != i]
        Ai = A - B[:, others] @ K[others]
        Bi, Ci = B[:, [i]], K[[i]]

        resp = _freq_response_fn(Ai, Bi, Ci)

        def L(x, resp=resp):
            return resp(np.atleast_1d(x))

        Lw = L(w)
        mag = np.abs(Lw) - 1.0
        for a in np.flatnonzero(np.sign(mag[:-1]) * np.sign(mag[1:]) < 0):
            x = brentq(lambda v: abs(L(v)[0]) - 1.0, w[a], w[a + 1], xtol=1e-12, rtol=1e-12)
            margin = 180.0 + math.degrees(np.angle(L(x)[0]))
            margin = (margin + 180.0) % 360.0 - 180.0
            if abs(margin) < abs(pm[i]):
                pm[i], wgc[i] = margin, x
        im = Lw.imag
        for a in np.flatnonzero(np.sign(im[:-1]) * np.sign(im[1:]) < 0):
            x = brentq(lambda v: L(v)[0].imag, w[a], w[a + 1], xtol=1e-12, rtol=1e-12)
            Lx = L(x)[0]
            if Lx.real < 0:
                g = 1.0 / abs(Lx.real)
                if abs(math.log(g)) < abs(math.log(gm[i])):
                    gm[i], wpc[i] = g, x
    return gm, pm, wpc, wgc


@functools.lru_cache(maxsize=8)
def _frequency_grid(w_min: float, w_max: float, points: int) -> np.ndarray:
    w = np.geomspace(w_min, w_max, points)
    w.setflags(write=False)
    return w


@dataclass(frozen=True, repr=False)
class Robustness:
    """Robustness figures of one closed loop.

    Attributes
    ----------
    damping_ratio : float
        Least damping ratio ``-Re(s) / |s|`` over the closed-loop poles.
    slowest_decay_rate_1_s : float
        ``-Re(s)`` of the slowest pole, in 1/s.
    slowest_damping_ratio : float
        Damping ratio of that pole.
    lag_margin_s : float
        Largest common motor time constant with a stable loop, in s (inf: none found up to
        :data:`LAG_SEARCH_MAX_S`).
    inputs : tuple of str
        Rotor channels of the margins.
    gain_margin, phase_margin_deg : ndarray (k,)
        Loop-at-the-input margins per rotor channel (factor; deg), inf when no crossover.
    gain_margin_db : ndarray (k,)
        ``20 log10(gain_margin)``.
    """

    damping_ratio: float
    slowest_decay_rate_1_s: float
    slowest_damping_ratio: float
    lag_margin_s: float
    inputs: tuple[str, ...]
    gain_margin: np.ndarray
    phase_margin_deg: np.ndarray
    phase_crossover_rad_s: np.ndarray
    gain_crossover_rad_s: np.ndarray

    @property
    def gain_margin_db(self) -> np.ndarray:
        with np.errstate(divide="ignore"):
            return 20.0 * np.log10(self.gain_margin)

    def to_dict(self) -> dict:
        def f(v):
            v = float(v)
            return v if math.isfinite(v) else None

        return {
            "damping_ratio": f(self.damping_ratio),
            "slowest_decay_rate_1_s": f(self.slowest_decay_rate_1_s),
            "slowest_damping_ratio": f(self.slowest_damping_ratio),
            "lag_margin_s": f(self.lag_margin_s),
            "channel_margins": [
                {"rotor": n, "gain_margin": f(g), "gain_margin_db": f(gd),
                 "phase_margin_deg": f(p), "phase_crossover_rad_s": f(a),
                 "gain_crossover_rad_s": f(b)}
                for n, g, gd, p, a, b in zip(self.inputs, self.gain_margin, self.gain_margin_db,
                                             self.phase_margin_deg, self.phase_crossover_rad_s,
                                             self.gain_crossover_rad_s, strict=True)],
        }

    def _repr_html_(self) -> str:
        from kit.analysis.htmltable import table

        rows = [("least damping ratio", self.damping_ratio),
                ("slowest pole decay rate (1/s)", self.slowest_decay_rate_1_s),
                ("slowest pole damping ratio", self.slowest_damping_ratio),
                ("lag margin (s)", self.lag_margin_s if math.isfinite(self.lag_margin_s)
                 else f"> {LAG_SEARCH_MAX_S:g}")]
        t = table(["figure", "value"], rows, "Robustness")
        ch = [(n, g if math.isfinite(g) else "none", p if math.isfinite(p) else "none")
              for n, g, p in zip(self.inputs, self.gain_margin_db, self.phase_margin_deg,
                                 strict=True)]
        return t + table(["rotor", "gain margin (dB)", "phase margin (deg)"], ch,
                         "Loop-at-the-input margins (other rotors closed)")


def robustness(ctl: LinearControl) -> Robustness | None:
    """Damping, slowest decay, lag margin and channel margins of a designed loop.

    Parameters
    ----------
    ctl : LinearControl
        A loop with a stabilising K (None otherwise).
    """
    if ctl.K is None or ctl.closed_loop_poles is None:
        return None
    poles = ctl.closed_loop_poles
    zeta = -poles.real / np.maximum(np.abs(poles), 1e-300)
    slow = int(np.argmin(-poles.real))
    A4, B4 = ctl.A4, ctl.B4
    Kx = ctl.K[:, :4]
    Kf = ctl.K[:, 4:] if ctl.has_motor_lag else None
    margin = lag_margin(A4, B4, Kx, Kf)
    gm, pm, wpc, wgc = channel_margins(ctl.A, ctl.B, ctl.K)
    return Robustness(float(zeta.min()), float(-poles[slow].real), float(zeta[slow]),
                      float(margin), ctl.inputs, gm, pm, wpc, wgc)


@dataclass(frozen=True, repr=False)
class Gains:
    """The LQR gain of one case, for a flight controller.

    ``f_cmd = f_bar - K (x - x_bar)`` with ``x`` in :attr:`state_names` order (deviations from the
    operating point) and ``f_cmd`` in :attr:`inputs` order; discrete: the same law applied at
    :attr:`loop_rate_hz` with ``K_discrete``.
    """

    case: str
    state_names: tuple[str, ...]
    state_units: tuple[str, ...]
    gain_units: tuple[str, ...]
    inputs: tuple[str, ...]
    K: np.ndarray
    K_discrete: np.ndarray
    loop_rate_hz: float
    discrete_spectral_radius: float
    omega_bar_rad_s: np.ndarray
    n_bar: np.ndarray
    thrust_n: dict
    spin_rate_rad_s: float
    motor_time_constant_s: dict

    def to_dict(self) -> dict:
        return {
            "case": self.case,
            "law": "f_cmd = f_bar - K (x - x_bar); state deviations in state order, commanded "
                   "thrusts in input order",
            "state": list(self.state_names),
            "state_units": list(self.state_units),
            "gain_units": list(self.gain_units),
            "inputs": list(self.inputs),
            "K": self.K.tolist(),
            "discrete": {"method": "zero-order hold (scipy.signal.cont2discrete), discrete LQR",
                         "loop_rate_hz": float(self.loop_rate_hz),
                         "sample_time_s": 1.0 / float(self.loop_rate_hz),
                         "K": self.K_discrete.tolist(),
                         "closed_loop_spectral_radius": float(self.discrete_spectral_radius)},
            "operating_point": {
                "omega_bar_rad_s": [float(v) for v in self.omega_bar_rad_s],
                "n_bar": [float(v) for v in self.n_bar],
                "thrust_n": {k: float(v) for k, v in self.thrust_n.items()},
                "spin_rate_rad_s": float(self.spin_rate_rad_s),
                "yaw_rate_held_rad_s": float(self.omega_bar_rad_s[2]),
            },
            "motor_time_constant_s": {k: float(v) for k, v in self.motor_time_constant_s.items()},
        }

    def _repr_html_(self) -> str:
        from kit.analysis.htmltable import table

        head = ["rotor"] + [f"{s} ({u})" for s, u in zip(self.state_names, self.gain_units,
                                                          strict=True)]
        rows = [(n, *row) for n, row in zip(self.inputs, self.K, strict=True)]
        rows_d = [(n, *row) for n, row in zip(self.inputs, self.K_discrete, strict=True)]
        return (table(head, rows, f"LQR gain K, {self.case} (continuous)")
                + table(head, rows_d, f"LQR gain K at {self.loop_rate_hz:g} Hz (zero-order "
                                      "hold)"))


def discrete_gain(A: np.ndarray, B: np.ndarray, Q: np.ndarray, R: np.ndarray,
                  rate_hz: float) -> tuple[np.ndarray, float]:
    """Discrete LQR gain of the zero-order-hold discretisation, and its closed-loop radius.

    Parameters
    ----------
    A, B : ndarray
        Continuous plant.
    Q, R : ndarray
        Continuous weights (the discrete cost sums the same weights at each sample).
    rate_hz : float
        Loop rate, in Hz.
    """
    n, k = B.shape
    Ad, Bd, *_ = cont2discrete((A, B, np.eye(n), np.zeros((n, k))), 1.0 / rate_hz,
                               method="zoh")
    P = sla.solve_discrete_are(Ad, Bd, Q, R)
    Kd = np.linalg.solve(R + Bd.T @ P @ Bd, Bd.T @ P @ Ad)
    rho = float(np.max(np.abs(np.linalg.eigvals(Ad - Bd @ Kd))))
    return Kd, rho


def gains(veh: Vehicle, eq: Equilibrium, ctl: LinearControl) -> Gains | None:
    """Gains of one case for the flight-control team (None without a stabilising K).

    Parameters
    ----------
    veh : Vehicle
        The vehicle (loop rate, motor lags).
    eq : Equilibrium
        The operating point.
    ctl : LinearControl
        Its designed loop.
    """
    if ctl.K is None:
        return None
    units = ["rad/s", "rad/s", "1", "1"] + ["N"] * (ctl.n_states - 4)
    gunits = [STATE_GAIN_UNITS[s] for s in STATE_NAMES] + ["N/N"] * (ctl.n_states - 4)
    rate = veh.design.control.loop_rate_hz
    Kd, rho = discrete_gain(ctl.A, ctl.B, ctl.Q, ctl.R, rate)
    taus = motor_time_constants(veh, eq)
    return Gains(
        case=eq.label, state_names=ctl.state_names, state_units=tuple(units),
        gain_units=tuple(gunits), inputs=ctl.inputs, K=ctl.K, K_discrete=Kd,
        loop_rate_hz=rate, discrete_spectral_radius=rho,
        omega_bar_rad_s=np.asarray(eq.omega_bar_rad_s, float), n_bar=np.asarray(eq.n_bar, float),
        thrust_n={n: float(f) for n, f in zip(ctl.inputs, eq.thrust_n[eq.working], strict=True)},
        spin_rate_rad_s=float(eq.spin_rate_rad_s),
        motor_time_constant_s={n: float(t) for n, t in zip(ctl.inputs, taus, strict=True)})


def design_control(veh: Vehicle, eq: Equilibrium, tau_s: np.ndarray | None = None,
                   with_robustness: bool = True) -> LinearControl:
    """Reduced model (with motor lag when the design has it), controllability, LQR, H2 norm.

    Parameters
    ----------
    veh : Vehicle
        The vehicle.
    eq : Equilibrium
        Operating point.
    tau_s : ndarray (k,) or None
        Motor time constants of the working rotors, in s (None: the design's).
    with_robustness : bool
        Compute :class:`Robustness` (lag margin, channel margins); sweeps may skip it.
    """
    c = veh.design.control
    inputs = tuple(n for n, w in zip(veh.names, eq.working, strict=True) if w)
    k = len(inputs)
    tau = motor_time_constants(veh, eq) if tau_s is None else np.asarray(tau_s, float)
    lagged = bool(np.any(tau > 0))
    names = STATE_NAMES + (tuple(f"f_{n}" for n in inputs) if lagged else ())
    ns = len(names)
    Q = np.zeros((ns, ns))
    Q[:4, :4] = np.diag([c.weight_rate, c.weight_rate, c.weight_attitude, c.weight_attitude])
    R = c.weight_thrust * np.eye(k)
    extra = {"state_names": names, "motor_time_constant_s": tau}
    if not eq.found:
        nan = np.full((ns, ns), np.nan)
        return LinearControl(inputs, nan, np.full((ns, k), np.nan), np.zeros((ns, 2)), Q, R,
                             False, 0, 0.0, None, None, math.nan, "no equilibrium", **extra)
    A4, B4, Bd4 = reduced_model(veh, eq)
    # without motor lag the augmented model is the reduced one (not evaluated twice)
    A, B, Bd = augmented_model(veh, eq, tau) if lagged else (A4, B4, Bd4)
    extra.update(A4=A4, B4=B4)
    if not (np.all(np.isfinite(A)) and np.all(np.isfinite(B))):
        return LinearControl(inputs, A, B, Bd, Q, R, False, 0, 0.0, None, None, math.nan,
                             "a working rotor at zero thrust: the model is not differentiable",
                             **extra)
    sx, su = _scales(veh, eq)
    if lagged:
        sx = np.r_[sx, su]
    As = A * sx[None, :] / sx[:, None]
    Bs = B * su[None, :] / sx[:, None]
    rank, dist = controllability(As, Bs)
    controllable = bool(rank == ns and dist > CONTROLLABILITY_TOL)
    note = "yaw rate r is held at its equilibrium value: the yaw channel is outside this model"
    if lagged:
        note += "; motor lag in the model, thrusts measured (rotor speed)"
    try:
        K, _ = lqr(A, B, Q, R)
        poles = np.linalg.eigvals(A - B @ K)
        if not np.all(poles.real < 0):
            raise np.linalg.LinAlgError("closed loop not stable")
    except (np.linalg.LinAlgError, ValueError):
        return LinearControl(inputs, A, B, Bd, Q, R, controllable, rank, dist, None, None,
                             math.nan, "not stabilisable: " + note, **extra)
    poles = poles[np.lexsort((poles.imag, poles.real))]
    C = np.zeros((2, ns))
    C[0, 2] = C[1, 3] = 1.0
    h2 = h2_norm(A - B @ K, Bd, C)
    out = LinearControl(inputs, A, B, Bd, Q, R, controllable, rank, float(dist), K, poles, h2,
                        note, **extra)
    return dataclasses.replace(out, robustness=robustness(out)) if with_robustness else out
