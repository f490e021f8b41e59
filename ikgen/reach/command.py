"""The ``reach`` subcommand: map where an arm reaches a box of positions in chosen tool
orientations, and write the map's files (docs/reach.md).

Order of work, so that bad input costs nothing and leaves nothing: every option is checked
(box, resolution, size, orientations, heights, output folder), the Dask scheduler is reached
when one is named, then the solver is derived, a time estimate is printed, the chunks run with
a progress display, and only when every chunk is in are the files rendered and written, all or
nothing (generate.write).
"""

from __future__ import annotations

import argparse
import math
import os
import re
import sys
import time
from pathlib import Path

import numpy as np

from ..armsource import ARM_HELP, add_arm_source_options
from ..backends.common import identifier
from ..errors import PATH_LIMIT, IkgenError, clip, quote
from ..exact import plain_decimal, plain_whole
from ..terminal import err, fmt, out, table
from . import outputs, run
from .grid import Grid, axis_count, axis_values
from .maps import ReachMap, compute
from .orientations import SET_HELP, orientation_sets, read_rotation_file
from .solvers import ReachJob

LARGE = 5_000_000           # poses a map may have without --allow-large
HARD_LIMIT = 200_000_000    # poses a map may have at all (about 20 bytes each stay in memory)
DEFAULT_CHUNK = 32_768      # poses per chunk (measured: 16k..64k are equally fast with numpy)
DEFAULT_POOL = "threads"    # local workers (benchmarks/bench_reach.py: threads beat processes in every run)
SAMPLE = 2_048              # poses timed before the run for the estimate
MAX_HEIGHTS = 6
CAUTION = ("A reach map says where the inverse kinematics of the arm file has solutions within its joint "
           "limits, at the grid points and orientations sampled; it knows nothing about your cell. It does not "
           "check self-collision, collisions with the cell, payload, speeds or forces: those are the "
           "integrator's job. Check every placement and path in simulation before moving a real arm, and follow "
           "the applicable machine-safety standards (for industrial robots ISO 10218-1 and -2, and ISO/TS 15066 "
           "for collaborative operation), your local codes and licensed engineering practice.")


# ------------------------------------------------------------------------------- option values

def whole_at_least(least: int, most: int):
    def parse(text: str) -> int:
        value = plain_whole(text)
        if value is None:
            raise argparse.ArgumentTypeError(f"{quote(text)} is not a whole number")
        if not least <= value <= most:
            raise argparse.ArgumentTypeError(f"{value} is not between {least} and {most:,}")
        return value
    return parse


def numbers(text: str, what: str, count: int | None = None) -> list[float]:
    """Finite numbers from a comma-separated option value."""
    words = [w for w in text.replace(",", " ").split()]
    values = []
    for position, word in enumerate(words, 1):
        value = plain_decimal(word)
        if value is None or not math.isfinite(value):
            raise IkgenError(f"{what}: value {position} {quote(word)} is not a finite number; expected a decimal "
                             "number such as 250 or -0.4")
        values.append(value)
    if count is not None and len(values) != count:
        raise IkgenError(f"{what}: got {len(values)} values, expected {count}")
    if not values:
        raise IkgenError(f"{what}: no value given; expected numbers separated by commas")
    return values


def positive_step(text: str) -> float:
    value = plain_decimal(text)
    if value is None or not math.isfinite(value) or value <= 0:
        raise argparse.ArgumentTypeError(f"{quote(text)} is not a number greater than 0")
    return value


# ------------------------------------------------------------------------------- the grid

def nice_step(length: float, intervals: int = 40) -> float:
    """A round spacing (1, 2, 2.5 or 5 times a power of ten) giving about ``intervals`` steps."""
    raw = length / intervals if length > 0 else 1.0
    power = 10.0 ** math.floor(math.log10(raw))
    return next(m * power for m in (1.0, 2.0, 2.5, 5.0, 10.0) if m * power >= raw * (1 - 1e-12))


def box_of(args, arm, base: np.ndarray, step: float | None) -> list[tuple[float, float]]:
    """The box's (low, high) per axis: --box, or a cube around the base as wide as the arm's
    reach bound, widened to whole steps so that the base lies on grid planes."""
    if args.box is None:
        reach = arm.reach_scale()
        half = math.ceil(reach / (step or nice_step(2 * reach)) - 1e-9) * (step or nice_step(2 * reach))
        return [(float(c - half), float(c + half)) for c in base]
    values = numbers(args.box, "--box", 6)
    sides = [(values[0], values[1]), (values[2], values[3]), (values[4], values[5])]
    for name, (low, high) in zip("xyz", sides):
        if high < low:
            raise IkgenError(f"--box: the box is empty: {name} runs from {fmt(low)} to {fmt(high)}; expected "
                             f"{name}min <= {name}max (the order is xmin,xmax,ymin,ymax,zmin,zmax)")
    return sides


def check_size(positions: int, orientations: int, allow_large: bool) -> None:
    poses = positions * orientations
    if poses > HARD_LIMIT:
        raise IkgenError(f"the map would have {poses:,} poses ({positions:,} positions x {orientations} orientations); "
                         f"expected at most {HARD_LIMIT:,} (a larger --step, a smaller --box or fewer orientations)")
    if poses > LARGE and not allow_large:
        raise IkgenError(f"the map would have {poses:,} poses ({positions:,} positions x {orientations} orientations), "
                         f"more than {LARGE:,}; expected --allow-large to confirm a run this size (or a larger --step)")


def orientations_of(args) -> tuple[np.ndarray, tuple[str, ...]]:
    if args.rotations is not None:
        return read_rotation_file(args.rotations)
    return orientation_sets(args.orientations)


def heights_of(args, z: np.ndarray, step: float) -> list[float] | None:
    if args.heights is None:
        return None                 # chosen from the map once it is computed
    heights = numbers(args.heights, "--heights")
    if len(heights) > MAX_HEIGHTS:
        raise IkgenError(f"--heights: {len(heights)} heights; expected at most {MAX_HEIGHTS}")
    for height in heights:
        if not z[0] - step / 2 <= height <= z[-1] + step / 2:
            raise IkgenError(f"--heights: {fmt(height)} lies outside the box's z range {fmt(z[0])} .. {fmt(z[-1])}; "
                             "expected heights within the box")
    return heights


def check_out_folder(path: str) -> None:
    """Refuse an output path that is a file, or below a file, before any work."""
    target = Path(path)
    for folder in [target, *target.parents]:
        if folder.exists():
            if not folder.is_dir():
                raise IkgenError(f"-o {clip(path, PATH_LIMIT)}: {quote(str(folder), PATH_LIMIT)} is not a folder; "
                                 "expected a folder for the map's files")
            if not os.access(folder, os.W_OK | os.X_OK):
                raise IkgenError(f"-o {clip(path, PATH_LIMIT)}: {quote(str(folder), PATH_LIMIT)} is not writable; "
                                 "expected a writable folder")
            return


CLUSTER_ADDRESS = re.compile(r"^(local|(tcp|tls|inproc|ucx|ws|wss)://\S+|[A-Za-z0-9_.\-\[\]:]+:\d{1,5})$")


def check_cluster_options(args) -> None:
    if args.cluster is None:
        return
    if not CLUSTER_ADDRESS.match(args.cluster):
        raise IkgenError(f"--cluster {quote(args.cluster)}: not a scheduler address; expected 'local' or an "
                         "address such as tcp://127.0.0.1:8786")
    if args.solver == "c":
        raise IkgenError("--solver c cannot run on a Dask cluster: the compiled solver lives in this process; "
                         "expected the numpy solver (the default) with --cluster")
    if args.pool is not None or args.workers is not None:
        raise IkgenError("--pool and --workers are for local runs; expected --cluster-workers with --cluster local, "
                         "or the cluster's own workers")
    run.dask_modules()          # a clear message when Dask is not installed, before any work


# ------------------------------------------------------------------------------- progress

class Progress:
    """A one-line progress bar with rate and time left on stderr (a terminal only)."""

    def __init__(self, total: int, enabled: bool):
        self.total, self.enabled = total, enabled
        self.started = time.perf_counter()
        self.shown = 0.0

    def __call__(self, done: int) -> None:
        now = time.perf_counter()
        if not self.enabled or (now - self.shown < 0.25 and done < self.total):
            return
        self.shown = now
        seconds = now - self.started
        rate = done / seconds if seconds > 0 else 0.0
        left = (self.total - done) / rate if rate > 0 else float("nan")
        filled = int(30 * done / self.total)
        sys.stderr.write(f"\r  [{'#' * filled}{'.' * (30 - filled)}] {100 * done / self.total:5.1f} %  "
                         f"{done:,} of {self.total:,} poses  {rate:,.0f} poses/s  about {_duration(left)} left ")
        sys.stderr.flush()

    def close(self) -> None:
        if self.enabled:
            sys.stderr.write("\r" + " " * 110 + "\r")
            sys.stderr.flush()


def _duration(seconds: float) -> str:
    if not math.isfinite(seconds):
        return "?"
    if seconds < 10:
        return f"{seconds:.1f} s"
    if seconds < 90:
        return f"{seconds:.0f} s"
    if seconds < 5400:
        return f"{seconds / 60:.0f} min"
    return f"{seconds / 3600:.1f} h"


def sample_rate(job: ReachJob) -> float:
    """Poses per second of the solver in this process, on SAMPLE poses spread over the grid."""
    size = job.grid.size
    poses = job.grid.poses_at(np.unique(np.linspace(0, size - 1, min(SAMPLE, size)).astype(np.int64)))
    job.solver.figures(poses[:16])                 # loads the solver once
    started = time.perf_counter()
    job.solver.figures(poses)
    return len(poses) / max(time.perf_counter() - started, 1e-9)


def estimate(poses: int, rate: float, workers: int, solver: str) -> str:
    """The time estimate: the sampled one-process rate, on one worker and on all of them (a
    shared or busy machine lands between the two)."""
    sample = f"({solver} solver: {rate:,.0f} poses/s in one process on a {min(SAMPLE, poses):,}-pose sample)"
    if workers == 1:
        return f"estimated {_duration(poses / rate)} {sample}"
    return (f"estimated {_duration(poses / (rate * workers))} if all {workers} workers run in parallel, "
            f"{_duration(poses / rate)} at one worker's speed {sample}")


# ------------------------------------------------------------------------------- the command

def execution(args, client) -> tuple[str, int, str]:
    """(mode, workers, words for the user) of this run."""
    if client is not None:
        threads = sum(run.cluster_workers(client).values())
        where = "a local Dask cluster" if args.cluster == "local" else f"the Dask cluster at {clip(args.cluster)}"
        return "dask", threads, f"{where} ({threads} worker thread(s))"
    workers = args.workers or run.local_cpus()
    pool = args.pool or ("threads" if args.solver == "c" else DEFAULT_POOL)
    if args.solver == "c" and pool == "processes":
        raise IkgenError("--solver c runs on threads (the compiled solver lives in this process); expected "
                         "--pool threads or no --pool")
    if workers == 1:
        return "here", 1, "this process"
    return pool, workers, f"{workers} local worker {pool}"


def build_solver(arm, kind: str):
    from .solvers import batch_solver, compiled_solver
    return batch_solver(arm) if kind == "numpy" else compiled_solver(arm)


def cmd_reach(args) -> int:
    from ..commands import load_checked
    check_cluster_options(args)
    arm = load_checked(args.arm, args)
    base = np.array(arm.base.evalf(), dtype=float)[:3, 3]
    sides = box_of(args, arm, base, args.step)
    step = args.step or nice_step(max(high - low for low, high in sides))
    rotations, names = orientations_of(args)
    check_size(math.prod(axis_count(low, high, step) for low, high in sides), len(names), args.allow_large)
    x, y, z = (axis_values(low, high, step) for low, high in sides)
    heights = heights_of(args, z, step)
    check_out_folder(args.out)
    grid = Grid(x, y, z, rotations, names)
    client = run.connect(args.cluster, args.cluster_workers) if args.cluster else None
    try:
        mode, workers, where = execution(args, client)
        solver = build_solver(arm, args.solver)
        job = ReachJob(grid, solver)
        rate = sample_rate(job)
        out(f"{arm.name}: {grid.positions:,} positions (spacing {fmt(step)} {arm.length_unit}) x {len(names)} "
            f"orientation(s) = {grid.size:,} poses in {math.ceil(grid.size / args.chunk)} chunk(s) of at most "
            f"{args.chunk:,}, on {where}")
        out(estimate(grid.size, rate, workers, args.solver))
        progress = Progress(grid.size, enabled=not args.quiet and sys.stderr.isatty())
        events = run.Events(note=lambda text: (progress.close(), err(f"note: {text}")), progress=progress)
        started = time.perf_counter()
        try:
            figures = compute(job, args.chunk, mode, workers, client, events)
        finally:
            progress.close()
        seconds = time.perf_counter() - started
    finally:
        if client is not None:
            run.close(client)
    reach = ReachMap(arm.name, arm.length_unit, arm.angle_unit, grid, (step, step, step), figures, solver.kind,
                     args.chunk, tuple(j.name for j in arm.joints), arm.limits_in_readings(),
                     tuple(solver.condition_names), base, CAUTION, events.notes)
    written = write_files(reach, heights or outputs.default_heights(reach), args.out)
    report(reach, seconds, events.notes, written)
    return 0


FILE_TEXT = {"npz": "every figure of every pose, with the axes and orientations (numpy .npz)",
             "csv": "the summary, one row per orientation",
             "slices": "horizontal slices of the map",
             "side": "the vertical slice through the base",
             "html": "this page"}


def write_files(reach: ReachMap, heights: list[float], out_dir: str) -> list[Path]:
    from ..generate import write
    stem = identifier(reach.arm_name)
    names = {"npz": f"{stem}_reach.npz", "csv": f"{stem}_reach_summary.csv", "slices": f"{stem}_reach_slices.png",
             "side": f"{stem}_reach_side.png", "html": f"{stem}_reach.html"}
    slices, side = outputs.slices_png(reach, heights), outputs.side_png(reach)
    files = {names["npz"]: outputs.npz_bytes(reach), names["csv"]: outputs.summary_csv(reach),
             names["slices"]: slices, names["side"]: side}
    files[names["html"]] = outputs.html_page(reach, slices, side, {names[k]: FILE_TEXT[k] for k in names})
    return write({f"{stem}/{name}": data for name, data in files.items()}, out_dir)


def report(reach: ReachMap, seconds: float, notes: list[str], written: list[Path]) -> None:
    rows = [[row["orientation"], f"{row['reachable']:,}", f"{row['reachable_percent']:.1f} %", str(row["solutions_max"]),
             outputs._cell(row["margin_median"], 3)] for row in outputs.orientation_rows(reach)]
    out(table(["orientation", "reachable", "share", "most solutions", "median margin"], rows, "lrrrr"))
    out(f"done in {seconds:.1f} s ({reach.grid.size / max(seconds, 1e-9):,.0f} poses/s)"
        + (f"; {len(notes)} event(s) noted above, every chunk collected" if notes else ""))
    for path in written:
        out(f"  wrote {path}")


def register(sub) -> argparse.ArgumentParser:
    """Add the ``reach`` subcommand to ``sub`` (the result of ArgumentParser.add_subparsers)."""
    p = sub.add_parser(
        "reach", help="map where the arm reaches a box of positions in chosen tool orientations",
        description="For every point of a box of positions at a resolution and every tool orientation of a set, "
                    "count the arm's solutions within its joint limits, with their best conditioning and margin "
                    "to the limits. Writes OUT/<arm>/: an .npz archive, a CSV summary per orientation, slice and "
                    "side-view pictures and an HTML page (docs/reach.md). Runs on all local cores, or on a Dask "
                    "cluster. Nothing is written unless the whole map is computed.")
    p.add_argument("arm", help=ARM_HELP)
    p.add_argument("--box", metavar="X0,X1,Y0,Y1,Z0,Z1",
                   help="the box of positions in the world frame, in the arm's length unit (default: a cube "
                        "around the base as wide as the arm's reach bound, the sum of its link lengths)")
    p.add_argument("--step", type=positive_step, metavar="S",
                   help="grid spacing in the arm's length unit (default: a round value giving about 40 steps "
                        "along the longest side)")
    which = p.add_mutually_exclusive_group()
    which.add_argument("--orientations", default="down:90", metavar="SETS",
                       help=f"named orientation sets, comma-separated: {SET_HELP} (default down:90)")
    which.add_argument("--rotations", metavar="FILE",
                       help="a rotation file instead: a header 'name, qw, qx, qy, qz' then one named unit "
                            "quaternion per line")
    p.add_argument("--heights", metavar="Z1,Z2,...",
                   help=f"heights of the horizontal slices (at most {MAX_HEIGHTS}; default: a quarter, half and "
                        "three quarters up the box)")
    p.add_argument("-o", "--out", default="reach", help="output folder; files go to OUT/<arm>/ (default: reach)")
    p.add_argument("--solver", choices=("numpy", "c"), default="numpy",
                   help="numpy: the generated batch solver (default); c: the compiled C solver (needs a C "
                        "compiler; faster for some arms, gives no conditioning figure)")
    p.add_argument("--workers", type=whole_at_least(1, 1024), metavar="N",
                   help="local workers (default: every core this process may use)")
    p.add_argument("--pool", choices=run.POOLS, default=None,
                   help=f"local workers as processes or threads (default: {DEFAULT_POOL}; threads with --solver c)")
    p.add_argument("--cluster", metavar="ADDRESS",
                   help="run the chunks on a Dask cluster: a scheduler address (tcp://host:8786) or 'local' for "
                        "a new cluster on this machine (needs the cluster extra: pip install 'ikgen[cluster]')")
    p.add_argument("--cluster-workers", type=whole_at_least(1, 256), default=2, metavar="N",
                   help="worker processes of a --cluster local (default 2)")
    p.add_argument("--chunk", type=whole_at_least(256, 10_000_000), default=DEFAULT_CHUNK, metavar="N",
                   help=f"poses per chunk, the unit of work of every worker (default {DEFAULT_CHUNK:,})")
    p.add_argument("--allow-large", action="store_true",
                   help=f"confirm a map of more than {LARGE:,} poses (at most {HARD_LIMIT:,})")
    p.add_argument("-q", "--quiet", action="store_true", help="no progress bar")
    add_arm_source_options(p)
    p.set_defaults(run=cmd_reach)
    # box and heights such as "-400,400,..." start with '-': this parser has no option that looks
    # like a number, so every word "-<digit>..." or "-.<digit>..." is a value (as for `ikgen forward`).
    p._negative_number_matcher = re.compile(r"^-\.?\d")
    return p
