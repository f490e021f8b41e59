"""Benchmark: how far the float C build's solutions are from the pose, and where it finds another
number of solutions than the double build, on many random poses.

For each demo arm, N seeded poses (random readings within the limits, NumericChain.poses), solved
by the generated double and float C solvers through cffi (`inverse_many`, every closed-form
solution, limits ignored). Printed side by side:
- the worst round trip of the float build's solutions: the forward kinematics (in double) of
  every solution against the pose asked for, position gap over the arm's reach and rotation gap in
  rad (scipy's Rotation); goal below 2e-5 of the reach;
- the poses where the two builds find different numbers of solutions, and how near the singular
  set they lie: for each, the smallest `jacobian_distance` (ikgen.verify: the smallest singular
  value of the Jacobian, lengths over the reach) among the solutions of either build, and the
  largest of those over the poses: the width of the band in which the float build may lose or gain
  a solution (at a branch's reach boundary the float build admits poses beyond reach by about
  3e-6 of the radicand's scale, ikgen/backends/c.py FLOAT_GUARD_TOLERANCE);
- the float solutions farther than 1e-6 from their pose, and the largest Jacobian distance among them.
The float build reads the pose rounded to float, so part of its gap is the pose's own rounding.

Run:  python3 benchmarks/bench_float.py [--poses 1000000] [--arms benchtop6 packer6 inspector6]
Figures depend on the machine only through time; the gaps are the same on every run (seeded).
"""

from __future__ import annotations

import argparse
import datetime
import sys
import time
from pathlib import Path

import numpy as np
from scipy.spatial.transform import Rotation

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

from ikgen.armfile import load_arm  # noqa: E402
from ikgen.backends import c as c_backend  # noqa: E402
from ikgen.cbuild import compile_solver  # noqa: E402
from ikgen.engine import derive  # noqa: E402
from ikgen.kinematics import NumericChain  # noqa: E402
from ikgen.verify import jacobian_distance, random_readings  # noqa: E402

GOAL = 2e-5
LARGE = 1e-6            # a float solution this far from its pose (of the reach, or rad) is looked at
CHUNK = 100_000


def example(name: str) -> Path:
    for suffix in (".toml", ".json"):
        path = ROOT / "examples" / f"{name}{suffix}"
        if path.is_file():
            return path
    raise SystemExit(f"bench_float: no arm file examples/{name}.toml or .json")


def measure(name: str, count: int, seed: int) -> dict:
    arm = load_arm(example(name))
    derivation = derive(arm)
    double = compile_solver(arm, derivation, c_backend.DOUBLE)
    single = compile_solver(arm, derivation, c_backend.FLOAT)
    chain = NumericChain(arm)
    rng = np.random.default_rng(seed)
    reach = arm.reach_scale()
    found = {"arm": name, "poses": 0, "double": 0, "float": 0, "differ": 0, "band": 0.0,
             "position": 0.0, "rotation": 0.0, "large": 0, "large_band": 0.0, "worst_band": 0.0,
             "seconds": 0.0}
    start = time.perf_counter()
    for first in range(0, count, CHUNK):
        readings = random_readings(arm, min(CHUNK, count - first), rng)
        poses = chain.poses(readings)
        joints_d, counts_d, _, _ = double.inverse_many(poses, limits="ignore")
        joints, counts_f, _, _ = single.inverse_many(poses, limits="ignore")
        which = np.repeat(np.arange(len(poses)), counts_f)
        slots = np.concatenate([np.arange(k) for k in counts_f]) if len(which) else np.zeros(0, int)
        solutions = joints[which, slots].astype(np.float64)
        achieved = chain.poses(solutions)
        targets = poses[which]
        position = np.linalg.norm(achieved[:, :3, 3] - targets[:, :3, 3], axis=1) / reach
        rotation = Rotation.from_matrix(np.einsum("nji,njk->nik", targets[:, :3, :3], achieved[:, :3, :3])).magnitude()
        differ = np.flatnonzero(counts_d != counts_f)
        found["poses"] += len(poses)
        found["double"] += int(counts_d.sum())
        found["float"] += int(counts_f.sum())
        found["differ"] += len(differ)
        for i in differ:        # how near the singular set the nearest solution of either build lies
            near = np.vstack([joints_d[i, :counts_d[i]], joints[i, :counts_f[i]].astype(np.float64)])
            found["band"] = max(found["band"], float(jacobian_distance(chain, near).min()))
        if len(position) and position.max() > found["position"]:
            worst = int(np.argmax(position))
            found["position"] = float(position[worst])
            found["worst_band"] = float(jacobian_distance(chain, solutions[worst:worst + 1])[0])
        found["rotation"] = max(found["rotation"], float(rotation.max(initial=0.0)))
        far = np.flatnonzero(np.maximum(position, rotation) > LARGE)
        if len(far):            # the solutions with the larger gaps: how near the singular set
            found["large"] += len(far)
            found["large_band"] = max(found["large_band"], float(jacobian_distance(chain, solutions[far]).max()))
    found["seconds"] = time.perf_counter() - start
    return found


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--poses", type=int, default=1_000_000, help="seeded poses per arm (default 1000000)")
    parser.add_argument("--arms", nargs="+", default=["benchtop6", "packer6", "inspector6"])
    parser.add_argument("--seed", type=int, default=20261204)
    args = parser.parse_args()
    print(f"date: {datetime.datetime.now(datetime.timezone.utc):%Y-%m-%d %H:%M} UTC; {args.poses} seeded poses an arm")
    rows = [measure(name, args.poses, args.seed) for name in args.arms]
    header = f"{'arm':<12}{'solutions d/f':>22}{'counts differ':>16}{'their band':>12}" \
             f"{'worst position/reach':>22}{'its jac. dist.':>16}{'worst rotation':>16}{'gaps > 1e-6':>13}{'their band':>12}{'goal':>8}"
    print(header)
    print("-" * len(header))
    for r in rows:
        met = "met" if max(r["position"], r["rotation"]) < GOAL else "NOT met"
        print(f"{r['arm']:<12}{r['double']:>11,} / {r['float']:<9,}{r['differ']:>9,} ({r['differ'] / r['poses']:.1e})"
              f"{r['band']:>12.1e}{r['position']:>22.1e}{r['worst_band']:>16.1e}{r['rotation']:>16.1e}{r['large']:>13,}{r['large_band']:>12.1e}"
              f"  {GOAL:g} {met}")
    print("-" * len(header))
    print("counts differ: poses where the float build finds another number of solutions than the double build;"
          " their band: the largest, over those poses, of the smallest Jacobian distance (ikgen.verify) among"
          " the solutions of either build (how near the singular set the pose's nearest solution lies);"
          " worst: over every float solution, its forward kinematics in double against the pose (rotation in rad),"
          " and the Jacobian distance of the solution with the worst position;"
          " gaps > 1e-6: float solutions that far from their pose, and the largest Jacobian distance among them.")
    print("seconds: " + ", ".join(f"{r['arm']} {r['seconds']:.0f}" for r in rows))
    return 0


if __name__ == "__main__":
    sys.exit(main())
