"""Benchmark: the generated C solver (double) against its maths-library floor, Python and a numerical IK.

For each demo arm, in one run:
- generates the solver files (ikgen.generate.build) into a temporary folder;
- writes N seeded poses (random joint readings within the limits, NumericChain.poses) to a binary file;
- counting build: the solver compiled with `-include benchmarks/c/count_math.h`, which renames
  atan2, sqrt, sin and cos to counting stand-ins (benchmarks/c/counters.c), so a harness counts
  the maths-library calls of every full solve (all solutions of one pose) and checks every
  solution through the solver's own forward kinematics;
- timing build (gcc -O2): REPEATS passes of full solves over all poses, alternated with passes of
  "the floor": per pose exactly as many atan2 and sqrt calls as the solver made on that pose
  (atan2 of pairs of pose entries, sqrt of |pose entry|), summed into a volatile sink; best pass;
- diagnostic build: the solver with every atan2 replaced by a cheap inline stand-in
  (benchmarks/c/stub_atan2.h), timed alone: what the solver costs apart from its atan2 calls;
- the generated pure-Python solver (module.inverse on nested lists) on the first poses;
- scipy.optimize.least_squares from one seed near the true joints on ~200 poses (bench_python.baseline).

Run:  python3 benchmarks/bench_c.py [--poses 100000] [--repeats 15] [--python-poses 10000]
Figures depend on the machine and its load (shown beside them): quote them with care.
"""

from __future__ import annotations

import argparse
import os
import platform
import shutil
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
HARNESS = ROOT / "benchmarks" / "c"
sys.path.insert(0, str(ROOT))
sys.path.insert(0, str(ROOT / "benchmarks"))

from bench_python import baseline  # noqa: E402
from ikgen.armfile import load_arm  # noqa: E402
from ikgen.backends import c as c_backend  # noqa: E402
from ikgen.errors import IkgenError  # noqa: E402
from ikgen.generate import build, load_module  # noqa: E402
from ikgen.kinematics import NumericChain  # noqa: E402
from ikgen.verify import random_readings  # noqa: E402

DEMOS = ["benchtop6.toml", "packer6.toml", "inspector6.json"]
COUNTED = ("atan2", "sqrt", "sin", "cos")
RENAMES = ["-include", str(HARNESS / "count_math.h")]  # atan2 -> count_atan2, ...
STUB = ["-include", str(HARNESS / "stub_atan2.h")]      # atan2 -> a cheap inline stand-in
CFLAGS = ["-O2", "-std=c99", "-Wall"]
GOALS = {"atan2": "~20", "sqrt": "~6", "sin": "0", "cos": "0"}


class BenchError(Exception):
    """A failure worth one clear line (missing compiler, failed compile or run)."""


def run(command: list[str], cwd: Path) -> str:
    done = subprocess.run(command, cwd=cwd, capture_output=True, text=True)
    if done.returncode != 0:
        raise BenchError(f"`{' '.join(command)}` failed (exit {done.returncode}) in {cwd}:\n"
                         f"{done.stdout}{done.stderr}".rstrip())
    if done.stderr.strip():  # compiler warnings are worth seeing, but are not fatal
        print(done.stderr.rstrip(), file=sys.stderr)
    return done.stdout


def key_values(text: str) -> dict[str, float]:
    out = {}
    for line in text.splitlines():
        key, _, value = line.partition("=")
        out[key.strip()] = float(value)
    return out


def compile_harnesses(cc: str, folder: Path, names: dict) -> tuple[Path, Path, Path]:
    """(counting, timing, atan2-stubbed timing) binaries for the double solver in ``folder``."""
    solver = folder / names["source"]
    macros = [f'-DIK_HEADER="{names["header"]}"', f"-DIK_PREFIX={names['prefix']}", f"-DIK_UPPER={names['upper']}"]
    include = [f"-I{folder}"]
    objects = {
        "solver_count.o": [*CFLAGS, *RENAMES, *include, "-c", str(solver)],
        "counters.o": [*CFLAGS, "-c", str(HARNESS / "counters.c")],
        "harness_count.o": [*CFLAGS, *include, *macros, "-DIK_COUNTING", "-c", str(HARNESS / "harness.c")],
        "solver_time.o": [*CFLAGS, *include, "-c", str(solver)],
        "solver_stub.o": [*CFLAGS, *STUB, *include, "-c", str(solver)],
        "harness_time.o": [*CFLAGS, *include, *macros, "-c", str(HARNESS / "harness.c")],
    }
    for target, args in objects.items():
        run([cc, *args, "-o", target], folder)
    run([cc, "solver_count.o", "counters.o", "harness_count.o", "-lm", "-o", "count"], folder)
    run([cc, "solver_time.o", "harness_time.o", "-lm", "-o", "time"], folder)
    run([cc, "solver_stub.o", "harness_time.o", "-lm", "-o", "time_stub"], folder)
    return folder / "count", folder / "time", folder / "time_stub"


def time_python(module, poses: list, repeats: int) -> float:
    """Best-of microseconds per full solve of the generated Python solver (nested lists in)."""
    best = float("inf")
    for _ in range(repeats):
        started = time.perf_counter()
        for pose in poses:
            module.inverse(pose, limits="ignore")
        best = min(best, (time.perf_counter() - started) / len(poses))
    return best * 1e6


def bench_arm(demo: str, args, cc: str, work: Path) -> dict:
    arm = load_arm(ROOT / "examples" / demo)
    result = build(arm)
    folder = work / result.folder
    folder.mkdir(parents=True)
    for relative, text in result.files.items():
        (work / relative).write_text(text, encoding="utf-8")
    rng = np.random.default_rng(args.seed)
    chain = NumericChain(arm)
    readings = random_readings(arm, args.poses, rng)
    poses = chain.poses(readings)
    pose_file = folder / "poses.bin"
    np.ascontiguousarray(poses.reshape(-1, 16), dtype=np.float64).tofile(pose_file)
    count_bin, time_bin, stub_bin = compile_harnesses(cc, folder, c_backend.names(arm, c_backend.DOUBLE))

    counts_file = folder / "counts.bin"
    counted = key_values(run([str(count_bin), str(pose_file), str(counts_file)], folder))
    record = np.fromfile(counts_file, dtype=np.uint8).reshape(-1, 5)
    load_before = os.getloadavg()[0]
    timed = key_values(run([str(time_bin), str(pose_file), str(counts_file), str(args.repeats)], folder))
    load_after = os.getloadavg()[0]
    stubbed = key_values(run([str(stub_bin), str(pose_file), str(counts_file), str(args.repeats), "solve-only"],
                             folder))
    if not timed["solutions"] == counted["solutions"] == stubbed["solutions"]:
        raise BenchError(f"{arm.name}: the timing, counting and stubbed builds disagree on the number of solutions")

    module = load_module(result.files[result.python_path], result.folder)
    subset = [p.tolist() for p in poses[:args.python_poses]]
    python_counts = np.array([len(module.inverse(p, limits="ignore")) for p in subset])
    count_mismatch = int(np.sum(python_counts != record[:len(subset), 4]))
    python_us = time_python(module, subset, args.python_repeats)
    lsq_rng = np.random.default_rng(args.seed + 1)
    lsq_us, lsq_ok = baseline(arm, chain, readings[:args.baseline_poses], poses[:args.baseline_poses], lsq_rng)

    n = counted["poses"]
    solve_ns = timed["solve_best_ns"] / n
    floor_ns = timed["floor_best_ns"] / n
    return dict(
        arm=arm.name, poses=int(n), unit=arm.length_unit, load=(load_before, load_after),
        solve_ns=solve_ns, solve_median_ns=timed["solve_median_ns"] / n,
        solution_ns=timed["solve_best_ns"] / timed["solutions"], per_pose=counted["solutions"] / n,
        no_solution=int(counted["no_solution"]),
        calls={k: counted[f"{k}_total"] / n for k in COUNTED},
        call_range={k: (int(counted[f"{k}_min"]), int(counted[f"{k}_max"])) for k in COUNTED},
        histogram={c: int(counted.get(f"poses_with_{c}", 0)) for c in range(result.derivation.max_solutions + 1)},
        position_gap=counted["max_position_gap"], rotation_gap=counted["max_rotation_gap"],
        stub_ns=stubbed["solve_best_ns"] / n,
        floor_ns=floor_ns, floor_median_ns=timed["floor_median_ns"] / n,
        floor_calls=(timed["floor_atan2_total"] / n, timed["floor_sqrt_total"] / n),
        python_us=python_us, python_poses=len(subset), count_mismatch=count_mismatch,
        lsq_us=lsq_us, lsq_ok=lsq_ok, lsq_poses=min(args.baseline_poses, len(poses)))


def machine_lines(cc: str) -> list[str]:
    model = "unknown"
    try:
        for line in Path("/proc/cpuinfo").read_text().splitlines():
            if line.startswith("model name"):
                model = line.split(":", 1)[1].strip()
                break
    except OSError:
        pass
    compiler = subprocess.run([cc, "--version"], capture_output=True, text=True).stdout.splitlines()[0]
    libc = " ".join(platform.libc_ver())
    return [f"machine: {model}, {os.cpu_count()} logical cores; {compiler}; {libc}; Python {platform.python_version()}",
            f"C flags: {' '.join(CFLAGS)} (counting build of the solver adds -include count_math.h: "
            f"{', '.join(f'{n} -> count_{n}' for n in COUNTED)})"]


def print_table(rows: list[dict], args) -> None:
    def line(label: str, cells: list[str], goal: str = "") -> None:
        print(f"{label:<34}" + "".join(f"{c:>14}" for c in cells) + (f"   {goal}" if goal else ""))

    line("figure", [r["arm"] for r in rows], "goal")
    print("-" * (34 + 14 * len(rows) + 30))
    line("load average (1 min) before/after", [f"{r['load'][0]:.2f}/{r['load'][1]:.2f}" for r in rows])
    line("poses (seeded, within limits)", [f"{r['poses']}" for r in rows])
    line("solutions per pose (mean)", [f"{r['per_pose']:.3f}" for r in rows])
    line("poses without a solution", [f"{r['no_solution']}" for r in rows])
    line("C full solve [ns] (best pass)", [f"{r['solve_ns']:.0f}" for r in rows], "~1000 ns on a PC")
    line("C full solve [ns] (median pass)", [f"{r['solve_median_ns']:.0f}" for r in rows])
    line("C per solution [ns]", [f"{r['solution_ns']:.0f}" for r in rows])
    for name in COUNTED:
        line(f"{name} calls per full solve",
             [f"{r['calls'][name]:.2f}" for r in rows], GOALS[name])
        line(f"  {name} min..max per pose",
             [f"{r['call_range'][name][0]}..{r['call_range'][name][1]}" for r in rows])
    line("C with atan2 stubbed [ns] (best)", [f"{r['stub_ns']:.0f}" for r in rows])
    line("  so atan2 calls take [ns]", [f"{r['solve_ns'] - r['stub_ns']:.0f}" for r in rows])
    line("floor calls per pose (atan2/sqrt)", [f"{r['floor_calls'][0]:.2f}/{r['floor_calls'][1]:.2f}" for r in rows])
    line("floor [ns] (best pass)", [f"{r['floor_ns']:.0f}" for r in rows])
    line("floor [ns] (median pass)", [f"{r['floor_median_ns']:.0f}" for r in rows])
    line("C / floor (best passes)", [f"{r['solve_ns'] / r['floor_ns']:.2f}x" for r in rows], "<= 1.2x")
    line("Python full solve [us]", [f"{r['python_us']:.1f}" for r in rows])
    line("least_squares one solve [us]", [f"{r['lsq_us']:.0f}" for r in rows])
    line("least_squares converged", [f"{100 * r['lsq_ok']:.0f}%" for r in rows])
    line("C vs Python (speed-up)", [f"{1e3 * r['python_us'] / r['solve_ns']:.0f}x" for r in rows])
    line("C all vs least_squares one (x)", [f"{1e3 * r['lsq_us'] / r['solve_ns']:.0f}x" for r in rows])
    line("round trip: max position gap", [f"{r['position_gap']:.1e} {r['unit']}" for r in rows])
    line("round trip: max rotation gap", [f"{r['rotation_gap']:.1e}" for r in rows])
    line("C vs Python solution counts", [f"{r['count_mismatch']} differ" for r in rows])
    print()
    for r in rows:
        spread = ", ".join(f"{c}: {k}" for c, k in r["histogram"].items() if k)
        print(f"{r['arm']}: poses by number of solutions: {spread}")
    print(f"C: {args.repeats} passes over all poses, solve and floor passes alternated, best pass per pose "
          f"(all solutions of a pose; ns per solution = pass time / solutions found).")
    print("floor: per pose, as many atan2 and sqrt calls as the solver made on it (counting build), "
          "on that pose's entries, summed into a volatile sink (gcc inlines sqrt as one instruction in "
          "both the solver and the floor).")
    print(f"Python: generated pure-Python solver, nested lists in, first {rows[0]['python_poses']} poses, "
          f"best of {args.python_repeats}. least_squares: scipy, one seed 0.3 rad (normal) from the true "
          f"joints, {rows[0]['lsq_poses']} poses, one solution a solve (or none).")
    print("atan2 stubbed: diagnostic build, every atan2 an inline y + 0.5*x (same branches and solution count): "
          "the solver's cost apart from atan2.")
    print("round trip: the solver's own forward kinematics of every solution vs the pose (counting build).")


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--poses", type=int, default=100_000)
    parser.add_argument("--repeats", type=int, default=15, help="timed passes of the C solver and of the floor")
    parser.add_argument("--python-poses", type=int, default=10_000)
    parser.add_argument("--python-repeats", type=int, default=3)
    parser.add_argument("--baseline-poses", type=int, default=200)
    parser.add_argument("--seed", type=int, default=20260311)
    parser.add_argument("--keep", metavar="DIR", help="build in DIR and keep it (default: a temporary folder)")
    args = parser.parse_args()
    for name in ("poses", "repeats", "python_poses", "python_repeats", "baseline_poses"):
        if getattr(args, name) < 1:
            print(f"bench_c: --{name.replace('_', '-')} must be at least 1, got {getattr(args, name)}",
                  file=sys.stderr)
            return 2
    cc = os.environ.get("CC", "gcc")
    if shutil.which(cc) is None:
        print(f"bench_c: C compiler '{cc}' not found (set CC or install gcc)", file=sys.stderr)
        return 2
    for line in machine_lines(cc):
        print(line)
    print(f"load average at start (1/5/15 min): {' '.join(f'{v:.2f}' for v in os.getloadavg())}")
    rows = []
    try:
        if args.keep:
            work = Path(args.keep)
            if work.exists() and any(work.iterdir()):
                print(f"bench_c: --keep folder {work} is not empty", file=sys.stderr)
                return 2
            work.mkdir(parents=True, exist_ok=True)
            context = None
        else:
            context = tempfile.TemporaryDirectory(prefix="ikgen-bench-c-")
            work = Path(context.name)
        try:
            for demo in DEMOS:
                print(f"measuring {demo} ...", file=sys.stderr, flush=True)
                rows.append(bench_arm(demo, args, cc, work))
        finally:
            if context is not None:
                context.cleanup()
    except (BenchError, IkgenError) as exc:
        print(f"bench_c: {exc}", file=sys.stderr)
        return 1
    print()
    print_table(rows, args)
    print(f"load average at end (1/5/15 min): {' '.join(f'{v:.2f}' for v in os.getloadavg())}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
