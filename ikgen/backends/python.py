"""Python back-end: one standalone module per arm that imports only ``math``.

The printer is sympy's Python code printer with these changes for speed and exactness: small
integer powers become products (``x*x`` is faster than ``x**2`` in CPython), floats print as
their shortest round-trip repr, integers as float literals (``95.0*r13``: CPython's interpreter
specialises float-by-float arithmetic, not int-by-float), and math functions are imported by
name.
"""

from __future__ import annotations

import math
import re
from fractions import Fraction

import sympy as sp
from sympy.printing.pycode import PythonCodePrinter

from ..ir import Derivation
from ..kinematics import link_from_cos_sin
from ..model import Arm
from . import bounds, common


class SolverPythonPrinter(common.ProductPowers, PythonCodePrinter):
    def __init__(self):
        super().__init__({"fully_qualified_modules": False, "standard": "python3"})

    def _print_Float(self, expr):
        return repr(float(expr))

    def _print_Integer(self, expr):
        # a float literal: CPython specialises float * float, not int * float (about 7 % of a solve)
        return repr(float(expr))

    def _print_Reciprocal(self, expr):
        # read only where the divisor passed its test; a zero divisor would raise here
        x = self._print(expr.args[0])
        return f"(1.0/{x} if {x} else 0.0)"


def printer() -> SolverPythonPrinter:
    return SolverPythonPrinter()


def forward_plan(arm: Arm) -> tuple[list[common.Assignment], list[sp.Expr]]:
    """Tool pose entries (row-major 3x4) as expressions in c1, s1, ... (l3 for a prismatic joint's
    displacement) with CSE; made once per arm and kept on it (the C back-ends print the same)."""
    if "_forward_plan" not in arm.__dict__:
        object.__setattr__(arm, "_forward_plan", forward_plan_now(arm))     # Arm is frozen
    return arm.__dict__["_forward_plan"]


def forward_plan_now(arm: Arm) -> tuple[list[common.Assignment], list[sp.Expr]]:
    result = sp.Matrix(arm.base)
    for joint in arm.joints:
        if joint.revolute:
            ct, st = sp.Symbol(f"c{joint.index}", real=True), sp.Symbol(f"s{joint.index}", real=True)
            d = joint.d
        else:
            ct, st, d = sp.cos(joint.theta), sp.sin(joint.theta), sp.Symbol(f"l{joint.index}", real=True)
        result = result * link_from_cos_sin(arm.convention, joint.a, sp.cos(joint.alpha), sp.sin(joint.alpha),
                                            d, ct, st)
    result = result * sp.Matrix(arm.tool)
    entries = [common.floats(result[i, k]) for i in range(3) for k in range(4)]
    return common.eliminate(entries, "f")


def in_place(block: common.Block, expr) -> str:
    """``expr`` printed with a cossin block's cn<k>, sn<k> replaced by their formulas in
    parentheses (one statement less each where nothing else reads them; the arithmetic, and so
    every rounding, stays that of the other back-ends, which name them)."""
    j, p = block.key, printer()
    formulas = {f"cn{j}": f"({p.doprint(block.cn)})", f"sn{j}": f"({p.doprint(block.sn)})"}
    return re.sub(rf"\b(cn{j}|sn{j})\b", lambda m: formulas[m.group(1)], p.doprint(expr))


def render(arm: Arm, derivation: Derivation) -> str:
    plan = common.lower(derivation)
    p = printer()
    labels = label_table(plan)
    fwd_temps, fwd_entries = forward_plan(arm)
    template = common.environment().get_template("python_solver.py.j2")
    return common.tidy(template.render(
        arm=arm, plan=plan, p=p.doprint, in_place=in_place, header=common.header_lines(arm, derivation),
        module_name=common.identifier(arm.name), comment=common.comment_text,
        joint_names=[common.comment_text(j.name) for j in arm.joints],
        forward_temps=fwd_temps, forward_entries=fwd_entries,
        limits=[list(l) for l in arm.limits_in_readings()],
        joint_zero=common.joint_zero(arm), joint_turn=common.joint_turn(arm), joint_direction=[j.direction for j in arm.joints],
        joint_scale=[arm.angle_scale if j.revolute else 1.0 for j in arm.joints],
        prismatic=[not j.revolute for j in arm.joints],
        generator=common.GENERATOR,
        mirror_terms=terms(plan.mirror_condition) if plan.mirror else [],
        turns=common.joint_turns(arm), max_solutions=common.max_solutions(arm, plan),
        joint_vars=", ".join(f"q{j.index}" for j in arm.joints),
        early_parts=early_parts(arm, plan, labels), target=common.target_plan(arm, derivation),
        angle_scale=repr(float(arm.angle_scale)), tolerances=tolerances("double"),
        reach=repr(float(arm.reach_scale())), revolute=repr(tuple(j.index - 1 for j in arm.joints if j.revolute)),
        scale=repr(tuple(float(arm.angle_scale) if j.revolute else 1.0 for j in arm.joints)),
        target_api="\n        ".join(TARGET_API[derivation.target.kind if derivation.target else "pose"]),
        given=common.given_plan(arm), ga=", given" if arm.given_joint else "",
        safe_entry=bounds.safe_entry(plan, "double"), label_table=labels,
        half_turn=lambda out: repr(common.half_turn(out)),
        half_turn_split=lambda out: repr(common.half_turn_split(out))))


TARGET_API = {
    "pose": ["TARGET is \"pose\": the whole pose is read."],
    "point": ["TARGET is \"point\": only the pose's position is read (its rotation is free).",
              "inverse_point(point, current=None, limits=\"drop\", with_status=False) takes the point."],
    "point_and_angle": ["TARGET is \"point_and_angle\": the position and the turn about TARGET_AXIS are read;",
                        "a pose tilted off TARGET_AXIS by more than TILT_TOLERANCE is not realisable.",
                        "inverse_point_angle(point, angle, current=None, limits=\"drop\", with_status=False)",
                        "takes them directly (angle: the turn from the tool rotation at the zero reading)."],
    "point_and_direction": ["TARGET is \"point_and_direction\": the position and the tool's TOOL_AXIS column are",
                            "read; solutions whose roll about it is off the pose's by more than ROLL_TOLERANCE",
                            "are dropped (none left: not realisable).",
                            "inverse_point_direction(point, direction, current=None, limits=\"drop\",",
                            "with_status=False) takes them directly and leaves the roll to the arm."],
}


def unit_band(tolerance: float) -> tuple[str, str]:
    """(lo, hi) as Python literals such that, for every float ``hq``, ``hq < lo or hq > hi`` holds
    exactly when ``abs(hq - 1.0) > tolerance`` does (the C solver's test): within [0.5, 2] the
    difference hq - 1.0 is exact (Sterbenz's lemma), so the test is hq > 1 + tolerance or
    hq < 1 - tolerance in exact arithmetic, and lo, hi are the floats nearest those bounds on
    the inside; outside [0.5, 2] both tests hold. A NaN passes both, as before. Two comparisons
    cost the interpreter less than a call to abs()."""
    bound = Fraction(tolerance)                  # the float's exact value
    hi = float(1 + bound)
    if Fraction(hi) > 1 + bound:
        hi = math.nextafter(hi, 0.0)
    lo = float(1 - bound)
    if Fraction(lo) < 1 - bound:
        lo = math.nextafter(lo, 2.0)
    return repr(lo), repr(hi)


def tolerances(real: str) -> dict:
    return {"tilt": common.TILT_TOLERANCE[real], "roll": common.ROLL_TOLERANCE[real],
            "roll_gain": common.ROLL_GAIN[real], "roll_floor": common.ROLL_FLOOR[real],
            "unit": common.UNIT_TOLERANCE[real], "slack": common.UNIT_SLACK[real],
            "slack_band": unit_band(common.UNIT_SLACK[real]), "pair_band": unit_band(common.PAIR_TOLERANCE[real])}


def within_parts(arm: Arm, plan: common.Plan) -> tuple[list[tuple[int, str]], list[tuple[int, str]]]:
    """The limits check of a solution whose revolute readings lie in one turn, as (joint,
    expression in its readings: v<j>, or ``given`` for the caller's joint); joints whose limits
    hold the whole turn need no check. Split in two: the checks of readings a mirrored twin shares
    with its first solution (tested once for both) and the rest (all of them when the plan has no
    mirror)."""
    kept, changed = [], []
    turns = common.joint_turns(arm)
    for k in common.limit_checked(turns):
        turn, joint = turns[k], k + 1
        out = next(o for o in plan.outputs if o.joint == joint)
        check = f"{turn.low!r} <= {'given' if out.given else f'v{joint}'} <= {turn.high!r}"
        (kept if plan.twin_shares(out) else changed).append((joint, check))
    return kept, changed


def early_parts(arm: Arm, plan: common.Plan, labels: dict | None) -> dict:
    """Loop-invariant hoisting of the parts of a solution's labels, flags and measures that are
    known above the innermost level (the reach's label, singular terms, conditioning and limit
    test of a six-axis arm: once per reach root, not once per elbow and wrist root): a label's
    pick of its subtable where label_table places it, and the singular terms, conditioning
    products and shared limit tests where Plan.flag_places puts them. Returns {"lines": {block
    index: (level, [statements, comments included])}, "singular": the solution's singular
    expression, "conditioning": the entries of its tuple, "kept"/"changed": the limit tests as
    within_parts splits them, early ones by name}."""
    lines: dict[int, tuple[int, list[str]]] = {}
    for index, (level, steps) in (labels["early"] if labels else {}).items():
        lines[index] = (level, ["# configuration labels known here (once here, not once per solution): their subtable"]
                        + [f"{name} = {parent}[0 if {measure} >= 0.0 else 1]" for name, parent, measure in steps])
    flags = "# the flags, measures and limit tests known here (once here, not once per solution)"

    def add(index: int, statement: str) -> None:
        statements = lines.setdefault(index, (common.inner_level(plan.blocks[index]), []))[1]
        if flags not in statements:
            statements.append(flags)
        statements.append(statement)
    kept_checks, changed_checks = within_parts(arm, plan)
    places = plan.flag_places([joint for joint, _ in kept_checks])
    sofar = None
    for index, items in places.singular_groups:
        add(index, f"sng{index} = " + " or ".join(([sofar] if sofar else []) + terms(items)))
        sofar = f"sng{index}"
    singular = " or ".join(([sofar] if sofar else []) + terms(places.singular_late)) or "False"
    conditioning = []
    for i, block in enumerate(plan.condition_blocks):
        if block.kind == "poly":
            conditioning.append(f"cnd{block.key}")
        elif block.condition_gain == 1.0:
            conditioning.append(f"root{block.key}")
        elif i in places.conditions:
            add(places.conditions[i], f"cv{i} = root{block.key} * {block.condition_gain}")
            conditioning.append(f"cv{i}")
        else:
            conditioning.append(f"root{block.key} * {block.condition_gain}")
    kept = []
    for joint, check in kept_checks:
        if joint in places.limits:
            add(places.limits[joint], f"in{joint} = {check}")
            check = f"in{joint}"
        kept.append(check)
    return {"lines": lines, "singular": singular, "conditioning": conditioning, "kept": kept,
            "changed": [check for _, check in changed_checks]}


def label_table(plan: common.Plan) -> dict | None:
    """The configuration labels as a nested table of prebuilt tuples, or None where no label is
    known early or constant (the tuple is then built per solution, which is cheaper than a table
    lookup). The table nests the labels known after a block (Plan.label_places) first, in block
    order, then the others; each early label picks its subtable where it is known (once per root
    of its loop, not once per solution), and a solution indexes the rest. Returns {"table": the
    nested tuple's source, "early": {block index: (its inner level, [(name, parent, measure)])},
    "solution": the subtable a solution and its mirrored twin share (named cfgs; None when there is
    none to pick), "first"/"mirrored": each one's config expression, "measured": the labels whose
    measure lm<k> a solution computes}."""
    places = plan.label_places()
    constant = [k for k in range(len(plan.labels)) if k not in places and plan.constant_label(k)]
    if not plan.labels or not (places or constant):
        return None

    def flipped(k: int) -> bool:
        return plan.mirror is not None and plan.mirror.label_signs[k] < 0
    early = sorted(places, key=lambda k: (places[k], k))
    rest = [k for k in range(len(plan.labels)) if k not in places]
    shared = [k for k in rest if not flipped(k)]          # one index for a solution and its twin
    order = early + shared + [k for k in rest if flipped(k)]

    def nest(level: int, chosen: dict, indent: str) -> str:
        if level == len(order):
            return "(" + "".join(f'"{plan.labels[k].positive if chosen[k] == 0 else plan.labels[k].negative}", '
                                 for k in range(len(plan.labels))) + ")"
        inner = indent + "    "
        return "(\n" + "".join(inner + nest(level + 1, {**chosen, order[level]: i}, inner) + ",\n"
                               for i in (0, 1)) + indent + ")"
    p = printer()
    steps: dict[int, tuple] = {}
    parent = "_CONFIGS"
    for k in early:
        level = common.inner_level(plan.blocks[places[k]])
        steps.setdefault(places[k], (level, []))[1].append((f"cfg{k}", parent, p.doprint(plan.label_measures[k])))
        parent = f"cfg{k}"

    def index(k: int, mirrored: bool) -> str:
        flip = mirrored and flipped(k)
        if k in constant:
            return "[1]" if flip else "[0]"
        return f"[1 if lm{k} >= 0.0 else 0]" if flip else f"[0 if lm{k} >= 0.0 else 1]"
    solution = parent + "".join(index(k, False) for k in shared)
    own = order[len(early) + len(shared):]
    return {"table": nest(0, {}, ""), "early": steps, "solution": solution if own else None,
            "first": ("cfgs" if own else solution) + "".join(index(k, False) for k in own),
            "mirrored": ("cfgs" if own else solution) + "".join(index(k, True) for k in own),
            "measured": [k for k in rest if k not in constant]}


PYTHON_TERMS = {"free": "free{}", "double": "root{} == 0.0", "double_root": "dbl{}", "root": "root{} > 0.0",
                "not_free": "not free{}"}


def terms(items: list[tuple[str, int]], forms: dict = PYTHON_TERMS) -> list[str]:
    """Structured condition terms of the plan in this language's syntax."""
    return [forms[kind].format(joint) for kind, joint in items]
