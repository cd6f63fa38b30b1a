"""Mass properties against handbook formulas, a general-purpose mesh library, and invariants.

Handbook values: Beer & Johnston, Vector Mechanics for Engineers: Dynamics, 9th ed., Fig. 9.28
(edition from memory) and Meriam & Kraige, Engineering Mechanics: Dynamics, Table D/4 (from
memory). The formulas are exact, so the tolerance is float rounding (rel 1e-12). Against trimesh
the tolerance comes from the mesh: a 256-sided polygon stands for a circle, 0.5 %.
"""

from __future__ import annotations

import math
import tomllib
from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from kit import design as design_mod
from kit import massprops
from kit.design import Part
from kit.massprops import Item, combine, part_inertia, principal, shape_inertia

EXACT = 1e-12  # relative; the handbook formulas are closed-form
MESH = 5e-3  # relative; 256-section polygonal cylinders and tubes (trimesh)
PROPS = settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.too_slow])


def part(shape: str, mass_kg: float = 2.0, axis: str = "z", yaw_deg: float = 0.0,
         position_m=(0.0, 0.0, 0.0), **geometry) -> Part:
    return Part(name=shape, mass_kg=mass_kg, shape=shape, position_m=tuple(position_m),
                axis=axis, yaw_deg=yaw_deg, **geometry)


def diag(J: np.ndarray) -> list[float]:
    assert np.allclose(J - np.diag(np.diag(J)), 0.0, atol=1e-15), J
    return list(np.diag(J))


# ---------------------------------------------------------------------------------------------
# Handbook values (m = 2 kg throughout)
# ---------------------------------------------------------------------------------------------


def test_solid_cuboid():
    # Beer & Johnston, 9th ed., Fig. 9.28, rectangular prism: I_x = m(b^2 + c^2)/12 (edition from
    # memory); Meriam & Kraige, Table D/4 (from memory). a, b, c = 0.3, 0.2, 0.1 m:
    # I_x = 2(0.04 + 0.01)/12, I_y = 2(0.09 + 0.01)/12, I_z = 2(0.09 + 0.04)/12.
    J = shape_inertia(part("box", size_m=(0.3, 0.2, 0.1)))
    assert diag(J) == pytest.approx([0.1 / 12, 0.2 / 12, 0.26 / 12], rel=EXACT)


def test_solid_cylinder():
    # Beer & Johnston, 9th ed., Fig. 9.28, circular cylinder: axial m r^2/2, transverse
    # m(3 r^2 + L^2)/12 (edition from memory). r = 0.1 m, L = 0.3 m:
    # axial 2 * 0.01 / 2 = 0.01 kg m^2; transverse 2(0.03 + 0.09)/12 = 0.02 kg m^2.
    J = shape_inertia(part("cylinder", radius_m=0.1, length_m=0.3))
    assert diag(J) == pytest.approx([0.02, 0.02, 0.01], rel=EXACT)


@pytest.mark.parametrize(("axis", "k"), [("x", 0), ("y", 1), ("z", 2)])
def test_symmetry_axis_selects_the_axial_moment(axis, k):
    # Same cylinder and source as above; the axial moment 0.01 kg m^2 sits on the named axis.
    expected = [0.02, 0.02, 0.02]
    expected[k] = 0.01
    J = shape_inertia(part("cylinder", axis=axis, radius_m=0.1, length_m=0.3))
    assert diag(J) == pytest.approx(expected, rel=EXACT)


def test_thick_tube():
    # Meriam & Kraige, Table D/4, thick-walled cylinder: axial m(r1^2 + r2^2)/2 (from memory);
    # transverse m(3(r1^2 + r2^2) + L^2)/12. r1 = 0.1, r2 = 0.05, L = 0.3 m:
    # axial 2(0.01 + 0.0025)/2 = 0.0125; transverse 2(0.0375 + 0.09)/12 = 0.02125 kg m^2.
    J = shape_inertia(part("tube", outer_radius_m=0.1, inner_radius_m=0.05, length_m=0.3))
    assert diag(J) == pytest.approx([0.02125, 0.02125, 0.0125], rel=EXACT)


def test_tube_with_no_bore_is_the_cylinder():
    tube = shape_inertia(part("tube", outer_radius_m=0.1, inner_radius_m=0.0, length_m=0.3))
    cyl = shape_inertia(part("cylinder", radius_m=0.1, length_m=0.3))
    np.testing.assert_allclose(tube, cyl, rtol=EXACT)


def test_thin_rod():
    # Beer & Johnston, 9th ed., Fig. 9.28, slender rod: m L^2/12 (edition from memory).
    # L = 0.6 m: 2 * 0.36 / 12 = 0.06 kg m^2; about its own axis 0.
    J = shape_inertia(part("rod", axis="x", length_m=0.6))
    assert diag(J) == pytest.approx([0.0, 0.06, 0.06], rel=EXACT, abs=1e-15)


def test_sphere():
    # Beer & Johnston, 9th ed., Fig. 9.28, sphere: 2/5 m r^2 (edition from memory).
    # r = 0.1 m: 0.4 * 2 * 0.01 = 0.008 kg m^2 about every axis.
    J = shape_inertia(part("sphere", radius_m=0.1))
    assert diag(J) == pytest.approx([0.008, 0.008, 0.008], rel=EXACT)


def test_thin_disc():
    # Beer & Johnston, 9th ed., Fig. 9.28, thin disk: axial m r^2/2, diametral m r^2/4 (edition
    # from memory). r = 0.1 m: axial 0.01, diametral 0.005 kg m^2.
    J = shape_inertia(part("disc", radius_m=0.1))
    assert diag(J) == pytest.approx([0.005, 0.005, 0.01], rel=EXACT)


def test_point_mass_has_no_inertia_about_itself():
    np.testing.assert_array_equal(shape_inertia(part("point")), np.zeros((3, 3)))


def test_yaw_quarter_turn_swaps_x_and_y():
    # The cuboid above turned 90 deg about z: I_x and I_y trade places, I_z stays.
    J = part_inertia(part("box", yaw_deg=90.0, size_m=(0.3, 0.2, 0.1)))
    np.testing.assert_allclose(J, np.diag([0.2 / 12, 0.1 / 12, 0.26 / 12]), rtol=EXACT,
                               atol=1e-15)


def test_parallel_axis_dumbbell():
    # Parallel-axis theorem (Beer & Johnston, 9th ed., sec. 9.13, from memory): two 1 kg points
    # at x = +-0.5 m: I_y = I_z = 2 * 1 * 0.25 = 0.5 kg m^2, I_x = 0; CoM at the origin.
    items = [Item("a", 1.0, np.array([0.5, 0.0, 0.0]), np.zeros((3, 3))),
             Item("b", 1.0, np.array([-0.5, 0.0, 0.0]), np.zeros((3, 3)))]
    mass, com, J = combine(items)
    assert mass == 2.0
    np.testing.assert_allclose(com, 0.0, atol=1e-15)
    np.testing.assert_allclose(J, np.diag([0.0, 0.5, 0.5]), atol=1e-15)


def test_product_of_inertia_sign():
    # Tensor convention: J_xy = -sum m x y. 1 kg at (1, 1, 0) and 1 kg at the origin: about the
    # CoM (0.5, 0.5, 0) each sits at +-(0.5, 0.5, 0): J_xy = -2 * 0.25 = -0.5 kg m^2.
    items = [Item("a", 1.0, np.array([1.0, 1.0, 0.0]), np.zeros((3, 3))),
             Item("b", 1.0, np.zeros(3), np.zeros((3, 3)))]
    _, _, J = combine(items)
    assert J[0, 1] == pytest.approx(-0.5, rel=EXACT)
    assert J[1, 0] == J[0, 1]


def test_combine_needs_an_item():
    with pytest.raises(ValueError, match="at least one"):
        combine([])


# ---------------------------------------------------------------------------------------------
# A general-purpose reference library: trimesh mass properties of meshes of the same solids
# ---------------------------------------------------------------------------------------------

trimesh = pytest.importorskip("trimesh")
SECTIONS = 256


def _with_mass(mesh, mass_kg: float):
    mesh.density = mass_kg / mesh.volume
    return mesh


def _mesh_of(p: Part):
    """A trimesh solid for a part, placed and turned as in the design frame."""
    if p.shape == "box":
        mesh = trimesh.creation.box(extents=p.size_m)
    elif p.shape == "cylinder":
        mesh = trimesh.creation.cylinder(radius=p.radius_m, height=p.length_m, sections=SECTIONS)
    elif p.shape == "tube":
        mesh = trimesh.creation.annulus(r_min=p.inner_radius_m, r_max=p.outer_radius_m,
                                        height=p.length_m, sections=SECTIONS)
    else:  # pragma: no cover - only the shapes below are meshed
        raise AssertionError(p.shape)
    # trimesh's cylinders run along z; lay them along the part's axis, then yaw, then place.
    to_axis = {"x": trimesh.transformations.rotation_matrix(math.pi / 2, [0, 1, 0]),
               "y": trimesh.transformations.rotation_matrix(-math.pi / 2, [1, 0, 0]),
               "z": np.eye(4)}[p.axis]
    yaw = trimesh.transformations.rotation_matrix(math.radians(p.yaw_deg), [0, 0, 1])
    move = trimesh.transformations.translation_matrix(p.position_m)
    mesh.apply_transform(move @ yaw @ to_axis)
    return _with_mass(mesh, p.mass_kg)


MESHED = [
    part("box", size_m=(0.3, 0.2, 0.1)),
    part("box", mass_kg=0.7, yaw_deg=30.0, size_m=(0.4, 0.05, 0.02)),
    part("cylinder", radius_m=0.1, length_m=0.3),
    part("cylinder", mass_kg=0.4, axis="x", yaw_deg=-20.0, radius_m=0.02, length_m=0.5),
    part("tube", outer_radius_m=0.1, inner_radius_m=0.05, length_m=0.3),
    part("tube", mass_kg=0.32, axis="x", yaw_deg=30.0, outer_radius_m=0.015,
         inner_radius_m=0.0135, length_m=0.44),
    part("tube", mass_kg=0.6, axis="y", outer_radius_m=0.012, inner_radius_m=0.010,
         length_m=0.6),
]


@pytest.mark.parametrize("p", MESHED, ids=lambda p: f"{p.shape}-{p.axis}-{p.yaw_deg:g}")
def test_single_part_against_trimesh(p):
    mesh = _mesh_of(p)
    assert mesh.is_watertight
    assert mesh.mass == pytest.approx(p.mass_kg, rel=1e-9)
    ours = part_inertia(p)
    scale = np.max(np.abs(ours))
    np.testing.assert_allclose(mesh.moment_inertia, ours, rtol=MESH, atol=MESH * scale)


def test_assembly_of_offset_parts_against_trimesh():
    # An offset assembly: hub, two yawed arms, a battery box off the axis, a landing-gear tube.
    parts = [
        part("cylinder", mass_kg=1.2, position_m=(0.01, 0.0, 0.0), radius_m=0.13, length_m=0.06),
        part("tube", mass_kg=0.32, axis="x", yaw_deg=30.0, position_m=(0.2858, 0.165, 0.0),
             outer_radius_m=0.015, inner_radius_m=0.0135, length_m=0.44),
        part("tube", mass_kg=0.32, axis="x", yaw_deg=150.0, position_m=(-0.2858, 0.165, 0.0),
             outer_radius_m=0.015, inner_radius_m=0.0135, length_m=0.44),
        part("box", mass_kg=1.9, yaw_deg=10.0, position_m=(0.05, -0.06, 0.07),
             size_m=(0.20, 0.09, 0.07)),
        part("tube", mass_kg=0.6, axis="y", position_m=(0.0, 0.0, -0.30),
             outer_radius_m=0.012, inner_radius_m=0.010, length_m=0.60),
    ]
    meshes = [_mesh_of(p) for p in parts]
    mass_ref = sum(m.mass for m in meshes)
    com_ref = sum(m.mass * m.center_mass for m in meshes) / mass_ref
    frame = trimesh.transformations.translation_matrix(com_ref)  # axes at the assembly CoM
    J_ref = sum(m.moment_inertia_frame(frame) for m in meshes)

    mass, com, J = combine([Item(p.name, p.mass_kg, np.asarray(p.position_m), part_inertia(p))
                            for p in parts])
    assert mass == pytest.approx(mass_ref, rel=1e-9)
    np.testing.assert_allclose(com, com_ref, atol=1e-9)  # m; centres are exact on the meshes
    np.testing.assert_allclose(J, J_ref, rtol=MESH, atol=MESH * np.max(np.abs(J_ref)))
    assert np.abs(J[0, 1]) > 1e-3  # the layout really has products of inertia to compare


# ---------------------------------------------------------------------------------------------
# Property tests
# ---------------------------------------------------------------------------------------------

lengths = st.floats(0.005, 0.5)
masses = st.floats(0.01, 5.0)
coords = st.floats(-1.0, 1.0)
positions = st.tuples(coords, coords, coords)


@st.composite
def parts(draw) -> Part:
    shape = draw(st.sampled_from(design_mod.SHAPES))
    geometry: dict = {}
    if shape == "box":
        geometry["size_m"] = draw(st.tuples(lengths, lengths, lengths))
    if shape in ("cylinder", "sphere", "disc"):
        geometry["radius_m"] = draw(lengths)
    if shape == "tube":
        outer = draw(lengths)
        geometry["outer_radius_m"] = outer
        geometry["inner_radius_m"] = outer * draw(st.floats(0.0, 0.95))
    if shape in ("cylinder", "tube", "rod"):
        geometry["length_m"] = draw(lengths)
    return part(shape, mass_kg=draw(masses), axis=draw(st.sampled_from("xyz")),
                yaw_deg=draw(st.floats(-180.0, 180.0)), position_m=draw(positions), **geometry)


def items(ps: list[Part]) -> list[Item]:
    return [Item(p.name, p.mass_kg, np.asarray(p.position_m, float), part_inertia(p)) for p in ps]


def close(a, b, scale):
    # floor of 1e-15 kg m^2: a lone point mass has zero inertia about its CoM, and rounding of
    # the CoM leaves ~1e-33 there
    np.testing.assert_allclose(a, b, rtol=1e-9, atol=1e-9 * scale + 1e-15)


@PROPS
@given(st.lists(parts(), min_size=1, max_size=5), st.lists(parts(), min_size=1, max_size=5))
def test_additivity(a, b):
    """A u B directly equals the two halves combined first, then combined as two items."""
    m_all, c_all, J_all = combine(items(a + b))
    halves = [Item("A", *combine(items(a))), Item("B", *combine(items(b)))]
    m_h, c_h, J_h = combine(halves)
    assert m_h == pytest.approx(m_all, rel=1e-12)
    close(c_h, c_all, 1.0)
    close(J_h, J_all, np.max(np.abs(J_all)))


@PROPS
@given(st.lists(parts(), min_size=1, max_size=6), positions)
def test_translation_leaves_inertia_about_com_unchanged(ps, shift):
    m0, c0, J0 = combine(items(ps))
    moved = [replace(p, position_m=tuple(np.add(p.position_m, shift))) for p in ps]
    m1, c1, J1 = combine(items(moved))
    assert m1 == pytest.approx(m0, rel=1e-12)
    close(c1, c0 + np.asarray(shift), 1.0)
    close(J1, J0, np.max(np.abs(J0)))


SURVEY_PATH = Path(__file__).resolve().parents[1] / "data" / "designs" / "survey_quad.toml"
SURVEY = tomllib.loads(SURVEY_PATH.read_text(encoding="utf-8"))


def _rz(deg: float) -> np.ndarray:
    a = math.radians(deg)
    return np.array([[math.cos(a), -math.sin(a), 0.0], [math.sin(a), math.cos(a), 0.0],
                     [0.0, 0.0, 1.0]])


def _design_with(ps: list[Part], turn_deg: float = 0.0) -> design_mod.Design:
    """The survey quad with its parts replaced by ps, the whole vehicle turned about z."""
    R = _rz(turn_deg)
    data = {k: v for k, v in SURVEY.items() if k not in ("part", "failure_case")}
    data["part"] = []
    for i, p in enumerate(ps):
        t = {"name": f"p{i}", "mass_kg": p.mass_kg, "shape": p.shape, "axis": p.axis,
             "yaw_deg": p.yaw_deg + turn_deg, "position_m": list(R @ np.asarray(p.position_m))}
        for g in design_mod._GEOMETRY_FIELDS:
            if getattr(p, g) is not None:
                value = getattr(p, g)
                t[g] = list(value) if isinstance(value, tuple) else value
        data["part"].append(t)
    data["rotor"] = [dict(r, position_m=list(R @ np.asarray(r["position_m"])))
                     for r in SURVEY["rotor"]]
    return design_mod.from_dict(data)


@PROPS
@given(st.lists(parts(), min_size=1, max_size=5), st.floats(-180.0, 180.0))
def test_turning_the_vehicle_turns_the_inertia(ps, turn_deg):
    """Yaw every part and rotate every position about z: J' = R J R^T, CoM' = R CoM."""
    mp0 = massprops.compute(_design_with(ps))
    mp1 = massprops.compute(_design_with(ps, turn_deg))
    R = _rz(turn_deg)
    assert mp1.mass_kg == pytest.approx(mp0.mass_kg, rel=1e-12)
    close(mp1.com_m, R @ mp0.com_m, 1.0)
    close(mp1.inertia_kg_m2, R @ mp0.inertia_kg_m2 @ R.T, np.max(np.abs(mp0.inertia_kg_m2)))
    close(np.sort(mp1.principal_moments_kg_m2), np.sort(mp0.principal_moments_kg_m2),
          np.max(mp0.principal_moments_kg_m2))


@PROPS
@given(st.lists(parts(), min_size=1, max_size=4))
def test_mirror_symmetric_layout_has_no_products_of_inertia(ps):
    """Each part with its mirror images in the planes x = 0 and y = 0 (yaw psi mirrors to -psi)."""
    four = []
    for p in ps:
        x, y, z = p.position_m
        four += [p,
                 replace(p, position_m=(-x, y, z), yaw_deg=-p.yaw_deg),
                 replace(p, position_m=(x, -y, z), yaw_deg=-p.yaw_deg),
                 replace(p, position_m=(-x, -y, z))]
    _, com, J = combine(items(four))
    scale = np.max(np.abs(J))
    close(com[:2], [0.0, 0.0], 1.0)
    for i, j in ((0, 1), (0, 2), (1, 2)):
        assert abs(J[i, j]) <= 1e-9 * scale


@PROPS
@given(st.lists(parts(), min_size=1, max_size=6))
def test_principal_axes_are_right_handed_and_diagonalise(ps):
    _, _, J = combine(items(ps))
    w, V = principal(J)
    scale = max(np.max(np.abs(J)), 1e-300)
    np.testing.assert_allclose(V.T @ V, np.eye(3), atol=1e-9)
    assert np.linalg.det(V) == pytest.approx(1.0, abs=1e-9)
    assert list(w) == sorted(w)
    close(V @ np.diag(w) @ V.T, J, scale)


@PROPS
@given(st.lists(parts(), min_size=1, max_size=6))
def test_principal_moments_obey_the_triangle_inequality(ps):
    """I1 + I2 >= I3 for every rigid body (equality for a flat or a slender one)."""
    _, _, J = combine(items(ps))
    w, _ = principal(J)
    assert w[0] >= -1e-12 * w[2]
    assert w[0] + w[1] >= w[2] * (1 - 1e-9) - 1e-15


# ---------------------------------------------------------------------------------------------
# The whole vehicle: demo designs, measured inertia, plausibility warnings
# ---------------------------------------------------------------------------------------------


def test_demo_designs_have_plausible_mass_properties(demo_design_path):
    d = design_mod.load(demo_design_path)
    mp = massprops.compute(d)
    parts_mass = sum(p.mass_kg for p in d.parts) + sum(r.mass_kg or 0.0 for r in d.rotors)
    parts_mass += d.wheel.mass_kg if d.wheel else 0.0
    assert mp.mass_kg == pytest.approx(parts_mass, rel=1e-12)
    assert mp.warnings == ()
    np.testing.assert_allclose(mp.inertia_kg_m2, mp.inertia_kg_m2.T, atol=0)
    np.testing.assert_allclose(mp.rotor_positions_m,
                               np.array([r.position_m for r in d.rotors]) - mp.com_m)
    spin = sum(r.rotor_inertia_kg_m2 for r in d.rotors) + (d.wheel.inertia_kg_m2 if d.wheel else 0)
    _, _, J_parts = combine(massprops.items_of(d))
    assert mp.inertia_kg_m2[2, 2] == pytest.approx(J_parts[2, 2] + spin, rel=1e-12)


def _survey_text() -> str:
    return SURVEY_PATH.read_text(encoding="utf-8")


def _matrix_toml(J) -> str:
    return "[" + ", ".join("[" + ", ".join(repr(float(v)) for v in row) + "]" for row in J) + "]"


def test_measured_inertia_replaces_computed_as_it_stands():
    """DESIGN.md: a measured [body] inertia is the whole vehicle's, rotors included, and
    replaces J; the rotors' spin inertia is not added a second time."""
    computed = massprops.compute(design_mod.loads(_survey_text()))
    J_meas = computed.inertia_kg_m2 * 1.05  # 5 %: within the 10 % plausibility band
    d = design_mod.loads(_survey_text() + f"\n[body]\ninertia_kg_m2 = {_matrix_toml(J_meas)}\n")
    mp = massprops.compute(d)
    np.testing.assert_allclose(mp.inertia_kg_m2, J_meas, rtol=1e-12)
    np.testing.assert_allclose(mp.computed_inertia_kg_m2, computed.inertia_kg_m2, rtol=1e-12)
    assert mp.warnings == ()


def test_measured_inertia_far_from_computed_warns():
    computed = massprops.compute(design_mod.loads(_survey_text()))
    J_meas = computed.inertia_kg_m2 * 1.5
    d = design_mod.loads(_survey_text() + f"\n[body]\ninertia_kg_m2 = {_matrix_toml(J_meas)}\n")
    mp = massprops.compute(d)
    assert len(mp.warnings) == 1
    assert "body.inertia_kg_m2 differs from the inertia computed from parts by 33 %" in (
        mp.warnings[0])


def test_measured_body_without_parts():
    """A full [body] and no parts: mass, CoM and J are the measured ones, no comparison made."""
    text = _survey_text()
    data = tomllib.loads(text)
    del data["part"]
    for r in data["rotor"]:
        r.pop("mass_kg")
    J = [[0.012, 0.0, 0.0], [0.0, 0.014, 0.0], [0.0, 0.0, 0.024]]
    data["body"] = {"mass_kg": 1.3, "com_m": [0.01, 0.0, 0.02], "inertia_kg_m2": J}
    mp = massprops.compute(design_mod.from_dict(data))
    assert mp.mass_kg == 1.3
    np.testing.assert_allclose(mp.com_m, [0.01, 0.0, 0.02])
    np.testing.assert_allclose(mp.inertia_kg_m2, J)
    assert mp.computed_inertia_kg_m2 is None
    assert mp.warnings == ()


def test_centre_of_mass_far_from_rotor_centroid_warns():
    heavy = ('\n[[part]]\nname = "offset payload"\nmass_kg = 2.0\nshape = "point"\n'
             "position_m = [0.3, 0.0, 0.0]\n")
    mp = massprops.compute(design_mod.loads(_survey_text() + heavy))
    assert len(mp.warnings) == 1
    assert mp.warnings[0].startswith("centre of mass is 0.187 m")
    assert "rotors' centroid" in mp.warnings[0]
