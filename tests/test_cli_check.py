"""``rotorbook check``: demo designs pass, bad files exit 2 with one line per problem."""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import pytest

from kit import cli

HERE = Path(__file__).resolve().parent
CORPUS = sorted((HERE / "bad_designs").glob("*.toml"))
DESIGNS = sorted((HERE.parent / "data" / "designs").glob("*.toml"))


def expected_fragments(path: Path) -> list[str]:
    prefix = "# expect: "
    return [line[len(prefix):] for line in path.read_text(encoding="utf-8").splitlines()
            if line.startswith(prefix)]


def run(capsys, *argv: str) -> tuple[int, str, str]:
    code = cli.main(["check", *argv])
    out, err = capsys.readouterr()
    return code, out, err


def test_demo_design_passes(capsys, demo_design_path):
    code, out, err = run(capsys, str(demo_design_path))
    assert code == cli.EXIT_OK
    assert err == ""
    assert f"{demo_design_path}: valid" in out
    assert "principal moments" in out
    assert "warning" not in out


def test_all_demo_designs_at_once(capsys):
    code, out, err = run(capsys, *map(str, DESIGNS))
    assert code == 0 and err == ""
    assert out.count(": valid\n") == len(DESIGNS)


def test_json_schema(capsys):
    code, out, err = run(capsys, "--json", *map(str, DESIGNS))
    assert code == 0 and err == ""
    records = json.loads(out)
    assert isinstance(records, list) and len(records) == len(DESIGNS)
    for rec, path in zip(records, DESIGNS, strict=True):
        assert {"design", "mass_properties", "rotors", "errors", "warnings"} <= set(rec)
        assert set(rec["design"]) == {"name", "revision", "sha256"}
        assert len(rec["design"]["sha256"]) == 64
        mp = rec["mass_properties"]
        assert set(mp) == {"mass_kg", "com_m", "inertia_kg_m2", "principal_moments_kg_m2",
                           "principal_axes"}
        assert mp["mass_kg"] > 0
        assert len(mp["com_m"]) == 3
        assert [len(row) for row in mp["inertia_kg_m2"]] == [3, 3, 3]
        assert [len(row) for row in mp["principal_axes"]] == [3, 3, 3]
        assert mp["principal_moments_kg_m2"] == sorted(mp["principal_moments_kg_m2"])
        assert len(rec["rotors"]) >= 3
        for r in rec["rotors"]:
            assert set(r) == {"name", "position_m", "spin"}
            assert r["spin"] in ("ccw", "cw") and len(r["position_m"]) == 3
        assert rec["errors"] == [] and rec["warnings"] == []
        assert rec["file"] == str(path)


def test_json_with_a_bad_file(capsys):
    bad = HERE / "bad_designs" / "many_problems.toml"
    code, out, _ = run(capsys, "--json", str(DESIGNS[0]), str(bad))
    assert code == cli.EXIT_BAD_INPUT
    good_rec, bad_rec = json.loads(out)
    assert good_rec["errors"] == []
    assert bad_rec["design"] is None and bad_rec["mass_properties"] is None
    assert len(bad_rec["errors"]) == 3


def test_mixed_good_and_bad_exits_2(capsys):
    bad = [HERE / "bad_designs" / n for n in ("negative_thrust.toml", "many_problems.toml")]
    code, out, err = run(capsys, str(DESIGNS[0]), *map(str, bad), str(DESIGNS[-1]))
    assert code == cli.EXIT_BAD_INPUT
    assert out.count(": valid\n") == 2  # the good files are still summarised
    lines = err.splitlines()
    assert len(lines) == 1 + 3  # one line per problem, nothing else
    assert lines[0] == f"{bad[0]}: rotor 'r2'.max_thrust_n: -2.0 -> a number > 0"
    assert all(line.startswith(f"{bad[1]}: ") for line in lines[1:])
    assert "Traceback" not in err


@pytest.mark.parametrize("path", CORPUS, ids=lambda p: p.stem)
def test_corpus_file_exits_2_one_line_per_problem(capsys, path):
    code, out, err = run(capsys, str(path))
    assert code == cli.EXIT_BAD_INPUT
    assert out == ""
    lines = err.splitlines()
    expected = expected_fragments(path)
    assert len(lines) == len(expected), lines
    for fragment in expected:
        assert any(fragment in line for line in lines), (fragment, lines)
    assert all(line.startswith(f"{path}: ") for line in lines)
    assert "Traceback" not in err


def test_generated_bad_files(capsys, tmp_path):
    latin1 = tmp_path / "latin1.toml"
    latin1.write_bytes(b'[design]\nname = "Jos\xe9"\n')
    big = tmp_path / "big.toml"
    big.write_bytes(b"#" * (1024 * 1024 + 1))
    missing = tmp_path / "missing.toml"
    code, _, err = run(capsys, str(latin1), str(big), str(missing))
    assert code == cli.EXIT_BAD_INPUT
    lines = err.splitlines()
    assert len(lines) == 3
    assert "not UTF-8 (byte 20)" in lines[0]
    assert "1048577 bytes -> at most 1048576 bytes" in lines[1]
    assert "does not exist" in lines[2]


def _with_warnings(tmp_path: Path) -> Path:
    text = (DESIGNS[0].parent / "survey_quad.toml").read_text(encoding="utf-8")
    heavy = ('\n[[part]]\nname = "offset payload"\nmass_kg = 2.0\nshape = "point"\n'
             "position_m = [0.3, 0.0, 0.0]\n")
    J = "[[1.0, 0.0, 0.0], [0.0, 1.0, 0.0], [0.0, 0.0, 1.5]]"  # far from the parts' inertia
    path = tmp_path / "warned.toml"
    path.write_text(text + heavy + f"\n[body]\ninertia_kg_m2 = {J}\n", encoding="utf-8")
    return path


def test_check_prints_mass_property_warnings(capsys, tmp_path):
    path = _with_warnings(tmp_path)
    code, out, err = run(capsys, str(path))
    assert code == cli.EXIT_OK and err == ""
    warned = [line for line in out.splitlines() if line.startswith("  warning: ")]
    assert len(warned) == 2
    assert "body.inertia_kg_m2 differs from the inertia computed from parts" in warned[0]
    assert "centre of mass is" in warned[1] and "rotors' centroid" in warned[1]
    code, out, _ = run(capsys, "--json", str(path))
    assert len(json.loads(out)[0]["warnings"]) == 2


def test_check_prints_design_warnings_once(capsys, tmp_path):
    text = (DESIGNS[0].parent / "survey_quad.toml").read_text(encoding="utf-8")
    path = tmp_path / "zero.toml"
    path.write_text(text.replace("rotor_inertia_kg_m2 = 3.0e-5", "rotor_inertia_kg_m2 = 0.0", 1),
                    encoding="utf-8")
    code, out, err = run(capsys, str(path))  # no DesignWarning escapes (filterwarnings=error)
    assert code == 0 and err == ""
    assert out.count("warning: rotor 'front_left'.rotor_inertia_kg_m2 = 0 is an idealisation") == 1


def test_entry_point_in_a_subprocess():
    """The real process: exit status 2, one line per problem, no traceback."""
    bad = HERE / "bad_designs" / "many_problems.toml"
    proc = subprocess.run([sys.executable, "-m", "kit.cli", "check", str(bad)],
                          capture_output=True, text=True, timeout=120)
    assert proc.returncode == 2
    assert len(proc.stderr.splitlines()) == 3
    assert "Traceback" not in proc.stderr


def test_usage_error_exits_2(capsys):
    with pytest.raises(SystemExit) as info:
        cli.main(["check"])
    assert info.value.code == 2
