"""Exact geometry of the joint axes: where axes meet, points fixed in a link, axis frames.

Everything here is symbolic in the chain's parameters (``a_2``, ``d_4``, twist symbols) and is
checked against the numeric analysis by the callers.
"""

from __future__ import annotations

import sympy as sp

from .chain import Chain


def simplify_exact(expr, chain: Chain) -> sp.Expr:
    """Simplify with the twist relations ca^2 + sa^2 = 1 applied."""
    expr = sp.cancel(sp.sympify(expr))
    for ca, sa in chain.parameter_circles:
        expr = sp.cancel(expr.subs(sa ** 2, 1 - ca ** 2))
    return sp.simplify(expr)


def line_meet(p1, d1, p2, d2, chain: Chain) -> sp.Matrix:
    """The point of line p1 + t d1 closest to line p2 + u d2 (exact; lines not parallel)."""
    w0 = p1 - p2
    a, b, c = d1.dot(d1), d1.dot(d2), d2.dot(d2)
    d, e = d1.dot(w0), d2.dot(w0)
    t = simplify_exact((b * e - c * d) / (a * c - b * b), chain)
    return sp.Matrix([simplify_exact(x, chain) for x in p1 + t * d1])


def zero_frames(chain: Chain, start: int, stop: int) -> list[sp.Matrix]:
    """Frames start..stop relative to frame ``start``, every joint angle at 0 (exact)."""
    frames = [sp.eye(4)]
    for joint in range(start + 1, stop + 1):
        frames.append(frames[-1] * chain.link(joint, sp.Integer(1), sp.Integer(0)))
    return frames


def axis_in(chain: Chain, frames: list[sp.Matrix], start: int, joint: int) -> tuple[sp.Matrix, sp.Matrix]:
    """(point, direction) of joint ``joint``'s axis in the coordinates of frame ``start``, given
    the frames start..stop. Standard DH: the axis of joint j is z of frame j-1; modified: of frame j."""
    index = (joint - 1 if chain.arm.convention == "standard" else joint) - start
    frame = frames[index]
    return frame[:3, 3], frame[:3, 2]


def meeting_point(chain: Chain, first: int, frame: int) -> sp.Matrix:
    """Where axes first, first+1, first+2 meet, in the coordinates of frame ``frame`` (all joint
    angles at 0; the point is fixed in the links that the three axes join)."""
    low = min(frame, first - 1)
    high = max(frame, first + 2)
    frames = zero_frames(chain, low, high)
    axes = [axis_in(chain, frames, low, j) for j in (first, first + 1, first + 2)]
    point = line_meet(*axes[0], *axes[1], chain)
    to_frame = frames[frame - low].inv()
    local = to_frame * sp.Matrix([*point, 1])
    return sp.Matrix([simplify_exact(x, chain) for x in local[:3, 0]])
