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
``||[A, B]||``, minimised by BFGS with the analytic gradient of a simple singular value
started at each eigenvalue of ``A``. H2 norm from body torques about x_B, y_B to ``(n_x, n_y)``:

.. math::

    \|G\|_2^2 = \operatorname{tr}(C W C^{\mathsf T}), \qquad A_{cl} W + W A_{cl}^{\mathsf T}
    + B_d B_d^{\mathsf T} = 0 .

References
----------
Anderson & Moore, Optimal Control: Linear Quadratic Methods, 1990, ch. 3 (from memory).
Zhou, Doyle & Glover, Robust and Optimal Control, 1996, sec. 4.4 (H2 norm via the
controllability Gramian; from memory). R. Eising, "Between controllable and uncontrollable",
Systems & Control Letters 4 (1984) (from memory). Hautus, PBH test (from memory).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import scipy.linalg as sla
from scipy.optimize import minimize

from kit.analysis.equilibrium import Equilibrium
from kit.analysis.vehicle import Vehicle

STATE_NAMES = ("p", "q", "n_x", "n_y")
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
            "reduced_model": {"state": list(STATE_NAMES), "inputs": list(self.inputs),
                              "A": self.A.tolist(), "B": self.B.tolist()},
            "controllable": self.controllable,
            "controllability_rank": self.controllability_rank,
            "controllability_distance": float(self.controllability_distance),
            "lqr": lqr,
            "h2_norm": None if not math.isfinite(self.h2_norm) else float(self.h2_norm),
            "note": self.note,
        }

    def _repr_html_(self) -> str:
        from kit.analysis.htmltable import control_html

        return control_html(self)


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


def controllability(A, B) -> tuple[int, float]:
    """Rank of the controllability matrix and relative distance to uncontrollability."""
    n = A.shape[0]
    C = np.hstack([np.linalg.matrix_power(A, i) @ B for i in range(n)])
    s = np.linalg.svd(C, compute_uv=False)
    rank = int(np.sum(s > s[0] * 1e-9)) if s[0] > 0 else 0
    norm = np.linalg.norm(np.hstack([A, B]), 2)
    if norm == 0:
        return 0, 0.0

    def smin(z):
        """sigma_min([A - lam I, B]) and its gradient in (Re lam, Im lam)."""
        lam = complex(z[0], z[1])
        M = np.hstack([A - lam * np.eye(n), B])
        U, S, Vh = np.linalg.svd(M, full_matrices=False)
        u, v = U[:, -1], Vh[-1].conj()[:n]
        # d sigma = Re(u^H dM v) for a simple singular value; dM/d(Re lam) = [-I, 0],
        # dM/d(Im lam) = [-i I, 0]
        g = u.conj() @ v
        return float(S[-1]), np.array([-g.real, g.imag])

    best = math.inf
    # sigma_min([A - lam I, B]) is the same at lam and conj(lam) for real A, B: search from the
    # eigenvalues in the upper half-plane only
    eigs = np.linalg.eigvals(A)
    starts = []
    for lam in eigs[eigs.imag >= -1e-12 * norm]:
        if all(abs(lam - s) > 1e-9 * norm for s in starts):
            starts.append(lam)
    for lam in starts:
        z0 = np.array([lam.real, abs(lam.imag)])
        res = minimize(smin, z0, jac=True, method="BFGS", options={"gtol": 1e-9 * norm,
                                                                   "maxiter": 40})
        best = min(best, smin(z0)[0], float(res.fun))
    return rank, best / norm


def design_control(veh: Vehicle, eq: Equilibrium) -> LinearControl:
    """Reduced model, controllability, LQR and H2 norm at an equilibrium."""
    c = veh.design.control
    inputs = tuple(n for n, w in zip(veh.names, eq.working, strict=True) if w)
    k = len(inputs)
    Q = np.diag([c.weight_rate, c.weight_rate, c.weight_attitude, c.weight_attitude])
    R = c.weight_thrust * np.eye(k)
    if not eq.found:
        nan = np.full((4, 4), np.nan)
        return LinearControl(inputs, nan, np.full((4, k), np.nan), np.zeros((4, 2)), Q, R,
                             False, 0, 0.0, None, None, math.nan, "no equilibrium")
    A, B, Bd = reduced_model(veh, eq)
    if not (np.all(np.isfinite(A)) and np.all(np.isfinite(B))):
        return LinearControl(inputs, A, B, Bd, Q, R, False, 0, 0.0, None, None, math.nan,
                             "a working rotor at zero thrust: the model is not differentiable")
    sx, su = _scales(veh, eq)
    As = A * sx[None, :] / sx[:, None]
    Bs = B * su[None, :] / sx[:, None]
    rank, dist = controllability(As, Bs)
    controllable = bool(rank == 4 and dist > CONTROLLABILITY_TOL)
    note = "yaw rate r is held at its equilibrium value: the yaw channel is outside this model"
    try:
        K, _ = lqr(A, B, Q, R)
        poles = np.linalg.eigvals(A - B @ K)
        if not np.all(poles.real < 0):
            raise np.linalg.LinAlgError("closed loop not stable")
    except (np.linalg.LinAlgError, ValueError):
        return LinearControl(inputs, A, B, Bd, Q, R, controllable, rank, dist, None, None,
                             math.nan, "not stabilisable: " + note)
    poles = poles[np.lexsort((poles.imag, poles.real))]
    C = np.zeros((2, 4))
    C[0, 2] = C[1, 3] = 1.0
    h2 = h2_norm(A - B @ K, Bd, C)
    return LinearControl(inputs, A, B, Bd, Q, R, controllable, rank, float(dist), K, poles, h2,
                         note)
