"""Named intermediates and the numeric samples that test expressions.

A named intermediate is a quantity the generated code computes once and later steps read by
name: the known side of an identity with the known joints at its ends folded in (``v1x``: the
wrist centre in DH frame 1; ``g15_34``: entry (3,4) of A1^-1 T A6^-1), and the cosine and sine of
a sum of angles. Each has a symbolic definition (a ``Compute`` step, emitted on first use) and
numeric values on the samples.

Samples are consistent configurations: random DH angles, the target they give, and every named
quantity's value. They decide what is identically zero, rank alternatives and size the singular
thresholds, so tolerances follow the arm's own size.
"""

from __future__ import annotations

import numpy as np
import sympy as sp

from ..ir import Compute
from .chain import Chain, numeric_inverse
from .pool import Identity
from .symbols import Unknown, tidy


class Samples:
    """Columns of values (one per sample) for every symbol the engine uses."""

    def __init__(self, chain: Chain, count: int = 24, seed: int = 11):
        rng = np.random.default_rng(seed)
        self.angles = chain.random_variables(rng, count)       # joint variables: angles and displacements
        self.core = chain.numeric_core(self.angles)
        self.columns: dict[sp.Symbol, np.ndarray] = {}
        for symbol, value in chain.parameters.items():
            self.columns[symbol] = np.full(count, float(value))
        self.count = count
        self._cache: dict = {}

    def define(self, symbol: sp.Symbol, values) -> None:
        self.columns[symbol] = np.broadcast_to(np.asarray(values, dtype=float), (self.count,)).copy()

    def define_unknown(self, unknown: Unknown) -> None:
        if unknown.prismatic:
            self.define(unknown.length, self.angles[:, int(unknown.key) - 1])
            return
        if unknown.cos in self.columns:
            return
        angle = sum(sign * self.angles[:, j - 1] for j, sign in unknown.members)
        self.define(unknown.cos, np.cos(angle))
        self.define(unknown.sin, np.sin(angle))
        self.define(unknown.angle, np.arctan2(np.sin(angle), np.cos(angle)))

    def values(self, expr) -> np.ndarray:
        expr = sp.sympify(expr)
        if expr in self._cache:
            return self._cache[expr]
        if expr.is_number:
            result = np.full(self.count, float(expr))
        else:
            symbols = sorted(expr.free_symbols, key=str)
            missing = [s for s in symbols if s not in self.columns]
            if missing:
                raise KeyError(f"no sample values for {', '.join(map(str, missing))}")
            function = sp.lambdify(symbols, expr, modules="numpy")
            result = np.broadcast_to(np.asarray(function(*[self.columns[s] for s in symbols]), dtype=float),
                                     (self.count,)).copy()
        self._cache[expr] = result
        return result

    def magnitude(self, expr) -> float:
        return float(np.max(np.abs(self.values(expr))))

    def typical(self, expr) -> float:
        return float(np.median(np.abs(self.values(expr))))

    def changes_sign(self, expr) -> bool:
        values = self.values(expr)
        scale = float(np.max(np.abs(values)))
        return bool(values.min() < -1e-9 * scale and values.max() > 1e-9 * scale)


class Names:
    """Folded intermediates of the identities: symbols, Compute definitions and sample values."""

    def __init__(self, chain: Chain, samples: Samples):
        self.chain = chain
        self.samples = samples
        self.definitions: dict[tuple, tuple[sp.Matrix, Compute, tuple]] = {}
        self.rotation_entries: dict[sp.Symbol, tuple[tuple, int, int]] = {}
        self.matrices: dict[tuple, sp.Matrix] = {}
        self.order: list[tuple] = []
        self.sums: dict[tuple, tuple[sp.Symbol, sp.Symbol]] = {}   # ("angle sum", j, j+1) -> (cos, sin)
        self._together: dict[int, bool] = {}

    def register_known(self, identity: Identity) -> None:
        """The known object of an identity (its values on the samples, its unit rows and columns)."""
        known = identity.numeric_known(self.samples.angles)
        if identity.is_point:
            for r in range(3):
                self.samples.define(identity.known[r, 0], known[:, r])
            return
        key = (identity.name, 0, identity.length)
        self.matrices[key] = identity.known
        for r in range(3):
            for c in range(4):
                if isinstance(identity.known[r, c], sp.Symbol):
                    self.samples.define(identity.known[r, c], known[:, r, c])
                    if c < 3:
                        self.rotation_entries[identity.known[r, c]] = (key, r, c)

    def symbols_for(self, identity: Identity, i: int, k: int) -> sp.Matrix:
        if identity.is_point:
            names = [sp.Symbol(f"{identity.prefix}{i}{axis}", real=True) for axis in "xyz"]
            return sp.Matrix([*names, identity.known[3, 0]])       # 1 for a point, 0 for a direction
        rows = [[sp.Symbol(f"{identity.prefix}{i}{k}_{r + 1}{c + 1}", real=True) for c in range(4)] for r in range(3)]
        return sp.Matrix(rows + [[0, 0, 0, 1]])

    def folded(self, identity: Identity, i: int, k: int) -> sp.Matrix:
        """The known object with factors 1..i moved over from the left and k+1..m from the right."""
        if i == 0 and k == identity.length:
            return identity.known
        key = (identity.name, i, k)
        if key not in self.definitions:
            self._define(identity, i, k)
        return self.definitions[key][0]

    def _define(self, identity: Identity, i: int, k: int) -> None:
        m = identity.length
        left_parent = (identity.name, i - 1, k) in self.definitions or (i - 1, k) == (0, m)
        if i > 1 and self.turns_together(identity.factors[i - 2], identity.factors[i - 1]):
            # two parallel axes in a row: (A_j A_j+1)^-1 rotates by -(th_j + th_j+1) as one step
            first, second = identity.factors[i - 2], identity.factors[i - 1]
            parent = self.folded(identity, i - 2, k)
            value = self.sum_factor(first.joint) * parent
            how = f"{first.words()}^-1 and {second.words()}^-1 together (parallel axes: their turns add) times"
        elif i > 0 and (left_parent or k == m or not ((identity.name, i, k + 1) in self.definitions)):
            parent = self.folded(identity, i - 1, k)
            factor = identity.factors[i - 1]
            value = self.chain.factor(factor.joint, not factor.inverse) * parent
            how = f"{factor.words()}^-1 times"
        else:
            parent = self.folded(identity, i, k + 1)
            factor = identity.factors[k]
            value = parent * self.chain.factor(factor.joint, not factor.inverse)
            how = f"times {factor.words()}^-1"
        symbols = self.symbols_for(identity, i, k)
        rows = 3
        names, exprs = [], []
        columns = 1 if identity.is_point else 4
        circles = self.chain.circles + list(self.sums.values())
        for r in range(rows):
            for c in range(columns):
                names.append(symbols[r, c])
                exprs.append(tidy(value[r, c], circles))
        lhs, _ = identity.words((i, k))
        purpose = f"{lhs}: the known side with joints {', '.join(str(f.joint) for f in identity.factors[:i] + identity.factors[k:])} " \
                  f"moved over ({how} the previous one)"
        step = Compute(tuple(names), tuple(exprs), purpose)
        self.definitions[(identity.name, i, k)] = (symbols, step, (identity, i, k))
        self.matrices[(identity.name, i, k)] = symbols
        self.order.append((identity.name, i, k))
        if not identity.is_point:
            for r in range(3):
                for c in range(3):
                    self.rotation_entries[symbols[r, c]] = ((identity.name, i, k), r, c)
        self._numeric(identity, i, k, symbols)

    def turns_together(self, first, second) -> bool:
        """Whether two factors of an identity are A_j A_j+1 (neither inverted) of two revolute joints
        whose rotations add: the rotation of A_j A_j+1 depends on th_j + th_j+1 alone (parallel axes
        pointing the same way), checked on the samples."""
        j = first.joint
        if first.inverse or second.inverse or second.joint != j + 1:
            return False
        if j in self._together:
            return self._together[j]
        unknowns = self.chain.unknowns
        together = not (unknowns[j - 1].prismatic or unknowns[j].prismatic)
        if together:
            angles = self.samples.angles
            shifted = angles.copy()
            shift = np.linspace(0.3, 2.9, len(angles))
            shifted[:, j - 1] += shift
            shifted[:, j] -= shift
            def rotation(values):
                links = self.chain.numeric_links(values)
                return (links[:, j - 1] @ links[:, j])[:, :3, :3]
            together = bool(np.allclose(rotation(angles), rotation(shifted), rtol=0.0, atol=1e-12))
        self._together[j] = together
        return together

    def sum_factor(self, j: int) -> sp.Matrix:
        """(A_j A_j+1)^-1 with th_j written as (th_j + th_j+1) - th_j+1: its rotation in the cosine
        and sine of the sum only (c<j><j+1>, s<j><j+1>, a named intermediate), its translation in
        those and th_j+1's."""
        cos_sum, sin_sum = self.sum_symbols(j)
        nxt = self.chain.unknowns[j]
        here = self.chain.unknowns[j - 1]
        product = self.chain.factor(j + 1, True) * self.chain.factor(j, True)
        product = product.xreplace({here.cos: cos_sum * nxt.cos + sin_sum * nxt.sin,
                                    here.sin: sin_sum * nxt.cos - cos_sum * nxt.sin})
        circles = self.chain.circles + [(cos_sum, sin_sum)]
        return product.applyfunc(lambda e: tidy(sp.expand(e), circles))

    def sum_symbols(self, j: int) -> tuple[sp.Symbol, sp.Symbol]:
        """The cosine and sine of th_j + th_j+1 as a named intermediate (defined on first use)."""
        key = ("angle sum", j, j + 1)
        if key not in self.definitions:
            here, nxt = self.chain.unknowns[j - 1], self.chain.unknowns[j]
            cos_sum = sp.Symbol(f"c{j}{j + 1}", real=True)
            sin_sum = sp.Symbol(f"s{j}{j + 1}", real=True)
            exprs = (here.cos * nxt.cos - here.sin * nxt.sin, here.sin * nxt.cos + here.cos * nxt.sin)
            step = Compute((cos_sum, sin_sum), exprs,
                           f"cosine and sine of th{j} + th{j + 1} (axes {j} and {j + 1} parallel: their turns add)")
            self.definitions[key] = (sp.Matrix([cos_sum, sin_sum]), step, None)
            total = self.samples.angles[:, j - 1] + self.samples.angles[:, j]
            self.samples.define(cos_sum, np.cos(total))
            self.samples.define(sin_sum, np.sin(total))
            self.sums[key] = (cos_sum, sin_sum)
        return self.sums[key]

    def _numeric(self, identity: Identity, i: int, k: int, symbols: sp.Matrix) -> None:
        samples = self.samples
        links = self.chain.numeric_links(samples.angles)
        known = identity.numeric_known(samples.angles)
        left = np.broadcast_to(np.eye(4), (samples.count, 4, 4)).copy()
        for f in identity.factors[:i]:
            link = links[:, f.joint - 1]
            left = left @ (numeric_inverse(link) if f.inverse else link)
        if identity.is_point:
            value = np.einsum("nij,nj->ni", numeric_inverse(left), known)
            for r in range(3):
                samples.define(symbols[r, 0], value[:, r])
            return
        right = np.broadcast_to(np.eye(4), (samples.count, 4, 4)).copy()
        for f in identity.factors[k:]:
            link = links[:, f.joint - 1]
            right = right @ (numeric_inverse(link) if f.inverse else link)
        value = numeric_inverse(left) @ known @ numeric_inverse(right)
        for r in range(3):
            for c in range(4):
                samples.define(symbols[r, c], value[:, r, c])

    def definition_of(self, symbol: sp.Symbol):
        """(key, Compute) of the named intermediate that defines ``symbol``, or None."""
        for key, (symbols, step, _) in self.definitions.items():
            if symbol in step.names:
                return key, step
        return None

    def parent_symbols(self, key) -> set:
        _, step, _ = self.definitions[key]
        return set().union(*(sp.sympify(e).free_symbols for e in step.exprs))

    def unit_vectors(self) -> list[tuple]:
        """Every row and column of every named rotation (unit vectors), as symbol triples."""
        out = []
        for symbols in self.matrices.values():
            if symbols.shape != (4, 4):
                continue
            out += [tuple(symbols[r, c] for c in range(3)) for r in range(3)]
            out += [tuple(symbols[r, c] for r in range(3)) for c in range(3)]
        return out

    def unit_partners(self, symbol: sp.Symbol) -> list[tuple[sp.Symbol, sp.Symbol]]:
        """For a rotation entry of a named matrix: the other two entries of its column and of its row
        (a rotation's columns and rows are unit vectors)."""
        if symbol not in self.rotation_entries:
            return []
        key, r, c = self.rotation_entries[symbol]
        symbols = self.matrices[key]
        column = tuple(symbols[x, c] for x in range(3) if x != r)
        row = tuple(symbols[r, x] for x in range(3) if x != c)
        return [column, row]
