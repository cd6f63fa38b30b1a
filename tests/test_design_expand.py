"""Design-file shorthand (kit.design_expand): rotor types, rings, names in errors, Bryson's rule.

Check values: the hand-written demo files (data/designs/wheel_quad.toml, survey_quad.toml and
tests/fixtures/heavy_hex_by_hand.toml, whose hub positions are written to 4 decimals, hence the
1e-4 m tolerance); Bryson's rule weight = 1 / max^2 (Bryson & Ho, Applied Optimal Control, 1975,
from memory).
"""

import copy
import math
import tomllib
from pathlib import Path

import pytest

from kit import design
from kit.design_expand import expanded_text
from kit.errors import DesignError

ROOT = Path(__file__).resolve().parents[1]
DESIGNS = ROOT / "data" / "designs"
FIXTURES = Path(__file__).parent / "fixtures"


def _doc(path: Path) -> dict:
    return tomllib.loads(path.read_text(encoding="utf-8"))


def _same_rotor(a, b, tol_m=1e-4, coeff_rel=0.0):
    assert a.name == b.name
    assert a.spin == b.spin
    assert a.position_m == pytest.approx(b.position_m, abs=tol_m)
    for f in ("max_thrust_n", "rotor_inertia_kg_m2", "diameter_m", "mass_kg"):
        assert getattr(a, f) == getattr(b, f), f
    for f in ("thrust_coeff_n_s2", "torque_per_thrust_m"):
        assert getattr(a, f) == pytest.approx(getattr(b, f), rel=coeff_rel, abs=0), f


def _same_part(a, b, tol_m=1e-4):
    assert a.name == b.name
    assert a.position_m == pytest.approx(b.position_m, abs=tol_m)
    for f in ("mass_kg", "shape", "size_m", "radius_m", "outer_radius_m", "inner_radius_m",
              "length_m", "axis", "yaw_deg"):
        assert getattr(a, f) == getattr(b, f), f


def _ring_quad(doc: dict, names, first_deg, step_deg, radius_m, height_m) -> dict:
    shared = {k: v for k, v in doc["rotor"][0].items() if k not in ("name", "position_m", "spin")}
    out = copy.deepcopy(doc)
    del out["rotor"]
    out["rotor_type"] = [{"name": "quad rotor", **shared}]
    out["rotor_ring"] = [{"type": "quad rotor", "count": 4, "radius_m": radius_m,
                          "first_angle_deg": first_deg, "angle_step_deg": step_deg,
                          "height_m": height_m, "spins": ["ccw", "cw"], "names": names}]
    return out


def test_ring_gives_the_hand_written_plus_quad():
    doc = _doc(DESIGNS / "wheel_quad.toml")
    hand = design.from_dict(doc)
    ring = design.from_dict(_ring_quad(doc, ["front", "left", "rear", "right"], 0.0, 90.0,
                                       0.12, 0.01))
    assert len(ring.rotors) == 4
    for a, b in zip(ring.rotors, hand.rotors, strict=True):
        _same_rotor(a, b, tol_m=1e-12)


def test_ring_gives_the_hand_written_x_quad():
    doc = _doc(DESIGNS / "survey_quad.toml")
    hand = design.from_dict(doc)
    ring = design.from_dict(_ring_quad(doc, ["front_left", "front_right", "rear_right",
                                             "rear_left"], 45.0, -90.0, math.hypot(0.16, 0.16),
                                       0.03))
    for a, b in zip(ring.rotors, hand.rotors, strict=True):
        _same_rotor(a, b, tol_m=1e-12)
    assert ring.failure_cases == hand.failure_cases


def test_demo_hexacopter_rings_equal_the_hand_written_file():
    ring = design.load(DESIGNS / "heavy_hex.toml")
    hand = design.load(FIXTURES / "heavy_hex_by_hand.toml")
    fit = ring.rotor_fits[0]
    assert fit.rotors == tuple(f"m{k}" for k in range(1, 7))
    # coefficients: fitted from invented stand data made from the hand-written values plus noise;
    # they agree within 3 standard errors (common practice, no source)
    assert abs(fit.thrust_coeff_n_s2 - 1.6e-4) < 3 * fit.thrust_coeff_se_n_s2
    assert abs(fit.torque_per_thrust_m - 0.022) < 3 * fit.torque_per_thrust_se_m
    for a, b in zip(ring.rotors, hand.rotors, strict=True):
        _same_rotor(a, b, coeff_rel=3 * fit.thrust_coeff_se_n_s2 / 1.6e-4 + 0.01)
    by_name = {p.name: p for p in hand.parts}
    assert sorted(by_name) == sorted(p.name for p in ring.parts)
    for p in ring.parts:
        _same_part(p, by_name[p.name])
    assert ring.failure_cases == hand.failure_cases
    assert ring.review == hand.review and ring.control == hand.control


def test_rotor_type_fields_are_overridden_by_the_rotor():
    doc = _doc(DESIGNS / "wheel_quad.toml")
    doc = _ring_quad(doc, ["a", "b", "c", "d"], 0.0, 90.0, 0.12, 0.01)
    ring = doc.pop("rotor_ring")[0]
    doc["rotor"] = [{"name": n, "type": "quad rotor", "position_m": [x, y, 0.01], "spin": s}
                    for n, x, y, s in (("a", 0.12, 0, "ccw"), ("b", 0, 0.12, "cw"),
                                       ("c", -0.12, 0, "ccw"), ("d", 0, -0.12, "cw"))]
    doc["rotor"][1]["max_thrust_n"] = 2.5
    doc["failure_case"] = [{"failed": ["b", "d"]}]
    d = design.from_dict(doc)
    assert [r.max_thrust_n for r in d.rotors] == [3.2, 2.5, 3.2, 3.2]
    assert ring["count"] == 4


def test_errors_name_generated_rotors_and_arms():
    doc = _doc(DESIGNS / "heavy_hex.toml")
    doc["rotor_type"][0]["max_thrust_n"] = -1.0
    doc["arm_ring"][0]["shape"] = "tubes"
    with pytest.raises(DesignError) as info:
        design.from_dict(doc, base_dir=DESIGNS)
    text = "\n".join(info.value.problems)
    assert "rotor 'm4'.max_thrust_n: -1.0 -> a number > 0" in text
    assert "part 'arm 3'.shape: 'tubes' -> one of" in text
    assert "part[" not in text and "rotor[" not in text


def test_unknown_rotor_type_is_one_clear_line():
    doc = _ring_quad(_doc(DESIGNS / "wheel_quad.toml"), ["a", "b", "c", "d"], 0, 90, 0.12, 0)
    doc["rotor_ring"][0]["type"] = "quad rotr"
    with pytest.raises(DesignError) as info:
        design.from_dict(doc)
    assert any("rotor_ring[0].type: 'quad rotr' -> a [[rotor_type]] name: quad rotor; did you "
               "mean 'quad rotor'?" in p for p in info.value.problems)


def test_ring_names_by_prefix_and_first_index():
    doc = _ring_quad(_doc(DESIGNS / "wheel_quad.toml"), None, 0, 90, 0.12, 0)
    ring = doc["rotor_ring"][0]
    del ring["names"]
    ring["name_prefix"] = "motor_"
    ring["first_index"] = 0
    doc["failure_case"] = [{"failed": ["motor_1", "motor_3"]}]
    d = design.from_dict(doc)
    assert d.rotor_names == ("motor_0", "motor_1", "motor_2", "motor_3")


def test_expanded_text_reads_back_to_the_same_design():
    src = DESIGNS / "heavy_hex.toml"
    text = expanded_text(_doc(src), DESIGNS)
    assert "heavy_hex_stand.csv" in text and "sha256" in text
    again = design.loads(text)
    d = design.load(src)
    assert again.rotors == d.rotors and again.parts == d.parts
    assert "[[rotor_ring]]" not in text and "[[rotor]]" in text


def test_coaxial_pair_is_accepted_and_same_spin_is_not():
    doc = _doc(DESIGNS / "wheel_quad.toml")
    lower = copy.deepcopy(doc["rotor"][0])
    lower.update(name="front lower", spin="cw", position_m=[0.12, 0.0, -0.05])
    doc["rotor"].append(lower)
    d = design.from_dict(doc)
    assert d.rotor_names[-1] == "front lower"
    assert not any("overlap" in w for w in d.warnings)
    doc["rotor"][-1]["spin"] = "ccw"
    with pytest.raises(DesignError, match="rotor 'front lower'.position_m.*a hub apart from "
                                          "rotor 'front'"):
        design.from_dict(doc)


def test_bryson_limits_give_the_weights():
    doc = _doc(DESIGNS / "survey_quad.toml")
    ctl = doc["control"]
    for k in ("weight_rate", "weight_attitude", "weight_thrust"):
        del ctl[k]
    ctl.update(max_rate_rad_s=2.0, max_tilt_deg=10.0, max_thrust_deviation_n=0.5)
    d = design.from_dict(doc)
    # Bryson's rule: weight = 1 / max^2 (Bryson & Ho, 1975, from memory); tilt in rad
    assert d.control.weight_rate == pytest.approx(0.25)
    assert d.control.weight_attitude == pytest.approx(1 / math.radians(10.0) ** 2)
    assert d.control.weight_thrust == pytest.approx(4.0)
    assert d.bryson.max_tilt_deg == 10.0
    ctl["weight_rate"] = 1.0
    with pytest.raises(DesignError, match="control.weight_rate: 1.0 -> either the weights or"):
        design.from_dict(doc)


def test_stand_data_needs_a_file_beside_the_design():
    doc = _doc(DESIGNS / "heavy_hex.toml")
    with pytest.raises(DesignError, match="stand data need a design file on disk"):
        design.from_dict(doc)
    doc["rotor_type"][0]["stand_data"] = "../heavy_hex_stand.csv"
    with pytest.raises(DesignError, match="no '..', not absolute"):
        design.from_dict(doc, base_dir=DESIGNS)


def test_cli_check_expanded_prints_readable_toml(capsys):
    from kit import cli

    code = cli.main(["check", "--expanded", str(DESIGNS / "heavy_hex.toml")])
    out = capsys.readouterr().out
    assert code == cli.EXIT_OK
    doc = tomllib.loads(out)
    assert [r["name"] for r in doc["rotor"]] == [f"m{k}" for k in range(1, 7)]
    assert "rotor_ring" not in doc and "rotor_type" not in doc
    assert doc["rotor"][0]["thrust_coeff_n_s2"] == design.load(
        DESIGNS / "heavy_hex.toml").rotors[0].thrust_coeff_n_s2
