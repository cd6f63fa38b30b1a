r"""Reduced attitude model: body rates p, q and the world-up direction, r held fixed.

State ``x = (p, q, n_x, n_y)``, ``r`` held at ``r_bar``, ``n_z = +sqrt(1 - n_x^2 - n_y^2)``,
inputs ``f = (f_0 .. f_{N-1})`` (every rotor; an analysis keeps the working columns).

.. math::

    \begin{pmatrix}\dot p\\ \dot q\end{pmatrix}
      = \big[J^{-1}\big(\tau(\omega, f) - \omega\times h(\omega, f)\big)\big]_{1,2},
    \qquad
    \begin{pmatrix}\dot n_x\\ \dot n_y\end{pmatrix}
      = \begin{pmatrix} n_y r - n_z q\\ n_z p - n_x r\end{pmatrix}

    A = \frac{\partial(\dot p, \dot q, \dot n_x, \dot n_y)}{\partial(p, q, n_x, n_y)},\qquad
    B = \frac{\partial(\dot p, \dot q, \dot n_x, \dot n_y)}{\partial f}

B includes the thrust dependence of the rotor momentum,
``d h_i / d f_i = s_i I_P,i / (2 sqrt(k_f,i f_i))``, which is infinite at ``f_i = 0`` (the
generated functions return ``inf``/``nan`` there; the analysis drops failed rotors' columns).

References
----------
M. W. Mueller, R. D'Andrea, "Relaxed hover solutions for multicopters", Int. J. Robotics
Research 35(8), 2016, sec. 4 (reduced attitude dynamics) (from memory).
Goldstein, Poole, Safko, *Classical Mechanics*, 3rd ed., sec. 5.5 (from memory).
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import cache

import sympy as sp

from .rigid_body import moment_expr, symbols_for
from .structure import Structure

__all__ = ["ReducedModel", "reduced_model"]


@dataclass(frozen=True, eq=False)
class ReducedModel:
    """Derived reduced model of one structure.

    Attributes
    ----------
    state : tuple
        ``(p, q, nx, ny)``.
    held : tuple
        ``(r,)``, the held body rate (rad/s).
    inputs : tuple
        ``(f_0, .., f_{N-1})`` in N.
    rhs : Matrix
        ``(p_dot, q_dot, nx_dot, ny_dot)``.
    A : Matrix
        4 x 4 state Jacobian.
    B : Matrix
        4 x N input Jacobian.
    """

    state: tuple
    held: tuple
    inputs: tuple
    rhs: sp.Matrix
    A: sp.Matrix
    B: sp.Matrix


@cache
def reduced_model(structure: Structure) -> ReducedModel:
    """Derive the reduced attitude model and its Jacobians by differentiation (unsimplified)."""
    sym = symbols_for(structure)
    p, q, r = sym.omega
    nx, ny, _ = sym.n
    nz = sp.sqrt(1 - nx**2 - ny**2)
    moment, _ = moment_expr(sym, sym.omega, sym.f)
    rates = sym.Jinv[:2, :] * moment
    rhs = rates.col_join(sp.Matrix([ny * r - nz * q, nz * p - nx * r]))
    state = (p, q, nx, ny)
    return ReducedModel(state, (r,), sym.f, rhs, rhs.jacobian(state), rhs.jacobian(sym.f))
