"""Generated solvers against closed forms from textbooks, scipy, and an independent numerical search.

Sources (formulas recalled from memory; section numbers as recalled, not re-checked against a copy):
- [SHV] Spong, Hutchinson, Vidyasagar, *Robot Modeling and Control*, 1st ed. (2006):
  sec. 3.2 (standard DH link transform A_i = Rz(theta_i) Tz(d_i) Tx(a_i) Rx(alpha_i));
  ch. 5, kinematic decoupling (sec. 5.2 as recalled): wrist centre o_c = o - d6 R k, inverse
  position of the elbow manipulator (with and without a shoulder offset d), and inverse
  orientation of a spherical wrist as Z-Y-Z Euler angles (the Euler-angle solution of ch. 2).
- [Craig] Craig, *Introduction to Robotics: Mechanics and Control*, 3rd ed. (2005): sec. 3.5
  (modified DH link transform A_i = Rx(alpha_{i-1}) Tx(a_{i-1}) Rz(theta_i) Tz(d_i)); sec. 4.7
  (algebraic solution of a six-axis arm with shoulder offset d3 and elbow offset a3).
- scipy.spatial.transform.Rotation (scipy documentation): as_euler('ZYZ') gives intrinsic
  z-y'-z'' angles with the middle angle in [0, pi].
- scipy.optimize.least_squares as an independent multi-start numerical search (common practice
  for checking that a closed form misses no solution).

The arms in this file use dimensions invented for the tests (not any product's). The reference
forward kinematics below is written from the two textbook link formulas with numpy only.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.optimize import least_squares
from scipy.spatial.transform import Rotation

import shared
from helpers import DEMO_FILES, build_arm, demo_arm, joint
from ikgen.generate import load_module
from ikgen.kinematics import NumericChain

TWO_PI = 2.0 * math.pi

# ----------------------------------------------------------------------------- reference FK

def dh_standard(a: float, alpha: float, d: float, theta: float) -> np.ndarray:
    """[SHV] sec. 3.2: A = Rz(theta) Tz(d) Tx(a) Rx(alpha), written out (from memory)."""
    ct, st, ca, sa = math.cos(theta), math.sin(theta), math.cos(alpha), math.sin(alpha)
    return np.array([[ct, -st * ca, st * sa, a * ct],
                     [st, ct * ca, -ct * sa, a * st],
                     [0.0, sa, ca, d],
                     [0.0, 0.0, 0.0, 1.0]])


def dh_modified(a_prev: float, alpha_prev: float, d: float, theta: float) -> np.ndarray:
    """[Craig] sec. 3.5: A = Rx(alpha_{i-1}) Tx(a_{i-1}) Rz(theta_i) Tz(d_i), written out (from memory)."""
    ct, st, ca, sa = math.cos(theta), math.sin(theta), math.cos(alpha_prev), math.sin(alpha_prev)
    return np.array([[ct, -st, 0.0, a_prev],
                     [st * ca, ct * ca, -sa, -sa * d],
                     [st * sa, ct * sa, ca, ca * d],
                     [0.0, 0.0, 0.0, 1.0]])


def chain(link, table, thetas) -> np.ndarray:
    """Product of the link transforms for rows (a, alpha, d) and joint angles ``thetas``."""
    result = np.eye(4)
    for (a, alpha, d), theta in zip(table, thetas):
        result = result @ link(a, alpha, d, theta)
    return result


def wrapped(x) -> np.ndarray:
    return (np.asarray(x, dtype=float) + math.pi) % TWO_PI - math.pi


def same_angles(p, q, tol: float) -> bool:
    return bool(np.max(np.abs(wrapped(np.asarray(p) - np.asarray(q)))) < tol)


def assert_same_sets(reference: list, generated: list, tol: float, what: str):
    """Every reference vector appears among the generated ones (mod 2 pi) and vice versa."""
    for r in reference:
        assert any(same_angles(r, g, tol) for g in generated), \
            f"{what}: reference solution {np.round(r, 9)} missing from the generated set {np.round(generated, 6)}"
    for g in generated:
        assert any(same_angles(r, g, tol) for r in reference), \
            f"{what}: generated solution {np.round(g, 9)} is not in the reference set {np.round(reference, 6)}"
    assert len(generated) == len(reference), f"{what}: {len(generated)} generated vs {len(reference)} reference"


# ------------------------------------------------------- [SHV] elbow manipulator + spherical wrist
# Standard DH (invented dimensions, metres): joint 1 alpha = 90 deg with d1; joints 2 and 3
# parallel with a2, a3; alpha3 = 90 deg turns z3 along the forearm so that axis 4 passes
# through o3, the wrist centre; the wrist is [SHV]'s spherical wrist (alpha4 = -90, alpha5 = 90
# deg, d6), so R36 = Rz(th4) Ry(th5) Rz(th6), Z-Y-Z Euler angles.
# With the offset, d2 = -OFFSET: the arm's plane is moved by OFFSET along -z1, the side for which
# the book's formula theta1 = atan2(yc, xc) - atan2(d, +-sqrt(xc^2 + yc^2 - d^2)) holds as
# recalled (the test checks the reference's own solutions against its own FK before using it).

D1, A2, A3, D6, OFFSET = 0.34, 0.41, 0.37, 0.09, 0.13


def spong_table(offset: float) -> list[tuple]:
    return [(0.0, math.pi / 2, D1), (A2, 0.0, -offset), (A3, math.pi / 2, 0.0),
            (0.0, -math.pi / 2, 0.0), (0.0, math.pi / 2, 0.0), (0.0, 0.0, D6)]


def spong_arm(offset: float):
    joints = [joint(a=0, alpha="pi/2", d=D1), joint(a=A2, alpha=0, d=-offset), joint(a=A3, alpha="pi/2", d=0),
              joint(a=0, alpha="-pi/2", d=0), joint(a=0, alpha="pi/2", d=0), joint(a=0, alpha=0, d=D6)]
    return build_arm(joints, convention="standard", length_unit="m", angle_unit="rad",
                     name=f"elbow_offset_{offset}")


def spong_wrist(r36: np.ndarray) -> list[tuple]:
    """[SHV] ch. 5 inverse orientation (Z-Y-Z Euler angles, ch. 2), both branches (from memory):
    th5 = atan2(+-sqrt(1 - r33^2), r33); th4 = atan2(+-r23, +-r13); th6 = atan2(+-r32, -+r31)."""
    out = []
    for sign in (1.0, -1.0):
        s5 = sign * math.hypot(r36[0, 2], r36[1, 2])
        out.append((math.atan2(sign * r36[1, 2], sign * r36[0, 2]), math.atan2(s5, r36[2, 2]),
                    math.atan2(sign * r36[2, 1], -sign * r36[2, 0])))
    return out


def spong_solutions(pose: np.ndarray, offset: float) -> list[np.ndarray]:
    """[SHV] ch. 5 kinematic decoupling (from memory), all 8 solutions of a generic pose."""
    rotation = pose[:3, :3]
    xc, yc, zc = pose[:3, 3] - D6 * rotation[:, 2]                   # o_c = o - d6 R k
    root = math.sqrt(xc * xc + yc * yc - offset * offset)
    big_d = (xc * xc + yc * yc - offset * offset + (zc - D1) ** 2 - A2 * A2 - A3 * A3) / (2 * A2 * A3)
    table = spong_table(offset)
    out = []
    for r in (root, -root):
        th1 = math.atan2(yc, xc) - math.atan2(offset, r)
        for sign in (1.0, -1.0):
            th3 = math.atan2(sign * math.sqrt(1 - big_d * big_d), big_d)
            th2 = math.atan2(zc - D1, r) - math.atan2(A3 * math.sin(th3), A2 + A3 * math.cos(th3))
            r03 = chain(dh_standard, table[:3], (th1, th2, th3))[:3, :3]
            for th4, th5, th6 in spong_wrist(r03.T @ rotation):
                out.append(np.array([th1, th2, th3, th4, th5, th6]))
    return out


def spong_generic(q: np.ndarray, offset: float) -> bool:
    """Away from the singular set: wrist not straight, elbow not straight, wrist centre off axis 1."""
    position = chain(dh_standard, spong_table(offset)[:3], q[:3])[:3, 3]
    return (abs(math.sin(q[4])) > 0.1 and abs(math.sin(q[2])) > 0.1
            and math.hypot(position[0], position[1]) ** 2 - offset ** 2 > 0.01)


@pytest.fixture(scope="module")
def spong_solvers():
    return {offset: load_module(shared.python_source(arm), f"{arm.name}_ik")
            for offset in (0.0, OFFSET) for arm in [spong_arm(offset)]}


@pytest.mark.parametrize("offset", [0.0, OFFSET], ids=["no_offset", "shoulder_offset"])
def test_elbow_manipulator_matches_spong_closed_form(spong_solvers, offset):
    solver = spong_solvers[offset]
    table = spong_table(offset)
    rng = np.random.default_rng(501)
    tested = 0
    while tested < 25:
        q = rng.uniform(-math.pi, math.pi, 6)
        if not spong_generic(q, offset):
            continue
        tested += 1
        pose = chain(dh_standard, table, q)
        reference = spong_solutions(pose, offset)
        # The recalled formulas must themselves be right: each reproduces the pose, and the
        # source configuration is among them.
        for r in reference:
            assert np.allclose(chain(dh_standard, table, r), pose, atol=1e-12), "reference formula broken"
        assert any(same_angles(r, q, 1e-9) for r in reference)
        generated = [np.array(s[0]) for s in solver.inverse(pose, limits="ignore")]
        assert_same_sets(reference, generated, 1e-8, f"offset {offset}, q = {np.round(q, 4)}")


# ------------------------------------------------------------ [Craig] sec. 4.7, modified DH
# Craig's table (modified DH; row i: alpha_{i-1}, a_{i-1}, d_i, theta_i):
#   1: 0, 0, 0        2: -90, 0, 0       3: 0, a2, d3
#   4: -90, a3, d4    5: 90, 0, 0        6: -90, 0, 0
# In our file format row i holds a = a_{i-1}, alpha = alpha_{i-1}, d = d_i. Invented dimensions:
CA2, CA3, CD3, CD4 = 0.45, 0.035, 0.11, 0.42
CRAIG_TABLE = [(0.0, 0.0, 0.0), (0.0, -math.pi / 2, 0.0), (CA2, 0.0, CD3),
               (CA3, -math.pi / 2, CD4), (0.0, math.pi / 2, 0.0), (0.0, -math.pi / 2, 0.0)]


def craig_arm():
    joints = [joint(a=0, alpha=0, d=0), joint(a=0, alpha="-pi/2", d=0), joint(a=CA2, alpha=0, d=CD3),
              joint(a=CA3, alpha="-pi/2", d=CD4), joint(a=0, alpha="pi/2", d=0), joint(a=0, alpha="-pi/2", d=0)]
    return build_arm(joints, convention="modified", length_unit="m", angle_unit="rad", name="craig_sec47")


def craig_solutions(pose: np.ndarray) -> list[np.ndarray]:
    """[Craig] sec. 4.7 (from memory): the eight solutions for 0T6 (frame 6 at the wrist centre)."""
    (r11, r12, r13), (r21, r22, r23), (r31, r32, r33) = pose[:3, :3]
    px, py, pz = pose[:3, 3]
    out = []
    root1 = math.sqrt(px * px + py * py - CD3 * CD3)
    for sign1 in (1.0, -1.0):
        th1 = math.atan2(py, px) - math.atan2(CD3, sign1 * root1)
        c1, s1 = math.cos(th1), math.sin(th1)
        k = (px * px + py * py + pz * pz - CA2 * CA2 - CA3 * CA3 - CD3 * CD3 - CD4 * CD4) / (2 * CA2)
        root3 = math.sqrt(CA3 * CA3 + CD4 * CD4 - k * k)
        for sign3 in (1.0, -1.0):
            th3 = math.atan2(CA3, CD4) - math.atan2(k, sign3 * root3)
            c3, s3 = math.cos(th3), math.sin(th3)
            th23 = math.atan2((-CA3 - CA2 * c3) * pz - (c1 * px + s1 * py) * (CD4 - CA2 * s3),
                              (CA2 * s3 - CD4) * pz + (CA3 + CA2 * c3) * (c1 * px + s1 * py))
            th2 = th23 - th3
            c23, s23 = math.cos(th23), math.sin(th23)
            th4 = math.atan2(-r13 * s1 + r23 * c1, -r13 * c1 * c23 - r23 * s1 * c23 + r33 * s23)
            c4, s4 = math.cos(th4), math.sin(th4)
            s5 = -(r13 * (c1 * c23 * c4 + s1 * s4) + r23 * (s1 * c23 * c4 - c1 * s4) - r33 * (s23 * c4))
            c5 = r13 * (-c1 * s23) + r23 * (-s1 * s23) + r33 * (-c23)
            th5 = math.atan2(s5, c5)
            s6 = -r11 * (c1 * c23 * s4 - s1 * c4) - r21 * (s1 * c23 * s4 + c1 * c4) + r31 * (s23 * s4)
            c6 = (r11 * ((c1 * c23 * c4 + s1 * s4) * c5 - c1 * s23 * s5)
                  + r21 * ((s1 * c23 * c4 - c1 * s4) * c5 - s1 * s23 * s5)
                  - r31 * (s23 * c4 * c5 + c23 * s5))
            th6 = math.atan2(s6, c6)
            out.append(np.array([th1, th2, th3, th4, th5, th6]))
            # The book's second wrist solution: th4 + 180, -th5, th6 + 180.
            out.append(np.array([th1, th2, th3, th4 + math.pi, -th5, th6 + math.pi]))
    return out


@pytest.fixture(scope="module")
def craig_solver():
    arm = craig_arm()
    return load_module(shared.python_source(arm), f"{arm.name}_ik")


def test_six_axis_arm_matches_craig_closed_form(craig_solver):
    rng = np.random.default_rng(47)
    tested = 0
    while tested < 25:
        q = rng.uniform(-math.pi, math.pi, 6)
        pose = chain(dh_modified, CRAIG_TABLE, q)
        px, py, pz = pose[:3, 3]
        k = (px * px + py * py + pz * pz - CA2 ** 2 - CA3 ** 2 - CD3 ** 2 - CD4 ** 2) / (2 * CA2)
        # stay away from the singular set: wrist straight, elbow stretched, wrist centre near axis 1
        if abs(math.sin(q[4])) < 0.1 or CA3 ** 2 + CD4 ** 2 - k * k < 1e-3 or px * px + py * py - CD3 ** 2 < 1e-3:
            continue
        tested += 1
        reference = craig_solutions(pose)
        for r in reference:
            assert np.allclose(chain(dh_modified, CRAIG_TABLE, r), pose, atol=1e-12), "reference formula broken"
        assert any(same_angles(r, q, 1e-9) for r in reference)
        generated = [np.array(s[0]) for s in craig_solver.inverse(pose, limits="ignore")]
        assert_same_sets(reference, generated, 1e-8, f"q = {np.round(q, 4)}")


# ------------------------------------------------------------------- the wrist alone vs scipy

def test_wrist_angles_match_scipy_zyz(spong_solvers):
    """[SHV]'s spherical wrist makes R36 = Rz(th4) Ry(th5) Rz(th6); scipy's as_euler('ZYZ') gives
    one branch (th5 in [0, pi]) and (th4 + pi, -th5, th6 + pi) is the other."""
    solver = spong_solvers[0.0]
    table = spong_table(0.0)
    rng = np.random.default_rng(36)
    rotations = Rotation.random(30, random_state=rng)
    for rotation in rotations:
        matrix = rotation.as_matrix()
        arm = rng.uniform(-math.pi, math.pi, 3)
        pose = np.eye(4)
        pose[:3, :3] = matrix
        pose[:3, 3] = chain(dh_standard, table[:3], arm)[:3, 3] + D6 * matrix[:, 2]
        solutions = [np.array(s[0]) for s in solver.inverse(pose, limits="ignore")]
        assert len(solutions) == 8
        arm_triples = []
        for s in solutions:
            if not any(same_angles(s[:3], t, 1e-9) for t in arm_triples):
                arm_triples.append(s[:3])
        assert len(arm_triples) == 4
        for triple in arm_triples:
            r36 = chain(dh_standard, table[:3], triple)[:3, :3].T @ matrix
            a, b, c = Rotation.from_matrix(r36).as_euler("ZYZ")
            assert 1e-3 < b < math.pi - 1e-3, "random rotation too close to the wrist singularity"
            expected = [(a, b, c), (a + math.pi, -b, c + math.pi)]
            wrists = [s[3:] for s in solutions if same_angles(s[:3], triple, 1e-9)]
            assert_same_sets(expected, wrists, 1e-8, f"wrist for arm joints {np.round(triple, 4)}")


# ----------------------------------------------- completeness against a multi-start search

SEARCH_POSES = 15
SEARCH_SEEDS = 40
CONVERGED = 1e-10          # max residual entry (position / length scale, rotation matrix entries)
MATCH = 1e-5               # radians, modulo 2 pi


@pytest.fixture(scope="module", params=[p.stem for p in DEMO_FILES])
def demo(request):
    arm = demo_arm(request.param)
    return arm, load_module(shared.python_source(arm), f"{arm.name}_ik")


def test_no_numerical_solution_is_missed(demo):
    arm, solver = demo
    numeric = NumericChain(arm)
    scales = arm.reading_scales()
    length = arm.reach_scale()
    limits = arm.limits_in_readings() * scales[:, None]           # radians
    rng = np.random.default_rng(1968)
    converged_total = 0
    for _ in range(SEARCH_POSES):
        source = limits[:, 0] + rng.random(6) * (limits[:, 1] - limits[:, 0])
        target = numeric.pose(source / scales)

        def residual(x):
            pose = numeric.pose(x / scales)
            return np.concatenate([(pose[:3, 3] - target[:3, 3]) / length, (pose[:3, :3] - target[:3, :3]).ravel()])

        def jacobian(x):
            step = 1e-7
            trial = np.repeat(x[None, :], 12, axis=0)
            trial[:6] += step * np.eye(6)
            trial[6:] -= step * np.eye(6)
            poses = numeric.poses(trial / scales)
            values = np.concatenate([(poses[:, :3, 3] - target[:3, 3]) / length,
                                     (poses[:, :3, :3] - target[:3, :3]).reshape(12, 9)], axis=1)
            return ((values[:6] - values[6:]) / (2 * step)).T

        generated = [np.array(s[0]) * scales for s in solver.inverse(target, limits="ignore")]
        assert any(same_angles(g, source, MATCH) for g in generated), \
            f"{arm.name}: the source joints {np.round(source / scales, 6)} are not among the solutions"
        seeds = limits[:, 0] + rng.random((SEARCH_SEEDS, 6)) * (limits[:, 1] - limits[:, 0])
        for seed in seeds:
            fit = least_squares(residual, seed, jac=jacobian, method="lm", xtol=1e-15, ftol=1e-15, gtol=1e-15)
            if np.max(np.abs(residual(fit.x))) >= CONVERGED:
                continue
            converged_total += 1
            assert any(same_angles(g, fit.x, MATCH) for g in generated), \
                (f"{arm.name}: the search found joints {np.round(fit.x / scales, 6)} ({arm.angle_unit}) reaching "
                 f"the pose of {np.round(source / scales, 4)}, missing from the solver's {len(generated)} solutions")
    # The search must actually find solutions, or the check above proves nothing.
    assert converged_total >= SEARCH_POSES * SEARCH_SEEDS // 4
