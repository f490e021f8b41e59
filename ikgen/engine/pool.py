"""The equation pool: every split of every identity the engine knows, with what each entry depends on.

An *identity* says that a known object equals a product of link transforms:

- the pose identity ``T = A1 A2 ... An`` (T: the target with base and tool removed);
- point identities added by strategies, ``X = G1 ... Gm y`` with X a point known from the pose
  (the wrist centre), G link transforms or their inverses, y a constant point.

A *split* moves factors from the ends of the product to the known side (as inverses): for the pose
identity ``(A1..Ai)^-1 T (A(k+1)..An)^-1 = A(i+1)..Ak`` for every 0 <= i < k <= n, as in Paul's
method; for a point identity only from the left. Each split gives entries: the nine rotation
entries, the three position entries, the three position entries of the inverse (the dot products
of the position with each rotation column), and the squared norm of the position (Pieper's
method), or for a point its three components and its squared norm.

What an entry depends on is found numerically (random joint angles and a random rigid T,
perturbing one joint at a time), separately for the known side and the product side. A joint
whose perturbation changes nothing has cancelled; when the entry is written symbolically that
joint's factor is taken at angle 0, which keeps expressions short and is exact.

The product side can also be written in *group coordinates* (see strategies/parallel_axes.py):
the angles of consecutive parallel axes replaced by their partial sums, so that an entry that
depends on the sum alone shows a single unknown.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import sympy as sp

from .chain import Chain, numeric_inverse
from .symbols import Unknown, reduce_circles

DEPENDENCE_TOLERANCE = 1e-9     # relative change that counts as "depends on"
ROTATION_ENTRIES = [(r, c) for r in range(3) for c in range(3)]


@dataclass(frozen=True)
class Factor:
    joint: int
    inverse: bool

    def words(self) -> str:
        return f"A{self.joint}" + ("^-1" if self.inverse else "")


@dataclass
class Identity:
    """``known = G1 ... Gm * body``; ``body`` is None for the pose identity (a matrix)."""
    name: str
    factors: tuple[Factor, ...]
    known: sp.Matrix                     # 4x4 (pose) or 4x1 (point) of symbols known from the pose
    known_words: str                     # "T" or "w"
    body: sp.Matrix | None = None        # 4x1 constant point
    body_words: str = ""
    numeric_known: object = None         # angles (N, n) -> (N, 4, 4) or (N, 4)
    prefix: str = "g"                    # names of folded intermediates: <prefix><i><k>_<r><c> or <prefix><i><x|y|z>

    @property
    def is_point(self) -> bool:
        return self.body is not None

    @property
    def length(self) -> int:
        return len(self.factors)

    def splits(self) -> list[tuple[int, int]]:
        m = self.length
        if self.is_point:
            return [(i, m) for i in range(m + 1)]
        return [(i, k) for i in range(m + 1) for k in range(i + 1, m + 1)]

    def words(self, split) -> tuple[str, str]:
        """(left side, right side) of a split, in words."""
        i, k = split
        left = " ".join(f"A{f.joint}" + ("" if f.inverse else "^-1") for f in reversed(self.factors[:i]))
        right_inv = " ".join(f"A{f.joint}" + ("" if f.inverse else "^-1") for f in reversed(self.factors[k:]))
        lhs = " ".join(x for x in (left, self.known_words, right_inv) if x)
        product = " ".join(f.words() for f in self.factors[i:k])
        if self.is_point:
            product = " ".join(x for x in (product, self.body_words) if x)
        return lhs, product or "I"


@dataclass(frozen=True)
class Entry:
    kind: str          # "rot", "pos", "inv", "norm"
    index: tuple       # (r, c) for rot; (r,) for pos/inv; () for norm

    def words(self, point: bool) -> str:
        axis = "xyz"
        if self.kind == "rot":
            return f"entry ({self.index[0] + 1},{self.index[1] + 1})"
        if self.kind == "pos":
            return f"{axis[self.index[0]]} of" if point else f"position {axis[self.index[0]]} of"
        if self.kind == "inv":
            return f"position {axis[self.index[0]]} of the inverse of"
        return "squared norm of" if point else "squared norm of the position of"


def entries_for(point: bool) -> list[Entry]:
    if point:
        return [Entry("pos", (r,)) for r in range(3)] + [Entry("norm", ())]
    return ([Entry("rot", rc) for rc in ROTATION_ENTRIES] + [Entry("pos", (r,)) for r in range(3)]
            + [Entry("inv", (r,)) for r in range(3)] + [Entry("norm", ())])


def entry_value(matrix, entry: Entry, point: bool):
    """The entry of a symbolic (sympy) or numeric (numpy, (..., 4, 4) or (..., 4)) object."""
    if isinstance(matrix, np.ndarray):
        if point:
            p = matrix[..., :3]
            return p[..., entry.index[0]] if entry.kind == "pos" else np.einsum("...i,...i->...", p, p)
        if entry.kind == "rot":
            return matrix[..., entry.index[0], entry.index[1]]
        p = matrix[..., :3, 3]
        if entry.kind == "pos":
            return p[..., entry.index[0]]
        if entry.kind == "inv":
            return -np.einsum("...i,...i->...", matrix[..., :3, entry.index[0]], p)
        return np.einsum("...i,...i->...", p, p)
    if point:
        p = [matrix[r, 0] for r in range(3)]
        return p[entry.index[0]] if entry.kind == "pos" else sum(x * x for x in p)
    if entry.kind == "rot":
        return matrix[entry.index[0], entry.index[1]]
    p = [matrix[r, 3] for r in range(3)]
    if entry.kind == "pos":
        return p[entry.index[0]]
    if entry.kind == "inv":
        return -sum(matrix[r, entry.index[0]] * p[r] for r in range(3))
    return sum(x * x for x in p)


@dataclass(frozen=True)
class Coordinates:
    """How the product side's angles are written: joint angles, or for a run of parallel axes
    (joints ``first..last``, ``signs`` relative to the first revolute member, 0 for a prismatic
    member) the first angle and the partial sums of the revolute members."""
    name: str                                   # "" for joint angles
    first: int = 0
    last: int = 0
    signs: tuple[int, ...] = ()

    def sign(self, joint: int) -> int:
        return self.signs[joint - self.first]

    def revolute_members(self) -> list[int]:
        return [j for j in range(self.first, self.last + 1) if self.sign(j) != 0]

    def previous(self, joint: int) -> int | None:
        """The revolute member before ``joint`` in the run, or None."""
        before = [j for j in self.revolute_members() if j < joint]
        return before[-1] if before else None

    def following(self, joint: int) -> int | None:
        after = [j for j in self.revolute_members() if j > joint]
        return after[0] if after else None

    def unknown_for(self, joint: int) -> Unknown:
        if not self.name or not self.first <= joint <= self.last:
            return Unknown.joint(joint)
        if self.sign(joint) == 0:
            return Unknown.joint(joint, prismatic=True)
        members = self.revolute_members()
        if joint == members[0]:
            return Unknown.joint(joint)
        return Unknown.sum_of((j, self.sign(j)) for j in members if j <= joint)


@dataclass
class Equation:
    identity: Identity
    split: tuple[int, int]
    entry: Entry
    coordinates: Coordinates
    known_side: frozenset[int]            # joints the known side depends on
    product_side: frozenset[str]          # unknown keys the product side depends on
    number: int = 0

    @property
    def depends(self) -> frozenset[str]:
        return frozenset(str(j) for j in self.known_side) | self.product_side

    @property
    def group(self) -> str:
        return f"{self.identity.name}:{self.split}"

    @property
    def source(self) -> str:
        lhs, rhs = self.identity.words(self.split)
        where = self.entry.words(self.identity.is_point)
        coords = f" (in {self.coordinates.name})" if self.coordinates.name else ""
        return f"{where} {lhs} = {rhs}{coords}"


@dataclass
class Pool:
    """All equations, with lazy symbolic forms."""
    chain: Chain
    identities: list[Identity] = field(default_factory=list)
    coordinates: list[Coordinates] = field(default_factory=list)
    equations: list[Equation] = field(default_factory=list)

    def add_identity(self, identity: Identity) -> None:
        self.identities.append(identity)

    def build(self, seed: int = 17) -> None:
        """Enumerate every split and entry, with their dependence found numerically."""
        rng = np.random.default_rng(seed)
        trials = 3
        angles = self.chain.random_variables(rng, trials)
        self.equations = []
        for identity in self.identities:
            known = self._random_known(identity, rng, trials)
            for split in identity.splits():
                for coordinates in [Coordinates("")] + self._coordinates_for(identity, split):
                    self._add_split(identity, split, coordinates, known, angles)
        for number, equation in enumerate(self.equations):
            equation.number = number

    def _coordinates_for(self, identity: Identity, split) -> list[Coordinates]:
        i, k = split
        joints = [f.joint for f in identity.factors[i:k]]
        inverse = any(f.inverse for f in identity.factors[i:k])
        out = []
        for coords in self.coordinates:
            inside = [j for j in joints if coords.first <= j <= coords.last]
            if inverse or not inside or inside != list(range(inside[0], inside[0] + len(inside))):
                continue
            revolute = [j for j in inside if coords.sign(j) != 0]
            if len(revolute) < 2:
                continue
            reference = coords.sign(revolute[0])
            out.append(Coordinates(coords.name, inside[0], inside[-1],
                                   tuple(coords.sign(j) * reference for j in inside)))
        return out

    def _random_known(self, identity: Identity, rng, trials: int) -> np.ndarray:
        scale = self.chain.length_scale
        if identity.is_point:
            point = np.zeros((trials, 4))
            point[:, 3] = float(identity.body[3])        # 1 for a point, 0 for a direction
            point[:, :3] = rng.normal(size=(trials, 3)) * (scale if point[0, 3] else 1.0)
            return point
        q, _ = np.linalg.qr(rng.normal(size=(trials, 3, 3)))
        known = np.zeros((trials, 4, 4))
        known[:, :3, :3] = q
        known[:, :3, 3] = rng.normal(size=(trials, 3)) * scale
        known[:, 3, 3] = 1.0
        return known

    def _numeric_product(self, factors, angles) -> np.ndarray:
        links = self.chain.numeric_links(angles)
        result = np.broadcast_to(np.eye(4), angles.shape[:-1] + (4, 4)).copy()
        for f in factors:
            link = links[..., f.joint - 1, :, :]
            result = result @ (numeric_inverse(link) if f.inverse else link)
        return result

    def _known_side(self, identity, split, known, angles) -> np.ndarray:
        i, k = split
        left = self._numeric_product(identity.factors[:i], angles)
        value = numeric_inverse(left) @ known if not identity.is_point else \
            np.einsum("nij,nj->ni", numeric_inverse(left), known)
        if not identity.is_point and k < identity.length:
            value = value @ numeric_inverse(self._numeric_product(identity.factors[k:], angles))
        return value

    def _product_side(self, identity, split, angles) -> np.ndarray:
        i, k = split
        value = self._numeric_product(identity.factors[i:k], angles)
        if identity.is_point:
            body = np.array([float(v) for v in identity.body.xreplace(self.chain.parameters)])
            value = np.einsum("nij,j->ni", value, body)
        return value

    def _add_split(self, identity, split, coordinates, known, angles) -> None:
        i, k = split
        point = identity.is_point
        scale = self.chain.length_scale
        entries = entries_for(point)
        weights = [1.0 if e.kind == "rot" else scale if e.kind in ("pos", "inv") else scale * scale
                    for e in entries]
        known_joints = [f.joint for f in identity.factors[:i] + identity.factors[k:]]
        product_joints = [f.joint for f in identity.factors[i:k]]

        def changes(function, base_angles, perturbed_angles) -> list[bool]:
            base, moved = function(base_angles), function(perturbed_angles)
            return [np.max(np.abs(entry_value(moved, e, point) - entry_value(base, e, point))) > DEPENDENCE_TOLERANCE * w
                    for e, w in zip(entries, weights)]

        known_dep = [set() for _ in entries]
        for j in set(known_joints):
            moved = angles.copy()
            moved[:, j - 1] += self.chain.step(j)
            for e, flag in enumerate(changes(lambda a: self._known_side(identity, split, known, a), angles, moved)):
                if flag:
                    known_dep[e].add(j)
        product_dep = [set() for _ in entries]
        for j in sorted(set(product_joints)):
            unknown = coordinates.unknown_for(j)
            step = self.chain.step(j)
            moved = angles.copy()
            if coordinates.name and coordinates.first <= j <= coordinates.last and coordinates.sign(j) != 0:
                # move coordinate x_j alone: th_j = sign_j (x_j - x_previous) and the next member change
                moved[:, j - 1] += step * coordinates.sign(j)
                following = coordinates.following(j)
                if following is not None:
                    moved[:, following - 1] -= step * coordinates.sign(following)
            else:
                moved[:, j - 1] += step
            for e, flag in enumerate(changes(lambda a: self._product_side(identity, split, a), angles, moved)):
                if flag:
                    product_dep[e].add(unknown.key)
        for e, entry in enumerate(entries):
            if not known_dep[e] and not product_dep[e]:
                continue            # 0 = 0 or a constant identity: carries no information
            if coordinates.name and not any(len(key) > 1 for key in product_dep[e]):
                continue            # the group coordinates add nothing over the joint angles
            self.equations.append(Equation(identity, split, entry, coordinates,
                                           frozenset(known_dep[e]), frozenset(product_dep[e])))

    # ------------------------------------------------------------------ symbolic forms
    def known_side_expr(self, equation: Equation, known: set[int], names) -> sp.Expr:
        """The known side's entry, with the known joints next to the known object folded into a
        named intermediate and cancelled joints at angle 0."""
        identity = equation.identity
        i, k = equation.split
        left, right = list(identity.factors[:i]), list(identity.factors[k:])
        fold_left = 0
        while fold_left < len(left) and left[fold_left].joint in known:
            fold_left += 1
        fold_right = 0
        if not identity.is_point:
            while fold_right < len(right) and right[len(right) - 1 - fold_right].joint in known:
                fold_right += 1
        value = names.folded(identity, fold_left, identity.length - fold_right)
        for f in left[fold_left:]:
            value = self._symbolic_factor(f, equation.known_side, invert=True) * value
        if not identity.is_point:
            for f in reversed(right[:len(right) - fold_right]):
                value = value * self._symbolic_factor(f, equation.known_side, invert=True)
        return entry_value(value, equation.entry, identity.is_point)

    def _symbolic_factor(self, f: Factor, depends, invert: bool) -> sp.Matrix:
        inverse = f.inverse != invert
        return self.chain.factor(f.joint, inverse, at_zero=f.joint not in depends)

    def product_side_expr(self, equation: Equation) -> sp.Expr:
        identity = equation.identity
        i, k = equation.split
        coords = equation.coordinates
        value = sp.eye(4)
        for f in identity.factors[i:k]:
            in_group = bool(coords.name) and coords.first <= f.joint <= coords.last and coords.sign(f.joint) != 0
            cancelled = not in_group and coords.unknown_for(f.joint).key not in equation.product_side
            value = value * self.chain.factor(f.joint, f.inverse, at_zero=cancelled)
        if identity.is_point:
            value = value * identity.body
        expr = entry_value(value, equation.entry, identity.is_point)
        if coords.name:
            expr = to_group_coordinates(expr, coords)
        return expr


def to_group_coordinates(expr: sp.Expr, coords: Coordinates) -> sp.Expr:
    """Rewrite the revolute members' cos/sin in the coordinates (first angle, partial sums)."""
    replacements = {}
    members = coords.revolute_members()
    previous = Unknown.joint(members[0])
    for j in members[1:]:
        current = coords.unknown_for(j)
        member = Unknown.joint(j)
        # th_j = sign_j * (x_j - x_previous)
        cos_diff = current.cos * previous.cos + current.sin * previous.sin
        sin_diff = current.sin * previous.cos - current.cos * previous.sin
        replacements[member.cos] = cos_diff
        replacements[member.sin] = coords.sign(j) * sin_diff
        previous = current
    return sp.expand(expr.xreplace(replacements))


def group_circles(coords: Coordinates) -> list:
    return [(coords.unknown_for(j).cos, coords.unknown_for(j).sin) for j in coords.revolute_members()]


def equation_expr(pool: Pool, equation: Equation, known: set[int], names, circles) -> sp.Expr:
    """known side - product side, reduced: the equation as ``expr = 0``."""
    lhs = pool.known_side_expr(equation, known, names)
    rhs = pool.product_side_expr(equation)
    extra = group_circles(equation.coordinates) if equation.coordinates.name else []
    return reduce_circles(lhs - rhs, list(circles) + extra)


# ------------------------------------------------------------------ numeric evaluation

def entry_scale(equation: Equation, length_scale: float) -> float:
    """The natural size of an entry: 1 for rotation entries, a length for positions, its square for norms."""
    kind = equation.entry.kind
    return 1.0 if kind == "rot" else length_scale if kind in ("pos", "inv") else length_scale ** 2


def numeric_residual(pool: Pool, equation: Equation, known_values: np.ndarray, angles: np.ndarray) -> np.ndarray:
    """known side - product side, numerically, for known objects (M, 4, 4) or (M, 4) and DH angles (M, n)."""
    identity = equation.identity
    i, k = equation.split
    links = pool.chain.numeric_links(angles)

    def product(factors):
        result = np.broadcast_to(np.eye(4), (len(angles), 4, 4)).copy()
        for f in factors:
            link = links[:, f.joint - 1]
            result = result @ (numeric_inverse(link) if f.inverse else link)
        return result

    point = identity.is_point
    left = numeric_inverse(product(identity.factors[:i]))
    if point:
        known = np.einsum("nij,nj->ni", left, known_values)
        body = _numeric_body(pool, identity)
        made = np.einsum("nij,j->ni", product(identity.factors[i:k]), body)
    else:
        known = left @ known_values @ numeric_inverse(product(identity.factors[k:]))
        made = product(identity.factors[i:k])
    return entry_value(known, equation.entry, point) - entry_value(made, equation.entry, point)


def _numeric_body(pool: Pool, identity) -> np.ndarray:
    """A point identity's body point with the DH values in, as floats (once per identity)."""
    cache = pool.__dict__.setdefault("_numeric_bodies", {})
    key = id(identity)          # the pool keeps its identities, so the id is not reused meanwhile
    if key not in cache:
        cache[key] = np.array([float(v) for v in identity.body.xreplace(pool.chain.parameters)])
    return cache[key]


def vary(angles: np.ndarray, equation: Equation, unknown_key: str, value) -> np.ndarray:
    """Joint variables with the unknown ``unknown_key`` (a joint, or a coordinate of the
    equation's group coordinates) set to ``value`` and every other coordinate kept."""
    out = angles.copy()
    coords = equation.coordinates
    in_run = bool(coords.name)
    if unknown_key.isdigit():
        j = int(unknown_key)
        if in_run and coords.first <= j <= coords.last and coords.sign(j) != 0 and j != coords.revolute_members()[0]:
            raise ValueError("a member inside group coordinates is not a coordinate")
        delta = value - out[:, j - 1]
        out[:, j - 1] = value
        if in_run and coords.first <= j <= coords.last and coords.sign(j) != 0:
            following = coords.following(j)
            if following is not None:
                out[:, following - 1] -= delta * coords.sign(following)
        return out
    for j in coords.revolute_members()[1:]:
        if coords.unknown_for(j).key == unknown_key:
            members = [m for m in coords.revolute_members() if m <= j]
            current = sum(coords.sign(m) * out[:, m - 1] for m in members)
            delta = value - current
            out[:, j - 1] += delta * coords.sign(j)
            following = coords.following(j)
            if following is not None:
                out[:, following - 1] -= delta * coords.sign(following)
            return out
    raise ValueError(f"th{unknown_key} is not a coordinate of {equation.source}")
