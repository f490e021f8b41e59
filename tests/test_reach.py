"""The reach map (ikgen/reach): its figures against outside references, and every way of running
it against the others.

- A planar two-link arm's map is the annulus |a1 - a2| <= r <= a1 + a2 (Spong, Hutchinson and
  Vidyasagar, *Robot Modeling and Control*, Wiley 2006, chapter 1, the two-link planar arm's
  workspace; from memory), cell by cell except the cells a boundary circle cuts. The engine
  handles six-axis arms only, so this runs the map's core on a stand-in solver written from the
  same book's closed form (tests/reach_helpers.py), through the same chunked runner.
- For six-axis demo arms: every point marked reachable has exactly as many solutions as the
  generated Python solver's inverse(pose) returns, each within the limits and each reaching the
  pose under ikgen.kinematics.NumericChain; a sample of points marked unreachable has no solution
  from an independent multi-start scipy.optimize.least_squares search within the joint limits.
- Local runs in this process, on worker threads, on worker processes and on a local Dask cluster
  give the same arrays bit for bit; a chunk that fails once, a worker process that dies and a
  Dask worker that dies are recovered from, said, and change nothing.
"""

from __future__ import annotations

import functools
import importlib.util

import numpy as np
import pytest
from scipy.optimize import least_squares

from helpers import EXAMPLES, pose_error_functions
from ikgen.armfile import load_arm
from ikgen.generate import load_module
from ikgen.kinematics import NumericChain
from ikgen.reach import run
from ikgen.reach.core import JointWindow, figures_from_batch, joint_readings, windows_of
from ikgen.reach.grid import Grid, axis_values
from ikgen.reach.maps import compute
from ikgen.reach.orientations import orientation_sets
from ikgen.reach.solvers import ReachJob, batch_solver
from ikgen.rotations import rotation_angle_between
from reach_helpers import PlanarSolver, die_once, fail_once, planar_inverse_batch

HAVE_DASK = importlib.util.find_spec("distributed") is not None
NO_DASK = "dask.distributed is not installed (pip install '.[cluster]'); the Dask checks need it"
A1, A2 = 1.0, 0.6           # link lengths of the stand-in planar arm (m)
FULL_TURN = JointWindow(360.0, -180.00000036, 180.00000036, -180.0, 180.0)


# ------------------------------------------------------------------------- planar two-link arm

def planar_job(step: float = 0.05, windows=(FULL_TURN, FULL_TURN)) -> ReachJob:
    side = axis_values(-1.7, 1.7, step)
    rotations, names = orientation_sets("fixed:0:0:0")
    return ReachJob(Grid(side, side, np.array([0.0]), rotations, names), PlanarSolver(A1, A2, windows))


def annulus_cells(job: ReachJob, step: float):
    """(inside, cut) per (x, y) cell: the centre within the annulus, and whether a boundary circle
    passes through the cell's square."""
    x, y = np.meshgrid(job.grid.x, job.grid.y, indexing="ij")
    r = np.hypot(x, y)
    near = np.hypot(np.maximum(np.abs(x) - step / 2, 0), np.maximum(np.abs(y) - step / 2, 0))
    far = np.hypot(np.abs(x) + step / 2, np.abs(y) + step / 2)
    cut = np.zeros_like(r, dtype=bool)
    for radius in (abs(A1 - A2), A1 + A2):
        cut |= (near <= radius) & (radius <= far)
    return (abs(A1 - A2) <= r) & (r <= A1 + A2), cut


def test_planar_two_link_map_is_the_textbook_annulus():
    step = 0.05
    job = planar_job(step)
    count = compute(job, chunk=700, mode="here")["count"][0, :, :, 0]
    inside, cut = annulus_cells(job, step)
    checked = ~cut
    assert checked.sum() > 4000 and (inside & checked).sum() > 1000 and (~inside & checked).sum() > 1000
    np.testing.assert_array_equal(count[checked] > 0, inside[checked])
    # two solutions (elbow one way and the other) inside the annulus, away from its edges
    assert set(np.unique(count[checked & inside])) == {2}


def test_planar_elbow_limit_leaves_one_solution():
    """Joint 2 limited to [0, 180] deg keeps one elbow side: one solution inside the annulus."""
    step = 0.05
    elbow = JointWindow(360.0, -0.00000018, 180.00000018, 0.0, 180.0)
    job = planar_job(step, (FULL_TURN, elbow))
    count = compute(job, chunk=4096, mode="here")["count"][0, :, :, 0]
    inside, cut = annulus_cells(job, step)
    assert set(np.unique(count[~cut & inside])) == {1}
    assert not count[~cut & ~inside].any()


def test_planar_margin_and_conditioning_of_one_pose():
    """q = (30, 90) deg: the other solution is (30 + 2 atan2(a2, a1), -90) (the elbow mirrored
    about the line to the point; plane geometry). Margins with limits +-180 deg: the first
    solution's smallest is joint 2's (180 - 90) / 360 = 0.25, the other's is joint 1's
    (180 - 91.93) / 360 = 0.2446; the best is 0.25. |sin q2| is 1 for both."""
    q1, q2 = np.radians(30.0), np.radians(90.0)
    pose = np.eye(4)
    pose[0, 3] = A1 * np.cos(q1) + A2 * np.cos(q1 + q2)
    pose[1, 3] = A1 * np.sin(q1) + A2 * np.sin(q1 + q2)
    joints, valid, _, _, conditioning = planar_inverse_batch(pose[None], A1, A2)
    mirrored = 30.0 + 2 * np.degrees(np.arctan2(A2, A1))
    np.testing.assert_allclose(np.sort(joints[0, :, 0]), np.sort([30.0, mirrored]), atol=1e-9)
    figures = figures_from_batch(joints, valid, conditioning, (FULL_TURN, FULL_TURN))
    assert figures["count"][0] == 2
    assert figures["margin"][0] == pytest.approx(0.25, abs=1e-12)
    assert figures["conditioning"][0] == pytest.approx(1.0, abs=1e-12)
    outside = pose.copy()
    outside[0, 3] = 2.0
    none = figures_from_batch(*[a for i, a in enumerate(planar_inverse_batch(outside[None], A1, A2)) if i in (0, 1, 4)],
                              (FULL_TURN, FULL_TURN))
    assert none["count"][0] == 0 and np.isnan(none["margin"][0]) and np.isnan(none["conditioning"][0])


# ------------------------------------------------------------------------- six-axis demo arms

@functools.cache
def demo(stem: str):
    """(arm, map job on a small grid, computed figures) of a demo arm."""
    arm = load_arm(EXAMPLES / f"{stem}.toml")
    reach = 0.6 * arm.reach_scale()
    side = axis_values(-reach, reach, reach / 7)
    height = axis_values(-0.3 * reach, reach, reach / 6)
    rotations, names = orientation_sets("down:90,level:180,tilt:40:120")
    job = ReachJob(Grid(side, side, height, rotations, names), batch_solver(arm))
    return arm, job, compute(job, chunk=8192, mode="here")


@pytest.mark.parametrize("stem", ["benchtop6", "kitter6"])
def test_every_reachable_point_has_solutions_that_reach_it(stem, built):
    arm, job, figures = demo(stem)
    python = load_module(built(EXAMPLES / f"{stem}.toml").files[f"{stem}/{stem}_ik.py"], f"{stem}_ik_reach")
    poses = job.grid.poses(0, job.grid.size)
    count = figures["count"].reshape(-1)
    reachable = np.flatnonzero(count > 0)
    assert 0.05 < len(reachable) / len(count) < 0.95        # the box holds both kinds of point
    solutions, targets = [], []
    for index in reachable:
        found = python.inverse(poses[index])
        assert len(found) == count[index], (stem, index)
        solutions += [s.joints for s in found]
        targets += [poses[index]] * len(found)
    solutions = np.array(solutions)
    limits = arm.limits_in_readings()
    assert ((solutions >= limits[:, 0] - 1e-9) & (solutions <= limits[:, 1] + 1e-9)).all()
    reached = NumericChain(arm).poses(solutions)
    targets = np.array(targets)
    position = np.linalg.norm(reached[:, :3, 3] - targets[:, :3, 3], axis=1)
    assert position.max() < 1e-9 * arm.reach_scale()
    assert rotation_angle_between(reached[:, :3, :3], targets[:, :3, :3]).max() < 1e-9
    margin = figures["margin"].reshape(-1)
    assert np.isfinite(margin[reachable]).all() and np.isnan(margin[count == 0]).all()
    assert (margin[reachable] >= 0).all() and (margin[reachable] <= 0.5).all()


def best_margin(arm, solutions) -> float:
    """The best solution's smallest share-of-range distance to a limit (the documented margin)."""
    limits = arm.limits_in_readings()
    span = limits[:, 1] - limits[:, 0]
    return max(float(np.min(np.minimum(s - limits[:, 0], limits[:, 1] - s) / span)) for s in solutions)


@pytest.mark.parametrize("stem", ["benchtop6", "kitter6"])
def test_margin_matches_the_python_solvers_solutions(stem, built):
    arm, job, figures = demo(stem)
    python = load_module(built(EXAMPLES / f"{stem}.toml").files[f"{stem}/{stem}_ik.py"], f"{stem}_ik_margin")
    poses = job.grid.poses(0, job.grid.size)
    margin = figures["margin"].reshape(-1)
    reachable = np.flatnonzero(figures["count"].reshape(-1) > 0)
    for index in np.random.default_rng(5).choice(reachable, 300, replace=False):
        joints = np.array([s.joints for s in python.inverse(poses[index])])
        assert margin[index] == pytest.approx(best_margin(arm, joints), abs=1e-9)


def unreachable_sample(job: ReachJob, count: np.ndarray, rng, size: int) -> list[int]:
    """Half of the sample next to a reachable point (the boundary, where a mistake would show),
    half anywhere."""
    reached = count > 0
    neighbour = np.zeros_like(reached)
    for axis in (1, 2, 3):
        for shift in (1, -1):
            neighbour |= np.roll(reached, shift, axis=axis)
    edge = np.flatnonzero((~reached & neighbour).reshape(-1))
    anywhere = np.flatnonzero(~reached.reshape(-1))
    return list(rng.choice(edge, size // 2, replace=False)) + list(rng.choice(anywhere, size // 2, replace=False))


def search_finds_solution(arm, chain, target, rng, starts: int = 12) -> bool:
    """scipy's least_squares from ``starts`` random starts within the limits (bounds = limits) on
    the pose error; True when a start ends within 1e-6 of the arm's length scale and 1e-6 rad."""
    limits = arm.limits_in_readings()
    scale = arm.reach_scale()

    error, jacobian = pose_error_functions(chain, target, scale)   # the Jacobian by forward differences
    for start in rng.uniform(limits[:, 0], limits[:, 1], size=(starts, arm.dof)):
        fit = least_squares(error, start, jac=jacobian, bounds=(limits[:, 0], limits[:, 1]), xtol=1e-12, ftol=1e-12)
        pose = chain.pose(fit.x)
        if (np.linalg.norm(pose[:3, 3] - target[:3, 3]) < 1e-6 * scale and
                rotation_angle_between(pose[:3, :3], target[:3, :3]) < 1e-6):
            return True
    return False


@pytest.mark.parametrize("stem", ["benchtop6", "kitter6"])
def test_unreachable_sample_has_no_least_squares_solution(stem):
    arm, job, figures = demo(stem)
    chain = NumericChain(arm)
    rng = np.random.default_rng(2027)
    poses = job.grid.poses(0, job.grid.size)
    for index in unreachable_sample(job, figures["count"], rng, 20):
        assert not search_finds_solution(arm, chain, poses[index], rng), (stem, index)
    # the control: the same search does find the reachable points it is given
    reachable = np.flatnonzero(figures["count"].reshape(-1) > 0)
    for index in rng.choice(reachable, 4, replace=False):
        assert search_finds_solution(arm, chain, poses[index], rng), (stem, index)


def test_counts_follow_the_turn_rule_of_multi_turn_joints():
    """kitter6's joints 1 and 6 span 540 deg: a reading q and q -+ 360 deg inside the limits are
    two solutions. The window of such a joint counts them (core.joint_readings)."""
    arm = load_arm(EXAMPLES / "kitter6.toml")
    window = windows_of(arm)[0]
    assert window.multi and window.count == 2
    q = np.array([-179.0, -90.0, 0.0, 90.0, 170.0, 180.0, np.nan])
    count, best = joint_readings(q, window)
    np.testing.assert_array_equal(count, [2, 2, 1, 2, 2, 2, 0])
    # -90 and 270 deg: 270 is at 0 from the upper limit; -90 is 180 from -270, a share of 1/3
    assert best[1] == pytest.approx(180.0 / 540.0)


# ------------------------------------------------------------------------- ways of running

def small_job():
    arm, job, _ = demo("benchtop6")
    return job


def same(a: dict, b: dict) -> bool:
    return all(a[k].dtype == b[k].dtype and np.array_equal(a[k], b[k], equal_nan=True) for k in a)


@pytest.mark.parametrize("mode", ["threads", "processes"])
def test_local_pools_give_the_single_process_result_bit_for_bit(mode):
    job = small_job()
    reference = compute(job, chunk=2048, mode="here")
    assert same(compute(job, chunk=2048, mode=mode, workers=2), reference)


@pytest.mark.parametrize("mode", ["here", "threads", "processes"])
def test_a_failed_chunk_is_run_again_and_said(mode, tmp_path):
    job = small_job()
    events = run.Events(note=None)
    function = functools.partial(fail_once, str(tmp_path / "marker"), 4096)
    result = compute(job, chunk=2048, mode=mode, workers=2, events=events, chunk_function=function)
    assert same(result, compute(job, chunk=2048, mode="here"))
    assert len(events.notes) == 1 and "chunk 3 (poses 4,096 to 6,143) failed" in events.notes[0]
    assert "attempt 2 of 3" in events.notes[0]


def test_a_chunk_that_always_fails_stops_the_map_with_a_message():
    from ikgen.errors import IkgenError

    def broken(job, start, stop):
        raise ValueError("always")
    with pytest.raises(IkgenError, match=r"chunk 1 \(poses 0 to 2,047\) failed 3 times, last with ValueError"):
        compute(small_job(), chunk=2048, mode="here", chunk_function=broken)


def test_a_dead_worker_process_is_replaced_and_its_chunks_run_again(tmp_path):
    job = small_job()
    events = run.Events(note=None)
    function = functools.partial(die_once, str(tmp_path / "marker"), 4096)
    result = compute(job, chunk=2048, mode="processes", workers=2, events=events, chunk_function=function)
    assert same(result, compute(job, chunk=2048, mode="here"))
    assert any("a local worker process died" in note for note in events.notes)


@pytest.fixture(scope="module")
def dask_client():
    if not HAVE_DASK:
        pytest.skip(NO_DASK)
    client = run.connect("local", 2)
    yield client
    run.close(client)


def test_local_dask_cluster_gives_the_local_result_bit_for_bit(dask_client):
    job = small_job()
    assert same(compute(job, chunk=2048, mode="dask", client=dask_client), compute(job, chunk=2048, mode="here"))


def test_dask_reruns_a_failed_chunk_and_says_so(dask_client, tmp_path):
    job = small_job()
    events = run.Events(note=None)
    function = functools.partial(fail_once, str(tmp_path / "marker"), 4096)
    result = compute(job, chunk=2048, mode="dask", client=dask_client, events=events, chunk_function=function)
    assert same(result, compute(job, chunk=2048, mode="here"))
    assert any("chunk 3 (poses 4,096 to 6,143) failed on the cluster" in note for note in events.notes)


def test_dask_worker_killed_mid_run_loses_nothing_and_is_reported(dask_client, tmp_path):
    """The chunk function ends its worker process on its first call for one chunk; the nanny
    restarts the worker, the scheduler gives the chunk to a worker again."""
    job = small_job()
    events = run.Events(note=None)
    function = functools.partial(die_once, str(tmp_path / "marker"), 4096)
    result = compute(job, chunk=2048, mode="dask", client=dask_client, events=events, chunk_function=function)
    assert (tmp_path / "marker").exists()                   # the worker did die
    assert same(result, compute(job, chunk=2048, mode="here"))
    assert any("left the cluster during the run" in note for note in events.notes), events.notes
