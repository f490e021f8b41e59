"""Helpers for the reach-map tests that worker processes must be able to import (a chunk
function or solver defined in a test module would travel to a spawned worker by reference and
could not be found there).

- ``PlanarSolver``: a stand-in solver for a planar two-link arm with the numpy batch interface,
  written from the textbook closed form (M. W. Spong, S. Hutchinson, M. Vidyasagar, *Robot
  Modeling and Control*, Wiley 2006, chapter 1, the two-link planar arm's inverse kinematics:
  D = (x^2 + y^2 - a1^2 - a2^2) / (2 a1 a2), q2 = atan2(+-sqrt(1 - D^2), D),
  q1 = atan2(y, x) - atan2(a2 sin q2, a1 + a2 cos q2); chapter and formulas from memory). The
  engine handles six-axis arms only, so the two-link check of the reach map runs its core on
  this stand-in. Its conditioning is |sin q2|, the Jacobian determinant a1 a2 sin q2 over a1 a2
  (same book, the two-link arm's Jacobian; from memory).
- ``fail_once`` and ``die_once``: chunk functions that raise, or end their process, on their
  first call for one chunk (a marker file made with O_EXCL decides which call is first, across
  processes), then compute the chunk like ``compute_chunk``.
"""

from __future__ import annotations

import os

import numpy as np

from ikgen.reach.core import figures_from_batch
from ikgen.reach.solvers import compute_chunk


def planar_inverse_batch(poses: np.ndarray, a1: float, a2: float):
    """(joints (N, 2, 2) degrees in (-180, 180], valid (N, 2), labels, singular, conditioning (N, 2, 1))
    for positions (x, y) of the tool point of a two-link planar arm; rotation and z are ignored."""
    x, y = poses[:, 0, 3], poses[:, 1, 3]
    d = (x * x + y * y - a1 * a1 - a2 * a2) / (2.0 * a1 * a2)
    reachable = np.abs(d) <= 1.0
    root = np.sqrt(np.clip(1.0 - d * d, 0.0, None))
    joints = np.empty((len(x), 2, 2))
    valid = np.empty((len(x), 2), dtype=bool)
    conditioning = np.empty((len(x), 2, 1))
    for branch, sign in enumerate((1.0, -1.0)):
        q2 = np.arctan2(sign * root, d)
        q1 = np.arctan2(y, x) - np.arctan2(a2 * np.sin(q2), a1 + a2 * np.cos(q2))
        q1 = np.arctan2(np.sin(q1), np.cos(q1))                  # into (-pi, pi]
        joints[:, branch, 0], joints[:, branch, 1] = np.degrees(q1), np.degrees(q2)
        # the second root is the first one again where sqrt(1 - D^2) is 0 (a double root)
        valid[:, branch] = reachable & ((sign > 0) | (root > 0.0))
        conditioning[:, branch, 0] = np.abs(np.sin(q2))
    joints[~valid] = np.nan
    labels = np.zeros((len(x), 2, 1), dtype=np.int8)
    return joints, valid, labels, root == 0.0, conditioning


class PlanarSolver:
    """The stand-in two-link solver with its joint windows, usable wherever a map's solver goes."""
    kind = "numpy"
    threads_only = False
    condition_names = ("elbow",)

    def __init__(self, a1: float, a2: float, windows):
        self.a1, self.a2, self.windows = a1, a2, windows

    def figures(self, poses):
        joints, valid, _labels, _singular, conditioning = planar_inverse_batch(poses, self.a1, self.a2)
        return figures_from_batch(joints, valid, conditioning, self.windows)


def _first(marker: str) -> bool:
    try:
        os.close(os.open(marker, os.O_CREAT | os.O_EXCL | os.O_WRONLY))
        return True
    except FileExistsError:
        return False


def fail_once(marker: str, target: int, job, start: int, stop: int):
    """Raise on the first call for the chunk starting at ``target``; compute otherwise."""
    if start == target and _first(marker):
        raise RuntimeError("injected failure of this chunk (test)")
    return compute_chunk(job, start, stop)


def die_once(marker: str, target: int, job, start: int, stop: int):
    """End this process (as a crash would) on the first call for the chunk starting at ``target``."""
    if start == target and _first(marker):
        os._exit(17)
    return compute_chunk(job, start, stop)
