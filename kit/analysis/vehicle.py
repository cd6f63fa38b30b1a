"""A design made numeric: mass properties, structure, parameter vector and the generated model.

This is the bridge between :mod:`kit.design` / :mod:`kit.massprops` and the generated numeric
functions of :mod:`kit.numeric.model`; every analysis takes a :class:`Vehicle`.
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace
from functools import cached_property

import numpy as np

from kit.design import Design
from kit.massprops import MassProperties, compute
from kit.symbolic.structure import Structure


@dataclass(frozen=True)
class Vehicle:
    """Numeric view of a design.

    Attributes
    ----------
    design : Design
    mp : MassProperties
    wheel_momentum_n_m_s : float
        Wheel momentum h (signed, along +z_B), in N m s; 0 for a design without a wheel.
    """

    design: Design
    mp: MassProperties
    wheel_momentum_n_m_s: float = 0.0
    _cache: dict = field(default_factory=dict, compare=False, repr=False)

    @classmethod
    def from_design(cls, design: Design, mp: MassProperties | None = None) -> Vehicle:
        return cls(design=design, mp=mp if mp is not None else compute(design))

    def with_wheel_momentum(self, h_n_m_s: float) -> Vehicle:
        """The same vehicle with wheel momentum ``h`` (N m s)."""
        return replace(self, wheel_momentum_n_m_s=float(h_n_m_s), _cache={})

    def with_massprops(self, mp: MassProperties) -> Vehicle:
        return replace(self, mp=mp, _cache={})

    # --- structure and parameters ---

    @property
    def structure(self) -> Structure:
        d = self.design
        return Structure(n_rotors=len(d.rotors), wheel=d.wheel is not None,
                         drag_law=d.aero.drag_law)

    @property
    def model(self):
        """The generated numeric functions for this structure (cached on disk and in memory)."""
        from kit.numeric.model import load_model

        return load_model(self.structure)

    @property
    def n(self) -> int:
        return len(self.design.rotors)

    @property
    def names(self) -> tuple[str, ...]:
        return self.design.rotor_names

    @property
    def weight_n(self) -> float:
        return self.mp.mass_kg * self.design.gravity_m_s2

    @cached_property
    def max_thrust_n(self) -> np.ndarray:
        return np.array([r.max_thrust_n for r in self.design.rotors])

    @cached_property
    def thrust_coeff(self) -> np.ndarray:
        return np.array([r.thrust_coeff_n_s2 for r in self.design.rotors])

    @cached_property
    def spin(self) -> np.ndarray:
        return np.array([float(r.spin) for r in self.design.rotors])

    @cached_property
    def kappa(self) -> np.ndarray:
        return np.array([r.torque_per_thrust_m for r in self.design.rotors])

    @cached_property
    def arm_m(self) -> float:
        """Largest hub distance from the CoM in the x-y plane, in m (a length scale)."""
        return float(np.max(np.linalg.norm(self.mp.rotor_positions_m[:, :2], axis=1)))

    @cached_property
    def inertia_inv(self) -> np.ndarray:
        return np.linalg.inv(self.mp.inertia_kg_m2)

    @cached_property
    def par(self) -> np.ndarray:
        """Parameter vector in the order of ``Structure.param_names()``."""
        d, mp = self.design, self.mp
        J = mp.inertia_kg_m2
        vals = [mp.mass_kg, d.gravity_m_s2, J[0, 0], J[1, 1], J[2, 2], J[0, 1], J[0, 2], J[1, 2],
                *d.aero.drag_torque_coeff]
        if d.wheel is not None:
            vals.append(self.wheel_momentum_n_m_s)
        for r, pos in zip(d.rotors, mp.rotor_positions_m, strict=True):
            vals += [pos[0], pos[1], float(r.spin), r.torque_per_thrust_m, r.thrust_coeff_n_s2,
                     r.rotor_inertia_kg_m2]
        par = np.array(vals, float)
        assert par.shape == (len(self.structure.param_names()),)
        return par

    def working_mask(self, failed) -> np.ndarray:
        """Boolean mask of working rotors, given failed rotor names."""
        failed = set(failed)
        return np.array([name not in failed for name in self.names])

    def rotor_speed_rad_s(self, thrust_n: np.ndarray) -> np.ndarray:
        """Rotor speed sqrt(f / k_f), in rad/s."""
        return np.sqrt(np.maximum(thrust_n, 0.0) / self.thrust_coeff)
