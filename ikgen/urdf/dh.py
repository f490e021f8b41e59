"""DH frames from joint-axis lines at the zero configuration (numeric, numpy).

The procedure is the classic one for placing DH frames on a serial chain, in the form given by
K. M. Lynch and F. C. Park, *Modern Robotics*, Cambridge University Press 2017, Appendix C
(and, for the proximal variant, J. J. Craig, *Introduction to Robotics*, 3rd ed., sec. 3.4):

* Every moving joint's axis is a line in the root link's frame at the zero configuration: a point
  (the joint frame's origin) and a direction (the joint frame's rotation times the URDF axis).
* Consecutive axis lines are **skew** (one common normal: the x axis runs along it, from the
  earlier line to the later one, and ``a`` is its length), **intersecting** (the x axis is normal
  to the plane of both lines, at their meeting point, ``a = 0``), **parallel** (infinitely many
  common normals: the one through the previous frame's origin is taken, which makes ``d = 0``)
  or **coincident** (the previous frame's x axis and origin are kept: ``a = 0``, ``d = 0``).
  Where the x axis may point either way (intersecting lines) it is taken on the side of the
  previous x axis, so that the joint's constant angle stays within +-90 deg.
* Frame 0 lies on the first axis at the point nearest the root link's origin, its x axis the
  root's x (or y, when x is within 30 deg of the axis) made normal to the axis.
* The last frame lies on the last axis at the point nearest the tip link's origin, its axes
  parallel to the frame before it; the tool transform holds the rest of the tool's pose.
* Standard (distal) DH puts frame i's z on joint i+1's axis; modified (proximal) DH puts frame
  i's z on joint i's own axis. The base transform is frame 0 in the root frame.

The DH z axis of a joint is the URDF axis or its reverse: reversed when the axis as written in
its joint frame points mainly along a negative direction (``0 0 -1``), and then the joint's
direction is -1, so that readings equal the URDF joint positions.

Tolerances (``ANGLE_TOLERANCE``, ``LENGTH_TOLERANCE`` times the chain's length scale) decide
which case applies; values within them are then made exact by ``ikgen.urdf.snap``.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

ANGLE_TOLERANCE = 1e-12     # radians: lines closer than this to parallel are parallel
LENGTH_TOLERANCE = 1e-12    # times the length scale: lines closer than this meet


@dataclass(frozen=True)
class AxisLine:
    point: np.ndarray           # a point on the axis, root frame
    direction: np.ndarray       # unit DH z direction (the URDF axis, or its reverse)
    sign: int                   # +1, or -1 when the DH z axis is the reverse of the URDF axis


@dataclass(frozen=True)
class Row:
    a: float
    alpha: float
    d: float
    theta: float                # the DH angle at the zero reading


@dataclass(frozen=True)
class Placement:
    frames: list                # 4x4 DH frames 0..n in the root frame, zero configuration
    rows: list                  # Row per joint
    relations: list             # "skew", "intersecting", "parallel", "coincident" per consecutive pair
    base: np.ndarray            # root <- frame 0
    tool: np.ndarray            # frame n <- tip link


def axis_sign(axis: np.ndarray) -> int:
    """-1 when the axis, as written in its joint frame, points mainly along a negative direction."""
    largest = np.max(np.abs(axis))
    first = next(v for v in axis if abs(v) >= largest * (1 - 1e-12))
    return -1 if first < 0 else 1


def unit(v: np.ndarray) -> np.ndarray:
    return v / np.linalg.norm(v)


def frame(x: np.ndarray, z: np.ndarray, origin: np.ndarray) -> np.ndarray:
    result = np.eye(4)
    result[:3, 0], result[:3, 1], result[:3, 2], result[:3, 3] = x, np.cross(z, x), z, origin
    return result


def foot(point: np.ndarray, line_point: np.ndarray, direction: np.ndarray) -> np.ndarray:
    """The point of the line nearest ``point``."""
    return line_point + np.dot(point - line_point, direction) * direction


def first_frame(line: AxisLine) -> np.ndarray:
    z = line.direction
    origin = foot(np.zeros(3), line.point, z)
    for candidate in np.eye(3)[:2]:
        x = candidate - np.dot(candidate, z) * z
        if np.linalg.norm(x) >= 0.5:          # within 30 deg of the axis: use the next root axis
            return frame(unit(x), z, origin)
    raise AssertionError("one of the root's x and y axes is always 30 deg or more from any line")


def normal_between(p1, z1, p2, z2, x_before, scale) -> tuple[str, np.ndarray, np.ndarray, np.ndarray]:
    """(relation, x, point on line 1, point on line 2) for the common normal of two axis lines;
    p1 is where the normal must start when the lines are parallel (d = 0 on the earlier frame)."""
    cross = np.cross(z1, z2)
    sine = np.linalg.norm(cross)
    if sine <= ANGLE_TOLERANCE:
        on2 = foot(p1, p2, z2)
        gap = on2 - p1
        distance = np.linalg.norm(gap)
        if distance <= LENGTH_TOLERANCE * scale:
            return "coincident", x_before, p1, p1
        return "parallel", gap / distance, p1, on2
    w = p1 - p2
    b, d, e = np.dot(z1, z2), np.dot(z1, w), np.dot(z2, w)
    denominator = 1.0 - b * b
    t, u = (b * e - d) / denominator, (e - b * d) / denominator
    on1, on2 = p1 + t * z1, p2 + u * z2
    gap = on2 - on1
    distance = np.linalg.norm(gap)
    if distance <= LENGTH_TOLERANCE * scale:
        x = cross / sine
        if np.dot(x, x_before) < -1e-12:      # keep the joint's constant angle within +-90 deg
            x = -x
        return "intersecting", x, on2, on2
    return "skew", gap / distance, on1, on2


def standard_frames(lines: list[AxisLine], tip: np.ndarray, scale: float):
    frames, relations = [first_frame(lines[0])], []
    for later in lines[1:]:
        previous = frames[-1]
        relation, x, _, on_later = normal_between(previous[:3, 3], previous[:3, 2], later.point,
                                                  later.direction, previous[:3, 0], scale)
        relations.append(relation)
        frames.append(frame(x, later.direction, on_later))
    last = frames[-1]
    frames.append(frame(last[:3, 0], last[:3, 2], foot(tip[:3, 3], last[:3, 3], last[:3, 2])))
    return frames, relations


def modified_frames(lines: list[AxisLine], tip: np.ndarray, scale: float):
    frames, relations = [first_frame(lines[0])], []
    meets = frames[0][:3, 3]                  # where the previous x axis meets the current line
    for current, later in zip(lines, lines[1:]):
        x_before = frames[-1][:3, 0]
        start = foot(meets, current.point, current.direction)
        relation, x, on_current, on_later = normal_between(start, current.direction, later.point,
                                                           later.direction, x_before, scale)
        relations.append(relation)
        frames.append(frame(x, current.direction, on_current))
        meets = on_later
    last = lines[-1]
    frames.append(frame(frames[-1][:3, 0], last.direction, foot(tip[:3, 3], last.point, last.direction)))
    return frames, relations


def signed_angle(u: np.ndarray, v: np.ndarray, about: np.ndarray) -> float:
    return float(np.arctan2(np.dot(np.cross(u, v), about), np.dot(u, v)))


def rows_from_frames(frames: list, convention: str) -> list[Row]:
    rows = []
    for before, after in zip(frames, frames[1:]):
        x0, z0, o0 = before[:3, 0], before[:3, 2], before[:3, 3]
        x1, z1, o1 = after[:3, 0], after[:3, 2], after[:3, 3]
        step = o1 - o0
        if convention == "standard":    # A = Rz(theta) Tz(d) Tx(a) Rx(alpha): theta, d about/along z0
            rows.append(Row(a=float(np.dot(step, x1)), alpha=signed_angle(z0, z1, x1), d=float(np.dot(step, z0)),
                            theta=signed_angle(x0, x1, z0)))
        else:                           # A = Rx(alpha) Tx(a) Rz(theta) Tz(d): alpha, a about/along x0
            rows.append(Row(a=float(np.dot(step, x0)), alpha=signed_angle(z0, z1, x0), d=float(np.dot(step, z1)),
                            theta=signed_angle(x0, x1, z1)))
    return rows


def place_frames(lines: list[AxisLine], tip: np.ndarray, convention: str, scale: float) -> Placement:
    """DH frames, rows, base and tool for axis lines at the zero configuration and the tip link's
    pose ``tip`` (4x4, root frame)."""
    make = standard_frames if convention == "standard" else modified_frames
    frames, relations = make(lines, tip, scale)
    rows = rows_from_frames(frames, convention)
    tool = np.linalg.inv(frames[-1]) @ tip
    return Placement(frames, rows, relations, frames[0], tool)
