"""The intermediate representation (IR) of a derivation: the closed-form solution as data.

A ``Derivation`` is an ordered list of steps that every back-end (Python, C, batch, report) walks
in the same order. Each step computes named quantities from the pose inputs and from earlier
steps, with sympy expressions in the symbols of the DH table (``a_2``, ``d_4`` ...):

- ``Compute``: named intermediates (``name = expression``).
- ``CosSinEquation``: one unknown angle from ``a cos(th) + b sin(th) = c``; two solutions, a
  branch point, a domain guard on the radicand, and a singular condition when ``a^2 + b^2``
  vanishes.
- ``LinearPair``: one unknown angle from two equations linear in ``cos(th)`` and ``sin(th)``;
  one solution; ordered alternatives when the first pair's determinant vanishes; the unknown is
  free (singular) when all do.
- ``AngleSum``: an angle that follows from angles already known (th4 = th234 - th2 - th3 for
  parallel axes), its cosine and sine by the angle-sum rules.
- ``CirclePolynomial``: one unknown angle from a polynomial of degree two in its cosine and sine
  (a quartic in tan(th/2)), after eliminating another unknown; up to four solutions.
- ``Label``: a geometric measure whose sign names a configuration.

An unknown is named by a key: a joint's number (``"3"``) or a sum of joint angles (``"p234"``,
see ``Derivation.unknowns``). Every angle step yields the symbols ``c<key>``, ``s<key>`` (cosine
and sine, carried so that later steps never call cos/sin again) and ``th<key>`` (the angle).
Outputs turn DH angles into the user's joint readings. ``str(derivation)`` prints the whole thing.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import sympy as sp

# Relative tolerances shared by every back-end (documented in docs/derivation.md):
GUARD_TOLERANCE = 1e-9      # a radicand down to -2e-9 * (a^2+b^2) is clamped to 0; below, unreachable
SINGULAR_TOLERANCE = 1e-20  # a determinant (or a^2+b^2) below 1e-20 * its typical size: singular


def cos_symbol(key) -> sp.Symbol:
    """The cosine of unknown ``key`` (a joint number or a sum key such as "p234")."""
    return sp.Symbol(f"c{key}", real=True)


def sin_symbol(key) -> sp.Symbol:
    return sp.Symbol(f"s{key}", real=True)


def angle_symbol(key) -> sp.Symbol:
    return sp.Symbol(f"th{key}", real=True)


@dataclass(frozen=True)
class Compute:
    """Named intermediates: ``names[i] = exprs[i]``, in order."""
    names: tuple[sp.Symbol, ...]
    exprs: tuple[sp.Expr, ...]
    purpose: str

    def describe(self) -> list[str]:
        return [f"  {n} = {e}" for n, e in zip(self.names, self.exprs)]


@dataclass(frozen=True)
class BranchPoint:
    """A two-way choice at a square root: which sign, and what the two choices mean."""
    name: str                   # "shoulder", "elbow", "wrist" or "branch<j>"
    sign: sp.Symbol             # +1 or -1 in the formulas
    meaning: str


@dataclass(frozen=True)
class Singular:
    """A singular condition: ``measure`` below ``threshold`` means the joint is free."""
    measure: sp.Expr
    threshold: float
    description: str
    rule: str


@dataclass(frozen=True)
class Mirror:
    """The second branch of a CosSinEquation obtained without solving again.

    When ``b = 0`` the two roots are (c, s) and (c, -s): th' = -th; when ``a = 0`` they are
    (c, s) and (-c, s): th' = pi - th. If every later step then maps its (cos, sin) to itself
    (``parity`` +1: same angle) or to its negative (-1: angle + pi), the second solution follows
    from the first with no atan2 at all (the wrist flip of an orthogonal wrist is the usual case).
    """
    kind: str                                   # "negate_sin" or "negate_cos"
    parities: tuple[tuple[str, int], ...]       # (key, +1 or -1) for the unknowns solved after it
    label_signs: tuple[int, ...]                # per label: +1 same label, -1 the other one

    def describe(self) -> str:
        first = "th' = -th" if self.kind == "negate_sin" else "th' = pi - th"
        rest = ", ".join(f"th{j}' = th{j}" + (" + pi" if p < 0 else "") for j, p in self.parities)
        return f"{first}; {rest}"


@dataclass(frozen=True)
class CosSinEquation:
    """``a cos(th) + b sin(th) = c``: th = atan2(b c + s a r, a c - s b r) with r = sqrt(radicand)."""
    key: str
    a: sp.Expr
    b: sp.Expr
    c: sp.Expr
    radicand: sp.Expr           # equals a^2 + b^2 - c^2 (in a form chosen for precision)
    norm: sp.Expr               # a^2 + b^2 (simplified)
    branch: BranchPoint
    guard_meaning: str
    singular: Singular
    source: str                 # the equation it came from, for the report
    mirror: "Mirror | None" = None

    def describe(self) -> list[str]:
        lines = [f"  solve {self.a}*c{self.key} + {self.b}*s{self.key} = {self.c}   [{self.source}]",
                 f"    radicand {self.radicand} >= 0 (clamped within {GUARD_TOLERANCE:g} * norm)",
                 f"    branch '{self.branch.name}' sign {self.branch.sign}: {self.branch.meaning}",
                 (f"    singular when {self.singular.measure} < {self.singular.threshold:.3g}: {self.singular.rule}"
                  if self.singular.threshold > 0 else f"    never singular: {self.norm} is a non-zero constant")]
        if self.mirror is not None:
            lines.append(f"    second branch by symmetry: {self.mirror.describe()}")
        return lines


@dataclass(frozen=True)
class PairForm:
    """One way to get (cos, sin) from two linear equations: c = cos_num/det, s = sin_num/det."""
    cos_num: sp.Expr
    sin_num: sp.Expr
    det: sp.Expr
    det_nonnegative: bool       # det >= 0 everywhere: atan2(sin_num, cos_num) needs no sign fix
    threshold: float            # |det| below it: this form is singular, try the next
    source: str
    after: str = ""             # a sibling unknown solved just before by a linear pair of its own: this
                                # form reads the quantities that fixed that sibling but not its angle,
                                # and is tried only where the sibling was not left free


@dataclass(frozen=True)
class LinearPair:
    key: str
    forms: tuple[PairForm, ...]
    singular: Singular

    def describe(self) -> list[str]:
        lines = [f"  solve th{self.key} from a linear pair in (c{self.key}, s{self.key}):"]
        for k, f in enumerate(self.forms):
            lines.append(f"    form {k + 1} [{f.source}]: c = ({f.cos_num})/det, s = ({f.sin_num})/det, "
                         f"det = {f.det} (singular below {f.threshold:.3g}"
                         + (f"; only where th{f.after} was not left free)" if f.after else ")"))
        lines.append(f"    all singular: {self.singular.rule}")
        return lines


@dataclass(frozen=True)
class AngleSum:
    """``th<key> = sum(coefficient * th<term>)`` over angles already known; its cosine and sine
    follow from theirs by the angle-sum rules (no trigonometric call)."""
    key: str
    terms: tuple[tuple[str, int], ...]     # (key, +1 or -1)
    purpose: str

    def describe(self) -> list[str]:
        total = " ".join(("+ " if k > 0 else "- ") + f"th{key}" for key, k in self.terms).lstrip("+ ")
        return [f"  th{self.key} = {total}   [{self.purpose}]"]


@dataclass(frozen=True)
class CirclePolynomial:
    """``k0 + kc c + ks s + kcs c s + kss s^2 = 0`` with (c, s) = (cos th, sin th): up to four roots.

    It comes from two equations linear in the cosine and sine of another unknown (``eliminated``):
    solving them for that pair and asking that its squares sum to one (the elimination of
    Pieper's method; Craig, Introduction to Robotics, 3rd ed., sec. 4.6). The generated code finds
    every real root on the circle (a quartic in tan((th - th0)/2), its real roots bracketed between
    the roots of its derivatives), and accepts a tangency within ``tolerance`` of the coefficients'
    size as a double root.
    """
    key: str
    coefficients: tuple[sp.Expr, ...]      # k0, kc, ks, kcs, kss
    branch: "BranchPoint"
    singular: Singular                     # every coefficient ~0: the unknown is free
    tolerance: float
    eliminated: str
    sources: tuple[str, str]

    def describe(self) -> list[str]:
        names = ("1", f"c{self.key}", f"s{self.key}", f"c{self.key}*s{self.key}", f"s{self.key}**2")
        terms = " + ".join(f"({k})*{n}" for k, n in zip(self.coefficients, names))
        return [f"  solve {terms} = 0   [eliminating th{self.eliminated} from: {self.sources[0]}; {self.sources[1]}]",
                f"    up to four roots on the circle; a tangency within {self.tolerance:g} of the coefficients' size is a double root",
                f"    branch '{self.branch.name}': {self.branch.meaning}",
                f"    singular when every coefficient < {self.singular.threshold:.3g}: {self.singular.rule}"]


@dataclass(frozen=True)
class LengthForm:
    """One way to get a displacement from an equation linear in it: l = num / den."""
    num: sp.Expr
    den: sp.Expr
    threshold: float            # |den| below it: this form is singular, try the next
    source: str


@dataclass(frozen=True)
class LinearLength:
    """The displacement of a prismatic joint from an equation linear in it: one solution; ordered
    alternatives for when a denominator vanishes; free (singular) when all do."""
    key: str
    forms: tuple[LengthForm, ...]
    singular: Singular

    def describe(self) -> list[str]:
        lines = [f"  solve l{self.key} (displacement) from an equation linear in it:"]
        for k, f in enumerate(self.forms):
            lines.append(f"    form {k + 1} [{f.source}]: l{self.key} = ({f.num})/({f.den}) (singular below {f.threshold:.3g})")
        lines.append(f"    all singular: {self.singular.rule}")
        return lines


@dataclass(frozen=True)
class QuadraticLength:
    """``a l^2 + b l + c = 0`` for the displacement l of a prismatic joint (a a non-zero constant):
    two roots ``(-b +- sqrt(b^2 - 4 a c)) / (2 a)``, computed without cancellation; a branch point."""
    key: str
    a: sp.Expr
    b: sp.Expr
    c: sp.Expr
    radicand: sp.Expr           # b^2 - 4 a c
    branch: "BranchPoint"
    source: str

    def describe(self) -> list[str]:
        return [f"  solve {self.a}*l{self.key}**2 + ({self.b})*l{self.key} + ({self.c}) = 0   [{self.source}]",
                f"    radicand {self.radicand} >= 0 (clamped within {GUARD_TOLERANCE:g} * b^2)",
                f"    branch '{self.branch.name}' sign {self.branch.sign}: {self.branch.meaning}"]


@dataclass(frozen=True)
class Label:
    """A configuration label: ``positive`` when ``measure >= 0``, else ``negative``."""
    name: str                   # "reach", "elbow", "wrist_bend", ... (engine/labels.py)
    measure: sp.Expr
    positive: str
    negative: str
    meaning: str
    geometry: tuple = ()        # engine/labels.py: what the measure is made of (empty: a root label)


@dataclass(frozen=True)
class JointOutput:
    """reading = wrap(th_j - zero) * direction / scale, with zero = theta + offset (radians); for a
    prismatic joint reading = (l_j - zero) * direction with zero = d + offset (no wrap, scale 1)."""
    joint: int
    name: str
    zero: sp.Expr
    direction: int
    scale: sp.Expr              # radians per reading unit
    prismatic: bool = False
    given: bool = False         # the caller gives this joint's reading (GIVEN_SYMBOL); it is returned as given


# The reading of a given joint (an arm with one joint more than its target's freedoms) in the
# generated code: an input beside the pose.
GIVEN_SYMBOL = sp.Symbol("given", real=True)


Step = Compute | CosSinEquation | LinearPair | AngleSum | CirclePolynomial | LinearLength | QuadraticLength
SOLVING_STEPS = (CosSinEquation, LinearPair, AngleSum, CirclePolynomial, LinearLength, QuadraticLength)
BRANCHING_STEPS = (CosSinEquation, CirclePolynomial, QuadraticLength)


@dataclass
class Derivation:
    arm_name: str
    family: str                             # the strategies that applied, in words
    analysis: list[str]                     # the structure analysis, in words
    pose_symbols: tuple[sp.Symbol, ...]     # r11 r12 r13 px r21 ... pz (row-major 3x4)
    parameters: dict[sp.Symbol, sp.Expr]    # DH symbols -> exact values
    steps: list[Step]
    labels: list[Label]
    outputs: list[JointOutput]
    max_solutions: int
    length_scale: float
    notes: list[str] = field(default_factory=list)
    unknowns: dict[str, tuple[tuple[int, int], ...]] = field(default_factory=dict)  # key -> (joint, sign)...
    strokes: dict[int, tuple[float, float]] = field(default_factory=dict)   # prismatic joint -> widened limits (readings)
    target: object = None                   # model.Target: what the solver is asked for

    def branch_points(self) -> list[BranchPoint]:
        return [s.branch for s in self.steps if isinstance(s, BRANCHING_STEPS)]

    def solved_keys(self) -> list[str]:
        return [s.key for s in self.steps if isinstance(s, SOLVING_STEPS)]

    def solved_joints(self) -> list[int]:
        """The joints in the order they are found (sums of angles left out)."""
        return [int(k) for k in self.solved_keys() if k.isdigit()]

    def __str__(self) -> str:
        lines = [f"derivation for '{self.arm_name}' ({self.family}); at most {self.max_solutions} solutions"]
        lines += [f"# {line}" for line in self.analysis]
        lines.append("parameters: " + ", ".join(f"{k} = {v}" for k, v in self.parameters.items()))
        for number, step in enumerate(self.steps, 1):
            title = step.purpose if isinstance(step, Compute) else \
                (f"l{step.key}" if isinstance(step, (LinearLength, QuadraticLength)) else f"th{step.key}")
            lines.append(f"step {number}: {title}")
            lines += step.describe()
        for label in self.labels:
            lines.append(f"label {label.name}: {label.positive} if {label.measure} >= 0 else {label.negative}")
        for out in self.outputs:
            if out.given:
                lines.append(f"output joint {out.joint} '{out.name}': the given reading")
            elif out.prismatic:
                lines.append(f"output joint {out.joint} '{out.name}': (l{out.joint} - ({out.zero})) * {out.direction}")
            else:
                lines.append(f"output joint {out.joint} '{out.name}': wrap(th{out.joint} - ({out.zero})) "
                             f"* {out.direction} / {out.scale}")
        return "\n".join(lines)
