"""URDF input (ikgen.urdf, ikgen.armsource, `ikgen from-urdf`): conversion, exactness, bad input.

Outside references, named beside each check:
- yourdfpy, a general-purpose URDF library (its own forward kinematics: ``update_cfg`` then
  ``get_transform``), for the converted arm's FK on 1,000 random joint vectors per URDF;
- the URDF format's definition (ROS URDF XML specification, <joint> element: ``rpy`` are fixed-axis
  roll, pitch, yaw; ``axis`` is normalised; continuous joints have no limits): from memory;
- scipy.spatial.transform.Rotation ('xyz' lower case = extrinsic = fixed axes) for rpy;
- DH tables of textbook arms: J. J. Craig, *Introduction to Robotics*, 3rd ed., Example 3.3
  (planar three-link arm, modified DH) and B. Siciliano et al., *Robotics: Modelling, Planning
  and Control*, Springer 2009, sec. 2.9.7 (anthropomorphic arm with spherical wrist, standard DH),
  both from memory;
- the "billion laughs" document is the well-known XML entity-expansion attack (common practice
  to test XML readers against it).
The invented URDFs are test data: their values come from nowhere but this file.
"""

from __future__ import annotations

import math
import sys
import tracemalloc
from pathlib import Path

import numpy as np
import pytest
import sympy as sp

yourdfpy = pytest.importorskip("yourdfpy", reason="the urdf extra (yourdfpy) is not installed")
pytest.importorskip("defusedxml", reason="the urdf extra (defusedxml) is not installed")
from scipy.spatial.transform import Rotation  # noqa: E402

import shared  # noqa: E402
from helpers import EXAMPLES  # noqa: E402
from ikgen.armfile import load_arm  # noqa: E402
from ikgen.armsource import load_arm_source  # noqa: E402
from ikgen.errors import ArmFileError, IkgenError  # noqa: E402
from ikgen.generate import load_module  # noqa: E402
from ikgen.kinematics import NumericChain  # noqa: E402
from ikgen.urdf import convert_urdf, load_urdf_arm, reader  # noqa: E402
from ikgen.urdf.armtext import arm_file_text  # noqa: E402
from ikgen.verify import verify  # noqa: E402

DEMO_URDF = EXAMPLES / "seedling6.urdf"
DEMO_TOML = EXAMPLES / "seedling6.toml"
CONVENTIONS = ("standard", "modified")
FK_SAMPLES = 1000


# ------------------------------------------------------------------------ writing URDFs

def numbers(values) -> str:
    return " ".join(repr(float(v)) for v in values)


def jnt(name, kind, parent, child, xyz=(0, 0, 0), rpy=(0, 0, 0), axis=(0, 0, 1), limits=(-2.5, 2.5), extra=""):
    return dict(name=name, kind=kind, parent=parent, child=child, xyz=xyz, rpy=rpy, axis=axis, limits=limits,
                extra=extra)


def urdf_text(joints: list[dict], robot: str = "test_robot", links: list[str] | None = None) -> str:
    if links is None:
        links = []
        for j in joints:
            for link in (j["parent"], j["child"]):
                if link not in links:
                    links.append(link)
    parts = ['<?xml version="1.0"?>', f'<robot name="{robot}">']
    parts += [f'  <link name="{link}"/>' for link in links]
    for j in joints:
        parts.append(f'  <joint name="{j["name"]}" type="{j["kind"]}">')
        parts.append(f'    <parent link="{j["parent"]}"/>\n    <child link="{j["child"]}"/>')
        parts.append(f'    <origin xyz="{numbers(j["xyz"])}" rpy="{numbers(j["rpy"])}"/>')
        if j["kind"] != "fixed":
            parts.append(f'    <axis xyz="{numbers(j["axis"])}"/>')
        if j["kind"] in ("revolute", "prismatic"):
            parts.append(f'    <limit lower="{j["limits"][0]}" upper="{j["limits"][1]}" effort="1" velocity="1"/>')
        if j["extra"]:
            parts.append(f'    {j["extra"]}')
        parts.append("  </joint>")
    parts.append("</robot>")
    return "\n".join(parts) + "\n"


def serial(specs: list[tuple], robot: str = "test_robot") -> str:
    """A serial chain l0 -> l1 -> ...: specs are (kind, xyz, rpy, axis[, limits])."""
    joints = [jnt(f"j{k + 1}", spec[0], f"l{k}", f"l{k + 1}", *spec[1:]) for k, spec in enumerate(specs)]
    return urdf_text(joints, robot)


def write(tmp_path: Path, text: str, name: str = "robot.urdf") -> Path:
    path = tmp_path / name
    path.write_text(text, encoding="utf-8")
    return path


# ------------------------------------------------------------------- the reference FK

def library_poses(path: Path, root: str, tip: str, names: list[str], readings: np.ndarray) -> np.ndarray:
    """yourdfpy's own forward kinematics: the tip link's pose in the root link's frame."""
    model = yourdfpy.URDF.load(str(path), load_meshes=False, build_scene_graph=True)
    poses = []
    for q in readings:
        model.update_cfg(dict(zip(names, q)))
        poses.append(model.get_transform(frame_to=tip, frame_from=root))
    return np.array(poses)


def random_readings(arm, count: int, seed: int) -> np.ndarray:
    limits = np.array([j.limits for j in arm.joints])
    rng = np.random.default_rng(seed)
    return limits[:, 0] + rng.random((count, arm.dof)) * (limits[:, 1] - limits[:, 0])


def assert_fk_matches(path: Path, arm, root: str, tip: str, readings: np.ndarray, reference=None):
    """Converted FK vs yourdfpy's FK: position within 1e-12 of reach, rotation within 1e-12."""
    reference = library_poses(path, root, tip, [j.name for j in arm.joints], readings) \
        if reference is None else reference
    ours = NumericChain(arm).poses(readings)
    position = np.abs(ours[:, :3, 3] - reference[:, :3, 3]).max()
    rotation = np.abs(ours[:, :3, :3] - reference[:, :3, :3]).max()
    assert position <= 1e-12 * arm.reach_scale(), (position, arm.reach_scale())
    assert rotation <= 1e-12, rotation
    return reference


# ------------------------------------------------------------------ invented test URDFs

# Covers: an axis along -z; axes along y and x; intersecting (1-2), parallel (2-3) and skew
# consecutive axes; a fixed joint with a non-trivial rpy in the middle; a prismatic and a
# continuous joint; non-trivial rpy in moving joints' origins; two fixed joints at the end.
MIXED = urdf_text([
    jnt("spin", "revolute", "base", "a", xyz=(0, 0, 0.2), axis=(0, 0, -1)),
    jnt("lift", "revolute", "a", "b", xyz=(0, 0, 0.1), axis=(0, 1, 0)),
    jnt("reach", "revolute", "b", "c", xyz=(0.3, 0, 0), axis=(0, 1, 0)),
    jnt("bracket", "fixed", "c", "d", xyz=(0.05, 0.02, 0.01), rpy=(0.3, -0.2, 0.7)),
    jnt("slide", "prismatic", "d", "e", xyz=(0.04, 0, 0.02), axis=(1, 0, 0), limits=(-0.1, 0.2)),
    jnt("swivel", "continuous", "e", "f", xyz=(0.1, 0, 0), rpy=(0, 0.4, 0), axis=(0, 0, 1)),
    jnt("tilt", "revolute", "f", "g", xyz=(0, 0.05, 0.1), rpy=(0.25, 0, -0.35), axis=(1, 0, 0)),
    jnt("flange", "fixed", "g", "h", xyz=(0.02, 0.03, 0.15), rpy=(1.1, 0.2, -0.4)),
    jnt("tcp", "fixed", "h", "tcp_link", xyz=(0, 0, 0.05), rpy=(0, 0, 0.5)),
], robot="mixed_chain")

# Axes along x, -y and -z written in rotated joint frames, a prismatic axis coinciding with the
# revolute axis before it (a cylindrical pair), and a prismatic joint at the end.
AXES = serial([
    ("revolute", (0.1, -0.2, 0.05), (0.5, 0.1, -0.3), (1, 0, 0)),
    ("prismatic", (0, 0, 0), (0, 0, 0), (1, 0, 0), (0.0, 0.4)),
    ("revolute", (0.0, 0.12, 0.3), (0, 0, 1.2), (0, -1, 0)),
    ("revolute", (0.2, 0, 0), (-0.7, 0, 0), (0, 0, -1)),
    ("prismatic", (0.0, 0.05, 0.0), (0.0, 0.3, 0.0), (0, 1, 0), (-0.05, 0.05)),
], robot="axes_chain")

NAMED = {"mixed": (MIXED, "base", "tcp_link"), "axes": (AXES, "l0", "l5"), "demo": (None, "bench", "fork_tcp")}


def named_path(tmp_path: Path, key: str) -> Path:
    text = NAMED[key][0]
    return DEMO_URDF if text is None else write(tmp_path, text, f"{key}.urdf")


@pytest.mark.parametrize("key", sorted(NAMED))
def test_converted_fk_equals_the_library_fk_on_1000_vectors(tmp_path, key):
    path = named_path(tmp_path, key)
    _, root, tip = NAMED[key]
    reference = None
    for convention in CONVENTIONS:
        arm = load_urdf_arm(path, convention=convention)
        readings = random_readings(arm, FK_SAMPLES, seed=len(key))
        reference = assert_fk_matches(path, arm, root, tip, readings, reference)


def test_mixed_chain_covers_the_axis_relations_and_joint_kinds(tmp_path):
    converted = convert_urdf(write(tmp_path, MIXED))
    assert {"intersecting", "parallel", "skew"} <= set(converted.relations)
    kinds = [j.kind for j in converted.arm.joints]
    assert kinds.count("prismatic") == 1 and len(kinds) == 6   # three fixed joints merged
    notes = "\n".join(converted.arm.notes)
    assert "fixed joint(s) merged into their neighbours: bracket, flange, tcp" in notes
    assert "joint 'swivel' is continuous" in notes


def test_axis_along_minus_z_gives_direction_minus_1_not_a_flipped_frame(tmp_path):
    arm = load_urdf_arm(write(tmp_path, MIXED))
    assert [j.direction for j in arm.joints] == [-1, 1, 1, 1, 1, 1]
    origins, directions = NumericChain(arm).joint_axes(np.zeros(arm.dof))
    # DH z of joint 1 points up (+z of the root), the URDF axis down: the reading turns about -z
    np.testing.assert_allclose(directions[0], [0, 0, 1], atol=1e-15)
    assert arm.joints[0].alpha == -sp.pi / 2 or arm.joints[0].alpha == sp.pi / 2
    assert arm.joints[0].theta == 0 and arm.joints[0].offset == 0


def test_axes_chain_directions_and_coincident_pair(tmp_path):
    converted = convert_urdf(write(tmp_path, AXES))
    assert [j.direction for j in converted.arm.joints] == [1, 1, -1, -1, 1]
    assert converted.relations[0] == "coincident"       # revolute about x, then sliding along x


@pytest.mark.parametrize("seed", range(12))
def test_random_chains_match_the_library_fk(tmp_path, seed):
    """Seeded random chains: any mix of joint kinds, axes along +-x/y/z or general directions,
    random origins and rpy; 1,000 random joint vectors each, both conventions."""
    rng = np.random.default_rng(1000 + seed)
    specs = []
    for _ in range(int(rng.integers(2, 8))):
        kind = rng.choice(["revolute", "revolute", "continuous", "prismatic", "fixed"])
        if rng.random() < 0.5:
            axis = np.zeros(3)
            axis[rng.integers(3)] = rng.choice([-1.0, 1.0])
        else:
            axis = rng.normal(size=3)
            axis /= np.linalg.norm(axis)
        xyz = rng.normal(scale=0.2, size=3) * (rng.random(3) < 0.7)
        rpy = rng.uniform(-math.pi, math.pi, size=3) * (rng.random(3) < 0.5)
        limits = (-0.3, 0.4) if kind == "prismatic" else (-3.0, 2.8)
        specs.append((kind, xyz, rpy, axis, limits))
    if all(s[0] == "fixed" for s in specs):
        specs[0] = ("revolute",) + specs[0][1:]
    path = write(tmp_path, serial(specs))
    reference = None
    for convention in CONVENTIONS:
        arm = load_urdf_arm(path, convention=convention)
        readings = random_readings(arm, FK_SAMPLES, seed)
        reference = assert_fk_matches(path, arm, "l0", f"l{len(specs)}", readings, reference)


def test_library_rpy_is_the_urdf_fixed_axis_convention(tmp_path):
    """The reference library reads rpy as the URDF format defines it (fixed axes x, y, z):
    scipy Rotation.from_euler('xyz', rpy) (extrinsic)."""
    rpy = (0.3, -0.2, 0.7)
    model = yourdfpy.URDF.load(str(write(tmp_path, MIXED)), load_meshes=False, build_scene_graph=False)
    origin = model.joint_map["bracket"].origin
    np.testing.assert_allclose(origin[:3, :3], Rotation.from_euler("xyz", rpy).as_matrix(), atol=1e-15)


# ------------------------------------------------------------------- textbook DH tables

def test_planar_three_link_arm_gives_craigs_modified_table(tmp_path):
    """Craig, 3rd ed., Example 3.3 (from memory): a planar RRR arm has, in modified DH,
    alpha_{i-1} = 0, a_0 = 0, a_1 = L1, a_2 = L2, d_i = 0; the third link's length goes to the tool."""
    l1, l2, l3 = 0.5, 0.4, 0.15
    path = write(tmp_path, serial([("revolute", (0, 0, 0), (0, 0, 0), (0, 0, 1)),
                                   ("revolute", (l1, 0, 0), (0, 0, 0), (0, 0, 1)),
                                   ("revolute", (l2, 0, 0), (0, 0, 0), (0, 0, 1)),
                                   ("fixed", (l3, 0, 0), (0, 0, 0), (0, 0, 1))]))
    converted = convert_urdf(path, convention="modified")
    arm = converted.arm
    assert [j.a for j in arm.joints] == [0, sp.Rational(1, 2), sp.Rational(2, 5)]
    assert all(j.alpha == 0 and j.d == 0 and j.theta == 0 and j.direction == 1 for j in arm.joints)
    assert arm.base == sp.eye(4)
    assert list(converted.tool.translation) == [sp.Rational(3, 20), 0, 0] and converted.tool.angles == (0, 0, 0)


def dh_link(a, alpha, d, theta) -> np.ndarray:
    """Standard DH link transform Rz(theta) Tz(d) Tx(a) Rx(alpha) (Spong et al., 1st ed., eq. 3.10)."""
    ct, st, ca, sa = math.cos(theta), math.sin(theta), math.cos(alpha), math.sin(alpha)
    return np.array([[ct, -st * ca, st * sa, a * ct], [st, ct * ca, -ct * sa, a * st], [0, sa, ca, d], [0, 0, 0, 1]])


def test_urdf_of_a_textbook_arm_gives_its_standard_table_back(tmp_path):
    """Siciliano et al. 2009, sec. 2.9.7 (from memory): anthropomorphic arm with spherical wrist,
    standard DH (a, alpha, d) = (0, pi/2, 0), (a2, 0, 0), (0, pi/2, 0), (0, -pi/2, d4), (0, pi/2, 0),
    (0, 0, d6), all theta variable and 0 at the zero reading. A URDF is written with one link per
    DH frame (each joint's origin the previous link transform, rpy from scipy); converting it back
    must give the book's table, no base and no tool transform."""
    a2, d4, d6 = 0.45, 0.38, 0.09
    table = [(0, math.pi / 2, 0), (a2, 0, 0), (0, math.pi / 2, 0), (0, -math.pi / 2, d4), (0, math.pi / 2, 0),
             (0, 0, d6)]
    specs, previous = [], np.eye(4)
    for a, alpha, d in table:
        rpy = Rotation.from_matrix(previous[:3, :3]).as_euler("xyz")
        specs.append(("revolute", previous[:3, 3], rpy, (0, 0, 1)))
        previous = dh_link(a, alpha, d, 0.0)
    specs.append(("fixed", previous[:3, 3], Rotation.from_matrix(previous[:3, :3]).as_euler("xyz"), (0, 0, 1)))
    converted = convert_urdf(write(tmp_path, serial(specs)), convention="standard")
    got = [(j.a, j.alpha, j.d, j.theta) for j in converted.arm.joints]
    expected = [(sp.nsimplify(a), sp.nsimplify(alpha / math.pi) * sp.pi, sp.nsimplify(d), 0) for a, alpha, d in table]
    assert got == expected
    assert converted.base.identity and converted.tool.identity


# ----------------------------------------------------------------------- exactness

def test_demo_values_are_exact_with_a_note_for_each_snap():
    arm = load_urdf_arm(DEMO_URDF)
    assert [j.alpha for j in arm.joints] == [-sp.pi / 2, 0, -sp.pi / 2, sp.pi / 2, -sp.pi / 2, 0]
    assert [j.a for j in arm.joints][:3] == [sp.Rational(1, 25), sp.Rational(17, 50), sp.Rational(7, 200)]
    assert arm.joints[0].theta == sp.pi / 6 and arm.joints[1].theta == -sp.pi / 2
    notes = "\n".join(arm.notes)
    assert "joint 1 'turret': a = 0.040000000000000056 read as 0.04" in notes
    assert "theta = 0.5235987755982986 read as pi/6" in notes
    assert "joint 'outreach': its URDF axis (0 -1 0)" in notes


def test_a_rounded_right_angle_is_not_snapped_but_noted(tmp_path):
    path = write(tmp_path, serial([("revolute", (0, 0, 0.1), (0, 0, 0), (0, 0, 1)),
                                   ("revolute", (0, 0, 0.2), (1.5708, 0, 0), (0, 0, 1))]))
    arm = load_urdf_arm(path)
    assert arm.joints[0].alpha == sp.Rational("1.5708")     # the URDF's decimal, exactly; not pi/2
    assert any(n.startswith("joint 1 'j1': alpha = 1.5708 rad is 3.7e-06 rad from pi/2 and was kept as it is")
               for n in arm.notes), arm.notes
    assert_fk_matches(path, arm, "l0", "l2", random_readings(arm, 100, 3))


@pytest.mark.parametrize("key", ["mixed", "axes", "demo"])
def test_written_arm_file_reads_back_to_the_same_arm(tmp_path, key):
    converted = convert_urdf(named_path(tmp_path, key), convention="modified" if key == "axes" else "standard")
    toml = tmp_path / f"{key}.toml"
    toml.write_text(arm_file_text(converted), encoding="utf-8")
    again = load_arm(toml)
    fields = ("name", "kind", "a", "alpha", "d", "theta", "offset", "direction", "limits")
    for ours, theirs in zip(converted.arm.joints, again.joints):
        assert [getattr(ours, f) for f in fields] == [getattr(theirs, f) for f in fields]
    assert again.base == converted.arm.base and again.tool == converted.arm.tool
    assert again.convention == converted.arm.convention and again.dof == converted.arm.dof


def test_example_arm_file_is_the_fresh_conversion_of_the_example_urdf():
    assert DEMO_TOML.read_text(encoding="utf-8") == arm_file_text(convert_urdf(DEMO_URDF))


# ------------------------------------------------------------------------- verification

def test_demo_urdf_verifies_in_both_conventions():
    for convention in CONVENTIONS:
        arm = load_urdf_arm(DEMO_URDF, convention=convention)
        module = load_module(shared.python_source(arm), arm.name + "_ik_urdf_" + convention)
        report = verify(arm, module, samples=1000, seed=5)
        assert report.passed, report.failures
        assert report.completeness == 1.0


# --------------------------------------------------------------------------- chains

BRANCHED = urdf_text([
    jnt("j1", "revolute", "base", "arm"),
    jnt("left_finger", "prismatic", "arm", "left", axis=(0, 1, 0), limits=(0, 0.04)),
    jnt("right_finger", "prismatic", "arm", "right", axis=(0, -1, 0), limits=(0, 0.04),
        extra='<mimic joint="left_finger"/>'),
    jnt("camera_mount", "fixed", "base", "camera"),
])


def test_branching_tree_needs_a_tip_and_names_the_candidates(tmp_path):
    path = write(tmp_path, BRANCHED)
    with pytest.raises(ArmFileError, match=r"below 'base' branches at link 'base'.*3 leaf links \('left', 'right', 'camera'\)"):
        load_urdf_arm(path)
    arm = load_urdf_arm(path, tip_link="left")
    assert [j.name for j in arm.joints] == ["j1", "left_finger"]


def test_mimic_joint_off_the_chain_is_fine_on_the_chain_refused(tmp_path):
    path = write(tmp_path, BRANCHED)
    assert load_urdf_arm(path, tip_link="arm").dof == 1
    with pytest.raises(ArmFileError, match=r"joint 'right_finger': mimics joint 'left_finger'"):
        load_urdf_arm(path, tip_link="right")


def test_root_link_option_picks_a_sub_chain(tmp_path):
    arm = load_urdf_arm(write(tmp_path, MIXED), root_link="c", tip_link="g")
    assert [j.name for j in arm.joints] == ["slide", "swivel", "tilt"]


# ------------------------------------------------------------------------- bad input

def error_of(tmp_path, text: str, **options) -> str:
    with pytest.raises(ArmFileError) as info:
        load_urdf_arm(write(tmp_path, text), **options)
    return str(info.value)


@pytest.mark.parametrize("kind", ["floating", "planar"])
def test_floating_and_planar_joints_on_the_chain_are_refused(tmp_path, kind):
    text = urdf_text([jnt("j1", "revolute", "a", "b"), jnt("free6", kind, "b", "c")])
    message = error_of(tmp_path, text)
    assert f"joint 'free6': is a {kind} joint" in message and "robot.urdf:" in message


def test_missing_link_is_named(tmp_path):
    text = urdf_text([jnt("j1", "revolute", "base", "arm"), jnt("j2", "revolute", "arm", "hand")],
                     links=["base", "arm"])
    assert "joint 'j2': its child link 'hand' is not defined by any <link>" in error_of(tmp_path, text)


def test_cyclic_links_are_named(tmp_path):
    text = urdf_text([jnt("j0", "revolute", "base", "a"), jnt("j1", "revolute", "b", "c"),
                      jnt("j2", "revolute", "c", "d"), jnt("j3", "revolute", "d", "b")])
    message = error_of(tmp_path, text)
    assert "the links form a cycle" in message and "'b'" in message and "'c'" in message and "'d'" in message


def test_link_with_two_parents_is_refused(tmp_path):
    text = urdf_text([jnt("j1", "revolute", "a", "b"), jnt("j2", "revolute", "a", "c"),
                      jnt("j3", "revolute", "c", "b")])
    assert "joint 'j3': link 'b' is already the child of joint 'j1'" in error_of(tmp_path, text)


def test_tip_not_below_root_is_refused(tmp_path):
    message = error_of(tmp_path, BRANCHED, root_link="left", tip_link="camera")
    assert "link 'camera' is not below link 'left'" in message


def test_unknown_tip_link_suggests_a_name(tmp_path):
    message = error_of(tmp_path, BRANCHED, tip_link="lfet")
    assert "the tip link 'lfet' is not a link of the file" in message and "'left'" in message


def test_several_roots_are_named(tmp_path):
    text = urdf_text([jnt("j1", "revolute", "a", "b"), jnt("j2", "revolute", "c", "d")])
    assert "2 root links (links that are no joint's child): 'a', 'c'" in error_of(tmp_path, text)


@pytest.mark.parametrize("change, piece", [
    ('<limit lower="-2.5" upper="2.5" effort="1" velocity="1"/>', "has no <limit lower=... upper=...>"),
    ('<limit lower="1" upper="1" effort="1" velocity="1"/>', 'leaves no motion; expected lower < upper'),
    ('<limit lower="nan" upper="1" effort="1" velocity="1"/>', "'nan' is not finite"),
])
def test_bad_limits_are_refused(tmp_path, change, piece):
    text = serial([("revolute", (0, 0, 0), (0, 0, 0), (0, 0, 1))])
    text = text.replace('<limit lower="-2.5" upper="2.5" effort="1" velocity="1"/>',
                        "" if "no <limit" in piece else change)
    assert piece in error_of(tmp_path, text)


@pytest.mark.parametrize("old, new, piece", [
    ('<axis xyz="0.0 0.0 1.0"/>', '<axis xyz="0 0 0"/>', "has no direction"),
    ('<axis xyz="0.0 0.0 1.0"/>', '<axis xyz="0 1"/>', 'holds 2 value(s); expected 3 number(s)'),
    ('rpy="0.0 0.0 0.0"', 'rpy="0 0 abc"', "'abc' is not a number"),
    ('xyz="0.0 0.0 0.1"', 'xyz="0 0 inf"', "'inf' is not finite"),
    ('xyz="0.0 0.0 0.1"', 'xyz="0 0 1e300"', "'1e300' is too large; expected numbers of magnitude at most 1e+06"),
    ('type="revolute"', 'type="hinge"', "has type 'hinge'; expected one of revolute, continuous"),
    ('<parent link="l0"/>', "", 'has no <parent link="...">'),
    ('<joint name="j1"', "<joint", "<joint>: has no 'name' attribute"),
])
def test_bad_joint_elements_are_refused_with_their_line(tmp_path, old, new, piece):
    text = serial([("revolute", (0, 0, 0.1), (0, 0, 0), (0, 0, 1))])
    assert old in text
    message = error_of(tmp_path, text.replace(old, new))
    assert piece in message and "robot.urdf:" in message


def test_all_fixed_chain_is_refused(tmp_path):
    text = serial([("fixed", (0, 0, 0.1), (0, 0, 0), (0, 0, 1))])
    assert "every joint from 'l0' to 'l1' is fixed" in error_of(tmp_path, text)


def test_what_the_library_cannot_read_is_reported_not_raised(tmp_path):
    text = MIXED.replace('<link name="base"/>',
                         '<link name="base"><visual><geometry><box size="a b c"/></geometry></visual></link>')
    assert "the URDF library could not read the file (ValueError" in error_of(tmp_path, text)


@pytest.mark.parametrize("text, piece", [
    ("<robot name='x'><link name='a'></robot>", "malformed XML: mismatched tag"),
    ("<model name='x'/>", "the top element is <model>; expected a URDF whose top element is <robot>"),
    ("   \n", "the file is empty"),
    ("<robot name='x'>\x00</robot>", "binary data (NUL bytes)"),
])
def test_broken_files_are_refused(tmp_path, text, piece):
    assert piece in error_of(tmp_path, text)


BILLION_LAUGHS = """<?xml version="1.0"?>
<!DOCTYPE robot [
  <!ENTITY lol "lol">
""" + "".join(f'  <!ENTITY lol{k} "{("&lol" + (str(k - 1) if k > 1 else "") + ";") * 10}">\n'
              for k in range(1, 10)) + """]>
<robot name="&lol9;"><link name="a"/></robot>
"""


def test_billion_laughs_is_refused_without_expanding(tmp_path):
    path = write(tmp_path, BILLION_LAUGHS)
    tracemalloc.start()
    try:
        with pytest.raises(ArmFileError, match="DOCTYPE declaration, refused for safety"):
            load_urdf_arm(path)
        _, peak = tracemalloc.get_traced_memory()
    finally:
        tracemalloc.stop()
    assert peak < 2 * 1024 * 1024    # expanded, &lol9; would be 3 * 10**9 characters


def test_external_entity_is_refused(tmp_path):
    text = ('<?xml version="1.0"?>\n<!DOCTYPE robot [<!ENTITY secret SYSTEM "file:///etc/passwd">]>\n'
            '<robot name="&secret;"><link name="a"/></robot>\n')
    assert "refused for safety" in error_of(tmp_path, text)


def test_file_over_the_size_cap_is_refused_before_reading(tmp_path):
    path = tmp_path / "huge.urdf"
    with path.open("wb") as stream:               # sparse: no real disk space or reading needed
        stream.truncate(reader.MAX_URDF_BYTES + 1)
    with pytest.raises(ArmFileError, match=r"the file has 16777217 bytes; expected a URDF of at most"):
        load_urdf_arm(path)


def test_library_reading_less_than_the_file_holds_is_refused(tmp_path):
    """A text node over lxml's default 10 MB limit made the library fall back to a recovering
    parse that dropped elements (seen with yourdfpy 0.0.60, lxml 6.2): refused, or (should a later
    library read it all) the whole chain, never a shorter robot."""
    text = DEMO_URDF.read_text(encoding="utf-8").replace(
        '<link name="bench"/>', '<link name="bench"/>\n  <gazebo>' + "a" * (11 * 1024 * 1024) + "</gazebo>")
    path = write(tmp_path, text)
    try:
        arm = load_urdf_arm(path)
    except ArmFileError as error:
        assert "the URDF library read other <link> elements than the file holds" in str(error)
    else:
        assert [j.name for j in arm.joints] == [j.name for j in load_urdf_arm(DEMO_URDF).joints]


def test_wrong_suffix_and_missing_file(tmp_path):
    with pytest.raises(ArmFileError, match="file not found"):
        load_urdf_arm(tmp_path / "none.urdf")
    with pytest.raises(ArmFileError, match="unknown file type '.xml'; expected a .urdf file"):
        load_urdf_arm(write(tmp_path, MIXED, "robot.xml"))


def test_missing_extra_names_the_extra(tmp_path, monkeypatch):
    monkeypatch.setitem(sys.modules, "yourdfpy", None)
    with pytest.raises(IkgenError, match=r'pip install "ikgen\[urdf\]" \(the Python module \'yourdfpy\''):
        load_urdf_arm(write(tmp_path, MIXED))


def test_urdf_options_on_arm_files_only_are_refused():
    class Options:
        root_link, tip_link, dh_convention = None, "tool0", None
    with pytest.raises(IkgenError, match="--tip-link applies to .urdf files only"):
        load_arm_source(str(EXAMPLES / "benchtop6.toml"), Options())
