r"""Static control authority: the available control authority index of a hover, per failure set.

The thrust and body torques of the working rotors' thrusts ``f`` (allocation of
:mod:`kit.analysis.hover`) fill the attainable set

.. math::

    \Omega = \{ B f : f_{\min} \le f \le f_{\max} \} \subset \mathbb R^4, \qquad
    B_{\cdot i} = (1, y_i, -x_i, -s_i \kappa_i)^{\mathsf T},

a zonotope with generators ``(f_max,i - f_min,i) b_i`` about its centre
``c = B (f_min + f_max) / 2``. Every facet of a zonotope in ``R^4`` is parallel to three
generators; its unit normal ``xi`` is orthogonal to them and its distance from the centre is
``delta(xi) = 1/2 sum_i |xi^T b_i| (f_max,i - f_min,i)``. The available control authority
index of the hover point ``G = (m g, 0, 0, 0)`` is the smallest signed distance from ``G`` to a
facet hyperplane,

.. math::

    \rho(G, \partial\Omega) = \min_{\xi} \Big( \delta(\xi) - |\xi^{\mathsf T} (G - c)| \Big),

positive when ``G`` lies inside ``Omega`` (a non-spinning hover with every working thrust
strictly inside its limits exists and every small thrust-and-torque demand can be met), zero
on the boundary (a static hover exists only with some rotor at a limit) and negative outside.
Its units are those of the mixed space (N for thrust, N m for torques), as in the paper.
The authority about each axis is the distance from ``G`` to the boundary along ``+e_j`` and
``-e_j`` (the smaller of the two), from the same facets: ``min over facets with
xi^T u > 0 of (h(xi) - xi^T G) / xi^T u``, ``h`` the support function.

References
----------
G.-X. Du, Q. Quan, B. Yang, K.-Y. Cai, "Controllability analysis for multirotor helicopter
rotor degradation and failure", J. Guidance, Control, and Dynamics 38(5), 2015, sec. III
(available control authority index; from memory). G.-X. Du, Q. Quan, K.-Y. Cai,
"Controllability analysis and degraded control for a class of hexacopters subject to rotor
failures", J. Intelligent & Robotic Systems, 2015 (from memory). G. M. Ziegler's polytope
textbook, Springer Graduate Texts in Mathematics 152, 1995, sec. 7.3 (zonotopes and their
facets; from memory).
"""

from __future__ import annotations

import functools
import itertools
import math
from dataclasses import dataclass

import numpy as np
from scipy.optimize import lsq_linear

from kit.analysis.hover import allocation_matrix
from kit.analysis.vehicle import Vehicle

#: Axes of the attainable set, in order.
AXES = ("thrust", "roll", "pitch", "yaw")
#: Units of the per-axis authority, in the order of :data:`AXES`.
AXIS_UNITS = ("N", "N m", "N m", "N m")
#: An index above this fraction of the weight counts as positive (rounding of the facet sums).
POSITIVE_TOL = 1e-9


@dataclass(frozen=True, repr=False)
class StaticAuthority:
    """Static-hover control authority of one failure set.

    Attributes
    ----------
    failed : tuple of str
        Failed (or switched-off) rotors.
    index : float
        Available control authority index rho (signed; N and N m mixed, as in the paper).
    per_axis : ndarray (4,)
        Distance from the hover point to the boundary along thrust (N), roll, pitch and yaw
        torque (N m), the smaller of the two directions; 0 where no static hover exists
        strictly inside the limits.
    static_hover : bool
        A non-spinning hover exists within the thrust limits (``index >= 0``).
    rank : int
        Rank of the working rotors' allocation matrix.
    weight_n : float
        The hover point's thrust m g, in N.
    """

    failed: tuple[str, ...]
    index: float
    per_axis: np.ndarray
    static_hover: bool
    rank: int
    weight_n: float

    @property
    def positive(self) -> bool:
        """The index is positive: a static hover keeps authority about every axis."""
        return bool(self.index > POSITIVE_TOL * self.weight_n)

    def __repr__(self) -> str:
        return (f"<StaticAuthority {list(self.failed)}: index {self.index:.4g}, static hover "
                f"{'exists' if self.static_hover else 'none'}>")

    def to_dict(self) -> dict:
        return {
            "static_hover_exists": self.static_hover,
            "static_authority_index": float(self.index),
            "static_authority_positive": self.positive,
            "static_authority_per_axis": {
                f"{a}_{u.replace(' ', '_').lower()}": float(v)
                for a, u, v in zip(AXES, AXIS_UNITS, self.per_axis, strict=True)},
            "allocation_rank_working": int(self.rank),
        }


def facets(B: np.ndarray, f_min: np.ndarray, f_max: np.ndarray) -> tuple[np.ndarray, ...]:
    """Facet normals and half-widths of the zonotope ``{B f : f_min <= f <= f_max}`` in R^4.

    Parameters
    ----------
    B : ndarray (4, k)
        Allocation of the working rotors (N per N and N m per N).
    f_min, f_max : ndarray (k,)
        Thrust limits, in N.

    Returns
    -------
    normals : ndarray (m, 4)
        Unit normals (one per facet pair, ``+xi`` and ``-xi``).
    half_width : ndarray (m,)
        ``delta(xi)``: distance of both facets of the pair from the centre.
    centre : ndarray (4,)
    """
    B = np.asarray(B, float)
    k = B.shape[1]
    width = np.asarray(f_max, float) - np.asarray(f_min, float)
    centre = B @ ((np.asarray(f_max, float) + np.asarray(f_min, float)) / 2)
    if k < 3:
        return np.zeros((0, 4)), np.zeros(0), centre
    tri = np.array(list(itertools.combinations(range(k), 3)))
    V = B[:, tri].transpose(1, 0, 2)  # (m, 4, 3)
    # generalised cross product: xi_r = (-1)^r det(V without row r)
    rows = [np.delete(np.arange(4), r) for r in range(4)]
    normals = np.stack([(-1) ** r * np.linalg.det(V[:, rows[r], :]) for r in range(4)], axis=1)
    size = np.prod(np.linalg.norm(V, axis=1), axis=1)
    norm = np.linalg.norm(normals, axis=1)
    keep = norm > 1e-10 * np.maximum(size, 1e-300)
    normals = normals[keep] / norm[keep, None]
    half = 0.5 * np.abs(normals @ B) @ width
    return normals, half, centre


def authority_index(B, f_min, f_max, G) -> float:
    """The available control authority index rho of ``G`` (signed), for full-rank ``B``.

    Parameters
    ----------
    B : ndarray (4, k)
    f_min, f_max : ndarray (k,)
        Thrust limits, in N.
    G : ndarray (4,)
        The demanded thrust and torques, (N, N m, N m, N m).
    """
    normals, half, centre = facets(B, f_min, f_max)
    if normals.shape[0] == 0:
        return -math.inf
    return float(np.min(half - np.abs(normals @ (np.asarray(G, float) - centre))))


def axis_distances(B, f_min, f_max, G) -> tuple[np.ndarray, np.ndarray]:
    """Distances from ``G`` (inside the set) to the boundary along ``+e_j`` and ``-e_j``."""
    normals, half, centre = facets(B, f_min, f_max)
    xi = np.vstack([normals, -normals])
    slack = np.r_[half, half] - xi @ (np.asarray(G, float) - centre)  # >= 0 inside
    up = np.full(4, np.inf)
    down = np.full(4, np.inf)
    for j in range(4):
        a = xi[:, j]
        pos, neg = a > 1e-12, a < -1e-12
        if np.any(pos):
            up[j] = float(np.min(slack[pos] / a[pos]))
        if np.any(neg):
            down[j] = float(np.min(slack[neg] / -a[neg]))
    return np.maximum(up, 0.0), np.maximum(down, 0.0)


def static_authority(veh: Vehicle, failed=()) -> StaticAuthority:
    """Static-hover authority of a vehicle with the named rotors failed (or switched off).

    Parameters
    ----------
    veh : Vehicle
    failed : sequence of str
        Names of rotors that give no thrust.
    """
    failed = tuple(failed)
    work = veh.working_mask(failed)
    W = veh.weight_n
    B = allocation_matrix(veh)[:, work]
    fmax = veh.max_thrust_n[work]
    # a function of the working allocation, the limits and the weight alone (not of the wheel
    # momentum or the case): one computation per distinct set, for the many cases of a study
    # (the memory order is part of the key: the facet sums' rounding follows it)
    fortran = bool(B.flags.f_contiguous and not B.flags.c_contiguous)
    return _static_authority(failed, B.tobytes(), B.shape, fortran, fmax.tobytes(), float(W))


@functools.lru_cache(maxsize=4096)
def _static_authority(failed: tuple, b_bytes: bytes, b_shape: tuple, fortran: bool,
                      fmax_bytes: bytes, W: float) -> StaticAuthority:
    B = np.frombuffer(b_bytes).reshape(b_shape)
    B = np.asfortranarray(B) if fortran else B.copy()
    fmax = np.frombuffer(fmax_bytes).copy()
    G = np.array([W, 0.0, 0.0, 0.0])
    fmin = np.zeros_like(fmax)
    k = B.shape[1]
    rank = int(np.linalg.matrix_rank(B)) if k else 0
    if rank == 4:
        rho = authority_index(B, fmin, fmax, G)
        exists = bool(rho >= -POSITIVE_TOL * W)
        if rho > POSITIVE_TOL * W:
            up, down = axis_distances(B, fmin, fmax, G)
            per_axis = np.minimum(up, down)
        else:
            per_axis = np.zeros(4)
        return StaticAuthority(failed, rho, per_axis, exists, rank, W)
    # a flat attainable set: no interior, so the index is 0 where G lies in it, and minus the
    # distance to it otherwise
    if k == 0:
        return StaticAuthority(failed, -W, np.zeros(4), False, 0, W)
    sol = lsq_linear(B, G, bounds=(fmin, fmax), method="bvls")
    dist = float(np.linalg.norm(B @ sol.x - G))
    exists = dist <= 1e-9 * W
    return StaticAuthority(failed, 0.0 if exists else -dist, np.zeros(4), exists, rank, W)
