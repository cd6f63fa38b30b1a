"""Design-file validation: the demo designs, the bad-input corpus, warnings, and a fuzz.

The corpus is tests/bad_designs/*.toml; each file names the problem it holds in its first comment
and, in ``# expect: ...`` lines, a fragment of each problem line it must produce (one per problem).
"""

from __future__ import annotations

import copy
import hashlib
import math
import re
import tomllib
import warnings
from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from kit import design
from kit.errors import DesignError, DesignWarning

HERE = Path(__file__).resolve().parent
CORPUS = sorted((HERE / "bad_designs").glob("*.toml"))
DESIGNS = HERE.parent / "data" / "designs"
FUZZ = settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.too_slow])

#: A problem line: a field path, a colon, the bad value, "->", what is allowed.
PROBLEM_LINE = re.compile(r"^[\w\[\]().+ -]+('[^']*'|\"[^\"]*\")?(\.[\w\[\]]+)*: .+ -> \S.*$")
#: The text of the fallback for an input shape validation did not foresee (never expected).
UNFORESEEN = "could not be read as a design"


def expected_fragments(path: Path) -> list[str]:
    prefix = "# expect: "
    return [line[len(prefix):] for line in path.read_text(encoding="utf-8").splitlines()
            if line.startswith(prefix)]


def base_text() -> str:
    """A valid design's text (the survey quad demo), to change one thing in."""
    return (DESIGNS / "survey_quad.toml").read_text(encoding="utf-8")


# ---------------------------------------------------------------------------------------------
# Demo designs
# ---------------------------------------------------------------------------------------------


def test_demo_design_loads_without_warnings(demo_design_path):
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        d = design.load(demo_design_path)
    assert d.warnings == ()
    assert d.sha256 == hashlib.sha256(demo_design_path.read_bytes()).hexdigest()
    assert d.name.startswith("Demo ")
    assert len(d.rotors) >= 3 and len(d.parts) >= 1
    assert {r.spin for r in d.rotors} == {1, -1}
    assert sum(r.spin for r in d.rotors) == 0  # balanced spin senses
    for fc in d.failure_cases:
        assert set(fc.failed) < set(d.rotor_names)
    assert demo_design_path.read_text(encoding="utf-8").startswith("# Demo design: an invented")


def test_survey_quad_fields_normalised():
    d = design.load(DESIGNS / "survey_quad.toml")
    assert d.rotor_names == ("front_left", "front_right", "rear_right", "rear_left")
    assert [r.spin for r in d.rotors] == [1, -1, 1, -1]
    assert d.rotors[0].position_m == (0.16, 0.16, 0.03)
    assert d.aero.drag_torque_coeff == (0.004, 0.004, 0.008)
    raw = tomllib.loads((DESIGNS / "survey_quad.toml").read_text(encoding="utf-8"))
    assert d.failure_cases[1].ratio_dict() == raw["failure_case"][1]["thrust_ratio"]
    assert d.failure_cases[1].failed == ("front_left",)
    # the file sets every threshold it knew of; those added later take their stated defaults
    assert set(d.review.defaulted) == {"min_damping_ratio", "min_lag_margin_s",
                                       "max_height_loss_m", "max_tilt_during_recovery_deg",
                                       "crash_height_loss_m"}
    assert d.gravity_m_s2 == 9.80665


def test_defaults_are_marked():
    d = design.load(DESIGNS / "wheel_quad.toml")
    assert d.control.disturbance_time_constant_assumed
    assert d.control.disturbance_time_constant_s == 0.05
    assert "min_thrust_to_weight" in d.review.defaulted
    assert d.gravity_m_s2 == design.STANDARD_GRAVITY_M_S2  # CGPM 1901 / ISO 80000-3
    assert d.air_density_kg_m3 == design.ISA_SEA_LEVEL_DENSITY_KG_M3  # ISO 2533
    assert d.wheel.max_momentum_n_m_s == pytest.approx(1.5e-4 * 800.0, rel=1e-12)


def test_design_is_frozen():
    d = design.load(DESIGNS / "wheel_quad.toml")
    with pytest.raises(AttributeError):
        d.name = "other"  # type: ignore[misc]


# ---------------------------------------------------------------------------------------------
# The bad-input corpus
# ---------------------------------------------------------------------------------------------


def test_corpus_is_large_enough():
    assert len(CORPUS) >= 30
    for path in CORPUS:
        assert expected_fragments(path), f"{path.name} has no '# expect:' line"
        assert path.stat().st_size < 4096


@pytest.mark.parametrize("path", CORPUS, ids=lambda p: p.stem)
def test_corpus_file_is_rejected_with_its_message(path):
    expected = expected_fragments(path)
    with pytest.raises(DesignError) as info:
        design.load(path)
    problems = info.value.problems
    assert len(problems) == len(expected), problems  # one line per problem, nothing extra
    for fragment in expected:
        assert any(fragment in p for p in problems), (fragment, problems)
    for p in problems:
        assert "\n" not in p
        assert UNFORESEEN not in p
        if not p.startswith("TOML syntax"):
            assert PROBLEM_LINE.match(p), p
    assert info.value.path == str(path)
    assert str(path) in str(info.value)


def test_missing_file(tmp_path):
    missing = tmp_path / "nowhere.toml"
    with pytest.raises(DesignError, match=r"does not exist -> give the path of a \.toml"):
        design.load(missing)


def test_directory_is_not_a_design(tmp_path):
    with pytest.raises(DesignError, match="is not a file"):
        design.load(tmp_path)


def test_not_utf8(tmp_path):
    bad = tmp_path / "latin1.toml"
    bad.write_bytes(base_text().replace("demo author", "Jos\u00e9").encode("latin-1"))
    with pytest.raises(DesignError, match=r"file: not UTF-8 \(byte \d+\) -> save the file as"):
        design.load(bad)


def test_over_one_mebibyte(tmp_path):
    big = tmp_path / "big.toml"
    big.write_text(base_text() + "#" * (design.MAX_FILE_BYTES + 1), encoding="utf-8")
    with pytest.raises(DesignError, match=r"bytes -> at most 1048576 bytes \(1 MiB\)"):
        design.load(big)


def test_every_problem_reported_at_once():
    text = base_text().replace("max_thrust_n = 8.0", "max_thrust_n = -8.0")
    with pytest.raises(DesignError) as info:
        design.loads(text)
    names = ("front_left", "front_right", "rear_right", "rear_left")
    assert [p.split(":")[0] for p in info.value.problems] == [
        f"rotor '{n}'.max_thrust_n" for n in names]
    assert "rotor 'rear_left'.max_thrust_n: -8.0 -> a number > 0" in info.value.problems


def test_not_a_table_at_top_level():
    for data in (None, [], "text", 3):
        with pytest.raises(DesignError, match=r"\(top level\): .* -> a TOML document"):
            design.from_dict(data)


def test_design_error_is_a_value_error():
    assert issubclass(DesignError, ValueError)


# ---------------------------------------------------------------------------------------------
# Valid but worth a second look: DesignWarning, not an error
# ---------------------------------------------------------------------------------------------


def _write(tmp_path: Path, text: str) -> Path:
    path = tmp_path / "design.toml"
    path.write_text(text, encoding="utf-8")
    return path


def test_zero_rotor_inertia_warns(tmp_path):
    text = base_text().replace("rotor_inertia_kg_m2 = 3.0e-5", "rotor_inertia_kg_m2 = 0.0", 1)
    with pytest.warns(DesignWarning, match=r"rotor 'front_left'\.rotor_inertia_kg_m2 = 0 is an "
                                           "idealisation"):
        d = design.load(_write(tmp_path, text))
    assert d.rotors[0].rotor_inertia_kg_m2 == 0.0
    assert len(d.warnings) == 1


def test_zero_drag_warns(tmp_path):
    text = base_text().replace("drag_torque_coeff = [0.004, 0.004, 0.008]",
                               "drag_torque_coeff = 0")
    with pytest.warns(DesignWarning, match=r"aero\.drag_torque_coeff = 0 is an idealisation"):
        d = design.load(_write(tmp_path, text))
    assert d.aero.drag_torque_coeff == (0.0, 0.0, 0.0)


def test_zero_drag_about_one_axis_warns(tmp_path):
    text = base_text().replace("[0.004, 0.004, 0.008]", "[0.004, 0.004, 0.0]")
    with pytest.warns(DesignWarning, match="has a zero entry"):
        design.load(_write(tmp_path, text))


def test_zero_thrust_ratio_is_quiet():
    """A zero ratio (that rotor idles) is allowed without a warning, if some ratio is > 0."""
    text, n = re.subn(r"rear_right = [0-9.]+ *,", "rear_right = 0.0,", base_text())
    assert n == 1
    d = design.loads(text)
    assert d.warnings == ()
    assert d.failure_cases[1].ratio_dict()["rear_right"] == 0.0


def test_warning_points_at_the_caller(tmp_path):
    text = base_text().replace("rotor_inertia_kg_m2 = 3.0e-5", "rotor_inertia_kg_m2 = 0.0", 1)
    with pytest.warns(DesignWarning) as record:
        design.load(_write(tmp_path, text))
    assert record[0].filename == __file__


# ---------------------------------------------------------------------------------------------
# Fuzz: nothing but DesignError (or a valid Design) escapes from_dict
# ---------------------------------------------------------------------------------------------

scalars = (st.none() | st.booleans() | st.integers() | st.integers(min_value=-(10**400),
                                                                   max_value=10**400)
           | st.floats(allow_nan=True, allow_infinity=True) | st.text(max_size=12)
           | st.sampled_from(["box", "tube", "ccw", "cw", "linear", "z", "0.5 kg", "front_left"]))
keys = st.sampled_from(sorted({k for spec in design._FIELDS.values() for k in spec}
                              | set(design._TOP))) | st.text(max_size=8)
anything = st.recursive(
    scalars,
    lambda inner: st.lists(inner, max_size=4) | st.dictionaries(keys, inner, max_size=5),
    max_leaves=25,
)


def _from_dict_or_design_error(data):
    """Call from_dict; only DesignError may escape, and never the unforeseen-input fallback."""
    with warnings.catch_warnings():
        warnings.simplefilter("error")  # from_dict only collects warnings; it never emits them
        try:
            d = design.from_dict(data, base_dir=DESIGNS)  # stand data beside the demo files
        except DesignError as exc:
            assert exc.problems
            assert not any(UNFORESEEN in p for p in exc.problems), exc.problems
            return None
    assert isinstance(d, design.Design)
    return d


@FUZZ
@given(st.dictionaries(keys, anything, max_size=8))
def test_fuzz_arbitrary_documents(data):
    _from_dict_or_design_error(data)


@FUZZ
@given(anything)
def test_fuzz_arbitrary_values(data):
    _from_dict_or_design_error(data)


DEMOS = {p.stem: tomllib.loads(p.read_text(encoding="utf-8"))
         for p in sorted(DESIGNS.glob("*.toml"))}


def _paths(node, prefix=()):
    """Every path into a nested dict/list, as tuples of keys and indices."""
    yield prefix
    if isinstance(node, dict):
        for k, v in node.items():
            yield from _paths(v, prefix + (k,))
    elif isinstance(node, list):
        for i, v in enumerate(node):
            yield from _paths(v, prefix + (i,))


@st.composite
def mutated_demo(draw):
    data = copy.deepcopy(DEMOS[draw(st.sampled_from(sorted(DEMOS)))])
    for _ in range(draw(st.integers(1, 4))):
        paths = [p for p in _paths(data) if p]
        if not paths:
            break
        path = draw(st.sampled_from(paths))
        parent = data
        for k in path[:-1]:
            parent = parent[k]
        action = draw(st.sampled_from(["drop", "replace", "replace", "add"]))
        if action == "drop":
            del parent[path[-1]]
        elif action == "replace":
            parent[path[-1]] = draw(anything)
        elif isinstance(parent, dict):
            parent[draw(keys)] = draw(anything)
        else:
            parent.append(draw(anything))
    return data


@FUZZ
@given(mutated_demo())
def test_fuzz_mutated_demo_designs(data):
    d = _from_dict_or_design_error(data)
    if d is not None:  # still valid: every number finite, every rotor named once
        assert all(math.isfinite(x) for r in d.rotors for x in r.position_m)
        assert len(set(d.rotor_names)) == len(d.rotors) >= 3


@pytest.mark.parametrize("name", sorted(DEMOS))
def test_unmutated_demo_dict_is_valid(name):
    assert _from_dict_or_design_error(copy.deepcopy(DEMOS[name])) is not None


@FUZZ
@given(st.text(max_size=200))
def test_fuzz_toml_text(text):
    """Arbitrary text: a TOML syntax error or a validation error, never anything else."""
    try:
        design.loads(text)
    except DesignError:
        pass
