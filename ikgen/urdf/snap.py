"""Exact values for a converted DH table: round numbers within 1e-12 become exact.

The conversion computes in doubles, so a right angle comes out as 1.5707963267948966 and a zero
as 6e-17. The derivation needs the true structure (cos alpha exactly 0, a length exactly 0), so:

* an angle within ``SNAP_TOLERANCE`` rad of a multiple of pi/12 (15 deg, zero included) becomes
  that exact multiple;
* any other value (angles in radians, lengths in metres) within ``SNAP_TOLERANCE`` (times the
  chain's length scale for lengths) of a decimal with at most ``MAX_DECIMALS`` places becomes
  that exact decimal (0.30000000000000004 -> 3/10);
* anything else is the exact decimal of the double's shortest rendering, as the arm file
  reader reads it (``ikgen.exact.exact_from_float``).

Every value the snap changes is reported as a note, and so is every angle that comes close to a
multiple of 15 deg without being within the tolerance (a URDF that writes 1.5708 for pi/2): the
structure analysis will not see that right angle.
"""

from __future__ import annotations

import math
from decimal import Decimal

import sympy as sp

from ..exact import exact_from_float

SNAP_TOLERANCE = 1e-12
NEAR_MISS = 1e-3            # radians (0.06 deg): closer than this to a multiple of 15 deg, not within the tolerance
MAX_DECIMALS = 9
STEP = math.pi / 12


def exact_decimal(value: float, tolerance: float) -> sp.Expr:
    text = repr(float(value))
    for places in range(MAX_DECIMALS + 1):
        candidate = Decimal(text).quantize(Decimal(1).scaleb(-places))
        if abs(float(candidate) - value) <= tolerance:
            return sp.Rational(str(candidate))
    return exact_from_float(value)


def exact_angle(value: float) -> sp.Expr:
    multiple = round(value / STEP)
    if abs(value - multiple * STEP) <= SNAP_TOLERANCE:
        return sp.Rational(multiple, 12) * sp.pi
    return exact_decimal(value, SNAP_TOLERANCE)


def shown(value: sp.Expr) -> str:
    """An exact value as people and the arm file read it: pi/2, 0.3, 7/3."""
    if value.has(sp.pi) or value.is_Integer:
        return str(value)
    text = repr(float(value))
    return text if sp.Rational(text) == value else str(value)


class Snapper:
    """Makes values exact and keeps a note per place ("joint 2 'elbow'", "base") of what changed."""

    def __init__(self, length_scale: float):
        self.length_tolerance = SNAP_TOLERANCE * length_scale
        self.changes: dict[str, list[str]] = {}
        self.near: list[str] = []

    def angle(self, value: float, where: str, field: str) -> sp.Expr:
        exact = exact_angle(value)
        self.record(value, exact, where, field)
        multiple = round(value / STEP)
        gap = abs(value - multiple * STEP)
        if SNAP_TOLERANCE < gap <= NEAR_MISS:
            target = sp.Rational(multiple, 12) * sp.pi
            self.near.append(f"{where}: {field} = {value!r} rad is {gap:.2g} rad from {target} and was kept as it "
                             f"is (the structure analysis sees no exact multiple of 15 deg there; if {target} "
                             f"is meant, write it in the URDF to full double precision)")
        return exact

    def length(self, value: float, where: str, field: str) -> sp.Expr:
        exact = exact_decimal(value, self.length_tolerance)
        self.record(value, exact, where, field)
        return exact

    def record(self, value: float, exact: sp.Expr, where: str, field: str) -> None:
        if exact != exact_from_float(value):
            self.changes.setdefault(where, []).append(f"{field} = {value!r} read as {shown(exact)}")

    @property
    def notes(self) -> list[str]:
        return [f"{where}: " + "; ".join(items) for where, items in self.changes.items()] + self.near
