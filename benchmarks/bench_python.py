"""Benchmark: generation time and the generated Python solver against a numerical IK baseline.

Prints one table with every figure measured in this run, side by side:
- generation: arm file to Python solver (derive + render), seconds;
- the generated pure-Python solver: microseconds per full solve (all solutions of a pose);
- the baseline: scipy.optimize.least_squares from one seed (the current joints perturbed),
  microseconds per solve; it finds one solution at a time (and sometimes none).

Run:  python3 benchmarks/bench_python.py [--poses N]
Figures depend on the machine and its load: run on a quiet machine and quote them with care.
"""

from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

from ikgen.armfile import load_arm  # noqa: E402
from ikgen.generate import build, load_module  # noqa: E402
from ikgen.kinematics import NumericChain  # noqa: E402
from ikgen.rotations import rotation_angle_between  # noqa: E402
from ikgen.verify import random_readings  # noqa: E402

DEMOS = ["benchtop6.toml", "packer6.toml", "inspector6.json"]


def time_solver(module, poses: list, repeats: int = 3, limits: str = "ignore") -> float:
    best = float("inf")
    for _ in range(repeats):
        started = time.perf_counter()
        for pose in poses:
            module.inverse(pose, limits=limits)
        best = min(best, (time.perf_counter() - started) / len(poses))
    return best * 1e6


def baseline(arm, chain: NumericChain, readings: np.ndarray, poses: np.ndarray, rng) -> tuple[float, float]:
    """(microseconds per solve, fraction converged) of least_squares from one perturbed seed."""
    from scipy.optimize import least_squares
    scale = arm.reach_scale()
    converged = 0
    started = time.perf_counter()
    for q, pose in zip(readings, poses):
        seed = q + rng.normal(scale=0.3 / arm.angle_scale, size=arm.dof)

        def residual(x, pose=pose):
            got = chain.pose(x)
            return np.concatenate([(got[:3, 3] - pose[:3, 3]) / scale, (got[:3, :3] - pose[:3, :3]).ravel()])

        result = least_squares(residual, seed, xtol=1e-14, ftol=1e-14, gtol=1e-14)
        got = chain.pose(result.x)
        if np.linalg.norm(got[:3, 3] - pose[:3, 3]) < 1e-9 * scale and \
                rotation_angle_between(got[:3, :3], pose[:3, :3]) < 1e-9:
            converged += 1
    return (time.perf_counter() - started) / len(poses) * 1e6, converged / len(poses)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--poses", type=int, default=5000)
    parser.add_argument("--baseline-poses", type=int, default=200)
    args = parser.parse_args()
    rng = np.random.default_rng(5)
    rows = []
    for demo in DEMOS:
        arm = load_arm(ROOT / "examples" / demo)
        started = time.perf_counter()
        result = build(arm)
        generation = time.perf_counter() - started
        module = load_module(result.files[result.python_path], result.folder)
        chain = NumericChain(arm)
        readings = random_readings(arm, args.poses, rng)
        poses = chain.poses(readings)
        as_lists = [p.tolist() for p in poses]
        solutions = sum(len(module.inverse(p, limits="ignore")) for p in as_lists)
        per_solve = time_solver(module, as_lists)
        with_limits = time_solver(module, as_lists, limits="drop")
        base_time, base_ok = baseline(arm, chain, readings[:args.baseline_poses], poses[:args.baseline_poses], rng)
        rows.append((arm.name, generation, per_solve, with_limits, solutions / len(poses), base_time, base_ok))
    import os
    print(f"load average before: {os.getloadavg()[0]:.2f} (a shared 2-core machine: figures are indicative)")
    print(f"{'arm':<12} {'generate [s]':>12} {'closed form [us]':>17} {'with limits [us]':>17} "
          f"{'solutions/pose':>15} {'least_squares [us]':>19} {'converged':>10} {'speed-up':>9}")
    for name, generation, per_solve, with_limits, count, base_time, base_ok in rows:
        print(f"{name:<12} {generation:>12.2f} {per_solve:>17.1f} {with_limits:>17.1f} {count:>15.2f} "
              f"{base_time:>19.0f} {100 * base_ok:>9.0f}% {base_time / per_solve:>8.0f}x")
    print("closed form: every closed-form solution of a pose, limits='ignore' (nested lists in); with limits: the "
          "default limits='drop' (readings within the joint limits, multi-turn joints expanded); least_squares: one "
          "solution from one seed; speed-up: least_squares time / closed-form time.")


if __name__ == "__main__":
    main()
