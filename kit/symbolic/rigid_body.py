r"""Newton-Euler equations of a multirotor with spinning rotors and an optional wheel.

Body frame B at the centre of mass, z_B up along the thrust. Rotor ``i`` sits at
``r_i = (x_i, y_i, 0)`` and pushes ``f_i >= 0`` along +z_B; its spin sign ``s_i`` is +1 when
its angular velocity points along +z_B. Its reaction torque on the body is
``-s_i kappa_i f_i z_B`` and its angular momentum ``s_i I_P,i sqrt(f_i / k_f,i) z_B``. A wheel
adds ``h_w z_B`` (signed).

.. math::

    J \dot\omega + \omega \times \Big(J\omega + \big(h_w + \sum_i s_i I_{P,i}
        \sqrt{f_i / k_{f,i}}\big)\,\hat z\Big)
      = \sum_i r_i \times f_i \hat z - \sum_i s_i \kappa_i f_i \hat z + \tau_d

    \dot n = -\omega \times n, \qquad
    m \ddot x_W = R\,\Big(\sum_i f_i\Big)\hat z_B - m g\,\hat e_z

with ``tau_d = -diag(gx, gy, gz) omega`` (linear law) or ``-diag(gx, gy, gz) |omega| omega``
(quadratic law). The inertia ``J`` is the whole vehicle's about the centre of mass, rotor spin
inertia included, so the rotor terms only add the spin *relative* to the body (a gyrostat).

The inverse inertia is kept as six symbols ``Jinv_ab`` with exact definitions
(adjugate / determinant, computed once); every derived expression is exact once those are
substituted (:attr:`Symbols.jinv_defs`).

References
----------
H. Goldstein, C. Poole, J. Safko, *Classical Mechanics*, 3rd ed., Addison-Wesley 2002,
sec. 5.5 (Euler's equations of motion) (from memory).
P. C. Hughes, *Spacecraft Attitude Dynamics*, Wiley 1986, ch. 6 (gyrostats) (from memory).
M. W. Mueller, R. D'Andrea, "Relaxed hover solutions for multicopters: application to
algorithmic redundancy and novel vehicles", Int. J. Robotics Research 35(8), 2016
(relaxed hover, reduced attitude model) (from memory).
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import cache

import sympy as sp

from .structure import Structure

__all__ = [
    "InvNorm3",
    "Norm3",
    "RigidBody",
    "Equilibrium",
    "Symbols",
    "equilibrium",
    "rigid_body",
    "symbols_for",
]


class InvNorm3(sp.Function):
    """``1 / sqrt(a^2 + b^2 + c^2)``, taken as 0 at the origin in generated code.

    Appears only in derivatives of :class:`Norm3`, always multiplied by a product of two
    components, whose limit at the origin is 0; the convention makes A finite there.
    """

    nargs = 3

    def _eval_evalf(self, prec):
        return (1 / sp.sqrt(sum(a**2 for a in self.args)))._eval_evalf(prec)

    def _latex(self, printer):
        return rf"\left\lVert {_norm_arg_latex(self.args, printer)} \right\rVert^{{-1}}"

    def _sympystr(self, printer):
        return f"(1/|{_norm_arg_str(self.args, printer)}|)"


class Norm3(sp.Function):
    """Euclidean norm ``sqrt(a^2 + b^2 + c^2)`` of three real arguments (quadratic drag)."""

    nargs = 3

    def fdiff(self, argindex=1):
        return self.args[argindex - 1] * InvNorm3(*self.args)

    def _eval_evalf(self, prec):
        return sp.sqrt(sum(a**2 for a in self.args))._eval_evalf(prec)

    def _latex(self, printer):
        return rf"\left\lVert {_norm_arg_latex(self.args, printer)} \right\rVert"

    def _sympystr(self, printer):
        return f"|{_norm_arg_str(self.args, printer)}|"


def _norm_arg_str(args, printer):
    if [str(a) for a in args] == ["p", "q", "r"]:
        return "omega"
    return "({})".format(", ".join(printer._print(a) for a in args))


def _norm_arg_latex(args, printer):
    if [str(a) for a in args] == ["p", "q", "r"]:
        return r"\omega"
    return r"\left({}\right)".format(", ".join(printer._print(a) for a in args))


@dataclass(frozen=True, eq=False)
class Symbols:
    """Every sympy symbol of one :class:`Structure`.

    Attributes
    ----------
    par : tuple of Symbol
        Parameter symbols in :meth:`Structure.param_names` order (names equal).
    omega : tuple
        ``(p, q, r)``, body angular velocity in B, in rad/s.
    n : tuple
        ``(nx, ny, nz)``, world-up unit vector in B.
    f : tuple
        Rotor thrusts ``f_0 ..`` in N.
    quat : tuple
        ``(qw, qx, qy, qz)``, attitude quaternion, body to world, scalar first.
    w : Symbol
        Signed spin rate of an equilibrium, ``omega = w n``, in rad/s.
    Jinv : Matrix
        Symbols of the inverse inertia (symmetric), in 1/(kg m^2).
    jinv_defs : tuple of (Symbol, Expr)
        Definitions in evaluation order: ``Jdet`` then the six ``Jinv_ab``.
    """

    structure: Structure
    par: tuple
    omega: tuple
    n: tuple
    f: tuple
    quat: tuple
    w: sp.Symbol
    J: sp.Matrix
    Jinv: sp.Matrix
    jinv_defs: tuple

    def __getitem__(self, name: str) -> sp.Symbol:
        return self.par[self.structure.param_index(name)]

    def rotor(self, field: str) -> tuple:
        """Per-rotor parameter symbols, e.g. ``rotor("kappa")`` -> ``(kappa_0, kappa_1, ..)``."""
        return tuple(self[f"{field}_{i}"] for i in range(self.structure.n_rotors))

    @property
    def jinv_subs(self) -> dict:
        """Substitution that turns ``Jinv_ab`` (and ``Jdet``) into functions of J."""
        out: dict = {}
        for sym, expr in self.jinv_defs:
            out[sym] = expr.xreplace(out)
        return out


@cache
def symbols_for(structure: Structure) -> Symbols:
    """Create the symbols of ``structure`` (cached, so each structure has one set)."""
    par = tuple(sp.Symbol(name, real=True) for name in structure.param_names())
    by = dict(zip(structure.param_names(), par, strict=True))
    omega = sp.symbols("p q r", real=True)
    n = sp.symbols("nx ny nz", real=True)
    f = tuple(sp.Symbol(f"f_{i}", real=True) for i in range(structure.n_rotors))
    quat = sp.symbols("qw qx qy qz", real=True)
    w = sp.Symbol("w", real=True)
    J = sp.Matrix(
        [
            [by["Jxx"], by["Jxy"], by["Jxz"]],
            [by["Jxy"], by["Jyy"], by["Jyz"]],
            [by["Jxz"], by["Jyz"], by["Jzz"]],
        ]
    )
    names = "xyz"
    inv = {}
    for a in range(3):
        for b in range(a, 3):
            inv[a, b] = inv[b, a] = sp.Symbol(f"Jinv_{names[a]}{names[b]}", real=True)
    Jinv = sp.Matrix(3, 3, lambda a, b: inv[a, b])
    det = sp.Symbol("Jdet", real=True)
    adj = J.adjugate()
    defs = [(det, J.det(method="berkowitz").expand())]
    for a in range(3):
        for b in range(a, 3):
            defs.append((inv[a, b], adj[a, b].expand() / det))
    return Symbols(structure, par, omega, n, f, quat, w, J, Jinv, tuple(defs))


@dataclass(frozen=True, eq=False)
class RigidBody:
    """The derived rigid-body equations of one structure (all sympy Matrices, unsimplified).

    Attributes
    ----------
    sym : Symbols
    h : Matrix
        Total angular momentum ``J omega + (h_w + sum_i s_i I_P,i sqrt(f_i/k_f,i)) z``, N m s.
    moment : Matrix
        ``sum_i r_i x f_i z - sum_i s_i kappa_i f_i z + tau_d - omega x h``
        (= ``J omega_dot``), N m.
    omega_dot : Matrix
        ``Jinv * moment``, rad/s^2.
    n_dot : Matrix
        ``-omega x n``, 1/s.
    accel : Matrix
        World-frame acceleration of the centre of mass, m/s^2, as a function of ``quat``.
    """

    sym: Symbols
    h: sp.Matrix
    moment: sp.Matrix
    omega_dot: sp.Matrix
    n_dot: sp.Matrix
    accel: sp.Matrix


def _rotor_momentum(sym: Symbols, f) -> sp.Expr:
    s, ip, kf = sym.rotor("s"), sym.rotor("IP"), sym.rotor("kf")
    return sp.Add(*(s[i] * ip[i] * sp.sqrt(f[i] / kf[i]) for i in range(len(f))))


def moment_expr(sym: Symbols, omega, f) -> sp.Matrix:
    """Net moment minus gyroscopic term, ``J omega_dot``, for given omega and thrusts (N m).

    Parameters
    ----------
    sym : Symbols
        The structure's symbols (:func:`symbols_for`).
    omega : sympy Matrix (3,)
        Body angular velocity, in rad/s.
    f : sequence of sympy expressions
        Rotor thrusts, in N.
    """
    st = sym.structure
    x, y = sym.rotor("x"), sym.rotor("y")
    s, kappa = sym.rotor("s"), sym.rotor("kappa")
    omega = sp.Matrix(omega)
    hz = _rotor_momentum(sym, f)
    if st.wheel:
        hz = hz + sym["hw"]
    h = sym.J * omega + sp.Matrix([0, 0, hz])
    tau = sp.Matrix(
        [
            sp.Add(*(y[i] * f[i] for i in range(st.n_rotors))),
            -sp.Add(*(x[i] * f[i] for i in range(st.n_rotors))),
            -sp.Add(*(s[i] * kappa[i] * f[i] for i in range(st.n_rotors))),
        ]
    )
    gains = sp.Matrix([sym["gx"], sym["gy"], sym["gz"]])
    if st.drag_law == "linear":
        tau_d = -gains.multiply_elementwise(omega)
    else:
        tau_d = -Norm3(*omega) * gains.multiply_elementwise(omega)
    return tau + tau_d - omega.cross(h), h


@cache
def rigid_body(structure: Structure) -> RigidBody:
    """Derive omega_dot, n_dot and the translational acceleration for ``structure``.

    .. math::

        \\dot\\omega = J^{-1}\\big(\\tau - \\omega\\times h\\big), \\quad
        \\dot n = -\\omega \\times n, \\quad
        \\ddot x_W = \\frac{\\sum_i f_i}{m} R(q)\\,\\hat z - g\\,\\hat e_z

    ``R(q) z`` uses the homogeneous form of the quaternion rotation (divided by ``|q|^2``), so
    it is exact for any non-zero quaternion.

    References
    ----------
    Goldstein, Poole, Safko, *Classical Mechanics*, 3rd ed., sec. 5.5 (from memory).
    J. Diebel, "Representing attitude: Euler angles, unit quaternions, and rotation vectors",
    Stanford 2006, eq. 125 (rotation matrix of a quaternion) (from memory).
    """
    sym = symbols_for(structure)
    moment, h = moment_expr(sym, sym.omega, sym.f)
    omega_dot = sym.Jinv * moment
    n_dot = -sp.Matrix(sym.omega).cross(sp.Matrix(sym.n))
    qw, qx, qy, qz = sym.quat
    q2 = qw**2 + qx**2 + qy**2 + qz**2
    rz = sp.Matrix(
        [2 * (qx * qz + qw * qy), 2 * (qy * qz - qw * qx), qw**2 - qx**2 - qy**2 + qz**2]
    )
    thrust = sp.Add(*sym.f)
    accel = rz * (thrust / (sym["m"] * q2)) - sp.Matrix([0, 0, sym["g"]])
    return RigidBody(sym, h, moment, omega_dot, n_dot, accel)


@dataclass(frozen=True, eq=False)
class Equilibrium:
    """Relaxed-hover residual and its Jacobian.

    Attributes
    ----------
    unknowns : tuple
        ``(w, nx, ny, f_0, .., f_{N-1})``.
    residual : Matrix
        4 rows: moment balance (3, N m) with ``omega = w n``, ``n_z = sqrt(1 - nx^2 - ny^2)``,
        then ``sum_i f_i n_z - m g`` (N).
    jacobian : Matrix
        ``d residual / d unknowns``, 4 x (N + 3).
    """

    unknowns: tuple
    residual: sp.Matrix
    jacobian: sp.Matrix


@cache
def equilibrium(structure: Structure) -> Equilibrium:
    """Derive the relaxed-hover residual (moment balance with omega_dot = 0, vertical force).

    .. math::

        \\sum_i r_i\\times f_i\\hat z - \\sum_i s_i\\kappa_i f_i\\hat z + \\tau_d(\\bar\\omega)
        - \\bar\\omega\\times h = 0, \\qquad \\bar n_z \\sum_i f_i = m g, \\qquad
        \\bar\\omega = w\\,\\bar n

    References
    ----------
    Mueller & D'Andrea, Int. J. Robotics Research 35(8), 2016, sec. 3 (from memory).
    """
    sym = symbols_for(structure)
    nx, ny, _ = sym.n
    nz = sp.sqrt(1 - nx**2 - ny**2)
    omega = [sym.w * nx, sym.w * ny, sym.w * nz]
    moment, _ = moment_expr(sym, omega, sym.f)
    vertical = sp.Add(*sym.f) * nz - sym["m"] * sym["g"]
    residual = moment.col_join(sp.Matrix([vertical]))
    unknowns = (sym.w, nx, ny, *sym.f)
    return Equilibrium(unknowns, residual, residual.jacobian(unknowns))
