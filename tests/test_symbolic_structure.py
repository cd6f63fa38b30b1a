"""Structure keys and parameter order; display equations; the sympy-free import wall."""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

import pytest
from hypothesis import given
from hypothesis import strategies as st

from kit.symbolic import Structure, equations_text

ROOT = Path(__file__).resolve().parents[1]


def test_key_and_parameter_order():
    s = Structure(4, True, "linear")
    assert s.key == "n4-wheel-linear"
    assert Structure(6, False, "quadratic").key == "n6-nowheel-quadratic"
    names = s.param_names()
    assert names[:12] == ("m", "g", "Jxx", "Jyy", "Jzz", "Jxy", "Jxz", "Jyz", "gx", "gy", "gz",
                          "hw")
    assert names[12:18] == ("x_0", "y_0", "s_0", "kappa_0", "kf_0", "IP_0")
    assert names[-1] == "IP_3" and len(names) == s.n_params == 36
    units = dict(zip(names, s.param_units(), strict=True))
    assert units["hw"] == "N m s" and units["gx"] == "N m s" and units["kf_2"] == "N s^2"
    assert Structure(4, False, "quadratic").param_units()[8] == "N m s^2"
    assert s.param_index("kappa_1") == 21
    with pytest.raises(KeyError):
        Structure(4, False).param_index("hw")


@given(n=st.integers(1, 16), wheel=st.booleans(), drag=st.sampled_from(["linear", "quadratic"]))
def test_parameter_names_are_unique_and_parallel_to_units(n, wheel, drag):
    s = Structure(n, wheel, drag)
    names = s.param_names()
    assert len(set(names)) == len(names) == len(s.param_units()) == s.n_params
    assert all(name.isidentifier() for name in names)


@pytest.mark.parametrize(
    "kwargs", [dict(n_rotors=0, wheel=False), dict(n_rotors=4, wheel=1),
               dict(n_rotors=4, wheel=False, drag_law="cubic"), dict(n_rotors=True, wheel=False)]
)
def test_invalid_structure(kwargs):
    with pytest.raises(ValueError, match="invalid Structure"):
        Structure(**kwargs)


def test_import_wall_symbolic_package_and_numeric_model_do_not_import_sympy():
    code = (
        "import sys\n"
        "import kit.symbolic, kit.symbolic.structure, kit.symbolic.cache, kit.numeric\n"
        "assert 'sympy' not in sys.modules\n"
    )
    subprocess.run([sys.executable, "-c", code], cwd=ROOT, check=True)


@pytest.mark.parametrize("latex", [False, True])
def test_equations_text_uses_sums_not_copies(latex):
    text = equations_text(Structure(6, True, "quadratic"), latex=latex)
    assert "f_5" not in text and "x_3" not in text  # no expanded per-rotor copies
    if latex:
        assert r"\sum_{i=0}^{5}" in text and r"\left\lVert \omega \right\rVert" in text
        assert r"(J^{-1})_{xx}" in text and r"\dot{p}" in text
    else:
        assert "Sum(f[i]*y[i], (i, 0, 5))" in text and "|omega|" in text
        assert "h_w" in text
    assert "h_w" not in equations_text(Structure(3, False), latex=latex)
    lines = text.splitlines()
    assert len(lines) == len(equations_text(Structure(3, True, "quadratic"), latex).splitlines())
