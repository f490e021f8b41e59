"""Rotations and transforms (ikgen.rotations) against outside references.

References used below:
- scipy.spatial.transform.Rotation (scipy >= 1.11): ``from_euler`` with a lower-case sequence is
  extrinsic (rotations about the fixed axes), upper-case is intrinsic (about the moving axes);
  ``from_quat``/``as_quat`` are scalar-last unless ``scalar_first=True``. (scipy documentation.)
- Craig, *Introduction to Robotics: Mechanics and Control*, 3rd ed. (2005), sec. 2.8 (X-Y-Z fixed
  angles R = Rz(gamma) Ry(beta) Rx(alpha); Z-Y-X Euler angles give the same matrix; Z-Y-Z Euler
  angles R = Rz Ry Rz; Euler parameters) and sec. 2.6 (inverse transform [R^T, -R^T p]) -- from memory.
- Shepperd, "Quaternion from rotation matrix", J. Guidance and Control 1(3), 1978 -- from memory.
"""

from __future__ import annotations

import math
import warnings

import numpy as np
import pytest
import sympy as sp
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from scipy.spatial.transform import Rotation

from ikgen.rotations import (from_axis_angles, from_quaternion, homogeneous, inverse_transform, rot_x,
                             rot_y, rot_z, matrix_to_fixed_xyz, matrix_to_quaternion,
                             rotation_angle_between)

SETTINGS = settings(max_examples=15, deadline=None, suppress_health_check=[HealthCheck.too_slow])

# All twelve valid sequences: six Tait-Bryan (three different axes), six proper Euler (first = last).
SEQUENCES = ("xyz", "xzy", "yxz", "yzx", "zxy", "zyx", "xyx", "xzx", "yxy", "yzy", "zxz", "zyz")

angle = st.floats(-math.pi, math.pi, allow_nan=False, allow_infinity=False)
unit_quaternion = (st.tuples(*[st.floats(-1, 1, allow_nan=False)] * 4)
                   .filter(lambda q: np.linalg.norm(q) > 0.2)
                   .map(lambda q: np.asarray(q) / np.linalg.norm(q)))  # (w, x, y, z)


def numeric(matrix: sp.Matrix) -> np.ndarray:
    return np.array(matrix.evalf(), dtype=float)


def scipy_matrix_wxyz(q) -> np.ndarray:
    """scipy's matrix of the quaternion given as (w, x, y, z); scipy itself takes (x, y, z, w)."""
    w, x, y, z = q
    return Rotation.from_quat([x, y, z, w]).as_matrix()


def wrap(angle_difference):
    """Angle difference folded into (-pi, pi]."""
    return (np.asarray(angle_difference) + np.pi) % (2 * np.pi) - np.pi


# ---------------------------------------------------------------- from_axis_angles

@pytest.mark.parametrize("axes", SEQUENCES)
@pytest.mark.parametrize("frame", ["fixed", "moving"])
@SETTINGS
@given(angles=st.tuples(angle, angle, angle))
def test_from_axis_angles_matches_scipy_from_euler(axes, frame, angles):
    # scipy documentation: lower-case sequence = extrinsic (fixed axes), upper-case = intrinsic (moving).
    sequence = axes if frame == "fixed" else axes.upper()
    expected = Rotation.from_euler(sequence, angles).as_matrix()
    ours = numeric(from_axis_angles(axes, [sp.Float(a, 30) for a in angles], frame))
    np.testing.assert_allclose(ours, expected, rtol=0, atol=1e-13)


def test_fixed_xyz_and_zyz_euler_symbolic_forms():
    # Craig 3rd ed. sec. 2.8 (from memory): X-Y-Z fixed angles R = Rz(c) Ry(b) Rx(a);
    # Z-Y-Z Euler angles R = Rz(a) Ry(b) Rz(c).
    a, b, c = sp.symbols("a b c", real=True)
    fixed_xyz = from_axis_angles("xyz", [a, b, c], "fixed")
    assert sp.simplify(fixed_xyz - rot_z(c) * rot_y(b) * rot_x(a)) == sp.zeros(3)
    euler_zyz = from_axis_angles("zyz", [a, b, c], "moving")
    assert sp.simplify(euler_zyz - rot_z(a) * rot_y(b) * rot_z(c)) == sp.zeros(3)
    # Craig 3rd ed. sec. 2.8 (from memory): Z-Y-X Euler angles (moving) equal X-Y-Z fixed angles
    # taken in the reverse order.
    assert sp.simplify(from_axis_angles("zyx", [c, b, a], "moving") - fixed_xyz) == sp.zeros(3)


def test_elementary_quarter_turns_are_exact_and_right_handed():
    # Right-hand rule (common practice): a quarter turn about z takes x to y, about x takes y to z,
    # about y takes z to x. Exact: no float appears.
    half_pi = sp.pi / 2
    assert rot_z(half_pi) * sp.Matrix([1, 0, 0]) == sp.Matrix([0, 1, 0])
    assert rot_x(half_pi) * sp.Matrix([0, 1, 0]) == sp.Matrix([0, 0, 1])
    assert rot_y(half_pi) * sp.Matrix([0, 0, 1]) == sp.Matrix([1, 0, 0])
    r = from_axis_angles("xyz", [0, 0, half_pi], "fixed")
    assert r == sp.Matrix([[0, -1, 0], [1, 0, 0], [0, 0, 1]])
    assert not r.atoms(sp.Float)


# ---------------------------------------------------------------- from_quaternion

@SETTINGS
@given(q=unit_quaternion)
def test_from_quaternion_matches_scipy_from_quat(q):
    exact = [sp.Rational(repr(float(v))) for v in q]   # what the arm-file reader would pass
    ours = numeric(from_quaternion(*exact))
    np.testing.assert_allclose(ours, scipy_matrix_wxyz(q), rtol=0, atol=1e-13)
    # same quaternion handed to scipy scalar-first, to be sure of the component order
    np.testing.assert_allclose(ours, Rotation.from_quat(q, scalar_first=True).as_matrix(), rtol=0, atol=1e-13)


@SETTINGS
@given(q=unit_quaternion, scale=st.floats(0.5, 3.0))
def test_from_quaternion_normalises_first(q, scale):
    # scipy.from_quat normalises its input (scipy documentation); ours states the same.
    exact = [sp.Rational(repr(float(v * scale))) for v in q]
    np.testing.assert_allclose(numeric(from_quaternion(*exact)), scipy_matrix_wxyz(q * scale),
                               rtol=0, atol=1e-13)


def test_from_quaternion_quarter_turn_about_z_is_exact():
    # Euler parameters of a rotation theta about z: (cos(theta/2), 0, 0, sin(theta/2)) -- Craig
    # 3rd ed. sec. 2.8 (from memory). theta = 90 deg gives exactly Rz(90 deg).
    h = sp.sqrt(2) / 2
    assert from_quaternion(h, 0, 0, h) == rot_z(sp.pi / 2)
    assert from_quaternion(0, 1, 0, 0) == sp.diag(1, -1, -1)   # half turn about x


# ---------------------------------------------------------------- matrix_to_quaternion

def assert_same_quaternion(ours, scipy_xyzw):
    expected = np.array([scipy_xyzw[3], *scipy_xyzw[:3]])
    if np.dot(ours, expected) < 0:   # q and -q are the same rotation
        expected = -expected
    np.testing.assert_allclose(ours, expected, rtol=0, atol=1e-12)


@SETTINGS
@given(q=unit_quaternion)
def test_matrix_to_quaternion_matches_scipy_as_quat(q):
    matrix = scipy_matrix_wxyz(q)
    ours = matrix_to_quaternion(matrix)
    assert ours[0] >= 0
    assert abs(np.linalg.norm(ours) - 1) < 1e-14
    assert_same_quaternion(ours, Rotation.from_matrix(matrix).as_quat())


@pytest.mark.parametrize("axis", [(1, 0, 0), (0, 1, 0), (0, 0, 1), (1, 1, 0), (1, 1, 1), (0, -2, 1)])
@pytest.mark.parametrize("turn", [math.pi, math.pi - 1e-9, 3.0, 0.0, 1e-9])
def test_matrix_to_quaternion_every_branch(axis, turn):
    # Half turns have w = 0 and trace -1: Shepperd's method (1978, from memory) then picks the
    # largest diagonal entry, so x, y and z axes each exercise their own branch.
    rotvec = np.asarray(axis, dtype=float) / np.linalg.norm(axis) * turn
    reference = Rotation.from_rotvec(rotvec)
    ours = matrix_to_quaternion(reference.as_matrix())
    assert_same_quaternion(ours, reference.as_quat())
    np.testing.assert_allclose(scipy_matrix_wxyz(ours), reference.as_matrix(), rtol=0, atol=1e-13)


# ---------------------------------------------------------------- matrix_to_fixed_xyz

@SETTINGS
@given(roll=angle, pitch=st.floats(-1.5, 1.5), yaw=angle)
def test_matrix_to_fixed_xyz_matches_scipy_as_euler(roll, pitch, yaw):
    # scipy 'xyz' (lower case) = extrinsic = R = Rz(c) Ry(b) Rx(a), our "fixed xyz".
    matrix = Rotation.from_euler("xyz", [roll, pitch, yaw]).as_matrix()
    ours = matrix_to_fixed_xyz(matrix)
    expected = Rotation.from_matrix(matrix).as_euler("xyz")
    np.testing.assert_allclose(wrap(ours - expected), 0.0, rtol=0, atol=1e-12)


@pytest.mark.parametrize("distance", [1e-3, 1e-6, 1e-9, 1e-11, 3e-12])
@pytest.mark.parametrize("sign", [1, -1])
@SETTINGS
@given(roll=angle, yaw=angle)
def test_matrix_to_fixed_xyz_near_gimbal_lock(distance, sign, roll, yaw):
    # Near pitch = +-90 deg roll and yaw are each ill-determined, but the angles must still give
    # back the matrix (checked with scipy.from_euler) and the pitch must agree with scipy's.
    pitch = sign * (math.pi / 2 - distance)
    matrix = Rotation.from_euler("xyz", [roll, pitch, yaw]).as_matrix()
    ours = matrix_to_fixed_xyz(matrix)
    np.testing.assert_allclose(Rotation.from_euler("xyz", ours).as_matrix(), matrix, rtol=0, atol=1e-11)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")   # scipy warns about gimbal lock near the singularity
        expected = Rotation.from_matrix(matrix).as_euler("xyz")
    assert abs(ours[1] - expected[1]) < 1e-9


@pytest.mark.parametrize("sign", [1, -1])
@SETTINGS
@given(roll=angle, yaw=angle)
def test_matrix_to_fixed_xyz_at_gimbal_lock(sign, roll, yaw):
    # Exactly at pitch = +-90 deg only roll - yaw (pitch +90) or roll + yaw (pitch -90) is defined
    # (Craig 3rd ed. sec. 2.8, from memory). ikgen reports roll = 0 (its docstring); scipy sets
    # its own choice to zero, so the defined combination is what is compared.
    matrix = Rotation.from_euler("xyz", [roll, sign * math.pi / 2, yaw]).as_matrix()
    ours = matrix_to_fixed_xyz(matrix)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        expected = Rotation.from_matrix(matrix).as_euler("xyz")
    assert ours[0] == 0.0
    assert abs(ours[1] - sign * math.pi / 2) < 1e-12
    combination = lambda e: e[0] - sign * e[2]   # noqa: E731
    assert abs(wrap(combination(ours) - combination(expected))) < 1e-12
    np.testing.assert_allclose(Rotation.from_euler("xyz", ours).as_matrix(), matrix, rtol=0, atol=1e-12)


# ---------------------------------------------------------------- rotation_angle_between

@SETTINGS
@given(q1=unit_quaternion, q2=unit_quaternion)
def test_rotation_angle_between_matches_scipy_magnitude(q1, q2):
    r1, r2 = scipy_matrix_wxyz(q1), scipy_matrix_wxyz(q2)
    expected = (Rotation.from_matrix(r1).inv() * Rotation.from_matrix(r2)).magnitude()
    assert abs(rotation_angle_between(r1, r2) - expected) < 1e-12


@pytest.mark.parametrize("turn", [1e-10, 1e-7, 0.5, math.pi - 1e-7, math.pi])
def test_rotation_angle_between_small_and_large_angles(turn):
    # The trace formula alone (arccos) loses all digits below ~1e-8 rad; scipy's magnitude does not.
    axis = np.array([0.3, -0.5, 0.8]) / np.linalg.norm([0.3, -0.5, 0.8])
    base = Rotation.from_euler("zyx", [0.4, -1.1, 2.0])
    moved = base * Rotation.from_rotvec(axis * turn)
    ours = rotation_angle_between(base.as_matrix(), moved.as_matrix())
    expected = (base.inv() * moved).magnitude()
    assert abs(ours - expected) <= 1e-12 + 1e-6 * expected
    assert abs(ours - turn) <= 1e-12 + 1e-6 * turn


def test_rotation_angle_between_on_stacks():
    rotations = Rotation.from_euler("xyz", np.random.default_rng(7).uniform(-3, 3, size=(20, 3)))
    others = rotations[::-1]
    stacked = rotation_angle_between(rotations.as_matrix(), others.as_matrix())
    assert stacked.shape == (20,)
    np.testing.assert_allclose(stacked, (rotations.inv() * others).magnitude(), rtol=0, atol=1e-12)


# ---------------------------------------------------------------- homogeneous / inverse_transform

def test_inverse_transform_symbolic_is_exact_inverse():
    # Craig 3rd ed. sec. 2.6 (from memory): inverse of [R p; 0 1] is [R^T, -R^T p; 0 1].
    a, b, c, x, y, z = sp.symbols("a b c x y z", real=True)
    transform = homogeneous(from_axis_angles("zyz", [a, b, c], "moving"), [x, y, z])
    assert transform[3, :] == sp.Matrix([[0, 0, 0, 1]])
    # sin^2 = 1 - cos^2 reduces every entry of the products to a polynomial in cosines.
    pythagoras = {sp.sin(v) ** 2: 1 - sp.cos(v) ** 2 for v in (a, b, c)}
    reduce = lambda e: sp.expand(sp.expand(e).subs(pythagoras))   # noqa: E731
    assert (transform * inverse_transform(transform)).applyfunc(reduce) == sp.eye(4)
    assert (inverse_transform(transform) * transform).applyfunc(reduce) == sp.eye(4)


@SETTINGS
@given(q=unit_quaternion, p=st.tuples(*[st.floats(-1e3, 1e3)] * 3))
def test_inverse_transform_matches_numpy_inverse(q, p):
    exact_rotation = from_quaternion(*[sp.Rational(repr(float(v))) for v in q])
    transform = homogeneous(exact_rotation, [sp.Rational(repr(v)) for v in p])
    expected = np.linalg.inv(numeric(transform))
    np.testing.assert_allclose(numeric(inverse_transform(transform)), expected, rtol=0, atol=1e-10)
