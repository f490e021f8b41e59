"""Arms with fewer than six joints, prismatic joints and the targets they serve.

References, named beside each check:

- the closed forms of the elbow (articulated) arm, the spherical (RRP) arm and the SCARA in Spong,
  Hutchinson and Vidyasagar, *Robot Modeling and Control*, 1st ed. (2006), sec. 5.3 (position by
  geometry: the planar two-link law of cosines, atan2 for the base angle), recalled from memory and
  written out again below for the DH tables of these tests;
- scipy.optimize.least_squares (a general-purpose numerical solver, started from many random
  joint vectors) for arms with offsets that have no textbook table: every solution it converges
  to must be among the generated solver's;
- the DH link transform (Craig, *Introduction to Robotics*, 3rd ed., sec. 3.4) through
  ikgen.kinematics, which tests/test_kinematics.py checks against worked examples.

The generated code is the solver under test: Python (stdlib only), and C through cffi.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

import shared
from helpers import build_arm, demo_arm, joint
from ikgen.backends import python as python_backend
from ikgen.engine import derive
from ikgen.generate import load_module
from ikgen.kinematics import NumericChain
from ikgen.verify import random_readings

_CACHE: dict[str, tuple] = {}


def generated(name: str, arm):
    """(Python module, C solver, arm) of an arm, built once per test session."""
    if name not in _CACHE:
        module = load_module(shared.python_source(arm), f"{name}_ik_under_test")
        _CACHE[name] = (module, shared.c_solver(arm), arm)
    return _CACHE[name]


def same_angle_sets(found, expected, revolute, tol=1e-7):
    """Every expected joint vector is matched by one found vector and vice versa (revolute
    readings modulo 360 deg)."""
    found, expected = np.atleast_2d(found), np.atleast_2d(expected)
    if len(found) != len(expected):
        return False

    def gap(a, b):
        d = a - b
        d = np.where(revolute, (d + 180.0) % 360.0 - 180.0, d)
        return np.abs(d).max()
    used = set()
    for e in expected:
        k = next((i for i, f in enumerate(found) if i not in used and gap(f, e) < tol), None)
        if k is None:
            return False
        used.add(k)
    return True


# ---------------------------------------------------------------------------------------------
# Textbook closed forms (Spong, Hutchinson and Vidyasagar, 1st ed., sec. 5.3; from memory)

D1, A2, A3 = 0.4, 0.35, 0.3


def elbow_arm():
    """Articulated (elbow) arm without offsets: the position part of SHV's sec. 5.3.1."""
    return build_arm([joint("r", a=0, alpha=90, d=D1), joint("r", a=A2, alpha=0, d=0),
                      joint("r", a=A3, alpha=0, d=0)], name="elbow3")


def elbow_reference(x, y, z):
    """All four solutions (deg): base angle atan2(y, x) or that + 180 deg (the signed horizontal
    reach r), the elbow from the law of cosines with both signs of its sine, the shoulder as the
    direction to the point minus the forearm's angle in the arm's plane."""
    out = []
    s = z - D1
    cos3 = (x * x + y * y + s * s - A2 * A2 - A3 * A3) / (2 * A2 * A3)
    for r, th1 in ((math.hypot(x, y), math.atan2(y, x)), (-math.hypot(x, y), math.atan2(y, x) + math.pi)):
        for sign in (1, -1):
            sin3 = sign * math.sqrt(1 - cos3 * cos3)
            th3 = math.atan2(sin3, cos3)
            th2 = math.atan2(s, r) - math.atan2(A3 * sin3, A2 + A3 * cos3)
            out.append(np.degrees([th1, th2, th3]))
    return np.array(out)


def test_the_elbow_arm_gives_the_four_textbook_solutions_of_a_point():
    module, csolver, arm = generated("elbow3", elbow_arm())
    assert module.TARGET == "point" and module.MAX_SOLUTIONS == 4
    rng = np.random.default_rng(53)
    checked = 0
    while checked < 60:
        p = rng.uniform(-0.6, 0.6, 3) + [0, 0, D1]
        reach = np.linalg.norm(p - [0, 0, D1])
        if not (abs(A2 - A3) + 0.01 < reach < A2 + A3 - 0.01) or math.hypot(p[0], p[1]) < 0.01:
            continue
        expected = elbow_reference(*p)
        for solver in (module, csolver):
            found = [s[0] for s in solver.inverse_point(list(p), limits="ignore")]
            assert same_angle_sets(found, expected, np.array([True] * 3)), (p, found, expected)
        checked += 1


RHO_LOW, RHO_HIGH = 0.1, 0.9


def spherical_arm():
    """Spherical (RRP) arm: base turn, a tilt whose axis meets axis 1, a radial slide (the
    spherical configuration of SHV sec. 5.3.2, in a DH table of our own)."""
    return build_arm([joint("r", a=0, alpha=-90, d=D1), joint("r", a=0, alpha=90, d=0),
                      joint("p", a=0, alpha=0, theta=0, limits=[RHO_LOW, RHO_HIGH])], name="sphere3")


def spherical_reference(x, y, z):
    """For this table the slide points along (cos th1 sin th2, sin th1 sin th2, cos th2) from
    (0, 0, D1) (worked out from the DH transforms, Craig 3rd ed. sec. 3.4): the slide is the
    distance, th2 the angle from the vertical, both signs of the horizontal reach r."""
    s = z - D1
    rho = math.sqrt(x * x + y * y + s * s)
    out = []
    for r, th1 in ((math.hypot(x, y), math.atan2(y, x)), (-math.hypot(x, y), math.atan2(y, x) + math.pi)):
        out.append([math.degrees(th1), math.degrees(math.atan2(r, s)), rho])
    return np.array(out), rho


def test_the_spherical_arm_gives_the_textbook_solutions_and_its_stroke_defines_reach():
    module, csolver, arm = generated("sphere3", spherical_arm())
    rng = np.random.default_rng(7)
    revolute = np.array([True, True, False])
    inside = outside = 0
    for _ in range(80):
        p = rng.uniform(-1.0, 1.0, 3) + [0, 0, D1]
        if math.hypot(p[0], p[1]) < 0.01:
            continue
        expected, rho = spherical_reference(*p)
        for solver in (module, csolver):
            found = [s[0] for s in solver.inverse_point(list(p), limits="ignore")]
            if RHO_LOW < rho < RHO_HIGH:
                assert same_angle_sets(found, expected, revolute), (p, found, expected)
            else:                       # the stroke defines reach, even with limits ignored
                assert found == []
        inside += RHO_LOW < rho < RHO_HIGH
        outside += not RHO_LOW < rho < RHO_HIGH
    assert inside > 10 and outside > 10


@pytest.mark.parametrize("end", [RHO_LOW, RHO_HIGH])
def test_a_slide_exactly_at_a_stroke_end_is_accepted_and_just_beyond_it_is_not(end):
    """The stroke rule of docs/arm-file.md: within 1e-9 of the stroke's length accepted, 1e-6
    beyond refused (the direction (0.6, 0, 0.8) is exact in binary to rounding)."""
    module, csolver, arm = generated("sphere3", spherical_arm())
    direction = np.array([0.6, 0.0, 0.8])
    span = RHO_HIGH - RHO_LOW
    beyond = end + (1e-6 * span if end == RHO_HIGH else -1e-6 * span)
    for solver in (module, csolver):
        at = solver.inverse_point(list([0, 0, D1] + end * direction), limits="ignore")
        assert len(at) == 2 and all(abs(q[2] - end) < 1e-12 for q, *_ in at)     # both base turns
        past, status = solver.inverse_point(list([0, 0, D1] + beyond * direction), limits="ignore",
                                            with_status=True)
        assert past == [] and status == "unreachable"


A1_S, A2_S, D0_S, D4_S = 0.35, 0.3, 0.4, 0.05


def scara_arm():
    """SCARA (RRPR) in the DH table of SHV sec. 3.3 (from memory): the second twist is 180 deg, so
    the slide moves down."""
    return build_arm([joint("r", a=A1_S, alpha=0, d=D0_S), joint("r", a=A2_S, alpha=180, d=0),
                      joint("p", a=0, alpha=0, theta=0, limits=[0, 0.3]), joint("r", a=0, alpha=0, d=D4_S)],
                     name="scara4")


def scara_reference(x, y, z, yaw):
    """SHV sec. 5.3 (from memory): cos th2 by the law of cosines, th2 with both signs of its sine,
    th1 = atan2(y, x) - atan2(a2 sin th2, a1 + a2 cos th2), d3 = d0 - d4 - z, and the tool yaw
    alpha = th1 + th2 - th4 (for the pose [[c, s, 0], [s, -c, 0], [0, 0, -1]])."""
    c2 = (x * x + y * y - A1_S ** 2 - A2_S ** 2) / (2 * A1_S * A2_S)
    out = []
    for sign in (1, -1):
        s2 = sign * math.sqrt(1 - c2 * c2)
        th2 = math.atan2(s2, c2)
        th1 = math.atan2(y, x) - math.atan2(A2_S * s2, A1_S + A2_S * c2)
        out.append([math.degrees(th1), math.degrees(th2), D0_S - D4_S - z,
                    math.degrees(th1 + th2 - yaw)])
    return np.array(out)


def test_the_scara_gives_the_textbook_solutions_from_a_pose_and_from_a_point_and_an_angle():
    module, csolver, arm = generated("scara4", scara_arm())
    assert module.TARGET == "point_and_angle"
    revolute = np.array([True, True, False, True])
    rng = np.random.default_rng(11)
    checked = 0
    while checked < 40:
        x, y = rng.uniform(-0.65, 0.65, 2)
        if not (A1_S - A2_S + 0.01 < math.hypot(x, y) < A1_S + A2_S - 0.01):
            continue
        z = D0_S - D4_S - rng.uniform(0.01, 0.29)
        yaw = rng.uniform(-math.pi, math.pi)
        expected = scara_reference(x, y, z, yaw)
        c, s = math.cos(yaw), math.sin(yaw)
        pose = [[c, s, 0, x], [s, -c, 0, y], [0, 0, -1, z], [0, 0, 0, 1]]
        # the turn about the target's axis from the zero reading's tool rotation (a flip about x)
        axis = np.array(module.TARGET_AXIS)
        angle = math.degrees(yaw) if axis[2] > 0 else -math.degrees(yaw)
        for solver in (module, csolver):
            from_pose = [q for q, *_ in solver.inverse(pose, limits="ignore")]
            from_angle = [q for q, *_ in solver.inverse_point_angle([x, y, z], angle, limits="ignore")]
            assert same_angle_sets(from_pose, expected, revolute), (x, y, z, yaw, from_pose, expected)
            assert same_angle_sets(from_angle, expected, revolute)
        checked += 1


def test_a_pose_the_scara_cannot_take_is_not_realisable_and_a_rounded_one_is_solved():
    """A SCARA's tool only turns about the vertical: a tilted pose is refused with its own status,
    a pose tilted within the documented tolerance (1e-6 rad) by rounding is solved."""
    module, csolver, arm = generated("scara4", scara_arm())
    x, y, z, yaw = 0.4, 0.2, 0.2, 0.3
    expected = scara_reference(x, y, z, yaw)

    def tilted(angle):
        c, s = math.cos(yaw), math.sin(yaw)
        rot = np.array([[c, s, 0], [s, -c, 0], [0, 0, -1]])
        ca, sa = math.cos(angle), math.sin(angle)
        rot = np.array([[1, 0, 0], [0, ca, -sa], [0, sa, ca]]) @ rot     # turned about world x
        return [list(rot[0]) + [x], list(rot[1]) + [y], list(rot[2]) + [z], [0, 0, 0, 1]]
    for solver in (module, csolver):
        found, status = solver.inverse(tilted(1e-3), limits="ignore", with_status=True)
        assert (found, status) == ([], "not_realisable")
        found, status = solver.inverse(tilted(1e-9), limits="ignore", with_status=True)
        assert status == "ok"
        assert same_angle_sets([q for q, *_ in found], expected, np.array([True, True, False, True]), tol=1e-5)


# ---------------------------------------------------------------------------------------------
# Arms with offsets, against a general numerical solver (scipy.optimize.least_squares)

def offset_elbow_arm():
    return build_arm([joint("r", a=0.05, alpha=90, d=0.3), joint("r", a=0.3, alpha=0, d=0.07),
                      joint("r", a=0.25, alpha=0, d=0)], name="offset3", tool={"translation": [0.02, 0, 0.03]})


def five_axis_arm():
    return build_arm([joint("r", a=0, alpha=90, d=0.2), joint("r", a=0.25, alpha=0, d=0),
                      joint("r", a=0.03, alpha=90, d=0), joint("r", a=0, alpha=-90, d=0.22),
                      joint("r", a=0, alpha=90, d=0)], name="five5", tool={"translation": [0, 0, 0.08]})


def offset_rrp_arm():
    return build_arm([joint("r", a=0.04, alpha=-90, d=0.3), joint("r", a=0, alpha=90, d=0.1),
                      joint("p", a=0, alpha=0, theta=0, limits=[0.1, 0.9])], name="offsetrrp3")


def numeric_solutions(arm, residual, rng, starts=40):
    """Distinct joint vectors where ``residual`` vanishes, from least_squares started at random
    readings within the limits (stroke bounds for slides)."""
    from scipy.optimize import least_squares
    limits = arm.limits_in_readings()
    revolute = np.array([j.revolute for j in arm.joints])
    low = np.where(revolute, -np.inf, limits[:, 0])
    high = np.where(revolute, np.inf, limits[:, 1])
    found = []
    for _ in range(starts):
        start = limits[:, 0] + rng.random(arm.dof) * (limits[:, 1] - limits[:, 0])
        fit = least_squares(residual, start, bounds=(low, high), xtol=1e-15, ftol=1e-15, gtol=1e-15)
        if np.abs(fit.fun).max() < 1e-10:
            q = np.where(revolute, (fit.x + 180.0) % 360.0 - 180.0, fit.x)
            if not any(np.abs(np.where(revolute, (q - f + 180) % 360 - 180, q - f)).max() < 1e-5 for f in found):
                found.append(q)
    return found


@pytest.mark.parametrize("name, make", [("offset3", offset_elbow_arm), ("offsetrrp3", offset_rrp_arm),
                                        ("five5", five_axis_arm)])
def test_every_solution_a_numerical_solver_finds_is_among_the_generated_ones(name, make):
    module, csolver, arm = generated(name, make())
    chain = NumericChain(arm)
    revolute = np.array([j.revolute for j in arm.joints])
    rng = np.random.default_rng(2024)
    limits = arm.limits_in_readings()
    seen = 0
    for _ in range(6):
        source = limits[:, 0] + rng.random(arm.dof) * (limits[:, 1] - limits[:, 0])
        pose = chain.pose(source)
        point = pose[:3, 3]
        if module.TARGET == "point":
            def residual(q):
                return chain.pose(q)[:3, 3] - point
            generated_q = [q for q, *_ in module.inverse_point(list(point), limits="ignore")]
        else:
            direction = pose[:3, 2]

            def residual(q):
                p = chain.pose(q)
                return np.concatenate([p[:3, 3] - point, 0.3 * (p[:3, 2] - direction)])
            generated_q = [q for q, *_ in module.inverse_point_direction(list(point), list(direction),
                                                                        limits="ignore")]
        numeric = numeric_solutions(arm, residual, rng)
        assert numeric, "least_squares found no solution of a reachable target"
        for q in numeric:
            gaps = [np.abs(np.where(revolute, (np.array(g) - q + 180) % 360 - 180, np.array(g) - q)).max()
                    for g in generated_q]
            assert min(gaps) < 1e-5, (name, q, generated_q)
            seen += 1
        for g in generated_q:                       # and every generated solution is one
            assert np.abs(residual(np.array(g))).max() < 1e-9
    assert seen >= 6


# ---------------------------------------------------------------------------------------------
# The natural calls, Python and C, on the demo arms of each target kind

def test_bad_directions_and_numbers_are_invalid_input_in_python_and_c():
    module, csolver, arm = generated("five5", five_axis_arm())
    for solver in (module, csolver):
        assert solver.inverse_point_direction([0.3, 0.1, 0.2], [0, 0, 1.01], with_status=True) == ([], "invalid_input")
        assert solver.inverse_point_direction([0.3, 0.1, 0.2], [0, 0, 0], with_status=True) == ([], "invalid_input")
        assert solver.inverse_point_direction([math.nan, 0.1, 0.2], [0, 0, 1], with_status=True) == ([], "invalid_input")
        assert solver.inverse_point_direction([0.3, 0.1, 0.2], [0, math.inf, 1], with_status=True) == ([], "invalid_input")
    module, csolver, arm = generated("elbow3", elbow_arm())
    for solver in (module, csolver):
        assert solver.inverse_point([0.3, math.nan, 0.2], with_status=True) == ([], "invalid_input")
        assert solver.inverse_point([30.0, 0.0, 0.2], with_status=True) == ([], "unreachable")


def test_a_roll_the_five_axis_arm_cannot_take_is_not_realisable_from_a_full_pose():
    module, csolver, arm = generated("five5", five_axis_arm())
    chain = NumericChain(arm)
    pose = chain.pose(np.array([20.0, 40.0, -30.0, 50.0, 60.0]))
    c, s = math.cos(0.01), math.sin(0.01)
    rolled = pose.copy()
    rolled[:3, :3] = pose[:3, :3] @ np.array([[c, -s, 0], [s, c, 0], [0, 0, 1]])   # about the tool's z
    for solver in (module, csolver):
        assert solver.inverse(pose.tolist(), limits="ignore", with_status=True)[1] == "ok"
        assert solver.inverse(rolled.tolist(), limits="ignore", with_status=True) == ([], "not_realisable")
        # the natural call takes no roll: the rolled pose's point and direction are served
        found = solver.inverse_point_direction(list(rolled[:3, 3]), list(rolled[:3, 2]), limits="ignore")
        assert any(np.abs((np.array(q) - [20, 40, -30, 50, 60] + 180) % 360 - 180).max() < 1e-6 for q, *_ in found)


def test_a_full_pose_with_the_wrist_folded_straight_is_realisable_at_any_roll():
    """engraver5 with joint 5 at 0: axis 4 then runs along the tool axis through the tool point
    (its DH table: a4 = d5 = 0, the tool along z5), so the point and the direction leave joint 4 free
    and only the pose's roll fixes it. A full pose there is realisable whatever joint 4 reads; it was
    not_realisable unless the caller's current reading of joint 4 happened to match (the free joint
    took that reading and the roll check then failed). Reference: ikgen's forward kinematics (the DH
    link transform, Craig, 3rd ed., sec. 3.4; tests/test_kinematics.py) and the source readings."""
    module, csolver, arm = generated("engraver5", demo_arm("engraver5"))
    chain = NumericChain(arm)
    rng = np.random.default_rng(2305)
    for _ in range(12):
        q = random_readings(arm, 1, rng)[0]
        q[4] = 0.0
        pose = chain.pose(q)
        for solver in (module, csolver):
            found, status = solver.inverse(pose.tolist(), limits="ignore", with_status=True)
            assert status == "ok" and found, (q.tolist(), status)
            for s in found:
                again = chain.pose(np.array(s[0], dtype=float))
                # a singular pose (joint 5's root is 0): verify's singular-pose bound
                assert np.abs(again[:3, 3] - pose[:3, 3]).max() <= 1e-6 * arm.reach_scale()
                assert np.abs(again[:3, :3] - pose[:3, :3]).max() <= 1e-6
            # the source's own branch is among them, joint 4 and all (joint 5 at its fold is fixed only
            # to about the square root of rounding: a few 1e-6 deg)
            assert any(np.abs((np.array(s[0]) - q + 180.0) % 360.0 - 180.0).max() < 1e-4 for s in found), q.tolist()


@pytest.mark.parametrize("stem", ["mast3", "boardpick4", "engraver5"])
def test_the_natural_calls_give_the_same_solutions_in_python_and_c(stem):
    module, csolver, arm = generated(stem, demo_arm(stem))
    chain = NumericChain(arm)
    rng = np.random.default_rng(99)
    limits = arm.limits_in_readings()
    compared = 0
    for _ in range(40):
        source = limits[:, 0] + rng.random(arm.dof) * (limits[:, 1] - limits[:, 0])
        pose = chain.pose(source)
        if module.TARGET == "point":
            args = (list(pose[:3, 3]),)
            call = "inverse_point"
        elif module.TARGET == "point_and_angle":
            angle = float(rng.uniform(-170, 170))
            args = (list(pose[:3, 3]), angle)
            call = "inverse_point_angle"
        else:
            args = (list(pose[:3, 3]), list(pose[:3, "xyz".index(module.TOOL_AXIS)]))
            call = "inverse_point_direction"
        for limits_mode in ("ignore", "drop"):
            py = getattr(module, call)(*args, limits=limits_mode, with_status=True)
            cc = getattr(csolver, call)(*args, limits=limits_mode, with_status=True)
            assert py[1] == cc[1]
            assert len(py[0]) == len(cc[0])
            for a, b in zip(py[0], cc[0]):
                assert np.abs(np.array(a[0]) - np.array(b[0])).max() < 1e-9
                assert a[1] == b[1] and a[2] == b[2] and a[4] == b[4]
            compared += len(py[0])
    assert compared > 40



@pytest.mark.parametrize("stem", ["mast3", "boardpick4", "engraver5", "kilnreach6"])
def test_the_batch_solver_gives_the_per_pose_solutions_for_every_target(stem):
    """The batch module's docstring is the specification: the valid entries of row i, in order,
    are the per-pose solver's raw solutions (limits ignored) of input i; natural inputs too."""
    arm = demo_arm(stem)
    result = shared.built(arm)          # the session's one build of the demo (tests/shared.py)
    py = load_module(result.files[result.python_path], f"{stem}_ik_for_batch_targets")
    batch = load_module(result.files[f"{stem}/{stem}_ik_batch.py"], f"{stem}_ik_batch_targets")
    chain = NumericChain(arm)
    rng = np.random.default_rng(5)
    limits = arm.limits_in_readings()
    readings = limits[:, 0] + rng.random((400, arm.dof)) * (limits[:, 1] - limits[:, 0])
    poses = chain.poses(readings)
    points = poses[:, :3, 3]
    if py.TARGET == "point":
        joints, valid, *_ = batch.inverse_batch_point(points)
        expected = [py.inverse_point(list(p), limits="ignore") for p in points]
    elif py.TARGET == "point_and_angle":
        angles = rng.uniform(-180, 180, len(points))
        joints, valid, *_ = batch.inverse_batch_point_angle(points, angles)
        expected = [py.inverse_point_angle(list(p), a, limits="ignore") for p, a in zip(points, angles)]
    elif py.TARGET == "point_and_direction":
        directions = poses[:, :3, "xyz".index(py.TOOL_AXIS)]
        joints, valid, *_ = batch.inverse_batch_point_direction(points, directions)
        expected = [py.inverse_point_direction(list(p), list(d), limits="ignore") for p, d in zip(points, directions)]
    else:
        joints, valid, *_ = batch.inverse_batch(poses)
        expected = [py.inverse(p, limits="ignore") for p in poses]
    solved = 0
    for i, solutions in enumerate(expected):
        got = joints[i][valid[i]]
        assert len(got) == len(solutions), i
        if solutions:
            assert np.abs(got - np.array([q for q, *_ in solutions])).max() < 1e-7
            solved += 1
    assert solved > 300
    if py.TARGET == "point_and_angle":           # a tilted pose: no valid entry (per pose: not realisable)
        c, s = math.cos(1e-3), math.sin(1e-3)
        tilted = poses[:1].copy()
        tilted[0, :3, :3] = np.array([[1, 0, 0], [0, c, -s], [0, s, c]]) @ tilted[0, :3, :3]
        assert not batch.inverse_batch(tilted)[1].any()
        assert py.inverse(tilted[0], with_status=True) == ([], "not_realisable")
    if py.TARGET == "point_and_direction":       # a direction that is not a unit vector: no valid entry
        assert not batch.inverse_batch_point_direction(points[:1], 1.01 * directions[:1])[1].any()


# ---------------------------------------------------------------------------------------------
# Randomly drawn arms of each kind through `ikgen verify`'s checks (ikgen.verify: completeness
# against the source joints, round trip through the DH forward kinematics, unreachable and
# singular poses). Dimensions, directions and zero offsets are drawn; the layouts are the usual
# positioner kinds of the trade (common practice).

def random_arm(kind: str, rng):
    def u(lo, hi):
        return round(float(rng.uniform(lo, hi)), 3)

    def j(t, **k):
        k.setdefault("direction", int(rng.choice([-1, 1])))
        if t == "r":
            k.setdefault("offset", int(rng.integers(-4, 5)) * 15)
        return joint(t, **k)

    def wrist():
        return [j("r", a=0, alpha=-90, d=0), j("r", a=0, alpha=90, d=0), j("r", a=0, alpha=0, d=u(.05, .15))]
    rrp = [j("r", a=u(0, .05), alpha=-90, d=u(.2, .4)), j("r", a=0, alpha=90, d=u(0, .15)),
           j("p", a=0, alpha=0, theta=0, limits=[u(.05, .2), u(.6, .9)])]
    rpp = [j("r", a=0, alpha=0, d=u(.1, .3)), j("p", a=0, alpha=-90, theta=0, limits=[0, u(.4, .8)]),
           j("p", a=0, alpha=0, theta=0, limits=[u(.05, .1), u(.4, .6)])]
    ppp = [j("p", alpha=-90, theta=0, limits=[0, u(.5, 1)]), j("p", alpha=-90, theta=-90, limits=[0, u(.4, .8)]),
           j("p", alpha=0, theta=0, limits=[0, u(.2, .5)])]
    layouts = {
        "RRR with offsets": ([j("r", a=u(0, .1), alpha=90, d=u(.2, .4)), j("r", a=u(.2, .4), alpha=0, d=u(-.1, .1)),
                              j("r", a=u(.2, .4), alpha=0, d=0)], {"translation": [u(0, .05), 0, u(0, .05)]}),
        "RRP": (rrp, None), "RPP": (rpp, None), "PPP": (ppp, None),
        "RRPR": ([j("r", a=u(.2, .4), alpha=0, d=u(.3, .5)), j("r", a=u(.2, .4), alpha=180, d=0),
                  j("p", a=0, alpha=0, theta=0, limits=[0, u(.1, .3)]), j("r", a=0, alpha=0, d=u(0, .1))], None),
        "RRRP": ([j("r", a=u(.2, .4), alpha=0, d=u(.3, .5)), j("r", a=u(.2, .4), alpha=0, d=0),
                  j("r", a=0, alpha=0, d=0), j("p", a=0, alpha=0, theta=0, limits=[-u(.1, .3), 0])], None),
        "5R": ([j("r", a=0, alpha=90, d=u(.15, .3)), j("r", a=u(.2, .3), alpha=0, d=0), j("r", a=u(0, .05), alpha=90, d=0),
                j("r", a=0, alpha=-90, d=u(.15, .3)), j("r", a=0, alpha=90, d=0)], {"translation": [0, 0, u(.05, .1)]}),
        "RRP + wrist": (rrp + wrist(), None), "RPP + wrist": (rpp + wrist(), None), "PPP + wrist": (ppp + wrist(), None),
    }
    joints, tool = layouts[kind]
    return build_arm(joints, tool=tool, name="drawn")


KINDS = {"RRR with offsets": "point", "RRP": "point", "RPP": "point", "PPP": "point", "RRPR": "point_and_angle",
         "RRRP": "point_and_angle", "5R": "point_and_direction", "RRP + wrist": "pose", "RPP + wrist": "pose",
         "PPP + wrist": "pose"}


@pytest.mark.parametrize("kind", list(KINDS))
def test_a_randomly_drawn_arm_of_each_kind_passes_verification(kind):
    from ikgen.verify import verify
    arm = random_arm(kind, np.random.default_rng(sum(map(ord, kind))))      # a seed per kind
    derivation = derive(arm)            # only the Python solver is checked here: no other file, no report
    module = load_module(python_backend.render(arm, derivation), f"drawn_{sum(map(ord, kind))}")
    assert derivation.target.kind == KINDS[kind]
    outcome = verify(arm, module, samples=300)
    assert outcome.failures == [], (kind, outcome.failures)
    assert outcome.checked >= 290 and outcome.complete == outcome.checked
    assert outcome.unreachable_ok == outcome.unreachable_tested == 200
