"""Seven-axis arms with one joint given: derivation, solvers, the choice helpers and path solving.

References, named beside each check:

- scipy.optimize.least_squares (a general-purpose numerical solver) started from many random
  joint vectors with the given joint held: every solution it converges to must be among the
  generated solver's;
- numpy's SVD of the 6x7 geometric Jacobian (columns z x (p - o) and z, Siciliano, Sciavicco,
  Villani and Oriolo, *Robotics: Modelling, Planning and Control*, 2009, sec. 3.1.3): its null
  space has dimension 1 at generic poses, and the self-motion of the solutions as the given joint
  turns lies in it (common practice: the self-motion of a redundant arm keeps the pose fixed);
- the DH link transform (Craig, *Introduction to Robotics*, 3rd ed., sec. 3.4) through
  ikgen.kinematics, which tests/test_kinematics.py checks against worked examples.

The arm under test is the demo cellreach7 (a shoulder whose three axes meet, an elbow, a wrist whose
three axes meet); the generated code is the solver under test.
"""

from __future__ import annotations

import dataclasses
import subprocess
import sys

import numpy as np
import pytest

import shared
from helpers import ROOT, demo_arm
from ikgen.backends import c as c_backend
from ikgen.cbuild import compile_solver
from ikgen.engine import derive, given_choices
from ikgen.engine.targets import jacobian_of
from ikgen.errors import StructureError
from ikgen.generate import load_module
from ikgen.kinematics import NumericChain
from ikgen.verify import verify

_CACHE: dict = {}


def solvers(given: int = 3):
    """(arm, Python module, batch module, C double, C float) with joint ``given`` given, built once."""
    if given not in _CACHE:
        arm = dataclasses.replace(demo_arm("cellreach7"), given_joint=given)
        module = load_module(shared.python_source(arm), f"cellreach7_g{given}_ik")
        batch = load_module(shared.batch_source(arm), f"cellreach7_g{given}_batch")
        c_double = shared.c_solver(arm) if given == 3 else None
        c_float = shared.c_solver(arm, c_backend.FLOAT) if given == 3 else None
        _CACHE[given] = (arm, module, batch, c_double, c_float)
    return _CACHE[given]


def random_readings(arm, rng, count):
    limits = arm.limits_in_readings()
    return limits[:, 0] + rng.random((count, arm.dof)) * (limits[:, 1] - limits[:, 0])


def angle_gap(a, b):
    return np.abs((np.asarray(a) - np.asarray(b) + 180.0) % 360.0 - 180.0)


# ------------------------------------------------------------------------------ the solutions

def test_source_among_solutions_and_every_solution_reproduces_the_pose():
    arm, module, _, c_double, _ = solvers()
    chain = NumericChain(arm)
    rng = np.random.default_rng(71)
    worst = 0.0
    for source in random_readings(arm, rng, 400):
        pose = chain.pose(source)
        for solver in (module, c_double):
            solutions = solver.inverse(pose, source[2])
            assert any(angle_gap(s[0], source).max() < 1e-6 for s in solutions)
            for s in solutions:
                assert s[0][2] == source[2]            # the given reading comes back as given
                worst = max(worst, float(np.abs(chain.pose(s[0]) - pose).max()))
    assert worst < 1e-9 * arm.reach_scale()


def test_a_numerical_solver_finds_nothing_the_generated_solver_misses():
    from scipy.optimize import least_squares
    arm, module, _, _, _ = solvers()
    chain = NumericChain(arm)
    rng = np.random.default_rng(72)
    limits = arm.limits_in_readings()
    seen = 0
    for source in random_readings(arm, rng, 4):
        pose = chain.pose(source)
        generated = [np.array(s[0]) for s in module.inverse(pose, source[2], limits="ignore")]

        def residual(x):
            q = np.insert(x, 2, source[2])
            p = chain.pose(q)
            return np.concatenate([(p[:3, 3] - pose[:3, 3]) / 100.0, (p[:3, :3] - pose[:3, :3]).ravel()])
        for _ in range(25):
            start = np.delete(limits[:, 0] + rng.random(7) * (limits[:, 1] - limits[:, 0]), 2)
            fit = least_squares(residual, start, xtol=1e-15, ftol=1e-15, gtol=1e-15)
            if np.abs(fit.fun).max() > 1e-10:
                continue
            q = np.insert(fit.x, 2, source[2])
            seen += 1
            assert any(angle_gap(g, q).max() < 1e-5 for g in generated), f"missed {q}"
    assert seen >= 20


def test_float_c_and_batch_agree_with_python():
    arm, module, batch, c_double, c_float = solvers()
    chain = NumericChain(arm)
    rng = np.random.default_rng(73)
    readings = random_readings(arm, rng, 300)
    poses = chain.poses(readings)
    joints, valid, _, _, _ = batch.inverse_batch(poses, readings[:, 2])
    float_missing = 0
    for i, (source, pose) in enumerate(zip(readings, poses)):
        per_pose = [s[0] for s in module.inverse(pose, source[2], limits="ignore")]
        assert np.allclose(joints[i][valid[i]], per_pose, atol=1e-9)
        in_c = [s[0] for s in c_double.inverse(pose, source[2], limits="ignore")]
        assert np.allclose(in_c, per_pose, atol=1e-9)
        in_float = c_float.inverse(pose, source[2])
        float_missing += not any(angle_gap(s[0], source).max() < 2e-2 for s in in_float)
    assert float_missing <= 3          # float32 near a branch's singular set (docs/solvers.md)


def test_bad_given_readings():
    arm, module, batch, c_double, _ = solvers()
    pose = NumericChain(arm).pose(np.array([10, 30, 20, 70, 10, 40, 0.0]))
    for solver in (module, c_double):
        assert solver.inverse(pose, float("nan"), with_status=True) == ([], "invalid_input")
        assert solver.inverse(pose, 170.0, with_status=True)[1] == "unreachable"   # beyond its limits (165)
        assert solver.inverse(pose, 170.0, limits="ignore")                        # the arm itself can
        with pytest.raises(ValueError, match="given"):
            solver.inverse(pose, "20")
    joints, valid, _, _, _ = batch.inverse_batch(pose[None], [float("nan")])
    assert not valid.any()


# ------------------------------------------------------------------------------ redundancy

def test_jacobian_null_space_is_one_dimensional_and_holds_the_self_motion():
    """numpy SVD of the 6x7 Jacobian: rank 6 at generic readings; the solutions' change as the
    given joint turns (same labels) is in its null space (the pose stays fixed)."""
    arm, module, _, _, _ = solvers()
    chain = NumericChain(arm)
    rng = np.random.default_rng(74)
    scale = np.array([np.pi / 180] * 7)
    checked = 0
    for source in random_readings(arm, rng, 20):
        jacobian = jacobian_of(chain, source, arm.reach_scale()) * scale   # per reading unit (deg)
        values = np.linalg.svd(jacobian, compute_uv=False)
        assert values[5] > 1e-6 * values[0]                 # rank 6: a one-dimensional null space
        pose = chain.pose(source)
        here = next(s for s in module.inverse(pose, source[2]) if angle_gap(s[0], source).max() < 1e-6)
        step = 1e-4
        moved = [s for s in module.inverse(pose, source[2] + step) if s[1] == here[1]]
        if not moved:
            continue
        rate = (np.array(moved[0][0]) - np.array(here[0])) / step
        assert np.allclose(chain.pose(moved[0][0]), pose, atol=1e-9 * arm.reach_scale())
        assert np.linalg.norm(jacobian @ rate) < 1e-4 * np.linalg.norm(rate)
        checked += 1
    assert checked >= 15


# ------------------------------------------------------------------------------ choice helpers

def scores(module, pose, criterion, current, values):
    """The best score by ``criterion`` at each sampled value of the given joint."""
    out = []
    for v in values:
        found = [module._score(s, criterion, current, None) for s in module.inverse(pose, float(v), current)]
        out.append(max(found) if found else -np.inf)
    return np.array(out)


@pytest.mark.parametrize("criterion", ["nearest", "limits", "conditioning"])
def test_the_choice_is_never_worse_than_a_dense_sample(criterion):
    arm, module, _, c_double, _ = solvers()
    chain = NumericChain(arm)
    rng = np.random.default_rng(75)
    low, high = arm.limits_in_readings()[2]
    dense = np.linspace(low, high, 1321)                  # a quarter of the helper's default step
    for source in random_readings(arm, rng, 3):
        pose = chain.pose(source)
        current = list(source + 7.0)
        value, solution = module.choose_given(pose, current, criterion)
        best = module._score(solution, criterion, current, None)
        sampled = scores(module, pose, criterion, current, dense)
        assert best >= sampled.max() - 1e-9 * max(1.0, abs(sampled.max()))
        assert solution[0][2] == value
        c_value, c_solution = c_double.choose_given(pose, current, criterion)
        assert abs(c_value - value) < 1e-6 and np.allclose(c_solution[0], solution[0], atol=1e-6)


def test_choice_helper_input_checks():
    arm, module, _, c_double, _ = solvers()
    pose = NumericChain(arm).pose(np.zeros(7))
    for solver in (module, c_double):
        with pytest.raises(ValueError, match="criterion"):
            solver.choose_given(pose, [0.0] * 7, "fastest")
        with pytest.raises(ValueError, match="current"):
            solver.choose_given(pose, None, "nearest")
    with pytest.raises(ValueError, match="step"):
        module.choose_given(pose, [0.0] * 7, "nearest", step=0.0)
    far = NumericChain(arm).pose(np.zeros(7))
    far[:3, 3] += 5000.0
    assert module.choose_given(far, [0.0] * 7, "nearest") is None
    assert c_double.choose_given(far, [0.0] * 7, "nearest") is None


# ------------------------------------------------------------------------------ choices and refusals

def test_which_joints_can_be_given():
    choices = dict(given_choices(dataclasses.replace(demo_arm("cellreach7"), given_joint=None)))
    assert [k for k, reason in choices.items() if reason is None] == [1, 2, 3, 5, 6, 7]
    assert "rank-deficient" in choices[4]          # the elbow fixes the shoulder-wrist distance


def test_seven_joints_without_a_given_joint_are_refused_with_the_choices():
    arm = dataclasses.replace(demo_arm("cellreach7"), given_joint=None)
    with pytest.raises(StructureError, match=r"joints that can be given: 1 'base_turn', 2 'shoulder_pitch'"):
        derive(arm)


@pytest.mark.parametrize("given", [1, 2, 3, 5, 6, 7])
def test_verify_passes_for_every_joint_that_can_be_given(given):
    """100 % complete and within the precision contract in every band of conditioning (with joint 2
    or 6 given this needed the radicand of a two-root step computed as a^2 + b^2 - c^2 from the
    values when that adds smaller terms than its expanded polynomial: before, 930 and 2950 times
    the contract's bound near the elbow's and the wrist's singular sets)."""
    arm, module, _, _, _ = solvers(given)
    result = verify(arm, module, samples=1500)
    assert result.passed, result.failures
    assert result.complete == result.checked > 1400
    assert result.worst_position < 1e-9 * arm.reach_scale()


def test_path_moves_the_given_joint_smoothly(tmp_path):
    out = tmp_path / "joints.csv"
    ran = subprocess.run([sys.executable, "-m", "ikgen.cli", "path", "examples/cellreach7.toml",
                          "examples/cellreach7_line.csv", "--line", "31", "--start", "0,40,0,90,0,50,0",
                          "--out", str(out)], cwd=ROOT, capture_output=True, text=True)
    assert ran.returncode == 0, ran.stderr
    assert "solved         31 of 31 steps" in ran.stdout and "events         none" in ran.stdout
    rows = np.loadtxt(out, delimiter=",", skiprows=1)
    assert np.abs(np.diff(rows[:, 3])).max() < 2.0       # the given joint (upper roll) moves by < 2 deg a step
    chain = NumericChain(demo_arm("cellreach7"))
    from scipy.spatial.transform import Rotation   # the path file's quaternions, scalar first
    for row, position, quaternion in ((rows[0], (450, -150, 300), (0, 1, 0, 0)),
                                      (rows[-1], (450, 150, 300), (0, 0.96592583, 0.25881905, 0))):
        pose = chain.pose(row[1:])
        w, x, y, z = quaternion
        assert np.allclose(pose[:3, 3], position, atol=1e-6)
        assert np.allclose(pose[:3, :3], Rotation.from_quat([x, y, z, w]).as_matrix(), atol=1e-7)


@pytest.mark.parametrize("value, message", [
    ('"upper"', r"'given_joint' names no joint \('upper'\); expected one of the joint names: base_turn"),
    ("9", r"'given_joint' is 9; expected a joint number from 1 to 7"),
    ("true", r"'given_joint' is a boolean; expected a joint number from 1 to 7 or a joint name"),
])
def test_bad_given_joint_in_the_arm_file(tmp_path, value, message):
    from ikgen.armfile import load_arm
    from ikgen.errors import ArmFileError
    text = (ROOT / "examples" / "cellreach7.toml").read_text().replace('given_joint = "upper_roll"',
                                                                       f"given_joint = {value}")
    path = tmp_path / "bad.toml"
    path.write_text(text)
    with pytest.raises(ArmFileError, match=message):
        load_arm(path)


def test_given_joint_by_number_and_command_line():
    from ikgen.armsource import with_given_joint
    from ikgen.errors import IkgenError
    arm = demo_arm("cellreach7")
    assert arm.given_joint == 3
    assert with_given_joint(arm, "5").given_joint == 5
    assert with_given_joint(arm, "flange_roll").given_joint == 7
    assert with_given_joint(arm, "auto").given_joint == 1          # the first joint that can be given
    with pytest.raises(IkgenError, match="expected a number from 1 to 7"):
        with_given_joint(arm, "0")


def test_the_compiled_wrapper_takes_the_given_reading(tmp_path):
    """`ikgen compile`'s wrapper module (ikgen/cwrapper.py beside the extension) has the Python
    solver's API for a given joint: inverse, nearest and choose_given agree with it."""
    import importlib
    arm, module, _, _, _ = solvers()
    compile_solver(arm, shared.derivation(arm), folder=tmp_path)
    sys.path.insert(0, str(tmp_path))
    try:
        wrapper = importlib.import_module("cellreach7_ik_c")
    finally:
        sys.path.remove(str(tmp_path))
    q = [10.0, 30.0, 20.0, 70.0, 10.0, 40.0, 0.0]
    pose = module.forward(q)
    assert wrapper.GIVEN_JOINT == 3
    assert np.allclose([s[0] for s in wrapper.inverse(pose, 20.0)], [s[0] for s in module.inverse(pose, 20.0)],
                       atol=1e-9)
    assert wrapper.nearest(pose, 20.0, q)[0] == pytest.approx(q, abs=1e-9)
    for criterion in ("nearest", "limits", "conditioning"):
        reading, solution = wrapper.choose_given(pose, q, criterion)
        expected, _ = module.choose_given(pose, q, criterion)
        assert reading == pytest.approx(expected, abs=1e-6)
    assert np.allclose(wrapper.inverse_joints(pose, 20.0), module.inverse_joints(pose, 20.0), atol=1e-9)
    with pytest.raises(ValueError, match="given"):
        wrapper.inverse(pose)


def test_a_reach_map_takes_the_best_over_readings_of_the_given_joint():
    """Each reach figure is the best over the readings tried: a pose reached at one of them counts,
    with the per-reading count checked against the generated Python solver (docs/reach.md)."""
    from ikgen.reach.solvers import batch_solver, given_readings
    arm, module, _, _, _ = solvers()
    solver = batch_solver(arm)
    chain = NumericChain(arm)
    rng = np.random.default_rng(76)
    poses = chain.poses(random_readings(arm, rng, 40))
    poses[::4, :3, 3] += 5000.0                                 # every fourth far out of reach
    figures = solver.figures(poses)
    readings = given_readings(solver.windows[2])
    for i, pose in enumerate(poses):
        counts = [len(module.inverse(pose, float(v))) for v in readings]
        assert figures["count"][i] == max(counts)
        assert (figures["count"][i] == 0) == bool(i % 4 == 0)
