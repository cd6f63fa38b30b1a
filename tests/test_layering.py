"""The one-way layering of DESIGN.md and the house rules on docstrings, checked mechanically."""

import importlib
import inspect
import pkgutil
import re
import subprocess
import sys

import pytest

import kit

UI_MODULES = ("bokeh", "ipywidgets", "nbclient", "nbconvert", "kit.panels", "kit.record",
              "kit.cli", "kit.plots")


def _imported_after(stmt: str) -> set[str]:
    code = f"import sys; {stmt}; print('\\n'.join(sorted(sys.modules)))"
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    return set(out.stdout.split())


def test_analysis_imports_no_ui_or_record():
    mods = _imported_after("import kit.analysis.report, kit.analysis.sweep, "
                           "kit.analysis.simulate, kit.analysis.spin")
    bad = sorted(m for m in mods if m.split(".")[0] in ("bokeh", "ipywidgets", "nbclient",
                                                         "nbconvert")
                 or m.startswith(("kit.panels", "kit.record", "kit.cli", "kit.plots")))
    assert not bad, f"kit.analysis pulled in UI/record modules: {bad}"


def test_symbolic_does_not_import_analysis():
    mods = _imported_after("import kit.symbolic.rigid_body, kit.symbolic.reduced, "
                           "kit.symbolic.codegen")
    assert not [m for m in mods if m.startswith("kit.analysis")]


def test_design_and_massprops_import_no_sympy():
    mods = _imported_after("import kit.design, kit.massprops")
    assert "sympy" not in mods


def test_panels_import_has_no_side_effects():
    mods = _imported_after("import kit.panels")
    assert "bokeh" not in mods and "ipywidgets" not in mods


PHYSICS_MODULES = ["kit.massprops", "kit.analysis.equilibrium", "kit.analysis.control",
                   "kit.analysis.risk", "kit.analysis.hover", "kit.analysis.wheel",
                   "kit.analysis.spin", "kit.analysis.simulate", "kit.symbolic.rigid_body"]


@pytest.mark.parametrize("name", PHYSICS_MODULES)
def test_physics_modules_cite_equation_and_source(name):
    doc = importlib.import_module(name).__doc__ or ""
    assert ".. math::" in doc, f"{name} does not state its equation"
    assert "References" in doc, f"{name} names no source"


def _public_functions():
    for info in pkgutil.walk_packages(kit.__path__, "kit."):
        if info.name.startswith(("kit.panels", "kit.record", "kit.cli")):
            continue
        mod = importlib.import_module(info.name)
        for fname, obj in vars(mod).items():
            if fname.startswith("_") or not inspect.isfunction(obj):
                continue
            if obj.__module__ != mod.__name__:
                continue
            yield f"{info.name}.{fname}", obj


#: Layers whose public functions must document every parameter (numpydoc, with units).
STRICT = ("kit.design", "kit.massprops", "kit.symbolic", "kit.numeric", "kit.analysis")


def test_documented_parameters_are_complete():
    # numpydoc: every public function documents its parameters; in the physics and input
    # layers a function with parameters must have a Parameters section
    missing = []
    for qual, fn in _public_functions():
        doc = inspect.getdoc(fn) or ""
        if not doc:
            missing.append(f"{qual}: no docstring")
            continue
        params = [p for p in inspect.signature(fn).parameters if p not in ("self", "cls")]
        if "Parameters\n----------" not in doc:
            if params and qual.startswith(STRICT):
                missing.append(f"{qual}: no Parameters section")
            continue
        section = doc.split("Parameters\n----------", 1)[1]
        section = re.split(r"\n\n[A-Z][a-z]+\n-{3,}", section, maxsplit=1)[0]
        documented = set(re.findall(r"^(\*{0,2}\w+)(?:\s*,\s*(\w+))*\s*:", section, re.M))
        names = {n for tup in documented for n in tup if n}
        names |= {n for line in section.splitlines() if ":" in line and not line.startswith(" ")
                  for n in re.split(r"\s*,\s*", line.split(":")[0].strip())}
        for p in inspect.signature(fn).parameters:
            if p in ("self", "cls") or p.lstrip("*") in names or p in names:
                continue
            missing.append(f"{qual}: parameter {p!r} not documented")
    assert not missing, "\n".join(missing)
