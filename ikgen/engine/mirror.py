"""The second branch of a last branch point, obtained by symmetry instead of a second solve.

When the last ``CosSinEquation`` has ``b = 0`` (roots th and -th) or ``a = 0`` (th and pi - th)
and every later step maps its (cos, sin) to itself or to its negative under that change (checked
symbolically; a named intermediate may change sign too), the second solution is written down from the first with no atan2 at all: for the
usual orthogonal wrist, (th4 + pi, -th5, th6 + pi).
"""

from __future__ import annotations

import dataclasses

import sympy as sp

from ..ir import Compute, CosSinEquation, Label, LinearPair, Mirror, cos_symbol, sin_symbol
from .symbols import reduce_circles


def attach_mirror(steps: list, labels: list[Label], circles) -> list:
    positions = [i for i, s in enumerate(steps) if isinstance(s, CosSinEquation)]
    if not positions:
        return steps
    index = positions[-1]
    step = steps[index]
    key = step.key
    if step.b == 0:
        kind, mapping = "negate_sin", {sin_symbol(key): -sin_symbol(key)}
    elif step.a == 0:
        kind, mapping = "negate_cos", {cos_symbol(key): -cos_symbol(key)}
    else:
        return steps

    def same(x, y):
        return reduce_circles(sp.expand(x - y), circles) == 0

    parities = []
    for later in steps[index + 1:]:
        if isinstance(later, Compute):
            # a named intermediate that changes sign under the mapping is mapped to its negative
            for name, expr in zip(later.names, later.exprs):
                mirrored = expr.xreplace(mapping)
                if mirrored == expr or same(mirrored, expr):
                    continue
                if not same(mirrored, -expr):
                    return steps
                mapping = {**mapping, name: -name}
            continue
        if not isinstance(later, LinearPair):
            return steps
        parity = None
        for form in later.forms:
            det, cn, sn = (e.xreplace(mapping) for e in (form.det, form.cos_num, form.sin_num))
            for candidate in (1, -1):
                if same(cn * form.det, candidate * form.cos_num * det) and \
                        same(sn * form.det, candidate * form.sin_num * det):
                    break
            else:
                return steps
            if parity not in (None, candidate):
                return steps
            parity = candidate
        parities.append((later.key, parity))
        if parity < 0:
            mapping = {**mapping, cos_symbol(later.key): -cos_symbol(later.key),
                       sin_symbol(later.key): -sin_symbol(later.key)}
    signs = []
    for label in labels:
        mirrored = label.measure.xreplace(mapping)
        if same(mirrored, label.measure):
            signs.append(1)
        elif same(mirrored, -label.measure):
            signs.append(-1)
        else:
            return steps
    steps = list(steps)
    steps[index] = dataclasses.replace(step, mirror=Mirror(kind, tuple(parities), tuple(signs)))
    return steps
