"""Family: six revolute joints whose last three axes meet in one point (a spherical wrist).

Method (Pieper, PhD thesis, Stanford 1968: three intersecting axes decouple position from
orientation):

1. The wrist centre, where axes 4, 5, 6 meet, is a fixed point of link 3 and of the flange, so
   from the target pose it is known before any joint: ``w = T_core * c6``.
2. Position: ``w = A1 A2 A3 * c3``. The equation is split after each joint k
   (``(A1..Ak)^-1 w = A(k+1)..A3 c3``); each component and the squared norm of both sides go into
   a pool, and the greedy solver (equations.py) picks single-unknown equations and linear pairs.
3. Orientation: ``M = R03^T R_core = R4 R5 R6``, also split (``R4^T M = R5 R6``,
   ``M R6^T = R4 R5``); the entry that depends on one wrist joint alone gives it (two branches),
   neighbouring entries give the other two by atan2. This generalises the ZYZ Euler extraction to
   any twists and signs.
"""

from __future__ import annotations

import numpy as np
import sympy as sp

from ..analysis import check_wrist, describe_axes
from ..equations import Equation, GreedySolver, Samples, make_equation
from ..errors import StructureError
from ..ir import (Compute, Derivation, JointOutput, Label, angle_symbol, cos_symbol, sin_symbol)
from ..kinematics import link_from_cos_sin
from ..model import Arm
from ..rotations import inverse_transform

FAMILY = "spherical wrist, revolute arm (6R)"
POSE_NAMES = ("r11", "r12", "r13", "px", "r21", "r22", "r23", "py", "r31", "r32", "r33", "pz")


def applies(arm: Arm) -> tuple[bool, list[str]]:
    """Whether the family fits, with the reasons in words (why not, when it does not)."""
    if arm.dof != 6:
        return False, [f"the arm has {arm.dof} joints; this family needs 6"]
    prismatic = [j.index for j in arm.joints if not j.revolute]
    if prismatic:
        return False, [f"joint(s) {', '.join(map(str, prismatic))} are prismatic; this family needs six revolute joints"]
    wrist = check_wrist(arm, 4)
    if not wrist.meets:
        return False, ["the last three axes do not meet in one point: " + "; ".join(wrist.words)]
    return True, wrist.words


def parameter_symbols(arm: Arm) -> tuple[list[tuple], dict]:
    """Per joint (a, d) as symbols when non-zero (a_i, d_i), else exact 0; and symbol -> value."""
    values = {}
    per_joint = []
    for j in arm.joints:
        pair = []
        for field in ("a", "d"):
            value = getattr(j, field)
            if value == 0:
                pair.append(sp.Integer(0))
            else:
                symbol = sp.Symbol(f"{field}_{j.index}", real=True)
                values[symbol] = value
                pair.append(symbol)
        per_joint.append(tuple(pair))
    return per_joint, values


def links(arm: Arm, lengths, joint_cos_sin) -> list[sp.Matrix]:
    """Link transforms with symbolic lengths; joint_cos_sin(j) -> (cos, sin) of DH angle j."""
    out = []
    for joint, (a, d) in zip(arm.joints, lengths):
        ct, st = joint_cos_sin(joint.index)
        out.append(link_from_cos_sin(arm.convention, a, sp.cos(joint.alpha), sp.sin(joint.alpha), d, ct, st))
    return out


def line_meet(p1, d1, p2, d2) -> sp.Matrix:
    """Exact point of line p1 + t d1 closest to line p2 + u d2 (they are known to meet)."""
    w0 = p1 - p2
    a, b, c = d1.dot(d1), d1.dot(d2), d2.dot(d2)
    d, e = d1.dot(w0), d2.dot(w0)
    t = sp.simplify((b * e - c * d) / (a * c - b * b))
    return sp.simplify(p1 + t * d1)


def wrist_points(arm: Arm, lengths) -> tuple[sp.Matrix, sp.Matrix]:
    """(c3, c6): the wrist centre in frame 3 and in frame 6 (the last DH frame), exact."""
    zero_links = links(arm, lengths, lambda j: (sp.Integer(1), sp.Integer(0)))
    frames = [sp.eye(4)]
    for link in zero_links[3:]:
        frames.append(frames[-1] * link)       # frame 3 -> 3, 4, 5, 6 at th4..th6 = 0
    # Axes of joints 4, 5, 6 in frame 3: standard DH: z of frames 3, 4, 5; modified: z of frames 4, 5, 6.
    chosen = frames[0:3] if arm.convention == "standard" else frames[1:4]
    axes = [(f[:3, 3], f[:3, 2]) for f in chosen]
    point = line_meet(*axes[0], *axes[1])
    other = line_meet(*axes[1], *axes[2])
    values = parameter_symbols(arm)[1]
    gap = (point - other).subs(values)
    if any(abs(float(g)) > 1e-9 * arm.reach_scale() for g in gap):
        raise StructureError("the wrist axes 4, 5, 6 do not meet in one point for every configuration")
    c3 = point
    c6 = sp.simplify((inverse_transform(frames[3]) * sp.Matrix([*point, 1]))[:3, 0])
    return c3, c6


class Builder:
    """Builds the IR for one arm of this family."""

    def __init__(self, arm: Arm):
        self.arm = arm
        self.lengths, self.parameters = parameter_symbols(arm)
        self.length_scale = arm.reach_scale()
        self.pose = sp.symbols(" ".join(POSE_NAMES), real=True)
        self.links = links(arm, self.lengths, lambda j: (cos_symbol(j), sin_symbol(j)))
        # The wrist centre in DH frame k (k = 1..3): v_k = A_k^-1 v_(k-1), v_0 = w. Named so that
        # equations stay short once joints 1..k are known; each v_k hides joints 1..k.
        self.w_names = sp.symbols("wx wy wz", real=True)
        self.v_names = {k: sp.symbols(f"v{k}x v{k}y v{k}z", real=True) for k in (1, 2, 3)}
        self.v_defs = {}
        previous = sp.Matrix(self.w_names)
        for k in (1, 2, 3):
            inverse = inverse_transform(self.links[k - 1])
            self.v_defs[k] = inverse[:3, :3] * previous + inverse[:3, 3]
            previous = sp.Matrix(self.v_names[k])
        # v_k written in terms of v_m (m < k; v_0 = w): v_in[(k, m)]
        self.v_in = {}
        for k in (1, 2, 3):
            self.v_in[(k, k)] = sp.Matrix(self.v_names[k])
            for m in range(k - 1, -1, -1):
                inner = dict(zip(self.v_names[m + 1], self.v_defs[m + 1]))
                self.v_in[(k, m)] = self.v_in[(k, m + 1)].xreplace(inner)
        self.v_full = {k: self.v_in[(k, 0)] for k in (1, 2, 3)}


    # ------------------------------------------------------------------ samples
    def samples(self, count: int = 24, seed: int = 11) -> Samples:
        """Consistent configurations: random DH angles and every derived quantity's value."""
        rng = np.random.default_rng(seed)
        envs = []
        values = {k: float(v) for k, v in self.parameters.items()}
        for _ in range(count):
            angles = rng.uniform(-np.pi, np.pi, 6)
            env = dict(values)
            for j, angle in enumerate(angles, 1):
                env[cos_symbol(j)] = float(np.cos(angle))
                env[sin_symbol(j)] = float(np.sin(angle))
                env[angle_symbol(j)] = float(angle)
            envs.append(env)
        return Samples(envs)

    def numeric(self, matrix: sp.Matrix, env: dict) -> sp.Matrix:
        return matrix.xreplace(env)

    # ------------------------------------------------------------------ derivation
    def derive(self) -> Derivation:
        arm = self.arm
        ok, wrist_words = applies(arm)
        if not ok:
            raise StructureError(f"arm '{arm.name}' is outside the family '{FAMILY}': " + "; ".join(wrist_words))
        c3, c6 = wrist_points(arm, self.lengths)
        self.c3_point = c3
        analysis = describe_axes(arm) + wrist_words
        analysis.append(f"wrist centre: ({', '.join(map(str, c6))}) in the last DH frame, "
                        f"({', '.join(map(str, c3))}) in frame 3")
        steps: list = []

        # Target in the DH base frame ("core"): T_core = base^-1 T tool^-1.
        r11, r12, r13, px, r21, r22, r23, py, r31, r32, r33, pz = self.pose
        rotation = sp.Matrix([[r11, r12, r13], [r21, r22, r23], [r31, r32, r33]])
        position = sp.Matrix([px, py, pz])
        base_inv = inverse_transform(sp.Matrix(arm.base))
        tool_inv = inverse_transform(sp.Matrix(arm.tool))
        c6_tool = (tool_inv * sp.Matrix([*c6, 1]))[:3, 0]   # wrist centre in the tool frame
        w_world = rotation * c6_tool + position
        w_core = base_inv[:3, :3] * w_world + base_inv[:3, 3]
        w_names = self.w_names
        steps.append(Compute(tuple(w_names), tuple(sp.expand(e) for e in w_core),
                             "wrist centre in the DH base frame"))
        core_rotation = base_inv[:3, :3] * rotation * tool_inv[:3, :3]
        if core_rotation == rotation:
            rc = rotation
        else:
            rc_names = sp.symbols("rc11 rc12 rc13 rc21 rc22 rc23 rc31 rc32 rc33", real=True)
            steps.append(Compute(tuple(rc_names), tuple(sp.expand(e) for e in core_rotation),
                                 "target orientation in the DH base frame (base and tool removed)"))
            rc = sp.Matrix(3, 3, rc_names)

        samples = self.sample_environment(c6, w_names, rc)
        used_names: set[str] = set()

        # Position subproblem.
        w = sp.Matrix([*w_names, 1])
        c3h = sp.Matrix([*c3, 1])
        pool = self.position_pool(w, c3h)
        solver = GreedySolver(samples, range(1, 7), self.length_scale, used_names)
        solver.constant_symbols = tuple(self.parameters)
        steps += self.with_frame_vectors(solver.solve(pool, [1, 2, 3], set()))

        # Orientation subproblem.
        r03 = (self.links[0] * self.links[1] * self.links[2])[:3, :3]
        m_full = r03.T * rc
        m_names = sp.Matrix(3, 3, sp.symbols("m11 m12 m13 m21 m22 m23 m31 m32 m33", real=True))
        pool = self.orientation_pool(m_names)
        solver = GreedySolver(samples, range(1, 7), 1.0, used_names,
                              radicand_rewrite=lambda a, b, c, n: unit_column_radicand(m_names, c, n))
        solver.constant_symbols = tuple(self.parameters)
        wrist_steps = solver.solve(pool, [4, 5, 6], {1, 2, 3})
        needed = set().union(*(free_symbols_of(s) for s in wrist_steps))
        # Nested (unexpanded) products keep shared factors such as cos(th2 + th3) visible to CSE.
        m_nested = self.links[2][:3, :3].T * (self.links[1][:3, :3].T * (self.links[0][:3, :3].T * rc))
        entries = [(m_names[i, k], m_nested[i, k]) for i in range(3) for k in range(3) if m_names[i, k] in needed]
        steps.append(Compute(tuple(n for n, _ in entries), tuple(e for _, e in entries),
                             "wrist rotation M = R03^T R (the part of the target the wrist must make)"))
        steps += wrist_steps

        labels = self.labels()
        steps = attach_mirror(steps, labels)
        steps = self.with_frame_vectors(steps, extra=set().union(*(l.measure.free_symbols for l in labels)))
        outputs = [JointOutput(j.index, j.name, j.theta + j.offset, j.direction, arm.exact_angle_scale)
                   for j in arm.joints]
        branch_count = sum(1 for s in steps if hasattr(s, "branch"))
        return Derivation(arm_name=arm.name, family=FAMILY, analysis=analysis, pose_symbols=tuple(self.pose),
                          parameters=dict(self.parameters), steps=steps, labels=labels, outputs=outputs,
                          max_solutions=2 ** branch_count, length_scale=self.length_scale)

    def sample_environment(self, c6, w_names, rc) -> Samples:
        """Samples with the wrist centre and core rotation filled in from the sampled joints."""
        base = self.samples()
        full = self.links[0] * self.links[1] * self.links[2] * self.links[3] * self.links[4] * self.links[5]
        envs = []
        for env in base.envs:
            exact_env = {k: sp.Float(v, 20) for k, v in env.items()}
            core = full.xreplace(exact_env)
            w = (core * sp.Matrix([*c6, 1])).xreplace(exact_env)
            env = dict(env)
            for name, value in zip(w_names, w[:3, 0]):
                env[name] = float(value)
            for k in (1, 2, 3):
                for name, value in zip(self.v_names[k], self.v_full[k]):
                    env[name] = float(value.xreplace({**exact_env, **{n: sp.Float(env[n], 20) for n in w_names}}))
            for name, value in zip(list(rc), list(core[:3, :3])):
                if isinstance(name, sp.Symbol):
                    env[name] = float(value)
            r03 = (self.links[0] * self.links[1] * self.links[2])[:3, :3].xreplace(exact_env)
            m = r03.T * core[:3, :3]
            for i in range(3):
                for k in range(3):
                    env[sp.Symbol(f"m{i + 1}{k + 1}", real=True)] = float(m[i, k])
            envs.append(env)
        return Samples(envs)

    def position_pool(self, w: sp.Matrix, c3h: sp.Matrix) -> list[Equation]:
        """w = A1 A2 A3 c3 split after each joint k: v_k = A(k+1)..A3 c3, components and norms."""
        pool = []
        rests = [self.links[0] * self.links[1] * self.links[2], self.links[1] * self.links[2], self.links[2],
                 sp.eye(4)]
        for k in range(4):
            lhs = sp.Matrix(self.w_names) if k == 0 else sp.Matrix(self.v_names[k])
            rhs = rests[k] * c3h
            where = "w" if k == 0 else (f"v{k} = A1^-1 w" if k == 1 else f"v{k} = (A1..A{k})^-1 w")
            right = "A1 A2 A3 c3" if k == 0 else ("c3" if k == 3 else " ".join(f"A{i}" for i in range(k + 1, 4)) + " c3")
            # level m: the left side in terms of v_m (hiding joints 1..m); level 0 is in w
            level = {m: (sp.Matrix(self.w_names) if k == 0 else self.v_in[(k, m)]) for m in range(0, k + 1)}
            for i, axis in enumerate("xyz"):
                equation = make_equation(level[0][i], rhs[i], f"{axis} of {where} = {right}", range(1, 7),
                                         f"split {k}", tuple((m, level[m][i]) for m in range(1, k + 1)))
                if equation is not None:
                    pool.append(equation)
            norm_r = sum(rhs[i] ** 2 for i in range(3))
            equation = make_equation(sum(level[0][i] ** 2 for i in range(3)), norm_r, f"|{where}|^2 = |{right}|^2",
                                     range(1, 7), f"norm {k}",
                                     tuple((m, sum(level[m][i] ** 2 for i in range(3))) for m in range(1, k + 1)))
            if equation is not None:
                pool.append(equation)
        return pool

    def with_frame_vectors(self, steps: list, extra: set = frozenset()) -> list:
        """Insert a Compute of v_k before the first step (or the labels, ``extra``) that reads it."""
        emitted = {k for step in steps if isinstance(step, Compute)
                   for k, names in self.v_names.items() if names[0] in step.names}
        out = []

        def ensure(k):
            if k in emitted or k == 0:
                return
            ensure(k - 1)
            out.append(Compute(tuple(self.v_names[k]), tuple(reduce_all(e) for e in self.v_defs[k]),
                               f"wrist centre in DH frame {k}"))
            emitted.add(k)

        for step in steps:
            used = free_symbols_of(step)
            for k in (1, 2, 3):
                if used & set(self.v_names[k]):
                    ensure(k)
            out.append(step)
        for k in (1, 2, 3):
            if extra & set(self.v_names[k]):
                ensure(k)
        return out

    def orientation_pool(self, m: sp.Matrix) -> list[Equation]:
        r4, r5, r6 = (link[:3, :3] for link in self.links[3:])
        forms = [(m, r4 * r5 * r6, "M = R4 R5 R6"), (r4.T * m, r5 * r6, "R4^T M = R5 R6"),
                 (m * r6.T, r4 * r5, "M R6^T = R4 R5")]
        pool = []
        for lhs, rhs, name in forms:
            for i in range(3):
                for k in range(3):
                    equation = make_equation(lhs[i, k], rhs[i, k], f"entry ({i + 1},{k + 1}) of {name}",
                                             range(1, 7), name)
                    if equation is not None:
                        pool.append(equation)
        return pool

    def orientation_sign(self, measure, reference, front) -> int:
        """+1 or -1 so that ``measure`` agrees in sign with ``reference`` on most front-shoulder
        configurations (seeded samples where both are clearly non-zero)."""
        joint_symbols = [x for j in range(1, 7) for x in (cos_symbol(j), sin_symbol(j))]
        w = (self.links[0] * self.links[1] * self.links[2] * sp.Matrix([*self.c3_point, 1]))[:3, 0]
        v1 = self.v_defs[1].xreplace(dict(zip(self.w_names, w)))
        inner = dict(zip(self.v_names[1], v1))
        exprs = [e.xreplace(inner).xreplace(self.parameters) for e in (front, measure, reference)]
        evaluate = sp.lambdify(joint_symbols, exprs, modules="math")
        rng = np.random.default_rng(3)
        agree = disagree = 0
        for angles in rng.uniform(-np.pi, np.pi, (200, 6)):
            f, m, r = evaluate(*[g(a) for a in angles for g in (np.cos, np.sin)])
            if f > 0 and abs(m) > 1e-6 * self.length_scale ** 2 and abs(r) > 1e-6 * self.length_scale ** 3:
                agree += (m > 0) == (r > 0)
                disagree += (m > 0) != (r > 0)
        return 1 if agree >= disagree else -1

    def labels(self) -> list[Label]:
        """Geometric configuration labels (see docs/derivation.md for what a person sees).

        Shoulder and elbow are computed in DH frame 1 (lengths are invariant), where the wrist centre
        is the named v1 and the axes of joints 2 and 3 depend on joints 2 and 3 only.
        """
        a = self.links
        standard = self.arm.convention == "standard"
        frame = [sp.eye(4)]
        for link in a:
            frame.append(frame[-1] * link)

        def axis(j):          # (point, direction) of joint j's axis in the DH base frame
            f = frame[j - 1] if standard else frame[j]
            return f[:3, 3], f[:3, 2]

        to_frame1 = inverse_transform(a[0])

        def in_frame1(point=None, direction=None):
            if point is not None:
                return sp.Matrix((to_frame1 * sp.Matrix([*point, 1]))[:3, 0])
            return sp.Matrix(to_frame1[:3, :3] * direction)

        out = []
        w1 = sp.Matrix(self.v_names[1])
        p1, z1 = axis(1)
        front = reduce_all((w1 - in_frame1(point=p1))[0])          # x of frame 1 is link 1's x axis
        out.append(Label("shoulder", front, "front", "back",
                         "front: the wrist centre lies on the side of joint 1's axis that link 1's x axis points to"))
        p2, z2 = axis(2)
        p3, _ = axis(3)
        p2, z2, p3, z1f = in_frame1(point=p2), in_frame1(direction=z2), in_frame1(point=p3), in_frame1(direction=z1)
        u = w1 - p2
        v = p3 - p2
        u = u - u.dot(z2) * z2
        v = v - v.dot(z2) * z2
        # The bend: (upper arm x forearm) . z2, seen along joint 2's axis. It is zero only with the
        # elbow fully stretched or folded (the elbow's singular set), so the label never changes
        # elsewhere on a path. Its sign is oriented so that "up" is the elbow above the shoulder-to-
        # wrist-centre line (on the +z0 side) in front-shoulder poses, where that picture is clear.
        bend = reduce_all(v.cross(u - v).dot(z2))
        above = v.dot(z1f) * u.dot(u) - v.dot(u) * u.dot(z1f)
        bend = bend * self.orientation_sign(bend, above, front)
        out.append(Label("elbow", bend, "up", "down",
                         "up: the elbow bends the way that puts it above the line from the shoulder (joint 2's "
                         "axis) to the wrist centre when the wrist centre lies beyond the shoulder joint along link "
                         "1's x axis; the sign of (upper arm x forearm) . z2, which changes only where the elbow is "
                         "fully stretched or folded"))
        _, z4 = axis(4)
        _, z5 = axis(5)
        _, z6 = axis(6)
        flip = reduce_all(z4.cross(z6).dot(z5))
        out.append(Label("wrist", flip, "noflip", "flip",
                         "noflip: (z4 x z6) . z5 >= 0 for the directions z4, z5, z6 of the wrist axes "
                         "(with the usual orthogonal wrist: the middle wrist joint's DH angle in [0, 180] deg)"))
        return out


def reduce_all(expr):
    """Expand and reduce modulo cos^2 + sin^2 = 1 over all six joints, then pull out common factors."""
    from ..equations import reduce_trig
    return sp.factor_terms(reduce_trig(expr, range(1, 7)))


def free_symbols_of(step) -> set:
    out = set()
    for value in vars(step).values():
        if isinstance(value, sp.Basic):
            out |= value.free_symbols
        elif isinstance(value, tuple):
            for item in value:
                if isinstance(item, sp.Basic):
                    out |= item.free_symbols
                elif hasattr(item, "__dataclass_fields__"):
                    out |= free_symbols_of(item)
        elif hasattr(value, "__dataclass_fields__"):
            out |= free_symbols_of(value)
    return out


def unit_column_radicand(m: sp.Matrix, c: sp.Expr, norm: sp.Expr):
    """For ``+-cos = m_ik`` with a^2 + b^2 = 1: 1 - m_ik^2 is the sum of squares of the other two
    entries of column k (a rotation's columns are unit vectors), free of cancellation."""
    if sp.simplify(norm - 1) != 0:
        return None
    for i in range(3):
        for k in range(3):
            if c == m[i, k] or c == -m[i, k]:
                others = [m[r, k] for r in range(3) if r != i]
                return others[0] ** 2 + others[1] ** 2
    return None


def attach_mirror(steps: list, labels: list[Label]) -> list:
    """Give the last branch point a Mirror when its second root follows by symmetry (see ir.Mirror)."""
    import dataclasses

    from ..equations import reduce_trig
    from ..ir import CosSinEquation, LinearPair, Mirror
    positions = [i for i, s in enumerate(steps) if isinstance(s, CosSinEquation)]
    if not positions:
        return steps
    index = positions[-1]
    step = steps[index]
    j = step.joint
    if step.b == 0:
        kind, mapping = "negate_sin", {sin_symbol(j): -sin_symbol(j)}
    elif step.a == 0:
        kind, mapping = "negate_cos", {cos_symbol(j): -cos_symbol(j)}
    else:
        return steps
    joints = range(1, 7)

    def same(x, y):
        return reduce_trig(sp.expand(x - y), joints) == 0

    parities = []
    for later in steps[index + 1:]:
        if not isinstance(later, LinearPair):
            continue
        parity = None
        for form in later.forms:
            det, cn, sn = (e.xreplace(mapping) for e in (form.det, form.cos_num, form.sin_num))
            # (cn'/det', sn'/det') against (cn/det, sn/det): equal (+1) or opposite (-1)?
            for candidate in (1, -1):
                if same(cn * form.det, candidate * form.cos_num * det) and \
                        same(sn * form.det, candidate * form.sin_num * det):
                    break
            else:
                return steps
            if parity not in (None, candidate):
                return steps
            parity = candidate
        parities.append((later.joint, parity))
        k = later.joint
        if parity < 0:
            mapping = {**mapping, cos_symbol(k): -cos_symbol(k), sin_symbol(k): -sin_symbol(k)}
    signs = []
    for label in labels:
        mirrored = label.measure.xreplace(mapping)
        if same(mirrored, label.measure):
            signs.append(1)
        elif same(mirrored, -label.measure):
            signs.append(-1)
        else:
            return steps
    steps = list(steps)
    steps[index] = dataclasses.replace(step, mirror=Mirror(kind, tuple(parities), tuple(signs)))
    return steps


def derive(arm: Arm) -> Derivation:
    return Builder(arm).derive()
