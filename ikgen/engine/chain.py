"""The arm as the engine sees it: link transforms, symbolic and numeric, with named parameters.

Symbolic links keep the DH lengths as symbols (``a_2``, ``d_4``: non-zero values only, an exact
zero stays 0) and the joint angles as cosine/sine symbols (``c3``, ``s3``). A twist that is a
multiple of 90 degrees enters as its exact cosine and sine (0, 1, -1), because those zeros are
the structure the analysis and the solver rely on; any other twist enters as a symbol pair
(``ca_2``, ``sa_2``) with ``ca_2^2 + sa_2^2 = 1`` among the circles, so expressions stay short.
Numeric links (numpy, vectorised over samples) are the same transforms with the values in.
"""

from __future__ import annotations

from functools import cached_property

import numpy as np
import sympy as sp

from ..kinematics import link_from_cos_sin, numeric_links
from ..model import Arm
from ..rotations import inverse_transform
from .symbols import Unknown


def _exact_quarter_turn(alpha: sp.Expr) -> bool:
    ratio = sp.nsimplify(alpha / (sp.pi / 2))
    return ratio.is_Integer


class Chain:
    """Symbolic and numeric link transforms of one arm (DH angles, not joint readings)."""

    def __init__(self, arm: Arm):
        self.arm = arm
        self.n = arm.dof
        self.parameters: dict[sp.Symbol, sp.Expr] = {}
        self.parameter_circles: list[tuple[sp.Symbol, sp.Symbol]] = []
        self.lengths: list[tuple[sp.Expr, sp.Expr]] = []
        self.twists: list[tuple[sp.Expr, sp.Expr]] = []
        for joint in arm.joints:
            pair = []
            for field in ("a", "d"):
                value = getattr(joint, field)
                if value == 0:
                    pair.append(sp.Integer(0))
                else:
                    symbol = sp.Symbol(f"{field}_{joint.index}", real=True)
                    self.parameters[symbol] = value
                    pair.append(symbol)
            self.lengths.append(tuple(pair))
            if _exact_quarter_turn(joint.alpha):
                self.twists.append((sp.cos(joint.alpha), sp.sin(joint.alpha)))
            else:
                ca, sa = sp.Symbol(f"ca_{joint.index}", real=True), sp.Symbol(f"sa_{joint.index}", real=True)
                self.parameters[ca], self.parameters[sa] = sp.cos(joint.alpha), sp.sin(joint.alpha)
                self.parameter_circles.append((ca, sa))
                self.twists.append((ca, sa))
        self.unknowns = [Unknown.joint(j.index, prismatic=not j.revolute) for j in arm.joints]
        self.length_scale = arm.reach_scale()
        self._a = np.array([float(j.a) for j in arm.joints])
        self._d = np.array([float(j.d) for j in arm.joints])
        self._alpha = np.array([float(j.alpha) for j in arm.joints])
        self._theta = np.array([float(j.theta) for j in arm.joints])
        self.prismatic = np.array([not j.revolute for j in arm.joints])

    # ------------------------------------------------------------------ symbolic
    def link(self, joint: int, cos=None, sin=None, length=None) -> sp.Matrix:
        """A_joint with the given cosine and sine of its DH angle, or for a prismatic joint the given
        displacement (default: the joint's symbols). ``cos``/``sin`` given for a prismatic joint ask
        for its reading-0 displacement (d + offset)."""
        u = self.unknowns[joint - 1]
        a, d = self.lengths[joint - 1]
        ca, sa = self.twists[joint - 1]
        spec = self.arm.joints[joint - 1]
        if u.prismatic:
            if length is None:
                length = (spec.d + spec.offset) if cos is not None else u.length
            return link_from_cos_sin(self.arm.convention, a, ca, sa, length, sp.cos(spec.theta), sp.sin(spec.theta))
        return link_from_cos_sin(self.arm.convention, a, ca, sa, d,
                                 u.cos if cos is None else cos, u.sin if sin is None else sin)

    def factor(self, joint: int, inverse: bool, at_zero: bool = False) -> sp.Matrix:
        """A_joint or its inverse; ``at_zero`` puts the joint variable at 0 (for a joint that cancels)."""
        key = (joint, inverse, at_zero)
        cache = self.__dict__.setdefault("_factor_cache", {})
        if key not in cache:
            if not at_zero:
                link = self.link(joint)
            elif self.unknowns[joint - 1].prismatic:
                link = self.link(joint, length=sp.Integer(0))
            else:
                link = self.link(joint, sp.Integer(1), sp.Integer(0))
            cache[key] = inverse_transform(link) if inverse else link
        return cache[key]

    @cached_property
    def circles(self) -> list[tuple[sp.Symbol, sp.Symbol]]:
        """Every (cos, sin) pair the reduction knows: revolute joints, then symbolic twists."""
        return [(u.cos, u.sin) for u in self.unknowns if not u.prismatic] + list(self.parameter_circles)

    def stroke(self, joint: int) -> tuple[float, float]:
        """The DH displacement range of a prismatic joint: d + offset + direction * limits."""
        spec = self.arm.joints[joint - 1]
        ends = [float(spec.d + spec.offset) + spec.direction * v for v in spec.limits]
        return min(ends), max(ends)

    # ------------------------------------------------------------------ numeric
    def random_variables(self, rng, count: int) -> np.ndarray:
        """(count, n) joint variables: uniform angles, displacements uniform within the stroke."""
        values = rng.uniform(-np.pi, np.pi, (count, self.n))
        for j in np.nonzero(self.prismatic)[0]:
            low, high = self.stroke(j + 1)
            values[:, j] = rng.uniform(low, high, count)
        return values

    def step(self, joint: int) -> float:
        """A change of joint ``joint``'s variable that moves everything that depends on it."""
        return 0.37 * self.length_scale if self.prismatic[joint - 1] else 0.7

    def numeric_links(self, angles: np.ndarray) -> np.ndarray:
        """(..., n, 4, 4) link transforms for joint variables of shape (..., n): the DH angle of a
        revolute joint, the DH displacement d of a prismatic one."""
        values = np.asarray(angles, dtype=float)
        angles = np.where(self.prismatic, self._theta, values)
        d = np.where(self.prismatic, values, np.broadcast_to(self._d, angles.shape))
        return numeric_links(self.arm.convention == "standard", self._a, self._alpha, d, angles)

    def numeric_core(self, angles: np.ndarray) -> np.ndarray:
        """(N, 4, 4): the product A1 ... An (the pose with base and tool removed)."""
        links = self.numeric_links(angles)
        result = np.broadcast_to(np.eye(4), links.shape[:-3] + (4, 4)).copy()
        for k in range(self.n):
            result = result @ links[..., k, :, :]
        return result

    def axis_frames(self, angles: np.ndarray) -> np.ndarray:
        """(N, n, 4, 4): for each joint, a frame whose z axis is the joint's axis (in the DH base)."""
        links = self.numeric_links(angles)
        frames = [np.broadcast_to(np.eye(4), links.shape[:-3] + (4, 4))]
        for k in range(self.n):
            frames.append(frames[-1] @ links[..., k, :, :])
        chosen = frames[:-1] if self.arm.convention == "standard" else frames[1:]
        return np.stack(chosen, axis=-3)


def numeric_inverse(matrix: np.ndarray) -> np.ndarray:
    """Inverse of rigid transforms (..., 4, 4)."""
    out = np.zeros_like(matrix)
    rotation = np.swapaxes(matrix[..., :3, :3], -1, -2)
    out[..., :3, :3] = rotation
    out[..., :3, 3] = -np.einsum("...ij,...j->...i", rotation, matrix[..., :3, 3])
    out[..., 3, 3] = 1.0
    return out
