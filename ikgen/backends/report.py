"""Report back-end: the derivation as a readable, auditable document (HTML and Markdown).

The report is rendered from the same IR as the solvers. Every equation it prints is kept as data
(``Printed``: a key, the left side, the sympy expression, its LaTeX and its MathML), so a test can
parse the printed LaTeX back and re-run the solution from the text alone. Expressions are shown
in the symbols of the DH table (``a_2``, ``d_4`` ...) with a table of their values; each is put in
the shortest of a few equivalent forms (factor, collect, named intermediates) and a form is used
only when sympy proves it equal to the IR's expression.

Files per arm: ``<arm>_report.html`` (self-contained: MathML from sympy's presentation printer,
figures as inline SVG, CSS inlined, no script, no external reference), ``<arm>_report.md`` (LaTeX
math via ``sympy.latex``), and the two figures as SVG files for the Markdown twin. Nothing in the
output depends on the date or the machine: the verification figures are printed as counts and
as powers of ten (``below 1e-11 mm``), the figures are deterministic SVG (see ikgen/figures.py).
"""

from __future__ import annotations

import dataclasses

import functools
import inspect
import math
import re
from dataclasses import dataclass, field

import jinja2
import numpy as np
import sympy as sp
import sympy.core.random as sympy_random
from sympy.polys import polyconfig
from markupsafe import Markup
from sympy.printing.mathml import mathml

from .. import figures
from ..ir import (GUARD_TOLERANCE, AngleSum, CirclePolynomial, Compute, CosSinEquation, Derivation, LinearPair,
                  angle_symbol, cos_symbol, sin_symbol)
from ..engine.symbols import expanded
from ..kinematics import NumericChain
from ..model import Arm
from ..stopwatch import Stopwatch
from ..templatecache import template_cache
from . import bounds, common

LATEX_SETTINGS = {"mul_symbol": "dot"}    # explicit products: "a_{2} \cdot \left(...\right)" reads unambiguously
RELATIONS = {"=": ("=", "="), "maps": (r"\mapsto", "&#8614;")}   # relation -> (LaTeX, MathML operator)
REPORT_SAMPLES = 2000                     # verification samples for the report's figures
REPORT_SEED = 2026
POSE_SEED = 5                             # the invented sample pose
LARGE_TERMS = 12                          # beyond this many terms readable() does not try factor()
# sympy factors a polynomial in several symbols from random evaluation points (Wang's method): it
# reduces the polynomial to one variable at a few points (EEZ_NUMBER_OF_CONFIGS, 3 by default) and
# stops at once when one image is irreducible; when all happen to factor, it lifts a factorisation
# that does not exist. On an irreducible quadratic in 9 symbols (a three-parallel-axes arm's reach
# radicand) 4 of 40 random seeds ran for minutes that way instead of 0.02 s; with 6 or 10 points,
# none of 40. So factor() runs with FACTOR_CONFIGS points, from FACTOR_SEED (the same time every run).
FACTOR_CONFIGS = 10
FACTOR_SEED = 0


# ----------------------------------------------------------------------------- printing

def latex(expr) -> str:
    return sp.latex(expr, **LATEX_SETTINGS)


def mathml_of(expr) -> str:
    return mathml(expr, printer="presentation")


def math_block(inner: str, block: bool = True) -> Markup:
    shown = ' display="block"' if block else ""
    return Markup(f"<math{shown}>{inner}</math>")


@dataclass(frozen=True)
class Printed:
    """One printed equation ``lhs REL rhs`` (display symbols). ``ir`` is the IR expression (IR
    symbols) that ``rhs`` equals once the report's own names of the same step (P, Q, K ...) are
    replaced by their definitions; None when the equation is a rule of the report (the root
    formula, c = U/D, the symmetry maps), which the tests check by re-solving poses."""
    key: str
    lhs: sp.Expr
    relation: str
    rhs: sp.Expr
    ir: sp.Expr | None

    @property
    def latex(self) -> str:
        return f"{latex(self.lhs)} {RELATIONS[self.relation][0]} {latex(self.rhs)}"

    @property
    def markdown(self) -> str:
        return f"$${self.latex}$$"

    @property
    def mathml(self) -> Markup:
        operator = RELATIONS[self.relation][1]
        return math_block(f"<mrow>{mathml_of(self.lhs)}<mo>{operator}</mo>{mathml_of(self.rhs)}</mrow>")


# ----------------------------------------------------------------------------- symbols

_NAME_RULES = ((r"thp(\d\w*)", r"theta_p\1"), (r"([cs])p(\d\w*)", r"\1_p\2"), (r"rho(\w+)", r"rho_\1"),
               (r"th(\d+)", r"theta_\1"), (r"sigma(\d+)", r"sigma_\1"), (r"rc(\d+)", r"R_\1"),
               (r"([A-Za-z])(\d+)", r"\1_\2"), (r"([A-Za-z])([xyz])", r"\1_\2"),
               (r"([A-Za-z])(\d+)([xyz])", r"\1_\2\3"))


def display_name(name: str) -> str:
    """The report's name for an IR symbol: th3 -> theta_3, r11 -> r_11, wx -> w_x, rc12 -> R_12,
    pcx -> o_x (the target position with base and tool removed), g16_13 -> g_16_13 (entry (1,3)
    of the known side with joints 1 and 6 moved over), cp234 -> c_p234 (a sum of angles)."""
    folded = re.fullmatch(r"([a-z])(\d+)_(\d\d)", name)
    if folded:
        letter, split, entry = folded.groups()
        if split.startswith("0"):       # nothing moved over from the left: h_5_11 (a subscript may not start with 0)
            letter, split = "h", split[1:]
        return f"{letter}_{split}_{entry}"
    if re.fullmatch(r"pc[xyz]", name):
        return f"o_{name[2]}"
    twist = re.fullmatch(r"([cs])a_(\d+)", name)
    if twist:                           # cosine and sine of a twist: c with subscript alpha 2
        return f"{twist.group(1)}_alpha_{twist.group(2)}"
    if "_" in name:
        return name
    for pattern, replacement in _NAME_RULES:
        if re.fullmatch(pattern, name):
            return re.sub(pattern, replacement, name)
    return name


def report_symbol(kind: str, index: int) -> sp.Symbol:
    """The report's own names: P, Q, K (the equation), N, Delta, D, U, V, lambda, q."""
    return sp.Symbol(f"{kind}_{index}", real=True)


class Names:
    """IR symbol -> display symbol, and the meaning of each name for the notation table."""

    def __init__(self):
        self.map: dict[sp.Symbol, sp.Symbol] = {}
        self.meaning: dict[sp.Symbol, str] = {}
        self.order: list[sp.Symbol] = []

    def add(self, ir_symbol: sp.Symbol, meaning: str) -> sp.Symbol:
        shown = sp.Symbol(display_name(ir_symbol.name), real=True)
        if ir_symbol in self.map:
            return self.map[ir_symbol]
        clash = [k for k, v in self.map.items() if v == shown] or ([shown] if shown in self.meaning else [])
        if clash:
            raise ValueError(f"report names clash: {ir_symbol} and {clash[0]} are both shown as {shown}")
        self.map[ir_symbol] = shown
        self.meaning[shown] = meaning
        self.order.append(shown)
        return shown

    def own(self, symbol: sp.Symbol, meaning: str) -> sp.Symbol:
        if symbol in self.meaning:
            return symbol
        if symbol in self.map.values():
            raise ValueError(f"report name {symbol} clashes with an IR name")
        self.meaning[symbol] = meaning
        self.order.append(symbol)
        return symbol

    def show(self, expr) -> sp.Expr:
        expr = sp.sympify(expr)
        missing = [s for s in expr.free_symbols if s not in self.map and s not in self.meaning]
        for symbol in sorted(missing, key=str):
            self.add(symbol, "an intermediate of the derivation")
        return expr.xreplace(self.map)


# ----------------------------------------------------------------------------- simplifying

def proven_equal(candidate, expr) -> bool:
    try:
        return expanded(candidate - expr) == 0
    except Exception:       # pragma: no cover - sympy refuses an operation: not proven
        return False


def lightest(candidates: list) -> sp.Expr:
    """The first candidate of least weight: fewest operations (sympy.count_ops), then the shortest
    LaTeX. The LaTeX, the costly part, is printed only for the candidates tied on operations."""
    if len(candidates) == 1:
        return candidates[0]
    operations = [sp.count_ops(c) for c in candidates]
    tied = [c for c, ops in zip(candidates, operations) if ops == min(operations)]
    return tied[0] if len(tied) == 1 else min(tied, key=lambda c: len(latex(c)))   # min keeps the first of equals


def bounded_factor(expr) -> sp.Expr:
    """sympy.factor from FACTOR_CONFIGS evaluation points, with sympy's random draws fixed (its
    random state restored afterwards): the same factors, without the long random tail of its time.
    An atom (a symbol or a number, most of what collect() hands over) is its own factorisation."""
    if expr.is_Atom:
        return expr
    state = sympy_random.rng.getstate()
    sympy_random.rng.seed(FACTOR_SEED)
    try:
        with polyconfig.using(EEZ_NUMBER_OF_CONFIGS=FACTOR_CONFIGS):
            return sp.factor(expr)
    finally:
        sympy_random.rng.setstate(state)


def readable(expr, parameters, extra: list | None = None) -> sp.Expr:
    """The shortest of a few forms of ``expr`` that sympy proves equal to it (expand of the
    difference is 0): the IR's own, factor_terms, factor, collect in the pose and joint
    quantities (plain and with factored coefficients), and ``extra`` candidates. (sympy.simplify
    was tried too; on the demo arms it never gave a shorter form, and it is slow.)"""
    expr = sp.sympify(expr)
    if expr.is_Atom:
        return expr
    variables = sorted(expr.free_symbols - set(parameters), key=str)
    makers = [sp.factor_terms, bounded_factor,
              lambda e: sp.collect(expanded(e), variables),
              lambda e: sp.collect(expanded(e), variables, func=bounded_factor)]
    if len(sp.Add.make_args(expanded(expr))) > LARGE_TERMS:
        makers = makers[:1] + makers[2:3]   # factoring a long polynomial costs seconds and never won
    candidates = [expr]
    for make in makers:
        try:
            candidate = make(expr)
        except Exception:   # pragma: no cover - a form sympy cannot make is simply not offered
            continue
        if candidate not in candidates and proven_equal(candidate, expr):
            candidates.append(candidate)
    for candidate, check in extra or []:
        if candidate not in candidates and proven_equal(check, expr):
            candidates.append(candidate)
    return lightest(candidates)


# ----------------------------------------------------------------------------- the sheet

@dataclass
class StepView:
    kind: str                       # "compute", "cossin", "pair"
    number: int
    title: str
    joint: int = 0
    source: str = ""
    equations: list[Printed] = field(default_factory=list)
    root: list[Printed] = field(default_factory=list)       # cossin: c_j, s_j; pair: c_j, s_j
    forms: list[dict] = field(default_factory=list)         # pair: {"number", "source", "equations", "threshold", "constant"}
    mirror: list[Printed] = field(default_factory=list)
    notes: list[str] = field(default_factory=list)
    branch: dict | None = None


@dataclass
class Sheet:
    """Everything the report prints about the derivation, as data."""
    names: Names
    steps: list[StepView]
    labels: list[dict]
    outputs: list[Printed]
    guards: list[dict]

    def equations(self) -> list[Printed]:
        out: list[Printed] = []
        for step in self.steps:
            out += step.equations
            for form in step.forms:
                out += form["equations"]
            out += step.root + step.mirror
        out += [label["equation"] for label in self.labels]
        out += self.outputs
        return out


def number_text(value: float, digits: int = 6) -> str:
    text = f"{value:.{digits}f}".rstrip("0").rstrip(".")
    return "0" if text in ("-0", "") else text


def threshold_text(value: float) -> str:
    return f"{value:.0e}".replace("e-0", "e-").replace("e+0", "e")


def threshold_latex(value: float) -> str:
    """1e-15 -> 10^{-15}; 2e-09 -> 2 \\cdot 10^{-9}."""
    mantissa, exponent = f"{value:.0e}".split("e")
    power = f"10^{{{int(exponent)}}}"
    return power if mantissa == "1" else f"{mantissa} \\cdot {power}"


def build_sheet(arm: Arm, derivation: Derivation) -> Sheet:
    names = Names()
    params = derivation.parameters
    labels_by_name = {label.name: label for label in derivation.labels}
    pose_meaning = {
        **{f"r{i}{k}": "entries of the target rotation (the tool frame's axes in the world frame, row i, column k)"
           for i in range(1, 4) for k in range(1, 4)},
        **{f"p{axis}": f"target position of the tool point in the world frame ({arm.length_unit})" for axis in "xyz"}}
    for symbol in derivation.pose_symbols:
        names.add(symbol, pose_meaning.get(symbol.name, "an entry of the target pose"))
    for symbol in params:
        meaning = ("cosine and sine of a twist alpha of the DH table (values above)"
                   if re.fullmatch(r"[cs]a_\d+", symbol.name) else f"lengths of the DH table ({arm.length_unit}; values above)")
        names.add(symbol, meaning)
    for key, members in derivation.unknowns.items():
        what = "the joint" if len(members) == 1 else "the sum " + unknown_words(members)
        names.add(cos_symbol(key), f"cosine of {what}'s DH angle, carried so that later steps need no cos()")
        names.add(sin_symbol(key), f"sine of {what}'s DH angle, carried so that later steps need no sin()")
        names.add(angle_symbol(key), "DH joint angle (radians)" if len(members) == 1 else
                  f"the sum {unknown_words(members)} of the angles of parallel axes (radians)")

    steps: list[StepView] = []
    guards: list[dict] = []
    for number, step in enumerate(derivation.steps, 1):
        if isinstance(step, Compute):
            view = StepView("compute", number, step.purpose[:1].upper() + step.purpose[1:])
            for name, expr in zip(step.names, step.exprs):
                shown = names.add(name, step.purpose)
                form = readable(expr, params)
                view.equations.append(Printed(f"s{number}.{name}", shown, "=", names.show(form), expr))
            steps.append(view)
        elif isinstance(step, CosSinEquation):
            steps.append(cossin_view(number, step, names, params, labels_by_name, guards, derivation))
        elif isinstance(step, LinearPair):
            steps.append(pair_view(number, step, names, params, guards, derivation))
        elif isinstance(step, AngleSum):
            steps.append(sum_view(number, step, names, derivation))
        elif isinstance(step, CirclePolynomial):
            steps.append(poly_view(number, step, names, params, labels_by_name, guards, derivation))

    label_views = []
    for index, label in enumerate(derivation.labels, 1):
        symbol = names.own(report_symbol("lambda", index), "configuration measures: the sign of each names a label")
        form = readable(label.measure, params)
        label_views.append({"name": label.name, "positive": label.positive, "negative": label.negative,
                            "meaning": label.meaning, "symbol": symbol, "symbol_mathml": math_block(mathml_of(symbol), False),
                            "symbol_latex": latex(symbol),
                            "equation": Printed(f"label.{label.name}", symbol, "=", names.show(form), label.measure)})

    outputs = []
    for out in derivation.outputs:
        reading = names.own(report_symbol("q", out.joint), f"joint readings as the controller shows them ({arm.angle_unit})")
        expr = (angle_symbol(out.joint) - out.zero) * out.direction / out.scale
        form = readable(expr, params, extra=[(expanded(expr), expanded(expr))])
        outputs.append(Printed(f"out.{out.joint}", reading, "=", names.show(form), expr))
    return Sheet(names, steps, label_views, outputs, guards)


def unknown_words(members) -> str:
    """theta_2 + theta_3 + theta_4 for the members ((2, 1), (3, 1), (4, 1))."""
    return " ".join(("- " if sign < 0 else ("+ " if k else "")) + f"theta_{j}" for k, (j, sign) in enumerate(members))


def title_of(key: str, derivation: Derivation) -> str:
    members = derivation.unknowns.get(key, ((int(key), 1),) if key.isdigit() else ())
    return f"Joint {key}" if len(members) == 1 else f"The sum {unknown_words(members)}"


def sum_view(number: int, step: AngleSum, names: Names, derivation: Derivation) -> StepView:
    """An angle that follows from known angles of parallel axes."""
    theta = names.map[angle_symbol(step.key)]
    expr = sp.Add(*[sign * angle_symbol(key) for key, sign in step.terms])
    view = StepView("sum", number, f"{title_of(step.key, derivation)}: from angles already known", joint=step.key,
                    source=step.purpose)
    view.equations = [Printed(f"s{number}.theta", theta, "=", names.show(expr), expr)]
    view.notes.append("Its cosine and sine follow by the angle-sum rules from the cosines and sines already "
                      "known, with no call to cos() or sin().")
    return view


def poly_view(number: int, step: CirclePolynomial, names: Names, params, labels_by_name, guards,
              derivation: Derivation) -> StepView:
    """Up to four roots of a polynomial of degree two in the cosine and sine of one angle."""
    j = step.key
    letters = ("A", "B", "C", "E", "F")
    meanings = ("constant term", "coefficient of cos", "coefficient of sin", "coefficient of cos times sin",
                "coefficient of sin squared")
    symbols = [names.own(report_symbol(letter, j), f"{meaning} of the polynomial A + B c + C s + E c s + F s^2 = 0 "
                         f"in the cosine and sine of an angle (after an elimination)")
               for letter, meaning in zip(letters, meanings)]
    view = StepView("poly", number, f"{title_of(j, derivation)}: up to four roots of one polynomial", joint=j,
                    source=f"{step.sources[0]}; {step.sources[1]}")
    view.equations = [Printed(f"s{number}.{letter}", symbol, "=", names.show(readable(k, params)), k)
                      for letter, symbol, k in zip(letters, symbols, step.coefficients)]
    c, s_ = names.map[cos_symbol(j)], names.map[sin_symbol(j)]
    A, B, C, E, F = symbols
    view.root = [Printed(f"s{number}.P", sp.Integer(0), "=", A + B * c + C * s_ + E * c * s_ + F * s_ ** 2, None)]
    eliminated = names.map[angle_symbol(step.eliminated)]
    label = labels_by_name.get(step.branch.name)
    view.branch = {"name": step.branch.name, "meaning": step.branch.meaning, "joint": j, "roots": "up to four",
                   "sign_latex": "", "sign_mathml": "", "mirrored": False,
                   "positive": label.positive if label else "", "negative": label.negative if label else "",
                   "eliminated_latex": latex(eliminated), "eliminated_mathml": math_block(mathml_of(eliminated), False),
                   "sources": list(step.sources), "tolerance": threshold_text(step.tolerance),
                   "tolerance_latex": threshold_latex(step.tolerance)}
    limit = threshold_text(step.singular.threshold)
    view.notes.append(f"Singular when A^2 + B^2 + C^2 + E^2 + F^2 <= {limit}: {step.singular.rule}.")
    guards.append({"joint": j, "what": "reach", "condition": "the polynomial has no real root on the circle",
                   "rule": "no solution from this branch: the pose is out of reach for it"})
    guards.append({"joint": j, "what": "tangency", "condition": f"a local extremum within {threshold_text(step.tolerance)} "
                   "x (|A| + |B| + |C| + |E| + |F|) of zero", "rule": "taken as one double root, flagged singular"})
    guards.append({"joint": j, "what": "singular", "condition": f"A^2 + B^2 + C^2 + E^2 + F^2 <= {limit}",
                   "rule": step.singular.rule})
    return view


def cossin_view(number: int, step: CosSinEquation, names: Names, params, labels_by_name, guards,
                derivation: Derivation) -> StepView:
    j = step.key
    P = names.own(report_symbol("P", j), "coefficient of cos(theta_j) in P cos(theta_j) + Q sin(theta_j) = K")
    Q = names.own(report_symbol("Q", j), "coefficient of sin(theta_j) in P cos(theta_j) + Q sin(theta_j) = K")
    K = names.own(report_symbol("K", j), "right-hand side of P cos(theta_j) + Q sin(theta_j) = K")
    N = names.own(report_symbol("N", j), "P^2 + Q^2 of that equation (zero only where the joint is undetermined)")
    Delta = names.own(report_symbol("Delta", j), "P^2 + Q^2 - K^2, in the form the solver computes it (the radicand)")
    sigma = names.add(step.branch.sign, "branch signs, +1 or -1")
    view = StepView("cossin", number, f"{title_of(j, derivation)}: two roots of one equation", joint=j,
                    source=step.source)
    view.equations = [Printed(f"s{number}.P", P, "=", names.show(readable(step.a, params)), step.a),
                      Printed(f"s{number}.Q", Q, "=", names.show(readable(step.b, params)), step.b),
                      Printed(f"s{number}.K", K, "=", names.show(readable(step.c, params)), step.c),
                      Printed(f"s{number}.N", N, "=", names.show(readable(step.norm, params)), step.norm)]
    extra = []
    if not (step.c.is_Atom):
        named = step.radicand.subs(step.c, K)
        if named != step.radicand and K in named.free_symbols:
            extra.append((named, named.xreplace({K: step.c})))
    radicand = readable(step.radicand, params, extra=extra)
    view.equations.append(Printed(f"s{number}.Delta", Delta, "=", names.show(radicand), step.radicand))
    c, s = names.map[cos_symbol(j)], names.map[sin_symbol(j)]
    root = sp.sqrt(Delta)
    view.root = [Printed(f"s{number}.c", c, "=", (P * K - sigma * Q * root) / N, None),
                 Printed(f"s{number}.s", s, "=", (Q * K + sigma * P * root) / N, None)]
    label = labels_by_name.get(step.branch.name)
    view.branch = {"name": step.branch.name, "sign": sigma, "meaning": step.branch.meaning,
                   "positive": label.positive if label else "", "negative": label.negative if label else "",
                   "sign_mathml": math_block(mathml_of(sigma), False), "sign_latex": latex(sigma),
                   "joint": j, "mirrored": step.mirror is not None, "roots": "two"}
    tolerance = threshold_text(2 * GUARD_TOLERANCE)
    guards.append({"joint": j, "what": "reach",
                   "condition": f"Delta_{j} < -{tolerance} N_{j}",
                   "rule": "this branch has no solution: the pose is out of reach for it"})
    guards.append({"joint": j, "what": "boundary of reach",
                   "condition": f"-{tolerance} N_{j} <= Delta_{j} <= 0",
                   "rule": f"Delta_{j} is taken as 0: one double root, flagged singular"})
    if step.singular.threshold > 0:
        limit = threshold_text(step.singular.threshold)
        view.notes.append(f"Singular when N_{j} <= {limit}: {step.singular.description}. Then, if also "
                          f"K_{j}^2 <= {limit}, {step.singular.rule}; otherwise there is no solution.")
        guards.append({"joint": j, "what": "singular", "condition": f"N_{j} <= {limit} and K_{j}^2 <= {limit}",
                       "rule": step.singular.rule})
        guards.append({"joint": j, "what": "inconsistent", "condition": f"N_{j} <= {limit} and K_{j}^2 > {limit}",
                       "rule": "no solution"})
    else:
        view.notes.append(f"Never singular: N_{j} is a non-zero constant.")
    if step.mirror is not None:
        theta = names.map[angle_symbol(j)]
        first = -theta if step.mirror.kind == "negate_sin" else sp.pi - theta
        view.mirror = [Printed(f"s{number}.mirror.{j}", theta, "maps", first, None)]
        for joint, parity in step.mirror.parities:
            other = names.map[angle_symbol(joint)]
            view.mirror.append(Printed(f"s{number}.mirror.{joint}", other, "maps",
                                       other if parity > 0 else other + sp.pi, None))
    return view


def pair_view(number: int, step: LinearPair, names: Names, params, guards, derivation: Derivation) -> StepView:
    j = step.key
    D = names.own(report_symbol("D", j), "determinant of a linear pair in cos(theta_j), sin(theta_j)")
    U = names.own(report_symbol("U", j), "numerator of cos(theta_j) in a linear pair: cos(theta_j) = U/D")
    V = names.own(report_symbol("V", j), "numerator of sin(theta_j) in a linear pair: sin(theta_j) = V/D")
    view = StepView("pair", number, f"{title_of(j, derivation)}: one root of two linear equations", joint=j)
    for k, form in enumerate(step.forms, 1):
        det_value = common.numeric(form.det, params)
        constant = bool(det_value.is_number and det_value != 0)
        limit = common.form_limit(form.threshold, form.after, "double")
        view.forms.append({
            "number": k, "source": form.source, "threshold": threshold_text(limit),
            "threshold_latex": threshold_latex(limit), "constant": constant and not form.after,
            "after": form.after, "float_threshold": threshold_text(common.form_limit(form.threshold, form.after, "float")),
            "float_threshold_latex": threshold_latex(common.form_limit(form.threshold, form.after, "float")),
            "equations": [Printed(f"s{number}.f{k}.D", D, "=", names.show(readable(form.det, params)), form.det),
                          Printed(f"s{number}.f{k}.U", U, "=", names.show(readable(form.cos_num, params)), form.cos_num),
                          Printed(f"s{number}.f{k}.V", V, "=", names.show(readable(form.sin_num, params)), form.sin_num)]})
        if constant and not form.after:
            break           # a constant determinant never vanishes: later forms are never used (as in the code)
    c, s = names.map[cos_symbol(j)], names.map[sin_symbol(j)]
    view.root = [Printed(f"s{number}.c", c, "=", U / D, None), Printed(f"s{number}.s", s, "=", V / D, None)]
    if not view.forms[-1]["constant"]:
        view.notes.append(f"When every form's determinant is below its threshold: {step.singular.rule}.")
        guards.append({"joint": j, "what": "singular", "condition": f"|D_{j}| below the threshold of every form",
                       "rule": step.singular.rule})
    guards.append({"joint": j, "what": "inconsistent", "condition": f"|c_{j}^2 + s_{j}^2 - 1| > 1e-4",
                   "rule": "no solution from this branch (the pose is not a rigid motion the arm can make)"})
    return view


# ----------------------------------------------------------------------------- evidence

def power_ceiling(value: float) -> str:
    """The smallest power of ten >= value, as text ('1e-11'); '0' for exactly zero."""
    if value <= 0:
        return "0"
    exponent = math.ceil(math.log10(value) - 1e-12)
    return f"1e{exponent}"


def verification_summary(arm: Arm, module, samples: int = REPORT_SAMPLES, seed: int = REPORT_SEED) -> dict:
    from ..verify import ROUND_TRIP_TOLERANCE, verify
    result = verify(arm, module, samples=samples, seed=seed)
    counts = [{"solutions": k, "poses": v} for k, v in sorted(result.counts.items(), reverse=True)]
    singular = [{"kind": kind, "tested": tested, "ok": result.singular_ok.get(kind, 0)}
                for kind, tested in result.singular_tested.items()]
    return {"samples": result.samples, "seed": result.seed, "checked": result.checked, "complete": result.complete,
            "position": power_ceiling(result.worst_position), "rotation": power_ceiling(result.worst_rotation),
            "position_tolerance": f"{result.position_tolerance:.2g}",
            "rotation_tolerance": f"{ROUND_TRIP_TOLERANCE:g}",
            "counts": counts, "unreachable_ok": result.unreachable_ok, "unreachable_tested": result.unreachable_tested,
            "singular": singular, "singular_position": power_ceiling(result.worst_singular_position),
            "singular_rotation": power_ceiling(result.worst_singular_rotation),
            "passed": result.passed, "failures": list(result.failures)}


def closed_form_solutions(module, pose, given: tuple = ()) -> list:
    """Every closed-form solution of ``pose`` (with the given joint's reading, for an arm that has
    one), whatever the joint limits (a solver that filters by limits is asked not to)."""
    if "limits" in inspect.signature(module.inverse).parameters:
        return module.inverse(pose, *given, limits="ignore")
    return module.inverse(pose, *given)


def within_limits(arm: Arm, readings) -> bool:
    """Whether the readings, each taken modulo a full turn for a revolute joint, fit the limits."""
    limits = arm.limits_in_readings()
    turn = 360.0 if arm.angle_unit == "deg" else 2 * math.pi
    for joint, value, (low, high) in zip(arm.joints, readings, limits):
        if joint.revolute:
            shifted = value + turn * math.ceil((low - value) / turn - 1e-12)
            if shifted > high + 1e-9 * turn:
                return False
        elif not low <= value <= high:
            return False
    return True


def sample_pose(arm: Arm, derivation: Derivation, module, seed: int = POSE_SEED, draws: int = 60):
    """Seeded joint readings (inside the middle of each joint's range), their pose, and every
    closed-form solution of that pose. Of ``draws`` draws the first with the most solutions, and
    among those the most within the joint limits, is kept: the picture then shows every branch."""
    rng = np.random.default_rng(seed)
    limits = arm.limits_in_readings()
    chain = NumericChain(arm)
    best, best_score = None, None
    for _ in range(draws):
        readings = limits[:, 0] + (0.2 + 0.6 * rng.random(arm.dof)) * (limits[:, 1] - limits[:, 0])
        pose = chain.pose(readings)
        from ..verify import given_of
        solutions = closed_form_solutions(module, pose, given_of(arm, readings))
        score = (len(solutions), sum(within_limits(arm, s[0]) for s in solutions))
        if best_score is None or score > best_score:
            best, best_score = (readings, pose, solutions), score
    return best


def reading_text(value: float, arm: Arm) -> str:
    return number_text(value, 2 if arm.angle_unit == "deg" else 4)


def sample_evidence(arm: Arm, derivation: Derivation, module) -> tuple[dict, list, np.ndarray]:
    """The sample pose for the report: its table (readings, position, rotation, a row per solution),
    the figure's panels (readings, caption) and the pose matrix the figure draws as the target."""
    readings, pose, solutions = sample_pose(arm, derivation, module)
    revolute = np.array([j.revolute for j in arm.joints])
    rows, panels = [], []
    for index, solution in enumerate(solutions, 1):
        joints = np.array(solution[0], dtype=float)
        gap = (joints - readings) * arm.reading_scales()
        gap = np.where(revolute, (gap + math.pi) % (2 * math.pi) - math.pi, gap)
        source = bool(np.max(np.abs(gap)) < 1e-6)
        caption = f"{index}: " + ", ".join(solution[1])
        rows.append({"index": index, "labels": list(solution[1]), "singular": bool(solution[2]),
                     "readings": [reading_text(v, arm) for v in joints], "source": source,
                     "within": within_limits(arm, joints)})
        panels.append((joints, caption))
    digits = 1 if arm.length_unit == "mm" else 4
    table = {"readings": [reading_text(v, arm) for v in readings],
             "position": [number_text(v, digits) for v in pose[:3, 3]],
             "rotation": [[number_text(v, 4) for v in row[:3]] for row in pose[:3]],
             "rows": rows, "count": len(solutions), "within": sum(row["within"] for row in rows)}
    return table, panels, pose


def figure_texts(arm: Arm, receive_sample, timings: dict | None = None) -> tuple[str, str]:
    """(the arm at its zero reading, every solution of the sample pose) as SVG. The first figure is
    drawn before ``receive_sample()`` is asked for the second's (panels, pose): a helper process can
    draw it (and import matplotlib) while the derivation runs (generate.build)."""
    watch = Stopwatch(timings)
    with watch("report: figures"):
        arm_svg = figures.arm_zero_figure(arm)
    panels, pose = receive_sample()
    with watch("report: figures"):
        return arm_svg, figures.solutions_figure(arm, panels, pose)


# ----------------------------------------------------------------------------- the document

CONVENTION_TEXT = {
    "standard": ("standard (distal) DH", "A_i = Rot_z(theta_i) Trans_z(d_i) Trans_x(a_i) Rot_x(alpha_i)",
                 r"A_i = \mathrm{Rot}_z(\theta_i)\,\mathrm{Trans}_z(d_i)\,\mathrm{Trans}_x(a_i)\,\mathrm{Rot}_x(\alpha_i)"),
    "modified": ("modified (proximal) DH", "A_i = Rot_x(alpha_i) Trans_x(a_i) Rot_z(theta_i) Trans_z(d_i)",
                 r"A_i = \mathrm{Rot}_x(\alpha_i)\,\mathrm{Trans}_x(a_i)\,\mathrm{Rot}_z(\theta_i)\,\mathrm{Trans}_z(d_i)"),
}


def dh_rows(arm: Arm) -> list[dict]:
    scale = arm.angle_scale
    rows = []
    for j in arm.joints:
        lo, hi = (v / (scale if j.revolute else 1.0) for v in j.limits)
        rows.append({"index": j.index, "name": j.name, "kind": j.kind,
                     "a": number_text(float(j.a)), "alpha": number_text(float(j.alpha) / scale),
                     "d": number_text(float(j.d)), "theta": number_text(float(j.theta) / scale),
                     "offset": number_text(float(j.offset) / (scale if j.revolute else 1.0)),
                     "direction": "+1" if j.direction > 0 else "-1",
                     "limits": f"{number_text(lo)} .. {number_text(hi)}"})
    return rows


def parameter_rows(arm: Arm, derivation: Derivation, names: Names) -> list[dict]:
    rows = []
    for symbol, value in derivation.parameters.items():
        shown = names.map[symbol]
        exact = sp.nsimplify(value)
        decimal = number_text(float(value), 9)
        kind, joint = symbol.name.split("_", 1)
        what = {"a": "DH link length a", "d": "DH link offset d", "ca": "cosine of the DH twist alpha",
                "sa": "sine of the DH twist alpha"}[kind]
        rows.append({"mathml": math_block(mathml_of(shown), False), "latex": latex(shown),
                     "value": decimal, "exact": "" if str(exact) == decimal else str(exact),
                     "unit": arm.length_unit if kind in ("a", "d") else "", "meaning": f"{what} of joint {joint}"})
    return rows


def frame_matrix(matrix) -> dict:
    rows = [[number_text(float(v), 6) for v in row] for row in np.array(sp.Matrix(matrix).evalf(), dtype=float)]
    return {"rows": rows, "identity": sp.Matrix(matrix) == sp.eye(4)}


def notation_rows(names: Names) -> list[dict]:
    """One row per meaning (symbols that share a meaning are listed together, in order of use)."""
    groups: dict[str, list[sp.Symbol]] = {}
    for symbol in names.order:
        groups.setdefault(names.meaning[symbol], []).append(symbol)
    rows = []
    for meaning, symbols in groups.items():
        shown = symbols if len(symbols) <= 4 else [symbols[0], symbols[1], None, symbols[-1]]
        mathml_parts = [mathml_of(s) if s is not None else "<mo>&#8230;</mo>" for s in shown]
        latex_parts = [latex(s) if s is not None else r"\ldots" for s in shown]
        rows.append({"mathml": math_block("<mrow>" + "<mo>,</mo>".join(mathml_parts) + "</mrow>", False),
                     "latex": ", ".join(latex_parts), "meaning": meaning})
    return rows


STRUCTURE_TEXT = {
    "wrist centre": "The last three axes meet in one point, the wrist centre, so it depends on joints 1 to 3 "
                    "only: position and orientation separate (Pieper, 1968). Joints 1 to 3 place the wrist "
                    "centre; the wrist joints then make the remaining rotation.",
    "base centre": "The first three axes meet in one point, fixed in the base, so seen from the tool the last "
                   "three joints alone place it (Pieper, 1968, with the chain read backwards): they are solved "
                   "first, the first three then make the remaining rotation.",
    "wrist point on the tool axis": "The last two axes meet in a point on the directed tool axis, so that point "
                                    "follows from the target alone; the first joints place it, the last two "
                                    "point the tool (Pieper's decoupling, with the tool's axis as the third line).",
    "parallel axes": "Consecutive parallel axes turn the links after them by the sum of their angles: the sum "
                     "is solved as one unknown, then each angle.",
}


def structure_sentences(derivation: Derivation) -> list[str]:
    """Why the recognised structures make the arm solvable, one sentence per strategy used."""
    return [text for key, text in STRUCTURE_TEXT.items() if key in derivation.family]


def target_sentences(arm: Arm, derivation: Derivation) -> list[str]:
    """What the solver is asked for, whether declared or natural, and what it reads from a pose."""
    from ..engine.targets import words
    target = derivation.target
    kind = target.kind if target is not None else "pose"
    reads = {"pose": "The solver takes the full tool pose.",
             "point": "The solver's natural call takes a point (inverse_point); from a full pose it reads the "
                      "position only.",
             "point_and_angle": "The solver's natural call takes a point and the turn about the target's axis "
                                "(inverse_point_angle); a full pose whose tool is tilted off that axis is not "
                                "realisable (its own status).",
             "point_and_direction": "The solver's natural call takes a point and a unit direction "
                                    "(inverse_point_direction); the roll about that direction follows from the "
                                    "arm, and a full pose with another roll is not realisable (its own status)."}[kind]
    lines = [f"Target: {words(target) if target is not None else 'the full pose of the tool'}. {reads}"]
    if arm.given_joint is not None:
        lines += given_sentences(arm)
    slides = [j for j in arm.joints if not j.revolute]
    if slides:
        names = ", ".join(f"joint {j.index} '{j.name}'" for j in slides)
        lines.append(f"Prismatic joints ({names}): their strokes define reach; a solution needing a slide "
                     "outside its stroke is no solution, whatever the limits mode.")
    return lines


def given_sentences(arm: Arm) -> list[str]:
    """What a given joint is, why the arm needs one, and which joints the derivation can take as given."""
    from ..engine import given_choices
    joint = arm.joints[arm.given_joint - 1]
    solved = len(arm.solved_joints)
    tried = "; ".join(f"{k} '{arm.joints[k - 1].name}': " + ("yes" if reason is None else f"no ({reason})")
                      for k, reason in given_choices(dataclasses.replace(arm, given_joint=None)))
    return [f"Given joint: joint {joint.index} '{joint.name}'. The arm has {arm.dof} joints and its target "
            f"{solved} freedoms, so a target has infinitely many solutions (the arm can move without moving the "
            "tool); the solvers take this joint's reading as an input beside the pose, return it unchanged in every "
            f"solution, and return every solution of the other {solved} joints. The helper choose_given picks the "
            "reading by a stated criterion (nearest to the current joints, largest margin from the joint limits, or "
            "largest conditioning measure), and `ikgen path` moves it continuously along a path.",
            f"Which joints the derivation can take as given (each one tried): {tried}. Joint {joint.index} was chosen "
            "in the arm file ([target] given_joint) or on the command line (--given-joint)."]


def context(arm: Arm, derivation: Derivation, module, folder: str, timings: dict | None = None) -> dict:
    """Everything the report's templates read, made in one process (render; generate.build makes
    the same parts in helper processes)."""
    watch = Stopwatch(timings)
    with watch("report: sample pose"):
        pose, panels, target = sample_evidence(arm, derivation, module)
    svgs = figure_texts(arm, lambda: (panels, target), timings)
    with watch("report: verification"):
        verification = verification_summary(arm, module)
    with watch("report: sheet"):
        data = sheet_context(arm, derivation, folder)
    return evidence_context(data, pose, verification, svgs)


def sheet_context(arm: Arm, derivation: Derivation, folder: str) -> dict:
    """The report's parts that come from the derivation alone: the equation sheet and the tables."""
    sheet = build_sheet(arm, derivation)
    convention = CONVENTION_TEXT[arm.convention]
    branch_points = [s.branch for s in sheet.steps if s.branch is not None]
    return {
        "arm": arm, "derivation": derivation, "sheet": sheet, "folder": folder,
        "generator": common.GENERATOR, "digest": arm.digest[:16],
        "convention_name": convention[0], "convention_text": convention[1], "convention_latex": convention[2],
        "dh_rows": dh_rows(arm), "parameters": parameter_rows(arm, derivation, sheet.names),
        "base": frame_matrix(arm.base), "tool": frame_matrix(arm.tool),
        "notation": notation_rows(sheet.names), "branch_points": branch_points,
        "arm_svg_file": f"{folder}_report_arm.svg", "pose_svg_file": f"{folder}_report_pose.svg",
        "structure_sentences": structure_sentences(derivation),
        "target_sentences": target_sentences(arm, derivation),
        "target_short": (derivation.target.kind.replace("_", " ") + (" (declared)" if derivation.target.declared else
                                                                     " (natural for the arm)")
                         if derivation.target is not None else "pose"),
        "guard_tolerance": threshold_text(2 * GUARD_TOLERANCE),
        "guard_tolerance_latex": threshold_latex(2 * GUARD_TOLERANCE),
        "overflow_rule": overflow_rule(common.lower(derivation)),
    }


def overflow_rule(plan) -> str:
    """The guards table's last row: where the solvers skip their finite-solution test (bounds.py)."""
    double, single = (bounds.safe_entry(plan, real) for real in ("double", "float"))
    if not double:
        return ("dropped (every solution is tested: the generator proves no overflow bound where a solver "
                "finds polynomial roots or a displacement's two roots, leaves a displacement to the caller's "
                "reading, or reads a given joint)")
    float_part = f"{single:.0e} in the float build" if single else "the float build always tests"
    return (f"dropped; not tested for a pose whose entries lie within {double:.0e} (double; {float_part}), "
            "checked in one comparison of their summed magnitudes or norm: no intermediate can overflow there "
            "(a bound on every expression, proved at generation)")


def evidence_context(data: dict, pose: dict, verification: dict, svgs: tuple[str, str]) -> dict:
    """``data`` (sheet_context) completed with the numeric evidence: the sample pose's table, the
    verification summary and the two figures (inline for the HTML, standalone for the Markdown)."""
    arm_svg, pose_svg = svgs
    return {**data, "verification": verification, "pose": {**pose, "svg": pose_svg},
            "arm_svg_inline": Markup(figures.inline(arm_svg, "zero", f"{data['arm'].name} at its zero reading")),
            "pose_svg_inline": Markup(figures.inline(pose_svg, "pose", "every solution of the sample pose")),
            "arm_svg": figures.standalone(arm_svg), "pose_svg": figures.standalone(pose_svg)}


def documents(data: dict) -> dict[str, str]:
    """The report files from the complete context: {file name: text} (HTML, Markdown, two SVGs)."""
    env = environment()
    return {f"{data['folder']}_report.html": env.get_template("report.html.j2").render(**data),
            f"{data['folder']}_report.md": env.get_template("report.md.j2").render(**data),
            data["arm_svg_file"]: data["arm_svg"], data["pose_svg_file"]: data["pose_svg"]}


def markdown_text(text) -> str:
    """User or IR text safe in Markdown prose and table cells. A '<' that could open an HTML tag,
    comment or autolink (a letter, '/', '!' or '?' follows) becomes the entity &lt;, which every
    Markdown flavour shows as text (not all of them honour a backslash before '<')."""
    text = re.sub(r"[\x00-\x1f\x7f]+", " ", str(text))
    text = re.sub(r"<(?=[A-Za-z/!?])", "&lt;", text)
    return re.sub(r"([\\`*_\[\]<>|#$])", r"\\\1", text)


@functools.lru_cache(maxsize=None)
def environment() -> jinja2.Environment:
    env = jinja2.Environment(loader=jinja2.FileSystemLoader(str(common.template_directory())),
                             undefined=jinja2.StrictUndefined, trim_blocks=True, lstrip_blocks=True,
                             keep_trailing_newline=True, autoescape=jinja2.select_autoescape(["html.j2"]),
                             bytecode_cache=template_cache("report: strict, trim, lstrip, keep newline, "
                                                           "autoescape html.j2, filter md"))
    env.filters["md"] = markdown_text
    return env


def render(arm: Arm, derivation: Derivation, python_source: str, timings: dict | None = None,
           module=None) -> dict[str, str]:
    """The report files of one arm: {file name: text} (HTML, Markdown and the two SVG figures).
    ``module``: the generated solver already loaded from ``python_source`` (else it is loaded here);
    ``timings`` (optional) receives the seconds of the report's phases (see stopwatch.py)."""
    if module is None:
        from ..generate import load_module
        module = load_module(python_source, f"{common.identifier(arm.name)}_ik_for_report")
    data = context(arm, derivation, module, common.identifier(arm.name), timings)
    with Stopwatch(timings)("report: documents"):
        return documents(data)
