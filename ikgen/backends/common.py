"""What every back-end shares: the code plan (the IR lowered to numbered blocks with numbers
substituted and common subexpressions eliminated), the jinja environment, and sanitising of
user text that reaches generated source.

Lowering is language-neutral; each back-end then prints the plan's sympy expressions with its
own printer and renders its own templates. Determinism: CSE runs with canonical ordering and
per-block temporary names, constants are printed from exact values, and nothing depends on time.
"""

from __future__ import annotations

import functools
import importlib.resources
import math
import random
import re
import unicodedata
from dataclasses import dataclass, field
from pathlib import Path

import jinja2
import numpy as np
import sympy as sp

from .. import __version__
from ..ir import (GIVEN_SYMBOL, GUARD_TOLERANCE, SINGULAR_TOLERANCE, AngleSum, CirclePolynomial, Compute, CosSinEquation, Derivation,
                  LinearLength, LinearPair, QuadraticLength, angle_symbol, cos_symbol, sin_symbol)
from ..model import Arm
from ..templatecache import template_cache

GENERATOR = f"ikgen {__version__} (sympy {sp.__version__})"


# ------------------------------------------------------------------------------ printers

class ProductPowers:
    """Printer mix-in: x**2..x**4 as products (faster than pow in every target), x**-1 as a
    division, x**(1/2) as the target's square root and x**(-1/2) as one over it. Set ``sqrt_name`` and ``one``."""

    sqrt_name = "sqrt"
    one = "1.0"

    def _print_Pow(self, expr, rational=False):
        from sympy.printing.precedence import PRECEDENCE
        base, exp = expr.base, expr.exp
        if exp.is_Integer and 2 <= int(exp) <= 4:
            factor = self.parenthesize(base, PRECEDENCE["Mul"] + 1)
            return "*".join([factor] * int(exp))
        if exp == -1:
            return f"{self.one}/" + self.parenthesize(base, PRECEDENCE["Atom"] - 1)
        if exp == sp.Rational(1, 2):
            return f"{self.sqrt_name}({self._print(base)})"
        if exp == sp.Rational(-1, 2):
            return f"{self.one}/{self.sqrt_name}({self._print(base)})"
        return super()._print_Pow(expr, rational)

    def _print_Reciprocal(self, expr):
        from sympy.printing.precedence import PRECEDENCE
        return f"{self.one}/" + self.parenthesize(expr.args[0], PRECEDENCE["Atom"] - 1)


class Reciprocal(sp.Function):
    """1/x computed ahead of the test that decides whether it is read (a pair's determinant hoisted
    out of a loop, see hoist): in C and numpy a zero x gives an infinity that is never read; the
    Python printer guards it (a zero divisor raises there)."""
    nargs = 1


# ------------------------------------------------------------------------------ templates

def template_directory() -> Path:
    """templates/ of the source tree when running from a checkout, else the installed package data."""
    source_tree = Path(__file__).resolve().parents[2] / "templates"
    if (source_tree / "__init__.py").is_file():
        return source_tree
    return Path(str(importlib.resources.files("ikgen.templates")))


def tidy(text: str) -> str:
    """Layout only: no trailing spaces, at most one blank line in a row, one final newline."""
    lines = [line.rstrip() for line in text.splitlines()]
    out = []
    for line in lines:
        if line == "" and out and out[-1] == "":
            continue
        out.append(line)
    return "\n".join(out).strip("\n") + "\n"


@functools.lru_cache(maxsize=None)
def environment() -> jinja2.Environment:
    """The templates' environment, made once per process so that each template is compiled once
    (jinja2 caches compiled templates per environment)."""
    return jinja2.Environment(loader=jinja2.FileSystemLoader(str(template_directory())),
                              undefined=jinja2.StrictUndefined, trim_blocks=True, lstrip_blocks=True,
                              keep_trailing_newline=True, autoescape=False,
                              bytecode_cache=template_cache("code: strict, trim, lstrip, keep newline, no autoescape"))


# ------------------------------------------------------------------------------ sanitising

def identifier(text: str, fallback: str = "arm") -> str:
    """A C/Python identifier from user text: ASCII letters, digits and _; deterministic."""
    ascii_text = unicodedata.normalize("NFKD", text).encode("ascii", "ignore").decode("ascii")
    name = re.sub(r"[^A-Za-z0-9_]", "_", ascii_text)
    name = re.sub(r"_+", "_", name).strip("_").lower()
    if not name:
        name = fallback
    if name[0].isdigit():
        name = f"{fallback}_{name}"   # not "_6...": a leading underscore is reserved at file scope in C
    return name


def comment_text(text: str) -> str:
    """User text made safe inside a comment or docstring of any back-end: one line, printable
    ASCII, no comment terminators, no quotes that could close a docstring, no backslashes."""
    # Letters without an ASCII form are written as U+XXXX so that no name vanishes.
    ascii_text = "".join(c if ord(c) < 128 else (unicodedata.normalize("NFKD", c).encode("ascii", "ignore")
                                                  .decode("ascii") or f"U+{ord(c):04X}")
                         for c in text)
    flat = re.sub(r"[\x00-\x1f\x7f]+", " ", ascii_text)
    flat = flat.replace("*/", "* /").replace("/*", "/ *").replace("\\", "/")
    flat = flat.replace('"""', "'''").replace('"', "'")
    flat = re.sub(r"\s+", " ", flat).strip()
    return flat.lstrip("#").strip()


# ------------------------------------------------------------------------------ the plan

@dataclass
class Assignment:
    target: sp.Symbol
    expr: sp.Expr


def known_sign(det) -> int:
    """+1 or -1 when a determinant's sign is known from its form (a constant, a square, minus a sum
    of squares: its inputs are real), else 0. A scale-free pair then needs no sign test, and the
    test of |det| against a threshold one comparison."""
    det = sp.sympify(det)
    if det.is_number:
        return 1 if det > 0 else (-1 if det < 0 else 0)
    return 1 if det.is_nonnegative else (-1 if det.is_nonpositive else 0)


def form_limit(threshold: float, after: str, real: str) -> float:
    """|det| above which a pair's form is used (FormPlan.limit)."""
    if not after:
        return threshold
    typical = 10.0 ** round(math.log10(threshold / SINGULAR_TOLERANCE))
    return max(threshold, typical * DIRECT_FLOOR[real])


@dataclass
class FormPlan:
    temps: list[Assignment]
    det: sp.Expr
    cos_num: sp.Expr
    sin_num: sp.Expr
    threshold: float
    constant_det: bool
    after: str = ""              # tried only where this sibling pair's unknown was not left free
    det_sign: int = 0            # +1 or -1 when the determinant's sign is known from its form, else 0
    consistent: bool = False     # cos_num^2 + sin_num^2 = det^2 holds in the code's own quantities
    inverse: sp.Symbol | None = None   # 1/det computed before the loop (hoist): c = cos_num * inverse
    root_symbol: sp.Symbol | None = None   # det = -+root_scale * root^2 with root a square root (never
    root_scale: float = 1.0                # negative): |det| > limit tested as root > root_bound

    def root_bound(self, real: str) -> float:
        """The root above which |det| = root_scale * root^2 exceeds limit(real) (mark_root_tests)."""
        return math.sqrt(self.limit(real) / self.root_scale)

    def limit(self, real: str) -> float:
        """|det| above which this form is used. A form that does without its sibling (``after``) is
        used only where it is well conditioned: its cosine and sine come from quantities of the
        order of det, so rounding turns its angle by about eps / |det| relative, and unlike the
        sibling's own fallback (which reads the sibling's angle and so makes up for its error) the
        two angles' errors add in the pose. DIRECT_FLOOR (relative to the determinant's typical
        size) bounds that: below it the fallback is used."""
        return form_limit(self.threshold, self.after, real)

    @property
    def weak(self) -> float:
        """Below this |det| (1e-8 of its typical size) a pair whose (cos, sin) come out inconsistent
        is ill-conditioned rather than unreachable: rounding near a singular pose (the square root
        of a radicand that is 0 up to rounding) made the determinant tiny but not 0, and the unknown
        is treated as free. The double build's figure; weak_for gives each scalar type's."""
        return self.weak_for("double")

    def weak_for(self, real: str) -> float:
        """``weak`` for a scalar type: WEAK_FACTOR[real] times the typical size's 1e-20."""
        return 0.0 if self.constant_det else self.threshold * WEAK_FACTOR[real]


# 1e-8 of a determinant's typical size in double. In float, rounding near a singular pose leaves far
# more: a determinant that is a radicand (det = -root^2, a wrist pair after its joint's root) is that
# radicand's float noise, up to the float reach band (2 * FLOAT_GUARD_TOLERANCE = 6e-6 of the
# radicand's scale, ikgen/backends/c.py), and with 1e-8 such a pair came out inconsistent and its
# branch was dropped: engraver5's float build lost the branch nearest its wrist's fold (joint 5 near
# 0) within 0.04 deg of it (tests/test_c_backend_float.py). 1e-4 keeps a factor of about 15 over
# that band.
WEAK_FACTOR = {"double": 1e12, "float": 1e16}
PI = math.pi                    # the double nearest pi: atan2's results lie in [-PI, PI]


@dataclass
class Block:
    kind: str                    # "compute", "cossin", "pair", "sum", "poly", "lin", "quad"
    depth: int                   # number of enclosing branch loops
    comment: str
    key: str = ""                # the unknown a solving block finds ("3", "p234")
    hint: list = field(default_factory=list)   # (joint, sign): the caller's readings that fill a free unknown
    temps: list[Assignment] = field(default_factory=list)
    # cossin (see specialise_cossin)
    c: sp.Expr | None = None
    norm: sp.Expr | None = None
    radicand: sp.Expr | None = None
    guard: sp.Expr | None = None
    guard_scale: sp.Expr | None = None   # the guard is radicand + 2 * tolerance * guard_scale
    nonnegative: bool = False    # cossin: the radicand as computed can never be negative (a sum of
                                 # squares): no reach guard, its root without a test
    cn: sp.Expr | None = None
    sn: sp.Expr | None = None
    cos_expr: sp.Expr | None = None
    sin_expr: sp.Expr | None = None
    gamma: float | None = None   # cossin with constant a, b: th = gamma + sg * atan2(root, c), one atan2 for both roots
    threshold: float | None = None  # None: a^2+b^2 is a non-zero constant, never singular
    # pair
    forms: list[FormPlan] = field(default_factory=list)
    free_possible: bool = True
    # sum: th<key> = sum(sign * th<term>)
    terms: list = field(default_factory=list)
    bound: int = 1               # |th<key>| <= bound * pi
    # poly: the five coefficients (named or numbers) and the tangency tolerance
    # quad: a, b, c of a l^2 + b l + c (named or numbers)
    coefficients: list = field(default_factory=list)
    tolerance: float = 0.0
    eliminated: str = ""
    mirrored: bool = False       # cossin: the second root is emitted by symmetry, no loop
    antipodal: bool = False      # cossin with c = 0: the second root is the first plus half a turn
    need_cos: bool = True        # a later expression reads c<key>
    need_sin: bool = True        # a later expression reads s<key>
    condition_name: str = ""     # cossin/poly: the branch name its conditioning measure is reported under
    condition_gain: float = 1.0  # cossin: conditioning = root * gain = sqrt(radicand / typical a^2+b^2)
    late_angle: bool = False     # pair, or cossin with one atan2 per root and no free case: no later
                                 # block reads th<key>, so a back-end may defer its atan2 to where the
                                 # solution is written (fewer values live across the call)
    scale_free: bool = False     # pair whose cosine and sine nothing later reads: they are kept as the
                                 # numerators with the determinant's sign (c = +-cos_num, s = +-sin_num),
                                 # which is all atan2 needs: no division, no unit scaling
    prelude: bool = False        # cossin with opposite roots whose inputs are known outside its enclosing
                                 # loop: its first root is computed once there (see hoist_roots)
    preludes: list = field(default_factory=list)   # loop-opening block: the prelude blocks computed
                                                   # just before it (hoist_roots)

    @property
    def joint(self) -> str:      # the unknown's key (kept for templates that name variables by it)
        return self.key

    @property
    def checked(self) -> bool:
        """Whether a pair's (cos, sin) are tested for consistency: not when every form is consistent
        by construction (FormPlan.consistent)."""
        return not (self.forms and all(form.consistent for form in self.forms))

    @property
    def per_form_test(self) -> bool:
        """A pair with consistent and other forms (one that never leaves its angle free: see
        mark_consistent) tests only the (cos, sin) of the forms that are not consistent, where
        they are computed."""
        return self.checked and any(form.consistent for form in self.forms)

    def first_root(self) -> tuple[sp.Expr, sp.Expr]:
        """A cossin block's (cn, sn) for its first root (sg = +1): what a prelude computes once
        (hoist_roots)."""
        first = {sp.Symbol(f"sg{self.key}", real=True): 1}
        return sp.sympify(self.cn).subs(first), sp.sympify(self.sn).subs(first)

    def root_parts(self) -> tuple[list[Assignment], sp.Expr | None, sp.Expr | None]:
        """For a cossin block with constant a and b (gamma): its cosine and sine per root as
        A + B sg, with A and B named before the loop over the roots (they read the radicand's root
        and c, which do not change from root to root): (those assignments, cos, sin)."""
        j = self.key
        sg = sp.Symbol(f"sg{j}", real=True)
        named = {sp.Symbol(f"cn{j}", real=True): self.cn, sp.Symbol(f"sn{j}", real=True): self.sn}
        before, per_root = [], []
        for expr, letter, needed in ((self.cos_expr, "c", self.need_cos), (self.sin_expr, "s", self.need_sin)):
            if not needed:
                per_root.append(None)
                continue
            expr = sp.expand(sp.sympify(expr).xreplace(named))
            parts = []
            for index, part in enumerate((expr.subs(sg, 0), expr.coeff(sg))):
                if not part.is_number:
                    name = sp.Symbol(f"{'pq'[index]}{letter}{j}", real=True)
                    before.append(Assignment(name, part))
                    part = name
                parts.append(part)
            per_root.append(parts[0] + parts[1] * sg)
        return before, per_root[0], per_root[1]


@dataclass
class OutputPlan:
    joint: int
    zero: float                  # radians, reduced into (-pi, pi]; for a prismatic joint d + offset
    factor: float                # reading per radian times direction (per length unit for a slide)
    direction: int
    scale: float                 # radians per reading unit (1 for a slide)
    wraps: int = 1               # conditional +-2pi steps that bring the reading into (-pi, pi]
    prismatic: bool = False
    low: float = 0.0             # a slide's stroke in reading units, widened by 1e-9 of its range:
    high: float = 0.0            # a displacement outside it is no solution (strokes define reach)
    given: bool = False          # the caller's reading (GIVEN_SYMBOL) is returned as it is


@dataclass
class LabelPlan:
    name: str
    positive: str
    negative: str


@dataclass
class MirrorPlan:
    joint: str
    kind: str                    # "negate_sin" or "negate_cos"
    parities: dict               # key -> +1 (same angle) or -1 (angle + pi)
    label_signs: list[int]


@dataclass
class Plan:
    blocks: list[Block]
    final_temps: list[Assignment]
    label_measures: list[sp.Expr]
    labels: list[LabelPlan]
    outputs: list[OutputPlan]
    pose_symbols: tuple
    max_solutions: int
    depth: int                   # depth of the innermost block (where solutions are emitted)
    branch_joints: list[str]
    mirror: MirrorPlan | None = None
    guard_tolerance: float = GUARD_TOLERANCE
    ranges: dict = field(default_factory=dict)   # key -> (low, high, exact): where the DH angle can lie

    @staticmethod
    def wrap_tests(out: "OutputPlan") -> tuple[str, str]:
        """The comparisons of a wrap step, (above, below): u above pi loses a turn, u below -pi
        gains one. A reading is u times the direction, so u goes into (-pi, pi] for a joint that
        counts along the DH angle and into [-pi, pi) for one that counts against it: either way
        the reading lies in (-half turn, half turn]."""
        return (">", "<=") if out.direction > 0 else (">=", "<")

    def wrap_sides(self, out: "OutputPlan", mirrored: bool):
        """Which of the two conditional steps of a one-step wrap a reading needs: (above pi, at or
        below -pi), from where its DH angle can lie (an atan2 result or a free angle is in
        [-PI, PI] with PI the double nearest pi, gamma + sg * delta within half a turn of gamma);
        None when the range is unknown or the reading needs more than one step (both steps then,
        as many times as OutputPlan.wraps says). A side whose range keeps within 1e-9 of the bound
        keeps its step unless the range is exact (an atan2 result read as it is)."""
        key = str(out.joint)
        if out.wraps != 1 or key not in self.ranges:
            return None
        low, high, exact = self.ranges[key]
        if mirrored and self.mirror is not None:
            if key == self.mirror.joint:
                if self.mirror.kind == "negate_sin":
                    low, high = -high, -low
                else:
                    low, high, exact = PI - high, PI - low, False
            elif self.mirror.parities.get(key, 1) < 0:
                low, high, exact = low + PI, high + PI, False
        if out.direction < 0:         # the reading is -u: u is taken into [-pi, pi) (wrap_tests)
            if exact and out.zero == 0.0:
                return high >= PI, low < -PI
            low, high = low - out.zero, high - out.zero
            return high >= PI - 1e-9, low < -PI + 1e-9
        if exact and out.zero == 0.0:
            return high > PI, low <= -PI
        low, high = low - out.zero, high - out.zero
        return high > PI - 1e-9, low <= -PI + 1e-9

    @property
    def branch_sizes(self) -> list[int]:
        """Roots per branch loop, outermost first (2 for a cossin or a quadratic, 4 for a polynomial)."""
        return [4 if b.kind == "poly" else 2 for b in self.blocks
                if b.kind in ("poly", "quad") or (b.kind == "cossin" and not b.mirrored)]

    @property
    def strokes(self) -> list["OutputPlan"]:
        return [o for o in self.outputs if o.prismatic and not o.given]

    @property
    def given(self) -> "OutputPlan | None":
        """The output of the joint whose reading the caller gives, or None."""
        return next((o for o in self.outputs if o.given), None)

    @property
    def has_poly(self) -> bool:
        return any(b.kind == "poly" for b in self.blocks)

    @property
    def mirror_condition(self) -> list[tuple[str, str]]:
        """What must hold to emit the mirrored solution, as (kind, key) terms: ("root", k) a real
        second root; ("not_free", k) no later unknown left free (at a singular wrist the copy would
        move the kept joint)."""
        m = self.mirror
        kept = [b.key for b in self.blocks if b.kind == "pair" and b.free_possible and b.key in m.parities]
        # a kept pair that is free wherever the mirror's root is 0 makes the root test redundant
        covered = any(key in self.root_tested_pairs(m.joint) for key in kept)
        return ([] if covered else [("root", m.joint)]) + [("not_free", key) for key in kept]

    def root_tested_pairs(self, key: str) -> set:
        """The pair blocks (their keys) free wherever root<key> is 0: every form of theirs is used
        only where that root exceeds a positive bound (mark_root_tests), so root == 0 (or NaN)
        leaves them free. Their free flag then implies root<key> == 0's singular term, and their
        not being free the root's being positive."""
        root = sp.Symbol(f"root{key}", real=True)
        return {b.key for b in self.blocks
                if b.kind == "pair" and b.free_possible and b.forms
                and all(f.root_symbol == root and min(f.limit("float"), f.limit("double")) > 0 for f in b.forms)}

    @property
    def singular_terms(self) -> list[tuple[str, str]]:
        """What flags a solution singular, as (kind, key) terms: ("free", k) the unknown was free;
        ("double", k) the branch's radicand was (clamped to) zero; ("double_root", k) the polynomial's
        root was a tangency."""
        terms = []
        for block in self.blocks:
            if block.kind == "cossin":
                if block.threshold is not None:
                    terms.append(("free", block.key))
                if not self.root_tested_pairs(block.key):   # else a pair's free term covers root == 0
                    terms.append(("double", block.key))
            elif block.kind == "pair" and block.free_possible:
                terms.append(("free", block.key))
            elif block.kind == "poly":
                terms += [("free", block.key), ("double_root", block.key)]
            elif block.kind == "lin" and block.free_possible:
                terms.append(("free", block.key))
            elif block.kind == "quad":
                terms.append(("double", block.key))
        return terms

    @property
    def condition_blocks(self) -> list[Block]:
        """The branch blocks, in order: one conditioning measure per branch point."""
        return [b for b in self.blocks if b.kind in ("cossin", "poly", "quad")]

    def early_outputs(self, block: "Block") -> list:
        """The readings converted right after ``block`` rather than where each solution is
        written: an output whose joint this cossin or pair block solves above the innermost
        level (its angle fixed there: no deferred atan2, and a mirrored twin reads the same
        angle) is converted once per root of its own loop, not once per inner root (the reach's
        joint 1 of a six-axis arm: once per reach root, not once per elbow and wrist root)."""
        inner = inner_level(block)
        if block.kind not in ("cossin", "pair") or block.late_angle or inner >= self.depth:
            return []
        return [out for out in self.outputs
                if str(out.joint) == block.key and not out.given and not out.prismatic
                and (self.mirror is None or self.mirrored_angle(out.joint) == f"th{out.joint}")]

    def label_places(self) -> dict[int, int]:
        """Loop-invariant hoisting of the configuration labels: {label index: index of the block
        after which its measure is known}, for each label whose measure is known above the
        innermost level (the reach of a six-axis arm: once per reach root, not once per elbow and
        wrist root); the others are taken where each solution is written. Known after block i:
        the pose, a compute block's or a solving block's temps, a cossin's root, and the cosine,
        sine and angle (length) that a cossin with a loop of its own or a pair fixes in its block
        (not an angle whose atan2 is deferred, not a mirrored root's: the twin reads another). A
        label the mirror flips, or one that reads anything else, stays where it is."""
        if "_label_places" in self.__dict__:
            return self.__dict__["_label_places"]
        known: dict = {symbol: -1 for symbol in self.pose_symbols}
        inner_of: dict[int, int] = {-1: 0}
        for index, block in enumerate(self.blocks):
            inner_of[index] = inner_level(block)
            for assignment in block.temps:
                known[assignment.target] = index
            if block.kind == "cossin" and not block.mirrored:
                known[sp.Symbol(f"root{block.key}", real=True)] = index
            if block.kind == "pair" or (block.kind == "cossin" and not block.mirrored):
                fixed = [] if block.late_angle else [angle_symbol(block.key)]
                fixed += [cos_symbol(block.key)] if block.need_cos else []
                fixed += [sin_symbol(block.key)] if block.need_sin else []
                for symbol in fixed:
                    known[symbol] = index
        places = {}
        for k, measure in enumerate(self.label_measures):
            if self.mirror is not None and self.mirror.label_signs[k] < 0:
                continue
            symbols = sp.sympify(measure).free_symbols
            if not symbols <= known.keys():
                continue
            after = max((known[symbol] for symbol in symbols), default=-1)
            if after >= 0 and inner_of[after] < self.depth:
                places[k] = after
        self.__dict__["_label_places"] = places
        return places

    @property
    def early_joints(self) -> set:
        """The joints of every early output (see early_outputs)."""
        return {out.joint for block in self.blocks for out in self.early_outputs(block)}

    def mirror_shortcut(self, out: "OutputPlan") -> str | None:
        """How a mirrored twin's reading follows from its first solution's reading v, in reading
        units, without converting its angle again: "half_turn" for a joint whose angle the mirror
        turns by half a turn (v - H if v > T else v + H, H the half turn in reading units and T
        half an ulp of it, half_turn_split: the result lies in (-H, H] as every reading does);
        "negate" for the mirror's own joint when its angle is negated and its zero is 0 (-v,
        except v = H, whose negation -H is the same angle and stays H: exactly what converting
        the negated angle gives). None where the reading is converted from the twin's angle (a
        slide, the caller's reading, an angle pi - th, a negated angle with a zero offset)."""
        if self.mirror is None or out.prismatic or out.given:
            return None
        key = str(out.joint)
        if key == self.mirror.joint:
            return "negate" if self.mirror.kind == "negate_sin" and out.zero == 0.0 else None
        return "half_turn" if self.mirror.parities.get(key, 1) < 0 else None

    def constant_label(self, k: int) -> bool:
        """Whether label k's measure is a cossin block's root: a square root, never negative, so the
        first solution always takes the label's first value (and a mirrored twin that flips it the
        second). A NaN root gives no solution: the finite test drops it, or within SAFE_ENTRY none
        arises."""
        measure = self.label_measures[k]
        return any(b.kind == "cossin" and measure == sp.Symbol(f"root{b.key}", real=True) for b in self.blocks)

    def flag_places(self, shared_limits: list[int]) -> "FlagPlaces":
        """Loop-invariant hoisting of a solution's flags and measures (the rule of label_places):
        a singular term right after the block that solves its unknown, a conditioning measure's
        product after its branch block, and the limit test of a joint in ``shared_limits`` (tests a
        mirrored twin shares) after the early conversion of that joint's reading (early_outputs),
        where that block's level is above the innermost; the rest where the solution is written.
        Language-neutral: each back-end prints the terms in its own syntax."""
        def early(index: int) -> bool:
            return index >= 0 and inner_level(self.blocks[index]) < self.depth

        def solver_of(key: str) -> int:
            return next((i for i, b in enumerate(self.blocks)
                         if b.key == key and b.kind in ("cossin", "pair", "poly", "lin", "quad")), -1)
        grouped: dict[int, list[tuple[str, str]]] = {}
        late = []
        for kind, key in self.singular_terms:
            index = solver_of(key)
            (grouped.setdefault(index, []) if early(index) else late).append((kind, key))
        conditions = {}
        for i, block in enumerate(self.condition_blocks):
            index = self.blocks.index(block)
            if block.kind != "poly" and block.condition_gain != 1.0 and early(index):
                conditions[i] = index
        limits = {}
        for joint in shared_limits:
            index = next((i for i, b in enumerate(self.blocks)
                          if any(out.joint == joint for out in self.early_outputs(b))), -1)
            if early(index):
                limits[joint] = index
        return FlagPlaces(sorted(grouped.items()), late, conditions, limits)

    def twin_shares(self, out: "OutputPlan") -> bool:
        """Whether a mirrored twin has its first solution's reading of this output (a slide, the
        caller's reading, an angle the mirror leaves alone), so that the reading and its limit
        test serve both (False without a mirror)."""
        return self.mirror is not None and (out.prismatic or out.given
                                            or self.mirrored_angle(out.joint) == f"th{out.joint}")

    @property
    def twin_readings(self) -> list:
        """The outputs whose readings are set once for a solution and its mirrored twin, before
        either is written (twin_shares; an early output is converted earlier still)."""
        return [out for out in self.outputs if out.joint not in self.early_joints and self.twin_shares(out)]

    def mirrored_angle(self, joint) -> str:
        """The mirrored solution's DH angle of ``joint`` in terms of the first one's (generated names)."""
        m = self.mirror
        key = str(joint)
        if key == m.joint:
            return f"-th{key}" if m.kind == "negate_sin" else f"_PI - th{key}"
        if m.parities.get(key, 1) < 0:
            return f"th{key} + _PI"
        return f"th{key}"


@dataclass
class FlagPlaces:
    """Where a solution's flags and measures are computed (Plan.flag_places): block indices are
    those of Plan.blocks; the statements go after that block, at its inner level."""
    singular_groups: list   # [(block index, [(kind, key) terms])] in block order; each group's flag ORs the previous
    singular_late: list     # [(kind, key)] terms known only where the solution is written
    conditions: dict        # condition index -> block index of its product
    limits: dict            # joint (1-based) -> block index of its limit test


def half_turn(out: OutputPlan, real: str = "double") -> float:
    """Half a turn in reading units as the solver's own arithmetic gives it: the largest reading,
    pi (the wrap's bound) times |factor| rounded in the build's type (180 for degrees)."""
    if real == "float":
        return float(np.float32(np.float32(math.pi) * np.float32(abs(out.factor))))
    return math.pi * abs(out.factor)


def half_turn_split(out: OutputPlan, real: str = "double") -> float:
    """The largest reading v > 0 that a mirrored half turn takes as v + H rather than v - H (see
    Plan.mirror_shortcut): below half an ulp of H, v - H would round to -H, outside (-H, H], while
    v + H rounds to H (the same angle). At exactly half an ulp both round to even: to -H when H's
    significand is even (then v + H, which rounds to H), to -H + ulp when it is odd (then v - H)."""
    if real == "float":
        h = np.float32(half_turn(out, real))
        half = np.spacing(h) / np.float32(2)
        even = int(h.view(np.uint32)) % 2 == 0
        return float(half if even else np.nextafter(half, np.float32(0)))
    h = half_turn(out, real)
    half = math.ulp(h) / 2
    even = int(np.float64(h).view(np.uint64)) % 2 == 0
    return half if even else math.nextafter(half, 0.0)


def condition_gain(norm: sp.Expr, threshold: float) -> float:
    """1/sqrt(scale) with scale = a^2 + b^2 when constant, else its typical size on samples.

    root * gain is then |sin| of the angle to the double root (elbow stretched, wrist axes 4 and 6
    aligned) or, for a norm that varies (wrist centre and axis 1), a distance over the typical one.
    """
    scale = float(norm) if norm.is_number else threshold / SINGULAR_TOLERANCE
    return 1.0 / float(sp.sqrt(sp.Float(scale, 30))) if scale > 0 else 0.0


def numeric(expr: sp.Expr, parameters: dict) -> sp.Expr:
    """Substitute the DH values and turn every non-integer constant into a 17-digit Float."""
    return floats(sp.sympify(expr).xreplace(parameters))


def floats(expr: sp.Expr) -> sp.Expr:
    """Non-integer numeric subtrees (sqrt(145), 1/3, pi) become Floats; exponents stay integers."""
    if expr.is_Integer or expr.is_Float:
        return expr
    if expr.is_number:
        return _float_of(expr)
    if expr.is_Pow:
        return sp.Pow(floats(expr.base), expr.exp, evaluate=False) if expr.exp.is_Integer else \
            expr.func(floats(expr.base), floats(expr.exp))
    if expr.args:
        return expr.func(*[floats(a) for a in expr.args])
    return expr


@functools.lru_cache(maxsize=4096)
def _float_of(number: sp.Expr) -> sp.Float:
    """A numeric subtree as a 17-digit Float (evaluated at 20 digits), once per distinct subtree:
    the same constant (a twist's cosine, its square, a product of them) recurs in many terms."""
    return sp.Float(number.evalf(20), 17)


def eliminate(exprs: list[sp.Expr], prefix: str) -> tuple[list[Assignment], list[sp.Expr]]:
    """Common-subexpression elimination with stable, block-scoped temporary names."""
    replacements, reduced = sp.cse(exprs, symbols=sp.numbered_symbols(prefix, real=True), order="canonical")
    return [Assignment(t, e) for t, e in replacements], list(reduced)


def angle_sum_trig(terms: list[tuple[str, int]]) -> tuple[sp.Expr, sp.Expr]:
    """cos and sin of sum(sign * th_k) in the terms' cosines and sines (angle-sum rules)."""
    cos_value, sin_value = sp.Integer(1), sp.Integer(0)
    for key, sign in terms:
        c, s = cos_symbol(key), sign * sin_symbol(key)
        cos_value, sin_value = cos_value * c - sin_value * s, sin_value * c + cos_value * s
    return sp.expand(cos_value), sp.expand(sin_value)


def lower(derivation: Derivation) -> Plan:
    """The IR as a code plan: numbers substituted, CSE per block, nesting depth per block. Every
    back-end lowers the same derivation, so the plan is made once and kept with it."""
    plan = derivation.__dict__.get("_plan")
    if plan is None:
        plan = derivation.__dict__["_plan"] = lower_now(derivation)
    return plan


def lower_now(derivation: Derivation) -> Plan:
    params = derivation.parameters
    blocks: list[Block] = []
    depth = 0
    branch_joints = []
    mirror = None
    bounds: dict[str, int] = {}
    ranges: dict[str, tuple[float, float, bool]] = {}
    for number, step in enumerate(derivation.steps, 1):
        prefix = f"t{number}_"
        if isinstance(step, Compute):
            temps, reduced = eliminate([numeric(e, params) for e in step.exprs], prefix)
            temps += [Assignment(n, e) for n, e in zip(step.names, reduced)]
            blocks.append(Block("compute", depth, step.purpose, temps=temps))
            continue
        hint = list(derivation.unknowns.get(step.key) or ((int(step.key), 1),))
        if isinstance(step, CosSinEquation):
            exprs = [numeric(e, params) for e in (step.a, step.b, step.c, step.radicand, step.norm)]
            temps, (a, b, c, radicand, norm_value) = eliminate(exprs, prefix)
            constant = norm_value.is_number
            block = Block("cossin", depth, f"th{step.key}: {step.source}", key=step.key, hint=hint,
                          temps=temps, threshold=None if constant else step.singular.threshold,
                          mirrored=step.mirror is not None, condition_name=step.branch.name,
                          condition_gain=condition_gain(norm_value, step.singular.threshold))
            specialise_cossin(block, a, b, c, norm_value, radicand)
            ranges[step.key] = (-PI, PI, True)       # one atan2 a root, or a free angle in one turn
            if block.gamma is not None:
                bounds[step.key] = 2         # gamma + sg * delta lies within two half-turns of 0
                ranges[step.key] = (block.gamma - PI, block.gamma + PI, False)
            blocks.append(block)
            branch_joints.append(step.key)
            if step.mirror is not None:
                mirror = MirrorPlan(step.key, step.mirror.kind, dict(step.mirror.parities),
                                    list(step.mirror.label_signs))
            else:
                depth += 1
        elif isinstance(step, LinearPair):
            forms = []
            for k, form in enumerate(step.forms):
                exprs = [numeric(e, params) for e in (form.det, form.cos_num, form.sin_num)]
                temps, (det, cos_num, sin_num) = eliminate(exprs, f"{prefix}{k}_")
                constant_det = det.is_number and det != 0
                forms.append(FormPlan(temps, det, cos_num, sin_num, form.threshold, constant_det, form.after,
                                      known_sign(numeric(form.det, params))))
                if constant_det and not form.after:
                    break          # a constant determinant never vanishes: later forms are unreachable
            blocks.append(Block("pair", depth, f"th{step.key} from a linear pair", key=step.key, hint=hint,
                                forms=forms, free_possible=not forms[-1].constant_det))
            ranges[step.key] = (-PI, PI, True)
        elif isinstance(step, AngleSum):
            cos_value, sin_value = angle_sum_trig(list(step.terms))
            bound = sum(bounds.get(k, 1) for k, _ in step.terms)
            bounds[step.key] = bound
            if all(k in ranges for k, _ in step.terms):
                ranges[step.key] = (sum(ranges[k][0] if sign > 0 else -ranges[k][1] for k, sign in step.terms),
                                    sum(ranges[k][1] if sign > 0 else -ranges[k][0] for k, sign in step.terms), False)
            blocks.append(Block("sum", depth, f"th{step.key}: {step.purpose}", key=step.key, hint=hint,
                                terms=list(step.terms), cos_expr=cos_value, sin_expr=sin_value, bound=bound))
        elif isinstance(step, CirclePolynomial):
            exprs = [numeric(e, params) for e in step.coefficients]
            temps, reduced = eliminate(exprs, prefix)
            block = Block("poly", depth, f"th{step.key}: the roots of a polynomial in its cosine and sine "
                                         f"(th{step.eliminated} eliminated)", key=step.key, hint=hint, temps=temps,
                          threshold=step.singular.threshold, tolerance=step.tolerance, eliminated=step.eliminated,
                          condition_name=step.branch.name)
            block.coefficients = [e if e.is_number else _named(block, e, f"ek{i}_{step.key}")
                                  for i, e in enumerate(reduced)]
            blocks.append(block)
            branch_joints.append(step.key)
            depth += 1
        elif isinstance(step, LinearLength):
            forms = []
            for k, form in enumerate(step.forms):
                temps, (num, den) = eliminate([numeric(form.num, params), numeric(form.den, params)], f"{prefix}{k}_")
                constant_den = den.is_number and den != 0
                forms.append(FormPlan(temps, den, num, sp.Integer(0), form.threshold, constant_den))
                if constant_den:
                    break
            blocks.append(Block("lin", depth, f"l{step.key}: the displacement from an equation linear in it",
                                key=step.key, hint=hint, forms=forms, free_possible=not forms[-1].constant_det))
        elif isinstance(step, QuadraticLength):
            exprs = [numeric(e, params) for e in (step.a, step.b, step.c, step.radicand)]
            temps, (a, b, c, radicand) = eliminate(exprs, prefix)
            block = Block("quad", depth, f"l{step.key}: {step.source}", key=step.key, hint=hint, temps=temps,
                          condition_name=step.branch.name)
            block.coefficients = [e if e.is_number else _named(block, e, f"e{letter}{step.key}")
                                  for letter, e in zip("abc", (a, b, c))]
            block.radicand = radicand if radicand.is_number else _named(block, radicand, f"er{step.key}")
            scale = block.coefficients[1] ** 2
            block.guard = block.radicand + 2 * GUARD_TOLERANCE * scale
            block.guard_scale = scale
            blocks.append(block)
            branch_joints.append(step.key)
            depth += 1
    label_exprs = [numeric(label.measure, params) for label in derivation.labels]
    final_temps, label_measures = eliminate(label_exprs, "tl_")
    outputs = []
    for out in derivation.outputs:
        if out.given:
            outputs.append(OutputPlan(out.joint, float(out.zero), 1.0, out.direction, float(out.scale), 0,
                                      out.prismatic, given=True))
            continue
        if out.prismatic:
            low, high = derivation.strokes[out.joint]
            outputs.append(OutputPlan(out.joint, float(out.zero), float(out.direction), out.direction, 1.0, 0,
                                      True, low, high))
            continue
        zero = float(out.zero)
        zero = (zero + 3.141592653589793) % 6.283185307179586 - 3.141592653589793
        scale = float(out.scale)
        # |th| <= bound half-turns and |zero| <= one, so |u| <= k half-turns; each conditional
        # +-2 pi step takes (pi, k pi] into (-pi, (k - 2) pi]: k // 2 steps reach (-pi, pi]
        reach = bounds.get(str(out.joint), 1) + (1 if zero != 0.0 else 0)
        wraps = max(1, reach // 2)
        outputs.append(OutputPlan(out.joint, zero, out.direction / scale, out.direction, scale, wraps))
    labels = [LabelPlan(l.name, l.positive, l.negative) for l in derivation.labels]
    plan = Plan(blocks, final_temps, label_measures, labels, outputs, derivation.pose_symbols,
                derivation.max_solutions, depth, branch_joints, mirror, ranges=ranges)
    separate_siblings(plan)
    drop_unused(plan)
    sink_into_fallbacks(plan)
    mark_scale_free(plan)
    mark_consistent(plan)
    propagate_aliases(plan)
    mark_nonnegative_radicands(plan)
    mark_root_tests(plan)
    hoist(plan)
    mark_late_angles(plan)
    hoist_roots(plan)
    return plan


def take_unread(blocks: list, kept: set) -> list[Assignment]:
    """Walks ``blocks`` back to front: an assignment of a compute block stays where ``kept`` (what
    the rest of the code reads, grown by what stays) holds its target, else it is taken out; the
    reads of every other block join ``kept``. Returns what was taken out, latest first."""
    taken: list[Assignment] = []
    for block in reversed(blocks):
        if block.kind != "compute":
            for e in block_exprs(block):
                kept |= sp.sympify(e).free_symbols
            continue
        stay = []
        for assignment in reversed(block.temps):
            if assignment.target in kept:
                stay.append(assignment)
                kept |= sp.sympify(assignment.expr).free_symbols
            else:
                taken.append(assignment)
        block.temps = list(reversed(stay))
    return taken


def sink_into_fallbacks(plan: Plan) -> None:
    """A named intermediate that only a pair's later forms read (they run only where the first
    form's determinant is ~0) moves into those forms: the usual path no longer computes it (for
    the elbow pair of a six-axis arm, three entries of A1^-1 T once per reach root). Each later form
    that needs it computes it itself, after its own inputs, which are all known by then (the pair
    comes after every block that defines them)."""
    def reads_of(exprs) -> set:
        found: set = set()
        for e in exprs:
            found |= sp.sympify(e).free_symbols
        return found
    for index, block in enumerate(plan.blocks):
        if block.kind != "pair" or len(block.forms) < 2:
            continue
        first = block.forms[0]
        kept = reads_of([a.expr for a in plan.final_temps] + list(plan.label_measures))
        kept |= {length_symbol(out.joint) if out.prismatic else angle_symbol(out.joint) for out in plan.outputs
                 if not out.given}
        kept |= reads_of([a.expr for a in block.temps + first.temps] + [first.det, first.cos_num, first.sin_num])
        for position, other in enumerate(plan.blocks):
            if other is not block and (other.kind != "compute" or position > index):
                kept |= reads_of(block_exprs(other))
        sunk = take_unread(plan.blocks[:index], kept)   # latest first
        if not sunk:
            continue
        for form in block.forms[1:]:
            needed = reads_of([a.expr for a in form.temps] + [form.det, form.cos_num, form.sin_num])
            temps = []
            for assignment in sunk:                      # latest first: its inputs come after it here
                if assignment.target in needed:
                    temps.append(assignment)
                    needed |= sp.sympify(assignment.expr).free_symbols
            form.temps = list(reversed(temps)) + form.temps
        plan.blocks = [b for b in plan.blocks if b.kind != "compute" or b.temps]


def separate_siblings(plan: Plan) -> None:
    """Where a pair's first form does without the sibling pair solved just before it (``after``),
    only its later forms (the fallback) read the sibling's cosine and sine: the named intermediates
    of the same loop body that nothing but the fallback reads move into the fallback forms, and
    there the sibling's (cos, sin) are read scaled to unit length (the sibling may keep them as
    numerators, see mark_scale_free). Then nothing on the usual path reads the sibling's cosine
    and sine. A form's guard is dropped when the sibling can never be free."""
    for index, block in enumerate(plan.blocks):
        if block.kind != "pair" or not block.forms or not block.forms[0].after:
            continue
        sibling = block.forms[0].after
        start = next(i for i in range(index - 1, -1, -1) if plan.blocks[i].key == sibling)
        if plan.blocks[start].kind != "pair":
            block.forms[0].after = ""
            continue
        if not plan.blocks[start].free_possible:
            block.forms[0].after = ""          # the sibling is always determined: no guard needed
        kept_reads: set = {angle_symbol(out.joint) for out in plan.outputs}   # what all but the fallback reads
        for e in [a.expr for a in plan.final_temps] + list(plan.label_measures) + \
                [e for other in plan.blocks[index + 1:] for e in block_exprs(other)] + \
                [a.expr for a in block.temps + block.forms[0].temps] + \
                [block.forms[0].det, block.forms[0].cos_num, block.forms[0].sin_num]:
            kept_reads |= sp.sympify(e).free_symbols
        first = start
        while first > 0 and plan.blocks[first - 1].depth == block.depth:
            first -= 1                         # the same loop body: a value read there is the same
        sunk = take_unread(plan.blocks[first:index], kept_reads)
        sunk.reverse()
        cos_k, sin_k = cos_symbol(sibling), sin_symbol(sibling)
        scale = sp.Symbol(f"un{sibling}", real=True)
        unit = {cos_k: sp.Symbol(f"uc{sibling}", real=True), sin_k: sp.Symbol(f"us{sibling}", real=True)}
        head = [Assignment(scale, 1 / sp.sqrt(cos_k ** 2 + sin_k ** 2)),
                Assignment(unit[cos_k], cos_k * scale), Assignment(unit[sin_k], sin_k * scale)]
        for form in block.forms[1:]:
            needed: set = set()
            for e in [a.expr for a in form.temps] + [form.det, form.cos_num, form.sin_num]:
                needed |= sp.sympify(e).free_symbols
            temps = []
            for assignment in reversed(sunk):
                if assignment.target in needed:
                    temps.append(assignment)
                    needed |= sp.sympify(assignment.expr).free_symbols
            temps = [Assignment(a.target, a.expr.xreplace(unit)) for a in reversed(temps)]
            if needed & {cos_k, sin_k}:
                temps = head + temps
            form.temps = temps + [Assignment(a.target, a.expr.xreplace(unit)) for a in form.temps]
            form.det, form.cos_num, form.sin_num = (sp.sympify(e).xreplace(unit)
                                                    for e in (form.det, form.cos_num, form.sin_num))
    plan.blocks = [b for b in plan.blocks if b.kind != "compute" or b.temps]


def mark_consistent(plan: Plan) -> None:
    """A scale-free pair's form whose cos_num^2 + sin_num^2 - det^2 is identically 0 in the code's
    own quantities, with cos_num, sin_num and det single products (no sum that could cancel), is
    consistent whatever the pose: rounding moves the test by a few ulp of det^2, never by 1e-4,
    so the test is left out (FormPlan.consistent). "Identically" is read in two steps. First as
    polynomials: each root's square is its radicand, each unit-norm root's cosine and sine its cn
    and sn, each named radicand its formula, other named quantities taken as they are (the
    wrist's joint 4 once joint 5 is known: (-g s5, h s5) with det -s5^2 and s5^2 = g^2 + h^2).
    Failing that, on the rotations (_holds_on_rotations): whatever unit cosine and sine each
    solved angle has and whatever rotation the pose holds (the wrist's last joint once joint 5 is
    known: g31^2 + g32^2 = g13^2 + g23^2, a row and a column of one rotation). A pose whose
    rotation part is not orthonormal is the caller's mistake (docs/solvers.md). A consistent
    form's numerators then lose a common factor of known positive sign (drop_positive_factor)."""
    trig: dict = {}
    roots: list = []
    program: list = []           # (symbol, expression) in the code's order
    pairs: list = []
    for block in plan.blocks:
        program += [(a.target, a.expr) for a in block.temps]
        if block.kind in ("cossin", "pair", "sum", "poly"):
            pairs.append((cos_symbol(block.key), sin_symbol(block.key)))
        if block.kind == "cossin":
            root = sp.Symbol(f"root{block.key}", real=True)
            named = {a.target: a.expr for a in block.temps}
            roots.append((root, sp.sympify(block.radicand).xreplace(named)))
            program.append((root, sp.sqrt(sp.sympify(block.radicand))))
            if block.norm == 1 and block.gamma is None:
                trig[cos_symbol(block.key)] = block.cn
                trig[sin_symbol(block.key)] = block.sn
                program += [(cos_symbol(block.key), block.cn), (sin_symbol(block.key), block.sn)]
        if block.kind != "pair" or not block.scale_free:
            continue
        for form in block.forms:
            form.consistent = _form_consistent(form, trig, roots, program, pairs, plan.pose_symbols)
        if block.free_possible and block.checked:
            # a pair that may leave its angle free tests whichever form it used (see the templates):
            # partly consistent forms are tested all the same
            for form in block.forms:
                form.consistent = False
        positive = [root for root, _ in roots]          # never negative: a square root ...
        positive += [symbol for symbol, e in trig.items() if e in positive]   # ... or a sine read as one
        for form in block.forms:
            if form.consistent and form.det_sign:
                drop_positive_factor(form, positive)


def _form_consistent(form: FormPlan, trig: dict, roots: list, program: list, pairs: list, pose: tuple) -> bool:
    """Whether cos_num^2 + sin_num^2 = det^2 holds by construction for one form (mark_consistent)."""
    parts = [sp.expand(sp.sympify(e)) for e in (form.cos_num, form.sin_num, form.det)]
    if any(isinstance(e, sp.Add) for e in parts):
        return False
    if not form.temps:
        gap = sp.expand((parts[0] ** 2 + parts[1] ** 2 - parts[2] ** 2).xreplace(trig))
        for root, radicand in roots:
            if gap.has(root):
                gap = sp.expand(sp.rem(sp.Poly(gap, root), sp.Poly(root ** 2 - radicand, root)).as_expr())
        for sign in sorted({s for s in gap.free_symbols if s.name.startswith("sg")}, key=str):
            gap = sp.expand(sp.rem(sp.Poly(gap, sign), sp.Poly(sign ** 2 - 1, sign)).as_expr())
        if gap == 0:
            return True
    program = program + [(a.target, a.expr) for a in form.temps]
    return _holds_on_rotations(parts, program, pairs, pose)


CONSISTENCY_DIGITS = 50          # working precision of _holds_on_rotations
# |c^2 + s^2 - det^2| / (c^2 + s^2 + det^2) below this at every test point: the identity holds as the
# code computes it. A constant the code holds as a double (cos 30 deg as 0.8660254037844386) makes a
# true identity hold only to about 1e-16 relative there, the code's own rounding; 1e-12 leaves room
# for that and stays eight orders of magnitude below the runtime test's 1e-4.
CONSISTENCY_GAP = 1e-12


def _holds_on_rotations(parts: list, program: list, pairs: list, pose: tuple) -> bool:
    """Whether cos_num^2 + sin_num^2 = det^2 (``parts``) holds at every point where each pair in
    ``pairs`` is a unit (cos, sin), the pose's rotation entries form a rotation, the pose's
    position and every other input quantity are anything, and the named quantities are what
    ``program`` (the code's assignments in order, roots included) makes of them. Tested at four
    seeded random points of that set in 50-digit arithmetic: the unit pairs from random angles,
    the rotation from a random unit quaternion (Euler-Rodrigues formula, common practice), branch
    signs +-1 at random; a root of a negative radicand is imaginary there (an identity of the
    algebra holds for either branch and over the complex numbers). An expression that is not 0 on
    that set is far from 0 at a random point but for a set of measure zero (the Schwartz-Zippel
    argument); the fixed seed gives the same answer on every run. A constant held as a double
    that is not exactly the intended number (cos 30 deg) moves the gap by about its rounding,
    which CONSISTENCY_GAP allows; a larger gap fails the test, and the form keeps its test (the
    safe side)."""
    rng = random.Random(20261204)

    def number() -> sp.Float:
        return sp.Float(rng.uniform(-3.0, 3.0), CONSISTENCY_DIGITS)

    for _ in range(4):
        point: dict = {}
        for c, s in pairs:
            angle = sp.Float(rng.uniform(-math.pi, math.pi), CONSISTENCY_DIGITS)
            point[c], point[s] = sp.cos(angle), sp.sin(angle)
        q = [number() for _ in range(4)]
        n = sum(x * x for x in q)
        a, b, c, d = (x / sp.sqrt(n) for x in q)
        rotation = [[a * a + b * b - c * c - d * d, 2 * (b * c - a * d), 2 * (b * d + a * c)],
                    [2 * (b * c + a * d), a * a - b * b + c * c - d * d, 2 * (c * d - a * b)],
                    [2 * (b * d - a * c), 2 * (c * d + a * b), a * a - b * b - c * c + d * d]]
        for row in range(3):
            for column in range(4):
                point[pose[4 * row + column]] = rotation[row][column] if column < 3 else number()

        def value(expr):
            expr = sp.sympify(expr)
            for symbol in sorted(expr.free_symbols - point.keys(), key=str):
                point[symbol] = sp.Integer(rng.choice((-1, 1))) if symbol.name.startswith("sg") else number()
            return sp.N(expr.xreplace(point), CONSISTENCY_DIGITS)

        for target, expr in program:     # a unit-norm root's cosine and sine replace the random pair
            point[target] = value(expr)
        c, s, det = (value(e) for e in parts)
        scale = abs(c) ** 2 + abs(s) ** 2 + abs(det) ** 2
        if not scale > 0 or not abs(c * c + s * s - det * det) <= CONSISTENCY_GAP * scale:
            return False
    return True


def drop_positive_factor(form: FormPlan, positive: list) -> None:
    """A consistent scale-free form needs only the direction of (cos_num, sin_num): a common factor
    of the two that is a product of roots (never negative) each dividing det (so not 0 where the
    form's |det| test passes) is left out of both, which keeps their direction. The wrist's
    joints 4 and 6 once joint 5 is known: (-g s5, h s5) becomes (-g, h) (s5 is root5 there).
    ``positive``: the symbols known never to be negative."""
    cos_num, sin_num = sp.sympify(form.cos_num), sp.sympify(form.sin_num)
    det = sp.expand(sp.sympify(form.det))
    factor = sp.Integer(1)
    for root in positive:
        while True:
            c, s = sp.cancel(cos_num / root), sp.cancel(sin_num / root)
            d = sp.cancel(det / (factor * root))
            if not all(sp.fraction(e)[1] == 1 for e in (c, s, d)):
                break
            cos_num, sin_num, factor = c, s, factor * root
    form.cos_num, form.sin_num = sp.expand(cos_num), sp.expand(sin_num)


def mark_nonnegative_radicands(plan: Plan) -> None:
    """A cossin block whose radicand, as the code computes it, is a sum of products of squares and
    positive numbers (sympy's sign rules on its printed expression: the wrist's g^2 + h^2) can
    never be negative in floating point either (a square rounds to a number >= 0, and sums and
    products of such stay >= 0): its reach guard can never fail and its root needs no test
    (a NaN input still gives a NaN root, which the finite-solution guard drops)."""
    for block in plan.blocks:
        if block.kind != "cossin" or block.threshold is not None:
            continue
        radicand = sp.sympify(block.radicand)
        named = {a.target: a.expr for a in block.temps}
        expr = named.get(radicand, radicand)
        block.nonnegative = expr.free_symbols.isdisjoint(named) and sp.sympify(expr).is_nonnegative is True


def mark_root_tests(plan: Plan) -> None:
    """A consistent form's determinant that is a constant times the square of a root (the wrist's
    -root5^2, or root5^2 itself) is tested through the root: |det| > limit is
    root > sqrt(limit / |constant|), one comparison and no product; nothing else reads such a
    form's determinant (no consistency test follows it). Every back-end prints the same test."""
    for block in plan.blocks:
        for form in block.forms:
            det = sp.sympify(form.det)
            if not form.consistent or not isinstance(det, (sp.Mul, sp.Pow)):
                continue
            # root^2 alone has scale 1
            scale, rest = det.as_coeff_Mul() if isinstance(det, sp.Mul) else (sp.Integer(1), det)
            if (isinstance(rest, sp.Pow) and rest.exp == 2 and isinstance(rest.base, sp.Symbol)
                    and rest.base.name.startswith("root") and scale.is_number and scale != 0):
                form.root_symbol, form.root_scale = rest.base, float(abs(scale))


def mark_scale_free(plan: Plan) -> None:
    """A pair block whose cosine and sine no later step reads (but for a fallback that scales them
    to unit length itself, see separate_siblings) only needs their direction: see
    Block.scale_free."""
    tail = [a.expr for a in plan.final_temps] + list(plan.label_measures)
    for index, block in enumerate(plan.blocks):
        if block.kind != "pair":
            continue
        own = {cos_symbol(block.key), sin_symbol(block.key)}
        scaling = {sp.Symbol(f"{prefix}{block.key}", real=True) for prefix in ("un", "uc", "us")}
        exprs = list(tail)
        for later in plan.blocks[index + 1:]:
            exprs += [a.expr for a in later.temps]
            exprs += [e for e in (later.norm, later.radicand, later.cn, later.sn) if e is not None]
            exprs += list(later.coefficients)
            if later.kind == "sum":
                exprs += [later.cos_expr, later.sin_expr]
            for form in later.forms:
                exprs += [a.expr for a in form.temps if a.target not in scaling]
                exprs += [form.det, form.cos_num, form.sin_num]
        block.scale_free = not any(own & sp.sympify(e).free_symbols for e in exprs)


def mark_late_angles(plan: Plan) -> None:
    """A pair block (or a cossin block whose roots are one atan2 each, never free) whose angle no
    later block, label or conditioning measure reads gets ``late_angle``: only the written solution
    needs it, so its atan2 can wait until then (the cosine and sine that later steps read are
    computed where they were)."""
    read: set = set()
    for e in [a.expr for a in plan.final_temps] + list(plan.label_measures):
        read |= sp.sympify(e).free_symbols
    for block in reversed(plan.blocks):
        if block.kind == "pair" or (block.kind == "cossin" and block.gamma is None and not block.antipodal
                                    and block.threshold is None):
            block.late_angle = angle_symbol(block.key) not in read
        for e in block_exprs(block):
            read |= sp.sympify(e).free_symbols


def hoist_roots(plan: Plan) -> None:
    """Loop-invariant hoisting of a whole root computation: a cossin block with opposite roots
    (c = 0: one atan2 serves both) that sits inside a loop although its inputs are known outside
    it (a shoulder's roots inside the elbow's loop, where the engine solved the elbow first) gets
    its guard, root, atan2, cosine and sine computed once, just before the outermost loop whose
    unknown it does not read (``prelude``; that loop-opening block lists it in ``preludes``). Its
    own loop stays where it is and picks the first root or its opposite, so the solutions keep
    their order. Only inputs named by compute blocks (whose level is their depth after hoist) or
    the pose count as known outside; a block with temps of its own stays as it is."""
    level: dict = {symbol: 0 for symbol in plan.pose_symbols}
    for index, block in enumerate(plan.blocks):
        if block.kind == "compute":
            for assignment in block.temps:
                level[assignment.target] = block.depth
            continue
        if not (block.kind == "cossin" and block.antipodal and not block.mirrored and block.depth > 0
                and not block.temps and block.late_angle is False):
            continue
        own = {sp.Symbol(f"{name}{block.key}", real=True) for name in ("sg", "root", "cn", "sn")}
        inputs: set = set()
        for expr in (block.c, block.norm, block.radicand, block.guard, block.cn, block.sn, block.cos_expr,
                     block.sin_expr):
            if expr is not None:
                inputs |= sp.sympify(expr).free_symbols - own
        if not all(symbol in level for symbol in inputs):
            continue
        known = max((level[symbol] for symbol in inputs), default=0)
        if known >= block.depth:
            continue
        anchor = next((b for b in reversed(plan.blocks[:index]) if b.depth == known and opens_loop(b)), None)
        if anchor is None:
            continue
        block.prelude = True
        anchor.preludes.append(block)


def balanced_sum(terms: list[str]) -> str:
    """``terms`` added as a balanced tree: the compiler keeps the parentheses (floating-point
    addition is not associative), so the chain of dependent additions is log2(n) long, not n."""
    def tree(part: list[str]) -> str:
        if len(part) == 1:
            return part[0]
        half = (len(part) + 1) // 2
        return f"({tree(part[:half])} + {tree(part[half:])})"
    text = tree(terms)
    return text[1:-1] if len(terms) > 1 else text


def propagate_aliases(plan: Plan) -> None:
    """Copy propagation: an intermediate that only renames another symbol or negates it (``rc11 =
    r11``, ``g26_31 = g16_31``, ``g36_21 = -g16_31``) is not assigned; every later expression
    reads the original (a negation costs nothing where it is read). The same for the cosine and
    sine of a unit-norm root that are a name each (a wrist's middle joint: c5 = g36_33, s5 = root5)."""
    aliases: dict = {}

    def swap(expr):
        return expr.xreplace(aliases) if aliases and isinstance(expr, sp.Basic) else expr

    def plain(expr):
        return isinstance(expr, sp.Symbol) or (isinstance(-expr, sp.Symbol) and expr.could_extract_minus_sign())

    def keep(assignments):
        kept = []
        for assignment in assignments:
            expr = swap(assignment.expr)
            if isinstance(expr, sp.Symbol) or (isinstance(-expr, sp.Symbol) and expr.could_extract_minus_sign()):
                aliases[assignment.target] = expr     # a name or its negation: read in place
            else:
                kept.append(Assignment(assignment.target, expr))
        return kept
    for block in plan.blocks:
        block.temps = keep(block.temps)
        for name in ("c", "norm", "radicand", "guard", "guard_scale", "cn", "sn", "cos_expr", "sin_expr"):
            if getattr(block, name, None) is not None:
                setattr(block, name, swap(getattr(block, name)))
        block.coefficients = [swap(e) for e in block.coefficients]
        if block.kind == "cossin" and block.norm == 1 and block.gamma is None and block.threshold is None \
                and not block.antipodal and all(plain(e) for e in (block.cn, block.sn)):
            # a root whose cosine and sine are a name each (or a negated one): read them in place
            aliases[cos_symbol(block.key)], aliases[sin_symbol(block.key)] = block.cn, block.sn
            block.need_cos = block.need_sin = False
        for form in block.forms:
            form.temps = keep(form.temps)
            form.det, form.cos_num, form.sin_num = swap(form.det), swap(form.cos_num), swap(form.sin_num)
    plan.final_temps = keep(plan.final_temps)
    plan.label_measures = [swap(e) for e in plan.label_measures]
    plan.blocks = [b for b in plan.blocks if b.kind != "compute" or b.temps]


def opens_loop(block: Block) -> bool:
    """Whether the block is a branch point whose roots are looped over (its unknown is known only
    one level deeper)."""
    return block.kind in ("poly", "quad") or (block.kind == "cossin" and not block.mirrored)


def inner_level(block: Block) -> int:
    """The loop level at which the block's unknown is known: its depth, one deeper for a block
    whose roots are looped over (opens_loop)."""
    return block.depth + (1 if opens_loop(block) else 0)


def hoist(plan: Plan) -> None:
    """Loop-invariant hoisting: every named intermediate is computed at the outermost branch
    level where all its inputs are known (an intermediate that depends only on joint 1 is not
    recomputed for each elbow root). Levels: pose symbols and constants 0; a block's temps its
    depth; a loop-opening block's unknown one deeper. Compute blocks, the temps of every solving
    block and those of a linear pair's first form (always evaluated; later forms run only where the
    first is singular, so theirs stay), and that form's determinant (named dq<key> when it moves)
    are candidates; only polynomial expressions move (no division, root or function that could fail
    on a branch that was never taken). A hoisted assignment moves into a compute block placed just
    before the loop that level opens, in its original order."""
    level: dict = {symbol: 0 for symbol in plan.pose_symbols}
    level[GIVEN_SYMBOL] = 0
    moved: dict[int, list[tuple[str, Assignment]]] = {}

    def level_of(expr, depth: int) -> int:
        """The deepest level among the inputs; a symbol defined nowhere the plan tracks (a root, a
        branch sign) pins the expression where it is."""
        found = 0
        for symbol in sp.sympify(expr).free_symbols:
            if symbol not in level:
                return depth
            found = max(found, level[symbol])
        return found

    def polynomial(expr) -> bool:
        return not any(isinstance(node, sp.Function) or
                       (isinstance(node, sp.Pow) and not (node.exp.is_Integer and node.exp > 0))
                       for node in sp.preorder_traversal(expr))

    def stays(assignment: Assignment, depth: int, comment: str) -> bool:
        target = level_of(assignment.expr, depth)
        if target < depth and polynomial(assignment.expr):
            moved.setdefault(target, []).append((comment, assignment))
            level[assignment.target] = target
            return False
        level[assignment.target] = depth
        return True
    for block in plan.blocks:
        block.temps = [a for a in block.temps if stays(a, block.depth, block.comment)]
        if block.kind == "compute":
            continue
        for index, form in enumerate(block.forms):
            if index:
                for assignment in form.temps:
                    level[assignment.target] = block.depth
                continue
            if block.kind == "pair":
                collect_invariants(block, form, level)
            form.temps = [a for a in form.temps if stays(a, block.depth, block.comment)]
            if not sp.sympify(form.det).is_number:
                named = Assignment(sp.Symbol(f"dq{block.key}", real=True), form.det)
                if not stays(named, block.depth, block.comment):
                    form.det = named.target
                    if block.kind == "pair" and not block.scale_free:
                        # one division before the loop instead of two a root in it
                        inverse = Assignment(sp.Symbol(f"iq{block.key}", real=True), Reciprocal(named.target))
                        moved[level[named.target]].append((block.comment, inverse))
                        level[inverse.target] = level[named.target]
                        form.inverse = inverse.target
        if block.key:
            inner = inner_level(block)
            for symbol in (angle_symbol(block.key), cos_symbol(block.key), sin_symbol(block.key),
                           length_symbol(block.key)):
                level[symbol] = inner
    if not moved:
        return
    blocks = []
    for block in plan.blocks:
        if opens_loop(block) and block.depth in moved:
            comments = list(dict.fromkeys(comment for comment, _ in moved[block.depth]))
            blocks.append(Block("compute", block.depth, "; ".join(comments) + " (computed here, "
                                "before the loops: no later unknown enters them)", temps=[a for _, a in moved.pop(block.depth)]))
        if block.kind != "compute" or block.temps:
            blocks.append(block)
    assert not moved, "a hoisted intermediate found no loop to move before"
    plan.blocks = blocks


def collect_invariants(block: Block, form: FormPlan, level: dict) -> None:
    """A pair's numerators as polynomials in the quantities of its own loop level, with coefficients
    made of outer ones (named kc/ks<key>_<i>, so hoist moves them before the loop): for an elbow
    loop, cos_num = k0 c3 + k1 s3 + k2 costs two products a root instead of a dozen. Only where some
    coefficient is not a plain number and the numerators are polynomials."""
    local = {a.target: a.expr for a in form.temps}

    def expanded(expr):
        expr = sp.sympify(expr)
        while local and expr.free_symbols & local.keys():
            expr = expr.xreplace(local)
        return expr
    parts = [expanded(form.cos_num), expanded(form.sin_num)]
    inner = sorted({symbol for e in parts for symbol in e.free_symbols if level.get(symbol, block.depth) >= block.depth},
                   key=str)
    outer = {symbol for e in parts for symbol in e.free_symbols} - set(inner)
    if not inner or not outer or any(isinstance(node, sp.Function) or (isinstance(node, sp.Pow) and not
                                     (node.exp.is_Integer and node.exp > 0)) for e in parts for node in sp.preorder_traversal(e)):
        return
    names: dict = {}                  # coefficient -> its name (a negated one reads the name negated)
    temps: list[Assignment] = []

    def coefficient(expr, letter):
        expr = sp.expand(expr)
        if expr.is_number or isinstance(expr, sp.Symbol) or isinstance(-expr, sp.Symbol):
            return expr                   # nothing to compute ahead
        if expr in names:
            return names[expr]
        if -expr in names:
            return -names[-expr]
        name = sp.Symbol(f"k{letter}{block.key}_{len(temps)}", real=True)
        names[expr] = name
        temps.append(Assignment(name, expr))
        return name
    collected = []
    for e, letter in zip(parts, "cs"):
        poly = sp.Poly(sp.expand(e), *inner)
        collected.append(sp.Add(*[coefficient(c, letter) * sp.Mul(*[v ** p for v, p in zip(inner, m)])
                                  for m, c in poly.terms()]))
    if not temps:
        return
    form.cos_num, form.sin_num = collected
    needed = set(sp.sympify(form.det).free_symbols)      # the local temps the determinant still reads
    for assignment in reversed(form.temps):
        if assignment.target in needed:
            needed |= assignment.expr.free_symbols
    form.temps = [a for a in form.temps if a.target in needed] + temps


def _named(block: Block, expr, name: str) -> sp.Symbol:
    symbol = sp.Symbol(name, real=True)
    block.temps.append(Assignment(symbol, expr))
    return symbol


def specialise_cossin(block: Block, a, b, c, norm, radicand) -> None:
    """Fill a cossin block with the expressions its code needs, simplified for these a, b, c.

    Coefficients that are numbers are inlined (so a zero b drops its terms and a unit norm its
    division); others become named variables ea<k>, eb<k>, ec<k>, en<k>. The roots are
    cn = a c - sg b root, sn = b c + sg a root, with cos = cn / norm and sin = sn / norm.
    """
    j = block.key

    def named(expr, name):
        if expr.is_number:
            return expr
        return _named(block, expr, name)

    a, b, c = named(a, f"ea{j}"), named(b, f"eb{j}"), named(c, f"ec{j}")
    block.norm = named(norm, f"en{j}")
    block.radicand = block.norm if sp.expand(radicand - norm) == 0 else named(radicand, f"er{j}")
    block.c = c
    sg, root = sp.Symbol(f"sg{j}", real=True), sp.Symbol(f"root{j}", real=True)
    block.guard = block.radicand + 2 * GUARD_TOLERANCE * block.norm      # < 0: out of reach
    block.guard_scale = block.norm
    block.cn = a * c - sg * b * root
    block.sn = b * c + sg * a * root
    if block.mirrored:               # only the first root is computed (sg = 1); the mirror gives the other
        block.cn, block.sn = block.cn.subs(sg, 1), block.sn.subs(sg, 1)
    cn, sn = sp.Symbol(f"cn{j}", real=True), sp.Symbol(f"sn{j}", real=True)
    if a.is_number and b.is_number and not block.mirrored:
        # a = n cos(gamma), b = n sin(gamma): a cos th + b sin th = n cos(th - gamma) = c, so
        # th = gamma + sg * atan2(root, c): the two roots share one atan2 call
        block.gamma = float(sp.atan2(b, a).evalf(30))
    elif c.is_number and c == 0 and not block.mirrored:
        # c = 0: (cn, sn) of the second root are those of the first negated (one atan2 for both)
        block.antipodal = True
    if c.is_number and c == 0 and block.radicand == block.norm and block.norm != 1:
        # c = 0 and root = sqrt(norm) > 0 (where not free): (cn, sn) = root (-sg b, sg a), and atan2
        # needs only their direction, so the root factor goes (atan2 waits for no square root, and
        # no product by it); cos and sin are then (cn, sn) / root, a division instead of one by norm
        block.cn, block.sn = (sp.expand(e / root) for e in (block.cn, block.sn))
        block.cos_expr, block.sin_expr = cn / root, sn / root
        return
    block.cos_expr = cn / block.norm if block.norm != 1 else cn
    block.sin_expr = sn / block.norm if block.norm != 1 else sn
    if block.norm.is_number and block.norm != 1:
        inverse = sp.Float(1 / sp.Float(block.norm, 30), 17)
        block.cos_expr, block.sin_expr = cn * inverse, sn * inverse


def length_symbol(joint) -> sp.Symbol:
    return sp.Symbol(f"l{joint}", real=True)


def block_exprs(block: Block) -> list[sp.Expr]:
    exprs = [a.expr for a in block.temps]
    exprs += [e for e in (block.norm, block.radicand, block.cn, block.sn) if e is not None]
    if block.kind == "sum":
        exprs += [e for e, needed in ((block.cos_expr, block.need_cos), (block.sin_expr, block.need_sin)) if needed]
        exprs += [angle_symbol(k) for k, _ in block.terms]
    if block.kind == "poly":
        exprs += [e for e in block.coefficients]
    for form in block.forms:
        exprs += [a.expr for a in form.temps] + [form.det, form.cos_num, form.sin_num]
    return exprs


def drop_unused(plan: Plan) -> None:
    """Dead-code elimination, from the end back: an assignment nobody reads is dropped, an empty
    compute block disappears, and a solving block computes its cosine and sine only if read."""
    live: set = set()
    for e in [a.expr for a in plan.final_temps] + list(plan.label_measures):
        live |= sp.sympify(e).free_symbols
    live |= {length_symbol(out.joint) if out.prismatic else angle_symbol(out.joint) for out in plan.outputs
             if not out.given}
    kept = []
    for block in reversed(plan.blocks):
        if block.kind == "compute":
            temps = []
            for assignment in reversed(block.temps):
                if assignment.target in live:
                    temps.append(assignment)
                    live |= sp.sympify(assignment.expr).free_symbols
            block.temps = list(reversed(temps))
            if block.temps:
                kept.append(block)
            continue
        if block.kind in ("cossin", "sum", "poly", "pair"):
            block.need_cos = cos_symbol(block.key) in live
            block.need_sin = sin_symbol(block.key) in live
        if block.kind == "quad":
            exprs = [a.expr for a in block.temps] + [e for e in block.coefficients] + [block.radicand]
            for e in exprs:
                live |= sp.sympify(e).free_symbols
            kept.append(block)
            continue
        if block.kind == "sum" and not (block.need_cos or block.need_sin or angle_symbol(block.key) in live):
            continue
        for e in block_exprs(block):
            live |= sp.sympify(e).free_symbols
        kept.append(block)
    plan.blocks = list(reversed(kept))


@dataclass
class TurnPlan:
    """How readings of one joint wrap: a turn in reading units (0 for prismatic joints), the
    limits widened by a tolerance (1e-9 of the range) and whether the range exceeds a turn."""
    turn: float
    low: float
    high: float
    multi: bool
    count: int                   # at most this many equivalent readings within the limits


def limit_checked(turns: list[TurnPlan]) -> list[int]:
    """Joints (0-based) whose limits a solution with revolute readings in one turn can break: those
    whose limits do not hold the whole turn."""
    return [k for k, t in enumerate(turns) if not (t.turn and t.low <= -t.turn / 2 and t.high >= t.turn / 2)]


def joint_turns(arm: Arm) -> list[TurnPlan]:
    out = []
    for joint, (low, high) in zip(arm.joints, arm.limits_in_readings()):
        turn = (360.0 if arm.angle_unit == "deg" else 2 * math.pi) if joint.revolute else 0.0
        if joint.index == arm.given_joint:
            turn = 0.0           # the caller's reading is kept as given: only its limits are checked
        eps = 1e-9 * max(1.0, high - low)
        # a range of exactly one turn (-180..180) is single-turn: its two ends are one position
        multi = bool(turn) and high - low > turn * (1 + 1e-9)
        low, high = float(low - eps), float(high + eps)
        count = int((high - low) // turn) + 1 if multi else 1
        out.append(TurnPlan(turn, low, high, multi, count))
    return out


@dataclass
class GivenPlan:
    """The joint whose reading the caller gives: its number, name, reading unit and the choice
    helpers' default scan step (1 degree, or a hundredth of a slide's stroke)."""
    joint: int
    name: str
    unit: str
    step: float
    low: float
    high: float


def given_plan(arm: Arm) -> GivenPlan | None:
    if arm.given_joint is None:
        return None
    joint = arm.joints[arm.given_joint - 1]
    low, high = (float(v) for v in arm.limits_in_readings()[joint.index - 1])
    if joint.revolute:
        step = 1.0 if arm.angle_unit == "deg" else math.pi / 180
    else:
        step = (high - low) / 100
    return GivenPlan(joint.index, comment_text(joint.name), arm.reading_unit(joint), step, low, high)


def max_solutions(arm: Arm, plan: Plan) -> int:
    """Closed-form solutions times the equivalent readings of every multi-turn joint."""
    total = plan.max_solutions
    for turn in joint_turns(arm):
        total *= turn.count
    return total


def joint_zero(arm: Arm) -> list[float]:
    """Per joint, the DH variable at reading 0: theta + offset (radians) or d + offset (length)."""
    return [float(j.theta + j.offset) if j.revolute else float(j.d + j.offset) for j in arm.joints]


def joint_gain(arm: Arm) -> list[float]:
    """Per joint, the change of the DH variable per reading unit: direction times the unit's size."""
    return [j.direction * (arm.angle_scale if j.revolute else 1.0) for j in arm.joints]


def joint_turn(arm: Arm) -> list[float]:
    """Per joint, one full turn in reading units (360.0 for degrees, 2 pi for radians) for a
    revolute joint, 0.0 for a prismatic one. A joint a pose leaves free keeps the caller's reading
    reduced to less than a turn (fmod, exact in every back-end), so that the readings the solver
    returns are within the turns its wrap steps assume."""
    turn = float(2 * sp.pi / arm.exact_angle_scale)
    return [turn if j.revolute else 0.0 for j in arm.joints]


def symbol_names(joint: int) -> tuple[str, str, str]:
    return str(cos_symbol(joint)), str(sin_symbol(joint)), str(angle_symbol(joint))


def header_lines(arm: Arm, derivation: Derivation) -> list[str]:
    """Facts every generated file states at its top (sanitised, no dates)."""
    units = f"lengths in {arm.length_unit}, joint angles in {arm.angle_unit}"
    convention = {"standard": "standard (distal) DH", "modified": "modified (proximal) DH"}[arm.convention]
    lines = [f"Arm: {comment_text(arm.name)}"]
    if arm.description:
        lines.append(f"Description: {comment_text(arm.description)}")
    lines += [f"Convention: {convention}; {units}",
              f"Structure: {derivation.family}; at most {derivation.max_solutions} solutions",
              f"Target: {target_plan(arm, derivation).words}",
              "Joints: " + ", ".join(f"{j.index} {comment_text(j.name)}" for j in arm.joints),
              f"Generated by {GENERATOR} from an arm file with sha256 {arm.digest[:16]}",
              "Pose input: the tool frame in the world frame, a 4x4 row-major homogeneous matrix "
              f"(position in {arm.length_unit}); rotation must be orthonormal."]
    return lines


# ------------------------------------------------------------------------------ the target's inputs

TILT_TOLERANCE = {"double": 1e-6, "float": 1e-4}     # rad: a pose turned off the target's axis by more
ROLL_TOLERANCE = {"double": 1e-6, "float": 1e-4}     # rad (chord): a pose whose roll the arm cannot take
# ... widened near a singular set to ROLL_TOLERANCE + ROLL_GAIN / max(m, ROLL_FLOOR), m the solution's
# smallest conditioning measure: there the pose's point and direction fix the joints, hence the
# arm's own roll, only to about (rounding) / m (to sqrt(rounding) on the set, where m reads 0 up to
# ROLL_FLOOR), so a fixed tolerance called realisable poses not_realisable (at an elbow folded to
# 1e-17 the true solution's roll came out 1.1e-6 to 1.6e-5 off; the random-arm sweep's five-joint
# arms reach roll gap x max(m, 1e-8) = 1.6e-13 at worst, 6 times below the double gain). The float
# build keeps the fixed tolerance (gain 0) until its own gaps are measured: its known roll losses
# (tests/test_c_backend_float.py) come at measures of 0.05 to 0.6, which no 1/m law explains.
ROLL_GAIN = {"double": 1e-12, "float": 0.0}
ROLL_FLOOR = {"double": 1e-8, "float": 1e-4}
UNIT_TOLERANCE = {"double": 1e-6, "float": 1e-4}     # |direction| off 1 by more is invalid input
# A form that does without its sibling pair (FormPlan.limit) is used where |det| exceeds this much of
# its typical size; below, the fallback that reads the sibling's angle. For a wrist (det = -s5^2) that is
# s5 > 1e-4 in double (the two angles then err by at most about 1e-12 rad together) and s5 > 0.03 in
# float (about 2e-6 rad, within the float build's round-trip bound of 2e-5).
DIRECT_FLOOR = {"double": 1e-8, "float": 1e-3}
# A linear pair's cos^2 + sin^2 off 1 by more than this is renormalised before later steps use the
# pair: a later step may take a small angle from a cosine near 1 (sqrt((1 - c)(1 + c))), where a scale
# drift of d costs about d / m in the angle (m its conditioning measure), so the slack must stay below
# the precision contract's 1e-14 / m (docs/derivation.md section 6): about 4.5 ulp of 1 in double
# (1e-12 let a drift of 1.4e-13 through and cost 7e-9 rad at m = 1e-5).
UNIT_SLACK = {"double": 1e-15, "float": 1e-6}
# |cos^2 + sin^2 - 1| of a linear pair beyond which the input is inconsistent: float rounding near a
# tangency of a polynomial's roots reaches about 2e-3 (measured on canted6)
PAIR_TOLERANCE = {"double": 1e-4, "float": 5e-3}


@dataclass
class TargetPlan:
    """What the generated inverse reads from a pose, and how it builds a pose from natural inputs.

    point_and_angle: every pose the arm reaches is ``Rot(axis, phi) * reference`` (the tool
    rotation at the zero reading); ``e1``, ``e2`` complete ``axis`` to a right-handed basis.
    point_and_direction: ``column`` is the tool axis the direction is (0 x, 1 y, 2 z)."""
    kind: str
    axis: tuple = ()
    e1: tuple = ()
    e2: tuple = ()
    reference: tuple = ()        # 3x3 rows
    column: int = 2
    words: str = ""


def target_plan(arm: Arm, derivation: Derivation) -> TargetPlan:
    from ..engine.targets import words
    from ..kinematics import NumericChain
    target = derivation.target
    kind = target.kind if target is not None else "pose"
    plan = TargetPlan(kind, words=words(target) if target is not None else "the full pose of the tool")
    if kind == "point_and_angle":
        axis = np.array([float(v) for v in target.axis])
        axis /= np.linalg.norm(axis)
        helper = np.eye(3)[int(np.argmin(np.abs(axis)))]
        e1 = helper - np.dot(helper, axis) * axis
        e1 /= np.linalg.norm(e1)
        e2 = np.cross(axis, e1)
        reference = NumericChain(arm).pose(np.zeros(arm.dof))[:3, :3]
        plan.axis, plan.e1, plan.e2 = (tuple(float(v) for v in x) for x in (axis, e1, e2))
        plan.reference = tuple(tuple(float(v) for v in row) for row in reference)
    elif kind == "point_and_direction":
        plan.column = "xyz".index(target.tool_axis)
    return plan
