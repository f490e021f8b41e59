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


def scalar_bisection(chain, measure, base, joint):
    """The one-bracket-at-a-time bisection (as verify did it before the brackets were halved in
    step): the reference for bisect_roots."""
    from ikgen.verify import bracket_root
    found = bracket_root(chain, measure, base, joint)
    if found is None or isinstance(found, np.ndarray):
        return found
    lo, hi, f_lo = found.lo, found.hi, found.f_lo
    for _ in range(200):
        mid = 0.5 * (lo + hi)
        point = base.copy()
        point[joint] = mid
        f_mid = measure(chain, point[None, :])[0]
        if f_mid == 0 or hi - lo < 1e-15 * max(1.0, abs(mid)):
            break
        if np.sign(f_mid) == np.sign(f_lo):
            lo, f_lo = mid, f_mid
        else:
            hi = mid
    point = base.copy()
    point[joint] = 0.5 * (lo + hi)
    return point


def test_brackets_halved_in_step_give_bitwise_the_roots_of_one_at_a_time(good):
    """bisect_roots evaluates the measure on every open bracket in one numpy call per halving; each
    bracket's arithmetic is the scalar bisection's, so the roots agree to the last bit."""
    from ikgen.kinematics import NumericChain
    from ikgen.verify import Bracket, bisect_roots, bracket_root, label_measure, label_specs, random_readings, singular_kind
    arm, _ = good
    chain = NumericChain(arm)
    rng = np.random.default_rng(7)
    compared = 0
    for spec in label_specs(arm):      # wrist_bend's zero lies on the grid (joint 5 at 0): no bracket to halve
        joint = singular_kind(spec)[1][0]          # the joint verify moves first onto this singular set
        measure = label_measure(spec.name)
        bases = random_readings(arm, 30, rng)
        brackets = [b for b in (bracket_root(chain, measure, base, joint) for base in bases) if isinstance(b, Bracket)]
        compared += len(brackets)
        together = bisect_roots(chain, measure, brackets)
        for bracket, root in zip(brackets, together):
            assert np.array_equal(root, scalar_bisection(chain, measure, bracket.base, joint))
            assert abs(measure(chain, root[None, :])[0]) < 1e-9 * arm.reach_scale() ** 2
    assert compared >= 50


def test_completeness_is_counted_over_all_samples_at_once(good):
    """check_completeness on made-up solutions: a sample whose source is found, one whose source is
    missing, one with no solution, one too near the singular set to count; a revolute reading off by
    a full turn still matches (angles modulo 2 pi)."""
    from ikgen.verify import Verification, check_completeness
    arm, _ = good
    readings = np.array([[10.0, 20, 30, 40, 50, 60], [1.0, 2, 3, 4, 5, 6], [5.0] * 6, [7.0] * 6])
    distance = np.array([1.0, 1.0, 1.0, 1e-9])
    joints = [[10.0 + 360, 20, 30, 40, 50, 60], [0.0] * 6,            # sample 0: found (a turn away)
              [1.0, 2, 3, 4, 5, 7], [9.0] * 6,                      # sample 1: missing (joint 6 off)
              [0.0] * 6]                                            # sample 3: near singular, not counted
    result = Verification(arm=arm.name, samples=4, seed=0)
    missing = check_completeness(arm, result, readings, distance, joints, np.array([2, 2, 0, 1]))
    assert (result.checked, result.complete) == (3, 1)
    assert [list(m) for m in missing] == [list(readings[1]), list(readings[2])]


def test_band_bookkeeping_at_once_equals_solution_by_solution():
    """record_round_trips and smallest_measures work on whole arrays; entered one solution at a
    time with the scalar rules (contract_bound, band_of, smallest_measure) the bands are the same,
    measures on every band floor and the contract's switch included."""
    from ikgen.verify import (Band, Verification, band_of, contract_bound, record_round_trips,
                              smallest_measure, smallest_measures)
    rng = np.random.default_rng(5)
    edges = [0.0, 1e-9, 1e-8, 1e-6, 1e-3, math.inf, 5e-7, 2e-3]
    measures = np.concatenate([edges, 10.0 ** rng.uniform(-12, 1, 500)])
    pos, rot = rng.uniform(0, 1e-6, len(measures)), rng.uniform(0, 1e-9, len(measures))
    result = Verification(arm="a", samples=1, seed=0, position_tolerance=1e-7)
    share = record_round_trips(result, list(measures), pos, rot, 100.0)
    bands: dict = {}
    for m, p, r in zip(measures, pos, rot):
        bound = contract_bound(m)
        k = max(p / (bound * 100.0), r / bound)
        band = bands.setdefault(band_of(m), Band())
        band.solutions += 1
        band.worst_position = max(band.worst_position, p)
        band.worst_rotation = max(band.worst_rotation, r)
        band.worst_share = max(band.worst_share, k)
    assert result.bands == bands and len(bands) == 4
    assert share.tolist() == [max(p / (contract_bound(m) * 100.0), r / contract_bound(m))
                              for m, p, r in zip(measures, pos, rot)]
    solutions = [((0.0,), (), False, (a, b)) for a, b in rng.uniform(0, 1, (20, 2))]
    assert smallest_measures(solutions) == [smallest_measure(s) for s in solutions]
    odd = [((0.0,), (), False, ()), ((0.0,), (), False), ((0.0,), (), False, (0.5,))]
    assert smallest_measures(odd) == [math.inf, math.inf, 0.5]
