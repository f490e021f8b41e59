"""numpy batch back-end: one module per arm that solves N poses at once, fully vectorised.

Each branch point of the plan becomes an array axis of size 2 (sign +1, -1), so every quantity
broadcasts over (2, 2, ..., N) with no Python loop over poses or branches: the branch axes first,
the pose axis last, so that numpy's inner loops run along the poses (with the poses first, every
operation that broadcasts over a branch axis loops in steps of two; the whole solve took about 1.4x
as long). A mirrored branch adds an output axis (the solution and its mirror). Invalid branches
(out of reach, double roots, the copy at a free joint) are masked, in exactly the per-pose
solver's order, so the valid entries of a row are the per-pose solver's solutions.
"""

from __future__ import annotations

from sympy.printing.numpy import NumPyPrinter

from ..ir import Derivation
from ..model import Arm
from . import bounds, common
from . import python as python_backend
from .python import terms


class BatchPrinter(common.ProductPowers, NumPyPrinter):
    sqrt_name = "numpy.sqrt"

    def __init__(self):
        super().__init__({"fully_qualified_modules": True})

    def _print_Float(self, expr):
        return repr(float(expr))


def render(arm: Arm, derivation: Derivation) -> str:
    plan = common.lower(derivation)
    printer = BatchPrinter()
    sizes = plan.branch_sizes + ([2] if plan.mirror else [])
    raw = 1
    for size in sizes:
        raw *= size
    template = common.environment().get_template("batch_solver.py.j2")
    return common.tidy(template.render(
        arm=arm, plan=plan, p=printer.doprint, header=common.header_lines(arm, derivation),
        module_name=common.identifier(arm.name), comment=common.comment_text,
        joint_zero=common.joint_zero(arm), joint_turn=common.joint_turn(arm), joint_gain=common.joint_gain(arm),
        prismatic=[not j.revolute for j in arm.joints],
        branch_axes=plan.depth, axis_sizes=sizes, raw_solutions=raw,
        singular_terms=terms(plan.singular_terms, BATCH_TERMS), balanced_sum=common.balanced_sum,
        probe_terms=[f"u{out.joint}" for out in plan.outputs]
        + [f"{'cnd' if b.kind == 'poly' else 'cond'}{b.key}" for b in plan.condition_blocks],
        mirror_terms=terms(plan.mirror_condition, BATCH_TERMS) if plan.mirror else [],
        target=common.target_plan(arm, derivation), tolerances=python_backend.tolerances("double"),
        arm_angle_scale=repr(float(arm.angle_scale)), given=common.given_plan(arm),
        ga=", given" if arm.given_joint else "", safe_entry=bounds.safe_entry(plan, "double")))


BATCH_TERMS = {"free": "free{}", "double": "(root{} == 0.0)", "double_root": "dbl{}", "root": "(root{} > 0.0)",
               "not_free": "~free{}"}
