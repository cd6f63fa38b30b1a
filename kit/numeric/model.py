"""Load the generated numpy functions of a structure, from the disk cache when possible.

A warm start (cache hit) imports the cached module and nothing else: no derivation, no sympy.
A miss derives the equations with :mod:`kit.symbolic` (which imports sympy), writes the module
to the cache atomically and imports it.
"""

from __future__ import annotations

import functools
from collections.abc import Callable, Mapping
from dataclasses import dataclass
from pathlib import Path
from types import ModuleType

import numpy as np

from kit.symbolic import cache
from kit.symbolic.structure import Structure

__all__ = ["Model", "load_model"]


@dataclass(frozen=True, eq=False)
class Model:
    """The generated functions of one :class:`~kit.symbolic.structure.Structure`.

    Every function takes arrays whose last axis is the vector and broadcasts the leading axes;
    see each function's docstring for argument order and units.

    Attributes
    ----------
    structure : Structure
    param_names, param_units : tuple of str
        Order and SI units of the parameter vector ``par``.
    omega_dot : callable
        ``omega_dot(omega, f, par) -> (..., 3)``, rad/s^2.
    attitude_rhs : callable
        ``attitude_rhs(omega, n, f, par) -> (..., 6)``: ``(omega_dot, n_dot)``.
    translation_accel : callable
        ``translation_accel(quat, f, par) -> (..., 3)``: world-frame acceleration in m/s^2;
        ``quat = (qw, qx, qy, qz)`` body to world, scalar first, any non-zero norm.
    eq_residual : callable
        ``eq_residual(z, par) -> (..., 4)`` with ``z = (w, nx, ny, f_0 .. f_{N-1})``.
    eq_jacobian : callable
        ``eq_jacobian(z, par) -> (..., 4, N + 3)``.
    reduced_rhs : callable
        ``reduced_rhs(xr, f, par) -> (..., 4)`` with ``xr = (p, q, r, nx, ny)``, r held.
    reduced_AB : callable
        ``reduced_AB(xr, f, par) -> (A (..., 4, 4), B (..., 4, N))``.
    augmented_AB : callable
        ``augmented_AB(xr, f, lam, par) -> (A (..., 4+N, 4+N), B (..., 4+N, N))``: the reduced
        model with first-order motor lag, ``lam`` = motor bandwidths ``1 / tau`` in 1/s.
    path : Path or None
        The cached module file.
    """

    structure: Structure
    param_names: tuple
    param_units: tuple
    omega_dot: Callable
    attitude_rhs: Callable
    translation_accel: Callable
    eq_residual: Callable
    eq_jacobian: Callable
    reduced_rhs: Callable
    reduced_AB: Callable
    augmented_AB: Callable
    path: Path | None
    module: ModuleType

    @property
    def n_params(self) -> int:
        """Length of the parameter vector."""
        return len(self.param_names)

    def pack(self, values: Mapping[str, object]) -> np.ndarray:
        """Build a parameter array from ``{name: value}`` (values may be arrays; they broadcast).

        Every name of :attr:`param_names` is required (no silent defaults for physical
        constants); unknown names are an error too.
        """
        missing = [n for n in self.param_names if n not in values]
        unknown = sorted(set(values) - set(self.param_names))
        if missing or unknown:
            raise KeyError(f"parameters missing: {missing}; unknown: {unknown}")
        cols = np.broadcast_arrays(*(np.asarray(values[n], dtype=float) for n in self.param_names))
        return np.stack(cols, axis=-1)

    def unpack(self, par) -> dict[str, np.ndarray]:
        """Inverse of :meth:`pack`: ``{name: par[..., k]}``."""
        par = np.asarray(par, dtype=float)
        return {n: par[..., k] for k, n in enumerate(self.param_names)}


def _from_module(structure: Structure, module: ModuleType) -> Model:
    path = getattr(module, "__file__", None)
    return Model(
        structure=structure,
        param_names=tuple(module.PARAM_NAMES),
        param_units=tuple(module.PARAM_UNITS),
        omega_dot=module.omega_dot,
        attitude_rhs=module.attitude_rhs,
        translation_accel=module.translation_accel,
        eq_residual=module.eq_residual,
        eq_jacobian=module.eq_jacobian,
        reduced_rhs=module.reduced_rhs,
        reduced_AB=module.reduced_AB,
        augmented_AB=module.augmented_AB,
        path=Path(path) if path else None,
        module=module,
    )


@functools.cache
def load_model(structure: Structure) -> Model:
    """The generated functions of ``structure`` (cached per structure in memory and on disk).

    Parameters
    ----------
    structure : Structure
        Number of rotors, wheel, drag law.

    Returns
    -------
    Model
    """
    module = cache.load_cached(structure)
    if module is None:
        from kit.symbolic.codegen import build_module  # cold path: imports sympy

        module = build_module(structure, cse=True, write=True)
    if module.STRUCTURE_KEY != structure.key:
        raise RuntimeError(
            f"generated module for {module.STRUCTURE_KEY} loaded for {structure.key}"
        )
    return _from_module(structure, module)
