r"""Relaxed-hover equilibria and the operating point of a case: every candidate, one rule.

With ``omega = w n`` (spin parallel to world-up ``n`` seen in the body), the attitude is
stationary (``n_dot = -omega x n = 0``) and the vehicle holds its height when

.. math::

    \sum_i \mathbf r_i \times f_i \mathbf e_z - \sum_i s_i \kappa_i f_i \mathbf e_z
    + \boldsymbol\tau_d(\boldsymbol\omega)
    - \boldsymbol\omega \times \Big(\mathbf J \boldsymbol\omega
      + \sum_i s_i I_{P,i} \sqrt{f_i / k_{f,i}}\, \mathbf e_z + h\, \mathbf e_z\Big) = 0,
    \qquad n_z \sum_i f_i = m g .

Four equations in ``w, n_x, n_y`` and the ``k`` working thrusts leave ``k - 1`` free
directions. The operating point of a case is a function of the design alone:

1. **Candidates.** The static hover (``w = 0``, ``n = e_z``): the equations are linear in the
   thrusts there, and the member of least objective within ``0 < f <= f_max`` is a convex
   programme, solved exactly by a semismooth Newton method on its four dual variables. The
   spinning members: a fixed grid over spin rate (both senses, log-spaced to
   :data:`MAX_SPIN_RAD_S`) and spin-axis direction (tilts to :data:`MAX_TILT_RAD`) is scored
   with the thrusts entering linearly (a ridge least-squares fit per grid point, the spin axis
   also moved within its cell by the same fit linearised in the axis, since at fast spin the
   equilibria lie in a valley far narrower in tilt than the grid's rings); the best
   separated grid points of each sense start a Newton method on the optimality (KKT)
   conditions of ``min objective(f)`` subject to the residual, with the generated Jacobians, a
   finite-difference Hessian of the constraints and an active set for the thrust limits.
   Every converged point is a candidate; it is classified by the sign of its spin rate.
2. **Rule** (the design's ``control.operating_point``): ``prefer-static`` (default) takes the
   static hover when its available control authority (:mod:`kit.analysis.authority`) is
   positive, otherwise the least-effort candidate; ``least-effort`` the candidate of least
   ``sum f_i^2``; ``least-power`` the candidate of least induced power
   ``sum f_i^{3/2} / sqrt(2 rho A_i)`` (momentum theory; ``sum f_i^{3/2}`` when a rotor
   diameter is missing), the spinning candidates then minimising that objective;
   ``static-only`` the static hover or none. Ties within 1e-9 (relative) go to the static
   hover, then to ``w > 0``. The runner-up is reported when within 5 % on the objective.

A failure case may fix the ratios of the working thrusts (``thrust_ratio``; a ratio of 0
switches that rotor off), which leaves a square system in ``(w, n_x, n_y, t)`` with
``f = t r``; its solutions from the same grid are the candidates. The residual is scaled:
moments by ``m g l`` (``l`` the largest hub distance), the force by ``m g``.

References
----------
M. W. Mueller and R. D'Andrea, "Relaxed hover solutions for multicopters", Int. J. Robotics
Research 35(8), 2016, sec. 3 (relaxed hover solutions; from memory). Nocedal & Wright,
Numerical Optimization, 2nd ed., ch. 16 and 18 (active-set methods, Newton on the KKT
conditions, the l1 merit function; from memory). Qi & Sun, "A nonsmooth version of Newton's
method", Math. Programming 58 (1993) (semismooth Newton; from memory). J. G. Leishman,
Principles of Helicopter Aerodynamics, 2nd ed., 2006, ch. 2 (induced power in hover; from
memory).
"""

from __future__ import annotations

import functools
import math
import warnings
from dataclasses import dataclass

import numpy as np

from kit.analysis.authority import StaticAuthority, static_authority
from kit.analysis.vehicle import Vehicle
from kit.design import FailureCase
from kit.design_rules import OPERATING_POINT_RULES

#: Largest spin rate searched, rad/s.
MAX_SPIN_RAD_S = 250.0
#: Scaled residual below which a point counts as an equilibrium.
RESIDUAL_TOL = 1e-9
#: Largest tilt of the spin axis from body z searched (n_z >= cos of it).
MAX_TILT_RAD = math.radians(75.0)
#: Operating-point rules (the design's ``control.operating_point``).
RULES = OPERATING_POINT_RULES
#: The default rule.
DEFAULT_RULE = OPERATING_POINT_RULES[0]
#: A candidate within this fraction of the chosen one's objective is reported as runner-up.
RUNNER_UP_FRACTION = 0.05
#: Smallest thrust of a working rotor, as a fraction of m g / k: the rotor-momentum term
#: ``sqrt(f)`` has an infinite derivative at 0, so a working rotor keeps a little thrust.
THRUST_FLOOR = 1e-4
#: Relative objective difference below which two candidates tie.
TIE_TOL = 1e-9

# the start grid: spin rates (both senses), tilts and azimuths of the spin axis
_SCAN_SPIN_RAD_S = np.geomspace(0.3, MAX_SPIN_RAD_S, 15)
_SCAN_TILT_DEG = (0.0, 8.0, 18.0, 30.0, 45.0, 60.0, 72.0)
_SCAN_AZIMUTHS = 12
#: Newton starts per spin sense: the best grid point, and further separated grid points
#: whose merit is within :data:`_START_MERIT_FACTOR` of it.
_STARTS_PER_SENSE = 2
_START_MERIT_FACTOR = 1.1


@dataclass(frozen=True, repr=False)
class Candidate:
    """One equilibrium in the candidate set of a case.

    Attributes
    ----------
    kind : str
        ``"static"`` (w = 0, n = e_z) or ``"spinning"``.
    spin_rate_rad_s : float
        Signed spin rate, in rad/s.
    n_bar : ndarray (3,)
    thrust_n : ndarray (N,)
        Every rotor's thrust (0 for failed and switched-off rotors), in N.
    residual : float
        Largest scaled residual.
    effort_n2 : float
        ``sum f_i^2``, in N^2.
    power : float
        Induced hover power by momentum theory, in W (``sum f_i^1.5`` in N^1.5 when a rotor
        diameter is missing).
    power_in_watts : bool
        ``power`` is in W (every working rotor has a diameter).
    """

    kind: str
    spin_rate_rad_s: float
    n_bar: np.ndarray
    thrust_n: np.ndarray
    residual: float
    effort_n2: float
    power: float
    power_in_watts: bool = True

    def objective(self, rule: str) -> float:
        return self.power if rule == "least-power" else self.effort_n2

    @property
    def tilt_deg(self) -> float:
        return math.degrees(math.acos(max(-1.0, min(1.0, float(self.n_bar[2])))))

    def __repr__(self) -> str:
        return (f"<Candidate {self.kind}: spin {self.spin_rate_rad_s:+.5g} rad/s, effort "
                f"{self.effort_n2:.6g} N^2>")

    def to_dict(self) -> dict:
        return {"kind": self.kind, "spin_rate_rad_s": float(self.spin_rate_rad_s),
                "tilt_deg": float(self.tilt_deg), "n_bar": [float(v) for v in self.n_bar],
                "effort_n2": float(self.effort_n2),
                ("induced_power_w" if self.power_in_watts else "sum_thrust_1_5_n1_5"):
                    float(self.power),
                "max_thrust_n": float(np.max(self.thrust_n)),
                "scaled_residual": float(self.residual)}


@dataclass(frozen=True, repr=False)
class Equilibrium:
    """One relaxed-hover equilibrium (or the reason none was found).

    Attributes
    ----------
    failed : tuple of str
        Failed rotors; ``()`` is the no-failure case.
    thrust_ratio : dict or None
        Ratios as given in the design (None: the rule's member).
    found : bool
    reason : str
        Why no equilibrium was found (empty when found).
    free_directions : int
        ``k - 1`` for the free family, 0 when ratios are fixed.
    thrust_n : ndarray (N,)
        All rotors' thrusts, zero for failed and switched-off ones, in N.
    omega_bar_rad_s : ndarray (3,)
        Body angular velocity, in rad/s.
    n_bar : ndarray (3,)
        World-up unit vector in body axes.
    spin_rate_rad_s : float
        Signed spin rate w about n_bar (omega = w n), in rad/s.
    residual : float
        Largest scaled residual.
    rule : str
        The operating-point rule that chose this point.
    chosen_by : str
        One sentence: why the rule chose this candidate.
    candidates : tuple of Candidate
        The complete candidate set (static and spinning, both senses), objective order.
    runner_up : Candidate or None
        The best other candidate when within 5 % on the rule's objective.
    authority : StaticAuthority or None
        Static-hover control authority of the failure set.
    switched_off : tuple of str
        Working rotors switched off by a thrust ratio of 0.
    """

    failed: tuple[str, ...]
    thrust_ratio: dict | None
    found: bool
    reason: str
    free_directions: int
    names: tuple[str, ...]
    thrust_n: np.ndarray
    max_thrust_n: np.ndarray
    omega_bar_rad_s: np.ndarray
    n_bar: np.ndarray
    spin_rate_rad_s: float
    residual: float
    rotor_speed_rad_s: np.ndarray
    circle_radius_m: float
    mass_kg: float
    wheel_momentum_n_m_s: float = 0.0
    other_sense: tuple | None = None
    rule: str = DEFAULT_RULE
    chosen_by: str = ""
    candidates: tuple = ()
    runner_up: Candidate | None = None
    authority: StaticAuthority | None = None
    switched_off: tuple[str, ...] = ()

    @property
    def working(self) -> np.ndarray:
        """Rotors that work and are not switched off (the inputs of the control model)."""
        return np.array([n not in self.failed and n not in self.switched_off
                         for n in self.names])

    @property
    def static(self) -> bool:
        """The operating point is the non-spinning hover."""
        return bool(self.found and self.spin_rate_rad_s == 0.0)

    @property
    def tilt_deg(self) -> float:
        """Angle between the spin axis (world up) and body z, in degrees."""
        return math.degrees(math.acos(max(-1.0, min(1.0, float(self.n_bar[2])))))

    @property
    def thrust_fraction(self) -> np.ndarray:
        return self.thrust_n / self.max_thrust_n

    @property
    def label(self) -> str:
        base = "no failure" if not self.failed else "failed: " + ", ".join(self.failed)
        if self.thrust_ratio:
            base += " (thrust ratio " + ", ".join(f"{k}={v:g}" for k, v in
                                                  self.thrust_ratio.items()) + ")"
        return base

    def __repr__(self) -> str:
        if not self.found:
            return f"<Equilibrium {self.label}: not found ({self.reason})>"
        return (f"<Equilibrium {self.label}: spin {self.spin_rate_rad_s:+.4g} rad/s, tilt "
                f"{self.tilt_deg:.3g} deg, max thrust {self.thrust_n.max():.4g} N>")

    def to_dict(self) -> dict:
        out = {
            "failed": list(self.failed),
            "thrust_ratio": None if self.thrust_ratio is None else dict(self.thrust_ratio),
            "equilibrium_found": self.found,
            "reason": self.reason,
            "free_directions": self.free_directions,
            "thrust_n": {n: float(f) for n, f in zip(self.names, self.thrust_n, strict=True)},
            "rotor_speed_rad_s": {n: float(f) for n, f in
                                  zip(self.names, self.rotor_speed_rad_s, strict=True)},
            "omega_bar_rad_s": [float(v) for v in self.omega_bar_rad_s],
            "n_bar": [float(v) for v in self.n_bar],
            "spin_rate_rad_s": float(self.spin_rate_rad_s),
            "tilt_deg": float(self.tilt_deg),
            "circle_radius_m": float(self.circle_radius_m),
            "scaled_residual": float(self.residual),
            "wheel_momentum_n_m_s": float(self.wheel_momentum_n_m_s),
            "operating_point_rule": self.rule,
            "operating_point_reason": self.chosen_by,
            "operating_point_static": self.static,
            "switched_off": list(self.switched_off),
            "candidates": [c.to_dict() for c in self.candidates],
            "runner_up": None if self.runner_up is None else self.runner_up.to_dict(),
        }
        if self.authority is not None:
            out.update(self.authority.to_dict())
        return out

    def _repr_html_(self) -> str:
        from kit.analysis.htmltable import equilibrium_html

        return equilibrium_html(self)


class _Problem:
    """The scaled equations for one vehicle and set of rotors giving no thrust.

    Unknowns ``v = (w / w_s, n_x, n_y, f_working / f_s)`` with ``w_s = 10 rad/s`` and
    ``f_s = m g / k``; residual rows scaled by ``1 / (m g l)`` (moments) and ``1 / (m g)``.
    """

    def __init__(self, veh: Vehicle, off) -> None:
        self.veh = veh
        self.model = veh.model
        self.work = veh.working_mask(off)
        self.idx = np.flatnonzero(self.work)
        self.k = len(self.idx)
        self.mg = veh.weight_n
        self.f_s = self.mg / max(self.k, 1)
        self.w_s = 10.0
        self.scale = np.array([1 / (self.mg * veh.arm_m)] * 3 + [1 / self.mg])
        self.par = veh.par
        self.cols = np.r_[0, 1, 2, 3 + self.idx]
        self.vscale = np.r_[self.w_s, 1.0, 1.0, np.full(self.k, self.f_s)]
        self.fmax = veh.max_thrust_n[self.idx] / self.f_s
        self.lo = np.full(self.k, THRUST_FLOOR)

    def full_z(self, v: np.ndarray) -> np.ndarray:
        v = np.asarray(v, float)
        z = np.zeros(v.shape[:-1] + (3 + self.veh.n,))
        z[..., self.cols] = v * self.vscale
        return z

    def residual(self, v: np.ndarray) -> np.ndarray:
        return self.model.eq_residual(self.full_z(v), self.par) * self.scale

    def jacobian(self, v: np.ndarray) -> np.ndarray:
        Jz = self.model.eq_jacobian(self.full_z(v), self.par)[..., self.cols]
        return Jz * self.vscale * self.scale[:, None]

    def linear_part(self) -> tuple[np.ndarray, np.ndarray]:
        """``r0`` and ``A`` of the residual ``r0 + A f`` at ``w = 0, n = e_z`` (exact there)."""
        v0 = np.zeros(3 + self.k)
        v1 = np.r_[0.0, 0.0, 0.0, np.ones(self.k)]
        return self.residual(v0), self.jacobian(v1)[:, 3:]


class _Objective:
    """``sum f^2 / 2`` (least effort) or ``sum c_i f^1.5`` (induced power), in scaled thrusts."""

    def __init__(self, kind: str, weights: np.ndarray) -> None:
        self.kind = kind
        self.c = weights / np.mean(weights)

    def value(self, f):
        if self.kind == "effort":
            return 0.5 * float(f @ f)
        return float(self.c @ np.maximum(f, 0.0) ** 1.5)

    def grad(self, f):
        if self.kind == "effort":
            return f.copy()
        return 1.5 * self.c * np.sqrt(np.maximum(f, 0.0))

    def hess_diag(self, f):
        if self.kind == "effort":
            return np.ones_like(f)
        return 0.75 * self.c / np.sqrt(np.maximum(f, 1e-300))

    def argmin_box(self, u, lo, hi):
        """``argmin_f objective(f) - u f`` over ``lo <= f <= hi`` and its derivative in u."""
        if self.kind == "effort":
            f = u.copy()
            d = np.ones_like(u)
        else:
            pos = np.maximum(u, 0.0)
            f = (pos / (1.5 * self.c)) ** 2
            d = 2 * pos / (1.5 * self.c) ** 2
        inside = (f > lo) & (f < hi)
        return np.clip(f, lo, hi), np.where(inside, d, 0.0)


def _power_weights(veh: Vehicle, idx: np.ndarray) -> tuple[np.ndarray, bool]:
    diam = [veh.design.rotors[i].diameter_m for i in idx]
    if any(d is None for d in diam):
        return np.ones(len(idx)), False
    area = math.pi * np.asarray(diam, float) ** 2 / 4.0
    return 1.0 / np.sqrt(2.0 * veh.design.air_density_kg_m3 * area), True


# --- the static hover: a convex programme in the thrusts, solved on its dual ---------------


def _static(prob: _Problem, obj: _Objective, lin=None) -> np.ndarray | None:
    """The static hover's thrusts (scaled) of least objective, or None when none exists.

    At ``w = 0, n = e_z`` the residual is ``r0 + A f``; the programme
    ``min objective(f)`` s.t. ``A f = -r0``, ``lo <= f <= hi`` has the concave dual
    ``q(mu) = min_f objective(f) - mu^T (A f + r0)`` whose maximiser gives
    ``f = argmin_box(A^T mu)``; semismooth Newton on ``A f(mu) + r0 = 0`` with a backtracking
    line search on ``q``. An infeasible programme has an unbounded dual: no convergence.
    """
    r0, A = prob.linear_part() if lin is None else lin
    if not np.all(np.isfinite(A)):
        return None
    # the programme's data are the same at every wheel momentum (no gyroscopic moment at
    # rest): solved once per distinct programme (A in its memory order: the rounding of the
    # products follows it)
    if A.flags.f_contiguous or A.flags.c_contiguous:
        f = _static_thrusts(r0.tobytes(), A.tobytes(), A.shape, bool(A.flags.f_contiguous),
                            prob.lo.tobytes(), prob.fmax.tobytes(), obj.kind, obj.c.tobytes())
    else:
        f = _static_dual(r0, A, prob.lo, prob.fmax, obj)
    if f is None:
        return None
    v = np.r_[0.0, 0.0, 0.0, f]
    if float(np.max(np.abs(prob.residual(v)))) > RESIDUAL_TOL:
        return None
    return v


@functools.lru_cache(maxsize=1024)
def _static_thrusts(r0_bytes: bytes, a_bytes: bytes, a_shape: tuple, fortran: bool,
                    lo_bytes: bytes, hi_bytes: bytes, kind: str,
                    c_bytes: bytes) -> np.ndarray | None:
    """:func:`_static_dual` on the programme's data given as bytes (the cache key)."""
    A = np.frombuffer(a_bytes).reshape(a_shape)
    A = np.asfortranarray(A) if fortran else A.copy()
    obj = _Objective.__new__(_Objective)
    obj.kind, obj.c = kind, np.frombuffer(c_bytes).copy()
    f = _static_dual(np.frombuffer(r0_bytes).copy(), A, np.frombuffer(lo_bytes).copy(),
                     np.frombuffer(hi_bytes).copy(), obj)
    if f is not None:
        f.setflags(write=False)
    return f


def _static_dual(r0, A, lo, hi, obj: _Objective) -> np.ndarray | None:
    """Semismooth Newton on the dual of the static programme (see :func:`_static`)."""
    b = -r0
    if np.any(hi <= lo):
        return None

    def q_of(mu):
        f, d = obj.argmin_box(A.T @ mu, lo, hi)
        return obj.value(f) - mu @ (A @ f - b), f, d

    mu = np.linalg.lstsq(A @ A.T, b, rcond=None)[0]
    q, f, d = q_of(mu)
    scale = max(1.0, float(np.max(np.abs(b))))
    for _ in range(30):  # finite convergence on a feasible programme takes a few steps
        g = b - A @ f
        if np.max(np.abs(g)) <= 1e-14 * scale:
            break
        Hm = (A * d) @ A.T
        reg = 1e-12 * max(1.0, float(np.trace(Hm)))
        try:
            step = np.linalg.solve(Hm + reg * np.eye(4), g)
        except np.linalg.LinAlgError:
            step = g
        if not np.all(np.isfinite(step)) or float(step @ g) <= 0:
            step = g
        t = 1.0
        for _ in range(40):
            qn, fn, dn = q_of(mu + t * step)
            if qn >= q + 1e-4 * t * float(step @ g):
                break
            t *= 0.5
        else:
            return None
        mu = mu + t * step
        q, f, d = qn, fn, dn
        if np.max(np.abs(mu)) > 1e12:
            return None  # unbounded dual: no static hover within the limits
    return f


# --- the spinning members: start grid and Newton on the KKT conditions ---------------------


@functools.cache
def _grid(w_s: float) -> np.ndarray:
    """Start grid of ``(w, n_x, n_y)`` (scaled), shape ``(2 * n_w, n_tilt, n_azimuth, 3)``.

    Axis 0 runs through zero spin: the ``w < 0`` levels from the fastest to the slowest, then
    the ``w > 0`` levels from the slowest to the fastest, so neighbours along it are
    neighbours in ``w n`` (the zero-tilt row repeats its point across the azimuths).
    """
    w = _SCAN_SPIN_RAD_S / w_s
    ws = np.r_[-w[::-1], w]
    az = 2 * math.pi * np.arange(_SCAN_AZIMUTHS) / _SCAN_AZIMUTHS
    tilt = np.radians(np.asarray(_SCAN_TILT_DEG))
    G = np.zeros((ws.size, tilt.size, az.size, 3))
    G[..., 0] = ws[:, None, None]
    G[..., 1] = np.sin(tilt)[None, :, None] * np.cos(az)[None, None, :]
    G[..., 2] = np.sin(tilt)[None, :, None] * np.sin(az)[None, None, :]
    G.setflags(write=False)
    return G


_RHO = 1e3  # weight of the residual and the limit violations in the grid merit
_RHO_REFINE = 1e5  # the same in the local refinement (closer to the equilibrium surface)


def _fit(prob: _Problem, A: np.ndarray, P: np.ndarray, r0: np.ndarray,
         ratio: np.ndarray | None, rho: float = _RHO,
         same_tilt: bool = False) -> tuple[np.ndarray, np.ndarray]:
    """Thrusts fitted at points ``P = (w, n_x, n_y)`` with ``r ~ r0 + A(n_z) f``, and a merit.

    ``A(n_z)``: the torque rows of the thrusts are constant, the force row is ``n_z``. Least
    effort: the ridge fit ``min |f|^2 + rho |r0 + A f|^2``; fixed ratios: ``f = t r`` by least
    squares. Merit: ``|f|^2`` (free family only) plus ``rho`` times the squared residual and
    the squared distance of the fit from the thrust limits.
    """
    nz = np.sqrt(np.maximum(1.0 - P[:, 1] ** 2 - P[:, 2] ** 2, 0.0))
    F = np.empty((P.shape[0], prob.k))
    # one matrix per distinct n_z (the grid's tilt rings share one)
    if same_tilt:
        keys, inv = nz[:1], np.zeros(nz.size, int)
    else:  # scattered points: one batched solve
        keys, inv = nz[:0], None
        At = np.broadcast_to(A, (P.shape[0],) + A.shape).copy()
        At[:, 3, :] *= nz[:, None]
        if ratio is None:
            AtA = _rows_outer(At, At)
            rhs = -_rows_dot(At, r0)
            F = np.linalg.solve(rho * AtA + np.eye(prob.k), rho * rhs[..., None])[..., 0]
        else:
            a = At @ ratio
            F = (-np.sum(a * r0, axis=1) / np.sum(a * a, axis=1))[:, None] * ratio
    for j, z in enumerate(keys):
        sel = inv == j
        Aj = A.copy()
        Aj[3] *= z
        if ratio is None:
            M = np.linalg.solve(rho * Aj.T @ Aj + np.eye(prob.k), rho * Aj.T)
            F[sel] = -(r0[sel] @ M.T)
        else:
            a = Aj @ ratio
            F[sel] = (-(r0[sel] @ a) / float(a @ a))[:, None] * ratio
    Fc = np.clip(F, prob.lo, prob.fmax)
    res = r0 + _lin(A, P, Fc)
    merit = np.sum(Fc**2, axis=1) * (ratio is None) + rho * (
        np.sum(res**2, axis=1) + np.sum((F - Fc) ** 2, axis=1))
    return Fc, merit


def _rows_outer(X: np.ndarray, Y: np.ndarray) -> np.ndarray:
    """``sum_i X[m, i, a] Y[m, i, b]`` over the residual's four rows, summed in row order
    (the same sums as ``einsum("mia,mib->mab")``, without its general loop)."""
    out = X[:, 0, :, None] * Y[:, 0, None, :]
    for i in range(1, X.shape[1]):
        out = out + X[:, i, :, None] * Y[:, i, None, :]
    return out


def _rows_dot(X: np.ndarray, r: np.ndarray) -> np.ndarray:
    """``sum_i X[m, i, a] r[m, i]``, summed in row order (as ``einsum("mia,mi->ma")``)."""
    out = X[:, 0, :] * r[:, 0, None]
    for i in range(1, X.shape[1]):
        out = out + X[:, i, :] * r[:, i, None]
    return out


def _scan(prob: _Problem, A: np.ndarray, ratio: np.ndarray | None):
    """Score the start grid (:func:`_grid`) with the thrusts entering linearly.

    Returns the grid, the thrusts fitted per point and the merit of :func:`_fit`, all
    deterministic functions of the design.
    """
    G = _grid(prob.w_s)
    shape = G.shape[:3]
    P = G.reshape(-1, 3)
    r0, B = _grid_at_rest(prob, P, ratio is None)
    r0 = r0.reshape(shape + (4,))
    F = np.zeros(shape + (prob.k,))
    merit = np.zeros(shape)
    for j in range(shape[1]):
        Fj, mj = _fit(prob, A, G[:, j].reshape(-1, 3), r0[:, j].reshape(-1, 4), ratio,
                      same_tilt=True)
        F[:, j] = Fj.reshape(shape[0], shape[2], prob.k)
        merit[:, j] = mj.reshape(shape[0], shape[2])
    if ratio is None:
        # at fast spin the gyroscopic moment grows as w^2 sin(tilt): the equilibria lie in a
        # valley far narrower in tilt than the grid's rings, so each grid point is scored by
        # the best point of its cell (the axis moved by the linearised fit below)
        B = B.reshape(shape + (4, 2))
        G = G.copy()
        for j in range(shape[1]):
            Pj = G[:, j].reshape(-1, 3)
            Pc, Fc, mc = _fit_axis(prob, A, Pj, r0[:, j].reshape(-1, 4),
                                   B[:, j].reshape(-1, 4, 2))
            mj = merit[:, j].reshape(-1)
            better = np.isfinite(mc) & (mc < mj)
            G[:, j] = np.where(better[:, None], Pc, Pj).reshape(G.shape[0], -1, 3)
            Fj = np.where(better[:, None], Fc, F[:, j].reshape(-1, prob.k))
            F[:, j] = Fj.reshape(shape[0], shape[2], prob.k)
            merit[:, j] = np.where(better, mc, mj).reshape(shape[0], shape[2])
    return G, F, merit


def _grid_at_rest(prob: _Problem, P: np.ndarray, with_axis: bool):
    """The scaled residual at the grid points ``P`` with every thrust 0, and (``with_axis``) its
    derivative in ``(n_x, n_y)`` there: functions of the vehicle alone (no thrust enters), so
    computed once per vehicle and shared by its cases."""
    cache = prob.veh._cache
    key = ("grid_at_rest", prob.w_s)
    r0, B = cache.get(key, (None, None))
    if r0 is None or (with_axis and B is None):
        V = np.concatenate([P, np.zeros((P.shape[0], prob.k))], axis=1)
        if r0 is None:
            r0 = prob.residual(V)
            r0.setflags(write=False)
        if with_axis:
            B = prob.jacobian(V)[..., 1:3]
            B.setflags(write=False)
        cache[key] = (r0, B)
    return r0, B


#: Largest move of the spin axis (in n_x and n_y) of :func:`_fit_axis`: half the spacing of
#: the grid's first tilt rings.
_AXIS_CELL = 0.07


def _fit_axis(prob: _Problem, A: np.ndarray, P: np.ndarray, r0: np.ndarray, B: np.ndarray,
              rho: float = _RHO) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Thrusts and a move ``d`` of the spin axis fitted at points ``P`` of one tilt ring, with
    the residual linear in both: ``r ~ r0 + A(n_z) f + B d`` (``B = dr/d(n_x, n_y)`` at
    ``f = 0``; ``n_z`` of the ring's first point).

    The ridge fit ``min |f|^2 + 1e-3 |d / c|^2 + rho |r|^2`` with ``|d| <= c``
    (:data:`_AXIS_CELL`, the move clipped; merit as in :func:`_fit`). The thrusts are
    eliminated in closed form, ``min_f |f|^2 + rho |A f + b|^2 = rho b^T W b`` with
    ``W = (I + rho A A^T)^-1`` and ``f = -rho A^T W b``, which leaves a 2 x 2 system in ``d``
    per point. Returns the moved points, the thrusts and the merit.
    """
    At = A.copy()
    At[3] *= math.sqrt(max(1.0 - P[0, 1] ** 2 - P[0, 2] ** 2, 0.0))
    W = np.linalg.inv(np.eye(4) + rho * At @ At.T)
    ok = np.all(np.isfinite(B), axis=(1, 2)) & np.all(np.isfinite(r0), axis=1)
    B = np.where(ok[:, None, None], B, 0.0)
    r0 = np.where(ok[:, None], r0, 0.0)
    WB = W @ B
    lhs = rho * _rows_outer(B, WB) + (1e-3 / _AXIS_CELL**2) * np.eye(2)
    rhs = -rho * _rows_dot(WB, r0)
    d = np.clip(np.linalg.solve(lhs, rhs[..., None])[..., 0], -_AXIS_CELL, _AXIS_CELL)
    smax = math.sin(MAX_TILT_RAD)
    Pn = P.copy()
    Pn[:, 1:] = np.clip(P[:, 1:] + d, -smax, smax)
    d = Pn[:, 1:] - P[:, 1:]
    b = r0 + (B[:, :, 0] * d[:, 0, None] + B[:, :, 1] * d[:, 1, None])
    F = -rho * (b @ W.T) @ At
    Fc = np.clip(F, prob.lo, prob.fmax)
    res = b + Fc @ At.T
    merit = np.sum(Fc**2, axis=1) + rho * (np.sum(res**2, axis=1) + np.sum((F - Fc) ** 2, axis=1))
    merit[~ok] = np.inf
    return Pn, Fc, merit


def _refine(prob: _Problem, A: np.ndarray, p: np.ndarray, ratio: np.ndarray | None):
    """Shrink a local grid (3 x 3 x 3 in ``log |w|``, ``n_x``, ``n_y``) around a start three
    times (halving its span), keeping its best point; the merit of :func:`_fit` with the rotor
    momentum of the fitted thrusts added to ``r0``. Returns ``v = (w, n_x, n_y, f)``."""
    return _refine_many(prob, A, [p], ratio)[0]


def _refine_many(prob: _Problem, A: np.ndarray, starts, ratio: np.ndarray | None) -> list:
    """:func:`_refine` of several starts at once: each start's local grid is its own block of
    27 rows in the batched evaluations (row by row the same arithmetic)."""
    steps = np.array([-1.0, 0.0, 1.0])
    Dw, Dx, Dy = (a.ravel() for a in np.meshgrid(steps, steps, steps, indexing="ij"))
    smax = math.sin(MAX_TILT_RAD)
    s, m = len(starts), Dw.size
    if s == 0:
        return []
    best_v: list = [None] * s
    best_m = [math.inf] * s
    ps = [np.asarray(p, float) for p in starts]
    span_w, span_n = 0.25, 0.08
    for _ in range(3):
        P = np.concatenate([np.column_stack([p[0] * np.exp(span_w * Dw), p[1] + span_n * Dx,
                                             p[2] + span_n * Dy]) for p in ps])
        P[:, 1:] = np.clip(P[:, 1:], -smax, smax)
        V = np.concatenate([P, np.zeros((P.shape[0], prob.k))], axis=1)
        r0 = prob.residual(V)
        F, _ = _fit(prob, A, P, r0, ratio, _RHO_REFINE)
        # the rotor momentum and everything else the linear fit leaves out, at the fit
        V[:, 3:] = F
        extra = prob.residual(V) - r0 - _lin(A, P, F)
        F, merit = _fit(prob, A, P, r0 + extra, ratio, _RHO_REFINE)
        for b in range(s):
            rows = slice(b * m, (b + 1) * m)
            mb = merit[rows]
            i = int(np.argmin(np.where(np.isfinite(mb), mb, np.inf)))
            if mb[i] < best_m[b]:
                best_m[b], best_v[b] = float(mb[i]), np.r_[P[rows][i], F[rows][i]]
            ps[b] = P[rows][i]
        span_w, span_n = span_w / 2, span_n / 2
    return best_v


def _lin(A: np.ndarray, P: np.ndarray, F: np.ndarray) -> np.ndarray:
    """``A(n_z) f`` at points ``P`` (force row times ``n_z``)."""
    nz = np.sqrt(np.maximum(1.0 - P[:, 1] ** 2 - P[:, 2] ** 2, 0.0))
    out = F @ A.T
    out[:, 3] *= nz
    return out


def _pick_starts(G: np.ndarray, merit: np.ndarray, per_sense: int) -> list[tuple]:
    """Local minima of the grid merit (neighbours along spin, tilt and azimuth), best first:
    for each sense the best, and up to ``per_sense - 1`` more within
    :data:`_START_MERIT_FACTOR` of it."""
    m = np.where(np.isfinite(merit), merit, np.inf)
    pad = np.full((1,) + m.shape[1:], np.inf)
    up = np.concatenate([m[1:], pad])
    down = np.concatenate([pad, m[:-1]])
    padt = np.full((m.shape[0], 1, m.shape[2]), np.inf)
    out_t = np.concatenate([m[:, 1:], padt], axis=1)
    in_t = np.concatenate([padt, m[:, :-1]], axis=1)
    in_t[:, 1] = np.min(m[:, 0], axis=1)[:, None]  # zero tilt: one point for every azimuth
    loc = ((m <= up) & (m <= down) & (m <= out_t) & (m <= in_t)
           & (m <= np.roll(m, 1, axis=2)) & (m <= np.roll(m, -1, axis=2)) & np.isfinite(m))
    loc[:, 0, 1:] = False  # the zero-tilt row's repeats
    half = m.shape[0] // 2
    out = []
    for rows in (slice(half, None), slice(0, half)):  # w > 0, then w < 0
        sub = np.zeros_like(loc)
        sub[rows] = loc[rows]
        idx = np.argwhere(sub)
        if not idx.size:
            continue
        vals = m[tuple(idx.T)]
        order = np.lexsort((np.arange(len(vals)), vals))
        best = vals[order[0]]
        for o in order[:per_sense]:
            if vals[o] <= _START_MERIT_FACTOR * max(best, 1e-12):
                out.append(tuple(idx[o]))
    return out


_FREE_LO = np.full(3, -np.inf)
_FREE_HI = np.full(3, np.inf)
_ZERO3 = np.zeros(3)


def _constraint_hessian(prob: _Problem, v: np.ndarray, J: np.ndarray, lam: np.ndarray):
    """``sum_j lam_j d^2 r_j / dv^2`` by forward differences of the generated Jacobian.

    The thrusts enter the residual separately (linearly, and through each rotor's own
    ``sqrt(f_i)`` in the rotor momentum), so the thrust-thrust block is diagonal and one
    Jacobian with every thrust moved gives it; three more give the rows of ``w, n_x, n_y``.
    """
    n = v.size
    h = 1e-7 * np.maximum(1.0, np.abs(v[:3]))
    hf = np.minimum(1e-7, 1e-4 * np.abs(v[3:]))
    X = np.repeat(v[None, :], 4, axis=0)
    X[0, 0] += h[0]
    X[1, 1] += h[1]
    X[2, 2] += h[2]
    X[3, 3:] += hf
    D = np.einsum("j,ijl->il", lam, prob.jacobian(X)) - (lam @ J)[None, :]
    G = np.zeros((n, n))
    G[:3] = D[:3] / h[:, None]
    G[3:, 3:] = np.diag(D[3, 3:] / hf)
    G[:3, :3] = 0.5 * (G[:3, :3] + G[:3, :3].T)
    G[3:, :3] = G[:3, 3:].T
    return G


def _newton_kkt(prob: _Problem, obj: _Objective, v0: np.ndarray, known=(),
                max_iter: int = 25):
    """Newton on the KKT conditions of ``min obj(f)`` s.t. ``r(v) = 0``, ``lo <= f <= hi``.

    Active set on the thrust limits (a variable that blocks a step is fixed at its limit; one
    whose multiplier has the wrong sign at a stationary point is released), the reduced
    Hessian made positive definite, steps accepted by the l1 merit ``obj + nu |r|_1`` or by a
    clear drop of the residual. A run that comes within 1e-3 (scaled) of a point in ``known``
    (converged from another start) stops: it is in that point's basin. Returns the point or
    None.
    """
    n = v0.size
    lo = np.concatenate((_FREE_LO, prob.lo))
    hi = np.concatenate((_FREE_HI, prob.fmax))
    v = np.clip(v0, lo, hi)
    fixed = np.zeros(n, bool)
    nu = 1.0
    lam = None

    def phi(x):
        return obj.value(x[3:])

    def grad(x):
        return np.concatenate((_ZERO3, obj.grad(x[3:])))

    released = 0
    stationary, since = None, 0  # the last stationary point before a limit was released
    memo: dict = {}

    def residual(x):
        # the residual of the step just accepted is the next iterate's: evaluated once
        key = x.tobytes()
        r = memo.get(key)
        if r is None:
            if len(memo) > 8:
                memo.clear()
            r = memo[key] = prob.residual(x)
        return r

    for _ in range(max_iter):
        c = residual(v)
        J = prob.jacobian(v)
        if not (np.all(np.isfinite(c)) and np.all(np.isfinite(J))):
            return None
        g = grad(v)
        free = ~fixed
        JF = J[:, free]
        if lam is None:
            lam = np.linalg.lstsq(JF.T, g[free], rcond=None)[0]
        H = -_constraint_hessian(prob, v, J, lam)
        H[3:, 3:] += np.diag(obj.hess_diag(v[3:]))
        nF = int(free.sum())
        HF = H if nF == n else H[np.ix_(free, free)]
        # convexify on the null space of the constraint Jacobian
        _, s, Vt = np.linalg.svd(JF)
        rank = int(np.sum(s > 1e-10 * max(s[0], 1e-300)))
        Z = Vt[rank:].T
        if Z.shape[1]:
            ev = np.linalg.eigvalsh(Z.T @ HF @ Z)
            if ev[0] < 1e-8:
                HF = HF + (1e-8 - ev[0] + 1e-6) * np.eye(nF)
        K = np.zeros((nF + 4, nF + 4))
        K[:nF, :nF] = HF
        K[:nF, nF:] = JF.T
        K[nF:, :nF] = JF
        rhs = np.concatenate((-g[free], -c))
        try:
            sol = np.linalg.solve(K, rhs)
        except np.linalg.LinAlgError:
            sol = np.linalg.lstsq(K, rhs, rcond=None)[0]
        if not np.all(np.isfinite(sol)):
            return None
        dF = sol[:nF]
        lam_new = -sol[nF:]
        d = np.zeros(n)
        d[free] = dF
        gl = g - J.T @ lam_new
        if (np.max(np.abs(c)) <= 1e-13 and np.max(np.abs(dF)) <= 1e-10 * max(
                1.0, float(np.max(np.abs(v))))):
            # stationary on this active set: release a limit whose multiplier points inward
            at_lo = fixed & (v <= lo)
            z = np.where(at_lo, -gl, gl)  # >= 0 wrongly signed pushes off the limit
            z[~fixed] = -np.inf
            i = int(np.argmax(z))
            if z[i] > 1e-9 and released < 3 * n:
                fixed[i] = False
                released += 1
                lam = lam_new
                stationary, since = v.copy(), 0
                continue
            return v
        since += 1
        if stationary is not None and since > 6:
            # leaving the limit does not lead to another stationary point within a few steps
            # (the thrust floor, where the rotor momentum's sqrt is steep): keep the point
            return stationary
        # a step of at most 0.25 in w / w_s and n, and 0.5 in f / f_s (a crude trust region:
        # far from the solution the objective is flat along the family and the tangent step
        # of the quadratic model overshoots)
        cap = float(max(np.max(np.abs(d[:3])) / 0.25, np.max(np.abs(d[3:])) / 0.5, 1.0))
        d /= cap
        # largest step within the limits
        amax, block = 1.0, -1
        moving = np.flatnonzero(free & (d != 0))
        dm = d[moving]
        reach = (np.where(dm > 0, hi[moving], lo[moving]) - v[moving]) / dm
        for i, a in zip(moving[reach < 1.0], reach[reach < 1.0], strict=True):
            if a < amax:
                amax, block = max(a, 0.0), int(i)
        nu = max(nu, 1.5 * float(np.max(np.abs(lam_new))))
        c1 = float(np.sum(np.abs(c)))
        psi0 = phi(v) + nu * c1
        slope = float(g @ d) - nu * c1
        ref = (nu, psi0, slope, c1, phi(v), float(np.max(np.abs(d))))

        def accept(vn, a, ref=ref):
            return _acceptable(prob, obj, vn, a, ref, residual)

        a = amax
        vn = v + a * d
        ok = accept(vn, a)
        if not ok and block < 0:
            # second-order correction: the constraints' curvature spoils the full step
            ct = residual(vn)
            if np.all(np.isfinite(ct)):
                dc = np.zeros(n)
                dc[free] = -np.linalg.lstsq(JF, ct, rcond=None)[0]
                vs = vn + dc
                if np.all(vs[3:] >= lo[3:]) and np.all(vs[3:] <= hi[3:]) and accept(vs, a):
                    vn, ok = vs, True
        for _ in range(10):
            if ok:
                break
            a *= 0.5
            vn = v + a * d
            ok = accept(vn, a)
        if not ok:  # no acceptable step: this start does not converge
            return stationary
        v = vn
        if block >= 0 and a == amax:
            v[block] = hi[block] if d[block] > 0 else lo[block]
            fixed[block] = True
        lam = lam_new
        if any(np.max(np.abs(v - k)) < 1e-3 for k in known):
            return None
    return stationary


def _acceptable(prob: _Problem, obj: _Objective, vn: np.ndarray, a: float, ref,
                residual=None) -> bool:
    """Step test: the l1 merit decreases enough, or (a filter step) the residual drops clearly
    while the objective stays near."""
    nu, psi0, slope, c1, phi0, dmax = ref
    if vn[1] ** 2 + vn[2] ** 2 >= 0.995:
        return False
    cn = (residual or prob.residual)(vn)
    if not np.all(np.isfinite(cn)):
        return False
    c1n = float(np.sum(np.abs(cn)))
    phin = obj.value(vn[3:])
    return (phin + nu * c1n <= psi0 + 1e-4 * a * slope
            or (c1n <= 0.9 * c1 and phin <= phi0 + 10 * c1) or dmax < 1e-12)


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
        # backtracking: the first of the steps 1, 1/2, .. 2^-19 that reduces the residual,
        # every trial step evaluated in one batched call
        UN = u + _HALVINGS[:, None] * du
        VN = np.empty((UN.shape[0], 3 + ratio.size))
        VN[:, :3] = UN[:, :3]
        VN[:, 3:] = ratio * UN[:, 3:4]
        ok = (VN[:, 1] ** 2 + VN[:, 2] ** 2 < 0.999) & (UN[:, 3] > 0)
        if not np.any(ok):
            break
        rn = np.full(UN.shape[0], np.inf)
        rn[ok] = np.max(np.abs(prob.residual(VN[ok])), axis=1)
        better = np.flatnonzero(rn < res)
        if not better.size:
            break  # no step reduces the residual: converged to rounding, or stuck
        u = UN[better[0]]
    return best


_HALVINGS = 0.5 ** np.arange(20)


def _make(veh, failed, ratio, found, reason, z=None, residual=math.inf, **extra):
    n = veh.n
    if z is None:
        z = np.full(3 + n, np.nan)
    w, nx, ny = z[0], z[1], z[2]
    nz = math.sqrt(max(0.0, 1.0 - nx * nx - ny * ny)) if found else math.nan
    n_bar = np.array([nx, ny, nz])
    f = z[3:].copy()
    off = extra.get("switched_off", ())
    if found:
        f[~veh.working_mask(tuple(failed) + tuple(off))] = 0.0
    # CoM circle: horizontal thrust component m v^2 / R = T sin(tilt), v = w R -> R = T s/(m w^2)
    radius = math.nan
    if found:
        horiz = float(np.sum(f)) * math.sqrt(max(0.0, 1.0 - nz * nz))
        radius = 0.0 if horiz < 1e-12 else horiz / (veh.mp.mass_kg * w * w) if w != 0 else math.inf
    return Equilibrium(
        failed=tuple(failed), thrust_ratio=ratio, found=found, reason=reason,
        free_directions=0 if ratio else max(int(veh.working_mask(failed).sum()) - 1, 0),
        names=veh.names, thrust_n=f, max_thrust_n=veh.max_thrust_n,
        omega_bar_rad_s=w * n_bar, n_bar=n_bar, spin_rate_rad_s=float(w),
        residual=float(residual), rotor_speed_rad_s=veh.rotor_speed_rad_s(np.nan_to_num(f)),
        circle_radius_m=radius, mass_kg=veh.mp.mass_kg,
        wheel_momentum_n_m_s=veh.wheel_momentum_n_m_s, **extra,
    )


def _candidate(prob: _Problem, v: np.ndarray, power_weights, have_diameters) -> Candidate:
    z = prob.full_z(v)
    f = z[3:].copy()
    static = v[0] == 0.0 and v[1] == 0.0 and v[2] == 0.0
    nz = math.sqrt(max(0.0, 1.0 - v[1] ** 2 - v[2] ** 2))
    fw = f[prob.idx]
    power = float(power_weights @ fw**1.5)
    return Candidate(
        kind="static" if static else "spinning", spin_rate_rad_s=float(z[0]),
        n_bar=np.array([v[1], v[2], nz]), thrust_n=f,
        residual=float(np.max(np.abs(prob.residual(v)))), effort_n2=float(fw @ fw),
        power=power, power_in_watts=bool(have_diameters))


def _distinct(cands: list[tuple[Candidate, np.ndarray]]) -> list[tuple[Candidate, np.ndarray]]:
    out: list[tuple[Candidate, np.ndarray]] = []
    for c, v in cands:
        same = False
        for d, _ in out:
            if (c.kind == d.kind and abs(c.spin_rate_rad_s - d.spin_rate_rad_s) <= 1e-6 * (
                    1 + abs(d.spin_rate_rad_s)) and np.max(np.abs(c.n_bar - d.n_bar)) <= 1e-6):
                same = True
                break
        if not same:
            out.append((c, v))
    return out


def _rank_key(c: Candidate, rule: str, best: float):
    obj = c.objective(rule)
    tied = abs(obj - best) <= TIE_TOL * max(abs(best), 1e-300)
    return (best if tied else obj, c.kind != "static", -np.sign(c.spin_rate_rad_s),
            abs(c.spin_rate_rad_s))


def solve(veh: Vehicle, failed=(), thrust_ratio: dict | None = None, hint=None,
          rule: str | None = None, complete: bool = True) -> Equilibrium:
    """The operating point of a vehicle with the given rotors failed: every candidate, one rule.

    Parameters
    ----------
    veh : Vehicle
    failed : sequence of str
        Names of failed rotors.
    thrust_ratio : dict or None
        ``{name: ratio}`` over every working rotor (0 switches a rotor off), or None for the
        rule's member of the free family.
    hint : object
        Accepted for compatibility and ignored: the result depends on the design alone.
    rule : str or None
        One of :data:`RULES`; None takes the design's ``control.operating_point``.
    complete : bool
        False skips the spinning search where the rule has already chosen the static hover
        (``prefer-static`` with positive authority): the same point, without the spinning
        candidates and runner-up (for sweeps).

    Returns
    -------
    Equilibrium
        ``found`` False with a ``reason`` when no candidate lies within the thrust limits.
    """
    del hint
    failed = tuple(failed)
    rule = rule or getattr(veh.design.control, "operating_point", DEFAULT_RULE)
    if rule not in RULES:
        raise ValueError(f"rule: {rule!r} -> one of {', '.join(RULES)}")
    off = tuple(n for n, r in (thrust_ratio or {}).items() if r == 0 and n not in failed)
    prob = _Problem(veh, failed + off)
    authority = static_authority(veh, failed + off)
    common = {"rule": rule, "authority": authority, "switched_off": off}
    if prob.k == 0:
        return _make(veh, failed, thrust_ratio, False, "every rotor has failed", **common)
    if float(np.sum(veh.max_thrust_n[prob.idx])) < prob.mg:
        return _make(veh, failed, thrust_ratio, False,
                     "no equilibrium within the thrust limits: the working rotors' "
                     "max_thrust_n add up to less than the weight m g "
                     f"({np.sum(veh.max_thrust_n[prob.idx]):.4g} N < {prob.mg:.4g} N)",
                     **common)
    weights, have_d = _power_weights(veh, prob.idx)
    obj = _Objective("power" if rule == "least-power" else "effort", weights)
    found: list[tuple[Candidate, np.ndarray]] = []

    def add(v):
        if v is None or not np.all(np.isfinite(v)):
            return
        if v[1] ** 2 + v[2] ** 2 > math.sin(MAX_TILT_RAD) ** 2 * (1 + 1e-9):
            return
        if abs(v[0] * prob.w_s) > MAX_SPIN_RAD_S * (1 + 1e-9):
            return
        f = v[3:]
        if np.any(f < -1e-12) or np.any(f > prob.fmax * (1 + 1e-9)):
            return
        c = _candidate(prob, v, weights, have_d)
        if c.residual <= RESIDUAL_TOL:
            found.append((c, v))

    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        r0, A = prob.linear_part()
        if thrust_ratio:
            r = np.array([thrust_ratio[veh.names[i]] for i in prob.idx], float)
            r = r / r.sum() * prob.k
            P, F, merit = _scan(prob, A, r)
            # the static hover with these ratios, when they allow one
            add(_polish_ratio(prob, np.r_[0.0, 0.0, 0.0, r], r)[0])
            picked = [] if rule == "static-only" else _pick_starts(P, merit,
                                                                    _STARTS_PER_SENSE)
            for v0 in _refine_many(prob, A, [P[i] for i in picked], r):
                add(_polish_ratio(prob, v0, r)[0])
            found = [(c, v) for c, v in found if c.kind == "spinning" or rule != "static-only"]
            # a ratio solution at w = 0 is the static hover
            found = [(_as_static(c, v, prob, weights, have_d), v) for c, v in found]
        else:
            if authority.static_hover:
                add(_static(prob, obj, (r0, A)))
            settled = (rule == "prefer-static" and authority.positive
                       and any(c.kind == "static" for c, _ in found))
            if rule != "static-only" and (complete or not settled):
                P, F, merit = _scan(prob, A, None)
                starts: list[np.ndarray] = []
                slowest = float(_SCAN_SPIN_RAD_S[0] / prob.w_s)
                picked = _pick_starts(P, merit, _STARTS_PER_SENSE)
                at_slowest = [abs(P[i][0]) <= slowest * (1 + 1e-12) for i in picked]
                refined = iter(_refine_many(prob, A, [P[i] for i, sl in
                                                      zip(picked, at_slowest, strict=True)
                                                      if not sl], None))
                for i, sl in zip(picked, at_slowest, strict=True):
                    # a start at the slowest spin of the grid heads for the static hover:
                    # Newton from the grid point itself
                    v0 = np.r_[P[i], F[i]] if sl else next(refined)
                    if any(np.max(np.abs(v0[:3] - u[:3])) < 0.05 for u in starts):
                        continue  # refined into the basin of an earlier start
                    starts.append(v0)
                    add(_newton_kkt(prob, obj, v0, [v for _, v in found]))
    found = _distinct(found)
    if rule == "static-only":
        found = [(c, v) for c, v in found if c.kind == "static"]
    if not found:
        if rule == "static-only":
            why = ("no static hover within the thrust limits 0..max_thrust_n (rule "
                   "static-only excludes spinning equilibria)")
        elif thrust_ratio:
            why = "no equilibrium within the thrust limits 0..max_thrust_n for these thrust ratios"
        else:
            why = ("no equilibrium within the thrust limits 0..max_thrust_n (spin rates up to "
                   f"{MAX_SPIN_RAD_S:g} rad/s and spin-axis tilts up to "
                   f"{math.degrees(MAX_TILT_RAD):g} deg searched, both senses)")
        return _make(veh, failed, thrust_ratio, False, why, **common)
    cands = [c for c, _ in found]
    vs = {id(c): v for c, v in found}
    best = min(c.objective(rule) for c in cands)
    ordered = sorted(cands, key=lambda c: _rank_key(c, rule, best))
    static = [c for c in cands if c.kind == "static"]
    if rule == "prefer-static" and static and authority.positive:
        chosen = static[0]
        why = (f"static hover: its available control authority is positive "
               f"({authority.index:.4g})")
    else:
        chosen = ordered[0]
        what = {"prefer-static": "least effort (sum of squared thrusts)",
                "least-effort": "least effort (sum of squared thrusts)",
                "least-power": "least induced power (momentum theory)",
                "static-only": "static hover"}[rule]
        why = f"{what} of {len(cands)} candidate(s)"
        if rule == "prefer-static":
            why += (" (static hover authority not positive: "
                    f"{authority.index:.4g})" if not static else
                    " (static hover exists but its authority is not positive)")
    obj_rule = "least-power" if rule == "least-power" else "least-effort"
    others = sorted((c for c in cands if c is not chosen), key=lambda c: c.objective(obj_rule))
    runner = None
    if others and others[0].objective(obj_rule) <= chosen.objective(obj_rule) * (
            1 + RUNNER_UP_FRACTION):
        runner = others[0]
    other = None if not others else (float(others[0].spin_rate_rad_s),
                                     float(others[0].effort_n2 / prob.f_s**2))
    v = vs[id(chosen)]
    return _make(veh, failed, thrust_ratio, True, "", prob.full_z(v), chosen.residual,
                 other_sense=other, chosen_by=why, runner_up=runner,
                 candidates=tuple(sorted(cands, key=lambda c: c.objective(obj_rule))),
                 **common)


def _as_static(c: Candidate, v: np.ndarray, prob: _Problem, weights, have_d) -> Candidate:
    """A fixed-ratio solution at rest (|w| and tilt at rounding level) is the static hover."""
    if c.kind == "spinning" and abs(v[0]) < 1e-12 and abs(v[1]) < 1e-12 and abs(v[2]) < 1e-12:
        v[:3] = 0.0
        return _candidate(prob, v, weights, have_d)
    return c


@dataclass(frozen=True, repr=False)
class OperatingPoints:
    """Static-hover authority and the operating point chosen, one row per case.

    Attributes
    ----------
    equilibria : tuple of Equilibrium
    """

    equilibria: tuple

    def __repr__(self) -> str:
        return f"<OperatingPoints: {len(self.equilibria)} case(s)>"

    def rows(self) -> list[tuple]:
        out = []
        for eq in self.equilibria:
            a = eq.authority
            per = a.per_axis if a is not None else np.full(4, np.nan)
            ru = eq.runner_up
            out.append((
                eq.label, None if a is None else a.static_hover,
                None if a is None else a.index, *[float(v) for v in per],
                ("static" if eq.static else f"spinning {eq.spin_rate_rad_s:+.4g} rad/s")
                if eq.found else "none",
                eq.chosen_by or eq.reason,
                None if ru is None else f"{ru.kind}, spin {ru.spin_rate_rad_s:+.4g} rad/s, "
                f"effort {ru.effort_n2:.4g} N^2"))
        return out

    def to_dict(self) -> list[dict]:
        keys = ("case", "static_hover_exists", "static_authority_index", "thrust_n",
                "roll_n_m", "pitch_n_m", "yaw_n_m", "operating_point", "chosen_by",
                "runner_up")
        return [dict(zip(keys, r, strict=True)) for r in self.rows()]

    def _repr_html_(self) -> str:
        from kit.analysis.htmltable import table

        rule = self.equilibria[0].rule if self.equilibria else DEFAULT_RULE
        return table(["case", "static hover exists", "authority index",
                      "thrust authority (N)", "roll (N m)", "pitch (N m)", "yaw (N m)",
                      "operating point", f"chosen by (rule {rule})", "runner-up within 5 %"],
                     self.rows(), "Static-hover control authority and the operating point")


def failure_sets(veh: Vehicle) -> list[tuple[str, ...]]:
    """The failure sets named by ``review.failure_sets``, in file order."""
    names = veh.names
    mode = veh.design.review.failure_sets
    out: list[tuple[str, ...]] = []
    if mode in ("single", "single+pairs"):
        out += [(n,) for n in names]
    if mode in ("pairs", "single+pairs"):
        out += [(a, b) for i, a in enumerate(names) for b in names[i + 1:]]
    return out


def all_cases(veh: Vehicle) -> list[tuple[tuple[str, ...], dict | None]]:
    """No-failure case, the review's failure sets, then the design's failure cases."""
    cases: list[tuple[tuple[str, ...], dict | None]] = [((), None)]
    cases += [(s, None) for s in failure_sets(veh)]
    fc: FailureCase
    for fc in veh.design.failure_cases:
        key = (tuple(fc.failed), fc.ratio_dict())
        same = [c for c in cases if set(c[0]) == set(key[0]) and c[1] == key[1]]
        if not same:
            cases.append(key)
    return cases
