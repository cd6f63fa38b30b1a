"""Canonical text of the derived expressions, for derivation-regression tests.

``python -m kit.symbolic.snapshots --refresh`` rewrites ``tests/golden/*.txt``;
without ``--refresh`` it compares and exits 1 on a difference. A deliberate change to the
derivation updates the snapshots in the same commit, with the reason in its message.

The text is ``sympy.sstr`` of the unsimplified expressions (terms in sympy's canonical
order, so independent of hash seeds), one matrix entry per line.
"""

from __future__ import annotations

import argparse
import difflib
import sys
from pathlib import Path

import sympy as sp

from .reduced import augmented_model, reduced_model
from .rigid_body import equilibrium, rigid_body, symbols_for
from .structure import Structure

__all__ = ["SNAPSHOT_STRUCTURES", "golden_dir", "snapshot_text", "main"]

#: Structures whose derivations are stored: 3, 4 and 6 rotors, with and without wheel.
SNAPSHOT_STRUCTURES = tuple(
    Structure(n, wheel, "linear") for n in (3, 4, 6) for wheel in (False, True)
)


def golden_dir() -> Path:
    """``tests/golden`` of the source checkout."""
    return Path(__file__).resolve().parents[2] / "tests" / "golden"


def _matrix_lines(name: str, mat: sp.Matrix) -> list[str]:
    lines = [f"## {name} shape={mat.shape[0]}x{mat.shape[1]}"]
    for a in range(mat.shape[0]):
        for b in range(mat.shape[1]):
            idx = f"{a}" if mat.shape[1] == 1 else f"{a},{b}"
            lines.append(f"{name}[{idx}] = {sp.sstr(mat[a, b], order='lex')}")
    return lines


def snapshot_text(structure: Structure) -> str:
    """Canonical text of ``structure``'s derived expressions.

    Parameters
    ----------
    structure : Structure
        Rotor count, wheel, drag law.
    """
    sym = symbols_for(structure)
    rb = rigid_body(structure)
    eq = equilibrium(structure)
    red = reduced_model(structure)
    lines = [
        f"# kit.symbolic derivation snapshot: {structure.key}",
        f"# parameters: {', '.join(structure.param_names())}",
        "## inverse inertia definitions",
    ]
    lines += [f"{s} = {sp.sstr(e, order='lex')}" for s, e in sym.jinv_defs]
    lines += _matrix_lines("omega_dot", rb.omega_dot)
    lines += _matrix_lines("eq_residual", eq.residual)
    lines += _matrix_lines("reduced_rhs", red.rhs)
    lines += _matrix_lines("A", red.A)
    lines += _matrix_lines("B", red.B)
    aug = augmented_model(structure)
    lines += _matrix_lines("A_motor_lag", aug.A)
    lines += _matrix_lines("B_motor_lag", aug.B)
    return "\n".join(lines) + "\n"


def snapshot_path(structure: Structure, directory: Path | None = None) -> Path:
    """File of ``structure``'s snapshot.

    Parameters
    ----------
    structure : Structure
        Rotor count, wheel, drag law.
    directory : Path or None
        Folder of the snapshots (default: tests/golden).
    """
    return (directory or golden_dir()) / f"{structure.key}.txt"


def main(argv: list[str] | None = None) -> int:
    """Command line: compare (default) or ``--refresh`` the stored snapshots.

    Parameters
    ----------
    argv : list of str or None
        Command-line arguments (default: sys.argv).
    """
    parser = argparse.ArgumentParser(prog="python -m kit.symbolic.snapshots")
    parser.add_argument("--refresh", action="store_true", help="rewrite the stored snapshots")
    parser.add_argument("--dir", type=Path, default=None, help="snapshot folder")
    args = parser.parse_args(argv)
    status = 0
    for st in SNAPSHOT_STRUCTURES:
        path = snapshot_path(st, args.dir)
        text = snapshot_text(st)
        if args.refresh:
            path.parent.mkdir(parents=True, exist_ok=True)
            path.write_text(text, encoding="utf-8", newline="\n")
            print(f"wrote {path}")
            continue
        old = path.read_text(encoding="utf-8") if path.exists() else ""
        if old != text:
            status = 1
            diff = difflib.unified_diff(old.splitlines(), text.splitlines(), str(path), "derived",
                                        lineterm="", n=0)
            print("\n".join(list(diff)[:40]))
        else:
            print(f"ok {path}")
    return status


if __name__ == "__main__":
    sys.exit(main())
