"""The generated Python solver's readings-only call, inverse_joints, against its full inverse.

inverse_joints is a second rendering of the same closed form without labels, conditioning, flags
or limits (ikgen/backends/python.py, templates/python_solver.py.j2): for every demo arm it must
return exactly the readings inverse(pose, limits="ignore") returns, in the same order. The poses
come from the forward kinematics (ikgen.kinematics, checked in tests/test_kinematics.py against
the DH transform of Craig, Introduction to Robotics, 3rd ed., sec. 3.4).
"""

from __future__ import annotations

import numpy as np
import pytest

from helpers import EXAMPLES
from ikgen.generate import load_module
from ikgen.kinematics import NumericChain
from ikgen.verify import given_of, random_readings

DEMOS = sorted(p for p in EXAMPLES.iterdir() if p.suffix in (".toml", ".json"))


@pytest.mark.parametrize("path", DEMOS, ids=[p.stem for p in DEMOS])
def test_inverse_joints_returns_the_readings_of_inverse(path, built):
    result = built(path)
    module = load_module(result.files[result.python_path], f"{path.stem}_lean_under_test")
    arm = result.arm
    chain = NumericChain(arm)
    readings = random_readings(arm, 300, np.random.default_rng(31))
    poses = chain.poses(readings)
    poses[::10, :3, 3] += 10.0 * arm.reach_scale()                 # some out of reach
    for source, pose in zip(readings, poses):
        given = given_of(arm, source)
        full = [s[0] for s in module.inverse(pose.tolist(), *given, limits="ignore")]
        assert module.inverse_joints(pose.tolist(), *given) == full
    for bad in (np.full((4, 4), np.nan), np.where(np.eye(4) > 0, 1e200, 0.0)):
        assert module.inverse_joints(bad.tolist(), *given_of(arm, readings[0])) == []
