"""Strategy: the tool's axis passes through the point where the last two joint axes meet.

A five-joint arm asked for a point and a direction (engine/targets.py) usually ends in a
two-axis wrist whose axes meet in a point W that lies on the directed tool axis, W = p - lam u
with u the tool's direction and lam the constant distance from W to the tool point along it.
W is then known from the target before any joint, and ``w = A1 ... A(n-2) c`` involves the
first n-2 joints only: the position and the pointing decouple as they do at a spherical wrist
(Pieper, PhD thesis, Stanford 1968, for three meeting axes; the same argument with the tool's
axis as the third line). The direction identity's splits then give the two wrist joints.
"""

from __future__ import annotations

import numpy as np
import sympy as sp

from ...analysis import generic_readings, relate
from ...kinematics import NumericChain
from ...terminal import fmt
from ..geometry import axis_in, line_meet, simplify_exact, zero_frames
from ..labels import axis_point_local
from ..pool import Factor, Identity


class ToolAxis:
    NAME = "wrist point on the tool axis (the last two axes meet on it)"

    def recognise(self, arm, target):
        from . import Finding
        n = arm.dof
        if target.kind != "point_and_direction":
            return Finding(False, [f"a wrist point on the tool axis decouples a point and a direction (this target: "
                                   f"{target.kind})"])
        if not (arm.joints[n - 1].revolute and arm.joints[n - 2].revolute):
            return Finding(False, [f"joints {n - 1} and {n} are not both revolute"])
        chain = NumericChain(arm)
        origins, directions = chain.joint_axes(generic_readings(arm))
        relation = relate(arm, n - 1, n, origins, directions)
        if relation.kind != "meet":
            return Finding(False, [f"axes {n - 1} and {n} do not meet ({relation.words(arm.length_unit)})"])
        from ..chain import Chain
        engine_chain = Chain(arm)
        meet_n = _meet_in_last_frame(engine_chain)
        k = "xyz".index(target.tool_axis)
        tool = sp.Matrix(arm.tool)
        offset = tool[:3, 3] - meet_n
        u = tool[:3, k]
        miss = offset - offset.dot(u) * u
        gap = float(sp.sqrt(sum(float(v.xreplace(engine_chain.parameters)) ** 2 for v in miss)))
        if gap > 1e-9 * arm.reach_scale():
            return Finding(False, [f"the tool's {target.tool_axis} axis misses the point where axes {n - 1} and {n} "
                                   f"meet by {fmt(gap, 4)} {arm.length_unit} (a wrist point needs 0)"])
        lam = simplify_exact(offset.dot(u), engine_chain)
        return Finding(True, [f"axes {n - 1} and {n} meet on the tool's {target.tool_axis} axis, "
                              f"{lam} {arm.length_unit} behind the tool point"],
                       {"lam": lam, "meet_n": meet_n})

    def contribute(self, setup, finding) -> None:
        chain, n = setup.chain, setup.arm.dof
        lam = finding.data["lam"]
        inner = axis_point_local(chain, n - 1, n)             # in frame n-2, where it is fixed
        point = setup.point_identity.known[:3, 0]
        direction = setup.direction_identity.known[:3, 0]
        w_local = np.array([float(v.xreplace(chain.parameters)) for v in finding.data["meet_n"]] + [1.0])

        def numeric(angles):
            return chain.numeric_core(angles) @ w_local

        known = setup.add_known_point("w", sp.Matrix([*(point - lam * direction), 1]),
                                      "wrist point in the DH base frame: p - lam u, on the tool's axis", numeric)
        factors = tuple(Factor(j, False) for j in range(1, n - 1))
        identity = Identity("wrist point", factors, known, "w", body=sp.Matrix([*inner, 1]),
                            body_words=f"c{n - 2}", numeric_known=numeric, prefix="v")
        setup.pool.add_identity(identity)
        setup.analysis.append(f"wrist point: ({', '.join(map(str, finding.data['meet_n']))}) in the last DH frame, "
                              f"({', '.join(map(str, inner))}) in frame {n - 2}; lam = {lam}")


def _meet_in_last_frame(chain) -> sp.Matrix:
    """Where axes n-1 and n meet, in the coordinates of the last DH frame (exact)."""
    n = chain.n
    frames = zero_frames(chain, n - 2, n)
    o_a, z_a = axis_in(chain, frames, n - 2, n - 1)
    o_b, z_b = axis_in(chain, frames, n - 2, n)
    point = line_meet(o_a, z_a, o_b, z_b, chain)
    local = frames[-1].inv() * sp.Matrix([*point, 1])
    return sp.Matrix([simplify_exact(x, chain) for x in local[:3, 0]])


STRATEGY = ToolAxis()
