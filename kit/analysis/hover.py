r"""Hover: allocation, nominal thrusts, thrust-to-weight, torque margins, induced power.

Allocation (DESIGN.md signs): the collective thrust and body torques of thrusts ``f`` are

.. math::

    \begin{bmatrix} T \\ \tau_x \\ \tau_y \\ \tau_z \end{bmatrix} = M f, \qquad
    M_{\cdot i} = \begin{bmatrix} 1 \\ y_i \\ -x_i \\ -s_i \kappa_i \end{bmatrix}

(``r_i x f_i e_z = (y_i f_i, -x_i f_i, 0)``). Nominal hover thrusts are the least-effort
solution of ``M f = (m g, 0, 0, 0)`` within ``0 <= f <= f_max``. The largest torque about each
axis while holding the weight is a linear programme (maximise ``tau_j`` subject to ``T = m g``,
the other torques zero, thrust limits). Induced hover power by momentum theory,

.. math::

    P_i = \frac{f_i^{3/2}}{\sqrt{2 \rho A_i}}, \qquad A_i = \pi d_i^2 / 4 .

References
----------
J. G. Leishman, Principles of Helicopter Aerodynamics, 2nd ed., Cambridge 2006, ch. 2
(momentum theory in hover; eq. 2.15 from memory). scipy.optimize.linprog (HiGHS).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy.optimize import linprog, lsq_linear

from kit.analysis.vehicle import Vehicle


@dataclass(frozen=True, repr=False)
class Hover:
    """Hover figures of a design (no failure).

    Attributes
    ----------
    allocation : ndarray (4, N)
        Rows: thrust (N per N), roll, pitch, yaw torque (N m per N).
    allocation_rank : int
    thrust_n : ndarray (N,)
        Nominal hover thrusts, in N.
    thrust_to_weight : float
    hover_thrust_fraction : float
        Largest f_i / f_max,i in hover.
    torque_max_n_m, torque_min_n_m : ndarray (3,)
        Largest and smallest torque about x, y, z while holding the weight, in N m.
    induced_power_w : float or None
        Total induced hover power (momentum theory), in W; None without rotor diameters.
    """

    names: tuple[str, ...]
    allocation: np.ndarray
    allocation_rank: int
    thrust_n: np.ndarray
    max_thrust_n: np.ndarray
    weight_n: float
    thrust_to_weight: float
    hover_thrust_fraction: float
    torque_max_n_m: np.ndarray
    torque_min_n_m: np.ndarray
    induced_power_w: float | None
    feasible: bool

    def __repr__(self) -> str:
        return (f"<Hover: T/W {self.thrust_to_weight:.4g}, hover fraction "
                f"{self.hover_thrust_fraction:.4g}, rank {self.allocation_rank}>")

    @property
    def torque_margin_n_m(self) -> np.ndarray:
        """Smaller of the positive and negative torque authority per axis, in N m."""
        return np.minimum(self.torque_max_n_m, -self.torque_min_n_m)

    def to_dict(self) -> dict:
        return {
            "thrust_n": {n: float(f) for n, f in zip(self.names, self.thrust_n, strict=True)},
            "thrust_to_weight": float(self.thrust_to_weight),
            "hover_thrust_fraction": float(self.hover_thrust_fraction),
            "allocation_rank": int(self.allocation_rank),
            "allocation": self.allocation.tolist(),
            "torque_margin_n_m": [float(v) for v in self.torque_margin_n_m],
            "torque_max_n_m": [float(v) for v in self.torque_max_n_m],
            "torque_min_n_m": [float(v) for v in self.torque_min_n_m],
            "induced_power_w": None if self.induced_power_w is None else float(
                self.induced_power_w),
            "feasible": self.feasible,
        }

    def _repr_html_(self) -> str:
        from kit.analysis.htmltable import hover_html

        return hover_html(self)


def allocation_matrix(veh: Vehicle) -> np.ndarray:
    """Allocation matrix M (4 x N): thrust and roll, pitch, yaw torque per newton of thrust."""
    pos = veh.mp.rotor_positions_m
    return np.vstack([np.ones(veh.n), pos[:, 1], -pos[:, 0], -veh.spin * veh.kappa])


def induced_power_w(thrust_n: np.ndarray, diameters_m, rho: float) -> float | None:
    """Total induced power P = sum f^1.5 / sqrt(2 rho A), in W (None if a diameter is missing)."""
    if any(d is None for d in diameters_m):
        return None
    area = math.pi * np.asarray(diameters_m, float) ** 2 / 4.0
    return float(np.sum(np.maximum(thrust_n, 0.0) ** 1.5 / np.sqrt(2.0 * rho * area)))


def _torque_extreme(M, b_rows, fmax, axis: int, sign: float) -> float:
    """Max (sign=+1) or min (sign=-1) torque about ``axis`` with T = m g, other torques zero."""
    c = np.zeros(M.shape[1])
    c[:] = -sign * M[1 + axis]
    keep = [0] + [1 + j for j in range(3) if j != axis]
    res = linprog(c, A_eq=M[keep], b_eq=b_rows[keep], bounds=list(zip(0 * fmax, fmax, strict=True)),
                  method="highs")
    if res.status != 0:
        return 0.0
    return float(M[1 + axis] @ res.x)


def analyse_hover(veh: Vehicle) -> Hover:
    """Hover analysis of a vehicle with every rotor working."""
    M = allocation_matrix(veh)
    W = veh.weight_n
    b = np.array([W, 0.0, 0.0, 0.0])
    fmax = veh.max_thrust_n
    rank = int(np.linalg.matrix_rank(M))
    # least effort: minimum-norm solution, then bounded least squares on the constraint residual
    f = np.linalg.lstsq(M, b, rcond=None)[0]
    feasible = bool(np.allclose(M @ f, b, rtol=1e-9, atol=1e-9 * W))
    if not feasible or np.any(f < 0) or np.any(f > fmax):
        sol = lsq_linear(M, b, bounds=(np.zeros(veh.n), fmax), method="bvls")
        f = sol.x
        feasible = bool(np.allclose(M @ f, b, atol=1e-6 * W))
    tmax = np.array([_torque_extreme(M, b, fmax, j, +1.0) for j in range(3)])
    tmin = np.array([_torque_extreme(M, b, fmax, j, -1.0) for j in range(3)])
    diam = [r.diameter_m for r in veh.design.rotors]
    return Hover(
        names=veh.names, allocation=M, allocation_rank=rank, thrust_n=f, max_thrust_n=fmax,
        weight_n=W, thrust_to_weight=float(fmax.sum() / W),
        hover_thrust_fraction=float(np.max(f / fmax)), torque_max_n_m=tmax, torque_min_n_m=tmin,
        induced_power_w=induced_power_w(f, diam, veh.design.air_density_kg_m3), feasible=feasible,
    )
