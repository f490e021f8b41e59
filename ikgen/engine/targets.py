"""What the arm is asked for: the target kind, declared in the arm file or natural for the arm.

| kind | freedoms | the solver reads from a pose |
|---|---|---|
| pose | 6 | all of it |
| point_and_direction | 5 | the position and one column of the rotation (the directed tool axis) |
| point_and_angle | 4 | the position and the turn about a fixed world axis (all joint axes parallel to it) |
| point | 3 | the position |

An arm must have exactly as many joints as its target has freedoms (more would leave joints
undetermined, fewer could not reach every target). When the file declares no target the natural
one is taken: six joints a pose, five a point and a direction (of the tool's z axis), four a point
and an angle when every joint axis is parallel, three a point.
"""

from __future__ import annotations

import numpy as np
import sympy as sp

from ..analysis import generic_readings, relate
from ..errors import StructureError
from ..kinematics import NumericChain
from ..model import TARGET_FREEDOMS, Arm, Target

PARALLEL_TOLERANCE = 1e-9   # radians between joint axes that count as parallel


def common_axis(arm: Arm) -> tuple | None:
    """The world direction every joint axis is parallel to (exact), or None."""
    chain = NumericChain(arm)
    _, directions = chain.joint_axes(generic_readings(arm))
    first = directions[0]
    if any(np.linalg.norm(np.cross(first, d)) > PARALLEL_TOLERANCE for d in directions[1:]):
        return None
    frame = sp.Matrix(arm.base)
    if arm.convention == "modified":      # axis 1 is z of frame 1: Rx(alpha) z, whatever theta1 is
        alpha = arm.joints[0].alpha
        frame = frame * sp.Matrix([[1, 0, 0, 0], [0, sp.cos(alpha), -sp.sin(alpha), 0],
                                   [0, sp.sin(alpha), sp.cos(alpha), 0], [0, 0, 0, 1]])
    return tuple(sp.nsimplify(x) if sp.nsimplify(x).is_Rational else x for x in frame[:3, 2])


def what_it_serves(arm: Arm) -> str:
    kinds = {6: "a full pose", 5: "a point and the direction of one tool axis", 3: "a point"}
    solved = len(arm.solved_joints)
    if solved == 4:
        return ("a point and an angle about the axis all its joints turn or slide along"
                if common_axis(arm) is not None else
                "no target: four joints serve a point and an angle only when every joint axis is parallel")
    if solved == 7:
        return "a full pose once one joint is given (the [target] key given_joint)"
    return kinds.get(solved, f"no target ikgen handles ({solved} joints solved for; 3 to 6 are handled)")


def resolve(arm: Arm) -> Target:
    """The target the derivation solves for, checked against the arm (a given joint is not solved
    for, so the target's freedoms must match the other joints)."""
    declared = arm.target
    solved = len(arm.solved_joints)
    given = "" if arm.given_joint is None else f" to solve for (besides the given joint {arm.given_joint})"
    if declared is None:
        natural = {6: "pose", 5: "point_and_direction", 4: "point_and_angle", 3: "point"}.get(solved)
        if natural is None:
            if solved == 7:
                raise StructureError(f"arm '{arm.name}' has 7 joints: a pose leaves one of them free, so one joint's "
                                     "reading must be given by the caller ([target] given_joint = <number or name>, or "
                                     "--given-joint); nothing was written")
            raise StructureError(f"arm '{arm.name}' has {solved} joints{given} to solve for; the derivation handles 3 to "
                                 "6 (a point, a point and an angle, a point and a direction, or a pose), so "
                                 "nothing was written")
        declared = Target(natural, None, "z", declared=False)
    if TARGET_FREEDOMS[declared.kind] != solved:
        raise StructureError(
            f"arm '{arm.name}' has {solved} joints{given} and the target '{declared.kind}' has "
            f"{TARGET_FREEDOMS[declared.kind]} freedoms; a target needs as many joints as it has freedoms. This arm "
            f"serves {what_it_serves(arm)}, so nothing was written")
    if declared.kind == "point_and_angle":
        axis = common_axis(arm)
        if axis is None:
            raise StructureError(f"arm '{arm.name}': a point and an angle about a fixed world axis needs every joint "
                                 "axis parallel to that axis, and this arm's axes are not all parallel, so nothing "
                                 "was written")
        if declared.axis is not None:
            given = np.array([float(v) for v in declared.axis])
            if np.linalg.norm(np.cross(given, np.array([float(v) for v in axis]))) > PARALLEL_TOLERANCE:
                raise StructureError(f"arm '{arm.name}': the target's axis {[float(v) for v in declared.axis]} is not "
                                     f"the direction its joint axes share ({[round(float(v), 6) for v in axis]}), so "
                                     "nothing was written")
            if np.dot(given, np.array([float(v) for v in axis])) < 0:
                axis = tuple(-v for v in axis)
        declared = Target(declared.kind, axis, declared.tool_axis, declared.declared)
    return declared


def words(target: Target) -> str:
    text = {"pose": "the full pose of the tool",
            "point": "the position of the tool point",
            "point_and_angle": "the position of the tool point and its turn about the world axis "
                               f"({', '.join(str(v) for v in (target.axis or ()))})",
            "point_and_direction": f"the position of the tool point and the direction of the tool's {target.tool_axis} axis"
            }[target.kind]
    return text + ("" if target.declared else " (natural for this arm; no [target] in the file)")


def check_independent(arm: Arm) -> None:
    """Refuse an arm two of whose consecutive joints make the same motion: two revolute joints about
    one axis, or two slides along parallel directions. Such an arm has fewer independent motions
    than joints, so a target has infinitely many solutions or none."""
    chain = NumericChain(arm)
    origins, directions = chain.joint_axes(generic_readings(arm))
    for first, second in zip(arm.joints, arm.joints[1:]):
        relation = relate(arm, first.index, second.index, origins, directions)
        if first.revolute and second.revolute and relation.kind == "coincident":
            same = "turn about the same axis"
        elif not first.revolute and not second.revolute and relation.kind in ("parallel", "coincident"):
            same = "slide along parallel directions"
        else:
            continue
        raise StructureError(f"arm '{arm.name}': joints {first.index} '{first.name}' and {second.index} "
                             f"'{second.name}' {same}, so the arm has fewer independent motions than joints and "
                             "a target has no finite set of solutions; nothing was written")



RANK_TOLERANCE = 1e-9   # smallest over largest singular value of the target's Jacobian: below it, rank-deficient


def target_jacobian(arm: Arm, chain: NumericChain, target: Target, readings) -> np.ndarray:
    """The rates of what the target holds, one column per solved joint, at joint readings: for a
    pose the tool point's velocity (over the reach) and the tool's angular velocity; for a point
    the velocity; for a point and an angle the velocity and the turn rate about the target's axis;
    for a point and a direction the velocity and the rate of the directed tool axis a (w x a).
    Columns are per radian of a revolute joint and per reach of a slide, so they are comparable."""
    length = arm.reach_scale()
    jacobian = jacobian_of(chain, readings, length)
    jacobian[:, ~chain.revolute] *= length
    velocity, turn = jacobian[:3], jacobian[3:]
    if target.kind == "pose":
        rows = jacobian
    elif target.kind == "point":
        rows = velocity
    elif target.kind == "point_and_angle":
        rows = np.vstack([velocity, np.array([float(v) for v in target.axis]) @ turn])
    else:
        frames = chain.frames(np.asarray(readings, dtype=float)[None, :])[0]
        a = (frames[-1] @ chain.tool)[:3, "xyz".index(target.tool_axis)]
        rows = np.vstack([velocity, np.cross(turn.T, a).T])
    return rows[:, [j.index - 1 for j in arm.solved_joints]]


def check_rank(arm: Arm, target: Target, samples: int = 6, seed: int = 7) -> None:
    """Refuse an arm whose solved joints cannot move the tool in every direction of its target: the
    target's Jacobian (target_jacobian) rank-deficient at every one of ``samples`` generic readings.
    A generic target then has no solution (only a thin set of targets is reached), and for a given
    joint most of its readings leave the pose unreachable. The refusal names the joint that moves
    nothing the target holds, or the direction the tool cannot move in."""
    chain = NumericChain(arm)
    best, first = 0.0, None
    for k in range(samples):
        jacobian = target_jacobian(arm, chain, target, generic_readings(arm, seed + k))
        left, values, right = np.linalg.svd(jacobian)
        if first is None:
            first = (jacobian, left, values, right)
        best = max(best, float(values[-1] / values[0]) if values[0] > 0.0 else 0.0)
    if best >= RANK_TOLERANCE:
        return
    if arm.given_joint is not None:
        raise StructureError(f"arm '{arm.name}': with joint {arm.given_joint} given, the other joints cannot move the "
                             "tool in every direction of the target (their Jacobian is rank-deficient at every "
                             "sampled reading: a generic pose has no solution for most readings of the given "
                             "joint), so nothing was written. Choose another given joint; `ikgen describe` lists "
                             "the choices that work")
    jacobian, left, values, right = first
    rank = int(np.sum(values > RANK_TOLERANCE * values[0]))
    raise StructureError(
        f"arm '{arm.name}': its joints cannot move the tool in every direction its target ({target.kind}) needs: the "
        f"target's Jacobian has rank {rank}, not {len(values)}, at every one of {samples} sampled readings, so a "
        f"generic target has no solution and nothing was written. {rank_witness(arm, target, jacobian, left, right, rank)} "
        "Check the DH table (a twist alpha of 0 where +-90 deg was meant makes two axes parallel; an offset of 0 "
        "where one was meant can put the tool point on an axis); `ikgen describe` shows the joint axes at the "
        "zero pose")


def rank_witness(arm: Arm, target: Target, jacobian: np.ndarray, left: np.ndarray, right: np.ndarray,
                 rank: int) -> str:
    """One sentence on what the missing freedom is, at the first sampled reading: the joints whose
    motion the target does not see, or the direction of motion (or turn) no joint rate gives."""
    joints = arm.solved_joints
    sizes = np.linalg.norm(jacobian, axis=0)
    idle = [joints[k] for k in np.flatnonzero(sizes <= RANK_TOLERANCE * max(float(sizes.max()), 1.0))]
    if not idle and np.max(np.abs(right[-1])) > 1.0 - 1e-9:
        idle = [joints[int(np.argmax(np.abs(right[-1])))]]
    if idle:
        names = ", ".join(f"{j.index} '{j.name}'" for j in idle)
        on_axis = target.kind == "point" and all(j.revolute for j in idle)
        if len(idle) == 1:
            return (f"Joint {names} moves nothing the target holds"
                    + (" (the tool point lies on its axis)." if on_axis else "."))
        return f"Joints {names} move nothing the target holds" + (" (the tool point lies on their axes)." if on_axis else ".")
    missing = left[:, rank]
    missing = missing if missing[np.argmax(np.abs(missing))] > 0 else -missing
    shown = lambda v: "(" + ", ".join(f"{x:.3f}" for x in v / np.linalg.norm(v)) + ")"
    if target.kind == "pose" and np.linalg.norm(missing[3:]) < 1e-6:
        return f"At the first sampled reading no joint rate moves the tool point along {shown(missing[:3])} (world)."
    if target.kind == "pose" and np.linalg.norm(missing[:3]) < 1e-6:
        return f"At the first sampled reading no joint rate turns the tool about {shown(missing[3:])} (world)."
    if target.kind == "point":
        return f"At the first sampled reading no joint rate moves the tool point along {shown(missing)} (world)."
    return "At the first sampled reading one combination of the target's rates has no joint rate that gives it."


def jacobian_of(chain: NumericChain, readings, length: float) -> np.ndarray:
    """The 6 x n geometric Jacobian of the tool point at joint readings (rows: linear velocity over
    ``length``, then angular velocity; a revolute column is (z x (p - o), z), a prismatic one (z, 0)),
    per unit of the joint's DH variable (Siciliano et al., Robotics: Modelling, Planning and Control,
    2009, sec. 3.1.3)."""
    frames = chain.frames(np.asarray(readings, dtype=float)[None, :])[0]
    point = (frames[-1] @ chain.tool)[:3, 3]
    chosen = frames[:-1] if chain.standard else frames[1:]
    columns = []
    for k, frame in enumerate(chosen):
        z, o = frame[:3, 2], frame[:3, 3]
        if chain.revolute[k]:
            columns.append(np.concatenate([np.cross(z, point - o) / length, z]))
        else:
            columns.append(np.concatenate([z / length, np.zeros(3)]))
    return np.array(columns).T
