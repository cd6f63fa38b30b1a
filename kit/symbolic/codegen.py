"""Generate vectorised numpy modules from the derived expressions, and cache them on disk.

Each generated function takes arrays whose *last* axis is the vector (``omega[..., 3]``,
``f[..., N]``, ``par[..., P]``), broadcasts the leading (batch) axes and returns arrays of
shape ``batch + out_shape``. Bodies run under ``numpy.errstate(divide="ignore",
invalid="ignore")``: ``d sqrt(f)/df`` is infinite at ``f = 0`` and the callers handle
non-finite entries. Common subexpressions are shared with :func:`sympy.cse` (``cse=True``),
and expressions are printed with :class:`sympy.printing.numpy.NumPyPrinter`, the printer
behind :func:`sympy.lambdify`.

References
----------
A. Meurer et al., "SymPy: symbolic computing in Python", PeerJ Computer Science 3:e103, 2017
(code generation, common subexpression elimination) (from memory).
"""

from __future__ import annotations

import textwrap
from dataclasses import dataclass

import sympy as sp
from sympy.printing.numpy import NumPyPrinter

from . import cache
from .reduced import augmented_model, reduced_model
from .rigid_body import InvNorm3, Norm3, equilibrium, rigid_body, symbols_for
from .structure import Structure

__all__ = ["Arg", "FunctionSpec", "function_specs", "generate_source", "build_module"]


@dataclass(frozen=True)
class Arg:
    """One array argument: its name, the symbols along its last axis, their units/meaning."""

    name: str
    symbols: tuple
    labels: tuple
    doc: str


@dataclass(frozen=True)
class FunctionSpec:
    """One generated function: arguments, outputs (sympy Matrices) and a one-line summary."""

    name: str
    args: tuple
    outputs: tuple  # of (name, Matrix, shape, doc)
    summary: str


class _Printer(NumPyPrinter):
    def _print_Norm3(self, expr):
        return "_norm3({})".format(", ".join(self._print(a) for a in expr.args))

    def _print_InvNorm3(self, expr):
        return "_inv_norm3({})".format(", ".join(self._print(a) for a in expr.args))


def function_specs(structure: Structure) -> list[FunctionSpec]:
    """Describe every generated function of ``structure`` (symbols in, expressions out).

    Parameters
    ----------
    structure : Structure
        Rotor count, wheel, drag law.
    """
    sym = symbols_for(structure)
    rb = rigid_body(structure)
    eq = equilibrium(structure)
    red = reduced_model(structure)
    aug = augmented_model(structure)
    N = structure.n_rotors
    par = Arg(
        "par",
        sym.par,
        tuple(f"{n} [{u}]" for n, u in zip(structure.param_names(), structure.param_units(),
                                            strict=True)),
        "Parameter vector (see ``PARAM_NAMES``).",
    )
    f = Arg("f", sym.f, tuple(f"f_{i} [N]" for i in range(N)), "Rotor thrusts.")
    omega = Arg("omega", sym.omega, ("p [rad/s]", "q [rad/s]", "r [rad/s]"),
                "Body angular velocity in B.")
    n = Arg("n", sym.n, ("nx [1]", "ny [1]", "nz [1]"), "World-up unit vector in B.")
    quat = Arg("quat", sym.quat, ("qw [1]", "qx [1]", "qy [1]", "qz [1]"),
               "Attitude quaternion, body to world, scalar first (any non-zero norm).")
    z = Arg("z", eq.unknowns, ("w [rad/s]", "nx [1]", "ny [1]") + f.labels,
            "Equilibrium unknowns; omega = w n, nz = +sqrt(1 - nx^2 - ny^2).")
    lam = Arg("lam", aug.bandwidth, tuple(f"lam_{i} [1/s]" for i in range(N)),
              "Motor bandwidths 1 / motor_time_constant_s.")
    p, q, r = sym.omega
    xr = Arg("xr", (p, q, r, sym.n[0], sym.n[1]),
             ("p [rad/s]", "q [rad/s]", "r [rad/s] (held)", "nx [1]", "ny [1]"),
             "Reduced state with the held yaw rate; nz = +sqrt(1 - nx^2 - ny^2).")
    return [
        FunctionSpec("omega_dot", (omega, f, par),
                     (("omega_dot", rb.omega_dot, (3,), "d(p, q, r)/dt [rad/s^2]"),),
                     "Body angular acceleration from Euler's equation with rotor momentum."),
        FunctionSpec("attitude_rhs", (omega, n, f, par),
                     (("rhs", rb.omega_dot.col_join(rb.n_dot), (6,),
                       "(p_dot, q_dot, r_dot [rad/s^2], nx_dot, ny_dot, nz_dot [1/s])"),),
                     "Attitude right-hand side: omega_dot and n_dot = -omega x n."),
        FunctionSpec("translation_accel", (quat, f, par),
                     (("accel", rb.accel, (3,), "World-frame acceleration [m/s^2]"),),
                     "World-frame acceleration of the centre of mass, "
                     "R(quat) sum(f) z_B / m - g e_z."),
        FunctionSpec("eq_residual", (z, par),
                     (("residual", eq.residual, (4,),
                       "(moment balance x, y, z [N m], sum f nz - m g [N])"),),
                     "Relaxed-hover residual."),
        FunctionSpec("eq_jacobian", (z, par),
                     (("jacobian", eq.jacobian, (4, N + 3), "d residual / d z"),),
                     "Jacobian of the relaxed-hover residual with respect to z."),
        FunctionSpec("reduced_rhs", (xr, f, par),
                     (("rhs", red.rhs, (4,),
                       "(p_dot, q_dot [rad/s^2], nx_dot, ny_dot [1/s])"),),
                     "Reduced attitude model right-hand side, r held."),
        FunctionSpec("reduced_AB", (xr, f, par),
                     (("A", red.A, (4, 4), "d rhs / d (p, q, nx, ny)"),
                      ("B", red.B, (4, N), "d rhs / d f [per N]")),
                     "Jacobians A and B of the reduced model."),
        FunctionSpec("augmented_AB", (xr, f, lam, par),
                     (("A", aug.A, (4 + N, 4 + N), "d rhs / d (p, q, nx, ny, f)"),
                      ("B", aug.B, (4 + N, N), "d rhs / d (commanded f) [per N]")),
                     "Jacobians of the reduced model with first-order motor lag "
                     "(thrusts as states, commanded thrusts as inputs)."),
    ]


def _docstring(spec: FunctionSpec, cse: bool) -> str:
    lines = [spec.summary, "", "Generated by kit.symbolic.codegen "
             f"(cse={cse}); every argument's last axis is the vector, leading axes broadcast.",
             "", "Parameters", "----------"]
    for arg in spec.args:
        lines.append(f"{arg.name} : array_like, shape (..., {len(arg.symbols)})")
        lines.append(f"    {arg.doc} Entries along the last axis, with units:")
        lines.extend(f"    [{k}] {label}" for k, label in enumerate(arg.labels))
    lines += ["", "Returns", "-------"]
    for name, _, shape, doc in spec.outputs:
        dims = ", ".join(str(d) for d in shape)
        lines.append(f"{name} : ndarray, shape (..., {dims})")
        lines.append(f"    {doc}")
    return "\n".join(lines)


def _function_source(spec: FunctionSpec, structure: Structure, cse: bool) -> str:
    sym = symbols_for(structure)
    printer = _Printer({"fully_qualified_modules": True, "allow_unknown_functions": False})
    flat = []
    for _, mat, _, _ in spec.outputs:
        flat.extend(mat)
    jinv_syms = {s for s, _ in sym.jinv_defs}
    used = set().union(*(e.free_symbols for e in flat)) if flat else set()
    defs = []
    if used & jinv_syms:
        defs = [(s, e) for s, e in sym.jinv_defs if s in used or s.name == "Jdet"]
        for _, expr in defs:
            used |= expr.free_symbols
    if cse:
        replacements, reduced = sp.cse(flat, symbols=sp.numbered_symbols("_t"), order="canonical")
    else:
        replacements, reduced = [], flat

    body = []
    argnames = ", ".join(a.name for a in spec.args)
    body.append(f"def {spec.name}({argnames}):")
    body.append(textwrap.indent('"""' + _docstring(spec, cse) + '\n"""', "    "))
    for arg in spec.args:
        body.append(f"    {arg.name} = _arg({arg.name}, {len(arg.symbols)}, {arg.name!r})")
    shapes = ", ".join(f"{a.name}.shape[1:]" for a in spec.args)
    body.append(f"    batch = numpy.broadcast_shapes({shapes})")
    for arg in spec.args:
        for k, s in enumerate(arg.symbols):
            if s in used and s not in jinv_syms:
                body.append(f"    {printer.doprint(s)} = {arg.name}[{k}]")
    body.append('    with numpy.errstate(divide="ignore", invalid="ignore"):')
    for s, expr in defs:
        body.append(f"        {printer.doprint(s)} = {printer.doprint(expr)}")
    for s, expr in replacements:
        body.append(f"        {printer.doprint(s)} = {printer.doprint(expr)}")
    pos = 0
    outs = []
    for k, (_, mat, shape, _) in enumerate(spec.outputs):
        var = f"_out{k}"
        outs.append(var)
        body.append(f"        {var} = numpy.empty(batch + {tuple(shape)!r})")
        for idx in range(len(mat)):
            expr = reduced[pos + idx]
            if len(shape) == 1:
                where = f"..., {idx}"
            else:
                where = f"..., {idx // shape[1]}, {idx % shape[1]}"
            body.append(f"        {var}[{where}] = {printer.doprint(expr)}")
        pos += len(mat)
    body.append(f"    return {', '.join(outs)}")
    return "\n".join(body)


_PRELUDE = '''\
import numpy


def _arg(a, size, name):
    """Float array with the vector axis first (contiguous components), for fast slicing."""
    a = numpy.asarray(a, dtype=float)
    if a.ndim == 0 or a.shape[-1] != size:
        raise ValueError(
            f"{name}: expected shape (..., {size}), got {a.shape}"
        )
    if a.ndim == 1:
        return a  # one point: a[k] is already the k-th component (the common, hot case)
    return numpy.ascontiguousarray(numpy.moveaxis(a, -1, 0))


def _norm3(a, b, c):
    return numpy.sqrt(a * a + b * b + c * c)


def _inv_norm3(a, b, c):
    """1/|v|, and 0 at v = 0 (it only multiplies products of two components)."""
    n = numpy.sqrt(a * a + b * b + c * c)
    return numpy.where(n > 0, 1.0 / n, 0.0)
'''


def generate_source(structure: Structure, cse: bool = True, key: str | None = None) -> str:
    """Python source of the generated module of ``structure``.

    Parameters
    ----------
    structure : Structure
        Which equations to generate.
    cse : bool
        Share common subexpressions (``sympy.cse``) within each function.
    key : str, optional
        Cache key to store in the header; defaults to :func:`kit.symbolic.cache.cache_key`.
    """
    if key is None:
        key = cache.cache_key(structure)
    specs = function_specs(structure)
    parts = [
        _PRELUDE,
        f"STRUCTURE_KEY = {structure.key!r}",
        f"N_ROTORS = {structure.n_rotors}",
        f"PARAM_NAMES = {structure.param_names()!r}",
        f"PARAM_UNITS = {structure.param_units()!r}",
        f"CSE = {cse!r}",
        f"FUNCTIONS = {tuple(s.name for s in specs)!r}",
        "",
    ]
    for spec in specs:
        parts.append("")
        parts.append(_function_source(spec, structure, cse))
        parts.append("")
    body = "\n".join(parts)
    header = (
        f'"""Generated by kit.symbolic.codegen for structure {structure.key}; do not edit."""\n'
        f'CACHE_KEY = "{key}"\n'
        f'BODY_SHA256 = "{cache.body_sha256(body)}"\n'
    )
    return header + cache.BODY_MARKER + body


def build_module(structure: Structure, cse: bool = True, write: bool = True):
    """Generate, (atomically) cache and import the module of ``structure``.

    Parameters
    ----------
    structure : Structure
        Rotor count, wheel, drag law.
    cse : bool
        Common-subexpression elimination in the generated code.
    write : bool
        Write the module to the disk cache.
    """
    path = cache.cache_path(structure)
    text = generate_source(structure, cse=cse)
    if write:
        cache.write_atomic(path, text)
    return cache.module_from_source(text, cache._module_name(path), path if write else None)


# Keep the custom functions referenced (they are printed by name in generated code).
_ = (Norm3, InvNorm3)
