"""What a derivation is built from: the arm, its chain, the pool, names, samples and the pose.

``Setup`` is handed to every strategy; a strategy adds identities, group coordinates or labels
to it and never writes steps of its own beyond the named points it introduces.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import sympy as sp

from ..ir import Compute, Label
from ..model import Arm, Target
from ..rotations import inverse_transform
from .chain import Chain, numeric_inverse
from .names import Names, Samples
from .pool import Factor, Identity, Pool

POSE_NAMES = ("r11", "r12", "r13", "px", "r21", "r22", "r23", "py", "r31", "r32", "r33", "pz")
CORE_NAMES = ("rc11", "rc12", "rc13", "pcx", "rc21", "rc22", "rc23", "pcy", "rc31", "rc32", "rc33", "pcz")


@dataclass
class Setup:
    arm: Arm
    chain: Chain
    pool: Pool
    samples: Samples
    names: Names
    pose: tuple                                  # the 12 pose symbols (world pose, row-major 3x4)
    core: sp.Matrix                              # 4x4: target with base and tool removed, in symbols
    steps: list = field(default_factory=list)    # Compute steps every solver starts with
    labels: list[Label] = field(default_factory=list)
    label_points: dict = field(default_factory=dict)  # named points strategies offer the labels
    analysis: list[str] = field(default_factory=list)
    strategies: list[str] = field(default_factory=list)
    point_names: dict = field(default_factory=dict)   # name -> 4x1 symbols of points known from the pose
    extra_unknowns: list = field(default_factory=list)  # sums of parallel-axis angles
    target: Target | None = None
    point_identity: object = None                # the tool point's identity (point targets)
    direction_identity: object = None            # the directed tool axis's identity

    @property
    def pose_identity(self) -> Identity:
        return self.pool.identities[0]

    def world_pose(self) -> tuple[sp.Matrix, sp.Matrix]:
        r11, r12, r13, px, r21, r22, r23, py, r31, r32, r33, pz = self.pose
        return sp.Matrix([[r11, r12, r13], [r21, r22, r23], [r31, r32, r33]]), sp.Matrix([px, py, pz])

    def add_known_point(self, prefix: str, point_core: sp.Matrix, purpose: str, numeric) -> sp.Matrix:
        """A point computed from the pose (``point_core`` in core symbols) as a named Compute."""
        names = sp.symbols(f"{prefix}x {prefix}y {prefix}z", real=True)
        self.steps.append(Compute(tuple(names), tuple(sp.expand(e) for e in point_core[:3, 0]), purpose))
        for symbol, column in zip(names, numeric(self.samples.angles).T[:3]):
            self.samples.define(symbol, column)
        known = sp.Matrix([*names, 1])
        self.point_names[prefix] = known
        return known


def make_setup(arm: Arm, target: Target) -> Setup:
    """The chain, samples and the identities of the target: the pose identity for a pose (or a
    point and an angle, whose pose the solver builds), a point identity for the tool point, and a
    direction identity for a directed tool axis."""
    chain = Chain(arm)
    samples = Samples(chain)
    names = Names(chain, samples)
    pool = Pool(chain)
    pose = sp.symbols(" ".join(POSE_NAMES), real=True)
    setup = Setup(arm, chain, pool, samples, names, pose, sp.eye(4), target=target)
    rotation, position = setup.world_pose()
    base_inv = inverse_transform(sp.Matrix(arm.base))
    tool = sp.Matrix(arm.tool)
    if target.kind in ("pose", "point_and_angle"):
        tool_inv = inverse_transform(tool)
        world = sp.Matrix(rotation).row_join(position).col_join(sp.Matrix([[0, 0, 0, 1]]))
        core = base_inv * world * tool_inv
        if core == world:
            setup.core = world
        else:
            symbols = sp.Matrix(3, 4, sp.symbols(" ".join(CORE_NAMES), real=True))
            setup.steps.append(Compute(tuple(symbols), tuple(sp.expand(e) for e in core[:3, :]),
                                       "target in the DH base frame (base and tool removed): base^-1 T tool^-1"))
            setup.core = symbols.col_join(sp.Matrix([[0, 0, 0, 1]]))
        identity = Identity("pose", tuple(Factor(j.index, False) for j in arm.joints), setup.core, "T",
                            numeric_known=chain.numeric_core, prefix="g")
        pool.add_identity(identity)
        names.register_known(identity)
        return setup
    factors = tuple(Factor(j.index, False) for j in arm.joints)
    point = base_inv[:3, :3] * position + base_inv[:3, 3]
    known = _named_vector(setup, point, ("pcx", "pcy", "pcz"), position,
                          "target point in the DH base frame (base removed): base^-1 p")
    tool_point = tool[:, 3]
    numeric_point = np.array([float(v) for v in tool_point])
    identity = Identity("target point", factors, sp.Matrix([*known, 1]), "p", body=tool_point, body_words="t",
                        numeric_known=lambda angles: chain.numeric_core(angles) @ numeric_point, prefix="q")
    pool.add_identity(identity)
    names.register_known(identity)
    setup.point_identity = identity
    if target.kind == "point_and_direction":
        k = "xyz".index(target.tool_axis)
        column = rotation[:, k]
        direction = base_inv[:3, :3] * column
        known = _named_vector(setup, direction, tuple(f"rc{r}{k + 1}" for r in (1, 2, 3)), column,
                              f"directed tool axis ({target.tool_axis}) in the DH base frame (base removed)")
        body = sp.Matrix([*tool[:3, k], 0])
        numeric_body = np.array([float(v) for v in body])
        identity = Identity("tool direction", factors, sp.Matrix([*known, 0]), "u", body=body,
                            body_words=f"e{target.tool_axis}", prefix="n",
                            numeric_known=lambda angles: chain.numeric_core(angles) @ numeric_body)
        pool.add_identity(identity)
        names.register_known(identity)
        setup.direction_identity = identity
    return setup


def _named_vector(setup: Setup, value: sp.Matrix, names: tuple, plain: sp.Matrix, purpose: str) -> list:
    """``value`` as three named symbols (a Compute step) unless it is the pose's own entries."""
    if list(value) == list(plain):
        return list(plain)
    symbols = sp.symbols(" ".join(names), real=True)
    setup.steps.append(Compute(tuple(symbols), tuple(sp.expand(e) for e in value), purpose))
    return list(symbols)


def core_inverse_numeric(chain: Chain):
    return lambda angles: numeric_inverse(chain.numeric_core(angles))
