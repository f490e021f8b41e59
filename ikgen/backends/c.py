"""C back-end: one header and one source per arm and scalar type; C99, no allocation, no state.

The printer is sympy's C99 printer with these changes: every number is a floating literal of the
chosen type (``260.0`` / ``260.0f``: no int overflow, no silent promotion to double), floats print
exactly (17 significant digits for double, 9 for float), small integer powers become products,
and the float build calls the ``f`` forms (sqrtf, atan2f, fabsf, sinf, cosf; atan2 on widened
arguments where the core has double-precision hardware, templates/c_atan2.c.j2).
"""

from __future__ import annotations

from dataclasses import dataclass

import sympy as sp
from sympy.codegen.ast import float32, real
from sympy.printing.c import C99CodePrinter

from ..ir import Derivation
from ..model import Arm
from . import bounds, common
from .python import forward_plan


@dataclass(frozen=True)
class Scalar:
    name: str          # "double" or "float"
    suffix: str        # file and symbol suffix: "" or "_f32"
    literal: str       # literal suffix: "" or "f"
    digits: int        # significant digits that round-trip

    def fn(self, name: str) -> str:
        return name + ("f" if self.name == "float" else "")


DOUBLE = Scalar("double", "", "", 17)
FLOAT = Scalar("float", "_f32", "f", 9)
SCALARS = (DOUBLE, FLOAT)


class SolverCPrinter(common.ProductPowers, C99CodePrinter):
    def __init__(self, scalar: Scalar):
        settings = {"type_aliases": {real: float32}} if scalar.name == "float" else {}
        super().__init__(settings)
        self.scalar = scalar
        self.sqrt_name = scalar.fn("sqrt")
        self.one = self.number(1)

    def number(self, value) -> str:
        value = float(value)
        text = f"{value:.{self.scalar.digits}g}"
        if "e" not in text and "." not in text and "inf" not in text and "nan" not in text:
            text += ".0"
        return text + self.scalar.literal

    def _print_Float(self, expr):
        return self.number(expr)

    def _print_Integer(self, expr):
        return self.number(expr)

    def _print_Rational(self, expr):
        return self.number(expr)


# The reach guard of a square root (radicand + 2 * tolerance * its typical size < 0: no solution)
# follows the scalar type. Float rounds at about 6e-8 relative (IEEE 754 binary32), and a pose
# rounded to float is itself a slightly different pose, so a reachable pose near a branch boundary
# (elbow stretch, the reach boundary) gives a float radicand down to a few -1e-6 of its typical
# size. Measured on benchtop6 within 1e-4..0.04 deg of elbow stretch: with 1e-9 (the double
# build's GUARD_TOLERANCE) 8-25 % of such poses came back empty (tests/test_c_backend_float.py);
# with 1e-6, 3e-6 and 1e-5 none there (2026-12-04). The band also admits poses beyond reach, by
# band / (2 |v|) in the distance |v| that the radicand measures: at a folded elbow |v| is small
# (benchtop6: 19 mm), and with 1e-5 the float build solved poses 0.031 mm (3.4e-5 of the reach)
# beyond it (benchmarks/bench_float.py, 1,000,000 poses); with 3e-6 the worst round trip is
# 8.7e-6 of the reach, with no more solution-count differences against the double build (181
# poses against 193, all within Jacobian distance 2.4e-8 of the singular set).
FLOAT_GUARD_TOLERANCE = 3e-6


def reach_guard(block, scalar: Scalar):
    """The guard expression of a cossin or quadratic block for this scalar type."""
    if scalar.name == "double" or block.guard_scale is None:
        return block.guard
    return block.radicand + 2 * FLOAT_GUARD_TOLERANCE * block.guard_scale


def names(arm: Arm, scalar: Scalar) -> dict:
    base = common.identifier(arm.name)
    prefix = f"{base}_ik{scalar.suffix}"
    return {"prefix": prefix, "upper": prefix.upper(), "header": f"{prefix}.h", "source": f"{prefix}.c"}


def render(arm: Arm, derivation: Derivation, scalar: Scalar = DOUBLE) -> dict[str, str]:
    """{file name: text} for the header and the source of one scalar type."""
    plan = common.lower(derivation)
    printer = SolverCPrinter(scalar)
    fwd_temps, fwd_entries = forward_plan(arm)
    env = common.environment()
    n = names(arm, scalar)
    context = dict(
        arm=arm, plan=plan, p=printer.doprint, num=printer.number, fn=scalar.fn, real=scalar.name,
        half_turn=common.half_turn, half_turn_split=common.half_turn_split,
        # a pair's cos^2 + sin^2 off 1 by more than rounding of the scalar type is renormalised
        unit_slack=common.UNIT_SLACK[scalar.name],
        header_lines=common.header_lines(arm, derivation), comment=common.comment_text, names=n,
        joint_names=[common.comment_text(j.name) for j in arm.joints],
        forward_temps=fwd_temps, forward_entries=fwd_entries,
        limits=[list(l) for l in arm.limits_in_readings()],
        joint_zero=common.joint_zero(arm), joint_turn=common.joint_turn(arm), joint_gain=common.joint_gain(arm),
        prismatic=[not j.revolute for j in arm.joints],
        mirror_terms=c_terms(plan.mirror_condition, printer) if plan.mirror else [], generator=common.GENERATOR,
        label_bits=[(i, l.name, l.positive, l.negative) for i, l in enumerate(plan.labels)],
        pose_names=[str(s) for s in plan.pose_symbols], used_pose={str(s) for s in plan_symbols(plan)},
        guard=lambda block: reach_guard(block, scalar),
        turns=common.joint_turns(arm), max_solutions=common.max_solutions(arm, plan),
        within_checks=common.limit_checked(common.joint_turns(arm)),
        within_shared=within_split(arm, plan, True), within_own=within_split(arm, plan, False),
        flags=flag_code(arm, plan, printer, scalar), inner_level=common.inner_level,
        limit_test=lambda k: limit_test(arm, k, scalar),
        probe_terms=probe_terms(plan), balanced_sum=common.balanced_sum,
        safe_entry=bounds.safe_entry(plan, scalar.name), label_inputs=label_inputs(plan),
        max_turns=max(t.count for t in common.joint_turns(arm)),
        # the polynomial's tangency band and root precision follow the scalar type, as the clamp does
        poly_tolerance=lambda block: block.tolerance if scalar.name == "double" else max(block.tolerance, 1e-5),
        root_eps=4e-16 if scalar.name == "double" else 4e-7,
        pair_tolerance=common.PAIR_TOLERANCE[scalar.name],
        target=common.target_plan(arm, derivation), angle_scale=float(arm.angle_scale),
        reach=float(arm.reach_scale()), revolute=[j.index - 1 for j in arm.joints if j.revolute],
        turn_floor=0.0 if scalar.name == "double" else common.ROLL_TOLERANCE[scalar.name],
        scale=[float(arm.angle_scale) if j.revolute else 1.0 for j in arm.joints],
        given=common.given_plan(arm), GP=f"{scalar.name} given, " if arm.given_joint else "",
        GA="given, " if arm.given_joint else "",
        tolerances={"tilt": common.TILT_TOLERANCE[scalar.name], "roll": common.ROLL_TOLERANCE[scalar.name],
                    "roll_gain": common.ROLL_GAIN[scalar.name], "roll_floor": common.ROLL_FLOOR[scalar.name],
                    "unit": common.UNIT_TOLERANCE[scalar.name]})
    return {n["header"]: common.tidy(env.get_template("c_header.h.j2").render(**context)),
            n["source"]: common.tidy(env.get_template("c_source.c.j2").render({**context, **source_functions(scalar, n)}))}


def source_functions(scalar: Scalar, n: dict) -> dict:
    """The source's ``fn``: every atan2 goes through <prefix>_atan2 (templates/c_atan2.c.j2: the
    maths library's, or the kernel's when the user compiles with IKGEN_FAST_ATAN2 defined)."""
    return {"fn": lambda name: f"{n['prefix']}_atan2" if name == "atan2" else scalar.fn(name)}


def limit_test(arm: Arm, k: int, scalar: Scalar) -> str:
    """The branch-free limit test of joint k (0-based) on its reading jv<k+1>: one comparison of the
    reading's magnitude for symmetric limits (the same test, NaN included)."""
    turn = common.joint_turns(arm)[k]
    if turn.low == -turn.high:
        return f"({scalar.fn('fabs')}(jv{k + 1}) <= HIGH[{k}])"
    return f"(jv{k + 1} >= LOW[{k}]) & (jv{k + 1} <= HIGH[{k}])"


def flag_code(arm: Arm, plan, printer: SolverCPrinter, scalar: Scalar) -> dict:
    """The C of a solution's labels, singular flag, conditioning measures and shared limit tests,
    placed as the Python solver places them (Plan.label_places, Plan.flag_places): {"early": {block
    index: [statements after that block]}, "measured": labels decided where the solution is written
    (lm<k>, lab<k>), "constant": labels whose measure is a root (first value for the first solution),
    "singular": the flag's expression, "conditions": [(i, expression, or None when computed
    early)], "inside": the shared limit tests' terms}."""
    early: dict[int, list[str]] = {}
    places = plan.label_places()
    zero = printer.number(0)
    for k, index in sorted(places.items(), key=lambda item: (item[1], item[0])):
        measure = printer.doprint(plan.label_measures[k])
        early.setdefault(index, []).append(f"const signed char lab{k} = (signed char)({measure} >= {zero} ? 1 : -1);")
    shared = [k + 1 for k in within_split(arm, plan, True)]
    flags = plan.flag_places(shared)

    def either(items: list, sofar: str | None) -> str:
        """The singular terms OR'd with the flag so far, comparisons in parentheses."""
        texts = [f"({t})" if " " in t else t for t in c_terms(items, printer)]
        return " | ".join(([sofar] if sofar else []) + texts)
    sofar = None
    for index, items in flags.singular_groups:
        early.setdefault(index, []).append(f"const int sng{index} = {either(items, sofar)};")
        sofar = f"sng{index}"
    singular = either(flags.singular_late, sofar) or "0"
    conditions = []
    for i, block in enumerate(plan.condition_blocks):
        gain = printer.number(block.condition_gain)
        value = f"cnd{block.key}" if block.kind == "poly" else f"root{block.key} * {gain}"
        if i in flags.conditions:
            early.setdefault(flags.conditions[i], []).append(f"const {scalar.name} cv{i} = {value};")
            value = None
        conditions.append((i, value))
    inside = []
    for joint in shared:
        test = limit_test(arm, joint - 1, scalar)
        if joint in flags.limits:
            early.setdefault(flags.limits[joint], []).append(f"const int in{joint} = {test};")
            test = f"in{joint}"
        inside.append(test)
    constant = [k for k in range(len(plan.labels)) if k not in places and plan.constant_label(k)]
    measured = [k for k in range(len(plan.labels)) if k not in places and k not in constant]
    return {"early": early, "measured": measured, "constant": constant, "singular": singular,
            "conditions": conditions, "inside": inside}


def within_split(arm: Arm, plan, shared: bool) -> list[int]:
    """The joints (0-based) whose limit test a solution shares with its mirrored twin (shared,
    Plan.twin_shares: tested once for both), or the others."""
    outputs = {out.joint: out for out in plan.outputs}
    return [k for k in common.limit_checked(common.joint_turns(arm)) if plan.twin_shares(outputs[k + 1]) == shared]


def probe_terms(plan) -> list[str]:
    """The values a solution's readings and conditioning measures are made from (generated names):
    all finite exactly when the solution is (the caller's given reading is checked on entry)."""
    terms = [f"l{out.joint}" if out.prismatic else f"th{out.joint}" for out in plan.outputs if not out.given]
    terms += [f"cnd{b.key}" if b.kind == "poly" else f"root{b.key}" for b in plan.condition_blocks]
    return terms


SELFTEST_DISTANCE = 1e-2      # self-test poses: Jacobian distance and every conditioning measure above this
SELFTEST_ROUNDS = 20          # rounds of 4 x count seeded readings before the best-conditioned seen are taken


def render_selftest(arm: Arm, derivation: Derivation, scalar: Scalar = DOUBLE, count: int = 200,
                    seed: int = 20261201, solver=None, vectors: list | None = None) -> tuple[str, str]:
    """(file name, text) of the self-test: seeded poses away from singular sets, with their sources.
    ``solver`` (the generated Python module) lets the poses keep away from every branch's singular
    set too: the source solution's conditioning measures are all above SELFTEST_DISTANCE.
    ``vectors``: selftest_vectors(arm, count, seed, solver) when already found (for another scalar)."""
    import numpy as np
    if vectors is None:
        vectors = selftest_vectors(arm, count, seed, solver)
    printer = SolverCPrinter(scalar)
    n = names(arm, scalar)
    scale = arm.reach_scale()
    double = scalar.name == "double"
    angle_tolerance = (1e-6 if double else 2e-2) * (180 / np.pi if arm.angle_unit == "deg" else 1.0)
    slide_tolerance = float(f"{(1e-6 if double else 1e-3) * scale:.3g}")
    context = dict(arm=arm, names=n, real=scalar.name, num=printer.number, fn=scalar.fn,
                   comment=common.comment_text, vectors=vectors, generator=common.GENERATOR,
                   given=common.given_plan(arm),
                   turns=[(360.0 if arm.angle_unit == "deg" else 2 * np.pi) if j.revolute else 0.0
                          for j in arm.joints],
                   # float32 carries about 7 significant digits (IEEE 754 binary32)
                   joint_tolerances=[angle_tolerance if j.revolute else slide_tolerance for j in arm.joints],
                   slide_tolerance=slide_tolerance if any(not j.revolute for j in arm.joints) else 0,
                   angle_tolerance=angle_tolerance,
                   checked=checked_entries(derivation), target_words=common.target_plan(arm, derivation).words,
                   position_tolerance=float(f"{(1e-9 if double else 1e-4) * scale:.3g}"),
                   rotation_tolerance=1e-9 if double else 1e-4)
    text = common.environment().get_template("c_selftest.c.j2").render(**context)
    return f"{n['prefix']}_selftest.c", text


def selftest_vectors(arm: Arm, count: int = 200, seed: int = 20261201, solver=None) -> list:
    """The self-test's (pose rows, source readings) pairs, the same for every scalar type: seeded
    readings whose Jacobian distance and source measures exceed SELFTEST_DISTANCE (see render_selftest)."""
    import numpy as np

    from ..kinematics import NumericChain
    from ..verify import angle_gap, given_of, jacobian_distance, random_readings
    chain = NumericChain(arm)
    rng = np.random.default_rng(seed)
    vectors = []

    def source_measure(pose, q) -> float:
        """The smallest conditioning measure of the solution equal to the source (-1: not found)."""
        if solver is None:
            return 1.0
        for solution in solver.inverse(pose, *given_of(arm, q), limits="ignore"):
            if angle_gap(np.array([solution[0]]), q, arm).max() < 1e-6:
                return min(solution[3], default=1.0)
        return -1.0

    # poses whose Jacobian distance and source measures all exceed SELFTEST_DISTANCE, in seeded
    # order; an arm whose measures are small everywhere (a scaled root measure) gets, after
    # SELFTEST_ROUNDS rounds, the best-conditioned of the poses seen instead of a search without end
    fallback = []
    for _ in range(SELFTEST_ROUNDS):
        readings = random_readings(arm, 4 * count, rng)
        distance = jacobian_distance(chain, readings)
        poses = chain.poses(readings)
        for q, pose, far in zip(readings, poses, distance):
            if len(vectors) == count:
                break
            measure = source_measure(pose, q)
            entry = ([float(v) for v in pose[:3].reshape(-1)], [float(v) for v in q])
            if far > SELFTEST_DISTANCE and measure > SELFTEST_DISTANCE:
                vectors.append(entry)
            elif measure > 0.0:
                fallback.append((min(far, measure), len(fallback), entry))
        if len(vectors) == count:
            break
    fallback.sort(key=lambda item: (-item[0], item[1]))
    return vectors + [entry for _, _, entry in fallback[:count - len(vectors)]]


def checked_entries(derivation: Derivation) -> list[int]:
    """Indices (row-major 3x4) of the pose entries a solution must reproduce: what the target fixes."""
    kind = derivation.target.kind if derivation.target is not None else "pose"
    position = [3, 7, 11]
    if kind == "point":
        return position
    if kind == "point_and_direction":
        column = "xyz".index(derivation.target.tool_axis)
        return sorted(position + [column, column + 4, column + 8])
    return list(range(12))


def plan_symbols(plan: common.Plan) -> set:
    """Every symbol an expression of the plan reads."""
    exprs = []
    for block in plan.blocks:
        exprs += common.block_exprs(block)
    exprs += [a.expr for a in plan.final_temps] + list(plan.label_measures)
    out = set()
    for e in exprs:
        out |= sp.sympify(e).free_symbols
    return out


def label_inputs(plan: common.Plan) -> list[str]:
    """The names the labels read (the readings-only entry computes no labels and marks these used,
    so strict compilers see no unused variable)."""
    targets = {str(a.target) for a in plan.final_temps}
    names = set()
    for e in [a.expr for a in plan.final_temps] + list(plan.label_measures):
        names |= {str(s) for s in sp.sympify(e).free_symbols}
    return sorted(names - targets)


def c_terms(items: list[tuple[str, int]], printer: SolverCPrinter) -> list[str]:
    zero = printer.number(0)
    forms = {"free": "free{}", "double": "root{} == " + zero, "double_root": "dbl{}", "root": "root{} > " + zero,
             "not_free": "!free{}"}
    return [forms[kind].format(joint) for kind, joint in items]
