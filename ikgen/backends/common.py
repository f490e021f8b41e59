"""What every back-end shares: the code plan (the IR lowered to numbered blocks with numbers
substituted and common subexpressions eliminated), the jinja environment, and sanitising of
user text that reaches generated source.

Lowering is language-neutral; each back-end then prints the plan's sympy expressions with its
own printer and renders its own templates. Determinism: CSE runs with canonical ordering and
per-block temporary names, constants are printed from exact values, and nothing depends on time.
"""

from __future__ import annotations

import importlib.resources
import math
import re
import unicodedata
from dataclasses import dataclass, field
from pathlib import Path

import jinja2
import sympy as sp

from .. import __version__
from ..ir import (GUARD_TOLERANCE, SINGULAR_TOLERANCE, Compute, CosSinEquation, Derivation, LinearPair, angle_symbol,
                  cos_symbol, sin_symbol)
from ..model import Arm

GENERATOR = f"ikgen {__version__} (sympy {sp.__version__})"


# ------------------------------------------------------------------------------ printers

class ProductPowers:
    """Printer mix-in: x**2..x**4 as products (faster than pow in every target), x**-1 as a
    division and x**(1/2) as the target's square root. Set ``sqrt_name`` and ``one``."""

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
        return super()._print_Pow(expr, rational)


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


def environment() -> jinja2.Environment:
    return jinja2.Environment(loader=jinja2.FileSystemLoader(str(template_directory())),
                              undefined=jinja2.StrictUndefined, trim_blocks=True, lstrip_blocks=True,
                              keep_trailing_newline=True, autoescape=False)


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


@dataclass
class FormPlan:
    temps: list[Assignment]
    det: sp.Expr
    cos_num: sp.Expr
    sin_num: sp.Expr
    threshold: float
    constant_det: bool


@dataclass
class Block:
    kind: str                    # "compute", "cossin", "pair"
    depth: int                   # number of enclosing branch loops
    comment: str
    joint: int = 0
    temps: list[Assignment] = field(default_factory=list)
    # cossin (see specialise_cossin)
    c: sp.Expr | None = None
    norm: sp.Expr | None = None
    radicand: sp.Expr | None = None
    guard: sp.Expr | None = None
    cn: sp.Expr | None = None
    sn: sp.Expr | None = None
    cos_expr: sp.Expr | None = None
    sin_expr: sp.Expr | None = None
    threshold: float | None = None  # None: a^2+b^2 is a non-zero constant, never singular
    # pair
    forms: list[FormPlan] = field(default_factory=list)
    free_possible: bool = True
    mirrored: bool = False       # cossin: the second root is emitted by symmetry, no loop
    need_cos: bool = True        # cossin: a later expression reads c<j>
    need_sin: bool = True        # cossin: a later expression reads s<j>
    condition_name: str = ""     # cossin: the branch name its conditioning measure is reported under
    condition_gain: float = 1.0  # cossin: conditioning = root * gain = sqrt(radicand / typical a^2+b^2)


@dataclass
class OutputPlan:
    joint: int
    zero: float                  # radians, reduced into (-pi, pi]
    factor: float                # reading per radian times direction
    direction: int
    scale: float                 # radians per reading unit


@dataclass
class LabelPlan:
    name: str
    positive: str
    negative: str


@dataclass
class MirrorPlan:
    joint: int
    kind: str                    # "negate_sin" or "negate_cos"
    parities: dict               # joint -> +1 (same angle) or -1 (angle + pi)
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
    branch_joints: list[int]
    mirror: MirrorPlan | None = None
    guard_tolerance: float = GUARD_TOLERANCE

    @property
    def mirror_condition(self) -> list[tuple[str, int]]:
        """What must hold to emit the mirrored solution, as (kind, joint) terms: ("root", j) a real
        second root; ("not_free", j) no later joint left free (at a singular wrist the copy would
        move the kept joint)."""
        m = self.mirror
        terms = [("root", m.joint)]
        terms += [("not_free", b.joint) for b in self.blocks
                  if b.kind == "pair" and b.free_possible and b.joint in m.parities]
        return terms

    @property
    def singular_terms(self) -> list[tuple[str, int]]:
        """What flags a solution singular, as (kind, joint) terms: ("free", j) the joint was free;
        ("double", j) the branch's radicand was (clamped to) zero."""
        terms = []
        for block in self.blocks:
            if block.kind == "cossin":
                if block.threshold is not None:
                    terms.append(("free", block.joint))
                terms.append(("double", block.joint))
            elif block.kind == "pair" and block.free_possible:
                terms.append(("free", block.joint))
        return terms

    @property
    def bounded_joints(self) -> set[int]:
        """Joints whose DH angle is always an atan2 result in [-pi, pi] (never a caller's value)."""
        out = set()
        for block in self.blocks:
            if block.kind == "cossin" and block.threshold is None:
                out.add(block.joint)
            elif block.kind == "pair" and not block.free_possible:
                out.add(block.joint)
        return out

    @property
    def condition_blocks(self) -> list[Block]:
        """The cossin blocks, in order: one conditioning measure per branch point."""
        return [b for b in self.blocks if b.kind == "cossin"]

    def mirrored_angle(self, joint: int) -> str:
        """The mirrored solution's DH angle of ``joint`` in terms of the first one's (generated names)."""
        m = self.mirror
        if joint == m.joint:
            return f"-th{joint}" if m.kind == "negate_sin" else f"_PI - th{joint}"
        if m.parities.get(joint, 1) < 0:
            return f"th{joint} + _PI"
        return f"th{joint}"


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
        return sp.Float(expr.evalf(20), 17)
    if expr.is_Pow:
        return sp.Pow(floats(expr.base), expr.exp, evaluate=False) if expr.exp.is_Integer else \
            expr.func(floats(expr.base), floats(expr.exp))
    if expr.args:
        return expr.func(*[floats(a) for a in expr.args])
    return expr


def eliminate(exprs: list[sp.Expr], prefix: str) -> tuple[list[Assignment], list[sp.Expr]]:
    """Common-subexpression elimination with stable, block-scoped temporary names."""
    replacements, reduced = sp.cse(exprs, symbols=sp.numbered_symbols(prefix, real=True), order="canonical")
    return [Assignment(t, e) for t, e in replacements], list(reduced)


def lower(derivation: Derivation) -> Plan:
    """The IR as a code plan: numbers substituted, CSE per block, nesting depth per block."""
    params = derivation.parameters
    blocks: list[Block] = []
    depth = 0
    branch_joints = []
    mirror = None
    for number, step in enumerate(derivation.steps, 1):
        prefix = f"t{number}_"
        if isinstance(step, Compute):
            temps, reduced = eliminate([numeric(e, params) for e in step.exprs], prefix)
            temps += [Assignment(n, e) for n, e in zip(step.names, reduced)]
            blocks.append(Block("compute", depth, step.purpose, temps=temps))
        elif isinstance(step, CosSinEquation):
            exprs = [numeric(e, params) for e in (step.a, step.b, step.c, step.radicand, step.norm)]
            temps, (a, b, c, radicand, norm_value) = eliminate(exprs, prefix)
            constant = norm_value.is_number
            block = Block("cossin", depth, f"joint {step.joint}: {step.source}", joint=step.joint,
                          temps=temps, threshold=None if constant else step.singular.threshold,
                          mirrored=step.mirror is not None, condition_name=step.branch.name,
                          condition_gain=condition_gain(norm_value, step.singular.threshold))
            specialise_cossin(block, a, b, c, norm_value, radicand)
            blocks.append(block)
            branch_joints.append(step.joint)
            if step.mirror is not None:
                mirror = MirrorPlan(step.joint, step.mirror.kind, dict(step.mirror.parities),
                                    list(step.mirror.label_signs))
            else:
                depth += 1
        elif isinstance(step, LinearPair):
            forms = []
            for k, form in enumerate(step.forms):
                exprs = [numeric(e, params) for e in (form.det, form.cos_num, form.sin_num)]
                temps, (det, cos_num, sin_num) = eliminate(exprs, f"{prefix}{k}_")
                constant_det = det.is_number and det != 0
                forms.append(FormPlan(temps, det, cos_num, sin_num, form.threshold, constant_det))
                if constant_det:
                    break          # a constant determinant never vanishes: later forms are unreachable
            blocks.append(Block("pair", depth, f"joint {step.joint} from a linear pair", joint=step.joint,
                                forms=forms, free_possible=not forms[-1].constant_det))
    label_exprs = [numeric(label.measure, params) for label in derivation.labels]
    final_temps, label_measures = eliminate(label_exprs, "tl_")
    outputs = []
    for out in derivation.outputs:
        zero = float(out.zero)
        zero = (zero + 3.141592653589793) % 6.283185307179586 - 3.141592653589793
        scale = float(out.scale)
        outputs.append(OutputPlan(out.joint, zero, out.direction / scale, out.direction, scale))
    labels = [LabelPlan(l.name, l.positive, l.negative) for l in derivation.labels]
    mark_needed_trig(blocks, final_temps, label_measures)
    return Plan(blocks, final_temps, label_measures, labels, outputs, derivation.pose_symbols,
                derivation.max_solutions, depth, branch_joints, mirror)


def specialise_cossin(block: Block, a, b, c, norm, radicand) -> None:
    """Fill a cossin block with the expressions its code needs, simplified for these a, b, c.

    Coefficients that are numbers are inlined (so a zero b drops its terms and a unit norm its
    division); others become named variables ea<j>, eb<j>, ec<j>, en<j>. The roots are
    cn = a c - sg b root, sn = b c + sg a root, with cos = cn / norm and sin = sn / norm.
    """
    j = block.joint

    def named(expr, name):
        if expr.is_number:
            return expr
        symbol = sp.Symbol(name, real=True)
        block.temps.append(Assignment(symbol, expr))
        return symbol

    a, b, c = named(a, f"ea{j}"), named(b, f"eb{j}"), named(c, f"ec{j}")
    block.norm = named(norm, f"en{j}")
    block.radicand = block.norm if sp.expand(radicand - norm) == 0 else named(radicand, f"er{j}")
    block.c = c
    sg, root = sp.Symbol(f"sg{j}", real=True), sp.Symbol(f"root{j}", real=True)
    block.guard = block.radicand + 2 * GUARD_TOLERANCE * block.norm      # < 0: out of reach
    block.cn = a * c - sg * b * root
    block.sn = b * c + sg * a * root
    cn, sn = sp.Symbol(f"cn{j}", real=True), sp.Symbol(f"sn{j}", real=True)
    block.cos_expr = cn / block.norm if block.norm != 1 else cn
    block.sin_expr = sn / block.norm if block.norm != 1 else sn
    if block.norm.is_number and block.norm != 1:
        inverse = sp.Float(1 / sp.Float(block.norm, 30), 17)
        block.cos_expr, block.sin_expr = cn * inverse, sn * inverse


def block_exprs(block: Block) -> list[sp.Expr]:
    exprs = [a.expr for a in block.temps]
    exprs += [e for e in (block.norm, block.radicand, block.cn, block.sn) if e is not None]
    for form in block.forms:
        exprs += [a.expr for a in form.temps] + [form.det, form.cos_num, form.sin_num]
    return exprs


def mark_needed_trig(blocks: list[Block], final_temps, label_measures) -> None:
    """Set need_cos/need_sin of each cossin block from what later blocks and the labels read."""
    later: set = set()
    for e in [a.expr for a in final_temps] + list(label_measures):
        later |= sp.sympify(e).free_symbols
    for block in reversed(blocks):
        if block.kind == "cossin":
            block.need_cos = cos_symbol(block.joint) in later
            block.need_sin = sin_symbol(block.joint) in later
        for e in block_exprs(block):
            later |= sp.sympify(e).free_symbols


@dataclass
class TurnPlan:
    """How readings of one joint wrap: a turn in reading units (0 for prismatic joints), the
    limits widened by a tolerance (1e-9 of the range) and whether the range exceeds a turn."""
    turn: float
    low: float
    high: float
    multi: bool
    count: int                   # at most this many equivalent readings within the limits


def joint_turns(arm: Arm) -> list[TurnPlan]:
    out = []
    for joint, (low, high) in zip(arm.joints, arm.limits_in_readings()):
        turn = (360.0 if arm.angle_unit == "deg" else 2 * math.pi) if joint.revolute else 0.0
        eps = 1e-9 * max(1.0, high - low)
        # a range of exactly one turn (-180..180) is single-turn: its two ends are one position
        multi = bool(turn) and high - low > turn * (1 + 1e-9)
        low, high = float(low - eps), float(high + eps)
        count = int((high - low) // turn) + 1 if multi else 1
        out.append(TurnPlan(turn, low, high, multi, count))
    return out


def max_solutions(arm: Arm, plan: Plan) -> int:
    """Closed-form solutions times the equivalent readings of every multi-turn joint."""
    total = plan.max_solutions
    for turn in joint_turns(arm):
        total *= turn.count
    return total


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
              f"Family: {derivation.family}; at most {derivation.max_solutions} solutions",
              f"Joints: " + ", ".join(f"{j.index} {comment_text(j.name)}" for j in arm.joints),
              f"Generated by {GENERATOR} from an arm file with sha256 {arm.digest[:16]}",
              "Pose input: the tool frame in the world frame, a 4x4 row-major homogeneous matrix "
              f"(position in {arm.length_unit}); rotation must be orthonormal."]
    return lines
