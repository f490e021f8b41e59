"""Configuration labels: geometric measures whose sign names how the arm is set.

Which labels an arm gets is decided from its structure alone (``plan_labels``), so that the
verifier and the tests can measure them on the forward kinematics without a derivation. Each is
defined on the arm itself (docs/derivation.md, section 4, gives the formulas) and changes sign
only on a singular set of its branch, so a smooth path away from singular poses keeps its labels:

- ``reach``: ``(W - P1) . x1``, the signed distance of the wrist point W from axis 1 along link
  1's x axis (the common normal from axis 1 to axis 2); ``reach_forward`` when >= 0, else
  ``reach_backward``. W is the point of the last axis nearest the one before it (the wrist
  centre when the last three axes meet) for a pose or a point and a direction, the tool point
  for a point target.
- ``elbow``: the bend ``(v x (u - v)) . zs`` at the first pair of parallel revolute axes s, s+1
  (axes 2 and 3 on a six-axis arm) with ``v = P(s+1) - Ps`` and ``u = E - Ps`` projected on the
  plane normal to axis s (E: the point of axis s+2 nearest axis s+3, the wrist centre for a
  spherical wrist; the tool point or the last axis on shorter arms); oriented so that
  ``elbow_up`` is the elbow above the line from axis s to E in reach-forward poses (the sign is
  fixed per arm from seeded samples).
- ``elbow_turn``: the same bend when axis s is parallel to axis 1 (the horizontal elbow of a
  SCARA): ``counterclockwise`` when the forearm turns counterclockwise from the upper arm seen
  from the tip of the target's axis (the world axis of a point-and-angle target).
- ``wrist_bend``: ``(zi x zk) . zj`` for wrist axes i, j and k (4, 5, 6), or the tool's direction
  in place of zk on a five-axis arm: ``bend_positive`` when >= 0.
- ``base_bend``: ``(z1 x z3) . z2`` likewise, for arms whose first three axes meet.
- ``root_<j>``: a two-root choice no geometric label describes (the sign of the root in the
  report's formula); it has no measure on the forward kinematics.

Each has a symbolic form (for the generated code, in the unknowns' cosines and sines and in named
intermediates) and a numeric form from the forward kinematics (for verification and tests).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import sympy as sp

from ..analysis import check_wrist, generic_readings, relate
from ..ir import Label
from ..kinematics import NumericChain
from .chain import Chain
from .geometry import axis_in, line_meet, simplify_exact, zero_frames
from .symbols import tidy

LABEL_VALUES = {"reach": ("reach_forward", "reach_backward"),
                "elbow": ("elbow_up", "elbow_down"),
                "elbow_turn": ("counterclockwise", "clockwise"),
                "wrist_bend": ("bend_positive", "bend_negative"),
                "elbow_bend": ("bend_positive", "bend_negative"),
                "base_bend": ("bend_positive", "bend_negative")}
ROOT_VALUES = ("root_plus", "root_minus")

MEANINGS = {
    "reach": "reach_forward: the wrist point W (the point of the last axis nearest the one before it, the wrist "
             "centre for a spherical wrist; the tool point for a point target) lies on the side of axis 1 that "
             "link 1's x axis points to: (W - P1) . x1 >= 0",
    "elbow": "elbow_up: the bend (v x (u - v)) . zs of the chain from axis s over axis s+1 to the point E (the point "
             "of axis s+2 nearest axis s+3, the wrist centre for a spherical wrist; the tool point on a three-joint "
             "arm), projected on the plane normal to axis s, signed so that elbow_up puts the elbow above the line "
             "from axis s to E when the arm reaches forward; it changes only where the elbow is fully stretched or "
             "folded",
    "elbow_turn": "counterclockwise: the same bend for an elbow whose axes are parallel to axis 1: the forearm turns "
                  "counterclockwise from the upper arm seen from the tip of the target's axis; it changes only "
                  "where the elbow is fully stretched or folded",
    "wrist_bend": "bend_positive: (zi x zk) . zj >= 0 for the directions of wrist axes i, j, k (4, 5, 6; the "
                  "tool's direction in place of axis 6 on a five-joint arm); with the usual orthogonal wrist, the "
                  "sign of the middle wrist joint's sine",
    "base_bend": "bend_positive: (z1 x z3) . z2 >= 0 for the directions of axes 1, 2, 3",
    "elbow_bend": "bend_positive: (z3 x z5) . z4 >= 0 for the directions of axes 3, 4, 5 of a seven-joint arm (the "
                  "elbow between the upper arm's and the forearm's axes); it changes only where axes 3 and 5 are "
                  "parallel (the elbow fully stretched or folded)",
}


@dataclass(frozen=True)
class LabelSpec:
    """One planned label. ``geometry``:

    - ("reach", point)
    - ("elbow", s, point, orientation) and ("elbow_turn", s, point, orientation)
    - ("bend", i, j, k) with k an axis index or a tool axis letter ("x", "y", "z")

    with ``point`` ("meet", a, b) for the point of axis a nearest axis b, or ("tool",) for the
    tool point. ``keys``: the unknowns whose two-root choice the label names, in preference order.
    """
    name: str
    geometry: tuple
    keys: tuple[str, ...]


def plan_labels(arm, target) -> list[LabelSpec]:
    """The labels of an arm with the given target (engine/targets.py), from its structure."""
    n = arm.dof
    revolute = [j.revolute for j in arm.joints]
    chain = NumericChain(arm)
    origins, directions = chain.joint_axes(generic_readings(arm))

    def parallel(i, j):
        return relate(arm, i, j, origins, directions).kind in ("parallel", "coincident")

    specs: list[LabelSpec] = []
    if target.kind == "pose" and n == 7:
        return _seven_joint_labels(arm, revolute)
    if target.kind == "pose" and n == 6:
        if not check_wrist(arm, 4).meets and all(revolute[:3]) and check_wrist(arm, 1).meets:
            specs.append(LabelSpec("base_bend", ("bend", 1, 2, 3), ("2",)))
        else:
            if revolute[0]:
                specs.append(LabelSpec("reach", ("reach", _wrist_point(arm, target)), ("1",)))
            if revolute[1] and revolute[2]:
                specs.append(_elbow(arm, target, 2, parallel))
        if all(revolute[3:]):
            specs.append(LabelSpec("wrist_bend", ("bend", 4, 5, 6), ("5", "4")))
        return specs
    if revolute[0] and n >= 3 and not parallel(1, 2):
        specs.append(LabelSpec("reach", ("reach", _wrist_point(arm, target)), ("1",)))
    for s in range(1, min(n, 3)):
        if revolute[s - 1] and revolute[s] and parallel(s, s + 1):
            specs.append(_elbow(arm, target, s, parallel))
            break
    if target.kind == "point_and_direction" and n == 5 and revolute[3] and revolute[4]:
        specs.append(LabelSpec("wrist_bend", ("bend", 4, 5, target.tool_axis), ("5", "4")))
    return specs


def _seven_joint_labels(arm, revolute) -> list[LabelSpec]:
    """A seven-joint arm with one joint given: the bends of its shoulder (axes 1-3 meeting), elbow
    (joint 4 between axes 3 and 5) and wrist (axes 5-7 meeting) where those joints are solved for."""
    given = str(arm.given_joint)
    specs = []
    if all(revolute[:3]) and check_wrist(arm, 1).meets and given != "2":
        specs.append(LabelSpec("base_bend", ("bend", 1, 2, 3), tuple(k for k in ("2", "1", "3") if k != given)))
    if revolute[3] and given != "4":
        specs.append(LabelSpec("elbow_bend", ("bend", 3, 4, 5), ("4",)))
    if all(revolute[4:]) and check_wrist(arm, 5).meets and given != "6":
        specs.append(LabelSpec("wrist_bend", ("bend", 5, 6, 7), tuple(k for k in ("6", "5", "7") if k != given)))
    return specs


def _wrist_point(arm, target) -> tuple:
    n = arm.dof
    if target.kind in ("pose", "point_and_direction"):
        return ("meet", n, n - 1)
    return ("tool",)


def _elbow(arm, target, s: int, parallel) -> LabelSpec:
    n = arm.dof
    if target.kind in ("pose", "point_and_direction") and s + 3 <= n:
        point = ("meet", s + 2, s + 3)
    elif target.kind == "point_and_angle":
        point = ("meet", n, n - 1)
    else:
        point = ("tool",)
    turn = parallel(1, s)
    name = "elbow_turn" if turn else "elbow"
    spec = LabelSpec(name, (name, s, point, 1), (str(s + 1),))
    chain = Chain(arm)
    orientation = turn_orientation(chain, spec, target) if turn else \
        elbow_orientation(chain, spec, _wrist_point(arm, target))
    return LabelSpec(name, (name, s, point, orientation), spec.keys)


def make_label(spec: LabelSpec, measure) -> Label:
    positive, negative = LABEL_VALUES[spec.name]
    return Label(spec.name, measure, positive, negative, MEANINGS[spec.name], spec.geometry)


def root_label(key: str, measure, unknown_words: str) -> Label:
    return Label(f"root_{key}", measure, *ROOT_VALUES,
                 f"root_plus: the root with sigma = +1 in the formula for {unknown_words} (no geometric label "
                 "describes this two-way choice)")


# ------------------------------------------------------------------------------ numeric forms

def nearest_point(o1, d1, o2, d2) -> np.ndarray:
    """(N, 3): the point of line 1 nearest line 2 (the point o1 itself when they are parallel)."""
    b = np.einsum("ni,ni->n", d1, d2)
    w0 = o1 - o2
    d, e = np.einsum("ni,ni->n", d1, w0), np.einsum("ni,ni->n", d2, w0)
    denominator = 1 - b * b
    t = np.where(denominator > 1e-12, (b * e - d) / np.where(denominator > 1e-12, denominator, 1.0), 0.0)
    return o1 + t[:, None] * d1


class _Frames:
    """Numeric frames of a batch of joint variables, in the DH base."""

    def __init__(self, chain: Chain, angles: np.ndarray):
        self.chain = chain
        links = chain.numeric_links(angles)
        frames = [np.broadcast_to(np.eye(4), links.shape[:-3] + (4, 4))]
        for k in range(chain.n):
            frames.append(frames[-1] @ links[..., k, :, :])
        self.frames = frames
        axes = frames[:-1] if chain.arm.convention == "standard" else frames[1:]
        self.o = np.stack([f[..., :3, 3] for f in axes], axis=-2)
        self.z = np.stack([f[..., :3, 2] for f in axes], axis=-2)
        self.x1 = links[..., 0, :3, 0]

    def point(self, spec: tuple) -> np.ndarray:
        if spec[0] == "tool":
            tool = np.array(self.chain.arm.tool[:, 3], dtype=float).ravel()
            return (self.frames[-1] @ tool)[..., :3]
        _, a, b = spec
        return nearest_point(self.o[:, a - 1], self.z[:, a - 1], self.o[:, b - 1], self.z[:, b - 1])

    def direction(self, k) -> np.ndarray:
        if isinstance(k, int):
            return self.z[:, k - 1]
        column = np.array(self.chain.arm.tool[:3, "xyz".index(k)], dtype=float).ravel()
        return self.frames[-1][..., :3, :3] @ column


def numeric_measure(chain: Chain, angles: np.ndarray, geometry: tuple, frames: _Frames | None = None) -> np.ndarray:
    """A label's measure from the forward kinematics, for DH joint variables (N, n)."""
    f = frames or _Frames(chain, angles)
    kind = geometry[0]
    if kind == "reach":
        return np.einsum("ni,ni->n", f.point(geometry[1]) - f.o[:, 0], f.x1)
    if kind in ("elbow", "elbow_turn"):
        _, s, point, orientation = geometry
        bend, _ = _bend(f, s, f.point(point))
        return bend * orientation
    if kind == "bend":
        _, i, j, k = geometry
        return np.einsum("ni,ni->n", np.cross(f.direction(i), f.direction(k)), f.direction(j))
    raise ValueError(f"no numeric form for label geometry {geometry!r}")


def numeric_measures(chain: Chain, angles: np.ndarray, labels) -> dict[str, np.ndarray]:
    """Every label's measure (labels: LabelSpec or Label with a geometry) from the forward kinematics."""
    f = _Frames(chain, np.atleast_2d(angles))
    return {label.name: numeric_measure(chain, angles, label.geometry, f) for label in labels if label.geometry}


def _bend(f: _Frames, s: int, point):
    zs = f.z[:, s - 1]
    u = point - f.o[:, s - 1]
    v = f.o[:, s] - f.o[:, s - 1]
    u = u - np.einsum("ni,ni->n", u, zs)[:, None] * zs
    v = v - np.einsum("ni,ni->n", v, zs)[:, None] * zs
    bend = np.einsum("ni,ni->n", np.cross(v, u - v), zs)
    z1 = f.z[:, 0]
    above = np.einsum("ni,ni->n", v, z1) * np.einsum("ni,ni->n", u, u) - \
        np.einsum("ni,ni->n", v, u) * np.einsum("ni,ni->n", u, z1)
    return bend, above


def elbow_orientation(chain: Chain, spec: LabelSpec, wrist: tuple, seed: int = 3, count: int = 400) -> int:
    """+1 or -1 so that the elbow bend agrees with "elbow above the line from axis s to E" on most
    reach-forward configurations (seeded samples where both are clearly non-zero; ``wrist``: the
    reach label's point)."""
    _, s, point, _ = spec.geometry
    rng = np.random.default_rng(seed)
    angles = chain.random_variables(rng, count)
    f = _Frames(chain, angles)
    bend, above = _bend(f, s, f.point(point))
    forward = np.einsum("ni,ni->n", f.point(wrist) - f.o[:, 0], f.x1)
    scale = chain.length_scale
    clear = (forward > 0) & (np.abs(bend) > 1e-6 * scale ** 2) & (np.abs(above) > 1e-6 * scale ** 3)
    agree = int(np.sum(((bend > 0) == (above > 0)) & clear))
    disagree = int(np.sum(clear)) - agree
    return 1 if agree >= disagree else -1


def turn_orientation(chain: Chain, spec: LabelSpec, target) -> int:
    """+1 or -1 so that a positive measure turns counterclockwise about the target's world axis
    (axis 1's world direction when the target names none)."""
    _, s, _, _ = spec.geometry
    f = _Frames(chain, np.zeros((1, chain.n)))
    base = np.array(chain.arm.base[:3, :3], dtype=float)
    axis_world = base @ f.z[0, s - 1]
    reference = np.array([float(v) for v in target.axis]) if target.axis is not None else base @ f.z[0, 0]
    return 1 if float(np.dot(axis_world, reference)) >= 0 else -1


# ------------------------------------------------------------------------------ symbolic forms

def frames_from(chain: Chain, start: int, stop: int) -> list[sp.Matrix]:
    """Frames start..stop relative to frame ``start``, in the joints' cosine and sine symbols."""
    frames = [sp.eye(4)]
    for joint in range(start + 1, stop + 1):
        frames.append(frames[-1] * chain.link(joint))
    return frames


def axis_point_local(chain: Chain, a: int, b: int) -> sp.Matrix:
    """The point of axis a nearest axis b (a point of axis a itself when they are parallel), in the
    coordinates of frame a-1, where it is fixed (joint a turns or slides along its own axis)."""
    low, high = min(a, b) - 1, max(a, b)
    frames = zero_frames(chain, low, high)
    o_a, z_a = axis_in(chain, frames, low, a)
    o_b, z_b = axis_in(chain, frames, low, b)
    point = line_meet(o_a, z_a, o_b, z_b, chain) if sp.simplify(z_a.cross(z_b).norm()) != 0 else o_a
    local = frames[a - 1 - low].inv() * sp.Matrix([*point, 1])
    return sp.Matrix([simplify_exact(x, chain) for x in local[:3, 0]])


def tool_column(chain: Chain, k: int) -> sp.Matrix:
    return sp.Matrix([*sp.Matrix(chain.arm.tool)[:3, k], 0 if k < 3 else 1])


def point_in_frame(setup, spec: tuple, frame: int) -> sp.Matrix:
    """A label point (see LabelSpec) in the coordinates of DH frame ``frame`` (3x1), with the
    target's named symbols where an identity holds them."""
    chain = setup.chain
    n = chain.n
    if spec[0] == "tool":
        if setup.point_identity is not None:
            return setup.names.folded(setup.point_identity, frame, n)[:3, 0]
        return (frames_from(chain, frame, n)[-1] * tool_column(chain, 3))[:3, 0]
    _, a, b = spec
    local = axis_point_local(chain, a, b)
    if frame <= a - 1:
        return (frames_from(chain, frame, a - 1)[-1] * sp.Matrix([*local, 1]))[:3, 0]
    inverse = frames_from(chain, a - 1, frame)[-1].inv()
    return (inverse * sp.Matrix([*local, 1]))[:3, 0]


def reach_label(setup, spec: LabelSpec, wrist_in_frame1: sp.Matrix | None = None) -> Label:
    """``wrist_in_frame1``: the wrist point in frame 1 as named symbols, when a strategy has it."""
    chain = setup.chain
    n = chain.n
    point = spec.geometry[1]
    if wrist_in_frame1 is None and point[0] == "meet" and setup.target.kind == "pose" \
            and point[1:] == (n, n - 1):
        frames = zero_frames(chain, n - 2, n)
        o_a, z_a = axis_in(chain, frames, n - 2, n)
        o_b, z_b = axis_in(chain, frames, n - 2, n - 1)
        meet = line_meet(o_a, z_a, o_b, z_b, chain) if sp.simplify(z_a.cross(z_b).norm()) != 0 else o_a
        local = frames[-1].inv() * sp.Matrix([*meet, 1])         # in the last DH frame
        local = sp.Matrix([simplify_exact(x, chain) for x in local[:3, 0]] + [1])
        fold = setup.names.folded(setup.pose_identity, 1, n)
        wrist_in_frame1 = fold * local
    elif wrist_in_frame1 is None:
        wrist_in_frame1 = point_in_frame(setup, point, 1)
    axis_point = chain.factor(1, inverse=True) * sp.Matrix([*_axis_point_frame0(chain), 1])
    measure = tidy(wrist_in_frame1[0] - axis_point[0], chain.circles)
    return make_label(spec, measure)


def _axis_point_frame0(chain: Chain) -> sp.Matrix:
    frames = zero_frames(chain, 0, 1)
    point, _ = axis_in(chain, frames, 0, 1)
    return point


def elbow_label(setup, spec: LabelSpec, inner_point: sp.Matrix | None = None) -> Label:
    """``inner_point``: the wrist centre in frame s+1, when the last three axes meet."""
    chain = setup.chain
    _, s, point, orientation = spec.geometry
    frames = frames_from(chain, s - 1, min(s + 2, chain.n))
    ps, zs = axis_in(chain, frames, s - 1, s)
    pn, _ = axis_in(chain, frames, s - 1, s + 1)
    if inner_point is None:
        inner_point = point_in_frame(setup, point, s + 1)
    e = (frames[2] * sp.Matrix([*inner_point, 1]))[:3, 0]      # frame s+1 in frame s-1 is frames[2]
    u = e - ps
    v = pn - ps
    u = u - u.dot(zs) * zs
    v = v - v.dot(zs) * zs
    bend = tidy(v.cross(u - v).dot(zs), chain.circles)
    return make_label(spec, bend * orientation)


def bend_label(setup, spec: LabelSpec) -> Label:
    chain = setup.chain
    _, i, j, k = spec.geometry
    frames = frames_from(chain, i - 1, chain.n)
    _, zi = axis_in(chain, frames, i - 1, i)
    _, zj = axis_in(chain, frames, i - 1, j)
    if isinstance(k, int):
        _, zk = axis_in(chain, frames, i - 1, k)
    elif setup.direction_identity is not None:
        zk = setup.names.folded(setup.direction_identity, i - 1, chain.n)[:3, 0]
    else:
        zk = (frames[-1] * tool_column(chain, "xyz".index(k)))[:3, 0]
    return make_label(spec, tidy(zi.cross(zk).dot(zj), chain.circles))


def build_labels(setup, specs: list[LabelSpec]) -> list[Label]:
    """The symbolic labels for the planned specs, with the named points strategies left in
    ``setup.label_points`` ("wrist_in_frame1", "inner")."""
    hints = setup.label_points
    out = []
    for spec in specs:
        kind = spec.geometry[0]
        if kind == "reach":
            out.append(reach_label(setup, spec, hints.get("wrist_in_frame1")))
        elif kind in ("elbow", "elbow_turn"):
            inner = hints.get("inner") if spec.geometry[1] == 2 and spec.geometry[2] == ("meet", 4, 5) else None
            out.append(elbow_label(setup, spec, inner))
        else:
            out.append(bend_label(setup, spec))
    return out
