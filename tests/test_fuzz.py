"""The standing sweep of hostile numbers and wrong shapes given to the generated solvers.

Three demo arms, one per kind of target: benchtop6 (six axes, the full pose), engraver5 (five
axes, a point and a tool direction) and boardpick4 (a SCARA, a point and a turn). For each, the
generated Python module and the C solver in double precision, through cffi
(``ikgen.cbuild.compile_solver``) and through the friendly wrapper that ``ikgen compile`` writes
(``<arm>_ik_c.py``), are fed:

- hypothesis-drawn poses: rigid transforms from random readings, then some entries replaced by
  huge, tiny, NaN or infinite numbers, or the rotation made non-orthonormal, with hostile
  ``current`` readings; and the targets' natural inputs likewise. Asserted (docs/solvers.md,
  "Bad input"): no exception, a status from STATUS_NAMES, no NaN or infinite number in any
  returned solution, and for an untouched rigid transform every solution reproduces the pose
  (on the entries the target fixes) within 1e-6 of the arm's reach and 1e-6 rad: the
  verification's singular-pose allowance (ikgen/verify.py, 1e3 times its 1e-9 round trip);
- a catalogue of wrong shapes and types for every public function: each raises ValueError whose
  message says what is expected.

The rule for a NaN or infinite ``current`` entry (taken as no reading, 0) is checked at a
wrist-singular pose. Round trips use ikgen.kinematics (forward kinematics from the DH table,
Craig, Introduction to Robotics, 3rd ed., 3.4 / Spong, Robot Modeling and Control, 2nd ed., 3.2
for the conventions). Demo arms are invented (examples/); each is derived and compiled once.
"""

from __future__ import annotations

import decimal
import importlib.util
import math

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

import shared
from helpers import demo_arm
from ikgen.generate import load_module
from ikgen.kinematics import NumericChain
from ikgen.verify import check_round_trip, target_of

STEMS = ("benchtop6", "engraver5", "boardpick4")
ROUND_TRIP = 1e-6          # of the reach scale, and rad
HOSTILE = (math.nan, math.inf, -math.inf, 1e155, -1e155, 1e300, -1e308, 1e150, 1e149, 1e-300, -5e-324, 0.0, 1e20)
SETTINGS = settings(max_examples=60, deadline=None, derandomize=True,
                    suppress_health_check=[HealthCheck.function_scoped_fixture, HealthCheck.too_slow])


class Solvers:
    """One demo arm: its generated Python module, its C solver (cffi) and the C wrapper module."""

    def __init__(self, stem: str):
        self.arm = demo_arm(stem)
        self.chain = NumericChain(self.arm)
        self.python = load_module(shared.python_source(self.arm), f"{stem}_ik_fuzzed")
        self.c = shared.c_solver(self.arm)
        wrapper = self.c.folder / f"{self.c.prefix}_c.py"
        spec = importlib.util.spec_from_file_location(f"{stem}_ik_c_fuzzed", wrapper)
        self.wrapper = importlib.util.module_from_spec(spec)
        spec.loader.exec_module(self.wrapper)
        self.target = target_of(self.arm)

    def all(self):
        """(name, module-like) for each solver under test."""
        return (("python", self.python), ("c", self.c), ("c wrapper", self.wrapper))


@pytest.fixture(scope="module")
def arms():
    cache = {}

    def get(stem):
        if stem not in cache:
            cache[stem] = Solvers(stem)
        return cache[stem]

    return get


def unit_readings(arm, unit):
    """Readings from numbers in [0, 1): each joint's limits scaled."""
    limits = arm.limits_in_readings()
    return limits[:, 0] + np.asarray(unit) * (limits[:, 1] - limits[:, 0])


def assert_clean(solutions, status=None, where=""):
    if status is not None:
        assert status in ("ok", "unreachable", "invalid_input", "not_realisable"), (where, status)
        assert (status == "ok") == bool(solutions), (where, status, len(solutions))
    for s in solutions:
        numbers = list(s[0]) + list(s[3])
        assert all(math.isfinite(v) for v in numbers), f"{where}: non-finite solution {s}"


def assert_round_trip(arms_entry, pose, solutions, where):
    if not solutions:
        return
    pos, rot = check_round_trip(arms_entry.chain, np.array([pose] * len(solutions)), [list(s[0]) for s in solutions])
    scale = arms_entry.arm.reach_scale()
    assert pos.max() <= ROUND_TRIP * scale and rot.max() <= ROUND_TRIP, \
        f"{where}: round trip {pos.max():.3g} ({scale:g} reach), {rot.max():.3g} rad"


entries = st.one_of(st.sampled_from(HOSTILE), st.floats(allow_nan=True, allow_infinity=True, width=64))
currents = st.one_of(st.none(), st.lists(st.sampled_from(HOSTILE + (10.0, -30.0)), min_size=1, max_size=1),
                     st.lists(st.floats(allow_nan=True, allow_infinity=True), min_size=1, max_size=1))


@st.composite
def poses(draw):
    """(unit readings, changes, rotation scale, current seed): how to build and spoil a pose."""
    unit = draw(st.lists(st.floats(0, 1, exclude_max=True), min_size=6, max_size=6))
    changes = draw(st.lists(st.tuples(st.integers(0, 11), entries), max_size=3))
    skew = draw(st.sampled_from((1.0, 1.0, 1.0, 0.5, 2.0, 1 + 1e-7, 0.0)))
    current = draw(currents)
    return unit, changes, skew, current


def spoil(arms_entry, drawn):
    """The pose, whether it is an untouched rigid transform, and the current readings."""
    unit, changes, skew, current = drawn
    arm = arms_entry.arm
    pose = arms_entry.chain.pose(unit_readings(arm, unit[:arm.dof]))
    pose[:3, :3] *= skew
    for index, value in changes:
        pose[index // 4, index % 4] = value
    rigid = skew == 1.0 and not changes
    if current is not None:
        current = [current[0]] * arm.dof
    return pose, rigid, current


@pytest.mark.parametrize("stem", STEMS)
@pytest.mark.parametrize("limits", ("drop", "flag", "ignore"))
def test_inverse_survives_hostile_poses(arms, stem, limits):
    entry = arms(stem)

    @SETTINGS
    @given(poses())
    def check(drawn):
        pose, rigid, current = spoil(entry, drawn)
        for name, solver in entry.all():
            where = f"{stem} {name} limits={limits} current={current} pose={pose.tolist()}"
            if name == "c wrapper":
                found, status = solver.inverse(pose, current, limits), None
            else:
                found, status = solver.inverse(pose, current, limits, with_status=True)
            assert_clean(found, status, where)
            if rigid:
                assert_round_trip(entry, pose, found, where)
            if status is not None and not rigid and not np.all(np.abs(pose[:3]) <= 1e150):
                assert status == "invalid_input", where

    check()


natural = st.tuples(st.lists(st.one_of(st.floats(-600, 600), st.sampled_from(HOSTILE)), min_size=3, max_size=3),
                    st.lists(st.one_of(st.floats(-1, 1), st.sampled_from(HOSTILE)), min_size=3, max_size=3),
                    st.one_of(st.floats(-400, 400), st.sampled_from(HOSTILE)), currents)


@pytest.mark.parametrize("stem", ("engraver5", "boardpick4"))
def test_natural_inputs_survive_hostile_numbers(arms, stem):
    entry = arms(stem)

    @SETTINGS
    @given(natural)
    def check(drawn):
        point, direction, angle, current = drawn
        current = None if current is None else [current[0]] * entry.arm.dof
        for name, solver in (("python", entry.python), ("c", entry.c)):
            where = f"{stem} {name} point={point} direction={direction} angle={angle} current={current}"
            if entry.target.kind == "point_and_direction":
                found, status = solver.inverse_point_direction(point, direction, current, with_status=True)
            else:
                found, status = solver.inverse_point_angle(point, angle, current, with_status=True)
            assert_clean(found, status, where)
            if not all(abs(v) <= 1e150 for v in point):
                assert status == "invalid_input", where

    check()


@pytest.mark.parametrize("bad", (math.nan, math.inf, -math.inf))
def test_non_finite_current_counts_as_no_reading(arms, bad):
    """At a wrist-singular pose (joint 5 at 0: axes 4 and 6 aligned) the free joint takes the
    caller's reading; a NaN or infinite reading is taken as none (0) by every solver."""
    entry = arms("benchtop6")
    pose = entry.chain.pose(np.array([10.0, -20.0, 30.0, 15.0, 0.0, 5.0]))
    for name, solver in entry.all():
        plain = solver.inverse(pose, None, "ignore")
        hostile = solver.inverse(pose, [bad] * 6, "ignore")
        assert plain and hostile == plain, (name, plain, hostile)
        assert any(s[2] for s in hostile), f"{name}: the pose is not reported singular"
        assert solver.nearest(pose, [bad] * 6) is not None, name


def test_huge_entries_are_invalid_input_not_nan(arms):
    """The reproductions of issue 17, item 2: an entry of 1e155 with limits flag/ignore."""
    entry = arms("benchtop6")
    base = entry.chain.pose(np.array([10.0, -20.0, 30.0, 0.0, 45.0, 0.0]))
    for index in (3, 7, 11, 2, 6):
        pose = base.copy()
        pose[index // 4, index % 4] = 1e155
        for name, solver in (("python", entry.python), ("c", entry.c)):
            for limits in ("flag", "ignore"):
                assert solver.inverse(pose, None, limits, with_status=True) == ([], "invalid_input"), (name, index)


# ------------------------------------------------------------------------------ wrong shapes and types

POSE = [[1.0, 0.0, 0.0, 300.0], [0.0, 1.0, 0.0, 0.0], [0.0, 0.0, 1.0, 300.0], [0.0, 0.0, 0.0, 1.0]]
BAD_POSES = {
    "3x3": [[1, 0, 0], [0, 1, 0], [0, 0, 1]],
    "flat list of 16": [float(v) for row in POSE for v in row],
    "string": "pose",
    "None": None,
    "dict": {"x": 1},
    "(2,4,4) array": np.zeros((2, 4, 4)),
    "complex entries": [[complex(v) for v in row] for row in POSE],
    "Decimal entries": [[decimal.Decimal(v) for v in row] for row in POSE],
    "string entries": [[str(v) for v in row] for row in POSE],
    "ragged": [[1.0, 0.0, 0.0, 300.0], [0.0, 1.0, 0.0], [0.0, 0.0, 1.0, 300.0]],
    "scalar": 5.0,
}


def raises_clearly(call, *fragments):
    with pytest.raises(ValueError) as caught:
        call()
    message = str(caught.value)
    assert all(f in message for f in fragments), message
    assert len(message) < 300, message


@pytest.mark.parametrize("stem", STEMS)
@pytest.mark.parametrize("case", list(BAD_POSES))
def test_wrong_pose_raises_value_error(arms, stem, case):
    entry = arms(stem)
    bad = BAD_POSES[case]
    expected = ("real numbers",) if "entries" in case else ("4x4 or 3x4",)
    for name, solver in entry.all():
        raises_clearly(lambda: solver.inverse(bad), "pose", *expected)
        raises_clearly(lambda: solver.nearest(bad, [0.0] * entry.arm.dof), "pose", *expected)


BAD_VECTORS = {"short": [0.0, 0.0], "string": "abc", "number": 5, "dict": {"a": 1},
               "complex": [1j] * 6, "Decimal": [decimal.Decimal(1)] * 6}


@pytest.mark.parametrize("stem", STEMS)
@pytest.mark.parametrize("case", list(BAD_VECTORS))
def test_wrong_vectors_raise_value_error(arms, stem, case):
    """``current``, ``weights``, ``forward``'s joints and ``distance``'s vectors."""
    entry = arms(stem)
    dof = entry.arm.dof
    bad = BAD_VECTORS[case]
    if case in ("complex", "Decimal"):
        bad = bad[:1] * dof
    for name, solver in entry.all():
        raises_clearly(lambda: solver.inverse(POSE, bad), "current")
        raises_clearly(lambda: solver.nearest(POSE, bad), "current")
        raises_clearly(lambda: solver.nearest(POSE, [0.0] * dof, bad), "weights")
        raises_clearly(lambda: solver.forward(bad), "joints")
    for module in (entry.python, entry.wrapper):
        raises_clearly(lambda: module.distance(bad, [0.0] * dof), "joint vectors")
        raises_clearly(lambda: module.sort_nearest([], bad), "current")


@pytest.mark.parametrize("stem", STEMS)
def test_wrong_options_raise_value_error(arms, stem):
    entry = arms(stem)
    dof = entry.arm.dof
    for name, solver in entry.all():
        for limits in ("strict", None, ["drop"], 0):
            raises_clearly(lambda: solver.inverse(POSE, None, limits), "limits", "'drop'")
        raises_clearly(lambda: solver.nearest(POSE, None), "current")
        raises_clearly(lambda: solver.nearest(POSE, [0.0] * dof, None, {"no_such_label": "x"}), "label")
        first = entry.python.LABEL_NAMES[0]
        raises_clearly(lambda: solver.nearest(POSE, [0.0] * dof, None, {first: "sideways"}), "takes one of")
        raises_clearly(lambda: solver.nearest(POSE, [0.0] * dof, None, "elbow_up"), "config")
    raises_clearly(lambda: entry.python.forward([math.nan] * dof), "finite")
    raises_clearly(lambda: entry.python.sort_nearest(None, [0.0] * dof), "list of solutions")
    natural = {"point_and_direction": "inverse_point_direction", "point_and_angle": "inverse_point_angle"}
    if entry.target.kind in natural:
        call = natural[entry.target.kind]
        second = [0.0, 0.0, 1.0] if entry.target.kind == "point_and_direction" else 30.0
        for solver in (entry.python, entry.c):
            raises_clearly(lambda: getattr(solver, call)("abc", second), "point")
            raises_clearly(lambda: getattr(solver, call)([1.0, 2.0], second), "point")
            bad_second = [0.0, 1.0] if entry.target.kind == "point_and_direction" else "30"
            raises_clearly(lambda: getattr(solver, call)([300.0, 0.0, 200.0], bad_second),
                           "direction" if entry.target.kind == "point_and_direction" else "angle")
