"""Rotations and homogeneous transforms, exact (sympy) and numeric (numpy).

Conventions, stated once:
- A rotation by angles about three axes comes in two kinds. ``fixed`` axes: each elementary
  rotation is about an axis of the original, unmoving frame, applied in the written order, so
  ``axes = "xyz"`` gives ``R = Rz(c) @ Ry(b) @ Rx(a)`` (roll about x, pitch about y, yaw about z).
  ``moving`` axes: each rotation is about an axis of the frame as already rotated, so ``"zyz"``
  gives ``R = Rz(a) @ Ry(b) @ Rz(c)``. (Same meaning as scipy's lower-case / upper-case sequences.)
- A unit quaternion is ``w + x i + y j + z k`` with ``w`` the scalar part; the file names its
  component order (``"wxyz"`` or ``"xyzw"``).
"""

from __future__ import annotations

import math

import numpy as np
import sympy as sp

AXES = "xyz"


def rot_x(angle) -> sp.Matrix:
    c, s = sp.cos(angle), sp.sin(angle)
    return sp.Matrix([[1, 0, 0], [0, c, -s], [0, s, c]])


def rot_y(angle) -> sp.Matrix:
    c, s = sp.cos(angle), sp.sin(angle)
    return sp.Matrix([[c, 0, s], [0, 1, 0], [-s, 0, c]])


def rot_z(angle) -> sp.Matrix:
    c, s = sp.cos(angle), sp.sin(angle)
    return sp.Matrix([[c, -s, 0], [s, c, 0], [0, 0, 1]])


_ELEMENTARY = {"x": rot_x, "y": rot_y, "z": rot_z}


def from_axis_angles(axes: str, angles, frame: str) -> sp.Matrix:
    """Exact rotation from three angles (radians, sympy) about ``axes`` of a ``fixed`` or ``moving`` frame."""
    factors = [_ELEMENTARY[axis](angle) for axis, angle in zip(axes, angles)]
    result = sp.eye(3)
    for factor in (reversed(factors) if frame == "fixed" else factors):
        result = result * factor
    return sp.simplify(result) if any(not sp.sympify(a).is_number for a in angles) else result


def from_quaternion(w, x, y, z) -> sp.Matrix:
    """Exact rotation of the unit quaternion ``w + xi + yj + zk`` (normalised exactly first)."""
    norm = sp.sqrt(w * w + x * x + y * y + z * z)
    w, x, y, z = (_tidy(c / norm) if norm != 1 else c for c in (w, x, y, z))
    return sp.Matrix([
        [1 - 2 * (y * y + z * z), 2 * (x * y - z * w), 2 * (x * z + y * w)],
        [2 * (x * y + z * w), 1 - 2 * (x * x + z * z), 2 * (y * z - x * w)],
        [2 * (x * z - y * w), 2 * (y * z + x * w), 1 - 2 * (x * x + y * y)],
    ])


def _tidy(value: sp.Expr) -> sp.Expr:
    """``nsimplify``'s simpler form of an exact value, kept only if it equals the value to 1e-15.

    nsimplify is a heuristic and can be wrong: it turns 1/sqrt(1 + 1e-600) into 0.
    """
    simple = sp.nsimplify(value)
    return simple if abs((simple - value).evalf(30)) <= 1e-15 else value


def homogeneous(rotation: sp.Matrix, translation) -> sp.Matrix:
    """4x4 exact transform from a 3x3 rotation and a translation."""
    result = sp.eye(4)
    result[:3, :3] = rotation
    result[:3, 3] = sp.Matrix(translation)
    return result


def inverse_transform(transform: sp.Matrix) -> sp.Matrix:
    """Inverse of a rigid transform, using R^T (exact, no matrix inversion)."""
    rotation_t = transform[:3, :3].T
    return homogeneous(rotation_t, -rotation_t * transform[:3, 3])


# ---------------------------------------------------------------- numeric helpers (numpy)

def matrix_to_quaternion(rotation: np.ndarray) -> np.ndarray:
    """Unit quaternion (w, x, y, z) with w >= 0 of a 3x3 rotation (Shepperd's method)."""
    r = np.asarray(rotation, dtype=float)
    trace = r[0, 0] + r[1, 1] + r[2, 2]
    candidates = [trace, r[0, 0], r[1, 1], r[2, 2]]
    k = int(np.argmax(candidates))
    if k == 0:
        w = 0.5 * math.sqrt(max(1.0 + trace, 0.0))
        q = [w, (r[2, 1] - r[1, 2]) / (4 * w), (r[0, 2] - r[2, 0]) / (4 * w), (r[1, 0] - r[0, 1]) / (4 * w)]
    else:
        i = k - 1
        j, m = (i + 1) % 3, (i + 2) % 3
        v = 0.5 * math.sqrt(max(1.0 + r[i, i] - r[j, j] - r[m, m], 0.0))
        q = [0.0, 0.0, 0.0, 0.0]
        q[1 + i] = v
        q[0] = (r[m, j] - r[j, m]) / (4 * v)
        q[1 + j] = (r[j, i] + r[i, j]) / (4 * v)
        q[1 + m] = (r[m, i] + r[i, m]) / (4 * v)
    q = np.array(q)
    q /= np.linalg.norm(q)
    return -q if q[0] < 0 else q


def matrix_to_fixed_xyz(rotation: np.ndarray) -> np.ndarray:
    """Angles (a, b, c) in radians with R = Rz(c) Ry(b) Rx(a): roll, pitch, yaw about fixed axes.

    At pitch = +-90 deg roll and yaw are not unique; roll is then reported as 0.
    """
    r = np.asarray(rotation, dtype=float)
    pitch = math.atan2(-r[2, 0], math.hypot(r[0, 0], r[1, 0]))
    if math.hypot(r[0, 0], r[1, 0]) < 1e-12:
        return np.array([0.0, pitch, math.atan2(-r[0, 1], r[1, 1])])
    yaw = math.atan2(r[1, 0], r[0, 0])
    # Roll from entries of size ~1, not from r[2, 1], r[2, 2] (~cos(pitch), inaccurate near +-90 deg):
    # the middle row of Rz(yaw)^T R = Ry(pitch) Rx(roll) is (0, cos(roll), -sin(roll)).
    cy, sy = math.cos(yaw), math.sin(yaw)
    roll = math.atan2(sy * r[0, 2] - cy * r[1, 2], cy * r[1, 1] - sy * r[0, 1])
    return np.array([roll, pitch, yaw])


def rotation_angle_between(r1: np.ndarray, r2: np.ndarray) -> np.ndarray:
    """Angle (radians) of the rotation r1^T r2, for stacks of 3x3 matrices; robust near 0."""
    r1, r2 = np.asarray(r1, dtype=float), np.asarray(r2, dtype=float)
    delta = np.swapaxes(r1, -1, -2) @ r2
    # sin from the skew part, cos from the trace: atan2 keeps accuracy at small angles.
    skew = np.stack([delta[..., 2, 1] - delta[..., 1, 2], delta[..., 0, 2] - delta[..., 2, 0],
                     delta[..., 1, 0] - delta[..., 0, 1]], axis=-1)
    sin_part = 0.5 * np.linalg.norm(skew, axis=-1)
    cos_part = 0.5 * (np.trace(delta, axis1=-2, axis2=-1) - 1.0)
    return np.arctan2(sin_part, cos_part)
