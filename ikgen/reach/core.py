"""The reach map's arithmetic: from a solver's raw solutions to three figures per pose.

For every pose the map keeps

- ``count``: the number of solutions within the joint limits, counted the way the generated
  Python solver's ``inverse(pose)`` counts them (limits="drop"): a raw closed-form solution is
  inside when every joint has a reading within its limits equivalent to the one returned (a
  revolute joint's reading plus whole turns); a joint whose range exceeds a turn gives every
  such reading, each a solution of its own (the rule of ``backends.common.joint_turns``);
- ``conditioning``: the best conditioning among those solutions. A solution's conditioning is
  the smallest of its measures (``CONDITION_NAMES`` of the solver: each is 0 at its branch's
  singular set and grows away from it), so the figure is 0 when every solution is singular;
- ``margin``: the best margin to the joint limits among those solutions. A solution's margin is
  the smallest, over its joints, of the distance from the reading to the nearer limit as a share
  of that joint's range: 0.5 with every joint mid-range, 0 with a joint at a limit.

``conditioning`` and ``margin`` are each the best over the solutions, so they may come from
different solutions; both are NaN where ``count`` is 0.

Any solver with the numpy batch interface works (``inverse_batch(poses, current=None,
conditioning=True) -> (joints, valid, labels, singular, conditioning)``, joints as readings in
one turn): ``figures_from_batch``. The compiled C solver's ``inverse_many`` lists the solutions
within the limits already expanded, but no conditioning: ``figures_from_listed``.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

FIGURES = ("count", "conditioning", "margin")


@dataclass(frozen=True)
class JointWindow:
    """How one joint's readings are tested against its limits (reading units).

    ``turn`` is a whole turn (0 for a prismatic joint); ``low``/``high`` are the limits widened by
    the generated solvers' tolerance, used for the inside test; ``lower``/``upper`` are the limits
    as written, used for the margin; ``multi`` is True when the range exceeds a turn, and
    ``count`` is then the most equivalent readings the range holds."""
    turn: float
    low: float
    high: float
    lower: float
    upper: float
    multi: bool = False
    count: int = 1


def windows_of(arm) -> tuple[JointWindow, ...]:
    """The joint windows of an arm, from the turn tables of the generated solvers."""
    from ..backends.common import joint_turns
    limits = arm.limits_in_readings()
    return tuple(JointWindow(float(t.turn), float(t.low), float(t.high), float(lo), float(hi), bool(t.multi),
                             int(t.count))
                 for t, (lo, hi) in zip(joint_turns(arm), limits))


def joint_margin(readings: np.ndarray, window: JointWindow) -> np.ndarray:
    """Distance of each reading to its nearer limit as a share of the range (0 at a limit or
    beyond, 0.5 mid-range; 0 for a joint whose range is a single value)."""
    span = window.upper - window.lower
    if span <= 0.0:
        return np.zeros_like(readings)
    nearer = np.minimum(readings - window.lower, window.upper - readings)
    return np.maximum(nearer / span, 0.0)


def joint_readings(q: np.ndarray, window: JointWindow) -> tuple[np.ndarray, np.ndarray]:
    """(how many readings equivalent to q lie within the limits, the best margin among them),
    element by element; q is NaN where there is no solution (count 0 there)."""
    with np.errstate(invalid="ignore"):
        if not window.turn:
            inside = (q >= window.low) & (q <= window.high)
            return inside.astype(np.int64), np.where(inside, joint_margin(q, window), -np.inf)
        if not window.multi:
            # the per-pose solver's rule: a reading outside is moved one turn towards the range
            moved = np.where((q >= window.low) & (q <= window.high), q,
                             np.where(q < window.low, q + window.turn, q - window.turn))
            inside = (moved >= window.low) & (moved <= window.high)
            return inside.astype(np.int64), np.where(inside, joint_margin(moved, window), -np.inf)
        # every q + k turns within the range, from the lowest up (the per-pose solver's _turns)
        reading = q + -((q - window.low) // window.turn) * window.turn
        count = np.zeros(q.shape, dtype=np.int64)
        best = np.full(q.shape, -np.inf)
        for _ in range(window.count):
            inside = reading <= window.high
            count += inside
            best = np.where(inside, np.maximum(best, joint_margin(reading, window)), best)
            reading = reading + window.turn
        return count, best


def figures_from_batch(joints: np.ndarray, valid: np.ndarray, conditioning: np.ndarray | None,
                       windows: tuple[JointWindow, ...]) -> dict[str, np.ndarray]:
    """The three figures per pose from a batch solver's output: joints (N, R, J) readings in one
    turn, valid (N, R), conditioning (N, R, K) or None (then conditioning is NaN)."""
    n, raw, dof = joints.shape
    if dof != len(windows):
        raise ValueError(f"the solver returns {dof} joints per solution, the limits are for {len(windows)}")
    # only the valid raw solutions are tested (far fewer than N x R where much is out of reach)
    chosen = np.flatnonzero(valid.reshape(-1))
    listed = joints.reshape(-1, dof)[chosen]
    solutions = np.ones(len(chosen), dtype=np.int64)
    margin = np.full(len(chosen), np.inf)
    for j, window in enumerate(windows):
        count, best = joint_readings(listed[:, j], window)
        solutions *= count
        margin = np.minimum(margin, best)
    per_raw = np.zeros(n * raw, dtype=np.int64)
    per_raw[chosen] = solutions
    per_raw = per_raw.reshape(n, raw)
    reached = per_raw > 0
    result = {"count": per_raw.sum(axis=1), "margin": _best(_spread(margin, chosen, n * raw).reshape(n, raw), reached)}
    if conditioning is None or conditioning.shape[-1] == 0:
        result["conditioning"] = np.full(n, np.nan)
    else:
        smallest = conditioning.reshape(n * raw, -1)[chosen].min(axis=1)
        result["conditioning"] = _best(_spread(smallest, chosen, n * raw).reshape(n, raw), reached)
    return result


def _spread(values: np.ndarray, chosen: np.ndarray, size: int) -> np.ndarray:
    full = np.full(size, -np.inf)
    full[chosen] = values
    return full


def figures_from_listed(joints: np.ndarray, counts: np.ndarray,
                        windows: tuple[JointWindow, ...]) -> dict[str, np.ndarray]:
    """The figures from solutions already within the limits and expanded (the C solver's
    inverse_many with limits="drop": joints (N, M, J), the first counts[i] rows of pose i).
    No conditioning comes with them: that figure is NaN."""
    n, most, _ = joints.shape
    listed = np.arange(most)[None, :] < counts[:, None]
    margin = np.full((n, most), np.inf)
    for j, window in enumerate(windows):
        margin = np.minimum(margin, joint_margin(joints[:, :, j].astype(float), window))
    return {"count": counts.astype(np.int64), "margin": _best(margin, listed), "conditioning": np.full(n, np.nan)}


def _best(values: np.ndarray, keep: np.ndarray) -> np.ndarray:
    """Row-wise maximum of ``values`` where ``keep``; NaN in rows with nothing kept."""
    best = np.where(keep, values, -np.inf).max(axis=1)
    return np.where(keep.any(axis=1), best, np.nan)
