"""Canonical synthetic vehicles shared by tests, doctests and examples.

These are idealised designs built in code (a measured ``[body]``, rotors on a circle), so tests
can vary one parameter at a time; the demo files in ``data/designs/`` are the realistic ones.
All are invented.
"""

from __future__ import annotations

import math

from kit.design import Design, from_dict


def ring_design(
    n_rotors: int = 4,
    mass_kg: float = 0.5,
    arm_m: float = 0.12,
    inertia_kg_m2=(2.5e-3, 2.5e-3, 4.5e-3),
    phase_deg: float = 0.0,
    torque_per_thrust_m: float = 0.012,
    thrust_coeff_n_s2: float = 6.0e-6,
    rotor_inertia_kg_m2: float = 0.0,
    max_thrust_n: float = 3.5,
    drag=(0.0007, 0.0007, 0.0015),
    drag_law: str = "linear",
    wheel: dict | None = None,
    failure_sets: str = "single",
    failure_cases=(),
    control=None,
    name: str = "synthetic ring vehicle",
) -> Design:
    """A vehicle with ``n_rotors`` on a circle of radius ``arm_m``, alternating spins.

    Rotor ``k`` (named ``r{k}``) sits at angle ``phase_deg + 360 k / n`` from x; ``phase_deg = 0``
    gives the '+' quad (``r0`` forward), 45 the 'X' quad. Mass and inertia are given as a measured
    ``[body]`` (whole vehicle, rotors stopped; rotor spin inertia is added by mass properties).
    """
    inertia = inertia_kg_m2
    if len(inertia) == 3 and not isinstance(inertia[0], list | tuple):
        inertia = [[inertia[0], 0.0, 0.0], [0.0, inertia[1], 0.0], [0.0, 0.0, inertia[2]]]
    rotors = []
    for k in range(n_rotors):
        a = math.radians(phase_deg + 360.0 * k / n_rotors)
        rotors.append({
            "name": f"r{k}",
            "position_m": [arm_m * math.cos(a), arm_m * math.sin(a), 0.0],
            "spin": "ccw" if k % 2 == 0 else "cw",
            "max_thrust_n": max_thrust_n,
            "torque_per_thrust_m": torque_per_thrust_m,
            "thrust_coeff_n_s2": thrust_coeff_n_s2,
            "rotor_inertia_kg_m2": rotor_inertia_kg_m2,
            "diameter_m": 0.13,
        })
    doc = {
        "design": {"name": name, "revision": "synthetic"},
        "body": {"mass_kg": mass_kg, "com_m": [0.0, 0.0, 0.0],
                 "inertia_kg_m2": [list(r) for r in inertia]},
        "rotor": rotors,
        "aero": {"drag_law": drag_law, "drag_torque_coeff": list(drag)},
        "control": control or {"weight_rate": 1.0, "weight_attitude": 20.0,
                               "weight_thrust": 1.0, "disturbance_torque_psd_n2_m2_s": 5e-5},
        "review": {"failure_sets": failure_sets},
        "failure_case": [dict(fc) for fc in failure_cases],
    }
    if wheel is not None:
        doc["wheel"] = dict(wheel)
    return from_dict(doc, source=f"<{name}>")
