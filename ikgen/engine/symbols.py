"""Unknowns of a derivation and the algebra shared by the whole engine.

An unknown is an angle the engine solves for: a joint's DH angle (key ``"3"``), or the signed sum
of the angles of consecutive parallel revolute axes (key ``"p234"`` for th2 + th3 + th4; a member
turning the other way is written ``"p2m3"``). Each unknown has a cosine, a sine and an angle
symbol (``cp234``, ``sp234``, ``thp234``); the generated code carries the (cos, sin) pair so that
later steps never call cos/sin again.

Expressions are polynomials in those cosines and sines, in the pose quantities and in the DH
parameters. ``reduce_circles`` puts them in a normal form modulo ``c^2 + s^2 = 1`` for every
circle (unknown angles and symbolic twists), so that "identically zero" and "depends on x" are
syntactic questions.
"""

from __future__ import annotations

import functools
import math
from dataclasses import dataclass

import sympy as sp
from sympy.core.exprtools import _keep_coeff
from sympy.polys.domains import ZZ
from sympy.polys.orderings import lex
from sympy.polys.polyerrors import CoercionFailed
from sympy.polys.rings import PolyRing

from ..ir import angle_symbol, cos_symbol, sin_symbol


@dataclass(frozen=True)
class Unknown:
    """An angle to solve, ``sum(sign * th_joint for joint, sign in members)``, or the displacement
    of a prismatic joint (its DH d, symbol ``l<joint>``)."""
    key: str
    members: tuple[tuple[int, int], ...]
    prismatic: bool = False

    @staticmethod
    def joint(index: int, prismatic: bool = False) -> "Unknown":
        return Unknown(str(index), ((index, 1),), prismatic)

    @property
    def length(self) -> sp.Symbol:
        """The displacement of a prismatic joint (its DH d, in the arm's length unit)."""
        return length_symbol(self.key)

    @staticmethod
    def sum_of(members) -> "Unknown":
        members = tuple(members)
        key = "p" + "".join(("" if k == 0 else ("m" if sign < 0 else "")) + str(j)
                            for k, (j, sign) in enumerate(members))
        return Unknown(key, members)

    @property
    def is_joint(self) -> bool:
        return len(self.members) == 1

    @property
    def cos(self) -> sp.Symbol:
        return cos_symbol(self.key)

    @property
    def sin(self) -> sp.Symbol:
        return sin_symbol(self.key)

    @property
    def angle(self) -> sp.Symbol:
        return angle_symbol(self.key)

    def words(self) -> str:
        if self.is_joint:
            return f"joint {self.key}" + (" (its displacement)" if self.prismatic else "")
        terms = " ".join(("+ " if sign > 0 else "- ") + f"th{j}" for j, sign in self.members).lstrip("+ ")
        return f"the sum {terms}"


def length_symbol(key) -> sp.Symbol:
    return sp.Symbol(f"l{key}", real=True)


def reduce_circles(expr: sp.Expr, circles) -> sp.Expr:
    """Normal form modulo c^2 + s^2 = 1 for each (c, s) in ``circles``: every c^k with k >= 2
    becomes c^(k mod 2) (1 - s^2)^(k div 2), on the expanded expression.

    A polynomial with integer coefficients (every expression of a symbolic DH table) is expanded
    and rewritten in sympy's sparse polynomial ring (``ring_form``), several times faster than
    sympy's expression tree and the same expression in the end (sympy's canonical sum of products);
    anything else (square roots of exact twists, rationals) takes the expression-tree path.
    """
    ring = ring_form(expr, circles)
    if ring is not None:
        return _ring_reduced(ring, circles).as_expr()
    return _reduce_circles_tree(expr, circles)


def _reduce_circles_tree(expr: sp.Expr, circles) -> sp.Expr:
    """reduce_circles on sympy's expression tree: term by term on the expanded sum; only terms
    with a squared cosine are rewritten (and re-expanded)."""
    cosines = dict(circles)
    expr = sp.expand(expr)
    if not any(expr.has(c) for c in cosines):
        return expr
    kept, rewritten = [], []
    for term in sp.Add.make_args(expr):
        powers = term.as_powers_dict()
        squared = [c for c in cosines if c in powers and powers[c].is_Integer and powers[c] >= 2]
        if not squared:
            kept.append(term)
            continue
        factor = sp.Integer(1)
        for c in squared:
            power = int(powers[c])
            factor *= (1 - cosines[c] ** 2) ** (power // 2)
            term = term / c ** (power - power % 2)
        rewritten.append(sp.expand(term * factor))
    if not rewritten:
        return expr
    return sp.Add(*kept, *rewritten)


def expanded(expr: sp.Expr) -> sp.Expr:
    """``sp.expand(expr)``, through the polynomial ring when ``expr`` is an integer polynomial (the
    same canonical sum of products, several times faster on long products)."""
    ring = ring_form(expr)
    return ring.as_expr() if ring is not None else sp.expand(expr)


def tidy(expr: sp.Expr, circles) -> sp.Expr:
    """Reduced and with common factors pulled out (the form steps keep): exactly
    ``sp.factor_terms(reduce_circles(expr, circles))``, computed from the polynomial ring's
    coefficients and exponents when the expression is an integer polynomial."""
    ring = ring_form(expr, circles)
    if ring is None:
        return sp.factor_terms(_reduce_circles_tree(expr, circles))
    return _common_factors_out(_ring_reduced(ring, circles))


@functools.lru_cache(maxsize=256)
def integer_ring(symbols: tuple) -> PolyRing:
    return PolyRing(symbols, ZZ, lex)


def ring_form(expr: sp.Expr, circles=()):
    """``expr`` as an element of the ring of integer polynomials in its symbols (and the sines of
    the circles whose cosine it has), or None when it is a constant or not such a polynomial."""
    free = expr.free_symbols
    found = ring_forms([expr], {s for c, s in circles if c in free}) if free else None
    return found[0] if found else None


def ring_forms(exprs, extra=()):
    """The expressions as elements of one ring of integer polynomials in all their symbols (and
    ``extra``), or None when one of them is not such a polynomial."""
    symbols = set(extra).union(*(sp.sympify(e).free_symbols for e in exprs))
    ring = integer_ring(tuple(sorted(symbols, key=sp.default_sort_key)))
    try:
        return [ring.from_expr(e) for e in exprs]
    except (ValueError, TypeError, CoercionFailed):
        return None


def _ring_reduced(p, circles):
    """reduce_circles on a ring element: each monomial with c^k (k >= 2) becomes
    c^(k mod 2) (1 - s^2)^(k div 2) times the rest of the monomial."""
    ring = p.ring
    where = {symbol: i for i, symbol in enumerate(ring.symbols)}
    for c, s in circles:
        i = where.get(c)
        if i is None or not any(m[i] >= 2 for m in p):
            continue
        one_minus = ring.one - ring.gens[where[s]] ** 2
        kept, rewritten = {}, ring.zero
        for monomial, coefficient in p.items():
            k = monomial[i]
            if k < 2:
                kept[monomial] = coefficient
            else:
                rest = monomial[:i] + (k % 2,) + monomial[i + 1:]
                rewritten += ring({rest: coefficient}) * one_minus ** (k // 2)
        p = ring(kept) + rewritten
    return p


def _common_factors_out(p) -> sp.Expr:
    """``sp.factor_terms(p.as_expr())`` for an integer polynomial ``p``, built directly: the
    integer content (negative when every coefficient is: factor_terms takes the sign out then)
    times the lowest power of each symbol that every term has, times the sum of the quotients,
    kept as one product as factor_terms keeps it (sympy.core.exprtools._keep_coeff with its
    arguments there). tests/test_engine_algebra.py checks the equality on random polynomials."""
    if len(p) < 2:
        return p.as_expr()
    coefficients = [int(c) for c in p.values()]
    content = functools.reduce(math.gcd, (abs(c) for c in coefficients))
    if all(c < 0 for c in coefficients):
        content = -content
    lowest = [min(m[i] for m in p) for i in range(p.ring.ngens)]
    quotient = p.ring({tuple(e - low for e, low in zip(m, lowest)): c // content for m, c in p.items()})
    common = sp.Mul(*[symbol ** low for symbol, low in zip(p.ring.symbols, lowest) if low])
    return _keep_coeff(sp.Integer(content), sp.Mul(common, quotient.as_expr()), clear=False, sign=True)
