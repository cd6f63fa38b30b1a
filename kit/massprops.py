r"""Mass properties: total mass, centre of mass, inertia about the CoM, principal axes.

Each part's inertia about its own centre comes from the handbook formulas for homogeneous bodies,
then moves to the vehicle's centre of mass by the parallel-axis theorem (Steiner):

.. math::

    \mathbf{J} = \sum_k \left[ \mathbf{J}_k + m_k \left( (\mathbf{d}_k\cdot\mathbf{d}_k)\,
    \mathbf{1} - \mathbf{d}_k \mathbf{d}_k^{\mathsf T} \right) \right]
    + \sum_i I_{P,i}\, \mathbf{e}_z \mathbf{e}_z^{\mathsf T},
    \qquad \mathbf{d}_k = \mathbf{c}_k - \mathbf{c}

with the rotors' spin-axis inertia added about their own axes (DESIGN.md, "Inertia"). Matrix
entries are tensor entries (products of inertia enter with a minus sign, ``J_xy = -sum m x y``).

Shapes, about their centre, ``a`` the symmetry axis (Beer & Johnston, Vector Mechanics for
Engineers: Dynamics, 9th ed., Fig. 9.28; Meriam & Kraige, Engineering Mechanics: Dynamics,
7th ed., Table D/4 -- editions from memory):

========  ==========================  ================================
shape     axial                       transverse
========  ==========================  ================================
point     0                           0
box       m(b^2+c^2)/12 per axis      (sizes b, c of the other two)
cylinder  m r^2 / 2                   m (3 r^2 + L^2) / 12
tube      m (r1^2 + r2^2) / 2         m (3 (r1^2 + r2^2) + L^2) / 12
rod       0                           m L^2 / 12
sphere    2/5 m r^2                   2/5 m r^2
disc      m r^2 / 2                   m r^2 / 4
========  ==========================  ================================

References
----------
Beer, Johnston, Cornwell: Vector Mechanics for Engineers: Dynamics, 9th ed., sec. 9.11-9.18 and
Fig. 9.28 (from memory). Meriam & Kraige, Engineering Mechanics: Dynamics, Table D/4 (from memory).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from kit.design import Design, Part

_AXIS_INDEX = {"x": 0, "y": 1, "z": 2}


@dataclass(frozen=True)
class Item:
    """A mass element of the mass-property sum: mass, centre, inertia about its own centre."""

    name: str
    mass_kg: float
    position_m: np.ndarray
    inertia_kg_m2: np.ndarray


@dataclass(frozen=True)
class MassProperties:
    """Mass properties of the whole vehicle, body axes at the design frame's orientation.

    Attributes
    ----------
    mass_kg : float
        Total mass, in kg.
    com_m : ndarray (3,)
        Centre of mass in the design frame, in m.
    inertia_kg_m2 : ndarray (3, 3)
        Inertia about the CoM, rotors' spin inertia included, in kg m^2.
    principal_moments_kg_m2 : ndarray (3,)
        Ascending principal moments, in kg m^2.
    principal_axes : ndarray (3, 3)
        Columns are the unit principal axes, right-handed (det = +1).
    rotor_positions_m : ndarray (N, 3)
        Rotor hubs about the CoM, in m.
    wheel_position_m : ndarray (3,) or None
        Wheel centre about the CoM, in m.
    items : tuple of Item
        Parts (and rotor and wheel masses) with their contribution, for tables.
    computed_inertia_kg_m2 : ndarray (3, 3) or None
        The inertia computed from parts (rotor and wheel spin inertia included), even when a
        measured one replaces it (for the 10 % check); None when there is nothing to compute from.
    warnings : tuple of str
        Plausibility warnings (CoM far from the rotors' centroid, measured vs computed inertia).
    """

    mass_kg: float
    com_m: np.ndarray
    inertia_kg_m2: np.ndarray
    principal_moments_kg_m2: np.ndarray
    principal_axes: np.ndarray
    rotor_positions_m: np.ndarray
    wheel_position_m: np.ndarray | None
    items: tuple[Item, ...]
    computed_inertia_kg_m2: np.ndarray | None
    warnings: tuple[str, ...] = ()

    def to_dict(self) -> dict:
        """Plain-JSON form with stable keys, SI."""
        return {
            "mass_kg": float(self.mass_kg),
            "com_m": [float(v) for v in self.com_m],
            "inertia_kg_m2": [[float(v) for v in row] for row in self.inertia_kg_m2],
            "principal_moments_kg_m2": [float(v) for v in self.principal_moments_kg_m2],
            "principal_axes": [[float(v) for v in row] for row in self.principal_axes],
        }

    def contribution_kg_m2(self) -> list[tuple[str, float, np.ndarray]]:
        """Each item's inertia about the vehicle CoM (diagonal), for the parts table."""
        out = []
        for it in self.items:
            d = it.position_m - self.com_m
            J = it.inertia_kg_m2 + it.mass_kg * (d @ d * np.eye(3) - np.outer(d, d))
            out.append((it.name, it.mass_kg, np.diag(J).copy()))
        return out


def shape_inertia(part: Part) -> np.ndarray:
    """Inertia of a homogeneous part about its own centre, in kg m^2 (table in module docstring).

    Parameters
    ----------
    part : Part
        A validated part (mass in kg, lengths in m).
    """
    m = part.mass_kg
    s = part.shape
    if s == "point":
        return np.zeros((3, 3))
    if s == "box":
        a, b, c = part.size_m
        return m / 12.0 * np.diag([b * b + c * c, a * a + c * c, a * a + b * b])
    if s == "sphere":
        return 0.4 * m * part.radius_m**2 * np.eye(3)
    if s == "cylinder":
        r, L = part.radius_m, part.length_m
        axial, trans = 0.5 * m * r * r, m * (3 * r * r + L * L) / 12.0
    elif s == "tube":
        r2 = part.outer_radius_m**2 + part.inner_radius_m**2
        L = part.length_m
        axial, trans = 0.5 * m * r2, m * (3 * r2 + L * L) / 12.0
    elif s == "rod":
        axial, trans = 0.0, m * part.length_m**2 / 12.0
    elif s == "disc":
        axial, trans = 0.5 * m * part.radius_m**2, 0.25 * m * part.radius_m**2
    else:  # pragma: no cover - design validation forbids other shapes
        raise ValueError(f"unknown shape {s!r}")
    diag = np.full(3, trans)
    diag[_AXIS_INDEX[part.axis]] = axial
    return np.diag(diag)


def part_inertia(part: Part) -> np.ndarray:
    """Inertia of a part about its centre in design axes: :func:`shape_inertia` turned by
    ``yaw_deg`` about z, ``R J R^T`` (rotation of a second-order tensor).

    Parameters
    ----------
    part : Part
        A validated part (mass in kg, lengths in m, yaw in degrees).
    """
    J = shape_inertia(part)
    if part.yaw_deg:
        a = math.radians(part.yaw_deg)
        c, s = math.cos(a), math.sin(a)
        R = np.array([[c, -s, 0.0], [s, c, 0.0], [0.0, 0.0, 1.0]])
        J = R @ J @ R.T
    return J


def combine(items: list[Item] | tuple[Item, ...]) -> tuple[float, np.ndarray, np.ndarray]:
    """Total mass, CoM and inertia about the CoM of mass elements (parallel-axis theorem).

    Parameters
    ----------
    items : sequence of Item
        Mass elements: mass in kg, centre in m, inertia about the centre in kg m^2.

    Returns
    -------
    mass_kg, com_m (3,), inertia_kg_m2 (3, 3)
    """
    if not items:
        raise ValueError("combine() needs at least one mass element")
    mass = float(sum(it.mass_kg for it in items))
    com = sum(it.mass_kg * it.position_m for it in items) / mass
    J = np.zeros((3, 3))
    for it in items:
        d = it.position_m - com
        J += it.inertia_kg_m2 + it.mass_kg * (d @ d * np.eye(3) - np.outer(d, d))
    return mass, com, 0.5 * (J + J.T)


def principal(J: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Ascending principal moments and right-handed unit principal axes (columns).

    Each axis is signed so that its largest component is positive, then the third is flipped if
    needed to make det = +1, so the result is reproducible.

    Parameters
    ----------
    J : ndarray (3, 3)
        Symmetric inertia tensor, in kg m^2.
    """
    w, V = np.linalg.eigh(0.5 * (J + J.T))
    for k in range(3):
        if V[np.argmax(np.abs(V[:, k])), k] < 0:
            V[:, k] = -V[:, k]
    if np.linalg.det(V) < 0:
        V[:, 2] = -V[:, 2]
    return w, V


def items_of(design: Design) -> list[Item]:
    """Every mass element of the design: parts, rotor point masses, the wheel's mass.

    Parameters
    ----------
    design : Design
        A validated design.
    """
    items = [
        Item(p.name, p.mass_kg, np.asarray(p.position_m, float), part_inertia(p))
        for p in design.parts
    ]
    for r in design.rotors:
        if r.mass_kg:
            items.append(Item(f"rotor {r.name}", r.mass_kg, np.asarray(r.position_m, float),
                              np.zeros((3, 3))))
    if design.wheel is not None:
        w = design.wheel
        items.append(Item("wheel", w.mass_kg, np.asarray(w.position_m, float), np.zeros((3, 3))))
    return items


def spin_inertia(design: Design) -> np.ndarray:
    """Spin-axis inertia of rotors and wheel about body z, as a 3x3 tensor, in kg m^2.

    Parameters
    ----------
    design : Design
        A validated design.
    """
    total = sum(r.rotor_inertia_kg_m2 for r in design.rotors)
    if design.wheel is not None:
        total += design.wheel.inertia_kg_m2
    out = np.zeros((3, 3))
    out[2, 2] = total
    return out


def compute(design: Design) -> MassProperties:
    """Mass properties of a design, measured ``[body]`` values replacing computed ones.

    Parameters
    ----------
    design : Design
        A validated design.

    Notes
    -----
    A measured ``[body].inertia_kg_m2`` is the whole vehicle's, rotors (and wheel) included, taken
    with them stopped (DESIGN.md, "Inertia"): it replaces J as it stands. Their spin-axis inertia
    is already in it, so it is added only to the inertia computed from parts. The wheel is
    treated like a rotor: its mass is a point at its centre, its spin inertia about body z is part
    of J, and its relative momentum is ``h`` of the wheel study.
    """
    items = items_of(design)
    warns: list[str] = []
    computed_J = None
    if items:
        mass, com, J = combine(items)
        J = J + spin_inertia(design)
        computed_J = J
    body = design.body
    if body is not None:
        if body.mass_kg is not None:
            mass = body.mass_kg
        if body.com_m is not None:
            com = np.asarray(body.com_m, float)
        if body.inertia_kg_m2 is not None:
            J = np.asarray(body.inertia_kg_m2, float)
            if design.parts and computed_J is not None:
                rel = np.linalg.norm(J - computed_J) / np.linalg.norm(J)
                if rel > 0.10:
                    warns.append(
                        f"body.inertia_kg_m2 differs from the inertia computed from parts by "
                        f"{100 * rel:.0f} % (Frobenius norm; over 10 %): check the parts or the "
                        "measurement"
                    )
    hubs = np.array([r.position_m for r in design.rotors], float)
    centroid = hubs[:, :2].mean(axis=0)
    span = max(float(np.max(np.linalg.norm(hubs[:, :2] - centroid, axis=1))), 1e-9)
    offset = float(np.linalg.norm(com[:2] - centroid))
    if offset > 0.25 * span:
        warns.append(
            f"centre of mass is {offset:.3f} m from the rotors' centroid (over 25 % of the "
            f"{span:.3f} m hub radius): hover needs very unequal thrusts"
        )
    moments, axes = principal(J)
    wheel_pos = None
    if design.wheel is not None:
        wheel_pos = np.asarray(design.wheel.position_m, float) - com
    return MassProperties(
        mass_kg=float(mass),
        com_m=np.asarray(com, float),
        inertia_kg_m2=J,
        principal_moments_kg_m2=moments,
        principal_axes=axes,
        rotor_positions_m=hubs - com,
        wheel_position_m=wheel_pos,
        items=tuple(items),
        computed_inertia_kg_m2=computed_J,
        warnings=tuple(warns),
    )


def rotor_table(design: Design, mp: MassProperties) -> list[dict]:
    """Rotors as plain JSON: name, hub position about the CoM (m), spin ("ccw" or "cw").

    Parameters
    ----------
    design : Design
        A validated design.
    mp : MassProperties
        Its mass properties (hubs about the CoM).
    """
    return [
        {"name": r.name, "position_m": [float(x) for x in pos],
         "spin": "ccw" if r.spin > 0 else "cw"}
        for r, pos in zip(design.rotors, mp.rotor_positions_m, strict=True)
    ]


def tilt_deg(axis: np.ndarray) -> float:
    """Angle between a unit vector and body z, in degrees (for tables).

    Parameters
    ----------
    axis : ndarray (3,)
        A unit vector in body axes.
    """
    return math.degrees(math.acos(max(-1.0, min(1.0, abs(float(axis[2]))))))
