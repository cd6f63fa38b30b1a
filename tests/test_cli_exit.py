"""Exit status of the command line, from real processes: 0 done, 1 a workbook failed, 2 invalid
input (a line on stderr, with --json too), 3 with --strict when a design check fails; --help of
every command shows an example and the exit codes; stderr carries no third-party noise."""

from __future__ import annotations

import json
import os
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
DESIGN = ROOT / "data" / "designs" / "survey_quad.toml"
BAD = ROOT / "tests" / "bad_designs" / "negative_thrust.toml"
FIXTURES = ROOT / "tests" / "fixtures" / "record"
COMMANDS = ("check", "equations", "analyze", "sweep", "record", "new")


def rotorbook(*args, cwd=None) -> subprocess.CompletedProcess:
    env = dict(os.environ, PYTHONWARNINGS="default")
    return subprocess.run([sys.executable, "-m", "kit.cli", *map(str, args)], capture_output=True,
                          text=True, timeout=900, cwd=cwd, env=env)


def _cannot_hover(folder: Path) -> Path:
    """The demo survey quad with weak rotors: thrust-to-weight about 0.75, checks fail."""
    path = folder / "weak.toml"
    path.write_text(DESIGN.read_text(encoding="utf-8").replace("max_thrust_n = 8.0",
                                                                "max_thrust_n = 2.4"),
                    encoding="utf-8")
    return path


def test_exit_0_for_a_valid_design_and_2_for_an_invalid_one():
    ok = rotorbook("check", DESIGN)
    assert ok.returncode == 0, ok.stderr
    assert ok.stderr == ""
    bad = rotorbook("check", BAD)
    assert bad.returncode == 2
    assert "max_thrust_n" in bad.stderr and "Traceback" not in bad.stderr


def test_exit_2_prints_its_line_on_stderr_with_json_too():
    bad = rotorbook("check", "--json", BAD)
    assert bad.returncode == 2
    assert "max_thrust_n" in bad.stderr
    assert json.loads(bad.stdout)[0]["errors"]
    over = rotorbook("analyze", "--json", BAD)
    assert over.returncode == 2 and "max_thrust_n" in over.stderr and over.stdout == ""


def test_analyze_strict_exits_3_when_a_check_fails_and_json_has_the_verdict(tmp_path):
    weak = _cannot_hover(tmp_path)
    loose = rotorbook("analyze", "--json", weak)
    assert loose.returncode == 0, loose.stderr
    doc = json.loads(loose.stdout, parse_constant=lambda name: pytest.fail(name))
    assert doc["verdict"]["result"] == "fail"
    assert doc["verdict"]["failed"] == len(doc["verdict"]["failed_checks"]) > 0
    assert "thrust-to-weight" in [c["name"] for c in doc["verdict"]["failed_checks"]]
    # the old key stays; the rate has its own name beside it
    case = doc["cases"][0]
    assert "saturation_probability_per_s" in case and "saturation_rate_per_s" in case
    strict = rotorbook("analyze", "--strict", weak)
    assert strict.returncode == 3
    assert "verdict: FAIL" in strict.stdout
    assert "design check(s) failed" in strict.stderr


@pytest.mark.slow
def test_record_exit_1_when_a_workbook_fails_and_3_when_strict_and_checks_fail(tmp_path):
    failed = rotorbook("record", DESIGN, "--template-dir", FIXTURES, "--workbooks", "record_fail",
                       "--out", tmp_path / "a")
    assert failed.returncode == 1, failed.stderr
    assert "FAILED" in failed.stdout
    strict = rotorbook("record", DESIGN, "--template-dir", FIXTURES, "--workbooks",
                       "record_demo", "--out", tmp_path / "b", "--strict")
    assert strict.returncode == 3, strict.stderr  # record_demo: 1 of 2 checks met
    loose = rotorbook("record", DESIGN, "--template-dir", FIXTURES, "--workbooks",
                      "record_demo", "--out", tmp_path / "c")
    assert loose.returncode == 0
    for run in (failed, strict, loose):  # no third-party noise
        assert "encryption" not in run.stderr and "Warning" not in run.stderr, run.stderr


@pytest.mark.parametrize("command", COMMANDS)
def test_help_of_every_command_has_an_example_and_the_exit_codes(command):
    out = rotorbook(command, "--help")
    assert out.returncode == 0
    assert "example:" in out.stdout and f"rotorbook {command} " in out.stdout
    for code in ("0  done", "1  a workbook failed", "2  invalid input", "3  with --strict"):
        assert code in out.stdout


@pytest.mark.parametrize("option", [("--span-m", "nan"), ("--span-m", "inf"),
                                    ("--span-m", "1e300"), ("--points", "10000"),
                                    ("--points", "1")])
def test_sweep_options_out_of_range_exit_2_with_one_line(option):
    out = rotorbook("sweep", DESIGN, "--part", "battery", *option)
    assert out.returncode == 2
    assert option[0] in out.stderr and "Traceback" not in out.stderr
    assert len(out.stderr.strip().splitlines()) == 1
