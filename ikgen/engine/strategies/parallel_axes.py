"""Strategy: three or more consecutive revolute axes are parallel.

Rotations about parallel axes add up: the links after a run of parallel axes turn by the signed
sum of the run's angles (th2 + th3 + th4 for the usual run 2-3-4). The strategy makes those sums
unknowns of their own and lets the product side of every split that holds part of the run be
written in the run's coordinates (its first angle and the partial sums), so that an entry that
depends on the sum alone shows a single unknown. The engine then solves the sum like a joint
(usually from rotation entries, once the joints around the run are known), the planar chain
inside the run by the law of cosines and a linear pair, and the last member from the sum
(Murray, Li and Sastry, A Mathematical Introduction to Robotic Manipulation, ch. 3, for the
planar-chain subproblem; common practice for arms whose shoulder, elbow and first wrist axes
are parallel).
"""

from __future__ import annotations

import numpy as np

from ...analysis import generic_readings, relate
from ...kinematics import NumericChain
from ..pool import Coordinates
from ..symbols import Unknown

MIN_RUN = 3


def runs_of_parallel_axes(arm) -> list[tuple[int, int, tuple[int, ...]]]:
    """(first, last, signs) for every maximal run of consecutive joints with parallel axes that holds
    at least MIN_RUN revolute joints; signs relative to the first revolute member, 0 for a prismatic
    member (a slide along the common direction, as in a SCARA, does not turn the links after it)."""
    chain = NumericChain(arm)
    origins, directions = chain.joint_axes(generic_readings(arm))
    runs = []
    start = 1
    while start <= arm.dof:
        end = start
        while end < arm.dof and relate(arm, end, end + 1, origins, directions).kind in ("parallel", "coincident"):
            end += 1
        members = range(start, end + 1)
        revolute = [j for j in members if arm.joints[j - 1].revolute]
        if len(revolute) >= MIN_RUN:
            reference = directions[revolute[0] - 1]
            signs = tuple(int(np.sign(np.dot(directions[j - 1], reference))) if arm.joints[j - 1].revolute else 0
                          for j in members)
            runs.append((start, end, signs))
        start = end + 1
    return runs


def closest_to_parallel(arm) -> str:
    """Words for the two consecutive pairs of axes nearest to parallel (a run needs 0 deg twice)."""
    chain = NumericChain(arm)
    origins, directions = chain.joint_axes(generic_readings(arm))
    angles = [(float(np.degrees(relate(arm, j, j + 1, origins, directions).angle)), j) for j in range(1, arm.dof)]
    best = min(((a + b, j) for (a, j), (b, _) in zip(angles, angles[1:])), default=None)
    if best is None:
        return "too few joints"
    j = best[1]
    return (f"the nearest are axes {j} to {j + 2}, at {angles[j - 1][0]:.4g} and {angles[j][0]:.4g} deg between "
            "neighbours; parallel axes would be at 0")


class ParallelAxes:
    NAME = "parallel axes (three or more consecutive axes parallel)"

    def recognise(self, arm, target):
        from . import Finding
        runs = runs_of_parallel_axes(arm)
        if not runs:
            return Finding(False, ["no three consecutive revolute axes are parallel (" + closest_to_parallel(arm) + ")"])
        words = [f"axes {first} to {last} are parallel: their angles add up (signs {', '.join('+' if s > 0 else '-' for s in signs)})"
                 for first, last, signs in runs]
        return Finding(True, words, {"runs": runs})

    def contribute(self, setup, finding) -> None:
        for first, last, signs in finding.data["runs"]:
            name = f"the coordinates of parallel axes {first}-{last}"
            setup.pool.coordinates.append(Coordinates(name, first, last, signs))
            revolute = [j for j in range(first, last + 1) if signs[j - first] != 0]
            for index, a in enumerate(revolute):
                for b in revolute[index + 1:]:
                    members = tuple((j, signs[j - first] * signs[a - first]) for j in revolute if a <= j <= b)
                    setup.extra_unknowns.append(Unknown.sum_of(members))


STRATEGY = ParallelAxes()
