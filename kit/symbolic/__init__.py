"""Symbolic layer: Newton-Euler with rotors (and wheel), reduced attitude model, code generation.

Importing this package does not import sympy; the derivation modules do, on first use:
``kit.symbolic.rigid_body``, ``kit.symbolic.reduced``, ``kit.symbolic.codegen``,
``kit.symbolic.display``, ``kit.symbolic.snapshots``.
"""

from .structure import DRAG_LAWS, Structure

__all__ = ["DRAG_LAWS", "Structure", "equations_text"]


def equations_text(structure: Structure, latex: bool = False) -> str:
    """The equations of ``structure`` as plain text or LaTeX (see :mod:`kit.symbolic.display`).

    Parameters
    ----------
    structure : Structure
        Rotor count, wheel, drag law.
    latex : bool
        LaTeX instead of plain text.
    """
    from .display import equations_text as _equations_text

    return _equations_text(structure, latex=latex)
