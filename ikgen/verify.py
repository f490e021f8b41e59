"""Numerical verification of a generated solver against the generic forward kinematics.

Checks, on seeded random joint vectors within the limits:
- completeness: the source joint vector is among the solutions (angles compared modulo 2 pi),
  on every sample farther than ``SINGULAR_DISTANCE`` from the singular set (the smallest
  singular value of the Jacobian, position rows divided by the arm's length scale);
- round trip, the precision contract (docs/derivation.md section 6): the FK of every returned
  solution reproduces the pose within a bound set by the solution's own conditioning (its smallest
  measure, tuple index 3): ``ROUND_TRIP_TOLERANCE`` (of the length scale, and in radians) when every
  measure is at least ``CONTRACT_MEASURE``, a looser bound proportional to the measure inside
  (``contract_bound``); the worst case is reported per band of conditioning (``BANDS``);
- the distribution of solution counts;
- unreachable poses (far outside the workspace) give an empty list;
- exactly singular poses (found by bisection on a configuration measure that changes sign there)
  give finite solutions that reproduce the pose, and poses moved off them by ``NEAR_STEPS`` of the
  joint that crosses the singular set are held to the contract (they fill the bands below 1e-6,
  which random samples almost never reach).

The work is bounded: an arm whose limits span several turns per joint can have thousands of
solutions per pose (``Arm.equivalent_readings``), and every solve returns them all, so the
samples are cut to keep samples x solutions per pose within ``SOLUTION_BUDGET``
(``bounded_samples``); the result records both the samples asked for and those run.
"""

from __future__ import annotations

import math
import sys
import time
from dataclasses import dataclass, field

import numpy as np

from .engine.chain import Chain as EngineChain
from .engine.labels import numeric_measure, plan_labels
from .kinematics import NumericChain
from .model import Arm
from .rotations import rotation_angle_between

SINGULAR_DISTANCE = 1e-6
ROUND_TRIP_TOLERANCE = 1e-9     # relative to the length scale (position) and in radians (rotation)
MATCH_TOLERANCE = 1e-6          # radians (or length-scale units) between source and solution
SOLUTION_BUDGET = 2_000_000     # samples x the most solutions per pose, at most (about 10 s of solving)
MIN_SAMPLES = 100               # the budget never cuts below this many samples
MANY_SOLUTIONS = 64             # equivalent readings per closed-form solution from which users are told

# The precision contract (docs/derivation.md section 6). m is a solution's smallest conditioning
# measure: at least CONTRACT_MEASURE, the round trip is within ROUND_TRIP_TOLERANCE + FAR_GAIN / m
# (rounding amplified like 1/m near a singular set; the second term is 1e-11 at m = 1e-3); below
# it, within ROUND_TRIP_TOLERANCE + NEAR_FACTOR * max(m, NEAR_FLOOR) (relative to the length scale
# for position, radians for rotation). Near a singular set a joint the pose barely fixes may be
# taken free (docs/derivation.md section 5), which moves the tool by about the distance to the set;
# a measure reads 0 up to NEAR_FLOOR, where a radicand is 0 up to rounding.
CONTRACT_MEASURE = 1e-6
FAR_GAIN = 1e-14
NEAR_FACTOR = 10.0
NEAR_FLOOR = 1e-8
BANDS = (("m >= 1e-3", 1e-3), ("1e-6 <= m < 1e-3", 1e-6), ("1e-9 <= m < 1e-6", 1e-9), ("m < 1e-9", -1.0))
NEAR_STEPS = (1e-3, 1e-5, 1e-7)  # radians (or length-scale units) off an exactly singular reading


@dataclass
class Verification:
    arm: str
    samples: int
    seed: int
    checked: int = 0                    # samples farther than SINGULAR_DISTANCE from the singular set
    complete: int = 0                   # of those, samples whose source joints were found
    worst_position: float = 0.0         # length unit
    worst_rotation: float = 0.0         # radians
    position_tolerance: float = 0.0
    counts: dict = field(default_factory=dict)
    unreachable_tested: int = 0
    unreachable_ok: int = 0
    singular_tested: dict = field(default_factory=dict)   # kind -> tested
    singular_ok: dict = field(default_factory=dict)       # kind -> finite and reproducing
    worst_singular_position: float = 0.0
    worst_singular_rotation: float = 0.0
    failures: list = field(default_factory=list)
    seconds: float = 0.0
    requested: int = 0                  # samples asked for (more than ``samples`` when the budget cut them)
    per_pose: int = 0                   # the most solutions one pose can have (the solver's MAX_SOLUTIONS)
    bands: dict = field(default_factory=dict)   # band label -> Band (random samples and near-singular poses)

    @property
    def completeness(self) -> float:
        return self.complete / self.checked if self.checked else 1.0

    @property
    def passed(self) -> bool:
        return not self.failures


@dataclass
class Band:
    """The worst round trip of the solutions whose smallest conditioning measure lies in one band."""
    solutions: int = 0
    worst_position: float = 0.0         # length unit
    worst_rotation: float = 0.0         # radians
    worst_share: float = 0.0            # the largest error over its contract bound (<= 1 passes)


def contract_bound(measure: float) -> float:
    """The round-trip bound (relative to the length scale; radians for rotation) of a solution
    whose smallest conditioning measure is ``measure`` (inf when the solver states none)."""
    if measure >= CONTRACT_MEASURE:
        return ROUND_TRIP_TOLERANCE + FAR_GAIN / measure
    return ROUND_TRIP_TOLERANCE + NEAR_FACTOR * max(measure, NEAR_FLOOR)


def contract_bounds(measures: np.ndarray) -> np.ndarray:
    """contract_bound of each measure at once (the same arithmetic)."""
    m = np.asarray(measures, dtype=float)
    with np.errstate(divide="ignore"):
        far = ROUND_TRIP_TOLERANCE + FAR_GAIN / m
    return np.where(m >= CONTRACT_MEASURE, far, ROUND_TRIP_TOLERANCE + NEAR_FACTOR * np.maximum(m, NEAR_FLOOR))


def band_of(measure: float) -> str:
    return next(label for label, low in BANDS if measure >= low)


def smallest_measure(solution) -> float:
    """A solution's smallest conditioning measure (tuple index 3); inf when it states none, so that
    such a solution is held to the strict bound."""
    measures = solution[3] if len(solution) > 3 else ()
    try:
        values = [float(v) for v in measures]
    except TypeError:
        return math.inf
    return min(values) if values else math.inf


def smallest_measures(solutions: list) -> list:
    """smallest_measure of each solution; one numpy reduction when every solution states the same
    number of measures (a generated solver's always do), else solution by solution."""
    if solutions and all(len(s) > 3 for s in solutions):
        try:
            table = np.array([s[3] for s in solutions], dtype=float)
        except (TypeError, ValueError):
            table = None
        if table is not None and table.ndim == 2 and table.shape[1] > 0:
            return table.min(axis=1).tolist()
    return [smallest_measure(s) for s in solutions]


def record_round_trips(result: "Verification", measures, pos, rot, scale: float) -> np.ndarray:
    """Enter round-trip errors into the bands; returns each error over its bound (the larger of
    position and rotation)."""
    m = np.asarray(measures, dtype=float).reshape(-1)
    if not len(m):
        return np.zeros(0)
    pos, rot = np.asarray(pos, dtype=float), np.asarray(rot, dtype=float)
    bounds = contract_bounds(m)
    share = np.maximum(pos / (bounds * scale), rot / bounds)
    left = np.ones(len(m), dtype=bool)
    for label, low in BANDS:                # each solution in the first band whose floor it reaches
        inside = left & (m >= low)
        left &= ~inside
        if inside.any():
            band = result.bands.setdefault(label, Band())
            band.solutions += int(inside.sum())
            band.worst_position = max(band.worst_position, float(pos[inside].max()))
            band.worst_rotation = max(band.worst_rotation, float(rot[inside].max()))
            band.worst_share = max(band.worst_share, float(share[inside].max()))
    if left.any():                          # NaN: as band_of, no band takes it
        raise ValueError("a conditioning measure is NaN")
    return share


def target_of(arm: Arm):
    """The arm's target (engine/targets.py), cached on the arm object."""
    if "_target" not in arm.__dict__:
        from .engine.targets import resolve
        object.__setattr__(arm, "_target", resolve(arm))     # Arm is frozen
    return arm.__dict__["_target"]


def jacobian_distance(chain: NumericChain, readings: np.ndarray) -> np.ndarray:
    """Smallest singular value of the target's Jacobian (position rows / length scale; for a point
    and an angle the turn about the target's axis, for a point and a direction the rate of the
    tool's direction, for a pose all three rotation rates) per joint vector."""
    frames = chain.frames(readings)
    tool = frames[:, -1] @ chain.tool
    point = tool[:, :3, 3]
    chosen = frames[:, :-1] if chain.standard else frames[:, 1:]
    z = chosen[:, :, :3, 2]
    o = chosen[:, :, :3, 3]
    scale = chain.arm.reach_scale()
    linear = np.where(chain.revolute[None, :, None], np.cross(z, point[:, None, :] - o) / scale, z)
    angular = np.where(chain.revolute[None, :, None], z, 0.0)
    target = target_of(chain.arm)
    if target.kind == "point":
        jac = linear
    elif target.kind == "point_and_angle":
        axis = np.array([float(v) for v in target.axis])
        jac = np.concatenate([linear, (angular @ axis)[:, :, None]], axis=2)
    elif target.kind == "point_and_direction":
        direction = tool[:, :3, "xyz".index(target.tool_axis)]
        jac = np.concatenate([linear, np.cross(angular, direction[:, None, :])], axis=2)
    else:
        jac = np.concatenate([linear, angular], axis=2)      # (N, dof, 6): columns as rows
    if chain.arm.given_joint is not None:                    # the given joint does not move: its column goes
        jac = np.delete(jac, chain.arm.given_joint - 1, axis=1)
    return np.linalg.svd(jac, compute_uv=False)[:, -1]


def given_of(arm: Arm, readings) -> tuple:
    """The arguments a solver takes beside the pose: the given joint's reading from ``readings``
    (a joint vector), or nothing when the arm has no given joint."""
    if arm.given_joint is None:
        return ()
    return (float(readings[arm.given_joint - 1]),)


def angle_gap(a: np.ndarray, b: np.ndarray, arm: Arm) -> np.ndarray:
    """Per-joint distance between readings, modulo a full turn for revolute joints (internal units)."""
    delta = (np.asarray(a) - np.asarray(b)) * arm.reading_scales()
    revolute = np.array([j.revolute for j in arm.joints])
    wrapped = (delta + math.pi) % (2 * math.pi) - math.pi
    return np.abs(np.where(revolute, wrapped, delta / arm.reach_scale()))


def random_readings(arm: Arm, count: int, rng) -> np.ndarray:
    limits = arm.limits_in_readings()
    return limits[:, 0] + rng.random((count, arm.dof)) * (limits[:, 1] - limits[:, 0])


def check_round_trip(chain: NumericChain, poses: np.ndarray, solutions: list) -> tuple[np.ndarray, np.ndarray]:
    """(position errors, rotation errors) of FK(solution) against the pose, for a flat list: the
    target's parts only (a point: no rotation; a point and a direction: the angle between the
    directed tool axes)."""
    if len(solutions) == 0:
        return np.zeros(0), np.zeros(0)
    joints = np.asarray(solutions, dtype=float)
    achieved = chain.poses(joints)
    pos = np.linalg.norm(achieved[:, :3, 3] - poses[:, :3, 3], axis=1)
    target = target_of(chain.arm)
    if target.kind == "point":
        rot = np.zeros(len(pos))
    elif target.kind == "point_and_direction":
        k = "xyz".index(target.tool_axis)
        a, b = achieved[:, :3, k], poses[:, :3, k]
        rot = np.arctan2(np.linalg.norm(np.cross(a, b), axis=1), np.einsum("ni,ni->n", a, b))
    else:
        rot = rotation_angle_between(achieved[:, :3, :3], poses[:, :3, :3])
    return pos, rot


def most_solutions(arm: Arm, module) -> int:
    """The most solutions one pose can have: the solver's MAX_SOLUTIONS when it states it, else
    the equivalent readings of the arm's limits (times 1)."""
    stated = getattr(module, "MAX_SOLUTIONS", None)
    return int(stated) if isinstance(stated, int) and stated > 0 else math.prod(arm.equivalent_readings())


def bounded_samples(samples: int, per_pose: int, budget: int | None = SOLUTION_BUDGET) -> int:
    """``samples``, cut so that samples x ``per_pose`` stays within ``budget`` (never below
    MIN_SAMPLES, never above ``samples``); ``budget=None`` cuts nothing."""
    if budget is None:
        return samples
    return min(samples, max(MIN_SAMPLES, budget // max(per_pose, 1)))


def workload_note(arm: Arm) -> str | None:
    """A sentence for the user when the arm's limits give many solutions per pose, else None."""
    counts = arm.equivalent_readings()
    total = math.prod(counts)
    if total < MANY_SOLUTIONS:
        return None
    wide = ", ".join(f"{j.index}" for j, c in zip(arm.joints, counts) if c > 1)
    return (f"arm '{arm.name}': its joint limits allow {total:,} equivalent readings of every closed-form solution "
            f"(joints {wide} span more than a turn), so one pose can have {total:,} times as many solutions, and "
            f"every solve returns them all; solving is that much slower, and verification runs fewer samples "
            f"(at most {SOLUTION_BUDGET:,} solutions in all)")


def verify(arm: Arm, module, samples: int = 10000, seed: int = 2026, progress: bool = False,
           budget: int | None = SOLUTION_BUDGET) -> Verification:
    """Verify the solver ``module`` (with ``inverse(pose, current)``) for ``arm`` on ``samples``
    random joint vectors, cut to fit ``budget`` (see bounded_samples; None: no cut)."""
    started = time.perf_counter()
    chain = NumericChain(arm)
    rng = np.random.default_rng(seed)
    scale = arm.reach_scale()
    per_pose = most_solutions(arm, module)
    requested, samples = samples, bounded_samples(samples, per_pose, budget)
    result = Verification(arm=arm.name, samples=samples, seed=seed,
                          position_tolerance=ROUND_TRIP_TOLERANCE * scale, requested=requested, per_pose=per_pose)
    readings = random_readings(arm, samples, rng)
    poses = chain.poses(readings)
    distance = jacobian_distance(chain, readings)
    all_joints, all_measures = [], []
    per_sample = np.zeros(samples, dtype=int)
    last_report = time.perf_counter()
    for index in range(samples):
        solutions = module.inverse(poses[index], *given_of(arm, readings[index]))
        result.counts[len(solutions)] = result.counts.get(len(solutions), 0) + 1
        per_sample[index] = len(solutions)
        all_joints += [list(s[0]) for s in solutions]
        all_measures += smallest_measures(solutions)
        if progress and time.perf_counter() - last_report > 0.5:
            sys.stderr.write(f"\r  verifying {index + 1}/{samples} samples")
            sys.stderr.flush()
            last_report = time.perf_counter()
    if progress:
        sys.stderr.write("\r" + " " * 60 + "\r")
    missing_examples = check_completeness(arm, result, readings, distance, all_joints, per_sample)
    pos, rot = check_round_trip(chain, np.repeat(poses, per_sample, axis=0), all_joints)
    record_round_trips(result, all_measures, pos, rot, scale)
    measures = np.array(all_measures, dtype=float)
    strict = measures >= CONTRACT_MEASURE
    if strict.any():            # the headline figures: the solutions at m >= CONTRACT_MEASURE
        result.worst_position = float(pos[strict].max())
        result.worst_rotation = float(rot[strict].max())
        bounds = contract_bounds(measures[strict])
        position_over = bool((pos[strict] > bounds * scale).any())
        rotation_over = bool((rot[strict] > bounds).any())
    else:
        position_over = rotation_over = False
    if result.complete < result.checked:
        shown = ", ".join("[" + " ".join(f"{v:.6g}" for v in m) + "]" for m in missing_examples)
        result.failures.append(f"completeness {result.complete}/{result.checked}: source joints not among the "
                               f"solutions, e.g. {shown}")
    if position_over:
        result.failures.append(f"round-trip position error {result.worst_position:.3g} {arm.length_unit} exceeds "
                               f"{result.position_tolerance:.3g} (+ {FAR_GAIN:g} / m of the length scale)")
    if rotation_over:
        result.failures.append(f"round-trip rotation error {result.worst_rotation:.3g} rad exceeds "
                               f"{ROUND_TRIP_TOLERANCE:g} (+ {FAR_GAIN:g} / m)")
    check_unreachable(arm, chain, module, rng, result)
    check_singular(arm, chain, module, rng, result)
    check_bands(arm, result)
    result.seconds = time.perf_counter() - started
    return result


def check_completeness(arm: Arm, result: Verification, readings: np.ndarray, distance: np.ndarray,
                       all_joints: list, per_sample: np.ndarray) -> list:
    """Counts the samples farther than SINGULAR_DISTANCE from the singular set (``checked``) and those
    whose source readings are among their solutions (``complete``), all samples at once; returns up
    to three source readings that were missed, in sample order."""
    checked = distance > SINGULAR_DISTANCE
    found = np.zeros(len(readings), dtype=bool)
    if all_joints:
        sources = np.repeat(readings, per_sample, axis=0)
        match = angle_gap(np.array(all_joints), sources, arm).max(axis=1) < MATCH_TOLERANCE
        starts = np.cumsum(per_sample) - per_sample
        solved = per_sample > 0
        found[solved] = np.logical_or.reduceat(match, starts[solved])
    result.checked += int(checked.sum())
    result.complete += int((checked & found).sum())
    return [readings[k] for k in np.nonzero(checked & ~found)[0][:3]]


def check_bands(arm: Arm, result: Verification) -> None:
    """A failure for each band whose worst round trip exceeds the contract (for the strict bands, only
    when the headline position and rotation lines, from the random samples, have not said so)."""
    headline_failed = any(f.startswith("round-trip position") or f.startswith("round-trip rotation")
                          for f in result.failures)
    strict = {label for label, low in BANDS if low >= CONTRACT_MEASURE}
    for label, band in sorted(result.bands.items(), key=lambda item: [b[0] for b in BANDS].index(item[0])):
        if band.worst_share <= 1.0 or (label in strict and headline_failed):
            continue
        result.failures.append(f"round-trip error at conditioning {label}: {band.worst_position:.3g} "
                               f"{arm.length_unit}, {band.worst_rotation:.3g} rad, {band.worst_share:.3g} times the "
                               f"contract's bound")


def arm_scale(result: Verification) -> float:
    """The arm's length scale, from the position tolerance the result was checked against."""
    return result.position_tolerance / ROUND_TRIP_TOLERANCE


def band_rows(result: Verification, unit: str) -> list[list[str]]:
    """Rows (check, result, threshold, note) of the worst round trip per band of conditioning, for
    the verification table."""
    rows = []
    for label, low in BANDS:
        band = result.bands.get(label)
        if band is None:
            continue
        if low >= CONTRACT_MEASURE:
            bound = f"{ROUND_TRIP_TOLERANCE:g} + {FAR_GAIN:g} / m (x {arm_scale(result):.3g} {unit}; rad)"
        else:
            bound = f"{ROUND_TRIP_TOLERANCE:g} + {NEAR_FACTOR:g} max(m, {NEAR_FLOOR:g}) (x {arm_scale(result):.3g} {unit}; rad)"
        rows.append([f"round trip, conditioning {label}",
                     f"{band.worst_position:.3g} {unit}, {band.worst_rotation:.3g} rad ({band.solutions} solutions)",
                     bound, f"{band.worst_share:.2g} of the bound at worst"])
    return rows


def check_unreachable(arm: Arm, chain: NumericChain, module, rng, result: Verification, count: int = 200):
    """Poses moved three length scales away from a reachable one must give no solution."""
    readings = random_readings(arm, count, rng)
    poses = chain.poses(readings)
    directions = rng.normal(size=(count, 3))
    directions /= np.linalg.norm(directions, axis=1)[:, None]
    poses[:, :3, 3] += 3.0 * arm.reach_scale() * directions
    bad = 0
    for pose, source in zip(poses, readings):
        solutions = module.inverse(pose, *given_of(arm, source))
        bad += bool(solutions)
    result.unreachable_tested = count
    result.unreachable_ok = count - bad
    if bad:
        result.failures.append(f"{bad} of {count} unreachable poses returned solutions")
    for pose in (np.full((4, 4), np.nan), np.where(np.eye(4) > 0, np.inf, 0.0)):
        if module.inverse(pose, *given_of(arm, readings[0])):
            result.failures.append("a pose with NaN or infinity returned solutions")


# ----------------------------------------------------------------------- singular poses

def dh_angles(chain: NumericChain, readings: np.ndarray) -> np.ndarray:
    """DH joint angles (radians) of readings (N, dof): theta + offset + direction * reading."""
    q = np.atleast_2d(np.asarray(readings, dtype=float)) * chain.scales
    return chain.theta + chain.offset + chain.direction * q


def label_specs(arm: Arm) -> list:
    """The arm's planned labels (engine/labels.py), cached on the arm object."""
    if "_label_specs" not in arm.__dict__:
        from .engine.targets import resolve
        object.__setattr__(arm, "_label_specs", plan_labels(arm, resolve(arm)))   # Arm is frozen
    return arm.__dict__["_label_specs"]


def label_measure(name: str):
    """measure(chain, readings): the configuration label ``name`` measured on the forward
    kinematics (engine/labels.py gives the definitions); zero on that branch's singular set."""
    def measure(chain: NumericChain, readings: np.ndarray) -> np.ndarray:
        engine_chain = chain.__dict__.get("_label_chain")
        if engine_chain is None:
            engine_chain = chain.__dict__["_label_chain"] = EngineChain(chain.arm)
        spec = next((s for s in label_specs(chain.arm) if s.name == name), None)
        if spec is None:
            raise ValueError(f"arm '{chain.arm.name}' has no label '{name}' with a geometric measure")
        return numeric_measure(engine_chain, dh_angles(chain, readings), spec.geometry)
    return measure


def singular_kind(spec) -> tuple[str, tuple[int, ...]]:
    """What a label's singular set is, and which joints (0-based) move a pose onto it, in order of
    preference."""
    kind = spec.geometry[0]
    if kind == "reach":
        return "wrist point on the reach boundary (reach_forward / reach_backward)", (1, 2, 0)
    if kind in ("elbow", "elbow_turn"):
        s = spec.geometry[1]
        return "elbow fully stretched or folded", (s, s - 1)
    _, i, j, k = spec.geometry
    if spec.name == "elbow_bend":
        return "elbow fully stretched or folded (axes 3 and 5 aligned)", (j - 1, i - 1, k - 1)
    if spec.name == "base_bend":
        return "axes 1 and 3 aligned", (j - 1, i - 1, k - 1)
    other = f"axis {k}" if isinstance(k, int) else f"the tool's {k} axis"
    return f"wrist axis {i} and {other} aligned", (j - 1, i - 1) + ((k - 1,) if isinstance(k, int) else ())


def find_root(chain, measure, base: np.ndarray, joint: int) -> np.ndarray | None:
    """Readings equal to ``base`` but for ``joint`` (0-based), where ``measure`` is exactly 0."""
    found = bracket_root(chain, measure, base, joint)
    return found if found is None or isinstance(found, np.ndarray) else bisect_roots(chain, measure, [found])[0]


@dataclass
class Bracket:
    """A sign change of a measure between two readings of one joint, the rest of ``base`` fixed."""
    base: np.ndarray
    joint: int
    lo: float
    hi: float
    f_lo: float


def bracket_root(chain, measure, base: np.ndarray, joint: int) -> np.ndarray | Bracket | None:
    """Where along ``joint`` (0-based) from ``base`` the measure is 0: readings exactly on a grid
    point, a Bracket of the first sign change on a grid over the joint's limits, or None."""
    lo_limit, hi_limit = chain.arm.limits_in_readings()[joint]
    grid = np.linspace(lo_limit, hi_limit, 721)
    trial = np.repeat(base[None, :], len(grid), axis=0)
    trial[:, joint] = grid
    values = measure(chain, trial)
    exact = np.nonzero(values == 0.0)[0]
    if len(exact):                       # a grid point lies exactly on the singular set
        return trial[exact[0]].copy()
    changes = np.nonzero(np.sign(values[:-1]) * np.sign(values[1:]) < 0)[0]
    if len(changes) == 0:
        return None
    return Bracket(base, joint, grid[changes[0]], grid[changes[0] + 1], values[changes[0]])


def bisect_roots(chain, measure, brackets: list[Bracket]) -> list[np.ndarray]:
    """The readings where ``measure`` is 0 in each bracket, by bisection to 1e-15 relative (or an
    exact zero, or 200 halvings). All brackets are halved in step, the measure evaluated on the
    open ones at once: the same arithmetic per bracket as one at a time, in one numpy call per step."""
    if not brackets:
        return []
    lo = np.array([b.lo for b in brackets], dtype=float)
    hi = np.array([b.hi for b in brackets], dtype=float)
    f_lo = np.array([b.f_lo for b in brackets], dtype=float)
    bases = np.array([b.base for b in brackets], dtype=float).reshape(len(brackets), -1)
    joints = np.array([b.joint for b in brackets], dtype=int)
    rows = np.arange(len(brackets))
    open_ = np.ones(len(brackets), dtype=bool)
    for _ in range(200):
        if not open_.any():
            break
        k = rows[open_]
        mid = 0.5 * (lo[k] + hi[k])
        points = bases[k].copy()
        points[np.arange(len(k)), joints[k]] = mid
        f_mid = measure(chain, points)
        finished = (f_mid == 0) | (hi[k] - lo[k] < 1e-15 * np.maximum(1.0, np.abs(mid)))
        open_[k[finished]] = False
        go = ~finished
        same = np.sign(f_mid) == np.sign(f_lo[k])
        up, down = k[go & same], k[go & ~same]
        lo[up], f_lo[up] = mid[go & same], f_mid[go & same]
        hi[down] = mid[go & ~same]
    points = bases.copy()
    points[rows, joints] = 0.5 * (lo + hi)
    return list(points)


def check_near_singular(arm: Arm, chain: NumericChain, module, result: Verification, point: np.ndarray,
                        joint: int) -> None:
    """Poses with ``joint`` moved ``NEAR_STEPS`` off an exactly singular reading: every solution is
    entered into the bands of conditioning (and so held to the contract)."""
    unit = 1.0 if arm.joints[joint].revolute else arm.reach_scale()
    for step in NEAR_STEPS:
        moved = point.copy()
        moved[joint] += step * unit / arm.reading_scales()[joint]
        pose = chain.pose(moved)
        solutions = module.inverse(pose, *given_of(arm, moved), list(moved))
        if not solutions:
            continue
        joints = np.array([s[0] for s in solutions], dtype=float).reshape(len(solutions), -1)
        finite = np.isfinite(joints).all(axis=1)          # one test for every solution at once
        solutions = [s for s, keep in zip(solutions, finite.tolist()) if keep]
        if solutions:
            pos, rot = check_round_trip(chain, np.repeat(pose[None], len(solutions), axis=0), joints[finite])
            record_round_trips(result, smallest_measures(solutions), pos, rot, arm.reach_scale())


def check_singular(arm: Arm, chain: NumericChain, module, rng, result: Verification, per_kind: int = 20):
    """Poses exactly on each label's singular set (found by bisection along a joint that crosses
    it) give finite solutions that reproduce the pose."""
    for spec in label_specs(arm):
        if spec.name not in getattr(module, "LABEL_NAMES", ()):
            continue
        kind, joints = singular_kind(spec)
        measure = label_measure(spec.name)
        tested = ok = 0
        for point, crossing in singular_points(arm, chain, measure, joints, rng, per_kind):
            check_near_singular(arm, chain, module, result, point, crossing)
            tested += 1
            pose = chain.pose(point)
            solutions = module.inverse(pose, *given_of(arm, point), list(point))
            found = [list(s[0]) for s in solutions]
            if not found or not np.all(np.isfinite(found)):
                continue
            pos, rot = check_round_trip(chain, np.array([pose] * len(found)), found)
            # At a singular pose the double root and the kept joint can cost accuracy:
            # allow 1e3 times the regular round-trip tolerance.
            result.worst_singular_position = max(result.worst_singular_position, float(pos.max()))
            result.worst_singular_rotation = max(result.worst_singular_rotation, float(rot.max()))
            if pos.max() <= 1e3 * result.position_tolerance and rot.max() <= 1e3 * ROUND_TRIP_TOLERANCE:
                ok += 1
        result.singular_tested[kind] = tested
        result.singular_ok[kind] = ok
        if ok < tested:
            result.failures.append(f"singular poses ({kind}): {tested - ok} of {tested} gave no finite solution "
                                   "reproducing the pose")


def singular_points(arm: Arm, chain: NumericChain, measure, joints, rng, per_kind: int) -> list:
    """Up to ``per_kind`` (readings exactly on the measure's zero set, the joint that crossed it), from
    at most 3 x per_kind seeded random readings: each tries ``joints`` in order for a sign change of
    the measure on a grid (bracket_root), and the brackets are then bisected together."""
    found: list = []
    for attempt in range(per_kind * 3):
        if len(found) >= per_kind:
            break
        base = random_readings(arm, 1, rng)[0]
        for joint in joints:
            if joint < arm.dof:
                root = bracket_root(chain, measure, base, joint)
                if root is not None:
                    found.append((root, joint))
                    break
    brackets = [root for root, _ in found if isinstance(root, Bracket)]
    bisected = iter(bisect_roots(chain, measure, brackets))
    return [(next(bisected) if isinstance(root, Bracket) else root, joint) for root, joint in found]
