"""Coefficients of the optional atan2 kernel of the generated C (templates/c_atan2.c.j2).

The kernel reduces atan2(y, x) to atan(t) with |t| <= T (see templates/c_atan2.c.j2 for the
reduction) and evaluates atan(t) = t + t * s * P(s), s = t^2, with P a polynomial. This script
finds P by the Remez exchange algorithm (a published method: J.-M. Muller, "Elementary
Functions: Algorithms and Implementation", 3rd ed., Birkhaeuser 2016, chapter 3, "The Remez
algorithm"), minimising the relative error of atan itself, weight w(s) = s / (atan(t) / t), in
mpmath at 200 bits, then rounds P's coefficients to the scalar type (17 / 9 significant digits,
which round-trip binary64 / binary32) and measures the relative error of the rounded polynomial
on a dense grid (mpmath again, exact arithmetic on the rounded coefficients). It also prints the
reduction's constants: the region thresholds and the base angles K + S * atan(c) split into a
high and a low part of the scalar type.

Run:  python3 tools/atan2/remez.py [--check]
  prints the constants as C initialisers for both scalar types; with --check, exits 1 when the
  literals in templates/c_atan2.c.j2 differ from what the script computes now.
"""

from __future__ import annotations

import argparse
import re
import struct
import sys
from pathlib import Path

import mpmath
from mpmath import mp, mpf

ROOT = Path(__file__).resolve().parents[2]
TEMPLATE = ROOT / "templates" / "c_atan2.c.j2"

mp.prec = 200

# Region thresholds on z = lo / hi (lo = min(|x|, |y|), hi = max): region 0 (z < Z1) takes
# t = z; region 1 (Z1 <= z < Z2) t = (lo - hi/2) / (hi + lo/2) around atan(1/2); region 2
# t = (lo - hi) / (hi + lo) around atan(1) = pi/4. Z1 = tan(1/4) makes region 1's angles start
# at 0.25, where the result's ulp doubles (its reduced t then costs at most about 0.8 ulp), and
# lo >= hi / 4 there keeps lo - hi/2 exact (Sterbenz, Muller 3rd ed. section 2.2). Z2 = (sqrt(10)
# - 1) / 3 balances |t| between regions 1 and 2 (3 z^2 + 2 z - 3 = 0) and lo >= hi / 2 keeps
# lo - hi exact.
Z1 = mpmath.tan(mpf(1) / 4)
Z2 = (mpmath.sqrt(10) - 1) / 3
# c of each region: t = (lo - c hi) / (hi + c lo). The float kernel keeps one region (t = lo / hi,
# |t| <= 1) and a longer polynomial: on a single-precision core every table entry and every
# comparison is an instruction, and one division by hi alone needs no guard against c hi
# rounding or hi + c lo overflowing.

# (swap, x negative) -> (K, S): the result before its sign is K + S * atan(lo / hi)
QUADRANTS = ((0, 0, 0, 1), (1, 0, mpmath.pi / 2, -1), (0, 1, mpmath.pi, -1), (1, 1, mpmath.pi / 2, 1))

# target: the largest relative error of the rounded polynomial accepted; t_max fitted slightly
# beyond the largest |t| to allow for rounding
TYPES = {"double": dict(digits=17, target=mpf(2) ** -58, suffix="", centres=(mpf(0), mpf(1) / 2, mpf(1)),
                        t_max=Z1 * (1 + mpf(2) ** -20)),
         "float": dict(digits=9, target=mpf(2) ** -25, suffix="f", centres=(mpf(0),), t_max=mpf(1))}


def to_type(value, kind: str) -> float:
    """``value`` rounded to the nearest binary64 or binary32."""
    as_double = float(mpmath.nstr(value, 40)) if kind == "double" else float(value)
    if kind == "float":
        # round the mpf to binary32 directly (mpf -> double -> float could double-round)
        as_double = float(mpmath.mpf(value))
        single = struct.unpack("f", struct.pack("f", as_double))[0]
        # correct a double rounding: pick the nearer of single and its neighbours
        candidates = [single, next_float(single, -1), next_float(single, 1)]
        return min(candidates, key=lambda c: abs(mpf(c) - value))
    return as_double


def next_float(value: float, direction: int) -> float:
    bits = struct.unpack("<I", struct.pack("<f", value))[0]
    if value == 0:
        return struct.unpack("<f", struct.pack("<I", 1))[0] * direction
    bits += direction if value > 0 else -direction
    return struct.unpack("<f", struct.pack("<I", bits))[0]


def target_function(s):
    """f(s) = (atan(t) - t) / (t s), t = sqrt(s): atan(t) = t + t s f(s) exactly."""
    if s == 0:
        return mpf(-1) / 3
    t = mpmath.sqrt(s)
    return (mpmath.atan(t) - t) / (t * s)


def weight(s):
    """The relative error of atan(t) is w(s) (P(s) - f(s))."""
    if s == 0:
        return mpf(0)
    t = mpmath.sqrt(s)
    return s * t / mpmath.atan(t)


def polynomial(coefficients, s):
    out = mpf(0)
    for c in reversed(coefficients):
        out = out * s + c
    return out


def error(coefficients, s):
    return weight(s) * (polynomial(coefficients, s) - target_function(s))


def extrema(coefficients, a, samples: int = 3000):
    """Local extrema of the error on [0, a]: a dense grid, each refined by golden-section search."""
    grid = [a * mpf(k) / samples for k in range(samples + 1)]
    values = [error(coefficients, s) for s in grid]
    out = []
    for k in range(1, samples):
        if abs(values[k]) >= abs(values[k - 1]) and abs(values[k]) >= abs(values[k + 1]) and values[k] != 0:
            out.append(refine(coefficients, grid[k - 1], grid[k + 1]))
    if abs(values[-1]) >= abs(values[-2]):
        out.append(a)
    return out


def refine(coefficients, low, high, steps: int = 60):
    g = (mpmath.sqrt(5) - 1) / 2
    for _ in range(steps):
        m1 = high - g * (high - low)
        m2 = low + g * (high - low)
        if abs(error(coefficients, m1)) > abs(error(coefficients, m2)):
            high = m2
        else:
            low = m1
    return (low + high) / 2


def alternating(points, coefficients, count: int):
    """``count`` points of alternating error sign with the largest magnitudes (Remez exchange)."""
    groups = []
    for s in sorted(points):
        e = error(coefficients, s)
        if groups and mpmath.sign(e) == mpmath.sign(groups[-1][1]):
            if abs(e) > abs(groups[-1][1]):
                groups[-1] = (s, e)
        else:
            groups.append((s, e))
    while len(groups) > count:      # drop the smaller end
        groups.pop(0 if abs(groups[0][1]) < abs(groups[-1][1]) else -1)
    return [s for s, _ in groups]


def remez(degree: int, a, iterations: int = 30):
    """Coefficients of P (degree ``degree``) minimising max |w (P - f)| on [0, a], and that maximum."""
    n = degree + 2
    reference = [a * (1 - mpmath.cos(mpmath.pi * (k + mpf(1) / 2) / n)) / 2 for k in range(n)]
    reference[-1] = a
    coefficients = None
    for _ in range(iterations):
        matrix = mpmath.matrix(n, n)
        rhs = mpmath.matrix(n, 1)
        for i, s in enumerate(reference):
            for j in range(degree + 1):
                matrix[i, j] = s ** j
            matrix[i, degree + 1] = (-1) ** i / weight(s)
            rhs[i] = target_function(s)
        solution = mpmath.lu_solve(matrix, rhs)
        coefficients = [solution[j] for j in range(degree + 1)]
        level = abs(solution[degree + 1])
        points = extrema(coefficients, a)
        worst = max(abs(error(coefficients, s)) for s in points)
        if worst <= level * (1 + mpf(10) ** -6):
            break
        new = alternating(points, coefficients, n)
        if len(new) < n:
            break
        reference = new
    return coefficients, max(abs(error(coefficients, s)) for s in extrema(coefficients, a))


def rounded_error(coefficients, a, samples: int = 4000):
    """Max relative error of t + t s P(s) against atan(t) on a grid of [0, sqrt(a)], coefficients as given."""
    worst = mpf(0)
    for k in range(1, samples + 1):
        s = a * mpf(k) / samples
        worst = max(worst, abs(error(coefficients, s)))
    return worst


def fit(kind: str):
    """(degree, rounded coefficients, max relative error) of the smallest P meeting the type's target."""
    a = TYPES[kind]["t_max"] ** 2
    for degree in range(1, 14):
        coefficients, level = remez(degree, a)
        if level < TYPES[kind]["target"]:
            rounded = [to_type(c, kind) for c in coefficients]
            return degree, rounded, rounded_error([mpf(c) for c in rounded], a)
    raise SystemExit(f"no polynomial of degree below 14 meets the {kind} target")


def literal(value: float, kind: str) -> str:
    digits = TYPES[kind]["digits"]
    text = f"{value:.{digits}g}"
    if "e" not in text and "." not in text:
        text += ".0"
    return text + TYPES[kind]["suffix"]


def split(value, kind: str) -> tuple[float, float]:
    high = to_type(value, kind)
    return high, to_type(value - mpf(high), kind)


def constants(kind: str) -> dict[str, list[str]]:
    """Every literal of the kernel for one scalar type, by the name the template gives it."""
    degree, coefficients, worst = fit(kind)
    base_high, base_low, signs = [], [], []
    centres = TYPES[kind]["centres"]
    for swap, negative, k, s in QUADRANTS:
        for c in centres:
            high, low = split(k + s * mpmath.atan(c), kind)
            base_high.append(literal(high, kind))
            base_low.append(literal(low, kind))
            signs.append(literal(float(s), kind))
    return {"POLY": [literal(c, kind) for c in coefficients],
            "BASE_HIGH": base_high,
            # the float kernel's low parts are its high parts times one ratio (pi_low / pi_high)
            **({"BASE_LOW": base_low} if len(centres) > 1 else
               {"LOW_RATIO": [literal(to_type(mpmath.pi / 2 / mpf(to_type(mpmath.pi / 2, kind)) - 1, kind), kind)]}),
            # the float kernel folds the sign into its quotient (templates/c_atan2.c.j2)
            **({"SIGN": signs} if len(centres) > 1 else {}),
            **({"CENTRE": [literal(float(c), kind) for c in centres],
                "SPLIT": [literal(to_type(Z1, kind), kind), literal(to_type(Z2, kind), kind)]}
               if len(centres) > 1 else {}),
            "_report": [f"{kind}: degree {degree} in s = t^2 (atan(t) of degree {2 * degree + 3}), "
                        f"|t| <= {mpmath.nstr(TYPES[kind]['t_max'], 8)}, max relative error of the rounded polynomial "
                        f"{mpmath.nstr(worst, 3)} = 2^{mpmath.nstr(mpmath.log(worst, 2), 4)}"]}


def template_literals(text: str, kind: str) -> dict[str, list[str]]:
    """The initialisers of the template's tables for one scalar type (its {% if %} branch)."""
    out = {}
    for name, values in re.findall(rf"/\* {kind} (\w+) \*/ \{{([^}}]*)\}}", text):
        out[name] = [v.strip() for v in values.split(",")]
    return out


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--check", action="store_true", help="compare with templates/c_atan2.c.j2")
    args = parser.parse_args()
    stale = False
    for kind in TYPES:
        table = constants(kind)
        for line in table.pop("_report"):
            print(line)
        found = template_literals(TEMPLATE.read_text(encoding="utf-8"), kind) if args.check else {}
        for name, values in table.items():
            print(f"/* {kind} {name} */ {{ {', '.join(values)} }}")
            if args.check and found.get(name) != values:
                print(f"  differs from the template: {found.get(name)}")
                stale = True
    return 1 if stale else 0


if __name__ == "__main__":
    sys.exit(main())
