"""The shape of a vehicle model: how many rotors, a wheel or not, which drag law.

A :class:`Structure` names one family of equations. Everything numeric about a vehicle
(mass, inertia, rotor positions, coefficients) goes into the parameter vector whose order
:meth:`Structure.param_names` fixes, so one derivation (and one generated module) serves
every design of the same structure.

This module is plain Python on purpose: it is imported on the warm path, where sympy is
never loaded.
"""

from __future__ import annotations

from dataclasses import dataclass

__all__ = ["DRAG_LAWS", "Structure"]

#: Drag laws the derivation knows: ``tau_d = -diag(gx, gy, gz) omega`` (linear, gains in
#: N m s) or ``tau_d = -diag(gx, gy, gz) |omega| omega`` (quadratic, gains in N m s^2).
DRAG_LAWS = ("linear", "quadratic")

_ROTOR_FIELDS = (
    ("x", "m"),
    ("y", "m"),
    ("s", "1"),
    ("kappa", "m"),
    ("kf", "N s^2"),
    ("IP", "kg m^2"),
)


@dataclass(frozen=True)
class Structure:
    """The structural choices that change the equations of motion.

    Parameters
    ----------
    n_rotors : int
        Number of rotors, working or not (failed rotors keep their slot and get zero thrust).
    wheel : bool
        Whether the vehicle carries a momentum wheel about z_B (adds parameter ``hw``, in N m s).
    drag_law : str
        ``"linear"`` or ``"quadratic"`` body drag torque (see :data:`DRAG_LAWS`).
    """

    n_rotors: int
    wheel: bool
    drag_law: str = "linear"

    def __post_init__(self) -> None:
        problems = []
        if isinstance(self.n_rotors, bool) or not isinstance(self.n_rotors, int):
            problems.append(f"n_rotors: {self.n_rotors!r} -> an int >= 1")
        elif self.n_rotors < 1:
            problems.append(f"n_rotors: {self.n_rotors!r} -> an int >= 1")
        if not isinstance(self.wheel, bool):
            problems.append(f"wheel: {self.wheel!r} -> True or False")
        if self.drag_law not in DRAG_LAWS:
            problems.append(f"drag_law: {self.drag_law!r} -> one of {', '.join(DRAG_LAWS)}")
        if problems:
            raise ValueError("invalid Structure: " + "; ".join(problems))

    @property
    def key(self) -> str:
        """A short stable name, e.g. ``"n4-wheel-linear"``; used in cache file names."""
        return f"n{self.n_rotors}-{'wheel' if self.wheel else 'nowheel'}-{self.drag_law}"

    def param_names(self) -> tuple[str, ...]:
        """Names of the parameter vector entries, in order.

        ``m, g, Jxx, Jyy, Jzz, Jxy, Jxz, Jyz, gx, gy, gz, [hw], x_0, y_0, s_0, kappa_0, kf_0,
        IP_0, x_1, ...``. ``J = [[Jxx, Jxy, Jxz], [Jxy, Jyy, Jyz], [Jxz, Jyz, Jzz]]`` is the
        inertia tensor about the centre of mass, rotor spin inertia included.
        """
        return tuple(name for name, _ in self._params())

    def param_units(self) -> tuple[str, ...]:
        """SI units of the parameter vector entries, parallel to :meth:`param_names`."""
        return tuple(unit for _, unit in self._params())

    @property
    def n_params(self) -> int:
        """Length of the parameter vector."""
        return 11 + int(self.wheel) + 6 * self.n_rotors

    def param_index(self, name: str) -> int:
        """Position of parameter ``name`` in the parameter vector (``KeyError`` if absent)."""
        try:
            return self.param_names().index(name)
        except ValueError:
            raise KeyError(f"{name!r} is not a parameter of structure {self.key}") from None

    def _params(self) -> list[tuple[str, str]]:
        drag_unit = "N m s" if self.drag_law == "linear" else "N m s^2"
        out = [("m", "kg"), ("g", "m/s^2")]
        out += [(n, "kg m^2") for n in ("Jxx", "Jyy", "Jzz", "Jxy", "Jxz", "Jyz")]
        out += [(n, drag_unit) for n in ("gx", "gy", "gz")]
        if self.wheel:
            out.append(("hw", "N m s"))
        for i in range(self.n_rotors):
            out += [(f"{field}_{i}", unit) for field, unit in _ROTOR_FIELDS]
        return out
