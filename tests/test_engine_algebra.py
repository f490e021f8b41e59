"""The engine's polynomial algebra (ikgen/engine/symbols.py) against sympy's own.

- ``reduce_circles`` is the normal form modulo c^2 + s^2 = 1 for every circle (c, s). The outside
  reference is sympy's multivariate division, ``sympy.reduced``, by the polynomials c^2 + s^2 - 1
  in lex order with the cosines first: their leading terms c^2 are pairwise coprime, so they are a
  Groebner basis (Buchberger's first criterion; Cox, Little and O'Shea, Ideals, Varieties, and
  Algorithms, 4th ed., ch. 2, sec. 9, Prop. 4) and the remainder is the unique normal form.
- ``tidy`` must be exactly ``sympy.factor_terms`` of that normal form (the expression the derivation
  keeps, and so the bytes of the generated files): the ring path builds it from coefficients and
  exponents, so the two are compared structurally (``srepr``) on random polynomials, including
  ones with a common monomial, a common integer content and all-negative coefficients.
- Expressions that are not integer polynomials (rationals, square roots, other functions) take
  sympy's expression-tree path and give the same result as before.
"""

from __future__ import annotations

import sympy as sp
from hypothesis import given, settings
from hypothesis import strategies as st

from ikgen.engine.symbols import _reduce_circles_tree, reduce_circles, ring_form, tidy

c1, s1, c2, s2, a, d, g = sp.symbols("c1 s1 c2 s2 a_2 d_4 g16_13")
CIRCLES = [(c1, s1), (c2, s2)]
ATOMS = [c1, s1, c2, s2, a, d, g]


@st.composite
def polynomials(draw):
    """A product of up to three short sums of monomials with integer coefficients, times an
    optional common monomial and content, possibly negated: the shapes of the derivation's
    determinants and numerators."""
    def monomial():
        coefficient = draw(st.integers(-4, 4).filter(bool))
        powers = draw(st.lists(st.tuples(st.sampled_from(ATOMS), st.integers(1, 3)), max_size=3))
        return coefficient * sp.Mul(*[x ** k for x, k in powers])
    factors = [sp.Add(*[monomial() for _ in range(draw(st.integers(1, 4)))])
               for _ in range(draw(st.integers(1, 3)))]
    common = sp.Mul(*draw(st.lists(st.sampled_from(ATOMS), max_size=3))) * draw(st.sampled_from([1, 2, 6, -1, -3]))
    return sp.Mul(common, *factors)


def normal_form_by_division(expr):
    gens = [c1, c2, s1, s2, a, d, g]
    _, remainder = sp.reduced(sp.expand(expr), [c1 ** 2 + s1 ** 2 - 1, c2 ** 2 + s2 ** 2 - 1], *gens, order="lex")
    return sp.expand(remainder)


@settings(max_examples=60, deadline=None, derandomize=True)
@given(expr=polynomials())
def test_reduce_circles_is_the_remainder_of_groebner_division(expr):
    reduced = reduce_circles(expr, CIRCLES)
    assert sp.expand(reduced - normal_form_by_division(expr)) == 0
    assert sp.srepr(reduced) == sp.srepr(_reduce_circles_tree(expr, CIRCLES))


@settings(max_examples=60, deadline=None, derandomize=True)
@given(expr=polynomials())
def test_tidy_is_exactly_factor_terms_of_the_normal_form(expr):
    assert sp.srepr(tidy(expr, CIRCLES)) == sp.srepr(sp.factor_terms(_reduce_circles_tree(expr, CIRCLES)))


def test_common_factors_and_signs_come_out_as_factor_terms_takes_them():
    cases = [-2 * a * c1 ** 2 * d - 4 * a * g,                # content 2, sign, common a, a squared cosine
             6 * a ** 2 * d * s1 + 9 * a * d ** 2 * c2,       # content 3, common a*d
             a * d + g, -a - d, 5 * c1 ** 3]
    for expr in cases:
        assert ring_form(expr, CIRCLES) is not None
        assert sp.srepr(tidy(expr, CIRCLES)) == sp.srepr(sp.factor_terms(_reduce_circles_tree(expr, CIRCLES)))
    # written out by hand: the content with the sign, the common symbol, the sum of the quotients
    assert sp.srepr(tidy(-2 * a * d - 4 * a * g, CIRCLES)) == sp.srepr(sp.Mul(-2, a, d + 2 * g, evaluate=False))
    assert str(tidy(-2 * a * c1 ** 2 * d - 4 * a * g, CIRCLES)) == "2*a_2*(d_4*s1**2 - d_4 - 2*g16_13)"


def test_other_expressions_take_the_expression_tree_path():
    for expr in (a / 2 + d * c1 ** 2, sp.sqrt(3) * c1 ** 2 * a, a * sp.cos(d) + c1 ** 2, 1 / a + c1, sp.Integer(3)):
        assert ring_form(expr, CIRCLES) is None
        assert sp.srepr(reduce_circles(expr, CIRCLES)) == sp.srepr(_reduce_circles_tree(expr, CIRCLES))
        assert sp.srepr(tidy(expr, CIRCLES)) == sp.srepr(sp.factor_terms(_reduce_circles_tree(expr, CIRCLES)))
