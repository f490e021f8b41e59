"""Equation pools and the greedy solver that turns them into IR steps.

An equation is a sympy expression equal to zero in the cosines and sines of joint angles
(``c<j>``, ``s<j>``), the pose quantities and the DH symbols. The solver repeatedly picks an
equation (or a pair) in which a single unknown joint remains:

- two equations linear in ``cos th`` and ``sin th`` give one solution (``LinearPair``);
- one equation ``a cos th + b sin th = c`` gives two (``CosSinEquation``, a branch point).

Known joints are substituted symbolically (their ``c``/``s`` symbols stay, as the generated code
carries them). Numeric samples of consistent configurations decide what is "identically zero"
and set the scale of singular thresholds, so tolerances follow the arm's own size.
"""

from __future__ import annotations

import itertools
import math
from dataclasses import dataclass

import sympy as sp

from .errors import StructureError
from .ir import (SINGULAR_TOLERANCE, BranchPoint, CosSinEquation, LinearPair, PairForm, Singular,
                 cos_symbol, sin_symbol)

ZERO_TOLERANCE = 1e-9   # relative: a coefficient below this on every sample is identically zero


@dataclass(frozen=True)
class Equation:
    expr: sp.Expr               # the equation is expr = 0, in pose quantities and joint cos/sin
    source: str                 # where it came from, in words
    joints: frozenset[int]      # joints whose cos/sin appear in expr
    group: str = ""             # equations from one vector or matrix equation share a group
    levels: tuple = ()          # ((m, expr_m), ...): the same equation written with a named
                                # intermediate that hides joints 1..m (e.g. the wrist centre in frame m)

    def form_for(self, known: set) -> sp.Expr:
        """The shortest form usable when ``known`` joints are known: the deepest level whose
        hidden joints 1..m are all known."""
        best = self.expr
        for m, expr in self.levels:
            if set(range(1, m + 1)) <= set(known):
                best = expr
        return best


def trig_pairs(joints) -> list[sp.Symbol]:
    out = []
    for j in joints:
        out += [cos_symbol(j), sin_symbol(j)]
    return out


def reduce_trig(expr: sp.Expr, joints) -> sp.Expr:
    """Normal form modulo c_j^2 + s_j^2 = 1: every c_j^2 becomes 1 - s_j^2.

    Works term by term on the expanded sum; only terms with a squared cosine are rewritten (and
    re-expanded), which keeps this fast on the large expressions of the position equations.
    """
    cosines = {cos_symbol(j): sin_symbol(j) for j in joints}
    expr = sp.expand(expr)
    if not any(expr.has(c) for c in cosines):
        return expr
    kept, rewritten = [], []
    for term in sp.Add.make_args(expr):
        powers = term.as_powers_dict()
        if not any(c in powers and powers[c].is_Integer and powers[c] >= 2 for c in cosines):
            kept.append(term)
            continue
        factor = sp.Integer(1)
        for c, s in cosines.items():
            power = powers.get(c, 0)
            if power and power.is_Integer and power >= 2:
                factor *= (1 - s ** 2) ** (int(power) // 2)
                term = term / c ** (int(power) - int(power) % 2)
        rewritten.append(sp.expand(term * factor))
    if not rewritten:
        return expr
    return sp.Add(*kept, *rewritten)


def joints_in(expr: sp.Expr, candidates) -> frozenset[int]:
    return frozenset(j for j in candidates if expr.has(cos_symbol(j)) or expr.has(sin_symbol(j)))


def make_equation(lhs: sp.Expr, rhs: sp.Expr, source: str, joints, group: str = "",
                  levels: tuple = ()) -> Equation | None:
    """``lhs = rhs`` as an Equation in the base quantities; ``levels`` holds ((m, lhs_m), ...):
    the left side rewritten with intermediates that hide joints 1..m."""
    expr = reduce_trig(lhs - rhs, joints)
    if expr == 0:
        return None
    forms = tuple((m, reduce_trig(lhs_m - rhs, joints)) for m, lhs_m in levels)
    return Equation(expr, source, joints_in(expr, joints), group, forms)


class Samples:
    """Consistent numeric configurations: symbol -> float maps used to test expressions."""

    def __init__(self, envs: list[dict]):
        self.envs = envs
        self.symbols = sorted(envs[0], key=str)
        self.columns = [[env[s] for env in envs] for s in self.symbols]
        self._cache: dict = {}

    def values(self, expr: sp.Expr) -> list[float]:
        expr = sp.sympify(expr)
        if expr in self._cache:
            return self._cache[expr]
        if expr.is_number:
            result = [float(expr)] * len(self.envs)
        else:
            function = sp.lambdify(self.symbols, expr, modules="math")
            result = [float(function(*row)) for row in zip(*self.columns)]
        self._cache[expr] = result
        return result

    def magnitude(self, expr: sp.Expr) -> float:
        return max(abs(v) for v in self.values(expr))

    def typical(self, expr: sp.Expr) -> float:
        values = sorted(abs(v) for v in self.values(expr))
        return values[len(values) // 2]

    def changes_sign(self, expr: sp.Expr) -> bool:
        values = self.values(expr)
        scale = max(abs(v) for v in values)
        return min(values) < -1e-9 * scale and max(values) > 1e-9 * scale


def power_of_ten(value: float) -> float:
    """Round a positive scale to a power of ten, so thresholds are stable and readable."""
    return 10.0 ** round(math.log10(value)) if value > 0 else 0.0


@dataclass
class Linear:
    """An equation seen as A c + B s = C in one unknown joint."""
    a: sp.Expr
    b: sp.Expr
    c: sp.Expr
    equation: Equation


def as_linear(equation: Equation, joint: int, known: set = frozenset()) -> Linear | None:
    c, s = cos_symbol(joint), sin_symbol(joint)
    poly = sp.Poly(equation.form_for(known), c, s)
    if poly.total_degree() > 1:
        return None
    a = poly.coeff_monomial(c)
    b = poly.coeff_monomial(s)
    const = poly.coeff_monomial(1)
    return Linear(sp.expand(a), sp.expand(b), sp.expand(-const), equation)


def branch_name(joint: int, used: set[str]) -> str:
    name = "shoulder" if joint == 1 else "elbow" if joint in (2, 3) else "wrist"
    if name in used:
        name = f"branch{joint}"
    used.add(name)
    return name


BRANCH_MEANINGS = {
    "shoulder": "the two ways joint 1 can face the wrist centre (front/back)",
    "elbow": "the two ways the upper arm and forearm can fold to reach the wrist centre (up/down)",
    "wrist": "the two wrist solutions, related by turning the middle wrist joint the other way (flip/no-flip)",
}


class GreedySolver:
    """Turns a pool of equations into IR steps for ``unknowns``, given already ``known`` joints."""

    def __init__(self, samples: Samples, all_joints, length_scale: float, used_names: set[str],
                 radicand_rewrite=None):
        self.samples = samples
        self.all_joints = list(all_joints)
        self.length_scale = length_scale
        self.used_names = used_names
        self.radicand_rewrite = radicand_rewrite  # optional hook (a, b, c, norm) -> radicand or None

    def reduce(self, expr: sp.Expr) -> sp.Expr:
        return sp.factor_terms(reduce_trig(expr, self.all_joints))

    def is_zero(self, expr: sp.Expr, scale: float) -> bool:
        return self.samples.magnitude(expr) <= ZERO_TOLERANCE * max(scale, 1e-300)

    def solve(self, pool: list[Equation], unknowns: list[int], known: set[int]) -> list:
        steps = []
        known = set(known)
        remaining = [j for j in unknowns if j not in known]
        while remaining:
            step = self._pick(pool, remaining, known)
            if step is None:
                reached = [f"{e.source} (unknowns {sorted(e.joints - known)})" for e in pool
                           if e.joints & set(remaining)][:12]
                raise StructureError(
                    "no equation with a single unknown joint is left for joints "
                    f"{', '.join(map(str, remaining))} (known: {', '.join(map(str, sorted(known))) or 'none'}); "
                    "elimination would need a polynomial of degree above 2. Equations reached: "
                    + "; ".join(reached))
            steps.append(step)
            known.add(step.joint)
            remaining.remove(step.joint)
        return steps

    def _linear_candidates(self, pool, joint, known) -> list[Linear]:
        out = []
        for equation in pool:
            if equation.joints - known != {joint}:
                continue
            linear = as_linear(equation, joint, known)
            if linear is None:
                continue
            scale = max(self.samples.magnitude(linear.a), self.samples.magnitude(linear.b),
                        self.samples.magnitude(linear.c), 1e-300)
            if self.is_zero(linear.a, scale) and self.is_zero(linear.b, scale):
                continue
            out.append(linear)
        return out

    def _pick(self, pool, remaining, known):
        singles = []
        for joint in sorted(remaining):
            candidates = self._linear_candidates(pool, joint, known)
            forms = self._pair_forms(candidates, joint)
            if forms:
                return LinearPair(joint, tuple(forms), self._pair_singular(joint, forms))
            singles += candidates
        if not singles:
            return None
        # Prefer an equation whose a^2 + b^2 is a constant (never singular), then the simplest.
        singles.sort(key=lambda l: (bool(self.reduce(l.a * l.a + l.b * l.b).free_symbols - set(self.constant_symbols)),
                                    sp.count_ops(l.a) + sp.count_ops(l.b) + sp.count_ops(l.c),
                                    min(joints_of(l.equation, remaining)), l.equation.source))
        chosen = singles[0]
        joint = min(joints_of(chosen.equation, remaining))
        return self._cos_sin(chosen, joint)

    def _pair_forms(self, candidates: list[Linear], joint: int) -> list[PairForm]:
        scored = []
        for first, second in itertools.combinations(candidates, 2):
            # Numeric tests first (cheap); symbolic work only for the pairs that are kept.
            det_values = [a1 * b2 - a2 * b1 for a1, b1, a2, b2 in zip(
                self.samples.values(first.a), self.samples.values(first.b),
                self.samples.values(second.a), self.samples.values(second.b))]
            scale = self.samples.magnitude(first.a) * self.samples.magnitude(second.b) + \
                self.samples.magnitude(second.a) * self.samples.magnitude(first.b)
            largest = max(abs(v) for v in det_values)
            if largest <= ZERO_TOLERANCE * max(scale, 1e-300):
                continue
            # A determinant that changes sign has zeros that need not be singular poses of the arm;
            # one that keeps its sign (a sum of squares) vanishes only where the joint is undetermined.
            changes_sign = min(det_values) < -1e-9 * largest and max(det_values) > 1e-9 * largest
            same_group = first.equation.group == second.equation.group
            raw = first.a * second.b - second.a * first.b
            variables = len(raw.free_symbols - set(self.constant_symbols))
            scored.append(((changes_sign, not same_group, variables, sp.count_ops(raw),
                            first.equation.source, second.equation.source),
                           first, second, det_values))
        scored.sort(key=lambda item: item[0])
        kept = []
        seen_dets = []
        for _, first, second, det_values in scored:
            det = self.reduce(first.a * second.b - second.a * first.b)
            # One form per distinct determinant, so the alternatives cover different singular sets.
            if any(sp.expand(det - d) == 0 or sp.expand(det + d) == 0 for d in seen_dets):
                continue
            seen_dets.append(det)
            cos_num = self.reduce(first.c * second.b - second.c * first.b)
            sin_num = self.reduce(first.a * second.c - second.a * first.c)
            typical = sorted(abs(v) for v in det_values)[len(det_values) // 2]
            kept.append(PairForm(cos_num, sin_num, det, False, SINGULAR_TOLERANCE * power_of_ten(typical),
                                 f"{first.equation.source} and {second.equation.source}"))
            if len(kept) == 3:
                break
        # A form with a constant non-zero determinant never degenerates: it alone is enough.
        constant = [f for f in kept if f.det.is_number and f.det != 0]
        return constant[:1] or kept

    def _pair_singular(self, joint: int, forms: list[PairForm]) -> Singular:
        return Singular(measure=forms[0].det, threshold=forms[0].threshold,
                        description=f"every way to isolate joint {joint} degenerates (its determinant vanishes)",
                        rule=f"joint {joint} is free: it keeps the caller's current reading (0 if none is given)")

    def _cos_sin(self, linear: Linear, joint: int) -> CosSinEquation:
        a, b, c = linear.a, linear.b, linear.c
        norm = self.reduce(a * a + b * b)
        radicand = None
        if self.radicand_rewrite is not None:
            radicand = self.radicand_rewrite(a, b, c, norm)
        if radicand is None:
            if not norm.free_symbols - set(self.constant_symbols):
                root = sp.sqrt(norm)
                radicand = (root - c) * (root + c)
            else:
                radicand = self.reduce(norm - c * c)
        name = branch_name(joint, self.used_names)
        sign = sp.Symbol(f"sigma{joint}")
        typical = self.samples.typical(norm)
        constant_norm = not (norm.free_symbols - set(self.constant_symbols))
        singular = Singular(
            measure=norm, threshold=0.0 if constant_norm else SINGULAR_TOLERANCE * power_of_ten(typical),
            description=f"the coefficients of cos and sin of joint {joint} vanish together",
            rule=f"joint {joint} is free: it keeps the caller's current reading (0 if none is given); one solution")
        return CosSinEquation(joint=joint, a=a, b=b, c=c, radicand=radicand, norm=norm,
                              branch=BranchPoint(name, sign, BRANCH_MEANINGS.get(name, "a two-way choice")),
                              guard_meaning=f"joint {joint} has a real solution only if a^2 + b^2 >= c^2 "
                                            "(else the pose is out of reach for this branch)",
                              singular=singular, source=linear.equation.source)

    constant_symbols: tuple = ()


def joints_of(equation: Equation, remaining) -> list[int]:
    return [j for j in equation.joints if j in remaining]
