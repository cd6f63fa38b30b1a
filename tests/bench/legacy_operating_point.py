"""The operating-point search and controllability distance as they were before the structured
solver (multi-start SLSQP from a few starts with continuation hints; BFGS from each eigenvalue),
kept callable so that ``make bench`` measures the new code against it in one run.

Not part of the kit; the benchmark imports it by path.
"""

from __future__ import annotations

import math
import warnings

import numpy as np
from scipy.optimize import OptimizeWarning, minimize

from kit.analysis.equilibrium import MAX_SPIN_RAD_S, MAX_TILT_RAD, RESIDUAL_TOL, _make
from kit.analysis.vehicle import Vehicle


class _Problem:
    """The scaled equations for one vehicle and failure set."""

    def __init__(self, veh: Vehicle, failed) -> None:
        self.veh = veh
        self.model = veh.model
        self.work = veh.working_mask(failed)
        self.idx = np.flatnonzero(self.work)
        self.k = len(self.idx)
        self.mg = veh.weight_n
        self.f_s = self.mg / max(self.k, 1)
        self.w_s = 10.0
        self.scale = np.array([1 / (self.mg * veh.arm_m)] * 3 + [1 / self.mg])
        self.par = veh.par
        self.cols = np.r_[0, 1, 2, 3 + self.idx]

    def full_z(self, v: np.ndarray) -> np.ndarray:
        z = np.zeros(3 + self.veh.n)
        z[0] = v[0] * self.w_s
        z[1], z[2] = v[1], v[2]
        z[3 + self.idx] = v[3:] * self.f_s
        return z

    def residual(self, v: np.ndarray) -> np.ndarray:
        return self.model.eq_residual(self.full_z(v), self.par) * self.scale

    def jacobian(self, v: np.ndarray) -> np.ndarray:
        Jz = self.model.eq_jacobian(self.full_z(v), self.par)[:, self.cols]
        Jz = Jz * np.r_[self.w_s, 1.0, 1.0, np.full(self.k, self.f_s)][None, :]
        return Jz * self.scale[:, None]


def _spin_guess(veh: Vehicle, prob: _Problem) -> float:
    """Spin-rate scale from the yaw balance kappa * m g ~ drag(w), in rad/s."""
    kappa = float(np.mean(veh.kappa[prob.idx]))
    gz = max(veh.design.aero.drag_torque_coeff[2], 1e-9)
    if veh.design.aero.drag_law == "linear":
        w = kappa * veh.weight_n / gz
    else:
        w = math.sqrt(kappa * veh.weight_n / gz)
    return float(min(max(w, 1.0), MAX_SPIN_RAD_S * 0.8))


def _polish(prob: _Problem, v: np.ndarray) -> tuple[np.ndarray, float]:
    """Newton steps on the square system with the thrust ratios of ``v`` fixed."""
    return _polish_ratio(prob, v, v[3:].copy())


def _non_spinning(prob: _Problem, veh: Vehicle) -> tuple | None:
    """The non-spinning member (w = 0, n = e_z) when one exists within the limits.

    At ``w = 0`` the residual is linear in the thrusts, so the least-effort member is the
    minimum-norm solution; it is kept when it lies within ``0 <= f <= f_max``.
    """
    v0 = np.r_[0.0, 0.0, 0.0, np.zeros(prob.k)]
    r0 = prob.residual(v0)
    v1 = np.r_[0.0, 0.0, 0.0, np.ones(prob.k)]
    Jf = prob.jacobian(v1)[:, 3:]
    if not np.all(np.isfinite(Jf)):
        return None
    f = np.linalg.lstsq(Jf, -r0, rcond=None)[0]
    v = np.r_[0.0, 0.0, 0.0, f]
    res = float(np.max(np.abs(prob.residual(v))))
    fmax = veh.max_thrust_n[prob.idx] / prob.f_s
    if res > RESIDUAL_TOL or np.any(f < 0) or np.any(f > fmax * (1 + 1e-9)):
        return None
    return float(f @ f), v, res


def _least_effort(prob: _Problem, veh: Vehicle, sense: int, starts) -> tuple | None:
    k = prob.k
    fmax = veh.max_thrust_n[prob.idx] / prob.f_s
    lo = 1e-4
    wmax = MAX_SPIN_RAD_S / prob.w_s
    wb = (0.0, wmax) if sense > 0 else (-wmax, 0.0)
    smax = math.sin(MAX_TILT_RAD)
    bounds = [wb, (-smax, smax), (-smax, smax)] + [(lo, fm) for fm in fmax]
    cons = [
        {"type": "eq", "fun": prob.residual, "jac": prob.jacobian},
        {"type": "ineq", "fun": lambda v: smax**2 - v[1] ** 2 - v[2] ** 2,
         "jac": lambda v: np.r_[0.0, -2 * v[1], -2 * v[2], np.zeros(k)]},
    ]
    best = None
    for w0, n0 in starts:
        f0 = np.clip(np.full(k, 1.0 / max(n0[2], 0.3)), lo, fmax)
        v0 = np.r_[sense * abs(w0) / prob.w_s, n0[0], n0[1], f0]
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", (RuntimeWarning, OptimizeWarning))
            sol = minimize(lambda v: float(v[3:] @ v[3:]), v0,
                           jac=lambda v: np.r_[0.0, 0.0, 0.0, 2 * v[3:]],
                           bounds=bounds, constraints=cons, method="SLSQP",
                           options={"maxiter": 100, "ftol": 1e-12})
        v = sol.x
        if not np.all(np.isfinite(v)):
            continue
        v, res = _polish(prob, v)
        if res > RESIDUAL_TOL or np.any(v[3:] < -1e-12) or np.any(v[3:] > fmax * (1 + 1e-9)):
            continue
        cost = float(v[3:] @ v[3:])
        if best is None or cost < best[0] - 1e-10:
            best = (cost, v, res)
    return best


def _fixed_ratio(prob: _Problem, veh: Vehicle, ratio: dict, sense: int, starts) -> tuple | None:
    r = np.array([ratio[veh.names[i]] for i in prob.idx], float)
    r = r / r.sum() * prob.k  # mean 1, so t ~ 1 / n_z
    fmax = veh.max_thrust_n[prob.idx] / prob.f_s
    best = None
    for w0, n0 in starts:
        v = np.r_[sense * abs(w0) / prob.w_s, n0[0], n0[1], r / max(n0[2], 0.3)]
        v, res = _polish_ratio(prob, v, r)
        if res > RESIDUAL_TOL or sense * v[0] < -1e-12:
            continue
        if v[1] ** 2 + v[2] ** 2 >= 1.0:
            continue
        if np.any(v[3:] < 0) or np.any(v[3:] > fmax * (1 + 1e-9)):
            continue
        cost = float(v[3:] @ v[3:])
        if best is None or cost < best[0] - 1e-10:
            best = (cost, v, res)
    return best


def _polish_ratio(prob: _Problem, v: np.ndarray, ratio: np.ndarray) -> tuple[np.ndarray, float]:
    """Damped Newton on (w, nx, ny, t) with f = t * ratio."""
    u = np.array([v[0], v[1], v[2], float(v[3] / ratio[0]) if ratio[0] else 1.0])

    def build(u):
        return np.r_[u[0], u[1], u[2], ratio * u[3]]

    best = (build(u), math.inf)
    for _ in range(60):
        vv = build(u)
        if vv[1] ** 2 + vv[2] ** 2 >= 0.999:
            break
        r = prob.residual(vv)
        res = float(np.max(np.abs(r)))
        if res < best[1]:
            best = (vv, res)
        if res < 1e-14:
            break
        Jv = prob.jacobian(vv)
        Ju = np.column_stack([Jv[:, 0], Jv[:, 1], Jv[:, 2], Jv[:, 3:] @ ratio])
        if not np.all(np.isfinite(Ju)):
            break
        du = np.linalg.lstsq(Ju, -r, rcond=None)[0]
        step = 1.0
        for _ in range(20):
            un = u + step * du
            vn = build(un)
            if vn[1] ** 2 + vn[2] ** 2 < 0.999 and un[3] > 0:
                rn = float(np.max(np.abs(prob.residual(vn))))
                if rn < res:
                    break
            step *= 0.5
        else:
            break  # no step reduces the residual: converged to rounding, or stuck
        u = un
    return best


def _starts(veh: Vehicle, prob: _Problem) -> list:
    w = _spin_guess(veh, prob)
    starts = []
    tilt = 0.3
    starts.append((w, np.array([0.0, 0.0, 1.0])))
    # tilt the start towards the centroid of the failed rotors' opposite side
    pos = veh.mp.rotor_positions_m[:, :2]
    c = pos[prob.idx].mean(axis=0)
    if np.linalg.norm(c) > 1e-9:
        d = c / np.linalg.norm(c)
        for a in (tilt,):
            for sgn in (1.0, -1.0):
                nx, ny = sgn * math.sin(a) * d[0], sgn * math.sin(a) * d[1]
                starts.append((w, np.array([nx, ny, math.sqrt(1 - nx * nx - ny * ny)])))
    starts.append((2.0 * w, np.array([0.0, 0.0, 1.0])))
    starts.append((0.3 * w, np.array([0.0, 0.0, 1.0])))
    return starts


def solve(veh: Vehicle, failed=(), thrust_ratio: dict | None = None, hint=None):
    """The relaxed-hover equilibrium of a vehicle with the given rotors failed.

    Parameters
    ----------
    veh : Vehicle
    failed : sequence of str
        Names of failed rotors.
    thrust_ratio : dict or None
        ``{name: ratio}`` over every working rotor, or None for the least-effort member.
    hint : (w_rad_s, n_bar) or None
        A starting point (e.g. the neighbouring point of a sweep).

    Returns
    -------
    Equilibrium
        ``found`` False with a ``reason`` when none lies within the thrust limits.
    """
    failed = tuple(failed)
    prob = _Problem(veh, failed)
    if prob.k == 0:
        return _make(veh, failed, thrust_ratio, False, "every rotor has failed")
    if not failed and not thrust_ratio:
        # Every rotor working: the vehicle holds yaw, so the operating point is the
        # non-spinning hover whenever one exists within the limits. (For an unbalanced vehicle a
        # slowly spinning member can have a slightly smaller sum of squared thrusts; it is not
        # the vehicle's nominal state.)
        still = _non_spinning(prob, veh)
        if still is not None:
            return _make(veh, failed, thrust_ratio, True, "", prob.full_z(still[1]), still[2])
    cands = []
    # A hint (continuation along a sweep) is tried alone first, in the hint's spin sense only
    # (both when it does not spin); the full search, both senses, runs when it fails.
    searches = []
    if hint is not None:
        w_hint = float(hint[0])
        senses = (1, -1) if w_hint == 0.0 else (1 if w_hint > 0 else -1,)
        searches.append(([hint], senses))
    searches.append((_starts(veh, prob), (1, -1)))
    for starts, senses in searches:
        for sense in senses:
            if thrust_ratio:
                best = _fixed_ratio(prob, veh, thrust_ratio, sense, starts)
            else:
                best = _least_effort(prob, veh, sense, starts)
            if best is not None:
                cands.append((best[0], sense, best))
        if cands:
            break
    if not cands:
        why = ("no equilibrium within the thrust limits 0..max_thrust_n for these thrust ratios"
               if thrust_ratio else
               "no equilibrium within the thrust limits 0..max_thrust_n (spin rates up to "
               f"{MAX_SPIN_RAD_S:g} rad/s and spin-axis tilts up to "
               f"{math.degrees(MAX_TILT_RAD):g} deg searched, both senses)")
        return _make(veh, failed, thrust_ratio, False, why)
    if not thrust_ratio:
        still = _non_spinning(prob, veh)
        if still is not None:
            cands.append((still[0], 0, still))
    # least effort first; ties (within 1e-9 relative) go to the non-spinning member, then w > 0
    cands.sort(key=lambda c: (round(c[0], 9), abs(c[1]), -c[1]))
    cost, sense, (c, v, res) = cands[0]
    other = None
    if len(cands) > 1:
        ov = cands[1][2][1]
        other = (float(ov[0] * prob.w_s), float(cands[1][2][0]))
    return _make(veh, failed, thrust_ratio, True, "", prob.full_z(v), res, other_sense=other)



def controllability_old(A, B) -> tuple[int, float]:
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


