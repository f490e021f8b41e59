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
from ..ir import CirclePolynomial, CosSinEquation, Derivation, JointOutput
from ..model import Arm
from .context import make_setup
from .labels import MEANINGS
from .mirror import attach_mirror
from .solver import Solver, free_symbols_of
from .strategies import STRATEGIES

BRANCH_ROLES = {"1": "reach", "3": "elbow", "5": "wrist_bend"}


def derive(arm: Arm) -> Derivation:
    refuse_unsupported(arm)
    setup = make_setup(arm)
    findings = [(strategy, strategy.recognise(arm)) for strategy in STRATEGIES]
    applied = [(s, f) for s, f in findings if f.applies]
    setup.analysis = describe_axes(arm)
    for strategy, finding in applied:
        setup.analysis += finding.words
        strategy.contribute(setup, finding)
        setup.strategies.append(strategy.NAME)
    setup.pool.build()
    unknowns = {u.key: u for u in setup.chain.unknowns + setup.extra_unknowns}
    solver = Solver(setup.chain, setup.pool, setup.names, setup.samples, unknowns,
                    branch_namer(arm, setup.labels), constant_symbols=setup.chain.parameters)
    for step in setup.steps:
        solver.steps.append(step)
    try:
        solver.solve([str(j.index) for j in arm.joints])
    except StructureError as exc:
        raise StructureError(refusal(arm, findings, str(exc))) from None
    for label in setup.labels:
        for symbol in sorted(label.measure.free_symbols, key=str):
            solver.ensure(symbol)
    steps = [first_root_first(step, setup.labels, setup.samples) for step in solver.steps]
    steps = attach_mirror(steps, setup.labels, solver.circles)
    solved = {step.key for step in steps if hasattr(step, "key")}
    used = set().union(*(free_symbols_of(s) for s in steps)) | set().union(*(l.measure.free_symbols for l in setup.labels))
    outputs = [JointOutput(j.index, j.name, j.theta + j.offset, j.direction, arm.exact_angle_scale) for j in arm.joints]
    solutions = 1
    for step in steps:
        if isinstance(step, CosSinEquation):
            solutions *= 2
        elif isinstance(step, CirclePolynomial):
            solutions *= 4
    return Derivation(arm_name=arm.name, family="; ".join(setup.strategies) or "general (no structure recognised)",
                      analysis=setup.analysis, pose_symbols=tuple(setup.pose),
                      parameters=dict(setup.chain.parameters), steps=steps, labels=setup.labels, outputs=outputs,
                      max_solutions=solutions, length_scale=setup.chain.length_scale,
                      unknowns={k: u.members for k, u in unknowns.items()
                                if u.is_joint or k in solved or used & {u.cos, u.sin, u.angle}})


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


def refuse_unsupported(arm: Arm) -> None:
    if arm.dof != 6:
        raise StructureError(f"arm '{arm.name}' has {arm.dof} joints; the derivation handles six-joint arms, "
                             "so nothing was written")
    prismatic = [j.index for j in arm.joints if not j.revolute]
    if prismatic:
        raise StructureError(f"arm '{arm.name}': joint(s) {', '.join(map(str, prismatic))} are prismatic; the "
                             "derivation handles revolute joints, so nothing was written")


def refusal(arm: Arm, findings, reason: str) -> str:
    tried = " | ".join(f"{strategy.NAME}: {'applies' if f.applies else 'no'}; " + "; ".join(f.words)
                       for strategy, f in findings)
    return (f"no closed form found for arm '{arm.name}', so nothing was written. Structures tried: {tried}. "
            f"The solver stopped: {reason}")


def branch_namer(arm: Arm, labels):
    used: set[str] = set()
    label_names = [l.name for l in labels]

    def name(key: str, linear) -> tuple[str, str]:
        role = BRANCH_ROLES.get(key, "")
        if role == "wrist_bend" and "wrist_bend" not in label_names and "base_bend" in label_names:
            role = ""
        if key == "2" and "base_bend" in label_names:
            role = "base_bend"
        if not role or role in used:
            role = f"th{key}"
        used.add(role)
        meaning = MEANINGS.get(role, f"the two (or more) roots of th{key}")
        return role, meaning

    return name
