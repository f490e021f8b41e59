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

from dataclasses import dataclass

import sympy as sp

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
    becomes c^(k mod 2) (1 - s^2)^(k div 2).

    Works term by term on the expanded sum; only terms with a squared cosine are rewritten (and
    re-expanded), which keeps this fast on the large expressions of the position equations.
    """
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


def tidy(expr: sp.Expr, circles) -> sp.Expr:
    """Reduced and with common factors pulled out (the form steps keep)."""
    return sp.factor_terms(reduce_circles(expr, circles))
