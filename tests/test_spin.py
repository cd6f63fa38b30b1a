"""Principal-axis spin stability against the closed form and against a torque-free run."""

from __future__ import annotations

import json
import math
from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest

from kit import design
from kit.analysis import equilibrium as E
from kit.analysis import simulate as SIM
from kit.analysis import spin
from kit.analysis.vehicle import Vehicle
from kit.massprops import principal

ROOT = Path(__file__).resolve().parents[1]


@pytest.fixture(scope="module")
def quad() -> Vehicle:
    return Vehicle.from_design(design.load(ROOT / "data" / "designs" / "survey_quad.toml"))


def _with_inertia(veh: Vehicle, J: np.ndarray) -> Vehicle:
    moments, axes = principal(J)
    mp = replace(veh.mp, inertia_kg_m2=J, principal_moments_kg_m2=moments, principal_axes=axes)
    return veh.with_massprops(mp)


def test_box_moments_1_2_3(quad):
    # Landau & Lifshitz, Mechanics, 3rd ed., sec. 37, problem on the stability of rotation
    # (from memory): lambda^2 = Omega^2 (I2 - I1)(I3 - I2) / (I1 I3) about the intermediate axis.
    # With I = (1, 2, 3) kg m^2 and Omega = 1 rad/s: sqrt(1 * 1 / 3) = 0.5773503 1/s.
    rot = np.array([[0.0, -1.0, 0.0], [1.0, 0.0, 0.0], [0.0, 0.0, 1.0]])  # axes not along x, y, z
    veh = _with_inertia(quad, rot @ np.diag([2.0, 1.0, 3.0]) @ rot.T)
    s = spin.principal_spin_stability(veh, [1.0, -2.0])
    assert s.growth_rate_1_s[1] == pytest.approx([1 / math.sqrt(3), 2 / math.sqrt(3)], rel=1e-12)
    assert np.all(s.growth_rate_1_s[[0, 2]] == 0.0)
    # neutral axes nutate at Omega sqrt((Ik - Ii)(Ik - Ij)/(Ii Ij)): minor sqrt(1*2/(2*3)),
    # major sqrt(2*1/(1*2)) (same source)
    assert s.nutation_rate_rad_s[0, 0] == pytest.approx(math.sqrt(1 / 3), rel=1e-12)
    assert s.nutation_rate_rad_s[2, 0] == pytest.approx(1.0, rel=1e-12)
    assert s.unstable_axes == ("intermediate",)


def test_survey_quad_growth_matches_closed_form(quad):
    rates = np.array([5.0, 26.5])
    s = spin.principal_spin_stability(quad, rates)
    i1, i2, i3 = quad.mp.principal_moments_kg_m2
    # Landau & Lifshitz, Mechanics, 3rd ed., sec. 37 (from memory)
    expected = np.abs(rates) * math.sqrt((i2 - i1) * (i3 - i2) / (i1 * i3))
    np.testing.assert_allclose(s.growth_rate_1_s[1], expected, rtol=1e-9)
    np.testing.assert_allclose(s.closed_form_growth_rate_1_s, s.growth_rate_1_s, rtol=1e-9,
                               atol=1e-12)
    assert np.all(s.growth_rate_1_s[0] == 0.0) and np.all(s.growth_rate_1_s[2] == 0.0)
    d = s.to_dict()
    json.dumps(d)
    assert [a["axis"] for a in d["axes"]] == ["minor", "intermediate", "major"]
    assert [a["stable"] for a in d["axes"]] == [True, False, True]
    assert "<table" in s._repr_html_()


def test_growth_rate_seen_in_torque_free_simulation(quad):
    # Linear against nonlinear: a tiny tumble about the intermediate axis grows at the
    # eigenvalue's rate while it stays small.
    omega_spin = 26.5
    s = spin.principal_spin_stability(quad, omega_spin)
    axes = quad.mp.principal_axes
    w0 = omega_spin * axes[:, 1] + 1e-9 * axes[:, 0]
    r = SIM.simulate_torque_free(quad, w0, 3.0, rtol=1e-12, atol=1e-15)
    transverse = np.linalg.norm(r.omega_rad_s @ axes[:, [0, 2]], axis=1)
    # envelope over one nutation-free stretch: fit log growth between 1 s and 3 s
    m = r.t >= 1.0
    slope = np.polyfit(r.t[m], np.log(transverse[m]), 1)[0]
    assert slope == pytest.approx(s.growth_rate_1_s[1, 0], rel=0.02)


def test_spin_axis_alignment(quad):
    eq = E.solve(quad, ("front_left", "rear_right"))
    hover = E.solve(quad)
    a = spin.spin_axis_alignment(quad, [hover, eq])
    assert a.skipped == ("no failure",)  # the hover does not spin
    assert a.labels == (eq.label,)
    # the spin axis lies close to the major axis (about 1.6 deg for this design)
    assert a.angles_deg[0, 2] < 5.0 and not a.any_flagged
    # an equilibrium spinning about the intermediate axis is flagged
    fake = replace(eq, n_bar=-quad.mp.principal_axes[:, 1])
    b = spin.spin_axis_alignment(quad, fake)
    assert b.flagged.tolist() == [True]
    assert b.angles_deg[0, 1] == pytest.approx(0.0, abs=1e-6)
    d = b.to_dict()
    json.dumps(d)
    assert d["equilibria"][0]["nearest_axis"] == "intermediate"
    assert "FLAG" in b._repr_html_()
