"""Strategy: three consecutive axes meet in one point (a spherical wrist at either end).

Last three axes (4, 5, 6 of a six-axis arm): the meeting point is fixed in link 3 and in the
flange, so it is known from the pose before any joint, ``w = T c6``, and the position equation
``w = A1 A2 A3 c3`` involves joints 1-3 only (Pieper, PhD thesis, Stanford 1968: three
intersecting axes decouple position from orientation). The strategy adds that point identity;
its splits, components and norms give the position equations, and the pose identity's rotation
entries ``(A1 A2 A3)^-1 T = A4 A5 A6`` give the wrist (the ZYZ-type extraction, generalised).

First three axes (1, 2, 3): the meeting point b0 is fixed in the base and in link 3, so
``T^-1 b0 = A6^-1 A5^-1 A4^-1 c3`` involves joints 4-6 only: the same decoupling, turned around.
"""

from __future__ import annotations

import numpy as np
import sympy as sp

from ...analysis import check_wrist
from ...errors import StructureError
from ...terminal import fmt
from ..geometry import meeting_point
from ..pool import Factor, Identity


class WristCentre:
    def __init__(self, at_end: bool):
        self.at_end = at_end
        self.NAME = "wrist centre (last three axes meet)" if at_end else "base centre (first three axes meet)"

    def first_axis(self, arm) -> int:
        return arm.dof - 2 if self.at_end else 1

    def recognise(self, arm, target):
        from . import Finding
        solved = len(arm.solved_joints)
        if target.kind not in ("pose", "point_and_angle") or solved != 6:
            return Finding(False, [f"meeting axes decouple a full pose of six joints to solve for (this target: "
                                   f"{target.kind}, {solved} joints)"])
        first = self.first_axis(arm)
        if any(not j.revolute for j in arm.joints[first - 1:first + 2]):
            return Finding(False, [f"joints {first} to {first + 2} include a prismatic one"])
        check = check_wrist(arm, first)
        words = check.words if check.meets else [f"axes {first}, {first + 1}, {first + 2} do not meet in one point "
                                                 f"(meeting axes would be 0 {arm.length_unit} apart): "
                                                 + "; ".join(check.words)]
        return Finding(check.meets, words, {"first": first})

    def contribute(self, setup, finding) -> None:
        if self.at_end:
            self._last_three(setup, finding.data["first"])
        else:
            self._first_three(setup)

    def _last_three(self, setup, first: int) -> None:
        chain, n = setup.chain, setup.arm.dof
        inner = meeting_point(chain, first, first - 1)       # in the frame before the three axes
        outer = meeting_point(chain, first, n)               # in the last DH frame
        self._check_fixed(setup, inner, outer, first)
        known = setup.add_known_point("w", setup.core * sp.Matrix([*outer, 1]),
                                      "wrist centre in the DH base frame: T c, with c its place in the last DH frame",
                                      lambda angles: chain.numeric_core(angles) @ self._numeric(outer, chain))
        factors = tuple(Factor(j, False) for j in range(1, first))
        identity = Identity("wrist centre", factors, known, "w", body=sp.Matrix([*inner, 1]),
                            body_words=f"c{first - 1}", numeric_known=lambda a: chain.numeric_core(a) @ self._numeric(outer, chain),
                            prefix="v")
        setup.pool.add_identity(identity)
        setup.analysis.append(f"wrist centre: ({', '.join(map(str, outer))}) in the last DH frame, "
                              f"({', '.join(map(str, inner))}) in frame {first - 1}")
        if "wrist_in_frame1" not in setup.label_points and identity.length >= 1:
            setup.label_points["wrist_in_frame1"] = setup.names.folded(identity, 1, identity.length)
            setup.label_points["inner"] = inner

    def _first_three(self, setup) -> None:
        chain, n = setup.chain, setup.arm.dof
        base_point = meeting_point(chain, 1, 0)              # in frame 0
        link_point = meeting_point(chain, 1, 3)              # in frame 3
        rotation = setup.core[:3, :3]
        position = setup.core[:3, 3]
        point_core = rotation.T * (base_point - position)
        from ..chain import numeric_inverse
        numeric = lambda angles: numeric_inverse(chain.numeric_core(angles)) @ self._numeric(base_point, chain)
        known = setup.add_known_point("b", sp.Matrix([*point_core, 1]),
                                      "base centre (where axes 1, 2, 3 meet) seen from the last DH frame: T^-1 b0",
                                      numeric)
        factors = tuple(Factor(j, True) for j in range(n, 3, -1))
        identity = Identity("base centre", factors, known, "b", body=sp.Matrix([*link_point, 1]),
                            body_words="c3", numeric_known=numeric, prefix="e")
        setup.pool.add_identity(identity)
        setup.analysis.append(f"base centre: ({', '.join(map(str, base_point))}) in the DH base frame, "
                              f"({', '.join(map(str, link_point))}) in frame 3")

    @staticmethod
    def _numeric(point, chain) -> np.ndarray:
        return np.array([float(x.xreplace(chain.parameters)) for x in point] + [1.0])

    def _check_fixed(self, setup, inner, outer, first) -> None:
        """The exact point must agree with the numeric chain on the samples."""
        chain = setup.chain
        angles = setup.samples.angles
        links = chain.numeric_links(angles)
        before = np.broadcast_to(np.eye(4), (len(angles), 4, 4)).copy()
        for k in range(first - 1):
            before = before @ links[:, k]
        a = before @ self._numeric(inner, chain)
        b = chain.numeric_core(angles) @ self._numeric(outer, chain)
        gap = float(np.max(np.abs(a - b)))
        if gap > 1e-9 * chain.length_scale:
            raise StructureError(f"the meeting point of axes {first}-{first + 2} is not fixed in the links "
                                 f"(off by {fmt(gap, 3)} {setup.arm.length_unit}); this is a bug in the analysis")


LAST = WristCentre(at_end=True)
FIRST = WristCentre(at_end=False)
