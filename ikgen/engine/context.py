"""What a derivation is built from: the arm, its chain, the pool, names, samples and the pose.

``Setup`` is handed to every strategy; a strategy adds identities, group coordinates or labels
to it and never writes steps of its own beyond the named points it introduces.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import sympy as sp

from ..ir import Compute, Label
from ..model import Arm
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
    analysis: list[str] = field(default_factory=list)
    strategies: list[str] = field(default_factory=list)
    point_names: dict = field(default_factory=dict)   # name -> 4x1 symbols of points known from the pose
    extra_unknowns: list = field(default_factory=list)  # sums of parallel-axis angles

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


def make_setup(arm: Arm) -> Setup:
    chain = Chain(arm)
    samples = Samples(chain)
    names = Names(chain, samples)
    pool = Pool(chain)
    pose = sp.symbols(" ".join(POSE_NAMES), real=True)
    setup = Setup(arm, chain, pool, samples, names, pose, sp.eye(4))
    rotation, position = setup.world_pose()
    base_inv = inverse_transform(sp.Matrix(arm.base))
    tool_inv = inverse_transform(sp.Matrix(arm.tool))
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


def core_inverse_numeric(chain: Chain):
    return lambda angles: numeric_inverse(chain.numeric_core(angles))
