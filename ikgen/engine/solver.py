"""The greedy solver: turns the equation pool into IR steps, one unknown at a time.

Repeatedly, with the unknowns known so far:

1. an angle that follows from known ones (a sum of parallel-axis angles, or a member of one)
   is written down (``AngleSum``);
2. two equations linear in the cosine and sine of a single remaining unknown give it by one
   atan2 (``LinearPair``), with ordered alternatives for when a determinant vanishes;
3. else one equation ``a cos th + b sin th = c`` gives two roots (``CosSinEquation``);
4. else two equations in two unknowns, both linear in the first one's cosine and sine, are
   reduced to a polynomial of degree two in the second one's cosine and sine
   (``CirclePolynomial``, Pieper's elimination), and the first follows by a linear pair.

Known unknowns next to the known side of an identity are folded into named intermediates, so
every step reads short expressions. Numeric samples decide what is identically zero and rank
the alternatives; thresholds are powers of ten of typical sizes, so they are deterministic.
"""

from __future__ import annotations

import dataclasses
import functools
import itertools
import math
from dataclasses import dataclass

import numpy as np
import sympy as sp
from sympy.polys.domains import QQ

from ..errors import StructureError
from ..ir import (GUARD_TOLERANCE, SINGULAR_TOLERANCE, AngleSum, BranchPoint, CirclePolynomial, Compute,
                  CosSinEquation, LengthForm, LinearLength, LinearPair, PairForm, QuadraticLength, Singular,
                  cos_symbol, sin_symbol)
from .chain import Chain
from .names import Names, Samples
from .pool import Equation, Pool, entry_scale, equation_expr, numeric_residual, vary
from .symbols import Unknown, reduce_circles, ring_forms, tidy

ZERO_TOLERANCE = 1e-9   # relative: a coefficient below this on every sample is identically zero
MAX_PAIR_FORMS = 3
SYMBOLIC_CANDIDATES = 8  # how many of the numerically best candidates are written out symbolically
PAIR_BUILDS = 4          # linear pairs written out symbolically to choose each form from
PROBE_ANGLES = (0.0, math.pi / 2, math.pi, 3 * math.pi / 2, math.pi / 4, 2.0)


def power_of_ten(value: float) -> float:
    """Round a positive scale to a power of ten, so thresholds are stable and readable."""
    return 10.0 ** round(math.log10(value)) if value > 0 else 0.0


@dataclass
class NumericLinear:
    """An equation seen as a cos(th) + b sin(th) = c in one unknown, with a, b, c on the samples."""
    equation: Equation
    key: str
    a: np.ndarray
    b: np.ndarray
    c: np.ndarray

    def signature(self) -> tuple:
        """The same for equations that are constant multiples of each other (to 1e-9)."""
        values = np.concatenate([self.a, self.b, self.c])
        pivot = values[np.argmax(np.abs(values) > 1e-9 * np.max(np.abs(values)))]
        return tuple(np.round(values / pivot, 9) + 0.0)


@dataclass
class NumericLength:
    """An equation seen as q2 l^2 + q1 l + q0 = 0 in the displacement l, with q's on the samples."""
    equation: Equation
    key: str
    q2: np.ndarray
    q1: np.ndarray
    q0: np.ndarray

    @property
    def linear(self) -> bool:
        return not self.q2.any()

    def signature(self) -> tuple:
        values = np.concatenate([self.q2, self.q1, self.q0])
        pivot = values[np.argmax(np.abs(values) > 1e-9 * np.max(np.abs(values)))]
        return ("length",) + tuple(np.round(values / pivot, 9) + 0.0)


@dataclass
class Linear:
    """An equation seen as a cos(th) + b sin(th) = c in one unknown."""
    a: sp.Expr
    b: sp.Expr
    c: sp.Expr
    equation: Equation


def key_order(key: str) -> tuple:
    """Joints by number first, then sums."""
    return (0, int(key), "") if key.isdigit() else (1, 0, key)


class Solver:
    def __init__(self, chain: Chain, pool: Pool, names: Names, samples: Samples, unknowns: dict[str, Unknown],
                 branch_namer, constant_symbols):
        self.chain = chain
        self.pool = pool
        self.names = names
        self.samples = samples
        self.unknowns = unknowns
        self.branch_namer = branch_namer          # (key, linear or None) -> (name, meaning)
        self.constant_symbols = set(constant_symbols)
        self.solved: list[str] = []               # keys found by a step, in order
        self.emitted: set = set()                 # named intermediates and relation keys written out
        self.steps: list = []
        self.circles = list(chain.circles) + [(u.cos, u.sin) for u in unknowns.values() if not u.is_joint]
        self._exprs: dict = {}
        self._numeric: dict = {}
        self._known_values: dict = {}
        self._express: dict = {}
        self._known: tuple = (None, set())
        for u in unknowns.values():
            samples.define_unknown(u)

    # ------------------------------------------------------------------ knowledge
    def vector(self, key: str) -> dict[int, int]:
        return dict(self.unknowns[key].members)

    def express(self, key: str) -> list[tuple[str, int]] | None:
        """``key`` as an integer combination of solved unknowns, or None."""
        cache_key = (key, tuple(self.solved))
        if cache_key not in self._express:
            self._express[cache_key] = self._express_now(key)
        return self._express[cache_key]

    def _express_now(self, key: str) -> list[tuple[str, int]] | None:
        if key in self.solved:
            return [(key, 1)]
        if self.unknowns[key].prismatic:
            return None                 # a displacement is known only once solved
        angles = [k for k in self.solved if not self.unknowns[k].prismatic]
        return self._combination(key, angles)

    def _combination(self, key: str, solved: list[str]) -> list[tuple[str, int]] | None:
        if key in solved:
            return [(key, 1)]
        if not solved:
            return None
        joints = sorted({j for k in solved + [key] for j in self.vector(k)})
        matrix = sp.Matrix([[self.vector(k).get(j, 0) for k in solved] for j in joints])
        target = sp.Matrix([self.vector(key).get(j, 0) for j in joints])
        if matrix.rank() != matrix.row_join(target).rank():
            return None
        solution, params = matrix.gauss_jordan_solve(target)
        solution = solution.xreplace({p: 0 for p in params})
        terms = [(k, int(v)) for k, v in zip(solved, solution) if v != 0]
        if any(sp.Integer(v) != coefficient for (_, v), coefficient in zip(terms, [c for c in solution if c != 0])):
            return None
        return terms

    def closure(self) -> set[str]:
        return {k for k in self.unknowns if self.express(k) is not None}

    def known_joints(self) -> set[int]:
        state = tuple(self.solved)
        if self._known[0] != state:
            self._known = (state, {int(k) for k in self.closure() if k.isdigit()})
        return self._known[1]

    # ------------------------------------------------------------------ emission
    def emit(self, step) -> None:
        for symbol in sorted(free_symbols_of(step), key=str):
            self.ensure(symbol)
        self.steps.append(step)
        if hasattr(step, "key") and not isinstance(step, Compute):
            self.emitted.add(step.key)
            if not isinstance(step, AngleSum):
                self.solved.append(step.key)

    def ensure(self, symbol: sp.Symbol) -> None:
        """Write out what defines ``symbol`` (a named intermediate or a derived angle) if not yet done."""
        found = self.names.definition_of(symbol)
        if found is not None:
            key, step = found
            if key in self.emitted:
                return
            self.emitted.add(key)
            for parent in sorted(self.names.parent_symbols(key), key=str):
                self.ensure(parent)
            self.steps.append(step)
            return
        for key, unknown in self.unknowns.items():
            if symbol in (unknown.cos, unknown.sin, unknown.angle) and key not in self.emitted:
                terms = self.express(key)
                if terms is None:
                    raise AssertionError(f"th{key} is read before it is known")
                for term, _ in terms:
                    self.ensure(self.unknowns[term].cos)
                self.emitted.add(key)
                words = "a sum of parallel-axis angles" if not unknown.is_joint else "from the sum of parallel-axis angles"
                self.steps.append(AngleSum(key, tuple(terms), words))
                return

    def derive_relations(self, targets) -> None:
        for key in targets:
            if key not in self.emitted and self.express(key) is not None:
                self.ensure(self.unknowns[key].angle)

    # ------------------------------------------------------------------ equations
    def expr(self, equation: Equation) -> sp.Expr:
        i, k = equation.split
        outside = [f.joint for f in equation.identity.factors[:i] + equation.identity.factors[k:]]
        known = self.known_joints()
        cache_key = (equation.number, frozenset(j for j in outside if j in known))
        if cache_key not in self._exprs:
            self._exprs[cache_key] = equation_expr(self.pool, equation, known, self.names, self.circles)
        return self._exprs[cache_key]

    def linear(self, equation: Equation, key: str) -> Linear | None:
        """The equation as a cos + b sin = c in unknown ``key`` (symbolic), or None if it is not linear."""
        u = self.unknowns[key]
        parts = linear_parts(self.expr(equation), u.cos, u.sin)
        if parts is None:
            return None
        a, b, constant = parts
        return Linear(a, b, -constant, equation)

    def reduce(self, expr) -> sp.Expr:
        return tidy(expr, self.circles)

    def known_values(self, identity) -> np.ndarray:
        if identity.name not in self._known_values:
            self._known_values[identity.name] = identity.numeric_known(self.samples.angles)
        return self._known_values[identity.name]

    def numeric(self, equation: Equation, key: str) -> "NumericLinear | None":
        """a, b, c on the samples for ``equation`` seen in unknown ``key`` (the others at their
        sample values), found by moving that unknown alone; None when the equation is not
        linear in its cosine and sine or does not depend on it."""
        cache_key = (equation.number, key)
        if cache_key in self._numeric:
            return self._numeric[cache_key]
        angles = self.samples.angles
        known = self.known_values(equation.identity)
        try:
            # every probe angle in one batched evaluation (rows are independent: the same numbers)
            varied = np.concatenate([vary(angles, equation, key, phi) for phi in PROBE_ANGLES])
            repeated = np.concatenate([known] * len(PROBE_ANGLES))
            values = np.split(numeric_residual(self.pool, equation, repeated, varied), len(PROBE_ANGLES))
        except ValueError:
            values = None
        result = None
        if values is not None:
            e0, e90, e180, e270, e45, e115 = values
            a, b, d = (e0 - e180) / 2, (e90 - e270) / 2, (e0 + e180) / 2
            scale = entry_scale(equation, self.chain.length_scale)
            a, b, d = (snap(x, scale) for x in (a, b, d))
            fit = max(float(np.max(np.abs(a * math.cos(phi) + b * math.sin(phi) + d - e)))
                      for phi, e in ((PROBE_ANGLES[4], e45), (PROBE_ANGLES[5], e115)))
            size = max(float(np.max(np.abs(a))), float(np.max(np.abs(b))))
            if fit <= 1e-9 * scale * 10 and size > ZERO_TOLERANCE * scale:
                result = NumericLinear(equation, key, a, b, -d)
        self._numeric[cache_key] = result
        return result

    def numeric_length(self, equation: Equation, key: str) -> "NumericLength | None":
        """q2, q1, q0 on the samples for ``equation`` seen in the displacement ``key``, found by
        setting it to four values; None when it is not of degree 1 or 2 in it."""
        cache_key = (equation.number, key)
        if cache_key in self._numeric:
            return self._numeric[cache_key]
        angles = self.samples.angles
        known = self.known_values(equation.identity)
        scale = entry_scale(equation, self.chain.length_scale)
        length = self.chain.length_scale
        points = np.array([-1.0, 0.0, 1.0, 2.0]) * length
        varied = np.concatenate([vary(angles, equation, key, v) for v in points])
        values = numeric_residual(self.pool, equation, np.concatenate([known] * len(points)), varied)
        values = values.reshape(len(points), len(angles))                 # (4, samples)
        vandermonde = np.vander(points / length, 4)                       # columns: x^3, x^2, x, 1
        q3, q2, q1, q0 = np.linalg.solve(vandermonde, values)             # in x = l / length
        result = None
        if float(np.max(np.abs(q3))) <= 1e-8 * scale:
            q2, q1, q0 = (snap(q, scale) for q in (q2 / length ** 2, q1 / length, q0))
            if q2.any() or q1.any():
                result = NumericLength(equation, key, q2, q1, q0)
        self._numeric[cache_key] = result
        return result

    def size(self, equation: Equation) -> int:
        """How long the equation's symbolic form will be, roughly: the factors left unfolded."""
        i, k = equation.split
        known = self.known_joints()
        left = list(equation.identity.factors[:i])
        right = list(equation.identity.factors[k:])
        while left and left[0].joint in known:
            left.pop(0)
        while right and right[-1].joint in known:
            right.pop()
        return (k - i) + len(left) + len(right) + (2 if equation.entry.kind == "norm" else 0) + \
            (1 if equation.coordinates.name else 0)

    def candidates(self, closure: set[str]) -> dict[str, list["NumericLinear"]]:
        """Single-unknown equations linear in that unknown's cosine and sine, per unknown (numeric).
        Equations that are multiples of one another on the samples (the same equation reached
        through different splits) are kept once, in their shortest form."""
        out: dict[str, dict] = {}
        for equation in self.pool.equations:
            left = equation.depends - closure
            if len(left) != 1:
                continue
            (key,) = left
            found = self.numeric_length(equation, key) if self.unknowns[key].prismatic else self.numeric(equation, key)
            if found is None:
                continue
            signature = found.signature()
            kept = out.setdefault(key, {}).get(signature)
            if kept is None or (self.size(equation), equation.number) < (self.size(kept.equation), kept.equation.number):
                out[key][signature] = found
        return {key: list(found.values()) for key, found in out.items()}

    # ------------------------------------------------------------------ one step
    def solve(self, targets: list[str]) -> None:
        while True:
            self.derive_relations(targets)
            closure = self.closure()
            remaining = [t for t in targets if t not in closure]
            if not remaining:
                return
            step = self.pick(closure) or self.eliminate(closure)
            if step is None:
                raise StructureError(self.stuck_message(remaining, closure))
            self.emit(step)

    def pick(self, closure: set[str]):
        candidates = self.candidates(closure)
        lengths = {k: v for k, v in candidates.items() if self.unknowns[k].prismatic}
        candidates = {k: v for k, v in candidates.items() if not self.unknowns[k].prismatic}
        for key in sorted(candidates, key=key_order):
            forms = self.pair_forms(candidates[key], key)
            if forms:
                direct = self.sibling_form(key, candidates[key], forms)
                return LinearPair(key, tuple(direct + forms), self.pair_singular(key, forms))
        for key in sorted(lengths, key=key_order):
            step = self.linear_length(key, [n for n in lengths[key] if n.linear])
            if step is not None:
                return step
        singles = [n for key in candidates for n in candidates[key]]
        if not singles:
            for key in sorted(lengths, key=key_order):
                step = self.quadratic_length(key, [n for n in lengths[key] if not n.linear])
                if step is not None:
                    return step
            return None

        def constant_norm(n):
            norm = n.a * n.a + n.b * n.b
            return float(np.max(norm) - np.min(norm)) <= 1e-9 * float(np.max(norm))

        singles.sort(key=lambda n: (not constant_norm(n), self.size(n.equation), key_order(n.key), n.equation.number))
        built = []
        for n in singles[:SYMBOLIC_CANDIDATES]:
            linear = self.linear(n.equation, n.key)
            if linear is not None:
                built.append((not constant_norm(n), sp.count_ops(linear.a) + sp.count_ops(linear.b) + sp.count_ops(linear.c),
                              key_order(n.key), n.equation.number, linear, n.key))
        if not built:
            return None
        built.sort(key=lambda item: item[:4])
        return self.cos_sin(built[0][4], built[0][5])

    def sibling_form(self, key: str, candidates: list["NumericLinear"], forms: list[PairForm]) -> list[PairForm]:
        """A first form for ``key`` that does without the unknown solved just before it, when that
        one came from a linear pair too (the two are siblings: the joints 4 and 6 of a wrist once
        joint 5 is known). Its best pair would read the sibling's cosine and sine (a constant
        determinant, after moving the sibling's transform over); the form from the equations
        without the sibling is tried first, only where the sibling was not left free. Then
        nothing but the fallback reads the sibling's cosine and sine, and a back-end can leave both
        angles as one atan2 each of quantities known before either (no division, no unit scaling,
        no product through the sibling's transform). Empty when there is no such form or the best
        forms already do without the sibling."""
        if not self.solved or self.solved[-1] == key:
            return []
        sibling = self.solved[-1]
        if not any(isinstance(step, LinearPair) and step.key == sibling for step in self.steps):
            return []
        own = [n for n in candidates if sibling not in n.equation.depends]
        if len(own) == len(candidates):
            return []           # no candidate reads the sibling: the usual forms already do without it
        direct = self.pair_forms(own, key)
        if not direct or (direct[0].det, direct[0].cos_num, direct[0].sin_num) == \
                (forms[0].det, forms[0].cos_num, forms[0].sin_num):
            return []
        return [dataclasses.replace(direct[0], after=sibling)]

    def scored_pairs(self, candidates: list["NumericLinear"]) -> list:
        """Every two candidates whose determinant is not identically zero, with their rank:
        (score, first, second, determinant on the samples), the best first. All pairs at once in
        numpy (an unknown can have a hundred candidates: thousands of pairs)."""
        if len(candidates) < 2:
            return []
        length = self.chain.length_scale
        a = np.array([n.a for n in candidates])
        b = np.array([n.b for n in candidates])
        scales = np.array([entry_scale(n.equation, length) for n in candidates])
        sizes = [self.size(n.equation) for n in candidates]
        first, second = np.triu_indices(len(candidates), 1)      # the order of itertools.combinations
        det = a[first] * b[second] - a[second] * b[first]
        largest = np.max(np.abs(det), axis=1)
        usable = largest > ZERO_TOLERANCE * (scales[first] * scales[second])
        # A determinant that changes sign has zeros that need not be singular poses of the arm;
        # one that keeps its sign (a sum of squares) vanishes only where the angle is undetermined.
        low, high = det.min(axis=1), det.max(axis=1)
        changes_sign = (low < -1e-9 * largest) & (high > 1e-9 * largest)
        constant = (high - low) <= 1e-9 * largest
        scored = []
        for p in np.flatnonzero(usable):
            one, two = candidates[first[p]], candidates[second[p]]
            scored.append(((bool(changes_sign[p]), not constant[p], one.equation.group != two.equation.group,
                            sizes[first[p]] + sizes[second[p]], one.equation.number, two.equation.number),
                           one, two, det[p]))
        scored.sort(key=lambda item: item[0])
        return scored

    def pair_forms(self, candidates: list["NumericLinear"], key: str) -> list[PairForm]:
        scored = self.scored_pairs(candidates)
        built: dict = {}
        kept, seen = [], []
        while len(kept) < MAX_PAIR_FORMS:
            # one form per singular set: a pair whose determinant is a constant multiple of a kept
            # one's (on the samples) vanishes at the same poses and adds nothing
            if seen:
                scored = [item for item, same in zip(scored, proportional_rows([i[3] for i in scored], seen[-1][0]))
                          if not same]
            # the numerators (the costly part) only for the pairs that tie on the rank's prefix
            heads = [(item, self.pair_determinant(item, key, built)) for item in scored[:PAIR_BUILDS]]
            heads = [(item, h) for item, h in heads if h is not None and not any(divides(old, h[1]) for _, old in seen)]
            if not heads:
                break
            leading = min(h[0] for _, h in heads)
            options = [self.built_pair(item, key, built) for item, h in heads if h[0] == leading]
            best = min(options, key=lambda o: o[0])
            _, det, cos_num, sin_num, det_values, one, two, item = best
            scored.remove(item)
            seen.append((det_values, det))
            typical = float(np.median(np.abs(det_values)))
            kept.append(PairForm(cos_num, sin_num, det, False, SINGULAR_TOLERANCE * power_of_ten(typical),
                                 f"{one.equation.source} and {two.equation.source}"))
            if det.is_number and det != 0:
                break
        # A form with a constant non-zero determinant never degenerates: it alone is enough.
        constant = [f for f in kept if f.det.is_number and f.det != 0]
        return constant[:1] or kept

    # ------------------------------------------------------------------ displacements
    def length_parts(self, equation: Equation, key: str):
        """(q2, q1, q0) symbolic for ``equation`` in the displacement ``key``, or None."""
        symbol = self.unknowns[key].length
        poly = sp.Poly(sp.expand(self.expr(equation)), symbol)
        if poly.degree() > 2 or poly.degree() < 1:
            return None
        return tuple(sp.expand(poly.coeff_monomial(symbol ** p)) for p in (2, 1, 0))

    def linear_length(self, key: str, candidates: list) -> LinearLength | None:
        """The displacement from equations linear in it: up to three forms with different
        singular sets, the never-singular (constant denominator) and shortest first."""
        def constant(n):
            return float(np.max(n.q1) - np.min(n.q1)) <= 1e-9 * float(np.max(np.abs(n.q1)))
        ranked = sorted(candidates, key=lambda n: (not constant(n), self.size(n.equation), n.equation.number))
        forms, seen = [], []
        for n in ranked[:SYMBOLIC_CANDIDATES]:
            if any(proportional(n.q1, d) for d in seen):
                continue
            parts = self.length_parts(n.equation, key)
            if parts is None or parts[0] != 0:
                continue
            _, den, num = parts
            seen.append(n.q1)
            typical = float(np.median(np.abs(n.q1)))
            forms.append(LengthForm(self.reduce(-num), self.reduce(den), SINGULAR_TOLERANCE * power_of_ten(typical),
                                    n.equation.source))
            if constant(n) or len(forms) == MAX_PAIR_FORMS:
                break
        if not forms:
            return None
        what = self.unknowns[key].words()
        singular = Singular(measure=forms[0].den, threshold=forms[0].threshold,
                            description=f"every equation for {what} loses it (its coefficient vanishes)",
                            rule=f"{what} is free: it keeps the caller's current reading (0 if none is given)")
        return LinearLength(key, tuple(forms), singular)

    def quadratic_length(self, key: str, candidates: list) -> QuadraticLength | None:
        """Two roots from an equation of degree two in the displacement with a constant leading
        coefficient (a squared norm)."""
        def constant(n):
            return float(np.max(n.q2) - np.min(n.q2)) <= 1e-9 * float(np.max(np.abs(n.q2)))
        for n in sorted(candidates, key=lambda n: (self.size(n.equation), n.equation.number)):
            if not constant(n):
                continue
            parts = self.length_parts(n.equation, key)
            if parts is None or not parts[0].is_number or parts[0] == 0:
                continue
            a, b, c = (self.reduce(p) for p in parts)
            name, meaning = self.branch_namer(key, None)
            return QuadraticLength(key, a, b, c, self.reduce(b * b - 4 * a * c),
                                   BranchPoint(name, sp.Symbol(f"sigma{key}"), meaning), n.equation.source)
        return None

    def pair_determinant(self, item, key: str, built: dict):
        """The first part of a scored pair's symbolic form: (rank prefix, det, the two linear
        equations), or None when one of them is not linear symbolically. The prefix orders pairs
        as the full rank does, up to the numerators' weight."""
        score, first, second, _ = item
        cache_key = ("det", first.equation.number, second.equation.number)
        if cache_key not in built:
            one, two = self.linear(first.equation, key), self.linear(second.equation, key)
            if one is None or two is None:
                built[cache_key] = None
            else:
                det = self.reduce(one.a * two.b - two.a * one.b)
                built[cache_key] = ((score[0], score[1], len(det.free_symbols - self.constant_symbols)), det, one, two)
        return built[cache_key]

    def built_pair(self, item, key: str, built: dict):
        """The symbolic form of a scored pair: (rank, det, cos_num, sin_num, det values, the two
        linear equations, the item), or None when one of them is not linear symbolically."""
        score, first, second, det_values = item
        cache_key = (first.equation.number, second.equation.number)
        if cache_key not in built:
            found = self.pair_determinant(item, key, built)
            if found is None:
                built[cache_key] = None
            else:
                prefix, det, one, two = found
                cos_num = self.reduce(one.c * two.b - two.c * one.b)
                sin_num = self.reduce(one.a * two.c - two.a * one.c)
                weight = sp.count_ops(det) + sp.count_ops(cos_num) + sp.count_ops(sin_num)
                rank = prefix + (weight,) + score[2:]
                built[cache_key] = (rank, det, cos_num, sin_num, det_values, one, two, item)
        return built[cache_key]

    def pair_singular(self, key: str, forms: list[PairForm]) -> Singular:
        what = self.unknowns[key].words()
        return Singular(measure=forms[0].det, threshold=forms[0].threshold,
                        description=f"every way to isolate {what} degenerates (its determinant vanishes)",
                        rule=f"{what} is free: it keeps the caller's current reading (0 if none is given)")

    def cos_sin(self, linear: Linear, key: str) -> CosSinEquation:
        a, b, c = linear.a, linear.b, linear.c
        norm = self.reduce(a * a + b * b)
        constant_norm = not (norm.free_symbols - self.constant_symbols)
        radicand = self.unit_radicand(c, norm)
        if radicand is None:
            if constant_norm:
                root = sp.sqrt(norm)
                radicand = (root - c) * (root + c)
            else:
                radicand = self.plain_or_reduced(norm, c)
        name, meaning = self.branch_namer(key, linear)
        what = self.unknowns[key].words()
        singular = Singular(
            measure=norm,
            threshold=0.0 if constant_norm else SINGULAR_TOLERANCE * power_of_ten(self.samples.typical(norm)),
            description=f"the coefficients of cos and sin of {what} vanish together",
            rule=f"{what} is free: it keeps the caller's current reading (0 if none is given); one solution")
        return CosSinEquation(key=key, a=a, b=b, c=c, radicand=radicand, norm=norm,
                              branch=BranchPoint(name, sp.Symbol(f"sigma{key}"), meaning),
                              guard_meaning=f"{what} has a real solution only if a^2 + b^2 >= c^2 "
                                            "(else the pose is out of reach for this branch)",
                              singular=singular, source=linear.equation.source)

    def plain_or_reduced(self, norm: sp.Expr, c: sp.Expr) -> sp.Expr:
        """a^2 + b^2 - c^2 as computed with the least rounding: its reduced polynomial (where terms
        cancel exactly) or ``norm - c*c`` from the two computed values, whichever adds up smaller
        magnitudes on the samples (rounding error grows with the sum of |terms| added, and near a
        double root the difference is tiny). The reduced form is kept unless the plain one is at
        least 16 times smaller there (median over the samples)."""
        reduced = self.reduce(norm - c * c)
        plain_cost = self.samples.values(sp.Abs(norm)) + self.samples.values(c * c)
        terms = sp.Add.make_args(sp.expand(reduced))
        reduced_cost = sum(np.abs(self.samples.values(t)) for t in terms)
        if float(np.median(plain_cost / np.maximum(reduced_cost, 1e-300))) * 16 <= 1.0:
            return norm - c * c
        return reduced

    def unit_radicand(self, c: sp.Expr, norm: sp.Expr):
        """For ``+-cos = g`` with a^2 + b^2 = 1 and g an entry of a named rotation: 1 - g^2 is the
        sum of squares of the other two entries of its column (a unit vector), free of cancellation."""
        if sp.expand(norm - 1) != 0:
            return None
        for candidate in (c, -c):
            if isinstance(candidate, sp.Symbol):
                partners = self.names.unit_partners(candidate)
                if partners:
                    first, second = partners[0]
                    return first ** 2 + second ** 2
        # c = w . r with r a row or column of a named rotation and w a constant unit vector:
        # 1 - c^2 = |r x w|^2, a sum of squares with no cancellation near c = +-1.
        for vector in self.names.unit_vectors():
            weights = [sp.expand(c).coeff(x) for x in vector]
            rest = sp.expand(c - sum(w * x for w, x in zip(weights, vector)))
            if rest != 0 or any(w.free_symbols - self.constant_symbols for w in weights):
                continue
            if sp.simplify(reduce_circles(sum(w * w for w in weights) - 1, self.circles)) != 0:
                continue
            cross = sp.Matrix(vector).cross(sp.Matrix(weights))
            return sum(e ** 2 for e in cross)
        return None

    # ------------------------------------------------------------------ elimination
    def eliminate(self, closure: set[str]):
        """Two equations in {u, v}, linear in u's cos/sin: a polynomial in v's cos/sin."""
        pairs: dict[tuple[str, str], list] = {}
        for equation in self.pool.equations:
            left = equation.depends - closure
            if len(left) != 2:
                continue
            if any(self.unknowns[k].prismatic for k in left):
                continue
            for u, v in itertools.permutations(sorted(left, key=key_order)):
                found = self.numeric(equation, u)
                degrees = self.degrees(equation, u, v) if found is not None else None
                if degrees is not None:
                    pairs.setdefault((u, v), []).append((found, degrees))
        options = []
        for (u, v), items in pairs.items():
            for (first, d1), (second, d2) in itertools.combinations(items, 2):
                det_values = first.a * second.b - second.a * first.b
                scale = float(np.max(np.abs(first.a)) * np.max(np.abs(second.b)) +
                              np.max(np.abs(second.a)) * np.max(np.abs(first.b)))
                if float(np.max(np.abs(det_values))) <= ZERO_TOLERANCE * max(scale, 1e-300):
                    continue
                bound = 2 * max(d1 + d2)
                det_free = max(d1[:2] + d2[:2]) == 0
                options.append(((bound, not det_free, self.size(first.equation) + self.size(second.equation),
                                 first.equation.number, second.equation.number), u, v, first, second))
        options.sort(key=lambda item: item[0])
        for _, u, v, first, second in options[:SYMBOLIC_CANDIDATES]:
            if _[0] > 4:
                break
            one, two = self.linear(first.equation, u), self.linear(second.equation, u)
            if one is None or two is None:
                continue
            step = self.circle_polynomial(u, v, one, two)
            if step is not None:
                return step
        return None

    def degrees(self, equation: Equation, u: str, v: str) -> tuple[int, int, int] | None:
        """Degrees in v's cos/sin of the coefficients a, b, c of u, from the harmonics of their
        values over five angles of v; None when the equation is not linear in u's cos/sin."""
        angles = self.samples.angles
        known = self.known_values(equation.identity)
        scale = entry_scale(equation, self.chain.length_scale)
        coefficients = []
        for m in range(5):
            psi = 2 * math.pi * m / 5
            try:
                moved = vary(angles, equation, v, psi)
                values = [numeric_residual(self.pool, equation, known, vary(moved, equation, u, phi))
                          for phi in PROBE_ANGLES]
            except ValueError:
                return None
            e0, e90, e180, e270, e45, e115 = values
            a, b, d = (e0 - e180) / 2, (e90 - e270) / 2, (e0 + e180) / 2
            fit = max(float(np.max(np.abs(a * math.cos(phi) + b * math.sin(phi) + d - e)))
                      for phi, e in ((PROBE_ANGLES[4], e45), (PROBE_ANGLES[5], e115)))
            if fit > 1e-8 * scale:
                return None
            coefficients.append((a, b, d))
        degrees = []
        for index in range(3):
            series = np.array([c[index] for c in coefficients])          # (5, samples)
            spectrum = np.abs(np.fft.fft(series, axis=0))                # harmonics 0, 1, 2 (and mirrors)
            degree = 0
            for harmonic in (1, 2):
                if float(np.max(spectrum[harmonic])) > 1e-9 * scale * 5:
                    degree = harmonic
            degrees.append(degree)
        return tuple(degrees)

    def circle_polynomial(self, u: str, v: str, first: Linear, second: Linear):
        vu = self.unknowns[v]
        det = self.reduce(first.a * second.b - second.a * first.b)
        cos_num = first.c * second.b - second.c * first.b
        sin_num = first.a * second.c - second.a * first.c
        residual = reduce_circles(cos_num ** 2 + sin_num ** 2 - det ** 2, self.circles)
        residual = strip_free_factors(residual, det, vu)
        poly = sp.Poly(residual, vu.cos, vu.sin)
        if poly.total_degree() > 2 or poly.total_degree() < 1:
            return None
        monomials = [(0, 0), (1, 0), (0, 1), (1, 1), (0, 2)]
        if any(m not in monomials for m in poly.monoms()):
            return None
        coefficients = tuple(self.reduce(poly.coeff_monomial(vu.cos ** i * vu.sin ** j)) for i, j in monomials)
        sizes = [self.samples.values(k) for k in coefficients]
        typical = float(sorted(sum(abs(s) for s in sizes))[len(sizes[0]) // 2])
        if typical == 0.0:
            return None
        name, meaning = self.branch_namer(v, None)
        what = self.unknowns[v].words()
        singular = Singular(measure=sp.Add(*[k * k for k in coefficients]),
                            threshold=SINGULAR_TOLERANCE * power_of_ten(typical) ** 2,
                            description=f"every coefficient of the polynomial in {what} vanishes",
                            rule=f"{what} is free: it keeps the caller's current reading (0 if none is given)")
        return CirclePolynomial(key=v, coefficients=coefficients,
                                branch=BranchPoint(name, sp.Symbol(f"rho{v}"), meaning),
                                singular=singular, tolerance=GUARD_TOLERANCE, eliminated=u,
                                sources=(first.equation.source, second.equation.source))

    # ------------------------------------------------------------------ failure
    def stuck_message(self, remaining, closure) -> str:
        open_equations = sorted(((len(e.depends - closure), e.number, e) for e in self.pool.equations
                                 if e.depends - closure), key=lambda item: item[:2])
        reached = [f"{e.source} (unknowns {', '.join('th' + k for k in sorted(e.depends - closure, key=key_order))})"
                   for _, _, e in open_equations[:4]]
        known = ", ".join("th" + k for k in sorted(closure, key=key_order)) or "none"
        return ("no equation with a single unknown is left for "
                + ", ".join("th" + k for k in remaining) + f" (known: {known}), and no two equations in two "
                "unknowns reduce to a polynomial of degree four or less. The equations with the fewest unknowns: "
                + "; ".join(reached))


def proportional(x: np.ndarray, y: np.ndarray) -> bool:
    """x = k y on every sample for one constant k."""
    scale = float(np.max(np.abs(y)))
    usable = np.abs(y) > 1e-6 * scale
    if not usable.any():
        return False
    ratio = x[usable] / y[usable]
    return float(np.max(ratio) - np.min(ratio)) <= 1e-7 * max(float(np.max(np.abs(ratio))), 1e-300)


def proportional_rows(rows: list, y: np.ndarray) -> np.ndarray:
    """``proportional(x, y)`` for every x of ``rows`` at once (the same arithmetic, row by row)."""
    if not rows:
        return np.zeros(0, dtype=bool)
    scale = float(np.max(np.abs(y)))
    usable = np.abs(y) > 1e-6 * scale
    if not usable.any():
        return np.zeros(len(rows), dtype=bool)
    ratio = np.array(rows)[:, usable] / y[usable]
    spread = np.max(ratio, axis=1) - np.min(ratio, axis=1)
    return spread <= 1e-7 * np.maximum(np.max(np.abs(ratio), axis=1), 1e-300)


def divides(first: sp.Expr, second: sp.Expr) -> bool:
    """``second`` vanishes wherever ``first`` does: it is the square-free part of ``first`` (s5 for
    s5^2) times a polynomial.

    For integer polynomials (every symbolic DH table's) the test runs in sympy's polynomial ring
    over the rationals: ``first`` itself dividing ``second`` settles it without the square-free
    part, which is computed once per ``first``; the remainder of the division by one polynomial is
    zero exactly when it divides (one polynomial is a Groebner basis of the ideal it makes).
    Other expressions take sympy's ``cancel`` on the quotient."""
    constants = not (sp.sympify(first).free_symbols or sp.sympify(second).free_symbols)
    pair = None if constants else ring_forms([first, second])
    if pair is None:
        first = sp.expand(first)
        if first.is_number or len(sp.Add.make_args(first)) > 6:
            return False
        ratio = sp.cancel(sp.expand(second) / sp.sqf_part(first))
        return not sp.denom(ratio).free_symbols
    f, g = pair
    if f.is_ground or len(f) > 6:
        return False        # a long determinant: the test costs seconds, and such forms are rare
    rational = f.ring.clone(domain=QQ)
    g = g.set_ring(rational)
    if not g.rem(f.set_ring(rational)):
        return True
    return not g.rem(_square_free_part(first, f.ring).set_ring(rational))


@functools.lru_cache(maxsize=256)
def _square_free_part(first: sp.Expr, ring):
    return ring.from_expr(first).sqf_part()


def snap(values: np.ndarray, scale: float) -> np.ndarray:
    """Exact zeros for a coefficient that is zero up to rounding on every sample."""
    return np.zeros_like(values) if float(np.max(np.abs(values))) <= ZERO_TOLERANCE * scale else values


def linear_parts(expr: sp.Expr, c: sp.Symbol, s: sp.Symbol):
    """(a, b, rest) with expr = a c + b s + rest, for an expanded expression linear in c and s;
    None when a term has c or s to a higher power or both together."""
    a, b, rest = [], [], []
    for term in sp.Add.make_args(sp.expand(expr)):
        powers = term.as_powers_dict()
        pc, ps = powers.get(c, 0), powers.get(s, 0)
        if pc == 0 and ps == 0:
            rest.append(term)
        elif pc == 1 and ps == 0:
            a.append(term / c)
        elif ps == 1 and pc == 0:
            b.append(term / s)
        else:
            return None
    if not a and not b:
        return None
    return sp.Add(*a), sp.Add(*b), sp.Add(*rest)


def degree_in(expr, unknown: Unknown) -> int:
    expr = sp.sympify(expr)
    if not (expr.has(unknown.cos) or expr.has(unknown.sin)):
        return 0
    return sp.Poly(expr, unknown.cos, unknown.sin).total_degree()


def strip_free_factors(residual: sp.Expr, det: sp.Expr, unknown: Unknown) -> sp.Expr:
    """Divide out the factors of the determinant that do not involve ``unknown``: they do not
    change the roots, and without them the polynomial keeps its roots where they vanish."""
    _, factors = sp.factor_list(sp.expand(det))
    for factor, _ in factors:
        if factor.is_number or factor.has(unknown.cos) or factor.has(unknown.sin):
            continue
        for _ in range(2):
            generators = sorted(residual.free_symbols | factor.free_symbols, key=str)
            quotient, remainder = sp.div(sp.Poly(residual, *generators), sp.Poly(factor, *generators))
            if not remainder.is_zero:
                break
            residual = quotient.as_expr()
    return sp.expand(residual)


def drop_idle_sibling_forms(steps: list, labels: list) -> list:
    """A pair's form that does without its sibling (PairForm.after) pays off only when nothing else
    reads the sibling's cosine and sine: then no step needs them scaled to unit length. Where a
    later step, a label, or an intermediate they feed reads them anyway, the form is dropped (the
    pair's other forms stay as they were), and with it the intermediates written out only for it."""
    steps = list(steps)
    label_reads = set().union(*(label.measure.free_symbols for label in labels))
    for index, step in enumerate(steps):
        if not isinstance(step, LinearPair) or not step.forms[0].after:
            continue
        sibling = step.forms[0].after
        start = next(i for i in range(index - 1, -1, -1)
                     if isinstance(steps[i], LinearPair) and steps[i].key == sibling)
        direct = step.forms[0]
        reads = label_reads | direct.det.free_symbols | direct.cos_num.free_symbols | direct.sin_num.free_symbols
        for other in steps[start + 1:]:
            if other is not step and not isinstance(other, Compute):
                reads |= free_symbols_of(other)
        for other in reversed(steps):     # what the intermediates read hold the readers read
            if isinstance(other, Compute):
                for name, expr in zip(other.names, other.exprs):
                    if name in reads:
                        reads |= expr.free_symbols
        if not reads & {cos_symbol(sibling), sin_symbol(sibling)}:
            continue
        steps[index] = dataclasses.replace(step, forms=step.forms[1:])
        for between in range(index - 1, start, -1):
            if isinstance(steps[between], Compute):
                others = set().union(label_reads, *(free_symbols_of(o) for k, o in enumerate(steps) if k != between))
                if not set(steps[between].names) & others:
                    steps[between] = Compute((), (), "")      # read by nothing now: removed below
    return [s for s in steps if not (isinstance(s, Compute) and not s.names)]


def free_symbols_of(step) -> set:
    out = set()
    for value in vars(step).values():
        out |= _symbols_in(value)
    return out


def _symbols_in(value) -> set:
    if isinstance(value, sp.Basic):
        return set(value.free_symbols)
    if isinstance(value, (tuple, list)):
        out = set()
        for item in value:
            out |= _symbols_in(item)
        return out
    if hasattr(value, "__dataclass_fields__"):
        return free_symbols_of(value)
    return set()
