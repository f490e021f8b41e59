"""Issue 6: solutions a user can act on. Joint limits and multi-turn joints, the nearest solution
and configuration filters, the geometric meaning of the configuration labels, paths without
jumps, the kept joint at exactly singular poses, the conditioning measures, and the C back-end
making the same choices as the Python one.

Outside references (named again beside each check):
- [SHV] M. W. Spong, S. Hutchinson, M. Vidyasagar, *Robot Modeling and Control*, 1st ed., 2006:
  ch. 5 (inverse kinematics by decoupling at the wrist centre; the elbow-up/down and
  left/right-arm solutions), sec. 4.9 (singularities: a spherical wrist is singular when its
  middle joint lines up axes 4 and 6; the elbow arm when the elbow is fully stretched or folded,
  i.e. at sin(theta3) = 0; an arm without a shoulder offset when the wrist centre lies on axis 1,
  where joint 1 is free). Section numbers from memory.
- [SSVO] B. Siciliano, L. Sciavicco, L. Villani, G. Oriolo, *Robotics: Modelling, Planning and
  Control*, 2009, sec. 3.3 (kinematic singularities: wrist, elbow and shoulder singularities of
  the anthropomorphic arm with a spherical wrist), from memory.
- Common practice: joints with hard stops have positions, not angles modulo a turn, so a joint
  whose range exceeds a turn has several readings for one pose; controllers pick the solution
  nearest the current readings by a weighted Euclidean joint distance.
- First-order motion: a pose step dx = J dq, so |dq| <= |dx| / sigma_min(J) ([SHV] ch. 4, the
  Jacobian; G. H. Golub, C. F. Van Loan, *Matrix Computations*, 4th ed., 2013, sec. 2.4, the
  SVD; both from memory), with rotation steps measured by scipy.spatial.transform.Rotation.
- Brute force written here (enumerate q + k turns, k in range(-3, 4); minimum by enumeration)
  and the generic numeric forward kinematics (ikgen.kinematics.NumericChain, itself checked
  against textbook DH transforms in tests/test_kinematics.py) are the references of the checks.

Each arm is derived once per module (module-scoped fixture) and its C solver compiled once. Demo
arms and the extra arm below are invented.
"""

from __future__ import annotations

import itertools
import math

import numpy as np
import pytest
from scipy.spatial.transform import Rotation

import shared
from helpers import build_arm, demo_arm, joint
from ikgen.backends import c as c_backend
from ikgen.generate import load_module
from ikgen.kinematics import NumericChain
from ikgen.verify import find_root, jacobian_distance, label_measure

DEMOS = ("benchtop6", "packer6", "inspector6")
MODES = ("drop", "flag", "ignore")


# ------------------------------------------------------------------------------ fixtures

class Subject:
    """One arm: derived once; its generated Python module, numeric FK, limits, turn; C on demand."""

    def __init__(self, arm, factory):
        self.arm = arm
        self.factory = factory
        self.build = shared.built(arm)
        self.derivation = self.build.derivation
        self.py = load_module(self.build.files[self.build.python_path], f"{self.build.folder}_issue6")
        self.chain = NumericChain(arm)
        self.limits = np.array(self.py.JOINT_LIMITS, dtype=float)
        self.turn = 360.0 if self.py.ANGLE_UNIT == "deg" else 2 * math.pi
        self.scale = float(arm.angle_scale)                  # radians per reading unit
        # The API's limits tolerance (1e-9 of the range, as stated in the generated C source).
        self.slack = 1e-9 * np.maximum(1.0, self.limits[:, 1] - self.limits[:, 0])
        assert all(j.revolute for j in arm.joints)
        self._c = None

    @property
    def c(self):
        if self._c is None:
            self._c = shared.c_solver(self.arm, c_backend.DOUBLE)
        return self._c

    def readings(self, count: int, rng, margin: float = 0.0) -> np.ndarray:
        """Seeded readings within the limits (and ``margin`` of the range away from them)."""
        low, high = self.limits[:, 0], self.limits[:, 1]
        span = high - low
        return low + margin * span + rng.random((count, 6)) * span * (1 - 2 * margin)

    def within(self, q) -> bool:
        q = np.asarray(q)
        return bool(np.all((q >= self.limits[:, 0] - self.slack) & (q <= self.limits[:, 1] + self.slack)))

    def rad(self, readings):
        return np.asarray(readings, dtype=float) * self.scale

    def free_wrist_joint(self) -> int:
        """0-based index of the wrist joint (4 or 6) solved first after joint 5: the free one."""
        return [j for j in self.derivation.solved_joints() if j in (4, 6)][0] - 1

    def wrist_singular_reading(self) -> float:
        """Joint 5 reading at which its DH angle is 0 (axes 4 and 6 aligned)."""
        j5 = self.arm.joints[4]
        return -float(j5.theta + j5.offset) / (float(j5.direction) * self.scale)


def plain_shoulder_arm():
    """An invented standard-DH arm with no shoulder offset (d2 = d3 = 0), so the wrist centre can
    reach axis 1; joints 1 and 6 turn more than a turn (multi-turn)."""
    return build_arm([joint(a=0, alpha=90, d=350, limits=[-300, 300]),
                      joint(a=400, alpha=0, d=0, theta=90, limits=[-150, 150]),
                      joint(a=0, alpha=90, d=0, theta=90, limits=[-160, 160]),
                      joint(a=0, alpha=-90, d=380, limits=[-180, 180]),
                      joint(a=0, alpha=90, d=0, limits=[-130, 130]),
                      joint(a=0, alpha=0, d=90, limits=[-360, 360])],
                     length_unit="mm", angle_unit="deg", name="plain_shoulder")


@pytest.fixture(scope="module")
def subjects(tmp_path_factory):
    cache: dict[str, Subject] = {}

    def get(name: str) -> Subject:
        if name not in cache:
            arm = plain_shoulder_arm() if name == "plain_shoulder" else demo_arm(name)
            cache[name] = Subject(arm, tmp_path_factory)
        return cache[name]

    return get


# ------------------------------------------------------------------------------ helpers

def plain(solution) -> tuple:
    """A solution as plain tuples (the Python Solution class and the C tuples compare equal)."""
    joints, config, singular, conditioning, within = solution
    return (tuple(float(v) for v in joints), tuple(config), bool(singular),
            tuple(float(v) for v in conditioning), bool(within))


def weighted_distance(a, b, weights) -> float:
    """Reference: sqrt(sum_j w_j (a_j - b_j)^2) (common practice), numpy, independent code."""
    d = np.asarray(a, dtype=float) - np.asarray(b, dtype=float)
    w = np.ones(len(d)) if weights is None else np.asarray(weights, dtype=float)
    return float(np.sqrt(np.sum(w * d * d)))


def matches(subject: Subject, config, wanted) -> bool:
    """Reference configuration filter: a dict {name: value} or a sequence with None for any."""
    if wanted is None:
        return True
    if isinstance(wanted, dict):
        return all(config[subject.py.LABEL_NAMES.index(k)] == v for k, v in wanted.items())
    return all(w is None or w == c for c, w in zip(config, wanted))


def mask_to_config(subject: Subject, mask: int, value: int) -> dict:
    """A random configuration filter drawn as bits (mask: which labels are required; value: bit i
    set = the second value of label i), in the solvers' dict form."""
    names, values = subject.py.LABEL_NAMES, subject.py.LABEL_VALUES
    return {names[i]: values[i][1 if value >> i & 1 else 0] for i in range(len(names)) if mask >> i & 1}


def wrap(value, turn):
    return (np.asarray(value) + turn / 2) % turn - turn / 2


def brute_force_groups(subject: Subject, raw: list):
    """For each raw (limits="ignore") solution, every reading vector q + k turn (k in range(-3, 4)
    per joint, then the product) inside the limits. None when a candidate lies within 1e-6 of the
    range of a limit (the tolerance makes such cases ambiguous)."""
    groups = []
    for solution in raw:
        per_joint = []
        for j, q in enumerate(solution[0]):
            low, high = subject.limits[j]
            margin = 1e-6 * (high - low)
            candidates = [q + k * subject.turn for k in range(-3, 4)]
            if any(abs(c - low) < margin or abs(c - high) < margin for c in candidates):
                return None
            per_joint.append([c for c in candidates if low <= c <= high])
        groups.append(list(itertools.product(*per_joint)))
    return groups


def wrist_centre_and_axes(chain: NumericChain, readings: np.ndarray):
    """(wrist centre, axis points o (N, 6, 3), axis directions z (N, 6, 3), frames) from the FK:
    the wrist centre is where axes 4 and 5 meet (closest point of axis 4 to axis 5)."""
    frames = chain.frames(readings)
    chosen = frames[:, :-1] if chain.standard else frames[:, 1:]
    z, o = chosen[:, :, :3, 2], chosen[:, :, :3, 3]
    b = np.einsum("ni,ni->n", z[:, 3], z[:, 4])
    w0 = o[:, 3] - o[:, 4]
    d, e = np.einsum("ni,ni->n", z[:, 3], w0), np.einsum("ni,ni->n", z[:, 4], w0)
    t = (b * e - d) / (1 - b * b)
    return o[:, 3] + t[:, None] * z[:, 3], o, z, frames


def geometric_labels(chain: NumericChain, readings: np.ndarray) -> dict:
    """The quantities of the docs/derivation.md section 5 definitions, from FK frames:
    shoulder: the wrist centre's coordinate along link 1's x axis, measured from axis 1;
    ahead: the same measured from axis 2 (> 0: the wrist centre lies beyond the shoulder joint);
    above: how far the elbow (axis 3) lies from the line shoulder (axis 2) -> wrist centre, in the
    plane normal to axis 2, along axis 1's direction z0 (> 0: above the line);
    bend: (upper arm x forearm) . z2 in that plane; elbow_sin: |sin| of the angle between upper
    arm and forearm there (0 fully stretched or folded); wrist: (z4 x z6) . z5."""
    centre, o, z, frames = wrist_centre_and_axes(chain, readings)
    shoulder = np.einsum("ni,ni->n", centre - o[:, 0], frames[:, 1, :3, 0])
    ahead = np.einsum("ni,ni->n", centre - o[:, 1], frames[:, 1, :3, 0])
    wrist = np.einsum("ni,ni->n", np.cross(z[:, 3], z[:, 5]), z[:, 4])
    n = z[:, 1]

    def in_plane(v):
        return v - np.einsum("ni,ni->n", v, n)[:, None] * n

    line = in_plane(centre - o[:, 1])
    upper = in_plane(o[:, 2] - o[:, 1])
    fore = in_plane(centre - o[:, 2])
    off_line = upper - (np.einsum("ni,ni->n", upper, line) / np.einsum("ni,ni->n", line, line))[:, None] * line
    bend = np.einsum("ni,ni->n", np.cross(upper, fore), n)
    return dict(shoulder=shoulder, ahead=ahead, above=np.einsum("ni,ni->n", off_line, z[:, 0]), bend=bend, wrist=wrist,
                elbow_sin=np.abs(bend) / (np.linalg.norm(upper, axis=1) * np.linalg.norm(fore, axis=1)))


def onto_axis_1(chain: NumericChain, readings: np.ndarray, poses: np.ndarray) -> np.ndarray:
    """The poses moved sideways so that their wrist centre lies on axis 1 (a shoulder-singular
    pose for an arm without a shoulder offset, out of reach for one with an offset)."""
    centre, o, z, _ = wrist_centre_and_axes(chain, readings)
    rel = centre - o[:, 0]
    sideways = rel - np.einsum("ni,ni->n", rel, z[:, 0])[:, None] * z[:, 0]
    moved = poses.copy()
    moved[:, :3, 3] -= sideways
    return moved


# ------------------------------------------------------------------------------ 1. limits

@pytest.mark.parametrize("stem", DEMOS)
def test_limit_modes(subjects, stem):
    """On seeded poses (half from readings within the limits, half from readings anywhere in a
    turn): "ignore" gives readings in one turn, with within_limits telling whether they lie
    within JOINT_LIMITS; "drop" gives, per raw solution in raw order, exactly the brute-force
    set of equivalent readings q + k turns within the limits (common practice for joints with
    hard stops); "flag" gives the same plus the raw solutions with no reading inside, flagged."""
    s = subjects(stem)
    rng = np.random.default_rng(6001)
    inside = s.readings(1500, rng)
    anywhere = -s.turn / 2 + rng.random((1500, 6)) * s.turn
    readings = np.vstack([inside, anywhere])
    poses = s.chain.poses(readings)
    tol = 1e-9 * s.turn
    checked = skipped = flagged_out = 0
    for pose in poses:
        raw = s.py.inverse(pose, None, "ignore")
        drop = s.py.inverse(pose, None, "drop")
        flag = s.py.inverse(pose, None, "flag")
        for solution in raw:
            q = np.array(solution[0])
            assert np.all(q >= -s.turn / 2 - tol) and np.all(q <= s.turn / 2 + tol), q
        for solution in drop:
            assert solution[4] is True and s.within(solution[0]), solution
        groups = brute_force_groups(s, raw)
        if groups is None:
            skipped += 1
            continue
        checked += 1
        expected_flag = []
        position = 0
        for solution, group in zip(raw, groups):
            assert solution[4] == s.within(solution[0])
            if not group:
                expected_flag.append(plain(solution))
                flagged_out += 1
                continue
            chunk = drop[position:position + len(group)]
            position += len(group)
            assert len(chunk) == len(group), f"raw {solution[0]}: {len(chunk)} readings, brute force {len(group)}"
            got = sorted(tuple(c[0]) for c in chunk)
            want = sorted(group)
            assert np.allclose(got, want, rtol=0, atol=tol), (got, want)
            for c in chunk:
                assert tuple(c[1:4]) == tuple(solution[1:4]) and c[4] is True
            expected_flag += [plain(c) for c in chunk]
        assert position == len(drop), "drop holds solutions the brute force does not"
        assert [plain(f) for f in flag] == expected_flag
        assert [plain(f) for f in flag if f[4]] == [plain(d) for d in drop]
    print(f"{stem}: {checked} poses checked, {skipped} skipped (a reading within 1e-6 of a limit), "
          f"{flagged_out} raw solutions with no reading inside the limits")
    assert skipped <= 0.01 * len(poses)
    assert flagged_out > 100                   # the limits did remove solutions


@pytest.mark.parametrize("stem", DEMOS)
def test_source_readings_are_among_the_drop_solutions_exactly(subjects, stem):
    """Completeness with limits: seeded readings within the limits and away from singular poses
    (Jacobian distance > 1e-3) are among the limits="drop" solutions as readings (1e-6 rad),
    not only modulo a turn; e.g. inspector6's joint 4 at 200 deg comes back as 200, not -160."""
    s = subjects(stem)
    readings = s.readings(3000, np.random.default_rng(6002))
    readings = readings[jacobian_distance(s.chain, readings) > 1e-3]
    tolerance = 1e-6 / s.scale
    missing = []
    beyond_half_turn = 0
    for q, pose in zip(readings, s.chain.poses(readings)):
        found = np.array([sol[0] for sol in s.py.inverse(pose)])
        if not len(found) or not (np.abs(found - q).max(axis=1) < tolerance).any():
            missing.append(q)
        beyond_half_turn += bool(np.any(np.abs(q) > s.turn / 2))
    assert len(readings) > 2000 and not missing, f"{len(missing)} of {len(readings)} missing, e.g. {missing[:3]}"
    if stem == "inspector6":
        assert beyond_half_turn > 200          # the check did meet readings outside one turn


@pytest.mark.parametrize("name", ["inspector6", "plain_shoulder"])
def test_multi_turn_counts_match_brute_force(subjects, name):
    """Joints whose range exceeds a turn (inspector6: joint 4 +-270, joint 6 +-360 deg;
    plain_shoulder: joints 1 and 6): the number of limits="drop" solutions of a pose equals the
    brute-force count: per raw solution and joint, the k in range(-3, 4) with q + k*360 inside the
    limits, multiplied over joints, summed over raw solutions."""
    s = subjects(name)
    assert any(s.py.MULTI_TURN)
    readings = s.readings(4000, np.random.default_rng(6003))
    histogram: dict[int, int] = {}
    skipped = 0
    more_than_raw = 0
    for pose in s.chain.poses(readings):
        raw = s.py.inverse(pose, None, "ignore")
        counts = []
        for solution in raw:
            per_joint = []
            for j, q in enumerate(solution[0]):
                low, high = s.limits[j]
                margin = 1e-6 * (high - low)
                values = [q + k * 360.0 for k in range(-3, 4)]
                if any(abs(v - low) < margin or abs(v - high) < margin for v in values):
                    per_joint = None
                    break
                per_joint.append(sum(1 for v in values if low <= v <= high))
            if per_joint is None:
                break
            counts.append(math.prod(per_joint))
        else:
            drop = s.py.inverse(pose)
            assert len(drop) == sum(counts) <= s.py.MAX_SOLUTIONS
            histogram[len(drop)] = histogram.get(len(drop), 0) + 1
            more_than_raw += len(drop) > len(raw)
            continue
        skipped += 1
    print(f"{name}: drop-solution counts {dict(sorted(histogram.items()))}; {skipped} skipped")
    assert skipped <= 40 and more_than_raw > 1000


# ------------------------------------------------------------------------------ 2. nearest

@pytest.mark.parametrize("stem", DEMOS)
def test_nearest_and_sort_nearest_against_brute_force(subjects, stem):
    """nearest() returns the solution of inverse() with the smallest weighted distance
    (reference: enumeration, common practice; the first of exact ties, as sort_nearest orders
    them) among those of the asked configuration (dict and sequence forms agree), None when
    there is none; sort_nearest() is sorted by that distance
    and keeps the order of ties (each solution given twice; weights with zeros also make a
    solution and its wrist mirror tie)."""
    s = subjects(stem)
    py = s.py
    rng = np.random.default_rng(6004)
    readings = s.readings(1500, rng)
    readings[::5, 4] = s.wrist_singular_reading()
    poses = s.chain.poses(readings)
    labels = len(py.LABEL_NAMES)
    none_with_solutions = ties = checked = 0
    for pose in poses:
        current = s.readings(1, rng)[0].tolist()
        weights = None if rng.random() < 0.3 else np.where(rng.random(6) < 0.25, 0.0, rng.uniform(0.1, 3, 6)).tolist()
        mode = MODES[rng.integers(3)]
        mask = int(rng.integers(0, 2 ** labels))
        wanted = mask_to_config(s, mask, int(rng.integers(0, 2 ** labels)) & mask)
        sequence = [wanted.get(name) for name in py.LABEL_NAMES]
        solutions = py.inverse(pose, current, mode)
        candidates = [x for x in solutions if matches(s, x[1], wanted)]
        best = py.nearest(pose, current, weights, wanted, mode)
        assert py.nearest(pose, current, weights, sequence, mode) == best
        if not candidates:
            assert best is None
            none_with_solutions += bool(solutions)
        else:
            distances = [weighted_distance(x[0], current, weights) for x in candidates]
            first = int(np.argmin(distances))
            assert best in candidates and matches(s, best[1], wanted)
            assert weighted_distance(best[0], current, weights) <= distances[first] * (1 + 1e-12)
            # among exact ties, the first (as sort_nearest would order them)
            assert best == py.sort_nearest(candidates, current, weights)[0]
        # sort_nearest: a permutation, sorted, ties in their original order (each solution
        # appears twice, the copies in reverse order: exact ties)
        tagged = [(x[0], k) for k, x in enumerate(solutions + solutions[::-1])]
        ordered = py.sort_nearest(tagged, current, weights)
        assert sorted(k for _, k in ordered) == list(range(len(tagged)))
        d = [weighted_distance(x[0], current, weights) for x in ordered]
        assert all(d[k] <= d[k + 1] * (1 + 1e-12) for k in range(len(d) - 1))
        for k in range(len(ordered) - 1):
            if py.distance(ordered[k][0], current, weights) == py.distance(ordered[k + 1][0], current, weights):
                ties += 1
                assert ordered[k][1] < ordered[k + 1][1], "sort_nearest is not stable"
        checked += 1
    far = poses[0].copy()
    far[:3, 3] += 10 * s.arm.reach_scale()
    assert py.nearest(far, current) is None
    print(f"{stem}: {checked} poses, {none_with_solutions} with solutions but none of the asked "
          f"configuration, {ties} ties in sort_nearest")
    assert none_with_solutions > 20 and ties > 5000


def test_distance_is_the_weighted_euclidean_travel(subjects):
    """distance(a, b, w) = sqrt(sum w (a - b)^2) (common practice); readings are positions, so two
    readings a turn apart are a turn of travel apart (not 0)."""
    py = subjects("inspector6").py
    rng = np.random.default_rng(6005)
    for _ in range(500):
        a, b = rng.uniform(-360, 360, 6), rng.uniform(-360, 360, 6)
        w = rng.uniform(0, 5, 6)
        assert math.isclose(py.distance(a.tolist(), b.tolist(), w.tolist()), weighted_distance(a, b, w),
                            rel_tol=1e-14)
        assert py.distance(a.tolist(), b.tolist()) == py.distance(a.tolist(), b.tolist(), [1.0] * 6)
    assert py.distance([0, 0, 0, 0, 0, 360.0], [0.0] * 6) == 360.0


# ------------------------------------------------------------------------------ 3. Python == C

def case_poses(s: Subject, count: int, rng) -> np.ndarray:
    """Seeded poses: 60% from readings within the limits, 15% from readings anywhere in a turn,
    15% wrist-singular (joint 5 at its DH zero), 10% moved onto axis 1 (shoulder-singular, or out
    of reach for an arm with a shoulder offset)."""
    n_in, n_any, n_wrist = int(0.6 * count), int(0.15 * count), int(0.15 * count)
    n_axis = count - n_in - n_any - n_wrist
    inside = s.readings(n_in, rng)
    anywhere = -s.turn / 2 + rng.random((n_any, 6)) * s.turn
    wrist = s.readings(n_wrist, rng)
    wrist[:, 4] = s.wrist_singular_reading()
    axis = s.readings(n_axis, rng, margin=0.1)
    poses = np.concatenate([s.chain.poses(inside), s.chain.poses(anywhere), s.chain.poses(wrist),
                            onto_axis_1(s.chain, axis, s.chain.poses(axis))])
    return poses[rng.permutation(count)]


@pytest.mark.parametrize("stem", DEMOS)
def test_python_and_c_make_identical_choices(subjects, stem):
    """10,000 seeded cases per demo arm, with random `current` (within the limits, beyond them by
    up to 1.5 turns, or None) and random weights (None, or with zeros that make ties): the C
    solver (double) and the generated Python return the same solutions in the same order,
    bit for bit, for inverse in each limits mode, for sort_nearest, and for nearest with a
    random configuration mask (C bits against the Python dict)."""
    s = subjects(stem)
    py, c = s.py, s.c
    rng = np.random.default_rng(6006)
    count = 10_000
    poses = case_poses(s, count, rng)
    labels = len(py.LABEL_NAMES)
    totals = dict(solutions=0, none=0, singular=0, outside=0, ties=0)
    for i, pose in enumerate(poses):
        roll = rng.random()
        if roll < 0.7:
            current = s.readings(1, rng)[0]
        elif roll < 0.9:
            current = rng.uniform(-1.5 * s.turn, 1.5 * s.turn, 6)
        else:
            current = None
        weights = None if rng.random() < 0.3 else np.where(rng.random(6) < 0.2, 0.0, rng.uniform(0, 3, 6))
        cur_list = None if current is None else current.tolist()
        w_list = None if weights is None else weights.tolist()
        for mode in MODES:
            expected = [plain(x) for x in py.inverse(pose, cur_list, mode)]
            got = c.inverse(pose, current, mode)
            assert got == expected, f"case {i}, limits={mode}, current {cur_list}"
            totals["solutions"] += len(got)
            totals["singular"] += sum(x[2] for x in got)
            totals["outside"] += sum(not x[4] for x in got)
        here = np.zeros(6) if current is None else current
        mode = MODES[rng.integers(3)]
        expected = [plain(x) for x in py.sort_nearest(py.inverse(pose, here.tolist(), mode), here.tolist(), w_list)]
        got = c.sort_nearest(pose, here, weights, mode)
        assert got == expected, f"case {i}: sort_nearest, limits={mode}"
        totals["ties"] += sum(py.distance(a[0], here.tolist(), w_list) == py.distance(b[0], here.tolist(), w_list)
                              for a, b in zip(got, got[1:]))
        mask = int(rng.integers(0, 2 ** labels))
        value = int(rng.integers(0, 2 ** labels)) & mask
        mode = MODES[rng.integers(3)]
        wanted = mask_to_config(s, mask, value)
        best = py.nearest(pose, here.tolist(), w_list, wanted, mode)
        got = c.nearest(pose, here, weights, wanted, mode)
        assert got == (None if best is None else plain(best)), f"case {i}: nearest mask {mask} value {value}"
        totals["none"] += got is None
    print(f"{stem}: {count} cases, {totals}")
    assert totals["singular"] > 1000 and totals["outside"] > 1000 and totals["ties"] > 100 and totals["none"] > 500


# ------------------------------------------------------------------------------ 4. labels

@pytest.mark.parametrize("stem", DEMOS)
def test_configuration_labels_match_their_geometric_definitions(subjects, stem):
    """For every raw solution of seeded poses, its labels agree with the definitions of
    docs/derivation.md section 5 evaluated on the FK frames of the solution's own readings
    (reach forward/backward: [SHV] ch. 5's left/right arm; elbow up/down: [SHV] ch. 5; wrist bend:
    the sign of (z4 x z6) . z5):
    - reach_forward <=> the wrist centre's coordinate along link 1's x axis is >= 0;
    - elbow: one sign of the bend (upper arm x forearm) . z2 for the arm, oriented so that "elbow_up"
      is the elbow above the shoulder-to-wrist-centre line (+z0 side) when the wrist centre lies
      beyond the shoulder joint (axis 2) along link 1's x axis, and below it when the wrist centre
      lies behind axis 2 (the same bend seen from the other side);
    - bend_positive <=> (z4 x z6) . z5 >= 0.
    Cases with a measure within 1e-9 of 0 are skipped (at most 1%).
    (docs/derivation.md says "in front-shoulder poses" for the first elbow case; that holds only
    when axes 1 and 2 meet: with a shoulder offset a1, as benchtop6 and packer6 have, a front
    wrist centre between axes 1 and 2 puts the "elbow_up" elbow below the line; printed below.)"""
    s = subjects(stem)
    py = s.py
    readings = s.readings(1500, np.random.default_rng(6007))
    joints, configs = [], []
    for pose in s.chain.poses(readings):
        for solution in py.inverse(pose, None, "ignore"):
            joints.append(solution[0])
            configs.append(solution[1])
    joints, configs = np.array(joints), np.array(configs)
    g = geometric_labels(s.chain, joints)
    length = s.arm.reach_scale()
    front = configs[:, py.LABEL_NAMES.index("reach")] == py.LABEL_VALUES[py.LABEL_NAMES.index("reach")][0]
    elbow_up = configs[:, py.LABEL_NAMES.index("elbow")] == "elbow_up"
    ahead = g["ahead"] > 1e-9 * length
    behind = g["ahead"] < -1e-9 * length
    # the bend's orientation for this arm: the one that makes "up" the elbow above the line when
    # the wrist centre lies beyond axis 2; one orientation must then fit every solution
    clear = ahead & (np.abs(g["above"]) > 1e-9 * length) & (np.abs(g["bend"]) > 1e-9 * length ** 2)
    orientation = np.sign(np.sum(np.sign(g["bend"][clear]) * np.where(g["above"][clear] >= 0, 1, -1)))
    assert orientation != 0
    checks = (("reach", g["shoulder"], 1e-9 * length, None),
              ("elbow, wrist centre beyond axis 2: above the line", g["above"], 1e-9 * length, ahead),
              ("elbow, wrist centre behind axis 2: below the line", -g["above"], 1e-9 * length, behind),
              ("elbow: bend", orientation * g["bend"], 1e-9 * length ** 2, None),
              ("wrist_bend", g["wrist"], 1e-9, None))
    for what, measure, small, subset in checks:
        name = what.split(",")[0].split(":")[0]
        index = py.LABEL_NAMES.index(name)
        positive, negative = py.LABEL_VALUES[index]
        considered = np.ones(len(joints), bool) if subset is None else subset
        clear = considered & (np.abs(measure) > small)
        expected = np.where(measure >= 0, positive, negative)
        wrong = np.nonzero(clear & (expected != configs[:, index]))[0]
        assert len(wrong) == 0, (f"{stem} {what}: {len(wrong)} of {clear.sum()} labels disagree, e.g. readings "
                                 f"{joints[wrong[0]]} labelled {configs[wrong[0], index]}")
        assert clear.sum() >= 0.99 * considered.sum() and considered.sum() > 0.2 * len(joints)
        assert set(configs[clear, index]) == {positive, negative}     # both labels met
    literal = front & (np.abs(g["above"]) > 1e-9 * length)
    off = int(np.sum((g["above"][literal] >= 0) != elbow_up[literal]))
    print(f"{stem}: {len(joints)} solutions; front-shoulder solutions whose 'up' elbow is not above the line "
          f"(wrist centre between axes 1 and 2): {off} of {literal.sum()}")


# ------------------------------------------------------------------------------ 5. paths

def smooth_path(s: Subject, rng, steps: int = 1500, sub: int = 16):
    """q(t) = q0 + A sin(w t + phase) within the limits, t in [0, 2 pi]; also the path on a grid
    ``sub`` times finer (for the distance from singular poses between samples)."""
    low, high = s.limits[:, 0], s.limits[:, 1]
    span = high - low
    amplitude = span * rng.uniform(0.05, 0.25, 6)
    centre = low + amplitude + rng.random(6) * (span - 2 * amplitude)
    w, phase = rng.uniform(0.5, 2.0, 6), rng.uniform(0, 2 * np.pi, 6)
    t = np.linspace(0, 2 * np.pi, (steps - 1) * sub + 1)
    fine = centre + amplitude * np.sin(w * t[:, None] + phase)
    return fine[::sub], fine


def follow(s: Subject, path: np.ndarray, fine: np.ndarray, sub: int = 16):
    """Choose nearest(pose, previous) along the path from its first reading; return the chosen
    readings and configurations and, per step, whether the segment stays away from singular
    poses (Jacobian distance > 1e-3 on the fine grid and at both chosen solutions)."""
    poses = s.chain.poses(path)
    previous = path[0].tolist()
    chosen, configs = [path[0]], [s.py.nearest(poses[0], previous)[1]]
    for pose in poses[1:]:
        solution = s.py.nearest(pose, previous)
        assert solution is not None, "a pose of a path within the limits has no solution"
        previous = list(solution[0])
        chosen.append(np.array(previous))
        configs.append(solution[1])
    chosen = np.array(chosen)
    fine_distance = jacobian_distance(s.chain, fine).reshape(-1)
    segment_min = np.minimum(fine_distance[:-1].reshape(len(path) - 1, sub).min(axis=1), fine_distance[sub::sub])
    chosen_distance = jacobian_distance(s.chain, chosen)
    regular = (segment_min > 1e-3) & (chosen_distance[:-1] > 1e-3) & (chosen_distance[1:] > 1e-3)
    return chosen, configs, regular


def check_path(s: Subject, path, fine, label: str):
    """The path checks; returns (chosen readings, per step: on the source readings)."""
    chosen, configs, regular = follow(s, path, fine)
    followed = np.abs(chosen - path).max(axis=1) < 1e-6 / s.scale
    # (1) on the source path (both ends on its readings): at most 5 x the source's joint step
    source_step = np.abs(np.diff(path, axis=0)).max(axis=1)
    jump = np.abs(np.diff(chosen, axis=0)).max(axis=1)
    on_source = regular & followed[:-1] & followed[1:]
    bad = np.nonzero(on_source & (jump > 5 * source_step))[0]
    assert len(bad) == 0, (f"{label}: step {bad[0] + 1} jumps {jump[bad[0]]:.4g} for a source step of "
                           f"{source_step[bad[0]]:.4g}; chosen {chosen[bad[0]]} -> {chosen[bad[0] + 1]}")
    # (2) every step away from singular poses, also after nearest() moved to another branch near
    # one: |dq| <= 2 |dx| / sigma_min(J) at the chosen readings (first order, with a margin)
    poses = s.chain.poses(path)
    dx = np.hypot(np.linalg.norm(np.diff(poses[:, :3, 3], axis=0), axis=1) / s.arm.reach_scale(),
                  Rotation.from_matrix(np.einsum("nji,njk->nik", poses[:-1, :3, :3], poses[1:, :3, :3])).magnitude())
    sigma = jacobian_distance(s.chain, chosen)
    dq = np.linalg.norm(np.diff(chosen, axis=0) * s.scale, axis=1)
    ratio = dq / (dx / np.minimum(sigma[:-1], sigma[1:]))
    bad = np.nonzero(regular & (ratio > 2))[0]
    assert len(bad) == 0, (f"{label}: step {bad[0] + 1} moves the joints {dq[bad[0]]:.4g} rad for a pose step of "
                           f"{dx[bad[0]]:.4g} (sigma_min {sigma[bad[0]]:.3g})")
    # (3) the configuration holds away from singular poses
    changed = [k for k in range(len(configs) - 1) if regular[k] and configs[k] != configs[k + 1]]
    assert not changed, f"{label}: configuration {configs[changed[0]]} -> {configs[changed[0] + 1]} at step " \
                        f"{changed[0] + 1}, away from singular poses"
    # (4) from the start up to the first step near a singular pose, nearest() follows the source
    first_singular = int(np.argmin(regular)) if not regular.all() else len(regular)
    assert followed[:first_singular + 1].all()
    print(f"{label}: {regular.sum()} of {len(regular)} steps away from singular poses; largest jump / source step "
          f"on the source path {np.max(jump[on_source] / source_step[on_source]):.6f}; largest |dq| sigma / |dx| "
          f"{np.max(ratio[regular]):.3f}; {followed.sum()} steps on the source readings; "
          f"{sum(a != b for a, b in zip(configs, configs[1:]))} configuration changes near singular poses")
    assert regular.sum() > 0.5 * len(regular) and on_source.sum() > 0.5 * len(regular)
    return chosen, followed


@pytest.mark.parametrize("stem", DEMOS)
def test_nearest_along_a_smooth_path_never_jumps(subjects, stem):
    """Along seeded smooth joint paths (poses by FK, 1500 steps), nearest(pose, previous choice)
    from the first reading, wherever the path stays away from singular poses (Jacobian distance
    > 1e-3, ikgen.verify.jacobian_distance, on a 16 times finer grid and at the chosen readings):
    never moves a joint by more than 5 times the source path's largest joint step while on the
    source's readings; never moves the joints by more than 2 |dx| / sigma_min(J) (first order)
    after it took another branch near a singular pose; keeps its configuration; and follows the
    source exactly until the path first comes near a singular pose."""
    s = subjects(stem)
    rng = np.random.default_rng(6008)
    for k in range(3):
        path, fine = smooth_path(s, rng)
        check_path(s, path, fine, f"{stem} path {k}")


def test_path_through_multi_turn_readings_stays_continuous(subjects):
    """inspector6: joint 4 swings 50..250 deg and joint 6 20..320 deg (both past 180, within their
    multi-turn limits): the chosen readings follow the source path past 180 instead of wrapping."""
    s = subjects("inspector6")
    rng = np.random.default_rng(6009)
    path, fine = smooth_path(s, rng)
    t = np.linspace(0, 2 * np.pi, len(fine))
    fine[:, 3] = 150 + 100 * np.sin(t)
    fine[:, 5] = 170 + 150 * np.sin(1.5 * t)
    path = fine[::16]
    chosen, followed = check_path(s, path, fine, "inspector6 multi-turn path")
    assert chosen[:, 3].max() > 240 and chosen[:, 5].max() > 310
    assert followed.all(), f"{(~followed).sum()} steps left the source readings"


# ------------------------------------------------------------------------------ 6. singular poses

def fk_error(s: Subject, solutions, pose) -> tuple[float, float]:
    reached = s.chain.poses(np.array([x[0] for x in solutions]))
    position = np.abs(reached[:, :3, 3] - pose[:3, 3]).max() / s.arm.reach_scale()
    rotation = np.abs(reached[:, :3, :3] - pose[:3, :3]).max()
    return float(position), float(rotation)


@pytest.mark.parametrize("stem", DEMOS)
def test_wrist_singular_pose_keeps_the_current_reading(subjects, stem):
    """Exactly singular wrist ([SHV] sec. 4.9: axes 4 and 6 aligned; joint 5 found by bisection
    with ikgen.verify.find_root on ikgen.verify.label_measure("wrist_bend")): the free wrist joint equals the
    caller's `current` reading (as a reading in "drop" mode, modulo a turn in "ignore" mode; 0
    when current is None), nearest() keeps it, and the FK of every solution reproduces the pose
    (1e-9 of the length scale, 1e-9 per rotation entry)."""
    s = subjects(stem)
    py = s.py
    free = s.free_wrist_joint()
    wrist_index = py.CONDITION_NAMES.index("wrist_bend")
    rng = np.random.default_rng(6010)
    done = 0
    for _ in range(40):
        if done == 12:
            break
        point = find_root(s.chain, label_measure("wrist_bend"), s.readings(1, rng, margin=0.2)[0], 4)
        if point is None:
            continue
        done += 1
        pose = s.chain.pose(point)
        current = point.copy()
        current[free] += (20.0 + 20.0 * rng.random()) * (1 if rng.random() < 0.5 else -1) * math.pi / 180 / s.scale
        if not s.limits[free, 0] <= current[free] <= s.limits[free, 1]:
            current[free] = point[free] - (current[free] - point[free])
        for hint, kept in ((current.tolist(), current[free]), (None, 0.0)):
            raw = py.inverse(pose, hint, "ignore")
            kept_ones = [x for x in raw if x[3][wrist_index] < 1e-12]
            assert kept_ones and all(x[2] for x in kept_ones)
            assert all(abs(wrap(x[0][free] - kept, s.turn)) < 1e-9 for x in kept_ones)
            position, rotation = fk_error(s, raw, pose)
            assert position < 1e-9 and rotation < 1e-9, (position, rotation)
        drop = py.inverse(pose, current.tolist())
        same_arm = [x for x in drop if np.abs(np.subtract(x[0][:3], point[:3])).max() < 1e-7 / s.scale]
        assert any(abs(x[0][free] - current[free]) < 1e-9 / s.scale for x in same_arm), \
            f"joint {free + 1} should read {current[free]}; got {[x[0][free] for x in same_arm]}"
        best = py.nearest(pose, current.tolist())
        assert abs(best[0][free] - current[free]) < 1e-9 / s.scale
        assert np.abs(np.subtract(best[0][:3], point[:3])).max() < 1e-7 / s.scale
    assert done == 12


@pytest.mark.parametrize("name", ["inspector6", "plain_shoulder"])
def test_shoulder_singular_pose_keeps_the_current_reading(subjects, name):
    """Wrist centre exactly on axis 1 of an arm without a shoulder offset ([SHV] sec. 4.9; joint 2
    found by bisection with ikgen.verify.find_root on ikgen.verify.shoulder_measure): every
    solution keeps joint 1 at the caller's reading (modulo a turn in "ignore" mode; as the
    reading, or its equivalents inside multi-turn limits, in "drop" mode), is flagged singular
    with shoulder conditioning ~0, and reproduces the pose."""
    s = subjects(name)
    py = s.py
    shoulder_index = py.CONDITION_NAMES.index("reach")
    rng = np.random.default_rng(6011)
    done = exact = 0
    for _ in range(40):
        if done == 10:
            break
        point = find_root(s.chain, label_measure("reach"), s.readings(1, rng, margin=0.1)[0], 1)
        if point is None:
            continue
        done += 1
        pose = s.chain.pose(point)
        current = point.copy()
        current[0] = s.readings(1, rng)[0][0]
        raw = py.inverse(pose, current.tolist(), "ignore")
        assert raw
        for x in raw:
            assert x[2] is True and x[3][shoulder_index] < 1e-9
            assert abs(wrap(x[0][0] - current[0], s.turn)) < 1e-9
        position, rotation = fk_error(s, raw, pose)
        assert position < 1e-9 and rotation < 1e-9, (position, rotation)
        drop = py.inverse(pose, current.tolist())
        for x in drop:
            k = round((x[0][0] - current[0]) / s.turn)
            assert abs(x[0][0] - current[0] - k * s.turn) < 1e-9
        # the reading itself (to rounding: reading -> radians -> reading), not a turn away
        exact += any(abs(x[0][0] - current[0]) < 1e-9 for x in drop)
        if drop:
            best = py.nearest(pose, current.tolist())
            assert abs(best[0][0] - current[0]) < 1e-9
    print(f"{name}: {done} shoulder-singular poses, {exact} with joint 1 returned as the caller's reading "
          f"(the others: every solution outside the other joints' limits)")
    assert done == 10 and exact >= 5


# ------------------------------------------------------------------------------ 7. conditioning

@pytest.mark.parametrize("stem", DEMOS)
def test_conditioning_measures(subjects, stem):
    """Per raw solution of seeded poses: the wrist measure equals |sin| of joint 5's DH angle
    ([SHV] sec. 4.9: the spherical wrist is singular at sin(theta5) = 0) to 1e-9; the elbow
    measure equals |sin| of the angle between upper arm and forearm in the plane normal to axis 2
    ([SHV] sec. 4.9: singular when the elbow is stretched or folded) to 1e-9; the shoulder
    measure is proportional to the wrist centre's distance from axis 1 along link 1's x axis
    (a common factor for the arm, to 1e-9 relative)."""
    s = subjects(stem)
    py = s.py
    readings = s.readings(1000, np.random.default_rng(6012))
    joints, conditioning = [], []
    for pose in s.chain.poses(readings):
        for solution in py.inverse(pose, None, "ignore"):
            joints.append(solution[0])
            conditioning.append(solution[3])
    joints, conditioning = np.array(joints), np.array(conditioning)
    j5 = s.arm.joints[4]
    dh5 = float(j5.theta + j5.offset) + float(j5.direction) * s.rad(joints[:, 4])
    wrist = conditioning[:, py.CONDITION_NAMES.index("wrist_bend")]
    assert np.abs(wrist - np.abs(np.sin(dh5))).max() < 1e-9
    g = geometric_labels(s.chain, joints)
    elbow = conditioning[:, py.CONDITION_NAMES.index("elbow")]
    assert np.abs(elbow - g["elbow_sin"]).max() < 1e-9
    ratio = conditioning[:, py.CONDITION_NAMES.index("reach")] / np.abs(g["shoulder"])
    assert (ratio.max() - ratio.min()) / ratio.mean() < 1e-9
    assert wrist.min() < 0.05 and elbow.min() < 0.05      # the samples came near both singular sets


@pytest.mark.parametrize("stem", DEMOS)
def test_elbow_measure_goes_to_zero_at_full_stretch(subjects, stem):
    """Joint 3 at delta from full stretch (found by bisection on ikgen.verify.label_measure("elbow")):
    the source solution's elbow measure is |sin(delta)| (1e-9), falls monotonically as delta
    shrinks from 10 deg to 1e-3 deg, and is below 1e-7 at the stretched reading itself."""
    s = subjects(stem)
    py = s.py
    index = py.CONDITION_NAMES.index("elbow")
    rng = np.random.default_rng(6013)
    done = 0
    for _ in range(30):
        if done == 5:
            break
        point = find_root(s.chain, label_measure("elbow"), s.readings(1, rng, margin=0.1)[0], 2)
        if point is None:
            continue
        done += 1
        measures = []
        for delta_deg in (10, 3, 1, 0.3, 0.1, 0.03, 0.01, 3e-3, 1e-3, 0.0):
            delta = math.radians(delta_deg) / s.scale
            q = point.copy()
            q[2] = point[2] + delta if point[2] + delta <= s.limits[2, 1] else point[2] - delta
            pose = s.chain.pose(q)
            raw = py.inverse(pose, None, "ignore")
            gaps = [np.abs(wrap(np.subtract(x[0], q), s.turn)).max() for x in raw]
            source = raw[int(np.argmin(gaps))]
            assert min(gaps) < 1e-6 / s.scale
            measures.append(source[3][index])
            if delta_deg:
                assert abs(source[3][index] - abs(math.sin(math.radians(delta_deg)))) < 1e-9
        assert all(a > b for a, b in zip(measures, measures[1:])), measures
        assert measures[-1] < 1e-7, measures
    assert done == 5
