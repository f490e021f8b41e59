"""The derivation engine on randomly drawn arms of each structure it recognises, against an
independent numerical enumeration, and general arms that must be refused.

For each structure, hypothesis draws arms (random lengths and offsets, random signs of the
right-angle twists, general twists where the structure allows them, both DH conventions) and the
test checks, with the generated Python solver:

- ikgen.verify on seeded samples: every source configuration is among the solutions (away from
  singular sets) and every solution reproduces its pose (round trip);
- an independent enumeration: scipy.optimize.least_squares from many random starts on the pose
  equation (the outside reference: a general-purpose numerical solver that knows nothing of the
  derivation) finds no solution that the closed form lacks.

Structures (the closed forms they stand for are published; the engine derives them itself):
- three consecutive parallel axes with an offset wrist (the shoulder-elbow-first-wrist layout;
  the planar subchain as in Murray, Li and Sastry, A Mathematical Introduction to Robotic
  Manipulation, 1994, ch. 3);
- a spherical wrist with general (skew) twists in the first three links: the position part needs
  Pieper's elimination to a quartic (Pieper, PhD thesis, Stanford 1968; Craig, Introduction to
  Robotics, 3rd ed., sec. 4.6);
- the first three axes meeting in a point, the last three general (the same reduction turned around);
- general arms (no three axes meeting, no three parallel): refused with the structures tried.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from scipy.optimize import least_squares

from helpers import build_arm, joint, pose_error_functions
from ikgen.backends import python as python_backend
from ikgen.engine import derive
from ikgen.errors import StructureError
from ikgen.generate import load_module
from ikgen.kinematics import NumericChain
from ikgen.verify import angle_gap, verify

SETTINGS = settings(max_examples=3, deadline=None, derandomize=True,
                    suppress_health_check=[HealthCheck.too_slow, HealthCheck.function_scoped_fixture])
LIMITS = [-180, 180]


def length(rng, low=0.05, high=0.5) -> float:
    return round(float(rng.uniform(low, high)), 3)


def right(rng) -> int:
    return int(rng.choice([-90, 90]))


def skew(rng) -> int:
    """A general twist: not a multiple of 15 deg."""
    value = int(rng.integers(20, 71))
    value += 1 if value % 15 == 0 else 0
    return value * int(rng.choice([-1, 1]))


def parallel_arm(rng, convention: str):
    """Axes 2, 3, 4 parallel, wrist axes offset (the last three do not meet)."""
    L = lambda: length(rng)
    if convention == "standard":
        joints = [joint("r", a=0, alpha=right(rng), d=L()), joint("r", a=L(), alpha=0, d=0),
                  joint("r", a=L(), alpha=0, d=0), joint("r", a=0, alpha=right(rng), d=L()),
                  joint("r", a=0, alpha=right(rng), d=L()), joint("r", a=0, alpha=0, d=L())]
    else:
        joints = [joint("r", a=0, alpha=0, d=L()), joint("r", a=0, alpha=right(rng), d=0),
                  joint("r", a=L(), alpha=0, d=0), joint("r", a=L(), alpha=0, d=L()),
                  joint("r", a=0, alpha=right(rng), d=L()), joint("r", a=0, alpha=right(rng), d=L())]
    return build_arm([dict(j, limits=LIMITS) for j in joints], convention=convention, length_unit="m",
                     angle_unit="deg")


def skew_shoulder_arm(rng, convention: str):
    """A spherical wrist at the end, general twists between axes 1-2 and 2-3, all offsets non-zero."""
    L = lambda: length(rng)
    if convention == "standard":
        joints = [joint("r", a=L(), alpha=skew(rng), d=L()), joint("r", a=L(), alpha=skew(rng), d=L()),
                  joint("r", a=length(rng, 0.01, 0.1), alpha=right(rng), d=0), joint("r", a=0, alpha=right(rng), d=L()),
                  joint("r", a=0, alpha=right(rng), d=0), joint("r", a=0, alpha=0, d=L())]
    else:
        joints = [joint("r", a=0, alpha=0, d=L()), joint("r", a=L(), alpha=skew(rng), d=L()),
                  joint("r", a=L(), alpha=skew(rng), d=0), joint("r", a=length(rng, 0.01, 0.1), alpha=right(rng), d=L()),
                  joint("r", a=0, alpha=right(rng), d=0), joint("r", a=0, alpha=right(rng), d=L())]
    return build_arm([dict(j, limits=LIMITS) for j in joints], convention=convention, length_unit="m",
                     angle_unit="deg")


def base_centre_arm(rng):
    """Axes 1, 2, 3 meet (standard DH: a1 = a2 = d2 = 0), the last three general."""
    L = lambda: length(rng)
    joints = [joint("r", a=0, alpha=right(rng), d=L()), joint("r", a=0, alpha=right(rng), d=0),
              joint("r", a=L(), alpha=skew(rng), d=0), joint("r", a=L(), alpha=skew(rng), d=L()),
              joint("r", a=length(rng, 0.01, 0.1), alpha=right(rng), d=L()), joint("r", a=0, alpha=0, d=L())]
    return build_arm([dict(j, limits=LIMITS) for j in joints], convention="standard", length_unit="m",
                     angle_unit="deg")


def general_arm(rng, convention: str):
    """Every twist general, every length non-zero: no structure the engine knows."""
    joints = [joint("r", a=length(rng), alpha=skew(rng), d=length(rng)) for _ in range(6)]
    return build_arm([dict(j, limits=LIMITS) for j in joints], convention=convention, length_unit="m",
                     angle_unit="deg")


# ----------------------------------------------------------------------------- the reference

def least_squares_solutions(chain: NumericChain, target, rng, starts: int = 40) -> list[np.ndarray]:
    """Every distinct joint vector (degrees, one turn) that scipy's least_squares reaches from random
    starts with a residual below 1e-12 (its Jacobian by forward differences, helpers.pose_error_functions)."""
    scale = chain.arm.reach_scale()
    fun, jac = pose_error_functions(chain, target, scale)
    found: list[np.ndarray] = []
    for start in rng.uniform(-180, 180, (starts, chain.arm.dof)):
        fit = least_squares(fun, start, jac=jac, xtol=1e-15, ftol=1e-15, gtol=1e-15, max_nfev=400)
        if np.max(np.abs(fit.fun)) > 1e-9:
            continue
        q = (fit.x + 180.0) % 360.0 - 180.0
        if not any(np.max(np.abs((q - f + 180.0) % 360.0 - 180.0)) < 1e-5 for f in found):
            found.append(q)
    return found


def check_against_reference(arm, derivation, samples: int = 300, poses: int = 2, seed: int = 0) -> None:
    """``derivation`` is derive(arm), which the caller has just checked (derived once, not twice)."""
    module = load_module(python_backend.render(arm, derivation), "random_arm_solver")
    report = verify(arm, module, samples=samples, seed=seed)
    assert report.passed, report.failures
    assert report.complete == report.checked > 0.9 * samples
    chain = NumericChain(arm)
    rng = np.random.default_rng(seed)
    for readings in rng.uniform(-170, 170, (poses, arm.dof)):
        target = chain.pose(readings)
        ours = np.array([s[0] for s in module.inverse(target, limits="ignore")])
        assert len(ours), f"no solution for the pose of {readings}"
        found = least_squares_solutions(chain, target, rng)
        assert found, "the numerical reference found no solution of a reachable pose"
        for q in found:
            gap = angle_gap(ours, q, arm).max(axis=1).min()
            assert gap < 1e-5, f"least_squares found {q}, {math.degrees(gap):.3g} deg from every closed-form solution"


# ----------------------------------------------------------------------------- the structures

@SETTINGS
@given(seed=st.integers(0, 2 ** 32 - 1), convention=st.sampled_from(["standard", "modified"]))
def test_three_parallel_axes_with_an_offset_wrist(seed, convention):
    arm = parallel_arm(np.random.default_rng(seed), convention)
    derivation = derive(arm)
    assert "parallel axes" in derivation.family
    assert any(not k.isdigit() for k in derivation.solved_keys())      # the sum of the run's angles
    check_against_reference(arm, derivation)


@SETTINGS
@given(seed=st.integers(0, 2 ** 32 - 1), convention=st.sampled_from(["standard", "modified"]))
def test_skew_shoulder_with_a_spherical_wrist_goes_through_a_quartic(seed, convention):
    arm = skew_shoulder_arm(np.random.default_rng(seed), convention)
    derivation = derive(arm)
    assert "wrist centre" in derivation.family
    assert any(type(s).__name__ == "CirclePolynomial" for s in derivation.steps)
    check_against_reference(arm, derivation)


@SETTINGS
@given(seed=st.integers(0, 2 ** 32 - 1))
def test_first_three_axes_meeting(seed):
    arm = base_centre_arm(np.random.default_rng(seed))
    derivation = derive(arm)
    assert "base centre" in derivation.family
    check_against_reference(arm, derivation)


@SETTINGS
@given(seed=st.integers(0, 2 ** 32 - 1), convention=st.sampled_from(["standard", "modified"]))
def test_general_arms_are_refused_with_the_structures_tried(seed, convention):
    arm = general_arm(np.random.default_rng(seed), convention)
    with pytest.raises(StructureError) as caught:
        derive(arm)
    message = str(caught.value)
    for structure in ("wrist centre", "base centre", "parallel axes"):
        assert structure in message
    assert "apart" in message and "nothing was written" in message
    assert caught.value.exit_code == 3
