"""ikgen.model.Arm.equivalent_readings: how many readings within a joint's limits give one angle.

Reference: arithmetic by hand. A revolute range [lo, hi] wider than one turn T holds the
readings q + kT of an angle; at most floor((hi - lo) / T) + 1 of them. Every joint at
-400..400 deg: floor(800 / 360) + 1 = 3 per joint, 3**6 = 729 per closed-form solution. The
generated solvers' turn tables (backends.common.joint_turns) must count the same.
"""

from __future__ import annotations


import pytest

from helpers import EXAMPLES, build_arm, joint
from ikgen.armfile import load_arm
from ikgen.backends.common import joint_turns


def arm_with_limits(limits, unit="deg"):
    return build_arm([joint("r", a=1, alpha=0, d=0, limits=list(l)) for l in limits], angle_unit=unit)


@pytest.mark.parametrize("limits, counts", [
    ([(-400, 400)] * 6, [3] * 6),
    ([(-180, 180), (-360, 360), (0, 360), (-90, 90)], [1, 3, 1, 1]),      # exactly one turn counts once
    ([(-181, 180), (-720, 720)], [2, 5]),
])
def test_counts_by_hand(limits, counts):
    arm = arm_with_limits(limits)
    assert arm.equivalent_readings() == counts
    assert [t.count for t in joint_turns(arm)] == counts


def test_radians_and_prismatic_joints():
    arm = build_arm([joint("r", a=1, limits=["-2*pi", "2*pi"]), joint("p", a=0, alpha=0, d=0, limits=[0, 500])],
                    angle_unit="rad")
    assert arm.equivalent_readings() == [3, 1]
    assert [t.count for t in joint_turns(arm)] == [3, 1]


def test_demo_arms_agree_with_the_turn_tables():
    for path in sorted(EXAMPLES.glob("*.[tj]*")):
        if path.suffix not in (".toml", ".json"):
            continue
        arm = load_arm(path)
        assert arm.equivalent_readings() == [t.count for t in joint_turns(arm)]
