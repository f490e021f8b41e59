"""Overflow bounds over a code plan: the largest pose entry for which no intermediate can overflow.

A generated solver tests each solution's angles and roots for NaN and infinity, because a huge pose
can make an intermediate overflow (and inf - inf, 0 * inf give NaN). Where every pose entry lies
within SAFE_ENTRY, that test is skipped; this module proves, for one plan and one scalar type, a
SAFE_ENTRY below which no intermediate can overflow, or finds none (0.0: the solver always tests).

The proof is a majorant walk (interval arithmetic on magnitudes). Every pose entry is at most E in
magnitude; the rotation part is not assumed orthonormal, so a rotation entry may be as large as E
too. A number bounds itself, |a + b| <= |a| + |b|, |a b| <= |a| |b|, |x^n| <= |x|^n,
|sqrt(x)| <= sqrt(|x|), an atan2 is at most pi. Each named intermediate gets the bound of its
expression; every node of every expression (so every partial sum and product the code computes)
must stay below the type's largest finite value over MARGIN. What the walk cannot bound from the
expressions alone comes from the code's own tests (the templates compute exactly these shapes):
- a solved angle's cosine and sine are of unit length: a cosine-sine equation's by construction
  (a*c - b*root over a^2 + b^2 >= threshold, the root clamped by the reach guard), a linear pair's
  after its consistency test or unit scaling, a free angle's from cos and sin. UNIT allows for
  the slack of those tests. Their expressions are still walked for overflow up to the division.
- a pair's hoisted reciprocal 1/det is read only where |det| exceeds the form's limit.
- a scale-free pair keeps its numerators (bounded by their expressions); its consistency test
  squares them and the determinant, so those squares must not overflow either (inf - inf would
  pass the test). A pair scaled by 1/det may overflow in its unit-length test: the test then
  fails (inf is not 1) and the pair is rejected or left free, as it would be for a large finite
  value; only a form accepted without a test (consistent) must keep its square finite, since its
  unit scaling divides by it.
- the sibling's unit (cos, sin) (uc, us) that a pair's fallback form reads: unit by construction.
- a displacement from an equation linear in it is num / den, den a non-zero constant or tested
  above the form's threshold.
Polynomial roots (found by iteration in the template), a displacement's two roots, a displacement
that may be left free (the caller's reading fills it) and the caller's given reading are not
bounded here: a plan with one gets no SAFE_ENTRY.

Other sources of NaN (0/0) need a pose whose rotation part is not a rotation, which is the caller's
mistake (docs/solvers.md); they are not what this bound is about.
"""

from __future__ import annotations

import math

import sympy as sp

from ..ir import GIVEN_SYMBOL, angle_symbol, cos_symbol, sin_symbol
from .common import length_symbol

LARGEST = {"double": 1.7976931348623157e308, "float": 3.4028234663852886e38}
MARGIN = 16.0                 # below the largest finite value by this factor: rounding in the code's own
                              # evaluation order (a few hundred operations, each off by one rounding)
                              # cannot close it
UNIT = 1.01                   # bound on a solved angle's cosine or sine (tests allow 1e-4 off unit length)
LADDER = {"double": [10.0 ** k for k in range(10, -1, -1)],      # SAFE_ENTRY candidates, largest first
          "float": [10.0 ** k for k in range(6, -1, -1)]}


class Unbounded(Exception):
    """The plan holds a quantity this walk cannot bound (the reason is the message)."""


class _Walk:
    def __init__(self, plan, entry: float, real: str):
        self.ceiling = LARGEST[real] / MARGIN
        self.real = real
        self.bound: dict = {symbol: entry for symbol in plan.pose_symbols}
        self.given = GIVEN_SYMBOL
        self.peak = 0.0
        self.memo: dict = {}
        # a pair's hoisted reciprocal is read only where |det| > the form's limit
        self.reciprocal_floor = {form.det: form.limit(real) for block in plan.blocks
                                 for form in block.forms if form.inverse is not None}

    def note(self, value: float) -> float:
        if not value <= self.ceiling:          # also catches inf and NaN
            raise Unbounded(f"a value may reach {value:.3g}")
        self.peak = max(self.peak, value)
        return value

    def node(self, expr) -> float | None:
        """Majorant of ``expr`` (every node checked against the ceiling); None for a quotient by
        something the walk has no lower bound for (its nodes below the division are checked)."""
        if expr in self.memo:
            return self.memo[expr]
        if expr.is_Number:
            value = abs(float(expr))
        elif expr.is_Symbol:
            if expr == self.given or expr not in self.bound:
                raise Unbounded(f"no bound for {expr}")
            value = self.bound[expr]
        elif expr.is_Add or expr.is_Mul:
            parts = [self.node(arg) for arg in expr.args]
            if any(part is None for part in parts):
                value = None
            elif expr.is_Add:
                value = sum(parts)             # every partial sum, in any order, is at most this
                                               # (no math.fsum: it raises where a sum overflows)
            else:
                value = math.prod(parts)
                # a partial product in another order than sympy's may pass through the factors above
                # 1 alone: at most their product
                self.note(math.prod(max(part, 1.0) for part in parts))
        elif expr.is_Pow:
            base = self.node(expr.base)
            exponent = expr.exp
            if base is None:
                value = None
            elif exponent.is_Integer and exponent > 0:
                value = base ** int(exponent) if base < 1e300 ** (1.0 / int(exponent)) else math.inf
            elif exponent == sp.Rational(1, 2):
                value = math.sqrt(base)
            elif exponent.is_negative:
                value = None
            else:
                raise Unbounded(f"a power {expr}")
        elif isinstance(expr, sp.Function):
            name = type(expr).__name__
            if name == "Reciprocal":
                floor = self.reciprocal_floor.get(expr.args[0]) if expr.args[0].is_Symbol else None
                if floor is None:
                    for arg in expr.args:
                        self.node(arg)
                    value = None
                else:
                    self.node(expr.args[0])
                    value = 1.0 / floor
            elif name == "atan2":
                for arg in expr.args:
                    self.node(arg)
                value = math.pi
            elif name in ("cos", "sin"):
                self.node(expr.args[0])
                value = 1.0
            elif name == "Abs":
                value = self.node(expr.args[0])
            else:
                raise Unbounded(f"a function {name}")
        else:
            raise Unbounded(f"an expression {expr}")
        if value is not None:
            self.note(value)
        self.memo[expr] = value
        return value

    def value(self, expr) -> float:
        found = self.node(sp.sympify(expr))
        if found is None:
            raise Unbounded(f"a quotient in {expr}")
        return found

    def unit(self, expr) -> float:
        """A cosine or sine that the code's construction or tests keep of unit length: its
        expression is walked for overflow up to the division, the value is UNIT."""
        if expr is not None:
            self.node(sp.sympify(expr))
        return UNIT

    def assign(self, assignments) -> None:
        for assignment in assignments:
            name = str(assignment.target)
            if name.startswith("un") and name[2:] and self._unit_scale(assignment.expr):
                self.bound[assignment.target] = math.inf   # only read by uc/us, as a product with c/s
                continue
            if name[:2] in ("uc", "us") and assignment.expr.is_Mul and \
                    sp.Symbol(f"un{name[2:]}", real=True) in assignment.expr.free_symbols:
                self.bound[assignment.target] = UNIT       # (c, s) scaled to unit length
                continue
            self.bound[assignment.target] = self.value(assignment.expr)

    @staticmethod
    def _unit_scale(expr) -> bool:
        return expr.is_Pow and expr.exp == sp.Rational(-1, 2)

    def walk(self, plan) -> None:
        for block in plan.blocks:
            self.assign(block.temps)
            if block.kind == "compute":
                continue
            if block.kind in ("poly", "quad") or (block.kind == "lin" and block.free_possible):
                raise Unbounded(f"a {block.kind} block ({block.key})")
            j = block.key
            if block.kind == "lin":
                # l = num / den, den a non-zero constant or tested above the form's threshold
                length = 0.0
                for form in block.forms:
                    self.assign(form.temps)
                    self.value(form.det)
                    floor = abs(float(form.det)) if form.constant_det else form.threshold
                    length = max(length, self.note(self.value(form.cos_num) / floor))
                self.bound[length_symbol(j)] = length
                continue
            cos_j, sin_j, th_j = cos_symbol(j), sin_symbol(j), angle_symbol(j)
            if block.kind == "cossin":
                for expr in (block.c, block.norm, block.guard):     # the guard's tolerance is the
                    # double build's; the float build's (FLOAT_GUARD_TOLERANCE, 3e-6) is larger but its
                    # term, 6e-6 times the norm, changes the sum by far less than MARGIN
                    if expr is not None:
                        self.value(expr)
                radicand = self.value(block.radicand)
                self.bound[sp.Symbol(f"root{j}", real=True)] = math.sqrt(radicand)
                self.bound[sp.Symbol(f"sg{j}", real=True)] = 1.0
                self.bound[sp.Symbol(f"dl{j}", real=True)] = math.pi
                self.bound[sp.Symbol(f"cn{j}", real=True)] = self.value(block.cn)
                self.bound[sp.Symbol(f"sn{j}", real=True)] = self.value(block.sn)
                if block.gamma is not None:
                    before, _, _ = block.root_parts()
                    self.assign(before)
                self.bound[cos_j] = self.unit(block.cos_expr)
                self.bound[sin_j] = self.unit(block.sin_expr)
                self.bound[th_j] = abs(block.gamma or 0.0) + math.pi
            elif block.kind == "pair":
                numerators = dets = 0.0
                for form in block.forms:
                    self.assign(form.temps)
                    det = self.value(form.det)
                    dets = max(dets, det)
                    top = max(self.value(form.cos_num), self.value(form.sin_num))
                    numerators = max(numerators, top)
                    if block.scale_free and not form.consistent:
                        self.note(2.0 * top * top + det * det)    # the consistency test's squares
                    elif not block.scale_free and form.consistent:
                        self.note(2.0 * (top / form.limit(self.real)) ** 2)   # the unit scaling's square
                self.bound[sp.Symbol(f"dt{j}", real=True)] = dets
                self.bound[cos_j] = self.bound[sin_j] = numerators if block.scale_free else UNIT
                self.bound[th_j] = math.pi
            elif block.kind == "sum":
                self.bound[th_j] = block.bound * math.pi
                self.bound[cos_j] = self.unit(block.cos_expr if block.need_cos else None)
                self.bound[sin_j] = self.unit(block.sin_expr if block.need_sin else None)
            else:
                raise Unbounded(f"a block of kind {block.kind}")
        self.assign(plan.final_temps)
        for measure in plan.label_measures:
            self.value(measure)


def majorants(plan, entry: float, real: str) -> dict:
    """{symbol: bound on its magnitude} for every quantity the walk names, every pose entry within
    ``entry`` (raises Unbounded where ``fits`` is False). For tests and the curious."""
    walk = _Walk(plan, entry, real)
    walk.walk(plan)
    return dict(walk.bound)


def why_not(plan, entry: float, real: str) -> str:
    """Why an intermediate of ``plan`` may overflow ``real`` with every pose entry within ``entry``
    ('' when none can)."""
    try:
        _Walk(plan, entry, real).walk(plan)
    except Unbounded as reason:
        return str(reason)
    return ""


def fits(plan, entry: float, real: str) -> bool:
    """Whether no intermediate of ``plan`` can overflow ``real`` when every pose entry is within ``entry``."""
    return not why_not(plan, entry, real)


def safe_entry(plan, real: str) -> float:
    """The largest SAFE_ENTRY candidate (LADDER) that ``fits``, or 0.0 when none does."""
    cache = plan.__dict__.setdefault("_safe_entry", {})
    if real not in cache:
        cache[real] = next((entry for entry in LADDER[real] if fits(plan, entry, real)), 0.0)
    return cache[real]
