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

With first-order motor lag (DESIGN.md, "Motor dynamics") the thrusts become states and the
commanded thrusts ``c_i`` the inputs; with ``lambda_i = 1 / tau_i`` the motor bandwidth,

.. math::

    \dot f_i = \lambda_i (c_i - f_i), \qquad
    A_{aug} = \frac{\partial(\dot p, \dot q, \dot n_x, \dot n_y, \dot f)}
                    {\partial(p, q, n_x, n_y, f)}
            = \begin{pmatrix} A & B \\ 0 & -\Lambda \end{pmatrix}, \qquad
    B_{aug} = \frac{\partial(\ldots)}{\partial c}
            = \begin{pmatrix} 0 \\ \Lambda \end{pmatrix}

(derived by differentiation here, not assembled; a test checks the block form).

References
----------
K. Ogata, *Modern Control Engineering*, 5th ed., sec. 3-5 (first-order actuator in a state
model) (from memory).
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

__all__ = ["AugmentedModel", "ReducedModel", "augmented_model", "reduced_model"]


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


@dataclass(frozen=True, eq=False)
class AugmentedModel:
    """Reduced model with first-order motor lag: thrusts are states, commands are inputs.

    Attributes
    ----------
    state : tuple
        ``(p, q, nx, ny, f_0, .., f_{N-1})``.
    held : tuple
        ``(r,)``, the held body rate (rad/s).
    inputs : tuple
        Commanded thrusts ``(c_0, .., c_{N-1})`` in N.
    bandwidth : tuple
        Motor bandwidths ``(lam_0, .., lam_{N-1})`` = ``1 / motor_time_constant_s``, in 1/s.
    rhs : Matrix
        ``(p_dot, q_dot, nx_dot, ny_dot, f_0_dot, ..)``.
    A : Matrix
        ``(4 + N) x (4 + N)`` state Jacobian.
    B : Matrix
        ``(4 + N) x N`` input Jacobian.
    """

    state: tuple
    held: tuple
    inputs: tuple
    bandwidth: tuple
    rhs: sp.Matrix
    A: sp.Matrix
    B: sp.Matrix


@cache
def augmented_model(structure: Structure) -> AugmentedModel:
    """Derive the reduced model with motor lag and its Jacobians by differentiation.

    Parameters
    ----------
    structure : Structure
        Rotor count, wheel, drag law.
    """
    red = reduced_model(structure)
    sym = symbols_for(structure)
    n = structure.n_rotors
    cmd = tuple(sp.Symbol(f"c_{i}", real=True) for i in range(n))
    lam = tuple(sp.Symbol(f"lam_{i}", positive=True) for i in range(n))
    lag = sp.Matrix([lam[i] * (cmd[i] - sym.f[i]) for i in range(n)])
    rhs = red.rhs.col_join(lag)
    state = red.state + tuple(sym.f)
    return AugmentedModel(state, red.held, cmd, lam, rhs, rhs.jacobian(state), rhs.jacobian(cmd))
