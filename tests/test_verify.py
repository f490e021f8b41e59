"""ikgen.verify.verify must pass a good solver and catch broken ones.

The broken solvers wrap a good generated module and damage its answers in one known way each;
verify must name the matching failure (and, where the damage leaves the other checks intact,
only that one). The arm is the invented demo arm benchtop6, derived once for the module.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

import shared
from helpers import demo_arm
from ikgen.generate import load_module
from ikgen.verify import verify

SAMPLES = 300


@pytest.fixture(scope="module")
def good():
    arm = demo_arm("benchtop6")
    return arm, load_module(shared.python_source(arm), "benchtop6_ik")


class Wrapped:
    """A solver whose inverse() is the good one's passed through ``damage(pose, solutions)``."""

    def __init__(self, module, damage):
        self.module = module
        self.damage = damage
        self.LABEL_NAMES = module.LABEL_NAMES

    def inverse(self, pose, current=None):
        return self.damage(np.asarray(pose), list(self.module.inverse(pose, current)))


def kinds(report) -> set[str]:
    """Short names of the failures in a report."""
    out = set()
    for failure in report.failures:
        for key in ("completeness", "round-trip position", "round-trip rotation", "unreachable",
                    "NaN or infinity", "singular poses"):
            if key in failure:
                out.add(key)
    return out


def test_good_solver_passes(good):
    arm, module = good
    report = verify(arm, module, samples=SAMPLES, seed=5)
    assert report.passed, report.failures
    assert report.failures == []
    assert report.checked > 0.9 * SAMPLES and report.complete == report.checked
    assert sum(report.counts.values()) == SAMPLES
    assert max(report.counts) <= module.MAX_SOLUTIONS and min(report.counts) >= 1
    assert report.worst_position <= report.position_tolerance and report.worst_rotation <= 1e-9
    assert report.unreachable_ok == report.unreachable_tested > 0
    assert all(report.singular_ok[k] == t for k, t in report.singular_tested.items())
    assert sum(report.singular_tested.values()) > 0


@pytest.mark.parametrize("dropped", ["last", "first"])
def test_dropping_a_solution_fails_completeness(good, dropped):
    arm, module = good
    broken = Wrapped(module, (lambda pose, s: s[:-1]) if dropped == "last" else (lambda pose, s: s[1:]))
    report = verify(arm, broken, samples=SAMPLES, seed=5)
    assert not report.passed
    assert "completeness" in kinds(report)
    assert report.complete < report.checked
    # what is returned is still right: no round-trip failure
    assert not {"round-trip position", "round-trip rotation"} & kinds(report)


def test_a_wrong_solution_fails_the_round_trip(good):
    arm, module = good

    def add_perturbed(pose, solutions):
        if not solutions:
            return solutions
        joints, config, singular, *rest = solutions[0]
        wrong = list(joints)
        wrong[1] += 0.01                       # a hundredth of a degree on joint 2
        return solutions + [type(solutions[0])((tuple(wrong), config, singular, *rest))]

    report = verify(arm, Wrapped(module, add_perturbed), samples=SAMPLES, seed=5)
    assert not report.passed
    assert "round-trip position" in kinds(report)
    assert "completeness" not in kinds(report)        # the right solutions are all still there
    # 0.01 deg at the shoulder moves the tool by about reach * 1.7e-4 rad
    assert report.worst_position > 1e3 * report.position_tolerance


def test_a_wrong_orientation_fails_the_rotation_round_trip(good):
    arm, module = good

    def turn_flange(pose, solutions):
        return [type(s)((tuple(s[0][:5]) + (s[0][5] + 0.001,), s[1], s[2])) for s in solutions]

    report = verify(arm, Wrapped(module, turn_flange), samples=SAMPLES, seed=5)
    assert "round-trip rotation" in kinds(report)
    assert report.worst_rotation == pytest.approx(math.radians(0.001), rel=1e-3)


def test_solutions_for_unreachable_poses_fail(good):
    arm, module = good

    def invent(pose, solutions):
        return solutions or [((0.0,) * 6, ("reach_forward", "elbow_up", "bend_positive"), False)]

    report = verify(arm, Wrapped(module, invent), samples=SAMPLES, seed=5)
    assert not report.passed
    assert "unreachable" in kinds(report)
    assert "NaN or infinity" in kinds(report)
    assert report.unreachable_ok == 0


def test_no_answer_at_singular_poses_fails(good):
    arm, module = good

    def refuse_singular(pose, solutions):
        return [] if any(s[2] for s in solutions) else solutions

    report = verify(arm, Wrapped(module, refuse_singular), samples=SAMPLES, seed=5)
    assert "singular poses" in kinds(report)


def test_non_finite_answers_at_singular_poses_fail(good):
    arm, module = good

    def nan_when_singular(pose, solutions):
        return [type(s)(((math.nan,) * 6, s[1], s[2])) if s[2] else s for s in solutions]

    report = verify(arm, Wrapped(module, nan_when_singular), samples=SAMPLES, seed=5)
    assert "singular poses" in kinds(report)
