"""Forward kinematics (ikgen.kinematics) against textbook formulas, scipy, mpmath and itself.

References used below (all from memory; section numbers as recalled, not re-checked):
- [Craig] Craig, *Introduction to Robotics: Mechanics and Control*, 3rd ed. (2005): sec. 3.4
  (frames affixed to links, modified/proximal convention: z_i is joint i's axis; a_{i-1},
  alpha_{i-1} precede joint i), sec. 3.5 (link transform A = Rx(alpha_{i-1}) Tx(a_{i-1}) Rz(theta_i)
  Tz(d_i)), the three-link planar arm example of sec. 3.4.
- [SHV] Spong, Hutchinson, Vidyasagar, *Robot Modeling and Control*, 1st ed. (2006): sec. 3.2
  (standard/distal convention: A_i = Rz(theta_i) Tz(d_i) Tx(a_i) Rx(alpha_i), joint i moves about
  z_{i-1}) and the examples of ch. 3 (planar elbow manipulator, three-link cylindrical robot,
  spherical wrist = Z-Y-Z Euler angles) and the articulated (elbow) manipulator's position used
  in its inverse-position discussion.
- scipy.spatial.transform.Rotation for elementary and Euler rotations (scipy documentation).
- mpmath at 30 digits to evaluate the symbolic model (a high-precision reference).
"""

from __future__ import annotations

import math
from dataclasses import replace

import mpmath as mp
import numpy as np
import pytest
import sympy as sp
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from scipy.spatial.transform import Rotation

from helpers import DEMO_FILES, build_arm, demo_arm, joint
from ikgen.kinematics import (NumericChain, forward, link_matrix, reading_symbols, symbolic_link,
                              symbolic_pose)
from ikgen.rotations import homogeneous, rot_x

SETTINGS = settings(max_examples=20, deadline=None,
                    suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large])
DEMOS = [p.stem for p in DEMO_FILES]
SEQUENCES = ("xyz", "xzy", "yxz", "yzx", "zxy", "zyx", "xyx", "xzx", "yxy", "yzy", "zxz", "zyz")
RAD_STRINGS = {"0": 0.0, "pi/2": math.pi / 2, "-pi/2": -math.pi / 2, "pi": math.pi,
               "pi/4": math.pi / 4, "-3*pi/4": -3 * math.pi / 4, "pi/3": math.pi / 3}


# ------------------------------------------------------------- an independent reference FK
# Built from scipy elementary rotations and numpy only: every DH link is the product of two
# screws, about/along z and about/along x ([SHV] sec. 3.2, [Craig] sec. 3.5).

def screw(axis: str, turn: float, shift: float) -> np.ndarray:
    """Rotation by ``turn`` about ``axis`` and translation ``shift`` along it (they commute)."""
    t = np.eye(4)
    t[:3, :3] = Rotation.from_euler(axis, turn).as_matrix()
    t[:3, 3] = np.eye(3)["xyz".index(axis)] * shift
    return t


def reference_pose(spec: dict, readings) -> np.ndarray:
    """Tool pose from the float description ``spec`` (see random_arm) and user-unit readings."""
    deg = spec["angle_unit"] == "deg"
    result = spec["base"]
    for j, reading in zip(spec["joints"], readings):
        variable = j["offset"] + j["direction"] * (math.radians(reading) if deg and j["revolute"] else reading)
        theta = j["theta"] + (variable if j["revolute"] else 0.0)
        d = j["d"] + (0.0 if j["revolute"] else variable)
        if spec["convention"] == "standard":
            link = screw("z", theta, d) @ screw("x", j["alpha"], j["a"])
        else:
            link = screw("x", j["alpha"], j["a"]) @ screw("z", theta, d)
        result = result @ link
    return result @ spec["tool"]


# ----------------------------------------------------------------- random arms (hypothesis)

@st.composite
def angle_value(draw, unit: str):
    """(value as written in the file, radians as float)."""
    if unit == "deg":
        v = draw(st.one_of(st.sampled_from([0, 90, -90, 180, 45, -30, 120]),
                           st.floats(-180, 180).map(lambda x: round(x, 4))))
        return v, math.radians(v)
    v = draw(st.one_of(st.sampled_from(sorted(RAD_STRINGS)), st.floats(-3.2, 3.2).map(lambda x: round(x, 6))))
    return (v, RAD_STRINGS[v]) if isinstance(v, str) else (v, v)


@st.composite
def length_value(draw, unit: str):
    scale = 1000.0 if unit == "mm" else 1.0
    v = draw(st.one_of(st.just(0), st.floats(-1, 1).map(lambda x: round(x * scale, 4))))
    return v, float(v)


@st.composite
def frame_table(draw, length_unit: str, angle_unit: str):
    """(a [base]/[tool] table or None, the same frame as a float 4x4 built with scipy)."""
    form = draw(st.sampled_from(["none", "angles", "quaternion"]))
    if form == "none":
        return None, np.eye(4)
    translation = [draw(length_value(length_unit)) for _ in range(3)]
    matrix = np.eye(4)
    matrix[:3, 3] = [t[1] for t in translation]
    table = {"translation": [t[0] for t in translation]}
    if form == "angles":
        axes = draw(st.sampled_from(SEQUENCES))
        frame = draw(st.sampled_from(["fixed", "moving"]))
        angles = [draw(angle_value(angle_unit)) for _ in range(3)]
        table["rotation"] = {"axes": axes, "frame": frame, "angles": [a[0] for a in angles]}
        # scipy: lower case = extrinsic = fixed axes, upper case = intrinsic = moving axes
        matrix[:3, :3] = Rotation.from_euler(axes if frame == "fixed" else axes.upper(),
                                             [a[1] for a in angles]).as_matrix()
    else:
        q = np.array(draw(st.tuples(*[st.floats(-1, 1)] * 4).filter(lambda q: np.linalg.norm(q) > 0.3)))
        w, x, y, z = np.round(q / np.linalg.norm(q), 9)
        order = draw(st.sampled_from(["wxyz", "xyzw"]))
        table["rotation"] = {"quaternion": [w, x, y, z] if order == "wxyz" else [x, y, z, w], "order": order}
        matrix[:3, :3] = Rotation.from_quat([x, y, z, w]).as_matrix()   # scipy: scalar last
    return table, matrix


@st.composite
def random_arm(draw, min_dof: int = 1, max_dof: int = 6, convention: str | None = None):
    """(Arm, float spec for reference_pose): both conventions, revolute and prismatic joints,
    offsets, directions, base and tool, m or mm, deg or rad."""
    convention = convention or draw(st.sampled_from(["standard", "modified"]))
    length_unit = draw(st.sampled_from(["m", "mm"]))
    angle_unit = draw(st.sampled_from(["deg", "rad"]))
    joints, spec_joints = [], []
    for _ in range(draw(st.integers(min_dof, max_dof))):
        revolute = draw(st.booleans() | st.just(True))   # about 3 in 4 revolute
        a, d = draw(length_value(length_unit)), draw(length_value(length_unit))
        alpha, theta = draw(angle_value(angle_unit)), draw(angle_value(angle_unit))
        offset = draw(angle_value(angle_unit) if revolute else length_value(length_unit))
        direction = draw(st.sampled_from([1, -1]))
        joints.append(joint("r" if revolute else "p", a=a[0], alpha=alpha[0], d=d[0], theta=theta[0],
                            offset=offset[0], direction=direction))
        spec_joints.append({"revolute": revolute, "a": a[1], "alpha": alpha[1], "d": d[1], "theta": theta[1],
                            "offset": offset[1], "direction": direction})
    base, base_matrix = draw(frame_table(length_unit, angle_unit))
    tool, tool_matrix = draw(frame_table(length_unit, angle_unit))
    arm = build_arm(joints, convention=convention, length_unit=length_unit, angle_unit=angle_unit,
                    base=base, tool=tool)
    spec = {"convention": convention, "angle_unit": angle_unit, "joints": spec_joints,
            "base": base_matrix, "tool": tool_matrix}
    return arm, spec


def random_readings(draw, arm, count: int | None = None) -> np.ndarray:
    """Readings in user units: revolute within +-1 turn, prismatic within +-1 m (or 1000 mm)."""
    spans = np.array([(360.0 if arm.angle_unit == "deg" else 2 * math.pi) if j.revolute else
                      (1000.0 if arm.length_unit == "mm" else 1.0) for j in arm.joints])
    rows = count or 1
    u = draw(st.lists(st.floats(-1, 1), min_size=rows * arm.dof, max_size=rows * arm.dof))
    values = np.array(u).reshape(rows, arm.dof) * spans
    return values if count else values[0]


def length_scale(arm, readings) -> float:
    """The arm's scale for tolerances: its reach plus the prismatic readings."""
    readings = np.atleast_2d(readings)
    prismatic = np.array([not j.revolute for j in arm.joints])
    return arm.reach_scale() + float(np.abs(readings[:, prismatic]).sum(axis=1).max(initial=0.0))


def assert_pose_close(actual, expected, scale, tol=1e-12):
    np.testing.assert_allclose(actual[..., :3, :3], expected[..., :3, :3], rtol=0, atol=tol)
    np.testing.assert_allclose(actual[..., :3, 3], expected[..., :3, 3], rtol=0, atol=tol * scale)
    np.testing.assert_array_equal(actual[..., 3, :], np.broadcast_to([0.0, 0.0, 0.0, 1.0], actual[..., 3, :].shape))


# ------------------------------------------------- standard <-> modified conversion ([Craig], [SHV])
# Regrouping base * prod_i Rz(th_i) Tz(d_i) Tx(a_i) Rx(al_i) * tool
#   = base * Rz(th_1) Tz(d_1) * prod_{i>=2} [Tx(a_{i-1}) Rx(al_{i-1}) Rz(th_i) Tz(d_i)] * Tx(a_n) Rx(al_n) * tool,
# and Tx(a) Rx(al) = Rx(al) Tx(a): modified row i holds a_{i-1}, alpha_{i-1} of the standard
# table (row 1 holds 0, 0), and Tx(a_n) Rx(alpha_n) moves into the tool. ([Craig] sec. 3.4 and
# [SHV] sec. 3.2 for the two conventions, from memory; the regrouping is derived here.)

def screw_x_exact(joint_):
    return homogeneous(rot_x(joint_.alpha), [joint_.a, 0, 0])


def to_modified(arm):
    assert arm.convention == "standard"
    js = arm.joints
    joints = [replace(j, a=p.a if p else sp.Integer(0), alpha=p.alpha if p else sp.Integer(0))
              for p, j in zip((None,) + js[:-1], js)]
    tool = sp.ImmutableMatrix(screw_x_exact(js[-1]) * sp.Matrix(arm.tool))
    return replace(arm, convention="modified", joints=tuple(joints), tool=tool)


def to_standard(arm):
    assert arm.convention == "modified"
    js = arm.joints
    joints = [replace(j, a=n.a if n else sp.Integer(0), alpha=n.alpha if n else sp.Integer(0))
              for j, n in zip(js, js[1:] + (None,))]
    base = sp.ImmutableMatrix(sp.Matrix(arm.base) * screw_x_exact(js[0]))
    return replace(arm, convention="standard", joints=tuple(joints), base=base)


def converted(arm):
    return to_modified(arm) if arm.convention == "standard" else to_standard(arm)


def assert_same_joint_axes(chain_a, chain_b, readings, scale):
    # Standard: joint i moves about z_{i-1} ([SHV] sec. 3.2); modified: about z_i ([Craig] sec. 3.4).
    # Both must describe the same physical lines (the points on them may differ along the line).
    origins_a, directions_a = chain_a.joint_axes(readings)
    origins_b, directions_b = chain_b.joint_axes(readings)
    np.testing.assert_allclose(directions_a, directions_b, rtol=0, atol=1e-12)
    np.testing.assert_allclose(np.cross(origins_a - origins_b, directions_a), 0.0, rtol=0, atol=1e-12 * scale)


@pytest.mark.parametrize("stem", DEMOS)
@SETTINGS
@given(data=st.data())
def test_demo_arm_in_the_other_convention_gives_the_same_pose(stem, data):
    arm = demo_arm(stem)
    other = converted(arm)
    assert other.convention != arm.convention
    lower, upper = arm.limits_in_readings().T
    readings = np.array([data.draw(st.floats(lo, hi)) for lo, hi in zip(lower, upper)])
    scale = length_scale(arm, readings)
    chain, other_chain = NumericChain(arm), NumericChain(other)
    assert_pose_close(other_chain.pose(readings), chain.pose(readings), scale)
    assert_same_joint_axes(chain, other_chain, readings, scale)


@SETTINGS
@given(data=st.data())
def test_random_arm_in_the_other_convention_gives_the_same_pose(data):
    arm, _ = data.draw(random_arm())
    readings = random_readings(data.draw, arm)
    scale = length_scale(arm, readings)
    other = converted(arm)
    assert_pose_close(NumericChain(other).pose(readings), NumericChain(arm).pose(readings), scale)
    assert_same_joint_axes(NumericChain(arm), NumericChain(other), readings, scale)


def test_conversion_of_a_table_by_hand():
    # A worked conversion ([Craig] sec. 3.4 / [SHV] sec. 3.2, from memory): the standard rows
    # (a, alpha) = (0, 90), (400, 0), (30, 90) become modified rows (0, 0), (0, 90), (400, 0)
    # with a tool Tx(30) Rx(90) ahead of the original tool.
    standard = build_arm([joint("r", 0, 90, 300), joint("r", 400, 0, 0), joint("r", 30, 90, 0)],
                         convention="standard", length_unit="mm")
    modified = build_arm([joint("r", 0, 0, 300), joint("r", 0, 90, 0), joint("r", 400, 0, 0)],
                         convention="modified", length_unit="mm",
                         tool={"translation": [30, 0, 0],
                               "rotation": {"axes": "xyz", "frame": "fixed", "angles": [90, 0, 0]}})
    assert to_modified(standard).joints == modified.joints
    for readings in ([0, 0, 0], [10, -35, 70], [-120, 45, 170]):
        assert_pose_close(forward(modified, readings), forward(standard, readings), 1000.0)


# -------------------------------------------------------------- textbook worked examples

@SETTINGS
@given(q1=st.floats(-180, 180), q2=st.floats(-180, 180), a1=st.floats(0.1, 2), a2=st.floats(0.1, 2))
def test_planar_two_link_arm(q1, q2, a1, a2):
    # [SHV] ch. 3, planar elbow manipulator (from memory; common textbook formula):
    #   x = a1 cos q1 + a2 cos(q1+q2), y = a1 sin q1 + a2 sin(q1+q2), R = Rz(q1+q2).
    arm = build_arm([joint("r", a=a1), joint("r", a=a2)], convention="standard", angle_unit="deg")
    pose = forward(arm, [q1, q2])
    t1, t12 = math.radians(q1), math.radians(q1 + q2)
    expected = [a1 * math.cos(t1) + a2 * math.cos(t12), a1 * math.sin(t1) + a2 * math.sin(t12), 0.0]
    np.testing.assert_allclose(pose[:3, 3], expected, rtol=0, atol=1e-13)
    np.testing.assert_allclose(pose[:3, :3], Rotation.from_euler("z", t12).as_matrix(), rtol=0, atol=1e-13)


@SETTINGS
@given(q=st.tuples(*[st.floats(-math.pi, math.pi)] * 3),
       lengths=st.tuples(*[st.floats(0.05, 1.5)] * 3))
def test_planar_three_link_arm_in_modified_convention(q, lengths):
    # [Craig] sec. 3.4, three-link planar arm (from memory): modified rows (a_{i-1}, alpha_{i-1}) =
    # (0, 0), (L1, 0), (L2, 0); a tool frame L3 further along the last link gives
    #   x = L1 c1 + L2 c12 + L3 c123, y = L1 s1 + L2 s12 + L3 s123, R = Rz(q1+q2+q3).
    l1, l2, l3 = lengths
    arm = build_arm([joint("r"), joint("r", a=l1), joint("r", a=l2)], convention="modified",
                    angle_unit="rad", tool={"translation": [l3, 0, 0]})
    pose = forward(arm, q)
    c = np.cumsum(q)
    expected = [l1 * math.cos(c[0]) + l2 * math.cos(c[1]) + l3 * math.cos(c[2]),
                l1 * math.sin(c[0]) + l2 * math.sin(c[1]) + l3 * math.sin(c[2]), 0.0]
    np.testing.assert_allclose(pose[:3, 3], expected, rtol=0, atol=1e-13)
    np.testing.assert_allclose(pose[:3, :3], Rotation.from_euler("z", c[2]).as_matrix(), rtol=0, atol=1e-13)


@SETTINGS
@given(q=st.tuples(*[st.floats(-180, 180)] * 3), d1=st.floats(0, 500), a2=st.floats(10, 500),
       a3=st.floats(10, 500))
def test_elbow_manipulator_position(q, d1, a2, a3):
    # [SHV] articulated (elbow) manipulator, from memory: rows (a, alpha, d) = (0, 90, d1),
    # (a2, 0, 0), (a3, 0, 0) give
    #   x = c1 (a2 c2 + a3 c23), y = s1 (a2 c2 + a3 c23), z = d1 + a2 s2 + a3 s23.
    arm = build_arm([joint("r", 0, 90, d1), joint("r", a2, 0, 0), joint("r", a3, 0, 0)],
                    convention="standard", length_unit="mm", angle_unit="deg")
    t1, t2, t3 = np.radians(q)
    reach = a2 * math.cos(t2) + a3 * math.cos(t2 + t3)
    expected = [math.cos(t1) * reach, math.sin(t1) * reach, d1 + a2 * math.sin(t2) + a3 * math.sin(t2 + t3)]
    np.testing.assert_allclose(forward(arm, q)[:3, 3], expected, rtol=0, atol=1e-12 * (d1 + a2 + a3))


@SETTINGS
@given(q=st.tuples(*[st.floats(-180, 180)] * 3), d6=st.floats(0, 200))
def test_spherical_wrist_is_zyz_euler(q, d6):
    # [SHV] ch. 3, spherical wrist (from memory): rows (a, alpha, d) = (0, -90, 0), (0, 90, 0),
    # (0, 0, d6); the wrist's rotation equals Z-Y-Z Euler angles (theta4, theta5, theta6) and the
    # tool point sits d6 along the last z axis. scipy 'ZYZ' (upper case) = intrinsic = moving axes.
    arm = build_arm([joint("r", 0, -90, 0), joint("r", 0, 90, 0), joint("r", 0, 0, d6)],
                    convention="standard", length_unit="mm", angle_unit="deg")
    pose = forward(arm, q)
    expected = Rotation.from_euler("ZYZ", q, degrees=True).as_matrix()
    np.testing.assert_allclose(pose[:3, :3], expected, rtol=0, atol=1e-13)
    np.testing.assert_allclose(pose[:3, 3], d6 * expected[:, 2], rtol=0, atol=1e-12 * max(d6, 1))


@SETTINGS
@given(q1=st.floats(-180, 180), d2=st.floats(-300, 300), d3=st.floats(0, 400), d1=st.floats(0, 500))
def test_three_link_cylindrical_robot(q1, d2, d3, d1):
    # [SHV] ch. 3, three-link cylindrical robot (from memory): rows (a, alpha, d, theta) =
    # (0, 0, d1, theta1*), (0, -90, d2*, 0), (0, 0, d3*, 0) with * the joint variable give
    #   R = [[c1, 0, -s1], [s1, 0, c1], [0, -1, 0]],  p = (-s1 d3, c1 d3, d1 + d2).
    arm = build_arm([joint("r", 0, 0, d1), joint("p", 0, -90, 0), joint("p", 0, 0, 0)],
                    convention="standard", length_unit="mm", angle_unit="deg")
    pose = forward(arm, [q1, d2, d3])
    c, s = math.cos(math.radians(q1)), math.sin(math.radians(q1))
    np.testing.assert_allclose(pose[:3, :3], [[c, 0, -s], [s, 0, c], [0, -1, 0]], rtol=0, atol=1e-13)
    np.testing.assert_allclose(pose[:3, 3], [-s * d3, c * d3, d1 + d2], rtol=0, atol=1e-12 * (d1 + abs(d2) + d3 + 1))


# ------------------------------------------------------------------- property tests

@SETTINGS
@given(data=st.data())
def test_numeric_fk_matches_independent_reference(data):
    # NumericChain against reference_pose (scipy elementary screws, base/tool built by scipy from
    # the same file values): offsets, directions, units, prismatic joints, both conventions.
    arm, spec = data.draw(random_arm())
    readings = random_readings(data.draw, arm)
    assert_pose_close(NumericChain(arm).pose(readings), reference_pose(spec, readings),
                      length_scale(arm, readings), tol=1e-12)


@settings(SETTINGS, max_examples=10)
@given(data=st.data())
def test_numeric_and_symbolic_fk_agree(data):
    # The symbolic pose, evaluated with mpmath at 30 digits, is the reference for the numeric one.
    arm, _ = data.draw(random_arm())
    readings = random_readings(data.draw, arm)
    evaluate = sp.lambdify(reading_symbols(arm), symbolic_pose(arm), modules="mpmath")
    with mp.workdps(30):
        unit = mp.pi / 180 if arm.angle_unit == "deg" else mp.mpf(1)
        internal = [mp.mpf(float(r)) * (unit if j.revolute else 1) for j, r in zip(arm.joints, readings)]
        symbolic = np.array(evaluate(*internal).tolist(), dtype=float)
    assert_pose_close(NumericChain(arm).pose(readings), symbolic, length_scale(arm, readings))


@pytest.mark.parametrize("stem", DEMOS)
def test_demo_symbolic_pose_substituted_exactly(stem):
    # Exact readings (multiples of 15 deg or pi/12 rad) substituted into the symbolic pose and
    # evaluated to 30 digits agree with the numeric chain.
    arm = demo_arm(stem)
    steps = [2, -3, 5, 1, -6, 7][: arm.dof]
    exact = [k * sp.pi / 12 for k in steps]
    user = [k * (15.0 if arm.angle_unit == "deg" else math.pi / 12) for k in steps]
    pose = symbolic_pose(arm, readings=exact)
    assert not pose.atoms(sp.Symbol)
    expected = np.array(pose.evalf(30), dtype=float)
    assert_pose_close(NumericChain(arm).pose(user), expected, arm.reach_scale())


@SETTINGS
@given(data=st.data())
def test_rotations_are_proper_orthonormal(data):
    # A rotation matrix is orthonormal with determinant +1 (common practice).
    arm, _ = data.draw(random_arm())
    poses = NumericChain(arm).poses(random_readings(data.draw, arm, count=5))
    rotations = poses[:, :3, :3]
    np.testing.assert_allclose(np.swapaxes(rotations, 1, 2) @ rotations, np.broadcast_to(np.eye(3), (5, 3, 3)),
                               rtol=0, atol=1e-12)
    np.testing.assert_allclose(np.linalg.det(rotations), 1.0, rtol=0, atol=1e-12)


@SETTINGS
@given(data=st.data(), count=st.integers(1, 7))
def test_batch_poses_equal_loop_of_single_poses(data, count):
    arm, _ = data.draw(random_arm())
    readings = random_readings(data.draw, arm, count=count)
    chain = NumericChain(arm)
    batch = chain.poses(readings)
    assert batch.shape == (count, 4, 4)
    looped = np.array([chain.pose(r) for r in readings])
    assert_pose_close(batch, looped, length_scale(arm, readings), tol=1e-15)


@SETTINGS
@given(data=st.data())
def test_frames_end_at_the_flange(data):
    # frames(): frame 0 is the base, frame n is the flange; flange @ tool is the tool pose.
    arm, _ = data.draw(random_arm())
    readings = random_readings(data.draw, arm, count=3)
    chain = NumericChain(arm)
    frames = chain.frames(readings)
    assert frames.shape == (3, arm.dof + 1, 4, 4)
    np.testing.assert_array_equal(frames[:, 0], np.broadcast_to(chain.base, (3, 4, 4)))
    assert_pose_close(frames[:, -1] @ chain.tool, chain.poses(readings), length_scale(arm, readings), tol=1e-14)


# -------------------------------------------------------------------------- exactness

def all_exact(matrix: sp.Matrix) -> bool:
    """True when every number in the matrix is an integer or a rational (pi stays a symbol)."""
    return not matrix.atoms(sp.Float) and all(isinstance(n, sp.Rational) for n in matrix.atoms(sp.Number))


def test_exactness_check_can_fail():
    # The check itself: a float pi/2 leaves cos(1.5707963267948966) = 6.1e-17 in the matrix.
    q = sp.Symbol("q")
    assert not all_exact(link_matrix("standard", 1, sp.Float(math.pi / 2), 0, q))
    assert all_exact(link_matrix("standard", 1, sp.pi / 2, 0, q))


@pytest.mark.parametrize("convention", ["standard", "modified"])
@pytest.mark.parametrize("angle_unit, quarter", [("deg", 90), ("rad", "pi/2"), ("rad", 1.5707963267948966)])
def test_symbolic_fk_with_quarter_turn_alpha_is_exact(convention, angle_unit, quarter):
    # cos(90 deg) is exactly 0 (common practice); the file's 90 deg, "pi/2" or the double nearest
    # pi/2 must all reach the symbolic model as pi/2, never as a float.
    arm = build_arm([joint("r", 0, quarter, 0.3), joint("r", 0.4, 0, 0), joint("p", 0, quarter, 0.1)],
                    convention=convention, angle_unit=angle_unit)
    pose = symbolic_pose(arm)
    assert all_exact(pose)
    link = symbolic_link(arm, arm.joints[0], sp.Symbol("q"))
    if convention == "standard":   # [SHV] sec. 3.2: A[2, 2] = cos(alpha), A[2, 1] = sin(alpha)
        assert (link[2, 2], link[2, 1]) == (0, 1)
    else:                          # [Craig] sec. 3.5: A[2, 2] = cos(alpha), A[1, 2] = -sin(alpha)
        assert (link[2, 2], link[1, 2]) == (0, -1)


@pytest.mark.parametrize("stem", DEMOS)
def test_demo_arms_symbolic_fk_is_exact(stem):
    assert all_exact(symbolic_pose(demo_arm(stem)))
