"""From a URDF chain to an ``ikgen.model.Arm``: axis lines, DH frames, exact values, checks.

Readings of the converted arm are the URDF joint positions themselves (radians for revolute and
continuous joints, metres for prismatic ones): ``theta_i = theta + direction * reading``, with
the DH angle at the zero configuration in ``theta`` (``d`` for a prismatic joint) and the
offset 0. Fixed joints fold into the neighbouring transforms; the base transform takes the
root link to DH frame 0 and the tool transform the last DH frame to the tip link.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import sympy as sp

from ..armfile import MAX_NAME, is_valid_name
from ..errors import ArmFileError
from ..kinematics import NumericChain
from ..model import Arm, Joint
from ..rotations import from_axis_angles, homogeneous, matrix_to_fixed_xyz
from .dh import AxisLine, axis_sign, place_frames
from .reader import Chain, ChainJoint
from .snap import Snapper, shown

ONE_TURN = 2 * sp.pi
SELF_CHECK_SAMPLES = 32
SELF_CHECK_TOLERANCE = 1e-9     # times the length scale: a bug, not rounding, if exceeded


@dataclass(frozen=True)
class FrameParts:
    """A base or tool transform as the arm file writes it: translation and fixed-xyz angles."""

    translation: tuple[sp.Expr, ...]
    angles: tuple[sp.Expr, ...]

    @property
    def identity(self) -> bool:
        return all(v == 0 for v in self.translation + self.angles)


@dataclass(frozen=True)
class Converted:
    arm: Arm
    base: FrameParts
    tool: FrameParts
    chain: Chain
    relations: tuple[str, ...]


def axis_lines(chain: Chain) -> tuple[list[AxisLine], list[ChainJoint], np.ndarray]:
    """Each moving joint's axis line in the root frame at the zero configuration, the moving
    joints, and the tip link's pose there."""
    pose = np.eye(4)
    lines, moving = [], []
    for joint in chain.joints:
        pose = pose @ joint.origin
        if joint.kind == "fixed":
            continue
        sign = axis_sign(joint.axis)
        direction = pose[:3, :3] @ (joint.axis / np.linalg.norm(joint.axis))
        lines.append(AxisLine(pose[:3, 3].copy(), sign * direction / np.linalg.norm(direction), sign))
        moving.append(joint)
    return lines, moving, pose


def length_scale(chain: Chain) -> float:
    return max(1.0, sum(float(np.linalg.norm(j.origin[:3, 3])) for j in chain.joints))


def joint_limits(joint: ChainJoint) -> tuple[float, float]:
    if joint.kind == "continuous":
        return (float(-ONE_TURN), float(ONE_TURN))
    return (joint.lower, joint.upper)


def make_joint(index: int, joint: ChainJoint, line: AxisLine, row, snapper: Snapper, shown_file: str) -> Joint:
    if not is_valid_name(joint.name):
        raise ArmFileError(shown_file, f"joint '{joint.name[:64]}'", "the name is longer than 64 characters or "
                           "holds control characters", "a printable joint name of at most 64 characters",
                           line=joint.line)
    where = f"joint {index} '{joint.name}'"
    kind = "prismatic" if joint.kind == "prismatic" else "revolute"
    return Joint(index=index, name=joint.name, kind=kind,
                 a=snapper.length(row.a, where, "a"), alpha=snapper.angle(row.alpha, where, "alpha"),
                 d=snapper.length(row.d, where, "d"), theta=snapper.angle(row.theta, where, "theta"),
                 offset=sp.Integer(0), direction=line.sign, limits=joint_limits(joint))


def exact_frame(transform: np.ndarray, where: str, snapper: Snapper) -> tuple[sp.ImmutableMatrix, FrameParts]:
    translation = tuple(snapper.length(float(v), where, f"translation {axis}")
                        for axis, v in zip("xyz", transform[:3, 3]))
    angles = tuple(snapper.angle(float(v), where, f"angle {k + 1}")
                   for k, v in enumerate(matrix_to_fixed_xyz(transform[:3, :3])))
    rotation = from_axis_angles("xyz", angles, "fixed")
    error = np.abs(np.array(rotation.evalf(), dtype=float) - transform[:3, :3]).max()
    assert error < 1e-9, f"{where}: fixed-xyz angles rebuild the rotation only to {error:.3g}"
    return sp.ImmutableMatrix(homogeneous(rotation, list(translation))), FrameParts(translation, angles)


def chain_notes(chain: Chain, moving: list[ChainJoint], lines: list[AxisLine]) -> list[str]:
    fixed = [j.name for j in chain.joints if j.kind == "fixed"]
    notes = [f"URDF chain '{chain.root}' -> '{chain.tip}' of robot '{chain.robot}': {len(moving)} moving joint(s)"
             + (f"; fixed joint(s) merged into their neighbours: {', '.join(fixed)}" if fixed else "")]
    for joint, line in zip(moving, lines):
        written = " ".join(f"{v:g}" for v in joint.axis)
        if abs(np.linalg.norm(joint.axis) - 1.0) > 1e-9:
            notes.append(f"joint '{joint.name}': axis ({written}) normalised to unit length")
        if line.sign < 0:
            notes.append(f"joint '{joint.name}': its URDF axis ({written}) points along the reverse of the DH "
                         f"z axis, so its direction is -1")
        if joint.kind == "continuous":
            notes.append(f"joint '{joint.name}' is continuous: limits of one turn either side "
                         f"({shown(-ONE_TURN)} .. {shown(ONE_TURN)} rad)")
    return notes


def arm_name(chain: Chain, shown_file: str) -> str:
    name = "".join(c if c.isprintable() else "_" for c in chain.robot.strip())[:MAX_NAME].strip()
    return name if is_valid_name(name) else Path(shown_file).stem[:MAX_NAME]


def convert(chain: Chain, convention: str, shown_file: str) -> Converted:
    """The DH arm of ``chain`` in ``convention`` ("standard" or "modified")."""
    lines, moving, tip = axis_lines(chain)
    scale = length_scale(chain)
    placement = place_frames(lines, tip, convention, scale)
    snapper = Snapper(scale)
    joints = tuple(make_joint(i + 1, joint, line, row, snapper, shown_file)
                   for i, (joint, line, row) in enumerate(zip(moving, lines, placement.rows)))
    base, base_parts = exact_frame(placement.base, "base", snapper)
    tool, tool_parts = exact_frame(placement.tool, "tool", snapper)
    arm = Arm(name=arm_name(chain, shown_file),
              description=f"converted from the URDF chain '{chain.root}' -> '{chain.tip}' of robot '{chain.robot}'",
              convention=convention, length_unit="m", angle_unit="rad", joints=joints, base=base, tool=tool,
              source=shown_file, digest=chain.digest,
              notes=tuple(chain_notes(chain, moving, lines) + snapper.notes))
    self_check(arm, chain, scale)
    return Converted(arm, base_parts, tool_parts, chain, tuple(placement.relations))


# ------------------------------------------------------------------------------ self-check

def urdf_pose(chain: Chain, readings: np.ndarray) -> np.ndarray:
    """The tip link's pose for joint positions (moving joints in order), composed the URDF way:
    each joint's origin, then its motion about or along its axis in the joint frame."""
    pose = np.eye(4)
    values = iter(readings)
    for joint in chain.joints:
        pose = pose @ joint.origin
        if joint.kind == "fixed":
            continue
        q, axis = next(values), joint.axis / np.linalg.norm(joint.axis)
        motion = np.eye(4)
        if joint.kind == "prismatic":
            motion[:3, 3] = q * axis
        else:
            k = np.array([[0, -axis[2], axis[1]], [axis[2], 0, -axis[0]], [-axis[1], axis[0], 0]])
            motion[:3, :3] = np.eye(3) + math.sin(q) * k + (1 - math.cos(q)) * (k @ k)
        pose = pose @ motion
    return pose


def self_check(arm: Arm, chain: Chain, scale: float) -> None:
    """The converted arm's FK against the URDF's composition at seeded readings within limits.
    A mismatch is a bug in the conversion: it stops the program rather than return a wrong arm."""
    rng = np.random.default_rng(12)
    limits = np.array([j.limits for j in arm.joints])
    readings = limits[:, 0] + rng.random((SELF_CHECK_SAMPLES, arm.dof)) * (limits[:, 1] - limits[:, 0])
    ours = NumericChain(arm).poses(readings)
    theirs = np.array([urdf_pose(chain, r) for r in readings])
    error = np.abs(ours - theirs)
    worst = max(error[:, :3, 3].max() / scale, error[:, :3, :3].max())
    assert worst <= SELF_CHECK_TOLERANCE, f"converted FK differs from the URDF's by {worst:.3g}: a conversion bug"
