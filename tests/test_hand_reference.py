"""The hand-written reference solvers in benchmarks/hand/ (the yardstick of benchmarks/bench_speed.py).

They must be right before their speed means anything. Checks, on seeded poses of the demo arm
examples/benchtop6.toml (random readings within the limits):
- the hand solvers (pure Python, and C compiled with cffi) return the same solution sets as the
  committed generated solver generated/benchtop6/benchtop6_ik.py with limits="ignore" (readings
  compared modulo 360 deg within 1e-6 deg);
- every hand solution reproduces its pose through the forward kinematics, computed here as the
  textbook product of standard DH link transforms A_i = Rz(theta_i) Tz(d_i) Tx(a_i) Rx(alpha_i)
  (Spong, Hutchinson and Vidyasagar, Robot Modeling and Control, 1st ed., sec. 3.2; from memory),
  itself checked against ikgen.kinematics.NumericChain;
- the branches random poses never take: a NaN pose, a pose out of reach, a wrist-singular pose
  (joint 5 at 0) and a wrist centre on axis 1;
- their full builds (C benchtop6_hand_inverse_full, Python inverse_full: what the generated full
  call returns beside the readings) give the readings-only builds' readings bit for bit and the
  generated solver's labels, singular flags and within-limits flags, with its conditioning
  measures within 1e-9 (on random poses and on the singular ones above). The labels and measures
  are ikgen's own definitions (docs/solvers.md, docs/derivation.md section 4): this checks that the
  full-output yardstick returns the same outputs, not the definitions themselves.
Joint-1 candidates through the two shoulder sides, 2 elbows and 2 wrists give 8 solutions: the
usual count for a six-axis arm with a spherical wrist (Pieper 1968; common practice).
"""

from __future__ import annotations

import importlib.util
import shutil
import sys
from pathlib import Path

import numpy as np
import pytest

from helpers import EXAMPLES
from ikgen.armfile import load_arm
from ikgen.kinematics import NumericChain
from ikgen.verify import random_readings

ROOT = Path(__file__).resolve().parents[1]
HAND = ROOT / "benchmarks" / "hand"
GENERATED = ROOT / "generated" / "benchtop6" / "benchtop6_ik.py"
POSES = 3000
ANGLE_TOL = 1e-6       # deg, per reading, modulo 360
POSITION_TOL = 1e-9    # mm of round-trip error, on an arm about 800 mm across
ROTATION_TOL = 1e-12   # largest entry of R_fk - R_pose

# (a, alpha deg, d, theta offset deg) of examples/benchtop6.toml, and its tool translation
DH = [(25, -90, 220, 0), (260, 0, 0, -90), (20, -90, 0, 0), (0, 90, 240, 0), (0, -90, 0, 0), (0, 0, 70, 0)]
TOOL_Z = 95.0


def _import(path: Path, name: str):
    spec = importlib.util.spec_from_file_location(name, path)
    module = importlib.util.module_from_spec(spec)
    sys.modules[name] = module
    spec.loader.exec_module(module)
    return module


def textbook_forward(readings: np.ndarray) -> np.ndarray:
    """(N, 4, 4) tool poses as the plain product of standard DH link transforms, degrees in."""
    n = readings.shape[0]
    pose = np.broadcast_to(np.eye(4), (n, 4, 4)).copy()
    for k, (a, alpha, d, offset) in enumerate(DH):
        th, al = np.radians(readings[:, k] + offset), np.radians(alpha)
        ct, st, ca, sa = np.cos(th), np.sin(th), np.cos(al), np.sin(al)
        link = np.zeros((n, 4, 4))
        link[:, 0] = np.stack([ct, -st * ca, st * sa, a * ct], axis=1)
        link[:, 1] = np.stack([st, ct * ca, -ct * sa, a * st], axis=1)
        link[:, 2, 1:] = [sa, ca, d]
        link[:, 3, 3] = 1.0
        pose = pose @ link
    tool = np.eye(4)
    tool[2, 3] = TOOL_Z
    return pose @ tool


@pytest.fixture(scope="module")
def arm():
    return load_arm(EXAMPLES / "benchtop6.toml")


@pytest.fixture(scope="module")
def poses(arm) -> np.ndarray:
    readings = random_readings(arm, POSES, np.random.default_rng(20240611))
    return NumericChain(arm).poses(readings)


@pytest.fixture(scope="module")
def hand_py():
    return _import(HAND / "benchtop6_hand.py", "benchtop6_hand_reference")


@pytest.fixture(scope="module")
def generated():
    return _import(GENERATED, "benchtop6_ik_for_hand_reference")


def _hand_library(folder: Path, full: bool):
    """(ffi, lib) of the hand-written C solver's readings-only build, or of its full build."""
    if not any(shutil.which(cc) for cc in ("cc", "gcc")):
        pytest.skip("no C compiler on this machine")
    import cffi
    ffi = cffi.FFI()
    if full:
        ffi.cdef("typedef struct { double joints[6]; double conditioning[3]; signed char labels[3]; int singular; "
                 "int within_limits; } benchtop6_hand_solution;\n"
                 "int benchtop6_hand_inverse_full(const double pose[16], benchtop6_hand_solution q[8]);")
    else:
        ffi.cdef("int benchtop6_hand_inverse(const double pose[16], double q[8][6]);")
    name = "_benchtop6_hand_full_c" if full else "_benchtop6_hand_c"
    ffi.set_source(name, '#include "benchtop6_hand.h"', sources=[str(HAND / "benchtop6_hand.c")],
                   include_dirs=[str(HAND)], define_macros=[("BENCHTOP6_HAND_FULL", "1")] if full else [],
                   extra_compile_args=["-O2", "-std=c99", "-Wall", "-Werror"])
    module = _import(Path(ffi.compile(tmpdir=str(folder), verbose=False)), name)
    return module.ffi, module.lib   # the compiled module's own ffi: its struct type is the one lib takes


@pytest.fixture(scope="module")
def hand_c(tmp_path_factory):
    """The hand-written C solver as a function pose (4x4) -> list of 6-tuples, through cffi."""
    ffi, lib = _hand_library(tmp_path_factory.mktemp("hand_c"), full=False)
    out = ffi.new("double[8][6]")

    def inverse(pose) -> list[tuple]:
        flat = np.ascontiguousarray(pose, dtype=np.float64).reshape(16)
        count = lib.benchtop6_hand_inverse(ffi.cast("double *", ffi.from_buffer(flat)), out)
        return [tuple(out[k][j] for j in range(6)) for k in range(count)]

    return inverse


LABEL_WORDS = (("reach_forward", "reach_backward"), ("elbow_up", "elbow_down"), ("bend_positive", "bend_negative"))


@pytest.fixture(scope="module")
def hand_c_full(tmp_path_factory):
    """The hand-written C solver's full build as a function pose (4x4) -> list of (readings,
    labels as words, singular, conditioning, within_limits), through cffi."""
    ffi, lib = _hand_library(tmp_path_factory.mktemp("hand_c_full"), full=True)
    out = ffi.new("benchtop6_hand_solution[8]")

    def inverse(pose) -> list[tuple]:
        flat = np.ascontiguousarray(pose, dtype=np.float64).reshape(16)
        count = lib.benchtop6_hand_inverse_full(ffi.cast("double *", ffi.from_buffer(flat)), out)
        rows = []
        for s in out[0:count]:
            assert all(s.labels[k] in (1, -1) for k in range(3))
            rows.append((tuple(s.joints), tuple(LABEL_WORDS[k][0 if s.labels[k] > 0 else 1] for k in range(3)),
                         bool(s.singular), tuple(s.conditioning), bool(s.within_limits)))
        return rows

    return inverse


def unmatched(got: list, want: list) -> str:
    """'' when the two lists hold the same readings (modulo 360 deg, within ANGLE_TOL), else why not."""
    if len(got) != len(want):
        return f"{len(got)} solutions, expected {len(want)}"
    if not got:
        return ""
    gap = np.asarray(got)[:, None, :] - np.asarray(want)[None, :, :]
    close = np.all(np.abs((gap + 180.0) % 360.0 - 180.0) <= ANGLE_TOL, axis=2)
    free = list(range(len(want)))
    for i in range(len(got)):
        match = next((j for j in free if close[i, j]), None)
        if match is None:
            return f"solution {got[i]} is not among {want}"
        free.remove(match)
    return ""


def round_trip_gaps(solutions: list, pose: np.ndarray) -> tuple[float, float]:
    fk = textbook_forward(np.asarray(solutions, dtype=float))
    return (float(np.max(np.abs(fk[:, :3, 3] - pose[:3, 3]))), float(np.max(np.abs(fk[:, :3, :3] - pose[:3, :3]))))


def test_textbook_forward_matches_numeric_chain(arm):
    readings = random_readings(arm, 500, np.random.default_rng(3))
    assert np.max(np.abs(textbook_forward(readings) - NumericChain(arm).poses(readings))) < 1e-10


@pytest.mark.parametrize("which", ["python", "c"])
def test_same_solution_sets_as_generated_solver(which, poses, hand_py, request, generated):
    solve = hand_py.inverse if which == "python" else request.getfixturevalue("hand_c")
    counts = []
    for index, pose in enumerate(poses):
        rows = pose.tolist()
        got = solve(rows if which == "python" else pose)
        want = [s.joints for s in generated.inverse(rows, limits="ignore")]
        problem = unmatched(got, want)
        assert not problem, f"pose {index}: {problem}"
        counts.append(len(got))
    # the seeded poses are within the limits, so reachable: the usual 8 solutions, or 4 when the
    # other shoulder side is out of reach
    assert min(counts) >= 4 and set(counts) <= {4, 8} and counts.count(8) > POSES // 2


@pytest.mark.parametrize("which", ["python", "c"])
def test_every_hand_solution_reproduces_its_pose(which, poses, hand_py, request):
    solve = hand_py.inverse if which == "python" else request.getfixturevalue("hand_c")
    solutions, targets = [], []
    for pose in poses:
        found = solve(pose.tolist() if which == "python" else pose)
        assert found, "a pose from readings within the limits must be reachable"
        solutions += found
        targets += [pose] * len(found)
    fk, targets = textbook_forward(np.asarray(solutions)), np.asarray(targets)
    assert np.max(np.abs(fk[:, :3, 3] - targets[:, :3, 3])) < POSITION_TOL
    assert np.max(np.abs(fk[:, :3, :3] - targets[:, :3, :3])) < ROTATION_TOL
    readings = np.asarray(solutions)
    assert np.all(readings > -180.0) and np.all(readings <= 180.0)


@pytest.mark.parametrize("which", ["python", "c"])
def test_branches_that_random_poses_miss(which, arm, hand_py, request):
    solve = hand_py.inverse if which == "python" else request.getfixturevalue("hand_c")
    chain = NumericChain(arm)
    assert solve(np.full((4, 4), np.nan).tolist()) == []
    far = np.eye(4)
    far[:3, 3] = [2000.0, 0.0, 0.0]  # beyond reach: 25 + 260 + sqrt(20^2 + 240^2) + 165 < 700 mm
    assert solve(far.tolist()) == []

    wrist_singular = chain.pose([20.0, -30.0, 40.0, 35.0, 0.0, -50.0])
    found = solve(wrist_singular.tolist())
    assert len(found) == 8
    assert max(round_trip_gaps(found, wrist_singular)) < 1e-9

    # wrist centre on axis 1: x1 = -25 in the arm's plane, any orientation
    rotation = textbook_forward(np.array([[10.0, 20.0, 30.0, 40.0, 50.0, 60.0]]))[0, :3, :3]
    on_axis = np.eye(4)
    on_axis[:3, :3] = rotation
    on_axis[:3, 3] = np.array([0.0, 0.0, 500.0]) + 165.0 * rotation[:, 2]
    found = solve(on_axis.tolist())
    assert len(found) == 4
    assert max(round_trip_gaps(found, on_axis)) < 1e-9


def full_mismatch(full: list, lean: list, want: list) -> str:
    """'' when a full build's rows have the readings-only build's readings bit for bit and the
    generated solutions' labels, flags and (within 1e-9) conditioning measures, else why not."""
    if [tuple(row[0]) for row in full] != [tuple(q) for q in lean]:
        return "the full build's readings differ from the readings-only build's"
    if len(full) != len(want):
        return f"{len(full)} solutions, the generated solver {len(want)}"
    for k, (row, s) in enumerate(zip(full, want)):
        if tuple(row[1]) != tuple(s.config) or bool(row[2]) != bool(s.singular) or bool(row[4]) != bool(s.within_limits):
            return f"solution {k}: labels/flags {row[1:3]}, {row[4]} against {s.config}, {s.singular}, {s.within_limits}"
        if max(abs(a - b) for a, b in zip(row[3], s.conditioning)) > 1e-9:
            return f"solution {k}: conditioning {row[3]} against {s.conditioning}"
    return ""


@pytest.mark.parametrize("which", ["python", "c"])
def test_full_build_returns_what_the_generated_full_call_returns(which, arm, poses, hand_py, request, generated):
    full = hand_py.inverse_full if which == "python" else request.getfixturevalue("hand_c_full")
    lean = hand_py.inverse if which == "python" else request.getfixturevalue("hand_c")
    chain = NumericChain(arm)
    # 1000 random poses and one whose readings break a limit (joint 2 at 150 deg against its 120)
    outside = chain.pose([30.0, 150.0, 20.0, 10.0, 40.0, 5.0])
    found = {"outside": 0}
    for index, pose in enumerate([*poses[:1000], outside]):
        rows = pose.tolist()
        got = full(rows if which == "python" else pose)
        problem = full_mismatch(got, lean(rows if which == "python" else pose), generated.inverse(rows, limits="ignore"))
        assert not problem, f"pose {index}: {problem}"
        found["outside"] += sum(not row[4] for row in got)
    assert found["outside"] > 0
    # singular poses (joint 5 at 0: the solutions with that wrist; the wrist centre on axis 1: every
    # solution) flagged by both, the readings still the readings-only build's (the two solvers'
    # counts and free joints differ there)
    rotation = textbook_forward(np.array([[10.0, 20.0, 30.0, 40.0, 50.0, 60.0]]))[0, :3, :3]
    on_axis = np.eye(4)
    on_axis[:3, :3] = rotation
    on_axis[:3, 3] = np.array([0.0, 0.0, 500.0]) + 165.0 * rotation[:, 2]
    for pose, whole in ((chain.pose([20.0, -30.0, 40.0, 35.0, 0.0, -50.0]), False), (on_axis, True)):
        rows = pose.tolist()
        got = full(rows if which == "python" else pose)
        assert [tuple(row[0]) for row in got] == [tuple(q) for q in lean(rows if which == "python" else pose)]
        want = generated.inverse(rows, limits="ignore")
        for solutions, reading, flag in ((got, lambda row: row[0], lambda row: row[2]),
                                         (want, lambda s: s.joints, lambda s: s.singular)):
            bent = [flag(row) for row in solutions if whole or abs(reading(row)[4]) < 1e-6]
            assert bent and all(bent), (whole, solutions)
