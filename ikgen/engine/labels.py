"""Configuration labels: geometric measures whose sign names how the arm is set.

Each label is defined on the arm itself (docs/derivation.md gives the formulas) and changes sign
only on a singular set of its branch, so a smooth path away from singular poses keeps its labels:

- ``reach``: ``(W - P1) . x1``, the signed distance of the wrist point W from axis 1 along link
  1's x axis (the common normal from axis 1 to axis 2); ``reach_forward`` when >= 0, else
  ``reach_backward``. W is the point of the last axis nearest the one before it (the wrist
  centre when the last three axes meet).
- ``elbow``: the bend ``(v x (u - v)) . z2`` with ``v = P3 - P2`` and ``u = E - P2`` projected on
  the plane normal to axis 2 (E: the point of axis 4 nearest axis 5, the wrist centre for a
  spherical wrist); oriented so that ``elbow_up`` is the elbow above the line from axis 2 to E in
  reach-forward poses (the sign is fixed per arm from seeded samples).
- ``wrist_bend``: ``(z4 x z6) . z5``, turning from axis 4 to axis 6 about axis 5;
  ``bend_positive`` when >= 0. For the usual orthogonal wrist, the sign of the middle wrist
  joint's sine.
- ``base_bend``: ``(z1 x z3) . z2`` likewise, for arms whose first three axes meet.

Each has a symbolic form (for the generated code, in the unknowns' cosines and sines and in named
intermediates) and a numeric form from the forward kinematics (for verification and tests).
"""

from __future__ import annotations

import numpy as np
import sympy as sp

from ..ir import Label
from .chain import Chain
from .geometry import axis_in, line_meet, simplify_exact, zero_frames
from .symbols import tidy

LABEL_VALUES = {"reach": ("reach_forward", "reach_backward"),
                "elbow": ("elbow_up", "elbow_down"),
                "wrist_bend": ("bend_positive", "bend_negative"),
                "base_bend": ("bend_positive", "bend_negative")}

MEANINGS = {
    "reach": "reach_forward: the wrist point (the point of the last axis nearest the one before it; the wrist "
             "centre for a spherical wrist) lies on the side of axis 1 that link 1's x axis points to: (W - P1) . x1 >= 0",
    "elbow": "elbow_up: the bend (v x (u - v)) . z2 of the chain from axis 2 over axis 3 to the point E of axis 4 "
             "nearest axis 5 (projected on the plane normal to axis 2), signed so that elbow_up puts the elbow above "
             "the line from axis 2 to E when the arm reaches forward; it changes only where the elbow is fully "
             "stretched or folded",
    "wrist_bend": "bend_positive: (z4 x z6) . z5 >= 0 for the directions of axes 4, 5, 6 (with the usual orthogonal "
                  "wrist: the sign of the middle wrist joint's sine)",
    "base_bend": "bend_positive: (z1 x z3) . z2 >= 0 for the directions of axes 1, 2, 3",
}


def make_label(name: str, measure) -> Label:
    positive, negative = LABEL_VALUES[name]
    return Label(name, measure, positive, negative, MEANINGS[name])


# ------------------------------------------------------------------------------ numeric forms

def nearest_point(o1, d1, o2, d2) -> np.ndarray:
    """(N, 3): the point of line 1 nearest line 2 (the point o1 itself when they are parallel)."""
    b = np.einsum("ni,ni->n", d1, d2)
    w0 = o1 - o2
    d, e = np.einsum("ni,ni->n", d1, w0), np.einsum("ni,ni->n", d2, w0)
    denominator = 1 - b * b
    t = np.where(denominator > 1e-12, (b * e - d) / np.where(denominator > 1e-12, denominator, 1.0), 0.0)
    return o1 + t[:, None] * d1


def numeric_measures(chain: Chain, angles: np.ndarray, orientation: int | None = None) -> dict[str, np.ndarray]:
    """Every label's measure from the forward kinematics, for DH angles (N, n) of a six-axis arm."""
    frames = chain.axis_frames(angles)
    o, z = frames[:, :, :3, 3], frames[:, :, :3, 2]
    links = chain.numeric_links(angles)
    x1 = links[:, 0, :3, 0]
    n = chain.n
    wrist = nearest_point(o[:, n - 1], z[:, n - 1], o[:, n - 2], z[:, n - 2])
    elbow_point = nearest_point(o[:, 3], z[:, 3], o[:, 4], z[:, 4])
    out = {"reach": np.einsum("ni,ni->n", wrist - o[:, 0], x1)}
    bend, above = _bend(o, z, elbow_point)
    out["elbow"] = bend * (orientation if orientation is not None else elbow_orientation(chain))
    out["wrist_bend"] = np.einsum("ni,ni->n", np.cross(z[:, 3], z[:, 5]), z[:, 4])
    out["base_bend"] = np.einsum("ni,ni->n", np.cross(z[:, 0], z[:, 2]), z[:, 1])
    return out


def _bend(o, z, point):
    z2 = z[:, 1]
    u = point - o[:, 1]
    v = o[:, 2] - o[:, 1]
    u = u - np.einsum("ni,ni->n", u, z2)[:, None] * z2
    v = v - np.einsum("ni,ni->n", v, z2)[:, None] * z2
    bend = np.einsum("ni,ni->n", np.cross(v, u - v), z2)
    z1 = z[:, 0]
    above = np.einsum("ni,ni->n", v, z1) * np.einsum("ni,ni->n", u, u) - \
        np.einsum("ni,ni->n", v, u) * np.einsum("ni,ni->n", u, z1)
    return bend, above


def elbow_orientation(chain: Chain, seed: int = 3, count: int = 400) -> int:
    """+1 or -1 so that the elbow bend agrees with "elbow above the shoulder-to-E line" on most
    reach-forward configurations (seeded samples where both are clearly non-zero)."""
    rng = np.random.default_rng(seed)
    angles = rng.uniform(-np.pi, np.pi, (count, chain.n))
    measures = numeric_measures(chain, angles, orientation=1)
    frames = chain.axis_frames(angles)
    o, z = frames[:, :, :3, 3], frames[:, :, :3, 2]
    point = nearest_point(o[:, 3], z[:, 3], o[:, 4], z[:, 4])
    bend, above = _bend(o, z, point)
    scale = chain.length_scale
    clear = (measures["reach"] > 0) & (np.abs(bend) > 1e-6 * scale ** 2) & (np.abs(above) > 1e-6 * scale ** 3)
    agree = int(np.sum(((bend > 0) == (above > 0)) & clear))
    disagree = int(np.sum(clear)) - agree
    return 1 if agree >= disagree else -1


# ------------------------------------------------------------------------------ symbolic forms

def frames_from(chain: Chain, start: int, stop: int) -> list[sp.Matrix]:
    """Frames start..stop relative to frame ``start``, in the joints' cosine and sine symbols."""
    frames = [sp.eye(4)]
    for joint in range(start + 1, stop + 1):
        frames.append(frames[-1] * chain.link(joint))
    return frames


def reach_label(setup, wrist_in_frame1: sp.Matrix | None) -> Label:
    """``wrist_in_frame1``: the wrist point in frame 1 as named symbols, when a strategy has it."""
    chain = setup.chain
    n = chain.n
    if wrist_in_frame1 is None:
        frames = zero_frames(chain, n - 2, n)
        o_a, z_a = axis_in(chain, frames, n - 2, n)
        o_b, z_b = axis_in(chain, frames, n - 2, n - 1)
        point = line_meet(o_a, z_a, o_b, z_b, chain) if sp.simplify(z_a.cross(z_b).norm()) != 0 else o_a
        local = frames[-1].inv() * sp.Matrix([*point, 1])         # in the last DH frame
        local = sp.Matrix([simplify_exact(x, chain) for x in local[:3, 0]] + [1])
        fold = setup.names.folded(setup.pose_identity, 1, n)
        wrist_in_frame1 = fold * local
    axis_point = chain.factor(1, inverse=True) * sp.Matrix([*_axis_point_frame0(chain), 1])
    measure = tidy(wrist_in_frame1[0] - axis_point[0], chain.circles)
    return make_label("reach", measure)


def _axis_point_frame0(chain: Chain) -> sp.Matrix:
    frames = zero_frames(chain, 0, 1)
    point, _ = axis_in(chain, frames, 0, 1)
    return point


def elbow_label(setup, inner_point: sp.Matrix | None) -> Label:
    """``inner_point``: the wrist centre in frame 3, when the last three axes meet."""
    chain = setup.chain
    frames = frames_from(chain, 1, 4)
    p2, z2 = axis_in(chain, frames, 1, 2)
    p3, _ = axis_in(chain, frames, 1, 3)
    if inner_point is None:
        local = zero_frames(chain, 3, 5)
        o4, d4 = axis_in(chain, local, 3, 4)
        o5, d5 = axis_in(chain, local, 3, 5)
        inner_point = line_meet(o4, d4, o5, d5, chain) if sp.simplify(d4.cross(d5).norm()) != 0 else o4
    point = (frames[2] * sp.Matrix([*inner_point, 1]))[:3, 0]      # frame 3 in frame 1 is frames[2]
    u = point - p2
    v = p3 - p2
    u = u - u.dot(z2) * z2
    v = v - v.dot(z2) * z2
    bend = tidy(v.cross(u - v).dot(z2), chain.circles)
    return make_label("elbow", bend * elbow_orientation(chain))


def wrist_bend_label(setup) -> Label:
    chain = setup.chain
    frames = frames_from(chain, 3, 6)
    _, z4 = axis_in(chain, frames, 3, 4)
    _, z5 = axis_in(chain, frames, 3, 5)
    _, z6 = axis_in(chain, frames, 3, 6)
    return make_label("wrist_bend", tidy(z4.cross(z6).dot(z5), chain.circles))


def base_bend_label(setup) -> Label:
    chain = setup.chain
    frames = frames_from(chain, 0, 3)
    _, z1 = axis_in(chain, frames, 0, 1)
    _, z2 = axis_in(chain, frames, 0, 2)
    _, z3 = axis_in(chain, frames, 0, 3)
    return make_label("base_bend", tidy(z1.cross(z3).dot(z2), chain.circles))
