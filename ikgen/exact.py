"""Numbers from user text: exact numbers from arm files, strict decimals from words.

Values the user writes are turned into exact sympy numbers so that the symbolic model keeps
structure: ``alpha = 90`` (degrees) becomes ``pi/2`` and its cosine is exactly 0, never 6.1e-17.
A decimal literal is read as the exact decimal it shows (``0.1`` is 1/10). Strings may hold a
small arithmetic expression with ``pi`` (``"pi/2"``, ``"-3*pi/4"``, ``"1/3"``); nothing else is
evaluated, so an arm file can never run code, and every intermediate value of an expression is
bounded in size (``MAX_BITS``) so that none can make exact arithmetic slow.

Words on the command line and fields of path files are read by ``plain_decimal`` and
``plain_whole``: plain decimal numbers only (Python's ``float`` and ``int`` would also take
``3_60`` as 360, and digits of other scripts).
"""

from __future__ import annotations

import ast
import math
import re

import sympy as sp

from .errors import quote

MAX_BITS = 4096   # numerator and denominator of an expression's intermediate values (about 1233 digits)
_DECIMAL = re.compile(r"[+-]?(?:[0-9]+(?:\.[0-9]*)?|\.[0-9]+)(?:[eE][+-]?[0-9]+)?")
_WHOLE = re.compile(r"[+-]?[0-9]+")

_ALLOWED_BINOPS = {ast.Add: lambda a, b: a + b, ast.Sub: lambda a, b: a - b,
                   ast.Mult: lambda a, b: a * b, ast.Div: lambda a, b: a / b}


class NotANumber(ValueError):
    """The value is not a finite number or an allowed expression; the message says why."""


def exact_from_float(value: float) -> sp.Rational:
    """The exact decimal that the shortest repr of ``value`` shows (0.1 -> 1/10)."""
    if not math.isfinite(value):
        raise NotANumber(f"{value!r} is not finite")
    return sp.Rational(repr(float(value)))


def parse_exact(value) -> sp.Expr:
    """An exact sympy number from an int, a float or an expression string.

    Raises NotANumber for anything else (booleans, NaN, infinities, other names or operators).
    """
    if isinstance(value, bool):
        raise NotANumber(f"{str(value).lower()} is a boolean, not a number")
    if isinstance(value, int):
        return sp.Integer(value)
    if isinstance(value, float):
        return exact_from_float(value)
    if isinstance(value, str):
        text = value.strip()
        if not text:
            raise NotANumber("the string is empty")
        try:
            tree = ast.parse(text, mode="eval")
        except (SyntaxError, ValueError):
            raise NotANumber(f"{quote(value)} is not an arithmetic expression") from None
        except (RecursionError, MemoryError):  # pathologically deep nesting such as 100000 minus signs
            raise NotANumber(f"the expression ({len(text)} characters) is nested too deeply") from None
        try:
            return _evaluate(tree.body, value)
        except RecursionError:
            raise NotANumber(f"the expression ({len(text)} characters) is nested too deeply") from None
    if value is None:
        raise NotANumber("null (no value) is not a number")
    raise NotANumber(f"{type(value).__name__} {quote(repr(value))} is not a number")


def _evaluate(node: ast.AST, source: str) -> sp.Expr:
    if isinstance(node, ast.Constant) and isinstance(node.value, (int, float)) and not isinstance(node.value, bool):
        return _bounded(parse_exact(node.value), source)
    if isinstance(node, ast.Name) and node.id == "pi":
        return sp.pi
    if isinstance(node, ast.UnaryOp) and isinstance(node.op, (ast.USub, ast.UAdd)):
        inner = _evaluate(node.operand, source)
        return -inner if isinstance(node.op, ast.USub) else inner
    if isinstance(node, ast.BinOp) and type(node.op) in _ALLOWED_BINOPS:
        left, right = _evaluate(node.left, source), _evaluate(node.right, source)
        if isinstance(node.op, ast.Div) and right == 0:
            raise NotANumber(f"{quote(source)} divides by zero")
        return _bounded(_ALLOWED_BINOPS[type(node.op)](left, right), source)
    raise NotANumber(f"{quote(source)} may only use numbers, pi, + - * / and parentheses")


def _bounded(value: sp.Expr, source: str) -> sp.Expr:
    """``value``, unless one of its exact fractions needs more than MAX_BITS bits: far beyond
    the range and precision of a double, such a value would only make exact arithmetic slow."""
    for number in value.atoms(sp.Rational):
        if max(abs(number.p).bit_length(), number.q.bit_length()) > MAX_BITS:
            raise NotANumber(f"{quote(source)} reaches an exact value of more than 1,200 digits")
    return value


def plain_decimal(text: str) -> float | None:
    """The float of a plain decimal number ("12", "-0.25", "1e-3", ".5"), or None when ``text``
    is something else. Words that Python reads as NaN or infinity ("nan", "inf", "1e400") give
    that value, so the caller can say it is not finite; "3_60", "0x10" and digits of other
    scripts give None."""
    text = text.strip()
    if _DECIMAL.fullmatch(text):
        return float(text)
    try:
        value = float(text)
    except (ValueError, OverflowError):
        return None
    return value if not math.isfinite(value) else None


def plain_whole(text: str) -> int | None:
    """The int of a plain whole number ("12", "-3"; at most 18 digits), or None."""
    text = text.strip()
    if _WHOLE.fullmatch(text) and len(text.lstrip("+-")) <= 18:
        return int(text)
    return None


def snap_radians(value: sp.Expr) -> sp.Expr:
    """Replace a radian value that is a double's rendering of k*pi/12 by the exact multiple.

    A user who writes ``1.5707963267948966`` rad means pi/2; the two differ by less than one unit
    in the last place. Any other value is returned unchanged.
    """
    if value.has(sp.pi) or not value.is_Rational:
        return value
    x = float(value)
    if not math.isfinite(x / (math.pi / 12)):  # too large to be meant as a multiple of pi/12
        return value
    k = round(x / (math.pi / 12))
    if k != 0 and abs(x - k * math.pi / 12) <= 4 * math.ulp(abs(x)):
        return sp.Rational(k, 12) * sp.pi
    return value
