"""Sanity warnings (kit.sanity): disc overlap, C_T and C_Q/C_T, rotor inertia, CoM height.

Check values: plane geometry (closed form); C_T = T / (rho n^2 D^4) with n in rev/s evaluated
directly from T = k_f omega^2 at one speed (Leishman, Principles of Helicopter Aerodynamics, 2nd
ed., 2006, section 2.2, from memory); the usual ranges are common practice, no source.
"""

import copy
import math
import tomllib
from pathlib import Path

import pytest

from kit import design, sanity

ROOT = Path(__file__).resolve().parents[1]
DESIGNS = ROOT / "data" / "designs"
FIXTURES = Path(__file__).parent / "fixtures"


def _doc(path: Path) -> dict:
    return tomllib.loads(path.read_text(encoding="utf-8"))


def test_demo_designs_raise_no_sanity_warning(demo_design_path):
    d = design.from_dict(_doc(demo_design_path), base_dir=DESIGNS)
    assert d.warnings == ()


def test_hexacopter_disc_overlap_closed_form():
    doc = _doc(FIXTURES / "heavy_hex_by_hand.toml")
    for r in doc["rotor"]:
        r["diameter_m"] = 0.56
    d = design.from_dict(doc)
    # six hubs on a circle of radius R = 0.55 m: neighbours 2 R sin(30 deg) = R apart, so
    # 0.56 m discs overlap by 0.56 - 0.55 = 0.01 m; next-but-one hubs are R sqrt(3) = 0.953 m
    # apart and do not overlap (plane geometry).
    spacing = 2 * 0.55 * math.sin(math.radians(30.0))
    lines = [w for w in d.warnings if "overlap" in w]
    assert len(lines) == 6
    for a, b in zip(d.rotors, d.rotors[1:] + d.rotors[:1], strict=True):
        ov = sanity.disc_overlap_m(a.position_m, b.position_m, 0.56, 0.56)
        assert ov == pytest.approx(0.56 - spacing, abs=1e-4)  # hubs written to 4 decimals
        assert any(f"{a.name!r}" in w and f"{b.name!r}" in w for w in lines)
    assert sanity.disc_overlap_m(d.rotors[0].position_m, d.rotors[2].position_m, 0.56, 0.56) \
        == pytest.approx(0.56 - 0.55 * math.sqrt(3), abs=1e-4)


def test_thrust_coefficient_against_its_definition():
    k_f, dia, rho = 6.0e-6, 0.13, 1.225
    omega = 700.0
    thrust = k_f * omega ** 2
    n_rev_s = omega / (2 * math.pi)
    expected = thrust / (rho * n_rev_s ** 2 * dia ** 4)
    assert sanity.thrust_coefficient(k_f, dia, rho) == pytest.approx(expected, rel=1e-12)
    assert expected == pytest.approx(0.68, abs=0.01)  # the figure for the old wheel quad


def test_out_of_range_coefficients_and_inertia_warn():
    doc = _doc(DESIGNS / "wheel_quad.toml")
    r = doc["rotor"][0]
    r["thrust_coeff_n_s2"] = 6.0e-6       # C_T 0.68
    r["torque_per_thrust_m"] = 0.002      # C_Q/C_T 0.015
    r["rotor_inertia_kg_m2"] = 1.0e-9     # I/D^5 2.7e-5 kg/m^3
    d = design.from_dict(doc)
    text = "\n".join(d.warnings)
    assert "rotor 'front': thrust_coeff_n_s2 6e-06 gives C_T 0.677" in text
    assert "rotor 'front': torque_per_thrust_m / diameter_m = C_Q/C_T 0.0154" in text
    assert "rotor 'front': rotor_inertia_kg_m2 1e-09 is implausible" in text
    assert len(d.warnings) == 3


def test_com_far_below_the_rotor_plane_warns():
    doc = _doc(DESIGNS / "wheel_quad.toml")
    doc["part"].append({"name": "pendulum weight", "mass_kg": 2.0, "shape": "point",
                        "position_m": [0.0, 0.0, -0.2]})
    d = design.from_dict(doc)
    assert any(w.startswith("CoM ") and "below the rotor plane" in w for w in d.warnings)


def test_coaxial_pair_is_not_an_overlap():
    doc = _doc(DESIGNS / "wheel_quad.toml")
    lower = copy.deepcopy(doc["rotor"][0])
    lower.update(name="front lower", spin="cw", position_m=[0.12, 0.0, -0.04])
    doc["rotor"].append(lower)
    d = design.from_dict(doc)
    assert sanity.is_coaxial_pair(d.rotors[0], d.rotors[-1])
    assert d.warnings == ()


def test_rotors_sharing_a_finding_share_one_line():
    doc = _doc(DESIGNS / "wheel_quad.toml")
    for r in doc["rotor"]:
        r["thrust_coeff_n_s2"] = 6.0e-6
    d = design.from_dict(doc)
    assert d.warnings == ("rotors 'front', 'left', 'rear', 'right': thrust_coeff_n_s2 6e-06 "
                          "gives C_T 0.677 for a 0.13 m propeller at 1.225 kg/m^3; usual 0.05 to "
                          "0.2 (common practice, no source)",)
