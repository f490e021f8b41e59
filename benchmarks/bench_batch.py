"""Benchmark: the numpy batch solver against the per-pose Python and C solvers, in one run.

For each demo arm: poses per second of
- the generated numpy batch module (inverse_batch on N poses at once, with and without the
  conditioning measures),
- the generated C solver through its cffi extension looping in C (inverse_many), on one thread
  and split over one thread per CPU (threads=None; cffi releases the GIL in the C call), with new
  output arrays each call and refilling the arrays of an earlier call (out=),
- the generated pure-Python solver called once per pose,
all on the same seeded poses, all returning every closed-form solution (no joint-limit handling).
The goal for the batch solver is at least 1,000,000 poses per second for the six-axis offset arm.

Run:  python3 benchmarks/bench_batch.py [--poses N]
"""

from __future__ import annotations

import argparse
import os
import sys
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

from ikgen.armfile import load_arm  # noqa: E402
from ikgen.cbuild import compile_solver  # noqa: E402
from ikgen.generate import build, load_module  # noqa: E402
from ikgen.kinematics import NumericChain  # noqa: E402
from ikgen.verify import random_readings  # noqa: E402

DEMOS = ["benchtop6.toml", "packer6.toml", "inspector6.json"]


def best_rate(run, count: int, repeats: int = 5, clock=time.perf_counter) -> float:
    """Runs per second of ``count`` poses, best of ``repeats``; clock=time.process_time counts the
    process's own CPU time only (steadier on a shared machine, but not for threaded runs)."""
    best = float("inf")
    for _ in range(repeats):
        started = clock()
        run()
        best = min(best, clock() - started)
    return count / best


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--poses", type=int, default=200_000)
    parser.add_argument("--python-poses", type=int, default=5_000)
    args = parser.parse_args()
    rng = np.random.default_rng(11)
    print(f"load average before: {os.getloadavg()[0]:.2f} (a shared 2-core machine: figures are indicative)")
    rows = []
    for demo in DEMOS:
        arm = load_arm(ROOT / "examples" / demo)
        result = build(arm)
        batch = load_module(result.files[f"{result.folder}/{result.folder}_ik_batch.py"], result.folder + "_batch")
        module = load_module(result.files[result.python_path], result.folder)
        solver = compile_solver(arm, result.derivation)
        poses = NumericChain(arm).poses(random_readings(arm, args.poses, rng))
        lists = [p.tolist() for p in poses[:args.python_poses]]
        batch_rate = best_rate(lambda: batch.inverse_batch(poses), len(poses))
        batch_cpu = best_rate(lambda: batch.inverse_batch(poses), len(poses), clock=time.process_time)
        bare_rate = best_rate(lambda: batch.inverse_batch(poses, conditioning=False), len(poses))
        c_rate = best_rate(lambda: solver.inverse_many(poses, limits="ignore", threads=1), len(poses))
        threaded_rate = best_rate(lambda: solver.inverse_many(poses, limits="ignore"), len(poses))
        arrays = solver.inverse_many(poses, limits="ignore")
        reused_rate = best_rate(lambda: solver.inverse_many(poses, limits="ignore", threads=1, out=arrays), len(poses))
        reused_threads = best_rate(lambda: solver.inverse_many(poses, limits="ignore", out=arrays), len(poses))
        python_rate = best_rate(lambda: [module.inverse(p, limits="ignore") for p in lists], len(lists))
        rows.append((arm.name, batch_rate, batch_cpu, bare_rate, c_rate, threaded_rate, reused_rate, reused_threads,
                     python_rate))
    cpus = os.cpu_count() or 1
    print(f"{'arm':<12} {'numpy batch':>13} {'batch, CPU':>11} {'batch, no cond.':>16} {'C loop (cffi)':>14} "
          f"{f'C, {cpus} threads':>14} {'C, out=':>11} {f'C, {cpus} thr., out=':>17} {'Python per pose':>16} "
          f"{'batch/Python':>13} {'C/batch':>8}")
    for name, batch_rate, batch_cpu, bare_rate, c_rate, threaded_rate, reused_rate, reused_threads, python_rate in rows:
        print(f"{name:<12} {batch_rate:>13,.0f} {batch_cpu:>11,.0f} {bare_rate:>16,.0f} {c_rate:>14,.0f} {threaded_rate:>14,.0f} "
              f"{reused_rate:>11,.0f} {reused_threads:>17,.0f} {python_rate:>16,.0f} "
              f"{batch_rate / python_rate:>12.0f}x {c_rate / batch_rate:>7.1f}x")
    print(f"poses per second (best of 5; 'batch, CPU': by the process's CPU time, not wall), {args.poses} seeded poses ({args.python_poses} for Python per pose); "
          "every closed-form solution, no joint-limit handling; out=: inverse_many refilling the arrays of an "
          "earlier call (new arrays cost a first touch of every page); goals: numpy batch 1,000,000 poses/s, "
          "cffi inverse_many 3,000,000 poses/s.")
    print(f"load average after: {os.getloadavg()[0]:.2f}")


if __name__ == "__main__":
    main()
