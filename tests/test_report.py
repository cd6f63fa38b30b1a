"""The whole-design report and `rotorbook analyze`: schema, exit codes, checks."""

import json
import subprocess
import sys
from pathlib import Path

import pytest

from kit import cli
from kit.analysis.report import SCHEMA, analyze, plain
from kit.design import load

DESIGNS = sorted(Path(__file__).parent.parent.joinpath("data", "designs").glob("*.toml"))


@pytest.fixture(scope="module", params=DESIGNS, ids=lambda p: p.stem)
def report(request):
    # the hexacopter's 20 failure cases are flown in the benchmark, not here (time)
    fly = request.param.stem != "heavy_hex"
    return analyze(load(request.param), simulate=fly, gusts=fly)


def test_schema_keys(report):
    d = report.to_dict()
    json.dumps(d, allow_nan=False)  # plain JSON, no NaN
    assert d["schema"] == SCHEMA
    assert set(d["design"]) == {"name", "revision", "sha256"}
    assert set(d["mass_properties"]) >= {"mass_kg", "com_m", "inertia_kg_m2",
                                         "principal_moments_kg_m2", "principal_axes"}
    assert set(d["hover"]) >= {"thrust_n", "thrust_to_weight", "hover_thrust_fraction",
                               "allocation_rank", "torque_margin_n_m"}
    case_keys = {"failed", "thrust_ratio", "equilibrium_found", "reason", "free_directions",
                 "thrust_n", "omega_bar_rad_s", "n_bar", "spin_rate_rad_s", "tilt_deg",
                 "reduced_model", "controllable", "controllability_distance", "lqr",
                 "saturation_probability_per_s", "h2_norm", "checks"}
    for c in d["cases"]:
        assert set(c) >= case_keys
        if c["lqr"] is not None:
            assert set(c["lqr"]) >= {"Q", "R", "K", "closed_loop_poles"}
            assert all(len(p) == 2 for p in c["lqr"]["closed_loop_poles"])
    assert d["cases"][0]["failed"] == []
    assert set(d["wheel_study"]) >= {"h_n_m_s", "h2_ratio", "flags"}
    assert isinstance(d["spin_stability"], list)
    assert all(set(k) >= {"name", "value", "limit", "passed"} for k in d["checks"])


def test_every_case_has_checks_and_summary(report):
    assert len(report.checks) > 3
    text = report.summary_text()
    assert report.design.name in text and "checks:" in text
    assert "<table" in report._repr_html_()


def test_failure_cases_flown_worst_first_with_gains(report):
    d = report.to_dict()
    assert len(d["gains"]) == sum(c.eq.found and c.ctl.K is not None for c in report.cases)
    if report.design.name.startswith("Demo heavy"):
        return
    rows = d["transients_worst_first"]
    assert len(rows) == sum(bool(c.eq.failed) for c in report.cases)
    keys = [(-r["checks_failed"], bool(r["converged"]),
             -(r["transient"]["height_lost_m"] if r["transient"] else float("inf")))
            for r in rows]
    assert keys == sorted(keys)
    assert "Recovery from each failure, worst first" in report._repr_html_()
    assert d["gust_monte_carlo"]["ratio"] > 0


def test_plain_converts_numpy_and_nan():
    import numpy as np

    assert plain({"a": np.float64(1.5), "b": np.array([1, 2]), "c": float("nan"),
                  "d": np.bool_(True)}) == {"a": 1.5, "b": [1, 2], "c": None, "d": True}


def test_cli_analyze_json_and_exit_codes(tmp_path, capsys):
    path = str(DESIGNS[0].parent / "survey_quad.toml")
    assert cli.main(["analyze", path, "--json"]) == 0
    out = json.loads(capsys.readouterr().out)
    assert out["schema"] == SCHEMA
    bad = tmp_path / "bad.toml"
    bad.write_text('[design]\nname = "x"\n', encoding="utf-8")
    assert cli.main(["analyze", str(bad)]) == 2
    err = capsys.readouterr().err
    assert "Traceback" not in err and "revision" in err


def test_cli_analyze_subprocess_readable_summary():
    r = subprocess.run([sys.executable, "-m", "kit.cli", "analyze",
                        str(DESIGNS[0].parent / "survey_quad.toml")],
                       capture_output=True, text=True, timeout=300)
    assert r.returncode == 0, r.stderr
    assert "cases:" in r.stdout and "checks:" in r.stdout


def test_cli_equations_plain_and_latex(capsys):
    # the wheel quad: 4 rotors and a wheel; sums over rotors, not expanded copies
    wheel = next(p for p in DESIGNS if p.stem == "wheel_quad")
    assert cli.main(["equations", str(wheel)]) == 0
    plain_text = capsys.readouterr().out
    assert "n4-wheel-linear" in plain_text
    assert cli.main(["equations", str(wheel), "--latex"]) == 0
    tex = capsys.readouterr().out
    assert r"\sum" in tex and "h_{w}" in tex
    assert "{f}_{3}" not in tex  # rotors are summed, not written out one by one


def test_cli_sweep_summary_json_and_bad_options(capsys):
    survey = str(next(p for p in DESIGNS if p.stem == "survey_quad"))
    assert cli.main(["sweep", survey, "--part", "battery", "--points", "3",
                     "--span-m", "0.01", "--json"]) == 0
    data = json.loads(capsys.readouterr().out)
    assert data["part"] == "battery" and len(data["x_offsets_m"]) == 3
    assert data["hover"]["found"] == [[True] * 3] * 3
    # a part that does not exist, an unknown rotor, a bad grid: one line each, exit 2
    for argv in (["--part", "batery"], ["--part", "battery", "--failed", "nose"],
                 ["--part", "battery", "--points", "1"]):
        assert cli.main(["sweep", survey, *argv]) == 2
        err = capsys.readouterr().err
        assert err.count("\n") == 1 and "Traceback" not in err


def test_a_working_rotor_below_its_idle_thrust_fails_the_thrust_limits_check():
    # A balanced quad hovers at m g / 4 per rotor (derived exact relation); with an idle thrust
    # above that, the point is outside the rotors' limits: the check fails and names the rotors.
    import dataclasses

    from kit.analysis.report import analyse_case
    from kit.analysis.vehicle import Vehicle
    from kit.models import ring_design

    d = ring_design(mass_kg=0.5)
    quarter = 0.5 * 9.80665 / 4
    high = dataclasses.replace(d, rotors=tuple(dataclasses.replace(r, min_thrust_n=1.2 * quarter)
                                               for r in d.rotors))
    low = dataclasses.replace(d, rotors=tuple(dataclasses.replace(r, min_thrust_n=0.8 * quarter)
                                              for r in d.rotors))
    bad = analyse_case(Vehicle.from_design(high)).checks[0]
    assert bad.name == "equilibrium within thrust limits" and not bad.passed
    assert bad.note.startswith("below idle thrust: r0 1.23 N < 1.47 N")
    assert all(n in bad.note for n in ("r1", "r2", "r3"))
    good = analyse_case(Vehicle.from_design(low)).checks[0]
    assert good.passed and good.note == ""
