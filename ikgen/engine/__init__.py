"""The derivation engine: one path from an arm to its closed-form solution as IR.

``derive(arm)`` builds the setup (chain, pose identity, samples), lets every strategy that
recognises its structure add identities, unknowns and labels (engine/strategies), enumerates
the equation pool (engine/pool.py), and runs the one solver (engine/solver.py) until every joint
is known. When the solver cannot finish, the refusal says which structures were tried, how far
the arm is from each, and which equations were reached.
"""

from __future__ import annotations

import dataclasses

import numpy as np
import sympy as sp

from ..analysis import describe_axes
from ..errors import StructureError
from ..ir import GIVEN_SYMBOL, CirclePolynomial, Compute, CosSinEquation, Derivation, JointOutput, QuadraticLength
from ..model import Arm
from .context import make_setup
from .targets import check_independent, check_rank, resolve as resolve_target
from .labels import MEANINGS, build_labels, plan_labels, root_label
from .mirror import attach_mirror
from .solver import Solver, drop_idle_sibling_forms, free_symbols_of
from .strategies import STRATEGIES

def derive(arm: Arm) -> Derivation:
    if arm.given_joint is None and arm.dof == 7 and (arm.target is None or arm.target.kind == "pose"):
        raise StructureError(seven_joint_refusal(arm))
    target = resolve_target(arm)
    check_independent(arm)
    check_rank(arm, target)
    setup = make_setup(arm, target)
    findings = [(strategy, strategy.recognise(arm, target)) for strategy in STRATEGIES]
    applied = [(s, f) for s, f in findings if f.applies]
    setup.analysis = describe_axes(arm)
    for strategy, finding in applied:
        setup.analysis += finding.words
        strategy.contribute(setup, finding)
        setup.strategies.append(strategy.NAME)
    specs = plan_labels(arm, target)
    setup.labels = build_labels(setup, specs)
    setup.pool.build()
    unknowns = {u.key: u for u in setup.chain.unknowns + setup.extra_unknowns}
    solver = Solver(setup.chain, setup.pool, setup.names, setup.samples, unknowns,
                    branch_namer(specs), constant_symbols=setup.chain.parameters)
    for step in setup.steps:
        solver.steps.append(step)
    if arm.given_joint is not None:
        solver.steps.append(given_step(arm, setup))
        solver.solved.append(str(arm.given_joint))
        solver.emitted.add(str(arm.given_joint))
    try:
        solver.solve([str(j.index) for j in arm.solved_joints])
    except StructureError as exc:
        raise StructureError(refusal(arm, findings, str(exc))) from None
    setup.labels += root_labels(solver.steps, {l.name for l in setup.labels}, unknowns)
    for label in setup.labels:
        for symbol in sorted(label.measure.free_symbols, key=str):
            solver.ensure(symbol)
    steps = drop_idle_sibling_forms(solver.steps, setup.labels)
    steps = [first_root_first(step, setup.labels, setup.samples) for step in steps]
    steps = attach_mirror(steps, setup.labels, solver.circles)
    solved = {step.key for step in steps if hasattr(step, "key")}
    used = set().union(*(free_symbols_of(s) for s in steps)) | set().union(*(l.measure.free_symbols for l in setup.labels))
    outputs = [JointOutput(j.index, j.name, j.theta + j.offset, j.direction, arm.exact_angle_scale,
                           given=j.index == arm.given_joint) if j.revolute else
               JointOutput(j.index, j.name, j.d + j.offset, j.direction, sp.Integer(1), prismatic=True,
                           given=j.index == arm.given_joint)
               for j in arm.joints]
    solutions = 1
    for step in steps:
        if isinstance(step, (CosSinEquation, QuadraticLength)):
            solutions *= 2
        elif isinstance(step, CirclePolynomial):
            solutions *= 4
    return Derivation(arm_name=arm.name, family="; ".join(setup.strategies) or "general (no structure recognised)",
                      analysis=setup.analysis, pose_symbols=tuple(setup.pose),
                      parameters=dict(setup.chain.parameters), steps=steps, labels=setup.labels, outputs=outputs,
                      max_solutions=solutions, length_scale=setup.chain.length_scale,
                      unknowns={k: u.members for k, u in unknowns.items()
                                if u.is_joint or k in solved or used & {u.cos, u.sin, u.angle}},
                      strokes=strokes(arm), target=target)


def given_choices(arm: Arm) -> list[tuple[int, str | None]]:
    """For each joint k: (k, None) when the engine derives the arm with joint k given, else (k, the
    first sentence of the refusal). Derives the arm once per joint (seconds each)."""
    out = []
    for joint in arm.joints:
        try:
            derive(dataclasses.replace(arm, given_joint=joint.index))
            out.append((joint.index, None))
        except StructureError as exc:
            out.append((joint.index, str(exc).split(", so nothing")[0].split(". ")[0]))
    return out


def choices_words(arm: Arm, choices) -> str:
    good = [f"{k} '{arm.joints[k - 1].name}'" for k, reason in choices if reason is None]
    return ("joints that can be given: " + ", ".join(good)) if good else "no joint can be given"


def seven_joint_refusal(arm: Arm) -> str:
    choices = given_choices(arm)
    return (f"arm '{arm.name}' has 7 joints: a pose leaves one of them free, so the caller must give one joint's "
            f"reading ([target] given_joint = <number or name> in the arm file, or --given-joint N, or "
            f"--given-joint auto for the first that works); {choices_words(arm, choices)}; nothing was written")


def given_step(arm: Arm, setup) -> Compute:
    """The given joint's DH variable (angle with its cosine and sine, or displacement) from the
    caller's reading GIVEN_SYMBOL; every later step reads it as known."""
    joint = arm.joints[arm.given_joint - 1]
    unknown = setup.chain.unknowns[joint.index - 1]
    zero = joint.theta + joint.offset if joint.revolute else joint.d + joint.offset
    gain = joint.direction * (arm.exact_angle_scale if joint.revolute else 1)
    readings = (setup.samples.angles[:, joint.index - 1] - float(zero)) / float(gain)
    setup.samples.define(GIVEN_SYMBOL, readings)
    words = f"joint {joint.index} '{joint.name}' is given: its DH variable from the caller's reading"
    if not joint.revolute:
        return Compute((unknown.length,), (zero + gain * GIVEN_SYMBOL,), words)
    return Compute((unknown.angle, unknown.cos, unknown.sin),
                   (zero + gain * GIVEN_SYMBOL, sp.cos(unknown.angle), sp.sin(unknown.angle)), words)


def first_root_first(step, labels, samples):
    """A two-root step whose branch a label names, written so that its first root (sign +1) is the
    label's first value (reach_forward before reach_backward ...): the equation times -1 swaps the
    roots. Decided on the samples, where the root's sign is that of a sin(th) - b cos(th)."""
    if not isinstance(step, CosSinEquation):
        return step
    label = next((l for l in labels if l.name == step.branch.name), None)
    if label is None:
        return step
    u = sp.Symbol(f"c{step.key}", real=True), sp.Symbol(f"s{step.key}", real=True)
    root_sign = np.sign(samples.values(step.a * u[1] - step.b * u[0]))
    label_sign = np.sign(samples.values(label.measure))
    clear = (root_sign != 0) & (label_sign != 0)
    if np.sum(root_sign[clear] != label_sign[clear]) <= np.sum(clear) / 2:
        return step
    return dataclasses.replace(step, a=-step.a, b=-step.b, c=-step.c)


def strokes(arm: Arm) -> dict[int, tuple[float, float]]:
    """Each prismatic joint's limits in reading units, widened by 1e-9 of its range against rounding;
    a displacement outside them is no solution."""
    out = {}
    for joint, (low, high) in zip(arm.joints, arm.limits_in_readings()):
        if not joint.revolute:
            eps = 1e-9 * max(1.0, float(high - low))
            out[joint.index] = (float(low - eps), float(high + eps))
    return out


def refusal(arm: Arm, findings, reason: str) -> str:
    tried = " | ".join(f"{strategy.NAME}: {'applies' if f.applies else 'no'}; " + "; ".join(f.words)
                       for strategy, f in findings)
    return (f"no closed form found for arm '{arm.name}', so nothing was written. Structures tried: {tried}. "
            f"The solver stopped: {reason}")


def branch_namer(specs):
    """(key, linear) -> (branch name, meaning): the planned label whose keys hold the unknown, once;
    any other two-way choice is a root label ``root_<key>``."""
    used: set[str] = set()

    def name(key: str, linear) -> tuple[str, str]:
        for spec in specs:
            if key in spec.keys and spec.name not in used:
                used.add(spec.name)
                return spec.name, MEANINGS[spec.name]
        return f"root_{key}", "which of the two roots (no geometric label describes this choice)"

    return name


def root_labels(steps, named: set[str], unknowns) -> list:
    """A root label for every two-root step that no planned label names: its measure is the
    root's sign in the step's own formula (a sin th - b cos th, or 2 a l + b)."""
    out = []
    for step in steps:
        if not isinstance(step, (CosSinEquation, QuadraticLength)) or step.branch.name in named:
            continue
        unknown = unknowns[step.key]
        if isinstance(step, CosSinEquation):
            c, s_ = sp.Symbol(f"c{step.key}", real=True), sp.Symbol(f"s{step.key}", real=True)
            measure = step.a * s_ - step.b * c
        else:
            measure = 2 * step.a * unknown.length + step.b
        out.append(root_label(step.key, measure, unknown.words()))
        named = named | {step.branch.name}
    return out
