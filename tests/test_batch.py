"""The numpy batch back-end (<arm>_ik_batch.py, inverse_batch) against the per-pose generated
Python solver with limits="ignore": the same raw closed-form solutions, in the same order, on
100,000 seeded poses for benchtop6 (the six-axis arm with shoulder and elbow offsets) and 20,000
for each of the other demo arms; non-finite poses; the caller's `current` at singular poses; the
documented output shapes and types.

References: the per-pose solver is the reference here (it is checked against textbook closed
forms, brute force and numeric FK in tests/test_derivation.py, tests/test_limits_nearest.py and
tests/test_c_backend.py); the batch module's docstring is the specification of its output
(RAW_SOLUTIONS entries per pose, the valid entries of a row in the per-pose order, labels +1 for
the first value of LABEL_VALUES[i] and -1 for the second, NaN readings where not valid). IEEE 754 (2008,
sec. 6.2) for NaN and infinity propagating through arithmetic, common practice.

Each demo arm is derived once per module (module-scoped fixture). Demo arms are invented.
"""

from __future__ import annotations

import itertools
import math

import numpy as np
import pytest

import shared
from helpers import demo_arm
from ikgen.generate import load_module
from ikgen.kinematics import NumericChain
from ikgen.verify import find_root, label_measure

DEMOS = ("benchtop6", "packer6", "inspector6")
SIZES = {"benchtop6": 100_000, "packer6": 20_000, "inspector6": 20_000}


class Subject:
    """One demo arm: derived once; its per-pose and batch modules and numeric FK."""

    def __init__(self, stem: str):
        self.arm = demo_arm(stem)
        self.build = shared.built(self.arm)
        folder = self.build.folder
        self.py = load_module(self.build.files[self.build.python_path], f"{folder}_ik_for_batch_test")
        self.batch = load_module(self.build.files[f"{folder}/{folder}_ik_batch.py"], f"{folder}_ik_batch_under_test")
        self.chain = NumericChain(self.arm)
        self.limits = np.array(self.py.JOINT_LIMITS, dtype=float)
        self.turn = 360.0 if self.py.ANGLE_UNIT == "deg" else 2 * math.pi
        self.scale = float(self.arm.angle_scale)
        free = [j for j in self.build.derivation.solved_joints() if j in (4, 6)][0]
        self.free_wrist = free - 1                      # 0-based: the wrist joint a singular pose leaves free
        values = self.py.LABEL_VALUES
        self.signs = {combo: tuple(1 if label == pair[0] else -1 for label, pair in zip(combo, values))
                      for combo in itertools.product(*values)}

    def readings(self, count: int, rng, margin: float = 0.0) -> np.ndarray:
        low, high = self.limits[:, 0], self.limits[:, 1]
        span = high - low
        return low + margin * span + rng.random((count, 6)) * span * (1 - 2 * margin)

    def wrist_singular_reading(self) -> float:
        """Joint 5 reading at which its DH angle is 0 (axes 4 and 6 aligned)."""
        j5 = self.arm.joints[4]
        return -float(j5.theta + j5.offset) / (float(j5.direction) * self.scale)


@pytest.fixture(scope="module")
def subjects():
    cache: dict[str, Subject] = {}

    def get(stem: str) -> Subject:
        if stem not in cache:
            cache[stem] = Subject(stem)
        return cache[stem]

    return get


def wrap(value, turn):
    return (np.asarray(value) + turn / 2) % turn - turn / 2


def onto_axis_1(chain: NumericChain, readings: np.ndarray, poses: np.ndarray) -> np.ndarray:
    """The poses moved sideways so that their wrist centre (where axes 4 and 5 meet, from the FK
    frames) lies on axis 1: shoulder-singular without a shoulder offset, out of reach with one."""
    frames = chain.frames(readings)
    chosen = frames[:, :-1] if chain.standard else frames[:, 1:]
    z, o = chosen[:, :, :3, 2], chosen[:, :, :3, 3]
    b = np.einsum("ni,ni->n", z[:, 3], z[:, 4])
    w0 = o[:, 3] - o[:, 4]
    t = (b * np.einsum("ni,ni->n", z[:, 4], w0) - np.einsum("ni,ni->n", z[:, 3], w0)) / (1 - b * b)
    rel = o[:, 3] + t[:, None] * z[:, 3] - o[:, 0]
    moved = poses.copy()
    moved[:, :3, 3] -= rel - np.einsum("ni,ni->n", rel, z[:, 0])[:, None] * z[:, 0]
    return moved


def mixed_poses(s: Subject, count: int, rng) -> np.ndarray:
    """Seeded poses: 65% from readings within the limits, 10% from readings anywhere in a turn,
    10% wrist-singular (joint 5 at its DH zero), 5% moved onto axis 1, 9% out of reach (moved 3
    length scales away), and 1% with a NaN or an infinity in one entry; shuffled."""
    parts = [int(f * count) for f in (0.65, 0.10, 0.10, 0.05, 0.09)]
    parts.append(count - sum(parts))
    inside = s.readings(parts[0], rng)
    anywhere = -s.turn / 2 + rng.random((parts[1], 6)) * s.turn
    wrist = s.readings(parts[2], rng)
    wrist[:, 4] = s.wrist_singular_reading()
    axis = s.readings(parts[3], rng, margin=0.1)
    far = s.chain.poses(s.readings(parts[4], rng))
    directions = rng.normal(size=(parts[4], 3))
    far[:, :3, 3] += 3 * s.arm.reach_scale() * directions / np.linalg.norm(directions, axis=1)[:, None]
    bad = s.chain.poses(s.readings(parts[5], rng))
    rows, entries = np.arange(parts[5]), rng.integers(0, 12, parts[5])
    bad[rows, entries // 4, entries % 4] = rng.choice([np.nan, np.inf, -np.inf], parts[5])
    poses = np.concatenate([s.chain.poses(inside), s.chain.poses(anywhere), s.chain.poses(wrist),
                            onto_axis_1(s.chain, axis, s.chain.poses(axis)), far, bad])
    return poses[rng.permutation(count)]


def per_pose(s: Subject, poses: np.ndarray, current: np.ndarray | None):
    """The per-pose solver (limits="ignore") flattened: counts per pose, then per solution the
    readings, label signs, singular flags and conditioning, in pose and solution order."""
    counts, joints, signs, singular, conditioning = [], [], [], [], []
    currents = [None] * len(poses) if current is None else current.tolist()
    for pose, here in zip(poses, currents):
        solutions = s.py.inverse(pose, here, "ignore")
        counts.append(len(solutions))
        for q, config, flag, measures, _ in solutions:
            joints.append(q)
            signs.append(s.signs[tuple(config)])
            singular.append(flag)
            conditioning.append(measures)
    width = len(s.py.CONDITION_NAMES)
    labels = len(s.py.LABEL_NAMES)
    return (np.array(counts), np.array(joints, dtype=float).reshape(-1, 6),
            np.array(signs, dtype=np.int8).reshape(-1, labels),
            np.array(singular, dtype=bool), np.array(conditioning, dtype=float).reshape(-1, width))


@pytest.mark.parametrize("stem", DEMOS)
def test_batch_equals_the_per_pose_solver(subjects, stem):
    """Seeded mixed poses (100,000 for benchtop6, 20,000 otherwise) with a random `current` per
    pose: each row has as many valid entries as the per-pose solver (limits="ignore") has
    solutions, and in the same order the same readings (1e-9), labels (signs -> LABEL_VALUES),
    singular flags and conditioning (1e-9); readings are NaN where not valid."""
    s = subjects(stem)
    rng = np.random.default_rng(7001)
    n = SIZES[stem]
    poses = mixed_poses(s, n, rng)
    current = rng.uniform(-1.5 * s.turn, 1.5 * s.turn, (n, 6))
    joints, valid, labels, singular, conditioning = s.batch.inverse_batch(poses, current)
    counts, want_joints, want_signs, want_singular, want_conditioning = per_pose(s, poses, current)
    rows = np.nonzero(valid.sum(axis=1) != counts)[0]
    assert len(rows) == 0, f"row {rows[0]}: {valid[rows[0]].sum()} valid entries, per-pose {counts[rows[0]]}"
    # modulo a turn: numpy's arctan2 and math.atan2 may differ in the last bit, so a reading at the
    # wrap boundary can come out as +180 in one and -180 in the other (the same angle)
    joint_gap = np.abs(wrap(joints[valid] - want_joints, s.turn)).max()
    assert joint_gap < 1e-9, f"largest reading difference {joint_gap:.3g}"
    assert np.array_equal(labels[valid], want_signs)
    assert np.array_equal(singular[valid], want_singular)
    conditioning_gap = np.abs(conditioning[valid] - want_conditioning).max()
    assert conditioning_gap < 1e-9
    assert np.isnan(joints[~valid]).all()
    bad_rows = ~np.isfinite(poses[:, :3, :]).all(axis=(1, 2))
    assert bad_rows.sum() >= 0.009 * n and not valid[bad_rows].any()
    print(f"{stem}: {n} poses, {valid.sum()} solutions ({np.bincount(counts).tolist()} poses with 0, 1, ... "
          f"solutions), {want_singular.sum()} singular; largest differences: readings {joint_gap:.3g} "
          f"{s.py.ANGLE_UNIT}, conditioning {conditioning_gap:.3g}")
    assert want_singular.sum() >= 0.05 * n and (counts == 0).sum() >= 0.1 * n


@pytest.mark.parametrize("stem", DEMOS)
def test_non_finite_poses_give_no_valid_entry(subjects, stem):
    """NaN, +inf or -inf in any one of the 12 entries of a pose (IEEE 754: they propagate), or in
    all of them: no valid entry, readings NaN; the other rows of the same call are unaffected."""
    s = subjects(stem)
    good = s.chain.poses(s.readings(64, np.random.default_rng(7002)))
    bad = []
    for value in (np.nan, np.inf, -np.inf):
        for entry in range(12):
            pose = good[entry].copy()
            pose[entry // 4, entry % 4] = value
            bad.append(pose)
        bad.append(np.full((4, 4), value))
    bad = np.array(bad)
    mixed = np.concatenate([good, bad, good])
    joints, valid, labels, singular, conditioning = s.batch.inverse_batch(mixed)
    assert not valid[len(good):len(good) + len(bad)].any()
    assert np.isnan(joints[len(good):len(good) + len(bad)]).all()
    alone = s.batch.inverse_batch(good)
    for part in (slice(0, len(good)), slice(len(good) + len(bad), None)):
        assert np.array_equal(valid[part], alone[1])
        assert np.array_equal(joints[part], alone[0], equal_nan=True)
        assert np.array_equal(labels[part][valid[part]], alone[2][alone[1]])
    assert alone[1].any(axis=1).all()


@pytest.mark.parametrize("stem", DEMOS)
def test_current_is_honoured_at_singular_poses(subjects, stem):
    """Wrist-singular poses (joint 5 at its DH zero): every valid entry with a zero wrist
    measure keeps the free wrist joint at the caller's `current` reading (modulo a turn, the
    batch returns one-turn readings), or at 0 with current=None; the same entries as the
    per-pose solver given the same `current`."""
    s = subjects(stem)
    rng = np.random.default_rng(7003)
    readings = s.readings(500, rng)
    readings[:, 4] = s.wrist_singular_reading()
    poses = s.chain.poses(readings)
    current = s.readings(500, rng)
    wrist = s.py.CONDITION_NAMES.index("wrist_bend")
    free = s.free_wrist
    for hint, kept in ((current, current[:, free]), (None, np.zeros(500))):
        joints, valid, _, singular, conditioning = s.batch.inverse_batch(poses, hint)
        kept_entries = valid & (conditioning[:, :, wrist] < 1e-12)
        assert kept_entries.any(axis=1).all()             # every pose has its singular branch
        assert singular[kept_entries].all()
        gap = np.abs(wrap(joints[:, :, free] - kept[:, None], s.turn))[kept_entries]
        assert gap.max() < 1e-9, gap.max()
        _, want_joints, _, _, _ = per_pose(s, poses, hint)
        assert np.abs(wrap(joints[valid] - want_joints, s.turn)).max() < 1e-9


def test_current_is_honoured_at_shoulder_singular_poses(subjects):
    """inspector6 (no shoulder offset), wrist centre exactly on axis 1 (joint 2 found by bisection
    on the reach label's measure, ikgen.verify.label_measure): every valid entry keeps joint 1 at
    `current` (mod a turn)."""
    s = subjects("inspector6")
    rng = np.random.default_rng(7004)
    points = []
    while len(points) < 20:
        point = find_root(s.chain, label_measure("reach"), s.readings(1, rng, margin=0.1)[0], 1)
        if point is not None:
            points.append(point)
    poses = s.chain.poses(np.array(points))
    current = s.readings(20, rng)
    joints, valid, _, singular, _ = s.batch.inverse_batch(poses, current)
    assert valid.any(axis=1).all() and singular[valid].all()
    gap = np.abs(wrap(joints[:, :, 0] - current[:, 0][:, None], s.turn))[valid]
    assert gap.max() < 1e-9


@pytest.mark.parametrize("stem", DEMOS)
def test_output_shapes_and_types(subjects, stem):
    """As documented: joints (N, RAW_SOLUTIONS, JOINT_COUNT) floats, valid (N, RAW_SOLUTIONS)
    bool, labels (N, RAW_SOLUTIONS, len(LABEL_NAMES)) int8 of +1 or -1 (0 where not valid), singular bool, conditioning
    (N, RAW_SOLUTIONS, len(CONDITION_NAMES)) or None with conditioning=False; (N, 3, 4) poses
    give the same as (N, 4, 4); N = 0 and N = 1, and N across the chunk size, work; the names
    match the per-pose module's."""
    s = subjects(stem)
    b = s.batch
    assert (b.JOINT_COUNT, b.LABEL_NAMES, b.LABEL_VALUES, b.CONDITION_NAMES) == \
        (s.py.JOINT_COUNT, s.py.LABEL_NAMES, s.py.LABEL_VALUES, s.py.CONDITION_NAMES)
    assert b.RAW_SOLUTIONS == s.build.derivation.max_solutions
    rng = np.random.default_rng(7005)
    n = b.CHUNK + 7
    poses = s.chain.poses(s.readings(n, rng))
    current = s.readings(n, rng)
    out = b.inverse_batch(poses, current)
    joints, valid, labels, singular, conditioning = out
    raw = b.RAW_SOLUTIONS
    assert joints.shape == (n, raw, 6) and joints.dtype == np.float64
    assert valid.shape == (n, raw) and valid.dtype == np.bool_
    assert labels.shape == (n, raw, len(b.LABEL_NAMES)) and labels.dtype == np.int8
    assert np.isin(labels[valid], (-1, 1)).all() and (labels[~valid] == 0).all()
    assert singular.shape == (n, raw) and singular.dtype == np.bool_
    assert conditioning.shape == (n, raw, len(b.CONDITION_NAMES)) and conditioning.dtype == np.float64
    assert (conditioning[valid] >= 0).all()
    short = b.inverse_batch(poses[:, :3, :], current)
    for a, c in zip(out, short):
        assert np.array_equal(a, c, equal_nan=True)
    without = b.inverse_batch(poses, current, conditioning=False)
    assert without[4] is None
    for a, c in zip(out[:4], without[:4]):
        assert np.array_equal(a, c, equal_nan=True)
    for size in (0, 1):
        part = b.inverse_batch(poses[:size], current[:size])
        assert [x.shape for x in part] == [(size, raw, 6), (size, raw), (size, raw, len(b.LABEL_NAMES)), (size, raw),
                                           (size, raw, len(b.CONDITION_NAMES))]
        for a, c in zip(part, out):
            assert np.array_equal(a, c[:size], equal_nan=True)
    # rows straddling the chunk boundary equal rows solved alone
    edge = slice(b.CHUNK - 3, b.CHUNK + 3)
    for a, c in zip(b.inverse_batch(poses[edge], current[edge]), out):
        assert np.array_equal(a, c[edge], equal_nan=True)
