"""Path files, straight lines and path solving (ikgen.path) and the ``path`` subcommand
(ikgen.path_command).

Outside references, each named beside its check:
- scipy.spatial.transform.Rotation and Slerp (scipy documentation: ``as_quat``/``from_quat`` are
  scalar-last (x, y, z, w); Slerp interpolates along the shortest arc at a constant angular
  rate) for the quaternion matrices and the slerp of ``straight_line``;
- the standard DH link transform A_i = Rz(theta) Tz(d) Tx(a) Rx(alpha) (Spong, Hutchinson,
  Vidyasagar, *Robot Modeling and Control*, 1st ed., sec. 3.2), written out here from the
  benchtop6 file read with tomllib, as this file's own forward kinematics;
- the reach of an arm whose shoulder and elbow axes are parallel: the wrist centre lies at most
  a2 + sqrt(a3^2 + d4^2) from the shoulder axis (triangle inequality, common practice);
- a spherical wrist is singular exactly when its middle joint is at 0 or a half turn (axes 4
  and 6 aligned): Spong, Hutchinson, Vidyasagar, 1st ed., ch. 4 (wrist singularities), from
  memory; the generated solver documents its wrist measure as |sin| of the middle wrist joint;
- PNG signature and IHDR layout: ISO/IEC 15948 (PNG), sec. 5.2 and 11.2.2, from memory.

The smooth test paths come from seeded random joint trajectories; they are test data, and every
expected value is derived from them with the references above, not from ikgen.
"""

from __future__ import annotations

import argparse
import contextlib
import csv
import io
import math
import struct
import tomllib

import numpy as np
import pytest
from scipy.spatial.transform import Rotation, Slerp

from helpers import EXAMPLES, demo_arm
from ikgen.errors import IkgenError
from ikgen.path import (CHANGE_NEEDED, CONFIGURATION_CHANGE, CROSSES_SINGULARITY, LABEL_CHANGE, LEAVES_WORKSPACE,
                        NEAR_SINGULARITY, SOLVED, STOPPED, SWITCHED, UNREACHABLE, PathFileError,
                        parse_path_text, polyline, pose_matrix, quaternion_matrix, read_path_file, solve_path,
                        straight_line)
from ikgen.path_command import register, solver_module

BENCHTOP = EXAMPLES / "benchtop6.toml"
LINE_FILE = EXAMPLES / "benchtop6_line.csv"
ARM_DATA = tomllib.loads(BENCHTOP.read_text(encoding="utf-8"))


# ------------------------------------------------------------------------ test-side references

def to_scipy(q_wxyz) -> Rotation:
    w, x, y, z = q_wxyz
    return Rotation.from_quat([x, y, z, w])          # scipy: scalar last


def quaternion_wxyz(matrix) -> np.ndarray:
    x, y, z, w = Rotation.from_matrix(matrix).as_quat()
    return np.array([w, x, y, z])


def dh_forward(readings_deg) -> np.ndarray:
    """benchtop6's tool pose from its file: standard DH (Spong et al., 1st ed., sec. 3.2)."""
    assert "base" not in ARM_DATA and set(ARM_DATA["tool"]) == {"translation"}
    assert ARM_DATA["arm"]["convention"] == "standard" and ARM_DATA["arm"]["angle_unit"] == "deg"
    pose = np.eye(4)
    for joint, reading in zip(ARM_DATA["joint"], readings_deg):
        assert joint["type"] == "revolute"
        th = math.radians(joint["theta"] + joint.get("offset", 0) + joint.get("direction", 1) * reading)
        al = math.radians(joint["alpha"])
        a, d = joint["a"], joint["d"]
        ct, st, ca, sa = math.cos(th), math.sin(th), math.cos(al), math.sin(al)
        pose = pose @ np.array([[ct, -st * ca, st * sa, a * ct],
                                [st, ct * ca, -ct * sa, a * st],
                                [0, sa, ca, d],
                                [0, 0, 0, 1]])
    tool = np.eye(4)
    tool[:3, 3] = ARM_DATA["tool"]["translation"]
    return pose @ tool


def dh_poses(trajectory) -> np.ndarray:
    return np.array([dh_forward(q) for q in trajectory])


def limits_deg() -> np.ndarray:
    return np.array([joint.get("limits", [-180, 180]) for joint in ARM_DATA["joint"]], dtype=float)


def assert_same_pose(a, b, position=1e-6, angle=1e-8):
    assert np.linalg.norm(a[:3, 3] - b[:3, 3]) < position
    assert (Rotation.from_matrix(a[:3, :3]).inv() * Rotation.from_matrix(b[:3, :3])).magnitude() < angle


@pytest.fixture(scope="module")
def module():
    """benchtop6's generated Python solver, in memory."""
    return solver_module(demo_arm("benchtop6"))


# -------------------------------------------------------------------- quaternions, straight lines

def test_quaternion_matrix_matches_scipy():
    rng = np.random.default_rng(11)
    for q in rng.normal(size=(200, 4)):
        q /= np.linalg.norm(q)
        np.testing.assert_allclose(quaternion_matrix(q), to_scipy(q).as_matrix(), atol=1e-14)


def random_pose(rng) -> np.ndarray:
    return pose_matrix(rng.uniform(-500, 500, 3), Rotation.random(random_state=rng).as_quat()[[3, 0, 1, 2]])


def test_straight_line_endpoints_and_count():
    rng = np.random.default_rng(5)
    start, end = random_pose(rng), random_pose(rng)
    for steps in (2, 3, 17):
        poses = straight_line(start, end, steps)
        assert poses.shape == (steps, 4, 4)
        assert np.array_equal(poses[0], start) and np.array_equal(poses[-1], end)
    with pytest.raises(ValueError):
        straight_line(start, end, 1)


def test_straight_line_matches_scipy_slerp_and_linear_position():
    """Positions linear in t; rotations equal scipy's Slerp at every t (both take the short arc)."""
    rng = np.random.default_rng(7)
    for _ in range(20):
        start, end = random_pose(rng), random_pose(rng)
        steps = 9
        poses = straight_line(start, end, steps)
        t = np.linspace(0, 1, steps)
        reference = Slerp([0.0, 1.0], Rotation.from_matrix(np.array([start[:3, :3], end[:3, :3]])))(t)
        for k in range(steps):
            expected_p = start[:3, 3] + t[k] * (end[:3, 3] - start[:3, 3])
            np.testing.assert_allclose(poses[k, :3, 3], expected_p, atol=1e-9)
            gap = (reference[k].inv() * Rotation.from_matrix(poses[k, :3, :3])).magnitude()
            assert gap < 1e-9
            np.testing.assert_allclose(poses[k, 3], [0, 0, 0, 1])
        # constant angular rate: equal angles between consecutive poses (Slerp's defining property)
        rotations = Rotation.from_matrix(poses[:, :3, :3])
        angles = [(rotations[k].inv() * rotations[k + 1]).magnitude() for k in range(steps - 1)]
        np.testing.assert_allclose(angles, angles[0], atol=1e-9)


def test_straight_line_midpoint_with_the_quaternion_sign_flipped():
    """q and -q are one rotation: the midpoint is on the short arc either way (scipy Slerp)."""
    q0 = np.array([0.0, 1.0, 0.0, 0.0])
    q1 = np.array([0, math.cos(math.radians(10)), math.sin(math.radians(10)), 0])  # then 20 deg about z
    for sign in (1.0, -1.0):
        poses = straight_line(pose_matrix([0, 0, 0], q0), pose_matrix([10, 0, 0], sign * q1), 3)
        reference = Slerp([0, 1], Rotation.concatenate([to_scipy(q0), to_scipy(q1)]))([0.5])[0]
        assert (reference.inv() * Rotation.from_matrix(poses[1, :3, :3])).magnitude() < 1e-12
        np.testing.assert_allclose(poses[1, :3, 3], [5, 0, 0])


def test_polyline_passes_every_row():
    rng = np.random.default_rng(3)
    rows = np.array([random_pose(rng) for _ in range(4)])
    poses, origin = polyline(rows, 5)
    assert len(poses) == 3 * 4 + 1 == len(origin)
    for r in range(4):
        np.testing.assert_array_equal(poses[4 * r], rows[r])


# ------------------------------------------------------------------------------ path files

GOOD = """\ufeff# a comment line
x [mm], y [mm], z [mm], qw, qx, qy, qz   # header with units

360, -100, 120, 0, 1, 0, 0      # first
360, 100, 120, 0, 0.98480775, 0.17364818, 0
"""


def test_read_the_example_file_and_a_reordered_copy():
    parsed = read_path_file(LINE_FILE, "mm")
    assert len(parsed.poses) == 2 and parsed.length_unit == "mm"
    np.testing.assert_allclose(parsed.positions, [[360, -100, 120], [360, 100, 120]])
    # row 2's quaternion (0, cos 10 deg, sin 10 deg, 0) = a half turn about x, then 20 deg about world z
    expected = (Rotation.from_euler("z", 20, degrees=True) * Rotation.from_euler("x", 180, degrees=True)).as_matrix()
    np.testing.assert_allclose(parsed.poses[1][:3, :3], expected, atol=1e-7)
    good = parse_path_text(GOOD, "good.csv", "mm")
    np.testing.assert_allclose(good.poses, parsed.poses, atol=1e-12)
    assert good.lines == (4, 5)
    reordered = parse_path_text("qz,qy,qx,qw,Z,Y,X\n0,0,1,0,120,-100,360\n", "r.csv")
    np.testing.assert_allclose(reordered.poses[0], good.poses[0])


BAD_FILES = [
    ("", ["bad.csv:", "the file is empty", "expected a header line"]),
    ("# only a comment\n\n", ["the file is empty"]),
    ("x,y,z,qw,qx,qy,qz\n", ["bad.csv:1:", "no poses after the header"]),
    ("360,0,0,0,1,0,0\n", ["bad.csv:1:", "holds numbers", "expected a header line"]),
    ("x,y,z,w,qx,qy,qz\n1,2,3,1,0,0,0\n", ["bad.csv:1:", "header field 4", "unknown column 'w'", "did you mean 'qw'"]),
    ("x,y,z,qw,qx,qy,qz,x\n", ["bad.csv:1:", "column 'x' is named twice"]),
    ("x,y,z,qw,qx,qy\n", ["bad.csv:1:", "missing column(s) qz"]),
    ("x [m],y [m],z [m],qw,qx,qy,qz\n0.3,0,0.1,1,0,0,0\n", ["bad.csv:1:", "[m]", "the arm's lengths are in mm"]),
    ("x,y,z,qw [deg],qx,qy,qz\n", ["header field 4", "has a unit"]),
    ("x,y,z,qw,qx,qy,qz\n# c\n360,100,120,0,1,0\n", ["bad.csv:3:", "6 field(s)", "expected 7"]),
    ("x,y,z,qw,qx,qy,qz\n360,1O0,120,0,1,0,0\n", ["bad.csv:2:", "column 'y' (field 2)", "'1O0' is not a number"]),
    ("x,y,z,qw,qx,qy,qz\n360,100,nan,0,1,0,0\n", ["bad.csv:2:", "column 'z' (field 3)", "not a finite number"]),
    ("x,y,z,qw,qx,qy,qz\n360,100,inf,0,1,0,0\n", ["bad.csv:2:", "not a finite number"]),
    ("x,y,z,qw,qx,qy,qz\n360,100,,0,1,0,0\n", ["bad.csv:2:", "empty field"]),
    ("x,y,z,qw,qx,qy,qz\n1,2,3,1,0,0,0\n360,100,120,1,0,0,1\n",
     ["bad.csv:3:", "quaternion (1, 0, 0, 1) has length 1.41421", "expected a unit quaternion"]),
    ("x,y,z,qw,qx,qy,qz\n1,2,3,0,0,0,0\n", ["bad.csv:2:", "has length 0"]),
]


@pytest.mark.parametrize("text,pieces", BAD_FILES, ids=[f"bad{k}" for k in range(len(BAD_FILES))])
def test_bad_path_text_is_refused_with_place_and_expectation(text, pieces):
    with pytest.raises(PathFileError) as caught:
        parse_path_text(text, "bad.csv", "mm")
    message = str(caught.value)
    for piece in pieces:
        assert piece in message, message
    assert caught.value.exit_code == 2


def test_unreadable_path_files(tmp_path):
    with pytest.raises(PathFileError, match="file not found"):
        read_path_file(tmp_path / "missing.csv")
    with pytest.raises(PathFileError, match="is a directory"):
        read_path_file(tmp_path)
    (tmp_path / "nul.csv").write_bytes(b"x,y\x00")
    with pytest.raises(PathFileError, match="binary data"):
        read_path_file(tmp_path / "nul.csv")
    (tmp_path / "latin.csv").write_bytes("x,y,z,qw,qx,qy,qz # caf\u00e9\n".encode("latin-1"))
    with pytest.raises(PathFileError, match="not valid UTF-8"):
        read_path_file(tmp_path / "latin.csv")


# ------------------------------------------------------------------------------ path solving

def smooth_trajectory(rng, count=60) -> np.ndarray:
    """A seeded smooth joint path away from the singular sets: a base reading plus three sines per
    joint; |q5| stays in [20, 110] deg (wrist), the elbow stays away from stretch and the wrist
    centre stays > 120 mm from axis 1 (both checked with dh_forward)."""
    lim = limits_deg()
    t = np.linspace(0, 1, count)[:, None]
    while True:
        base = lim[:, 0] + (0.2 + 0.6 * rng.random(6)) * (lim[:, 1] - lim[:, 0])
        path = base + sum(rng.uniform(-6, 6, 6) * np.sin(2 * math.pi * f * t + rng.uniform(0, 2 * math.pi, 6))
                          for f in (0.5, 1.0, 1.5))
        if np.any(path < lim[:, 0] + 5) or np.any(path > lim[:, 1] - 5):
            continue
        if np.any(np.abs(path[:, 4]) < 20) or np.any(np.abs(path[:, 4]) > 110):
            continue
        ok = True
        for q in path:
            frames = partial_frames(q)
            wrist = frames[4][:3, 3]                       # origin of frame 4: the wrist centre
            if math.hypot(wrist[0], wrist[1]) < 120:
                ok = False
                break
            upper = frames[2][:3, 3] - frames[1][:3, 3]
            fore = wrist - frames[2][:3, 3]
            # sine of the elbow angle, measured at the elbow between upper arm and shoulder-wrist line
            if np.linalg.norm(np.cross(upper, fore)) / (np.linalg.norm(upper) * np.linalg.norm(fore)) < 0.2:
                ok = False
                break
        if ok:
            return path


def partial_frames(q) -> list[np.ndarray]:
    """Frames 0..6 of benchtop6 (standard DH, Spong et al. 1st ed. sec. 3.2)."""
    frames = [np.eye(4)]
    for joint, reading in zip(ARM_DATA["joint"], q):
        th = math.radians(joint["theta"] + reading)
        al = math.radians(joint["alpha"])
        a, d = joint["a"], joint["d"]
        ct, st, ca, sa = math.cos(th), math.sin(th), math.cos(al), math.sin(al)
        frames.append(frames[-1] @ np.array([[ct, -st * ca, st * sa, a * ct], [st, ct * ca, -ct * sa, a * st],
                                             [0, sa, ca, d], [0, 0, 0, 1]]))
    return frames


@pytest.mark.parametrize("seed", [1, 2, 3, 4, 5])
def test_smooth_path_recovers_the_source_trajectory(module, seed):
    rng = np.random.default_rng(seed)
    source = smooth_trajectory(rng)
    start = source[0] + rng.uniform(-3, 3, 6)      # the arm is near, not at, the first pose
    result = solve_path(module, dh_poses(source), start)
    assert result.status == [SOLVED] * len(source)
    assert result.events == []
    np.testing.assert_allclose(result.joints, source, atol=1e-6)
    source_step = np.abs(np.diff(source, axis=0))
    np.testing.assert_allclose(result.steps[1:], source_step, atol=1e-6)
    assert np.all(np.isnan(result.steps[0]))
    assert np.nanmax(result.steps) <= 2.0 * source_step.max()
    np.testing.assert_allclose(result.approach, np.abs(source[0] - start), atol=1e-6)
    assert result.complete and result.kept == result.final


def test_path_leaving_the_workspace_is_reported_at_the_right_step(module):
    """A horizontal line outward, tool pointing down: the wrist centre (165 mm above the tool point)
    leaves the reach a2 + sqrt(a3^2 + d4^2) of the shoulder axis (common practice)."""
    joints = ARM_DATA["joint"]
    a1, d1, a2, a3, d4 = joints[0]["a"], joints[0]["d"], joints[1]["a"], joints[2]["a"], joints[3]["d"]
    wrist_offset = joints[5]["d"] + ARM_DATA["tool"]["translation"][2]
    reach = a2 + math.hypot(a3, d4)
    down = [0, 1, 0, 0]                            # a half turn about x: tool z along -z
    poses = straight_line(pose_matrix([360, 0, 120], down), pose_matrix([760, 0, 120], down), 21)
    centre = poses[:, :3, 3] + np.array([0, 0, wrist_offset])
    shoulder = np.array([a1, 0, d1])                # the front shoulder axis point, for y = 0 and x > 0
    distance = np.linalg.norm(centre - shoulder, axis=1)
    outside = distance > reach
    assert outside.any() and not outside[0]
    first = int(np.argmax(outside))
    assert np.all(outside[first:])                 # moving outward: once out, out for good
    assert np.min(np.abs(distance - reach)) > 1.0  # no step sits on the boundary
    result = solve_path(module, poses, [0, 30, 0, 0, 60, 0])
    leaving = result.events_of(LEAVES_WORKSPACE)
    assert leaving[0].index == first
    assert [e.index for e in leaving] == list(range(first, len(poses)))
    assert result.status[:first] == [SOLVED] * first
    assert result.status[first:] == [UNREACHABLE] * (len(poses) - first)
    assert np.all(np.isnan(result.joints[first:])) and np.all(np.isfinite(result.joints[:first]))
    for k in range(first):
        assert_same_pose(dh_forward(result.joints[k]), poses[k])


def elbow_past_its_limit() -> tuple[np.ndarray, int]:
    """A joint path whose elbow (joint 3) runs past its upper limit: (trajectory, first index past it)."""
    source = np.tile(np.array([0.0, 20.0, 120.0, 0.0, 40.0, 0.0]), (21, 1))
    source[:, 2] = np.linspace(120, 160, 21)
    upper = limits_deg()[2, 1]
    return source, int(np.argmax(source[:, 2] > upper))


def test_configuration_that_cannot_be_kept_stops_the_path(module):
    """Past the elbow limit, the kept configuration's one solution (the source reading) is out of
    limits: the path needs a configuration change there and, by default, stops."""
    source, first = elbow_past_its_limit()
    assert 0 < first < len(source) - 1
    result = solve_path(module, dh_poses(source), source[0])
    [event] = result.events_of(CONFIGURATION_CHANGE)
    assert event.index == first and "stops here" in event.detail
    assert result.stopped_at == first
    assert result.status == [SOLVED] * first + [CHANGE_NEEDED] + [STOPPED] * (len(source) - first - 1)
    np.testing.assert_allclose(result.joints[:first], source[:first], atol=1e-6)
    assert np.all(np.isnan(result.joints[first:]))
    assert not result.complete


def test_configuration_change_with_switch_goes_on_in_the_new_configuration(module):
    source, first = elbow_past_its_limit()
    poses = dh_poses(source)
    result = solve_path(module, poses, source[0], on_change="switch")
    [event] = result.events_of(CONFIGURATION_CHANGE)
    assert event.index == first and "switched" in event.detail
    assert result.status[first] == SWITCHED and result.status.count(SWITCHED) == 1
    assert result.solved == len(source)
    assert result.configs[first] != result.configs[first - 1]
    assert result.final != result.kept
    lim = limits_deg()
    for k in range(len(source)):
        assert_same_pose(dh_forward(result.joints[k]), poses[k])
        assert np.all(result.joints[k] >= lim[:, 0] - 1e-6) and np.all(result.joints[k] <= lim[:, 1] + 1e-6)


def wrist_flip_source(values) -> np.ndarray:
    source = np.tile(np.array([10.0, 20.0, 30.0, 40.0, 0.0, 50.0]), (len(values), 1))
    source[:, 4] = values
    return source


def test_path_through_a_wrist_singularity_is_reported(module):
    """Joint 5 goes from +6 to -6 deg (never exactly 0): the wrist passes its singular set between
    the two steps around 0. Near-singular steps are those with |sin q5| < 0.01."""
    source = wrist_flip_source(np.linspace(6, -6, 24))
    assert not np.any(source[:, 4] == 0)
    poses = dh_poses(source)
    result = solve_path(module, poses, source[0], singular_threshold=0.01)
    crossing = int(np.argmax(np.sign(source[:, 4]) != np.sign(source[0, 4])))
    [event] = result.events_of(CROSSES_SINGULARITY)
    assert event.index == crossing and event.branches == ("wrist_bend",)
    near = {e.index for e in result.events_of(NEAR_SINGULARITY)}
    assert near == set(np.nonzero(np.abs(np.sin(np.radians(source[:, 4]))) < 0.01)[0])
    assert all(e.branches == ("wrist_bend",) for e in result.events_of(NEAR_SINGULARITY))
    assert result.events_of(CONFIGURATION_CHANGE) == [] and result.events_of(LABEL_CHANGE) == []
    # the configuration is kept: from the crossing on, the wrist's twin solution (q4 and q6 a half
    # turn away, q5 negated), which reproduces the same poses
    np.testing.assert_allclose(result.joints[:crossing], source[:crossing], atol=1e-6)
    twin = source[crossing:].copy()
    twin[:, 3] -= 180.0
    twin[:, 4] *= -1.0
    twin[:, 5] -= 180.0
    np.testing.assert_allclose(result.joints[crossing:], twin, atol=1e-6)
    for k in range(len(source)):
        assert_same_pose(dh_forward(result.joints[k]), poses[k])
    assert result.largest_step_at[3] == crossing and result.largest_step[3] == pytest.approx(180.0)


def test_path_through_an_exactly_singular_pose(module):
    """A step exactly at q5 = 0: the solver keeps the caller's (previous) q4 there, the pose is
    reproduced, and exactly one crossing is reported, at that step or the next."""
    source = wrist_flip_source(np.linspace(4, -4, 9))
    zero = int(np.nonzero(source[:, 4] == 0)[0][0])
    poses = dh_poses(source)
    result = solve_path(module, poses, source[0])
    assert result.solved == len(source) and result.events_of(CONFIGURATION_CHANGE) == []
    crossings = result.events_of(CROSSES_SINGULARITY)
    assert len(crossings) == 1 and crossings[0].index in (zero, zero + 1)
    assert result.joints[zero, 3] == pytest.approx(result.joints[zero - 1, 3], abs=1e-9)
    assert abs(result.joints[zero, 4]) < 1e-6
    for k in range(len(source)):
        assert_same_pose(dh_forward(result.joints[k]), poses[k])


def test_solve_path_checks_its_arguments(module):
    poses = dh_poses([[0, 30, 0, 0, 60, 0]])
    with pytest.raises(ValueError):
        solve_path(module, poses[0], [0] * 6)
    with pytest.raises(ValueError):
        solve_path(module, poses, [0] * 5)
    with pytest.raises(ValueError):
        solve_path(module, poses, [0] * 6, weights=[0] * 6)
    with pytest.raises(ValueError):
        solve_path(module, poses, [0] * 6, on_change="later")


def test_weights_change_which_solution_is_nearest(module):
    """Two solutions of one pose differing mostly in joints 4 and 6 (the wrist twins): a start
    between them picks the one that is nearer under the given weights."""
    source = np.array([[10.0, 20.0, 30.0, 60.0, 50.0, 20.0]])
    twin = np.array([10.0, 20.0, 30.0, -120.0, -50.0, -160.0])
    assert_same_pose(dh_forward(twin), dh_forward(source[0]))      # the twin is one pose (wrist flip)
    start = np.array([10.0, 20.0, 30.0, 60.0, -50.0, -160.0])      # joint 4 as source, joints 5, 6 as twin
    heavy_4 = solve_path(module, dh_poses(source), start, weights=[1, 1, 1, 100, 1, 1])
    heavy_6 = solve_path(module, dh_poses(source), start, weights=[1, 1, 1, 1, 1, 100])
    np.testing.assert_allclose(heavy_4.joints[0], source[0], atol=1e-6)
    np.testing.assert_allclose(heavy_6.joints[0], twin, atol=1e-6)


# ------------------------------------------------------------------------------ command line

def run(argv) -> tuple[int, str, str]:
    """The ``path`` subcommand through a small parser built with register(), handling errors the
    way ikgen.cli.main does ('ikgen: error: ...', the error's exit code, no traceback)."""
    parser = argparse.ArgumentParser(prog="ikgen")
    register(parser.add_subparsers(dest="command"))
    stdout, stderr = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(stdout), contextlib.redirect_stderr(stderr):
        try:
            args = parser.parse_args(argv)
            code = args.run(args)
        except IkgenError as exc:
            stderr.write(f"ikgen: error: {exc}\n")
            code = exc.exit_code
        except SystemExit as exc:                  # argparse usage errors
            code = exc.code
    return code, stdout.getvalue(), stderr.getvalue()


def read_joint_csv(path) -> tuple[list[str], np.ndarray]:
    with open(path, newline="", encoding="utf-8") as stream:
        rows = list(csv.reader(stream))
    return rows[0], np.array([[float(v) for v in row] for row in rows[1:]])


def png_size(data: bytes) -> tuple[int, int]:
    assert data[:8] == b"\x89PNG\r\n\x1a\n"                       # ISO/IEC 15948 sec. 5.2
    assert data[12:16] == b"IHDR"
    return struct.unpack(">II", data[16:24])


@pytest.fixture(scope="module")
def example_run(tmp_path_factory):
    folder = tmp_path_factory.mktemp("path")
    code, stdout, stderr = run(["path", str(BENCHTOP), str(LINE_FILE), "--line", "41", "--start", "0,30,0,0,60,0",
                                "--out", str(folder / "joints.csv"), "--plot", str(folder / "joints.png")])
    return code, stdout, stderr, folder


def test_cli_writes_the_joint_path_csv(example_run):
    code, stdout, stderr, folder = example_run
    assert code == 0, stderr
    header, table = read_joint_csv(folder / "joints.csv")
    assert header == ["step"] + [f"{j['name']} [deg]" for j in ARM_DATA["joint"]]
    assert table.shape == (41, 7)
    np.testing.assert_array_equal(table[:, 0], np.arange(1, 42))
    # every row reproduces the straight line: linear positions, scipy Slerp orientations
    rows = [[360, -100, 120, 0, 1, 0, 0], [360, 100, 120, 0, 0.98480775, 0.17364818, 0]]
    p0, p1 = np.array(rows[0][:3], float), np.array(rows[1][:3], float)
    slerp = Slerp([0, 1], Rotation.concatenate([to_scipy(r[3:]) for r in rows]))
    for k, t in enumerate(np.linspace(0, 1, 41)):
        pose = dh_forward(table[k, 1:])
        np.testing.assert_allclose(pose[:3, 3], p0 + t * (p1 - p0), atol=1e-5)
        assert (slerp([t])[0].inv() * Rotation.from_matrix(pose[:3, :3])).magnitude() < 1e-8
    assert "41 of 41 steps" in stdout and "events         none" in stdout
    assert f"wrote {folder / 'joints.csv'}" in stdout


def test_cli_plot_is_a_non_empty_deterministic_png(example_run, tmp_path):
    code, _, stderr, folder = example_run
    assert code == 0, stderr
    data = (folder / "joints.png").read_bytes()
    width, height = png_size(data)
    assert width == 900 and height > 300 and len(data) > 10_000
    again = tmp_path / "again.png"
    code, _, _ = run(["path", str(BENCHTOP), str(LINE_FILE), "--line", "41", "--start", "0,30,0,0,60,0",
                      "--plot", str(again)])
    assert code == 0 and again.read_bytes() == data


def write_path(path, poses) -> None:
    lines = ["x [mm], y [mm], z [mm], qw, qx, qy, qz"]
    for pose in poses:
        lines.append(", ".join(repr(float(v)) for v in list(pose[:3, 3]) + list(quaternion_wxyz(pose[:3, :3]))))
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")


def test_cli_reports_events_and_exits_1_when_steps_are_unsolved(tmp_path):
    source, first = elbow_past_its_limit()
    write_path(tmp_path / "elbow.csv", dh_poses(source))
    out = tmp_path / "j.csv"
    code, stdout, stderr = run(["path", str(BENCHTOP), str(tmp_path / "elbow.csv"), "--start",
                                ",".join(str(v) for v in source[0]), "--out", str(out)])
    assert code == 1
    assert f"{first} of {len(source)} steps; stopped at step {first + 1}" in stdout
    assert f"step {first + 1}: needs a configuration change" in stdout
    assert "not solved" in stderr and "Traceback" not in stderr
    header, table = read_joint_csv(out)
    assert np.all(np.isfinite(table[:first, 1:])) and np.all(np.isnan(table[first:, 1:]))


def test_cli_wrist_crossing_shows_in_the_summary(tmp_path):
    source = wrist_flip_source(np.linspace(6, -6, 24))
    write_path(tmp_path / "wrist.csv", dh_poses(source))
    code, stdout, stderr = run(["path", str(BENCHTOP), str(tmp_path / "wrist.csv"), "--start",
                                ",".join(str(v) for v in source[0]), "--max-step", "30"])
    assert code == 0, stderr
    assert "step 13: crosses a singularity (wrist_bend)" in stdout
    assert "steps 12-13: near a singularity (wrist_bend)" in stdout
    assert "step 13: large joint step" in stdout


BAD_CLI = [
    ("x,y,z,qw,qx,qy,qz\n360,100,120,1,0,0,1\n", [], ["bad.csv:2:", "unit quaternion"]),
    ("x,y,z,qw,qx,qy,qz\n360,100,120,0,1,0\n", [], ["bad.csv:2:", "6 field(s)"]),
    ("x,y,z,qw,qx,qy,qz\n360,100,nan,0,1,0,0\n", [], ["bad.csv:2:", "column 'z'", "not a finite number"]),
    ("", [], ["bad.csv:", "the file is empty"]),
    ("x,y,z,qw,qx,qy,qz\n360,100,120,0,1,0,0\n", ["--line", "5"], ["--line needs at least two rows"]),
    ("x,y,z,qw,qx,qy,qz\n360,100,120,0,1,0,0\n", ["--start", "0,30,0,0,60"], ["--start: got 5 values, expected 6"]),
    ("x,y,z,qw,qx,qy,qz\n360,100,120,0,1,0,0\n", ["--start", "0,30,x,0,60,0"], ["--start: value 3 'x'"]),
    ("x,y,z,qw,qx,qy,qz\n360,100,120,0,1,0,0\n", ["--weights", "1,1,1,1,1,-1"], ["--weights: value 6", ">= 0"]),
]


@pytest.mark.parametrize("text,extra,pieces", BAD_CLI, ids=[f"cli{k}" for k in range(len(BAD_CLI))])
def test_cli_bad_input_exits_2_and_writes_nothing(tmp_path, text, extra, pieces):
    bad = tmp_path / "bad.csv"
    bad.write_text(text, encoding="utf-8")
    outputs = tmp_path / "out"
    outputs.mkdir()            # outputs go into existing folders only (a missing one is refused)
    argv = ["path", str(BENCHTOP), str(bad), "--out", str(outputs / "j.csv"), "--plot", str(outputs / "j.png")]
    argv += extra if "--start" in extra else ["--start", "0,30,0,0,60,0"] + extra
    code, stdout, stderr = run(argv)
    assert code == 2
    assert stderr.startswith("ikgen: error: ")
    for piece in pieces:
        assert piece in stderr, stderr
    assert "Traceback" not in stderr and stdout == ""
    assert not any(outputs.iterdir())


def test_cli_refuses_an_output_that_is_a_folder_or_clashes(tmp_path):
    code, _, stderr = run(["path", str(BENCHTOP), str(LINE_FILE), "--start", "0,30,0,0,60,0", "--out", str(tmp_path)])
    assert code == 2 and "is a directory" in stderr
    code, _, stderr = run(["path", str(BENCHTOP), str(LINE_FILE), "--start", "0,30,0,0,60,0",
                           "--out", str(tmp_path / "j.png")])
    assert code == 2 and "does not end in .csv" in stderr
    assert list(tmp_path.iterdir()) == []


def test_cli_negative_start_readings_and_bad_line_count(tmp_path):
    code, stdout, stderr = run(["path", str(BENCHTOP), str(LINE_FILE), "--start", "-10,30,0,0,60,0"])
    assert code == 0, stderr
    code, _, stderr = run(["path", str(BENCHTOP), str(LINE_FILE), "--start", "0,30,0,0,60,0", "--line", "1"])
    assert code == 2 and "less than 2" in stderr


def test_through_ikgen_cli_main_once_wired(tmp_path):
    from ikgen import cli
    parser = cli.build_parser()
    names = set()
    for action in parser._subparsers._group_actions:
        names.update(getattr(action, "choices", {}) or {})
    if "path" not in names:
        pytest.skip("'path' is not yet a subcommand of ikgen.cli (register() not wired into ikgen.commands)")
    out = tmp_path / "j.csv"
    stdout, stderr = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(stdout), contextlib.redirect_stderr(stderr):
        code = cli.main(["path", str(BENCHTOP), str(LINE_FILE), "--line", "5", "--start", "0,30,0,0,60,0",
                         "--out", str(out)])
        bad = cli.main(["path", str(BENCHTOP), str(tmp_path / "missing.csv"), "--start", "0,30,0,0,60,0"])
    assert code == 0 and read_joint_csv(out)[1].shape == (5, 7)
    assert bad == 2 and "ikgen: error:" in stderr.getvalue() and "file not found" in stderr.getvalue()
