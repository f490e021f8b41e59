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


@pytest.mark.parametrize("tolerance", [1e-4, 5e-3, 1e-6, 1e-15])
def test_unit_band_is_the_abs_test_exactly(tolerance):
    """The generated Python tests `hq < lo or hq > hi` where the C solver tests
    `fabs(hq - 1) > tolerance`; the two must agree on every float, or the two solvers would
    normalise or reject different pairs (they are compared bit for bit in test_limits_nearest.py).
    Checked here on every float within 200 steps of each bound, of 1 -+ tolerance, of 0.5 and 2
    (where hq - 1 stops being exact: Sterbenz's lemma, Goldberg, "What every computer scientist
    should know about floating-point arithmetic", ACM Computing Surveys 23(1), 1991, theorem 11),
    on far values and on NaN and the infinities, against the abs() test evaluated by Python."""
    import math

    from ikgen.backends.python import unit_band
    lo, hi = (float(x) for x in unit_band(tolerance))
    assert lo < 1.0 < hi
    checked = 0
    for anchor in (lo, hi, 1.0 - tolerance, 1.0 + tolerance, 0.5, 2.0, 1.0):
        for direction in (math.inf, -math.inf):
            value = anchor
            for _ in range(200):
                assert (abs(value - 1.0) > tolerance) == (value < lo or value > hi), value
                value = math.nextafter(value, direction)
                checked += 1
    for value in (0.0, -0.0, -1.0, 3.0, 1e300, -1e300, math.inf, -math.inf, math.nan, 5e-324):
        assert (abs(value - 1.0) > tolerance) == (value < lo or value > hi), value
    assert checked == 7 * 2 * 200
