"""Benchmark: reach-map poses per second, run every way ikgen can run it, side by side.

For each demo arm, one grid (a cube around the base as wide as the arm's reach bound, 26 steps
along each side, tool straight down at 8 yaws: 26^3 x 8 = 140,608 poses by default) is mapped
- in one process (no pool),
- on all local cores as worker threads and as worker processes,
- on a local Dask cluster of two worker processes (one thread each),
with the numpy batch solver, and in one process and on threads with the compiled C solver (no
conditioning figure). Every figure is a whole `compute` call as `ikgen reach` makes it: starting
a local pool (spawned worker processes import numpy and the solver: about 0.9 s for two here),
the chunks, and collecting the results; the Dask cluster is started once, before the timing, as a
long-lived cluster would be. Each run's arrays are compared with the single-process run's.

Run:  python3 benchmarks/bench_reach.py [--steps N] [--yaws N] [--chunk N] [--repeats N]
"""

from __future__ import annotations

import argparse
import os
import shutil
import sys
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

from ikgen.armfile import load_arm  # noqa: E402
from ikgen.reach import run  # noqa: E402
from ikgen.reach.grid import Grid, axis_values  # noqa: E402
from ikgen.reach.maps import compute  # noqa: E402
from ikgen.reach.orientations import orientation_sets  # noqa: E402
from ikgen.reach.solvers import ReachJob, batch_solver, compiled_solver  # noqa: E402

DEMOS = ["benchtop6.toml", "kitter6.toml"]


def grid_of(arm, steps: int, yaws: int) -> Grid:
    base = np.array(arm.base.evalf(), dtype=float)[:3, 3]
    reach = arm.reach_scale()
    axes = [axis_values(c - reach, c + reach, 2 * reach / (steps - 1)) for c in base]
    rotations, names = orientation_sets(f"down:{360 / yaws:g}")
    return Grid(*axes, rotations, names)


def timed(job, chunk, mode, workers=1, client=None, repeats=1):
    """(best seconds, figures) of ``repeats`` runs."""
    best, figures = float("inf"), None
    for _ in range(repeats):
        started = time.perf_counter()
        figures = compute(job, chunk, mode, workers, client)
        best = min(best, time.perf_counter() - started)
    return best, figures


def same(a, b) -> bool:
    return all(np.array_equal(a[k], b[k], equal_nan=True) for k in ("count", "margin", "conditioning"))


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--steps", type=int, default=26, help="grid points along each side (default 26)")
    parser.add_argument("--yaws", type=int, default=8, help="tool-down orientations (default 8)")
    parser.add_argument("--chunk", type=int, default=32_768)
    parser.add_argument("--repeats", type=int, default=2)
    args = parser.parse_args()
    cores = run.local_cpus()
    print(f"{cores} core(s) this process may use; load average before: {os.getloadavg()[0]:.2f} "
          "(a shared machine: figures are indicative)")
    client = None
    try:
        client = run.connect("local", 2)
    except Exception as exc:  # noqa: BLE001 - the benchmark still runs the local columns
        print(f"no local Dask cluster ({exc}); its column stays empty")
    have_cc = shutil.which("cc") or shutil.which("gcc")
    header = ("arm", "poses", "numpy 1 process", f"numpy {cores} threads", f"numpy {cores} processes",
              "numpy Dask 2 workers", "C 1 process", f"C {cores} threads", "all equal")
    rows = []
    try:
        for demo in DEMOS:
            arm = load_arm(ROOT / "examples" / demo)
            grid = grid_of(arm, args.steps, args.yaws)
            job = ReachJob(grid, batch_solver(arm))
            compute(job, args.chunk, "here")                                    # warm: load the solver
            seconds, reference = timed(job, args.chunk, "here", repeats=args.repeats)
            cells = [f"{grid.size / seconds:,.0f}"]
            equal = True
            for mode in ("threads", "processes"):
                seconds, figures = timed(job, args.chunk, mode, cores, repeats=args.repeats)
                cells.append(f"{grid.size / seconds:,.0f}")
                equal &= same(figures, reference)
            if client is not None:
                seconds, figures = timed(job, args.chunk, "dask", client=client, repeats=args.repeats)
                cells.append(f"{grid.size / seconds:,.0f}")
                equal &= same(figures, reference)
            else:
                cells.append("-")
            if have_cc:
                c_job = ReachJob(grid, compiled_solver(arm))
                for mode, workers in (("here", 1), ("threads", cores)):
                    seconds, figures = timed(c_job, args.chunk, mode, workers, repeats=args.repeats)
                    cells.append(f"{grid.size / seconds:,.0f}")
                    equal &= np.array_equal(figures["count"], reference["count"])
            else:
                cells += ["-", "-"]
            rows.append([arm.name, f"{grid.size:,}", *cells, "yes" if equal else "NO"])
            print(f"  {arm.name} done", flush=True)
    finally:
        if client is not None:
            run.close(client)
    widths = [max(len(str(r[i])) for r in [header] + rows) for i in range(len(header))]
    print("poses per second (best of %d runs; 'all equal': every run's arrays equal the single-process run's, "
          "counts only for C)" % args.repeats)
    for line in [header, ["-" * w for w in widths]] + rows:
        print("  ".join(str(c).rjust(w) for c, w in zip(line, widths)))
    print(f"load average after: {os.getloadavg()[0]:.2f}")


if __name__ == "__main__":
    main()
