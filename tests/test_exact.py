"""Tests for ikgen.exact: exact numbers from arm-file values, and snapping of radian floats.

Outside references used here:
- sympy (general-purpose CAS) is the reference for exact values: sp.pi, sp.Rational, sp.cos.
- "repr(float) is the shortest string that reads back to the same double": Python documentation,
  tutorial chapter "Floating Point Arithmetic: Issues and Limitations" (Python 3.11); the same
  property is what makes float(Rational(repr(x))) == x hold.
- mpmath (general-purpose arbitrary precision) gives correctly rounded doubles of k*pi/12.
"""

from __future__ import annotations

import math

import mpmath
import pytest
import sympy as sp
from hypothesis import given, settings
from hypothesis import strategies as st

from ikgen.errors import quote
from ikgen.exact import NotANumber, exact_from_float, parse_exact, snap_radians


# --------------------------------------------------------------------------- parse_exact: numbers

@pytest.mark.parametrize("value", [0, 1, -7, 180, 10**30, -(10**40)])
def test_integers_become_sympy_integers(value):
    result = parse_exact(value)
    assert isinstance(result, sp.Integer)
    assert result == sp.Integer(value)


@pytest.mark.parametrize("value, numerator, denominator", [
    (0.1, 1, 10),           # the classic: the double nearest 0.1 is read as the decimal 1/10
    (0.25, 1, 4),
    (-2.5, -5, 2),
    (12.5, 25, 2),
    (1e-7, 1, 10**7),       # repr '1e-07' (exponent form)
    (2.5e3, 2500, 1),
    (1e22, 10**22, 1),      # repr '1e+22'
    (0.3, 3, 10),
    (-0.0, 0, 1),
])
def test_floats_are_read_as_the_decimal_they_show(value, numerator, denominator):
    result = parse_exact(value)
    assert isinstance(result, sp.Rational)
    assert result == sp.Rational(numerator, denominator)


def test_float_decimal_is_not_the_binary_value():
    # The binary double nearest 0.1 is 3602879701896397/36028797018963968 (exactly representable
    # fraction, computed here from the float itself); parse_exact must give 1/10 instead.
    binary = sp.Rational(*(0.1).as_integer_ratio())
    assert binary != sp.Rational(1, 10)
    assert parse_exact(0.1) != binary
    assert parse_exact(0.1) == sp.Rational(1, 10)


def test_exact_from_float_matches_parse_exact_and_rejects_non_finite():
    assert exact_from_float(0.1) == sp.Rational(1, 10)
    for bad in (math.nan, math.inf, -math.inf):
        with pytest.raises(NotANumber, match="not finite"):
            exact_from_float(bad)


@settings(max_examples=500, deadline=None)
@given(st.floats(allow_nan=False, allow_infinity=False))
def test_property_exact_value_rounds_back_to_the_same_float(x):
    # Python tutorial, "Floating Point Arithmetic: Issues and Limitations": repr(x) reads back as x.
    # The exact value is rounded by int true division, which CPython rounds correctly (its
    # long_true_divide; from memory): sympy's float() of a Rational can be one ulp off for
    # subnormal values (hypothesis found 1.247455891682445e-308 coming back as ...447e-308).
    result = parse_exact(x)
    assert result.is_Rational
    assert int(result.p) / int(result.q) == x


@settings(max_examples=300, deadline=None)
@given(st.floats(allow_nan=False, allow_infinity=False))
def test_property_float_and_its_repr_string_give_the_same_value(x):
    assert parse_exact(repr(x)) == parse_exact(x)


# --------------------------------------------------------------------------- parse_exact: strings

@pytest.mark.parametrize("text, expected", [
    ("pi/2", sp.pi / 2),
    ("-3*pi/4", -3 * sp.pi / 4),
    ("1/3", sp.Rational(1, 3)),
    ("  pi  ", sp.pi),
    ("+pi/6", sp.pi / 6),
    ("-pi", -sp.pi),
    ("(1+2)*pi/6", sp.pi / 2),
    ("2*0.25", sp.Rational(1, 2)),
    ("0.1", sp.Rational(1, 10)),
    ("5*pi/6 - pi/3", sp.pi / 2),
    ("180", sp.Integer(180)),
    ("1e-3", sp.Rational(1, 1000)),
])
def test_expression_strings(text, expected):
    result = parse_exact(text)
    assert sp.simplify(result - expected) == 0
    assert result == expected  # structurally equal too: no float crept in


def test_string_pi_over_2_has_exact_zero_cosine():
    # cos(pi/2) = 0 exactly (common practice); sympy evaluates it to the exact zero.
    assert sp.cos(parse_exact("pi/2")) is sp.S.Zero
    assert sp.sin(parse_exact("-3*pi/4")) == -sp.sqrt(2) / 2


@pytest.mark.parametrize("value, fragment", [
    (True, "boolean"),
    (False, "boolean"),
    (None, "not a number"),
    ([1, 2], "not a number"),
    ({"a": 1}, "not a number"),
    (b"1", "not a number"),
    (1 + 2j, "not a number"),
    (math.nan, "not finite"),
    (math.inf, "not finite"),
    (-math.inf, "not finite"),
])
def test_non_numbers_are_rejected(value, fragment):
    with pytest.raises(NotANumber) as info:
        parse_exact(value)
    assert fragment in str(info.value)


@pytest.mark.parametrize("text", [
    "__import__('os')",
    "__import__('os').system('true')",
    "os.system('true')",
    "abs(1)",
    "sqrt(2)",
    "sin(pi)",
    "2**3",
    "pi**2",
    "e",
    "x",
    "nan",
    "inf",
    "1e400",        # a float literal that overflows to inf
    "1j",
    "'a'",
    "[1]",
    "(1, 2)",
    "1 if 1 else 2",
    "lambda: 1",
    "3 % 2",
    "7 // 2",
    "1 << 2",
    "~1",
    "not 1",
    "1 < 2",
    "pi.real",
    "True",
])
def test_disallowed_expressions_are_rejected(text):
    with pytest.raises(NotANumber) as info:
        parse_exact(text)
    assert quote(text) in str(info.value) or "finite" in str(info.value)


@pytest.mark.parametrize("text, fragment", [
    ("", "empty"),
    ("   ", "empty"),
    ("1 +", "not an arithmetic expression"),
    ("1; 2", "not an arithmetic expression"),
    ("pi/2\n+1", "not an arithmetic expression"),
    ("\x00", "not an arithmetic expression"),
    ("1/0", "divides by zero"),
    ("1/(pi-pi)", "divides by zero"),
])
def test_malformed_strings_are_rejected(text, fragment):
    with pytest.raises(NotANumber, match=fragment):
        parse_exact(text)


def test_a_call_in_a_string_is_never_executed(tmp_path):
    marker = tmp_path / "marker"
    with pytest.raises(NotANumber):
        parse_exact(f"open({str(marker)!r}, 'w')")
    with pytest.raises(NotANumber):
        parse_exact(f"__import__('pathlib').Path({str(marker)!r}).touch()")
    assert not marker.exists()


@pytest.mark.parametrize("text", ["-" * 100_000 + "1", "1+" * 100_000 + "1", "(" * 5000 + "1" + ")" * 5000,
                                  "-" * 3000 + "1"],
                         ids=["100000-minus", "100000-plus", "5000-parentheses", "3000-minus"])
def test_pathologically_deep_expressions_are_rejected_cleanly(text):
    # Must be a NotANumber (a user error), not RecursionError or MemoryError.
    with pytest.raises(NotANumber):
        parse_exact(text)


def test_moderately_long_sums_still_work():
    assert parse_exact("+".join(["pi/12"] * 12)) == sp.pi


# --------------------------------------------------------------------------- snap_radians

def _double_of_k_pi_over_12(k: int) -> float:
    """The correctly rounded double of k*pi/12, from mpmath at 60 digits."""
    with mpmath.workdps(60):
        return float(mpmath.mpf(k) * mpmath.pi / 12)


@pytest.mark.parametrize("k", [k for k in range(-48, 49) if k != 0])
def test_double_renderings_of_multiples_of_pi_over_12_snap(k):
    exact = sp.Rational(k, 12) * sp.pi
    for x in {_double_of_k_pi_over_12(k), k * math.pi / 12, math.radians(15 * k)}:
        assert snap_radians(parse_exact(x)) == exact, x


def test_snap_gives_exact_trigonometry():
    alpha = snap_radians(parse_exact(1.5707963267948966))  # the double of pi/2 as printed by repr
    assert alpha == sp.pi / 2
    assert sp.cos(alpha) is sp.S.Zero


@pytest.mark.parametrize("k", [1, 3, 6, 12, -8])
def test_one_ulp_neighbours_snap(k):
    x = _double_of_k_pi_over_12(k)
    for neighbour in (math.nextafter(x, math.inf), math.nextafter(x, -math.inf)):
        assert snap_radians(parse_exact(neighbour)) == sp.Rational(k, 12) * sp.pi


@pytest.mark.parametrize("x", [
    1.5708,                 # pi/2 to 4 decimals: a rounded value, not the double of pi/2
    3.14159,
    3.1415926535,
    0.5, 1.0, 2.0, 3.0, 0.1,
    1.5707963267948966 + 1e-9,
    1.5707963267948966 - 1e-12,
])
def test_values_that_must_not_snap(x):
    value = parse_exact(x)
    assert snap_radians(value) == value
    assert not snap_radians(value).has(sp.pi)


def test_non_multiples_of_pi_over_12_do_not_snap():
    # pi/5, pi/24, pi/7 are not multiples of pi/12: their doubles stay rational.
    for fraction in (sp.pi / 5, sp.pi / 24, sp.pi / 7, 5 * sp.pi / 24):
        value = parse_exact(float(fraction))
        assert snap_radians(value) == value
        assert snap_radians(value).is_Rational


def test_zero_and_exact_values_are_unchanged():
    assert snap_radians(sp.Integer(0)) == 0
    assert snap_radians(sp.pi / 3) == sp.pi / 3
    assert snap_radians(sp.sqrt(2)) == sp.sqrt(2)
    assert snap_radians(sp.Rational(1, 3)) == sp.Rational(1, 3)


@pytest.mark.parametrize("value", [parse_exact(1e308), parse_exact(-1.7976931348623157e308),
                                   sp.Integer(10) ** 400, -sp.Integer(10) ** 400])
def test_huge_values_are_returned_unchanged_without_error(value):
    assert snap_radians(value) == value
