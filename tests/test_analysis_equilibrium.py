"""Relaxed-hover equilibria: residuals, derived exact relations and plausibility figures."""

import dataclasses
import math
from pathlib import Path

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from kit.analysis import equilibrium as E
from kit.analysis.vehicle import Vehicle
from kit.design import from_dict, load
from kit.errors import DesignError
from kit.models import ring_design

G = 9.80665  # standard gravity, CGPM 1901


def _invariants(veh, eq):
    assert eq.found, eq.reason
    assert eq.residual <= 1e-9
    # sum f n_z = m g
    assert float(eq.thrust_n.sum() * eq.n_bar[2]) == pytest.approx(veh.weight_n, rel=1e-9)
    # omega_bar parallel to n_bar, n_bar a unit vector
    assert np.linalg.norm(eq.n_bar) == pytest.approx(1.0, abs=1e-12)
    assert np.linalg.norm(np.cross(eq.omega_bar_rad_s, eq.n_bar)) <= 1e-9 * max(
        1.0, abs(eq.spin_rate_rad_s))
    assert np.all(eq.thrust_n >= -1e-12)
    assert np.all(eq.thrust_n <= eq.max_thrust_n * (1 + 1e-9))
    assert np.all(eq.thrust_n[~eq.working] == 0.0)


def test_balanced_quad_hover_carries_quarter_weight():
    # Derived exact relation: a balanced quad in hover carries m g / 4 per rotor, no spin.
    veh = Vehicle.from_design(ring_design(mass_kg=0.5))
    eq = E.solve(veh, ())
    _invariants(veh, eq)
    np.testing.assert_allclose(eq.thrust_n, 0.5 * G / 4, rtol=1e-9)
    assert eq.spin_rate_rad_s == pytest.approx(0.0, abs=1e-9)
    assert eq.free_directions == 3


def test_plus_quad_two_opposite_out_closed_form():
    # Derived exact relation: symmetric '+' quad, two opposite rotors out, linear drag:
    # each working rotor carries m g / 2, n_bar = e_z, |spin| = kappa m g / gamma_z.
    m, kappa, gz = 0.5, 0.012, 0.0015
    veh = Vehicle.from_design(ring_design(mass_kg=m, torque_per_thrust_m=kappa,
                                          drag=(0.0007, 0.0007, gz)))
    eq = E.solve(veh, ("r1", "r3"))
    _invariants(veh, eq)
    np.testing.assert_allclose(eq.thrust_n[[0, 2]], m * G / 2, rtol=1e-9)
    np.testing.assert_allclose(eq.n_bar, [0, 0, 1], atol=1e-9)
    assert abs(eq.spin_rate_rad_s) == pytest.approx(kappa * m * G / gz, rel=1e-9)
    # the working pair spins ccw (s = +1): reaction torque -kappa f along z -> spin negative
    assert eq.spin_rate_rad_s < 0


def test_half_kilogram_quad_plausibility():
    # Figures a practitioner expects (common practice, no source): a half-kilogram quad hovers
    # on about 1.2 N per rotor; with one rotor lost the loaded rotors carry about 2 N and it
    # spins near 18 rad/s (about 3 Hz); with two opposite rotors lost near 30 rad/s (about 5 Hz).
    # Tolerances are loose (30 %): the figures depend on drag and torque coefficients.
    veh = Vehicle.from_design(ring_design(mass_kg=0.5, rotor_inertia_kg_m2=6e-6,
                                          drag=(0.0008, 0.0008, 0.0019)))
    hover = E.solve(veh, ())
    assert hover.thrust_n.mean() == pytest.approx(1.2, rel=0.05)
    one = E.solve(veh, ("r0",))
    _invariants(veh, one)
    loaded = np.sort(one.thrust_n)[-2:]
    np.testing.assert_allclose(loaded, 2.0, rtol=0.3)
    assert abs(one.spin_rate_rad_s) == pytest.approx(18.0, rel=0.3)
    two = E.solve(veh, ("r0", "r2"))
    _invariants(veh, two)
    assert abs(two.spin_rate_rad_s) == pytest.approx(30.0, rel=0.3)


def test_fixed_thrust_ratio_is_honoured():
    veh = Vehicle.from_design(ring_design())
    ratio = {"r1": 1.0, "r2": 0.3, "r3": 1.0}
    eq = E.solve(veh, ("r0",), ratio)
    _invariants(veh, eq)
    assert eq.free_directions == 0
    f = eq.thrust_n
    assert f[2] / f[1] == pytest.approx(0.3, rel=1e-9)
    assert f[3] / f[1] == pytest.approx(1.0, rel=1e-9)


def test_no_equilibrium_is_a_result_with_reason():
    # Thrust limits far below the weight: no equilibrium, a reason, no exception.
    veh = Vehicle.from_design(ring_design(max_thrust_n=0.5))
    eq = E.solve(veh, ("r0",))
    assert not eq.found
    assert "thrust limits" in eq.reason
    d = eq.to_dict()
    assert d["equilibrium_found"] is False


def test_every_rotor_failed_is_a_result():
    veh = Vehicle.from_design(ring_design())
    eq = E.solve(veh, ("r0", "r1", "r2", "r3"))
    assert not eq.found and "every rotor" in eq.reason


def test_symmetric_design_gives_mirror_results():
    # Mirror symmetry of the hexacopter ring about x: failing r1 and r5 gives equal thrust sets
    # and opposite spins.
    veh = Vehicle.from_design(ring_design(n_rotors=6, mass_kg=1.5, max_thrust_n=7.0,
                                          inertia_kg_m2=(8e-3, 8e-3, 1.5e-2)))
    a = E.solve(veh, ("r1",))
    b = E.solve(veh, ("r5",))
    _invariants(veh, a)
    _invariants(veh, b)
    assert abs(a.spin_rate_rad_s) == pytest.approx(abs(b.spin_rate_rad_s), rel=1e-6)
    np.testing.assert_allclose(np.sort(a.thrust_n), np.sort(b.thrust_n), rtol=1e-6, atol=1e-9)


@settings(max_examples=8, deadline=None)
@given(
    mass=st.floats(0.3, 2.0),
    jz_over_jx=st.floats(1.3, 1.9),
    kappa=st.floats(0.008, 0.02),
)
def test_equilibrium_residual_property(mass, jz_over_jx, kappa):
    jx = 5e-3 * mass
    veh = Vehicle.from_design(ring_design(mass_kg=mass, inertia_kg_m2=(jx, jx, jz_over_jx * jx),
                                          torque_per_thrust_m=kappa, max_thrust_n=7.0 * mass,
                                          rotor_inertia_kg_m2=3e-6))
    for failed in [(), ("r0",)]:
        eq = E.solve(veh, failed)
        _invariants(veh, eq)
        assert math.isfinite(eq.spin_rate_rad_s)
    # two opposite rotors out: the closed form |w| = kappa m g / gamma_z (derived exact relation,
    # as in test_plus_quad_two_opposite_out_closed_form); beyond the searched spin rate the
    # result is "not found", and the reason states the bound
    gamma_z = float(veh.design.aero.drag_torque_coeff[2])  # ring_design's linear drag, N m s
    w = kappa * mass * G / gamma_z
    eq = E.solve(veh, ("r0", "r2"))
    if w <= E.MAX_SPIN_RAD_S * (1 - 1e-6):
        _invariants(veh, eq)
        assert abs(eq.spin_rate_rad_s) == pytest.approx(w, rel=1e-6)
    elif w >= E.MAX_SPIN_RAD_S * (1 + 1e-6):
        assert not eq.found
        assert f"spin rates up to {E.MAX_SPIN_RAD_S:g} rad/s" in eq.reason


def test_plus_quad_two_opposite_out_quadratic_drag_closed_form():
    # Derived exact relation with the quadratic drag law tau_z = -gamma2 |omega| omega_z:
    # gamma2 w^2 = kappa m g, so |w| = sqrt(kappa m g / gamma2); thrusts m g / 2, n_bar = e_z.
    m, kappa, g2 = 0.5, 0.012, 6e-5
    veh = Vehicle.from_design(ring_design(mass_kg=m, torque_per_thrust_m=kappa,
                                          drag=(3e-5, 3e-5, g2), drag_law="quadratic"))
    eq = E.solve(veh, ("r1", "r3"))
    _invariants(veh, eq)
    np.testing.assert_allclose(eq.thrust_n[[0, 2]], m * G / 2, rtol=1e-9)
    assert abs(eq.spin_rate_rad_s) == pytest.approx(math.sqrt(kappa * m * G / g2), rel=1e-9)


def test_no_failure_case_is_the_non_spinning_hover_when_it_exists():
    # An unbalanced vehicle (CoM off the rotor centroid, a product of inertia) with quadratic
    # drag: the no-failure case is the non-spinning hover, not a slowly spinning member.
    d = ring_design(inertia_kg_m2=[[2.5e-3, 0, 2e-4], [0, 2.5e-3, 0], [2e-4, 0, 4.5e-3]],
                    drag=(3e-5, 3e-5, 6e-5), drag_law="quadratic")
    veh = Vehicle.from_design(d)
    eq = E.solve(veh, ())
    _invariants(veh, eq)
    assert eq.spin_rate_rad_s == 0.0
    np.testing.assert_allclose(eq.n_bar, [0.0, 0.0, 1.0], atol=1e-15)


# --- the operating point: complete candidate set, one rule ---------------------------------

ROOT = Path(__file__).resolve().parents[1]


def _mirror_y(design):
    """The design mirrored in the x-z plane: y -> -y, every spin reversed (a mirror turns a
    ccw rotor into a cw one), products of inertia with y negated."""
    rotors = tuple(dataclasses.replace(r, position_m=(r.position_m[0], -r.position_m[1],
                                                      r.position_m[2]), spin=-r.spin)
                   for r in design.rotors)
    body = design.body
    J = np.array(body.inertia_kg_m2, float)
    S = np.diag([1.0, -1.0, 1.0])
    J = S @ J @ S
    c = body.com_m
    body = dataclasses.replace(body, com_m=(c[0], -c[1], c[2]),
                               inertia_kg_m2=tuple(tuple(float(v) for v in row) for row in J))
    return dataclasses.replace(design, rotors=rotors, body=body)


def _check_mirrored(a, b):
    assert a.found and b.found
    scale = max(1.0, abs(a.spin_rate_rad_s))
    assert b.spin_rate_rad_s == pytest.approx(-a.spin_rate_rad_s, rel=1e-9, abs=1e-9 * scale)
    np.testing.assert_allclose(b.n_bar, a.n_bar * [1, -1, 1], rtol=1e-9, atol=1e-9)
    np.testing.assert_allclose(b.thrust_n, a.thrust_n, rtol=1e-9, atol=1e-9 * a.thrust_n.max())


def test_mirror_symmetric_designs_give_mirrored_results():
    # Derived relation (mirror symmetry of Euler's equation): the mirrored vehicle's operating
    # point is the mirror image of the original's, to 1e-9 relative, for every failure set.
    d = ring_design(n_rotors=6, mass_kg=1.5, max_thrust_n=7.0, rotor_inertia_kg_m2=4e-6,
                    inertia_kg_m2=[[8e-3, 3e-4, 5e-4], [3e-4, 8.4e-3, -2e-4],
                                   [5e-4, -2e-4, 1.5e-2]],
                    failure_sets="single+pairs")
    d = dataclasses.replace(d, body=dataclasses.replace(d.body, com_m=(0.01, 0.006, 0.0)))
    va, vb = Vehicle.from_design(d), Vehicle.from_design(_mirror_y(d))
    for failed, _ in E.all_cases(va):
        _check_mirrored(E.solve(va, failed), E.solve(vb, failed))


def test_demo_hexacopter_mirror_pairs_agree():
    # The demo hexacopter is mirror-symmetric about its x-z plane (m1 <-> m6, m2 <-> m5,
    # m3 <-> m4, spins reversed): mirrored failure sets give mirrored operating points.
    veh = Vehicle.from_design(load(ROOT / "data" / "designs" / "heavy_hex.toml"))
    mirror = {"m1": "m6", "m2": "m5", "m3": "m4", "m4": "m3", "m5": "m2", "m6": "m1"}
    perm = [veh.names.index(mirror[n]) for n in veh.names]
    for failed in [("m1",), ("m2",), ("m1", "m2"), ("m2", "m3"), ("m1", "m3")]:
        a = E.solve(veh, failed)
        b = E.solve(veh, tuple(mirror[n] for n in failed))
        assert b.spin_rate_rad_s == pytest.approx(-a.spin_rate_rad_s, rel=1e-9)
        np.testing.assert_allclose(b.n_bar, a.n_bar * [1, -1, 1], rtol=1e-9, atol=1e-9)
        np.testing.assert_allclose(b.thrust_n[perm], a.thrust_n, rtol=1e-9, atol=1e-9)


def test_result_independent_of_order_and_of_hints():
    # The operating point is a function of the design alone: solving the cases in any order,
    # with or without a (misleading) hint, gives identical numbers.
    veh = Vehicle.from_design(load(ROOT / "data" / "designs" / "survey_quad.toml"))
    cases = E.all_cases(veh)
    first = [E.solve(veh, f, r) for f, r in cases]
    again = [E.solve(veh, f, r, hint=(-30.0, np.array([0.3, 0.0, 0.95])))
             for f, r in reversed(cases)][::-1]
    for a, b in zip(first, again, strict=True):
        assert a.spin_rate_rad_s == b.spin_rate_rad_s
        np.testing.assert_array_equal(a.thrust_n, b.thrust_n)


def test_candidates_are_equilibria_and_the_rule_picks_the_least():
    veh = Vehicle.from_design(load(ROOT / "data" / "designs" / "heavy_hex.toml"))
    for failed in [("m1",), ("m1", "m2"), ("m3", "m4")]:
        for rule in ("least-effort", "least-power"):
            eq = E.solve(veh, failed, rule=rule)
            _invariants(veh, eq)
            assert eq.rule == rule and eq.candidates
            objective = [c.objective(rule) for c in eq.candidates]
            chosen = [c for c in eq.candidates if c.spin_rate_rad_s == eq.spin_rate_rad_s][0]
            assert chosen.objective(rule) <= min(objective) * (1 + 1e-9)
            for c in eq.candidates:
                assert c.residual <= 1e-9
            if eq.runner_up is not None:
                assert eq.runner_up.objective(rule) <= chosen.objective(rule) * 1.05


def test_both_spin_senses_are_candidates():
    # The survey quad with front_left failed has a relaxed hover in each sense (+19 and
    # -27 rad/s); least effort picks the slower one, whatever the start of a search.
    veh = Vehicle.from_design(load(ROOT / "data" / "designs" / "survey_quad.toml"))
    eq = E.solve(veh, ("front_left",))
    signs = {np.sign(c.spin_rate_rad_s) for c in eq.candidates}
    assert signs == {1.0, -1.0}
    assert eq.spin_rate_rad_s == min((c for c in eq.candidates),
                                     key=lambda c: c.effort_n2).spin_rate_rad_s


def test_intact_hexacopter_with_offset_centre_of_mass_holds_still():
    # A hexacopter whose centre of mass sits 0.155 m from the rotor centre: the least-norm
    # thrusts of M f = (m g, 0, 0, 0) go negative, yet a static hover within the limits
    # exists (positive authority), so the intact vehicle must not spin.
    d = ring_design(n_rotors=6, mass_kg=2.0, arm_m=0.35, max_thrust_n=12.0,
                    inertia_kg_m2=(3e-2, 3e-2, 5.5e-2), rotor_inertia_kg_m2=2e-5)
    d = dataclasses.replace(d, body=dataclasses.replace(d.body, com_m=(0.155, 0.0, 0.0)))
    veh = Vehicle.from_design(d)
    eq = E.solve(veh, ())
    _invariants(veh, eq)
    assert eq.authority.positive
    assert eq.spin_rate_rad_s == 0.0 and eq.static
    assert np.all(eq.thrust_n > 0)
    assert "static hover" in eq.chosen_by


def test_static_only_rule_and_thrust_ratio_zero():
    # Alternating hexacopter, one rotor failed: the static hover needs the opposite rotor at
    # 0 N (Du et al. 2015, from memory), so the static-only rule finds no equilibrium, while
    # switching the opposite rotor off (thrust ratio 0) leaves a balanced '+'-like vehicle.
    d = ring_design(n_rotors=6, mass_kg=1.5, max_thrust_n=7.0,
                    inertia_kg_m2=(8e-3, 8e-3, 1.5e-2))
    veh = Vehicle.from_design(d)
    none = E.solve(veh, ("r0",), rule="static-only")
    assert not none.found and "static-only" in none.reason
    ratio = {"r1": 1.0, "r2": 1.0, "r3": 0.0, "r4": 1.0, "r5": 1.0}
    eq = E.solve(veh, ("r0",), ratio)
    _invariants(veh, eq)
    assert eq.switched_off == ("r3",)
    assert eq.thrust_n[3] == 0.0
    assert not eq.working[3]
    # four equal thrusts with two ccw and two cw rotors: no net yaw torque, it holds still
    assert eq.spin_rate_rad_s == pytest.approx(0.0, abs=1e-9)
    np.testing.assert_allclose(eq.thrust_n[[1, 2, 4, 5]], 1.5 * G / 4, rtol=1e-9)


def test_design_file_rule_is_validated_and_used():
    doc = {
        "design": {"name": "rule test (invented)", "revision": "1"},
        "body": {"mass_kg": 0.5, "com_m": [0, 0, 0],
                 "inertia_kg_m2": [[2.5e-3, 0, 0], [0, 2.5e-3, 0], [0, 0, 4.5e-3]]},
        "rotor": [{"name": f"r{k}", "position_m": [0.12 * math.cos(k * math.pi / 2),
                                                   0.12 * math.sin(k * math.pi / 2), 0],
                   "spin": "ccw" if k % 2 == 0 else "cw", "max_thrust_n": 3.5,
                   "torque_per_thrust_m": 0.012, "thrust_coeff_n_s2": 6e-6,
                   "rotor_inertia_kg_m2": 1e-6} for k in range(4)],
        "aero": {"drag_law": "linear", "drag_torque_coeff": [7e-4, 7e-4, 1.5e-3]},
        "control": {"weight_rate": 1.0, "weight_attitude": 20.0, "weight_thrust": 1.0,
                    "disturbance_torque_psd_n2_m2_s": 5e-5, "operating_point": "least-power"},
    }
    veh = Vehicle.from_design(from_dict(doc))
    assert E.solve(veh, ()).rule == "least-power"
    doc["control"]["operating_point"] = "fastest"
    with pytest.raises(DesignError, match="operating_point"):
        from_dict(doc)


@settings(max_examples=10, deadline=None)
@given(
    mass=st.floats(0.4, 2.0),
    com_x=st.floats(-0.03, 0.03),
    com_y=st.floats(-0.03, 0.03),
    ixy=st.floats(-3e-4, 3e-4),
    n_rotors=st.sampled_from([4, 6]),
)
def test_random_designs_operating_point_properties(mass, com_x, com_y, ixy, n_rotors):
    # Invariants over random designs: every candidate is an equilibrium (scaled residual
    # <= 1e-9), the chosen point has the least objective when the rule is least effort, and
    # solving twice gives the same numbers.
    jx = 5e-3 * mass
    d = ring_design(n_rotors=n_rotors, mass_kg=mass, max_thrust_n=4.0 * mass * 4 / n_rotors,
                    inertia_kg_m2=[[jx, ixy, 0], [ixy, jx * 1.05, 0], [0, 0, 1.8 * jx]],
                    rotor_inertia_kg_m2=3e-6)
    d = dataclasses.replace(d, body=dataclasses.replace(d.body, com_m=(com_x, com_y, 0.0)))
    veh = Vehicle.from_design(d)
    for failed in [(), ("r0",)]:
        eq = E.solve(veh, failed, rule="least-effort")
        if not eq.found:
            continue
        _invariants(veh, eq)
        for c in eq.candidates:
            assert c.residual <= 1e-9
            assert eq.thrust_n @ eq.thrust_n <= c.effort_n2 * (1 + 1e-9)
        again = E.solve(veh, failed, rule="least-effort")
        np.testing.assert_array_equal(again.thrust_n, eq.thrust_n)


def _legacy_search():
    import sys

    bench = str(Path(__file__).resolve().parent / "bench")
    if bench not in sys.path:
        sys.path.insert(0, bench)
    import legacy_operating_point

    return legacy_operating_point


@pytest.mark.parametrize("yaw_drag", [2e-4, 7e-4, 2e-3])
@pytest.mark.parametrize("max_thrust_n", [2.0, 3.0, 4.0])
def test_search_finds_what_the_multistart_slsqp_search_finds(yaw_drag, max_thrust_n):
    # Check value: the earlier multi-start SLSQP least-effort search
    # (tests/bench/legacy_operating_point.py, scipy.optimize.minimize). Whenever it finds an
    # equilibrium within the limits, the structured search finds one of no greater effort.
    # Small yaw drag puts the least-effort equilibrium at a fast spin (~98 rad/s for 2e-4)
    # with the axis tilted ~0.6 deg, between the start grid's tilt rings.
    legacy = _legacy_search()
    veh = Vehicle.from_design(ring_design(drag=(0.0007, 0.0007, yaw_drag),
                                          max_thrust_n=max_thrust_n))
    compared = 0
    for failed in (("r0",), ("r1",)):
        old = legacy.solve(veh, failed)
        if not (old.found and old.residual <= E.RESIDUAL_TOL
                and np.all(old.thrust_n >= -1e-12)
                and np.all(old.thrust_n <= old.max_thrust_n * (1 + 1e-9))):
            continue
        compared += 1
        new = E.solve(veh, failed, rule="least-effort")
        _invariants(veh, new)
        old_effort = float(old.thrust_n @ old.thrust_n)
        assert float(new.thrust_n @ new.thrust_n) <= old_effort * (1 + 1e-6), failed
        assert min(c.effort_n2 for c in new.candidates) <= old_effort * (1 + 1e-6)
    assert compared == 2  # the reference finds both cases of every variant here


def test_bad_quad_fast_spin_equilibrium_is_found():
    # Check value: the multi-start SLSQP search (tests/bench/legacy_operating_point.py) finds
    # spin +98.28 rad/s, tilt 0.58 deg, thrusts (0, 1.635, 1.633, 1.635) N for this design.
    veh = Vehicle.from_design(ring_design(drag=(0.0007, 0.0007, 0.0002), max_thrust_n=2.0,
                                          name="bad quad"))
    eq = E.solve(veh, ("r0",))
    _invariants(veh, eq)
    assert eq.spin_rate_rad_s == pytest.approx(98.278, rel=1e-4)
    assert eq.tilt_deg == pytest.approx(0.581, abs=1e-3)
    np.testing.assert_allclose(eq.thrust_n, [0.0, 1.63537, 1.63285, 1.63537], atol=1e-5)


def test_thrust_free_grid_is_a_function_of_the_vehicle_alone():
    # the start grid's residual with every thrust 0 (and its axis derivative) is computed once
    # per vehicle and shared by its cases: it equals the one computed afresh for any failed set
    d = load(Path(__file__).resolve().parents[1] / "data" / "designs" / "heavy_hex.toml")
    shared = Vehicle.from_design(d)
    P = E._grid(10.0).reshape(-1, 3)
    r_a, B_a = E._grid_at_rest(E._Problem(shared, ()), P, True)
    for failed in [(shared.names[0],), shared.names[1:3]]:
        fresh = Vehicle.from_design(d)
        r_b, B_b = E._grid_at_rest(E._Problem(fresh, failed), P, True)
        np.testing.assert_array_equal(r_a, r_b)
        np.testing.assert_array_equal(B_a, B_b)
        r_c, B_c = E._grid_at_rest(E._Problem(shared, failed), P, True)
        assert r_c is r_a and B_c is B_a


def test_batched_start_refinement_equals_one_start_at_a_time():
    # refining several starts in one batched evaluation gives, start by start, the numbers of
    # refining each alone (bitwise): the operating point does not depend on how many starts
    # a case has
    veh = Vehicle.from_design(ring_design(drag=(0.0007, 0.0007, 0.0002), max_thrust_n=2.0))
    for failed, ratio in [(("r0",), None), (("r0",), np.array([1.0, 0.8, 1.2]))]:
        prob = E._Problem(veh, failed)
        _, A = prob.linear_part()
        P, _, merit = E._scan(prob, A, ratio)
        starts = [P[i] for i in E._pick_starts(P, merit, 3)] + [P[3, 2, 1], P[-4, 5, 7]]
        together = E._refine_many(prob, A, starts, ratio)
        for p, v in zip(starts, together, strict=True):
            np.testing.assert_array_equal(E._refine(prob, A, p, ratio), v)


def test_row_sums_equal_einsum():
    # the scan's row sums are einsum's sums in the same order (bitwise)
    rng = np.random.default_rng(7)
    X = rng.normal(size=(50, 4, 6)) * 10.0 ** rng.integers(-4, 4, size=(50, 4, 6))
    Y = rng.normal(size=(50, 4, 6))
    r = rng.normal(size=(50, 4))
    np.testing.assert_array_equal(E._rows_outer(X, Y), np.einsum("mia,mib->mab", X, Y))
    np.testing.assert_array_equal(E._rows_dot(X, r), np.einsum("mia,mi->ma", X, r))
