"""Sanity warnings on a valid design: numbers that are allowed but deserve a second look.

Each check returns text lines (warnings, never errors). The thresholds and their sources:

- **Overlapping propeller discs** (plan view). Two rotors of diameters :math:`D_1, D_2` with hubs
  :math:`d` apart in x-y overlap when :math:`d < (D_1 + D_2)/2`; a coaxial pair (same hub x-y,
  opposite spins, one above the other) is accepted as such. Geometry, exact.
- **Thrust coefficient** :math:`C_T = T / (\\rho n^2 D^4)` with :math:`n` in rev/s, so from
  :math:`T = k_f \\omega^2`,

  .. math::

      C_T = \\frac{4 \\pi^2 k_f}{\\rho D^4}, \\qquad
      \\frac{C_Q}{C_T} = \\frac{\\kappa}{D}

  (:math:`C_Q = Q / (\\rho n^2 D^5)`, :math:`Q = \\kappa T`). Usual ranges for small propellers:
  :data:`CT_RANGE` and :data:`CQ_OVER_CT_RANGE` (common practice, no source).
- **Rotor inertia**: geometrically similar propellers of one material have
  :math:`I \\propto m D^2 \\propto D^5`; :math:`I / D^5` outside :data:`INERTIA_PER_D5_RANGE`
  kg/m^3 is implausible (band common practice, no source).
- **CoM far from the rotor plane**: more than :data:`MAX_COM_OFFSET_OF_HUB_RADIUS` of the mean
  hub radius above or below the mean hub height (common practice, no source).

References
----------
Leishman, J. G., *Principles of Helicopter Aerodynamics*, 2nd ed., Cambridge University Press,
2006, section 2.2 (thrust and torque coefficients; the propeller convention with n in rev/s is
used here) (from memory).
"""

from __future__ import annotations

import math

#: Usual thrust coefficient C_T = T / (rho n^2 D^4), n in rev/s (common practice, no source).
CT_RANGE = (0.05, 0.2)
#: Usual C_Q / C_T = torque_per_thrust_m / diameter_m (common practice, no source).
CQ_OVER_CT_RANGE = (0.02, 0.1)
#: Plausible rotor_inertia_kg_m2 / diameter_m^5, kg/m^3 (common practice, no source).
INERTIA_PER_D5_RANGE = (1e-3, 1.0)
#: Largest CoM height above/below the rotor plane, as a fraction of the mean hub radius (common
#: practice, no source).
MAX_COM_OFFSET_OF_HUB_RADIUS = 0.5
#: Hubs closer than this in x-y are "the same hub" (coaxial), m.
COAXIAL_TOLERANCE_M = 1e-6


def thrust_coefficient(thrust_coeff_n_s2: float, diameter_m: float,
                       air_density_kg_m3: float) -> float:
    """C_T = 4 pi^2 k_f / (rho D^4) (module equation).

    Parameters
    ----------
    thrust_coeff_n_s2 : float
        k_f in T = k_f omega^2, in N s^2.
    diameter_m : float
        Propeller diameter, in m.
    air_density_kg_m3 : float
        Air density, in kg/m^3.
    """
    return 4.0 * math.pi ** 2 * thrust_coeff_n_s2 / (air_density_kg_m3 * diameter_m ** 4)


def disc_overlap_m(p, q, diameter_p_m: float, diameter_q_m: float) -> float:
    """Overlap of two propeller discs in plan view, (D_p + D_q)/2 - d, in m (> 0 overlaps).

    Parameters
    ----------
    p, q : sequence of float
        Hub positions, in m (x, y used).
    diameter_p_m, diameter_q_m : float
        Propeller diameters, in m.
    """
    return 0.5 * (diameter_p_m + diameter_q_m) - math.dist(p[:2], q[:2])


def is_coaxial_pair(a, b) -> bool:
    """Same hub x-y, opposite spins, one above the other (rotors as :class:`kit.design.Rotor`).

    Parameters
    ----------
    a, b : Rotor
        The two rotors.
    """
    return (math.dist(a.position_m[:2], b.position_m[:2]) < COAXIAL_TOLERANCE_M
            and a.spin == -b.spin and abs(a.position_m[2] - b.position_m[2]) > 1e-6)


def rotor_warnings(design) -> list[str]:
    """Disc overlap, C_T, C_Q/C_T and inertia warnings of every rotor.

    Parameters
    ----------
    design : Design
        A validated design.
    """
    out = []
    rotors = design.rotors
    rho = design.air_density_kg_m3
    for i, a in enumerate(rotors):
        for b in rotors[i + 1:]:
            if a.diameter_m is None or b.diameter_m is None or is_coaxial_pair(a, b):
                continue
            ov = disc_overlap_m(a.position_m, b.position_m, a.diameter_m, b.diameter_m)
            if ov > 0:
                d = math.dist(a.position_m[:2], b.position_m[:2])
                out.append(f"rotor {a.name!r} and rotor {b.name!r}: propeller discs overlap by "
                           f"{ov:.3g} m (hubs {d:.4g} m apart, diameters {a.diameter_m:g} and "
                           f"{b.diameter_m:g} m); smaller propellers or a wider layout")
    same: dict[str, list[str]] = {}  # one line for the rotors that share a finding
    for r in rotors:
        if r.diameter_m is None:
            continue
        ct = thrust_coefficient(r.thrust_coeff_n_s2, r.diameter_m, rho)
        lo, hi = CT_RANGE
        if not lo <= ct <= hi:
            text = (f"thrust_coeff_n_s2 {r.thrust_coeff_n_s2:g} gives C_T {ct:.3g} for a "
                    f"{r.diameter_m:g} m propeller at {rho:g} kg/m^3; usual {lo:g} to {hi:g} "
                    "(common practice, no source)")
            same.setdefault(text, []).append(r.name)
        ratio = r.torque_per_thrust_m / r.diameter_m
        lo, hi = CQ_OVER_CT_RANGE
        if not lo <= ratio <= hi:
            text = (f"torque_per_thrust_m / diameter_m = C_Q/C_T {ratio:.3g}; usual {lo:g} to "
                    f"{hi:g} (common practice, no source)")
            same.setdefault(text, []).append(r.name)
        if r.rotor_inertia_kg_m2 > 0:
            k = r.rotor_inertia_kg_m2 / r.diameter_m ** 5
            lo, hi = INERTIA_PER_D5_RANGE
            if not lo <= k <= hi:
                text = (f"rotor_inertia_kg_m2 {r.rotor_inertia_kg_m2:g} is implausible for a "
                        f"{r.diameter_m:g} m propeller (I/D^5 {k:.3g} kg/m^3; plausible {lo:g} "
                        f"to {hi:g}, common practice, no source)")
                same.setdefault(text, []).append(r.name)
    for text, names in same.items():
        label = "rotor " if len(names) == 1 else "rotors "
        out.append(label + ", ".join(repr(n) for n in names) + ": " + text)
    return out


def com_warnings(design, com_m) -> list[str]:
    """CoM height against the rotor plane.

    Parameters
    ----------
    design : Design
        A validated design.
    com_m : sequence of float
        Centre of mass in the design frame, in m.
    """
    hubs = [r.position_m for r in design.rotors]
    n = len(hubs)
    cx = sum(p[0] for p in hubs) / n
    cy = sum(p[1] for p in hubs) / n
    z = sum(p[2] for p in hubs) / n
    radius = sum(math.hypot(p[0] - cx, p[1] - cy) for p in hubs) / n
    dz = float(com_m[2]) - z
    if radius > 0 and abs(dz) > MAX_COM_OFFSET_OF_HUB_RADIUS * radius:
        where = "above" if dz > 0 else "below"
        return [f"CoM {abs(dz):.3g} m {where} the rotor plane (mean hub height {z:.3g} m), more "
                f"than {MAX_COM_OFFSET_OF_HUB_RADIUS:g} x the mean hub radius {radius:.3g} m "
                "(common practice, no source); check the part positions"]
    return []


def design_warnings(design, com_m) -> list[str]:
    """Every sanity warning of a design.

    Parameters
    ----------
    design : Design
        A validated design.
    com_m : sequence of float
        Centre of mass in the design frame, in m.
    """
    return rotor_warnings(design) + com_warnings(design, com_m)
