"""The validated arm: joints with exact DH parameters, conventions, units, base and tool.

Internal units: lengths stay in the file's length unit (m or mm); angles are radians. A joint's
*reading* is what the user's controller shows (degrees or radians for a revolute joint, the
length unit for a prismatic one). The DH joint variable follows from it by

    revolute:   theta_i = theta + offset + direction * reading
    prismatic:  d_i     = d     + offset + direction * reading

so ``theta``/``d`` are the table's constant parts, ``offset`` is the zero offset between the
reading and the DH variable, and ``direction`` (+1 or -1) says whether they turn the same way.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
import sympy as sp

CONVENTIONS = ("standard", "modified")
# What the user asks the arm for: the full pose; a point; a point and an angle about a fixed world
# axis; a point and the direction of one tool axis (docs/arm-file.md, [target]).
TARGET_KINDS = ("pose", "point", "point_and_angle", "point_and_direction")
TARGET_FREEDOMS = {"pose": 6, "point": 3, "point_and_angle": 4, "point_and_direction": 5}
LENGTH_UNITS = ("m", "mm")
ANGLE_UNITS = ("deg", "rad")
JOINT_KINDS = ("revolute", "prismatic")


@dataclass(frozen=True)
class Joint:
    index: int                  # 1-based position in the chain
    name: str
    kind: str                   # "revolute" or "prismatic"
    a: sp.Expr                  # length unit
    alpha: sp.Expr              # radians, exact
    d: sp.Expr                  # length unit
    theta: sp.Expr              # radians, exact
    offset: sp.Expr             # radians (revolute) or length unit (prismatic)
    direction: int              # +1 or -1
    limits: tuple[float, float]  # internal units: radians or length unit

    @property
    def revolute(self) -> bool:
        return self.kind == "revolute"

    @property
    def label(self) -> str:
        return f"joint {self.index} '{self.name}'"


@dataclass(frozen=True)
class Target:
    """A target declaration. ``axis``: the world axis of a point_and_angle target (exact, unit), or
    None for the arm's own (the common direction of its parallel axes); ``tool_axis``: which tool
    axis a point_and_direction target directs ("x", "y" or "z")."""
    kind: str
    axis: tuple | None = None
    tool_axis: str = "z"
    declared: bool = True

    @property
    def freedoms(self) -> int:
        return TARGET_FREEDOMS[self.kind]


@dataclass(frozen=True)
class Arm:
    name: str
    description: str
    convention: str             # "standard" (distal) or "modified" (proximal)
    length_unit: str
    angle_unit: str
    joints: tuple[Joint, ...]
    base: sp.ImmutableMatrix    # 4x4 exact: world <- DH frame 0
    tool: sp.ImmutableMatrix    # 4x4 exact: flange (last DH frame) <- tool point
    source: str = ""            # path the arm was read from
    digest: str = ""            # sha256 of the source bytes
    notes: tuple[str, ...] = field(default=())
    target: Target | None = None   # None: the natural target for the structure (engine/targets.py)
    given_joint: int | None = None  # a joint whose reading the caller gives (an arm with one joint more
                                    # than its target has freedoms); None: every joint is solved for

    @property
    def solved_joints(self) -> tuple[Joint, ...]:
        """The joints the solver finds (every joint but the given one)."""
        return tuple(j for j in self.joints if j.index != self.given_joint)

    @property
    def dof(self) -> int:
        return len(self.joints)

    @property
    def angle_scale(self) -> float:
        """Radians per user angle unit."""
        return math.pi / 180.0 if self.angle_unit == "deg" else 1.0

    @property
    def exact_angle_scale(self) -> sp.Expr:
        return sp.pi / 180 if self.angle_unit == "deg" else sp.Integer(1)

    def reading_scales(self) -> np.ndarray:
        """Per joint: internal units per reading unit (rad/deg for revolute joints, 1 otherwise)."""
        return np.array([self.angle_scale if j.revolute else 1.0 for j in self.joints])

    def readings_to_internal(self, readings) -> np.ndarray:
        return np.asarray(readings, dtype=float) * self.reading_scales()

    def internal_to_readings(self, values) -> np.ndarray:
        return np.asarray(values, dtype=float) / self.reading_scales()

    def reading_unit(self, joint: Joint) -> str:
        return self.angle_unit if joint.revolute else self.length_unit

    def limits_in_readings(self) -> np.ndarray:
        """(dof, 2) array of limits in the user's reading units."""
        return np.array([j.limits for j in self.joints]) / self.reading_scales()[:, None]

    def equivalent_readings(self) -> list[int]:
        """Per joint, at most how many readings within its limits give one DH joint angle: 1 for a
        prismatic joint or a revolute range of at most one turn, else the whole turns the range
        holds plus one. Every closed-form solution of a pose comes back once per combination,
        so a pose can have up to the product of these times the closed-form solutions. (The
        rule of the generated solvers' turn tables, backends.common.joint_turns.)"""
        counts = []
        for joint, (low, high) in zip(self.joints, self.limits_in_readings()):
            if not joint.revolute or joint.index == self.given_joint:
                counts.append(1)          # a slide, or a reading the caller gives (kept as given)
                continue
            turn = 360.0 if self.angle_unit == "deg" else 2 * math.pi
            span = float(high - low)
            eps = 1e-9 * max(1.0, span)
            counts.append(int((span + 2 * eps) // turn) + 1 if span > turn * (1 + 1e-9) else 1)
        return counts

    def reach_scale(self) -> float:
        """A length that sets the arm's scale: the sum of |a| and |d| over the chain (a slide's d at the
        end of its stroke farther from 0), plus base and tool offsets."""
        cached = self.__dict__.get("_reach_scale")
        if cached is None:
            cached = self._reach_scale_now()
            object.__setattr__(self, "_reach_scale", cached)     # frozen: computed once, kept
        return cached

    def _reach_scale_now(self) -> float:
        total = sum(abs(float(j.a)) + (abs(float(j.d)) if j.revolute else
                                       max(abs(float(j.d + j.offset) + float(j.direction) * float(end))
                                           for end in j.limits))
                    for j in self.joints)
        total += float(sp.Matrix(self.base[:3, 3]).norm()) + float(sp.Matrix(self.tool[:3, 3]).norm())
        return total if total > 0 else 1.0
