r"""Compact display of the equations of a structure: sums over rotors, not N copies.

The display uses indexed symbols (``f_i``, ``x_i``, ``s_i`` ...) and :class:`sympy.Sum` over
``i = 0 .. N-1``; the component rows come from the same cross products the derivation uses
(:mod:`kit.symbolic.rigid_body`), with the rotor and wheel momentum gathered into ``h_z``.

.. math::

    J\dot\omega = \sum_i r_i \times f_i\hat z - \sum_i s_i\kappa_i f_i\hat z + \tau_d
        - \omega\times(J\omega + h_z\hat z),\quad
    h_z = h_w + \sum_i s_i I_{P,i}\sqrt{f_i/k_{f,i}}

References
----------
Goldstein, Poole, Safko, *Classical Mechanics*, 3rd ed., sec. 5.5 (from memory).
Mueller & D'Andrea, Int. J. Robotics Research 35(8), 2016 (from memory).
"""

from __future__ import annotations

import sympy as sp

from .rigid_body import InvNorm3, Norm3
from .structure import Structure

__all__ = ["display_equations", "equations_text"]


def display_equations(structure: Structure) -> list[tuple[str, sp.Basic, sp.Basic]]:
    """``(label, lhs, rhs)`` triples of the display equations of ``structure``.

    Parameters
    ----------
    structure : Structure
        Rotor count, wheel, drag law.
    """
    N = structure.n_rotors
    i, j = sp.symbols("i j", integer=True)
    f, x, y = sp.IndexedBase("f"), sp.IndexedBase("x"), sp.IndexedBase("y")
    s, kappa = sp.IndexedBase("s"), sp.IndexedBase(r"kappa")
    kf, ip = sp.IndexedBase("k_f"), sp.IndexedBase("I_P")
    p, q, r = sp.symbols("p q r", real=True)
    pd, qd, rd = sp.symbols("p_dot q_dot r_dot")
    nx, ny, nz = sp.symbols("n_x n_y n_z", real=True)
    nxd, nyd, nzd = sp.symbols("nx_dot ny_dot nz_dot")
    m, g, hz, hw, w = sp.symbols("m g h_z h_w w", real=True)
    J = sp.Matrix(3, 3, lambda a, b: sp.Symbol("J_" + "xyz"[min(a, b)] + "xyz"[max(a, b)]))
    gam = sp.symbols("gamma_x gamma_y gamma_z", real=True)
    omega = sp.Matrix([p, q, r])
    rng = (i, 0, N - 1)

    def total(expr):
        return sp.Sum(expr, rng)

    tau = sp.Matrix([total(y[i] * f[i]), -total(x[i] * f[i]), -total(s[i] * kappa[i] * f[i])])
    if structure.drag_law == "linear":
        tau_d = -sp.Matrix(gam).multiply_elementwise(omega)
    else:
        tau_d = -Norm3(p, q, r) * sp.Matrix(gam).multiply_elementwise(omega)
    moment = tau + tau_d - omega.cross(J * omega + sp.Matrix([0, 0, hz]))
    hz_def = total(s[i] * ip[i] * sp.sqrt(f[i] / kf[i])) + (hw if structure.wheel else 0)
    lhs = J * sp.Matrix([pd, qd, rd])
    eqs = [("rotor and wheel momentum", hz, hz_def)]
    eqs += [(f"Euler {c}", lhs[k], moment[k]) for k, c in enumerate("xyz")]
    ndot = -omega.cross(sp.Matrix([nx, ny, nz]))
    eqs += [(f"attitude {c}", d, ndot[k]) for k, (c, d) in enumerate(zip("xyz", (nxd, nyd, nzd),
                                                                      strict=True))]
    qw, qx, qy, qz = sp.symbols("q_w q_x q_y q_z", real=True)
    acc = sp.symbols("xW_ddot yW_ddot zW_ddot")
    thrust = total(f[i]) / m
    rz = [2 * (qx * qz + qw * qy), 2 * (qy * qz - qw * qx), qw**2 - qx**2 - qy**2 + qz**2]
    for k, c in enumerate("xyz"):
        eqs.append((f"translation {c} (unit quaternion)", acc[k],
                    thrust * rz[k] - (g if k == 2 else 0)))
    # relaxed hover: omega = w n
    nbar = sp.Matrix([nx, ny, nz])
    mom_eq = moment.xreplace(dict(zip((p, q, r), w * nbar, strict=True)))
    for k, c in enumerate("xyz"):
        eqs.append((f"relaxed hover moment {c} (omega = w n)", sp.Integer(0), mom_eq[k]))
    eqs.append(("relaxed hover vertical", sp.Integer(0), n_z_sum(total(f[i]), nz, m, g)))
    # reduced model
    jinv = sp.Matrix(3, 3, lambda a, b: sp.Symbol("Jinv_" + "xyz"[min(a, b)] + "xyz"[max(a, b)]))
    dmp, dmq = moment.diff(p), moment.diff(q)
    eqs.append(("reduced p_dot", pd, (jinv[0, :] * moment)[0]))
    eqs.append(("reduced q_dot", qd, (jinv[1, :] * moment)[0]))
    eqs.append(("reduced nx_dot", nxd, ndot[0]))
    eqs.append(("reduced ny_dot", nyd, ndot[1]))
    labels = "pq"
    for a in range(2):
        for b, dm in enumerate((dmp, dmq)):
            eqs.append((f"A[{a},{b}] = d {labels[a]}_dot / d {labels[b]}",
                        sp.Symbol(f"A_{a}{b}"), (jinv[a, :] * dm)[0]))
    nzs = sp.sqrt(1 - nx**2 - ny**2)
    nav = sp.Matrix([ny * r - nzs * q, nzs * p - nx * r])
    for a in range(2):
        for b, v in enumerate((p, q, nx, ny)):
            eqs.append((f"A[{a + 2},{b}]", sp.Symbol(f"A_{a + 2}{b}"), nav[a].diff(v)))
    dh = s[j] * ip[j] / (2 * sp.sqrt(kf[j] * f[j]))
    col = sp.Matrix([y[j], -x[j], -s[j] * kappa[j]]) - omega.cross(sp.Matrix([0, 0, dh]))
    for a in range(2):
        eqs.append((f"B[{a},j] = d {labels[a]}_dot / d f_j", sp.Symbol(f"B_{a}j"),
                    (jinv[a, :] * col)[0]))
    eqs.append(("B[2:4,j]", sp.Symbol("B_2:4j"), sp.Integer(0)))
    return eqs


def _latex(expr) -> str:
    names = {}
    for s in expr.free_symbols:
        name = getattr(s, "name", "")
        if name.startswith("Jinv_"):
            names[s] = rf"(J^{{-1}})_{{{name[5:]}}}"
        elif name.endswith("_dot"):
            base = name[:-4]
            names[s] = r"\dot{%s}" % (f"n_{base[1]}" if base.startswith("n") else base)
        elif name.endswith("W_ddot"):
            names[s] = rf"\ddot{{{name[0]}}}_W"
        elif name == "B_2:4j":
            names[s] = r"B_{2:4,j}"
    return sp.latex(expr, symbol_names=names)


def n_z_sum(total_f, nz, m, g):
    """``n_z sum_i f_i - m g``.

    Parameters
    ----------
    total_f : sympy expression
        Sum of the thrusts, in N.
    nz : sympy expression
        World-up component along body z.
    m : sympy expression
        Mass, in kg.
    g : sympy expression
        Gravity, in m/s^2.
    """
    return nz * total_f - m * g


_PREAMBLE = {
    "text": [
        "Body frame B at the centre of mass, z up along the thrust; i = 0 .. N-1 over rotors.",
        "omega = (p, q, r) in B; n = world-up unit vector in B; f_i >= 0 thrust along +z_B.",
        "Reduced model: state (p, q, nx, ny), r held, nz = +sqrt(1 - nx^2 - ny^2).",
    ],
    "latex": [
        r"\text{Body frame } B \text{ at the centre of mass}, z_B \text{ up along the thrust};"
        r"\ i = 0 \ldots N-1.",
        r"J\dot\omega + \omega\times\left(J\omega + h_z\hat z\right) = \sum_i r_i\times f_i\hat z"
        r" - \sum_i s_i\kappa_i f_i\hat z + \tau_d,\qquad \dot n = -\omega\times n",
        r"\text{Reduced model: } x = (p, q, n_x, n_y),\ r \text{ held},\ "
        r"n_z = +\sqrt{1 - n_x^2 - n_y^2}",
    ],
}


def equations_text(structure: Structure, latex: bool = False) -> str:
    """The equations of ``structure`` as plain text (default) or LaTeX, one per line.

    Parameters
    ----------
    structure : Structure
        Rotor count, wheel and drag law.
    latex : bool
        Return LaTeX (one ``align``-free display equation per line, each preceded by a
        ``%`` comment naming it) instead of plain text.

    Returns
    -------
    str
    """
    N = structure.n_rotors
    lines = [f"% structure {structure.key} (N = {N})" if latex else
             f"# structure {structure.key} (N = {N})"]
    lines += _PREAMBLE["latex" if latex else "text"]
    for label, lhs, rhs in display_equations(structure):
        if latex:
            lines.append(f"% {label}")
            lines.append(f"{_latex(lhs)} = {_latex(rhs)}")
        else:
            lines.append(f"{label}:  {sp.sstr(lhs)} = {sp.sstr(rhs)}")
    return "\n".join(lines) + "\n"


_ = (InvNorm3,)
