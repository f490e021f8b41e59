"""Structure analysis: how the joint axes of an arm relate (parallel, meeting, skew).

Works numerically on the joint axes at a generic configuration (every relation between
consecutive axes is fixed by the DH table, so one generic configuration shows it), with a
tolerance scaled to the arm's size. The words it produces go into the derivation and the report.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .kinematics import NumericChain
from .model import Arm
from .terminal import fmt

PARALLEL_TOLERANCE = 1e-9   # radians between axis directions
MEET_TOLERANCE = 1e-9       # distance between axes, relative to the arm's length scale


@dataclass(frozen=True)
class AxisRelation:
    first: int                  # 1-based joint indices
    second: int
    kind: str                   # "parallel", "coincident", "meet", "skew"
    distance: float             # shortest distance between the lines (length unit)
    angle: float                # angle between directions (radians, 0..pi/2)

    def words(self, unit: str) -> str:
        if self.kind == "parallel":
            return f"axes {self.first} and {self.second} are parallel, {fmt(self.distance, 6)} {unit} apart"
        if self.kind == "coincident":
            return f"axes {self.first} and {self.second} coincide"
        if self.kind == "meet":
            return (f"axes {self.first} and {self.second} meet at {fmt(np.degrees(self.angle), 4)} deg")
        return (f"axes {self.first} and {self.second} are skew: {fmt(self.distance, 6)} {unit} apart at "
                f"{fmt(np.degrees(self.angle), 4)} deg")


def generic_readings(arm: Arm, seed: int = 7) -> np.ndarray:
    """A fixed, generic joint vector within the limits (no special angles)."""
    rng = np.random.default_rng(seed)
    limits = arm.limits_in_readings()
    return limits[:, 0] + (0.2 + 0.6 * rng.random(arm.dof)) * (limits[:, 1] - limits[:, 0])


def line_distance(o1, d1, o2, d2) -> tuple[float, float, np.ndarray]:
    """(distance, angle, midpoint of the closest points) of two lines with unit directions."""
    cross = np.cross(d1, d2)
    sin_angle = np.linalg.norm(cross)
    angle = float(np.arctan2(sin_angle, abs(np.dot(d1, d2))))
    w0 = o1 - o2
    if sin_angle < 1e-12:
        distance = float(np.linalg.norm(w0 - np.dot(w0, d1) * d1))
        return distance, angle, o1
    b, d, e = np.dot(d1, d2), np.dot(d1, w0), np.dot(d2, w0)
    denom = 1.0 - b * b
    t = (b * e - d) / denom
    u = (e - b * d) / denom
    p1, p2 = o1 + t * d1, o2 + u * d2
    return float(np.linalg.norm(p1 - p2)), angle, 0.5 * (p1 + p2)


def relate(arm: Arm, i: int, j: int, origins, directions) -> AxisRelation:
    scale = arm.reach_scale()
    distance, angle, _ = line_distance(origins[i - 1], directions[i - 1], origins[j - 1], directions[j - 1])
    if angle < PARALLEL_TOLERANCE:
        kind = "coincident" if distance < MEET_TOLERANCE * scale else "parallel"
    elif distance < MEET_TOLERANCE * scale:
        kind = "meet"
    else:
        kind = "skew"
    return AxisRelation(i, j, kind, distance, angle)


@dataclass(frozen=True)
class WristCheck:
    meets: bool
    words: list[str]
    point: np.ndarray | None    # the common point in the world frame at the generic readings


def check_wrist(arm: Arm, first: int) -> WristCheck:
    """Do axes first, first+1, first+2 meet in one point? Says by how much they fail if not."""
    chain = NumericChain(arm)
    origins, directions = chain.joint_axes(generic_readings(arm))
    scale = arm.reach_scale()
    unit = arm.length_unit
    joints = arm.joints[first - 1:first + 2]
    words = []
    if any(not j.revolute for j in joints):
        names = ", ".join(f"{j.index}" for j in joints if not j.revolute)
        return WristCheck(False, [f"joint(s) {names} of the last three are prismatic: no spherical wrist"], None)
    pairs = [(first, first + 1), (first + 1, first + 2), (first, first + 2)]
    relations = [relate(arm, i, j, origins, directions) for i, j in pairs]
    failed = [r for r in relations if r.kind not in ("meet",)]
    if failed:
        for r in failed:
            words.append(r.words(unit))
        return WristCheck(False, words, None)
    points = [line_distance(origins[i - 1], directions[i - 1], origins[j - 1], directions[j - 1])[2]
              for i, j in pairs]
    spread = max(np.linalg.norm(p - points[0]) for p in points)
    if spread > MEET_TOLERANCE * scale * 10:
        words.append(f"axes {first}, {first + 1}, {first + 2} meet pairwise but not in one point "
                     f"(the meeting points are {fmt(spread, 6)} {unit} apart)")
        return WristCheck(False, words, None)
    words.append(f"axes {first}, {first + 1} and {first + 2} meet in one point (a spherical wrist)")
    return WristCheck(True, words, points[0])


def describe_axes(arm: Arm) -> list[str]:
    """Words for every pair of consecutive axes."""
    chain = NumericChain(arm)
    origins, directions = chain.joint_axes(generic_readings(arm))
    return [relate(arm, i, i + 1, origins, directions).words(arm.length_unit) for i in range(1, arm.dof)]
