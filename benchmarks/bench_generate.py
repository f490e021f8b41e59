"""Benchmark: how long `ikgen generate` takes for one arm, whole and phase by phase.

For each demo arm it runs, in fresh processes (so every run pays what a user's run pays: imports,
template compilation, first use of matplotlib):
- the command itself, `python -m ikgen.cli generate ARM -o TMP`, wall time (the median of --runs);
- the same work in one process with each phase timed (generate.build's ``timings``): import of the
  command's modules, derive, render per back-end (Python, numpy batch, C double and float, the C
  self-tests), and the report (its equation sheet, figures, sample pose, verification, documents).

It prints one table, a row per arm, with the goal (3 s for a six-axis arm, all files and report)
beside the wall time. Optionally a random arm from tests/arm_draws.py (--sweep-seed: the structure
"three parallel axes, offset wrist", the slowest kind to render) is timed in-process too.

Run:  python3 benchmarks/bench_generate.py [--arms benchtop6 packer6 kitter6] [--runs 3] [--sweep-seed 16]
Figures depend on the machine and its load (`uptime` is printed beside them): quote them with care.
"""

from __future__ import annotations

import argparse
import json
import os
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
GOAL_SECONDS = 3.0          # issue 11, goal 5: a six-axis arm, all files and report
DEFAULT_ARMS = ["benchtop6", "packer6", "kitter6"]
COLUMNS = ["import", "derive", "python", "batch", "c", "selftest", "report: sheet", "report: figures",
           "report: sample pose", "report: verification", "report: documents"]


def phases_in_process(arm_path: str | None, sweep_seed: int | None) -> dict:
    """Phase seconds of one generation in this (fresh) process, as a dict."""
    started = time.perf_counter()
    sys.path.insert(0, str(ROOT))
    import ikgen.cli  # noqa: F401  (what the command imports before it runs)
    import ikgen.commands  # noqa: F401
    from ikgen.generate import build
    timings = {"import": time.perf_counter() - started}
    if sweep_seed is not None:
        import numpy as np
        sys.path.insert(0, str(ROOT / "tests"))
        from arm_draws import Draw, parallel_offset_wrist
        arm = parallel_offset_wrist(Draw(np.random.default_rng(sweep_seed)))
    else:
        from ikgen.armsource import load_arm_source
        arm = load_arm_source(arm_path)
    begun = time.perf_counter()
    build(arm, timings=timings)
    timings["build"] = time.perf_counter() - begun
    timings["total"] = time.perf_counter() - started
    return timings


def child_phases(arm_path: str | None, sweep_seed: int | None) -> dict:
    command = [sys.executable, __file__, "--child"]
    command += ["--sweep-seed", str(sweep_seed)] if sweep_seed is not None else ["--arm", arm_path]
    done = subprocess.run(command, capture_output=True, text=True, cwd=ROOT, check=True)
    return json.loads(done.stdout.strip().splitlines()[-1])


def command_wall(arm_path: str, runs: int) -> list[float]:
    """Wall seconds of `python -m ikgen.cli generate ARM -o TMP`, one per run."""
    walls = []
    for _ in range(runs):
        with tempfile.TemporaryDirectory() as out:
            started = time.perf_counter()
            subprocess.run([sys.executable, "-m", "ikgen.cli", "generate", arm_path, "-o", out],
                           capture_output=True, check=True, cwd=ROOT)
            walls.append(time.perf_counter() - started)
    return walls


def load_average() -> str:
    try:
        return " ".join(Path("/proc/loadavg").read_text().split()[:3])
    except OSError:
        return "unknown"


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--arms", nargs="+", default=DEFAULT_ARMS, help="demo arm names under examples/")
    parser.add_argument("--runs", type=int, default=3, help="command runs per arm (the median is shown)")
    parser.add_argument("--sweep-seed", type=int, default=None,
                        help="also time a random 'three parallel axes, offset wrist' arm of this seed")
    parser.add_argument("--child", action="store_true", help=argparse.SUPPRESS)
    parser.add_argument("--arm", help=argparse.SUPPRESS)
    args = parser.parse_args(argv)
    if args.child:
        print(json.dumps(phases_in_process(args.arm, args.sweep_seed)))
        return 0

    print(f"ikgen generate, one arm per run; load average before: {load_average()}; "
          f"{os.cpu_count()} CPUs; Python {sys.version.split()[0]}")
    rows = []
    for name in args.arms:
        path = str(next(p for p in (ROOT / "examples").iterdir() if p.stem == name and p.suffix in (".toml", ".json")))
        walls = command_wall(path, args.runs)
        rows.append((name, statistics.median(walls), min(walls), child_phases(path, None)))
    if args.sweep_seed is not None:
        rows.append((f"sweep seed {args.sweep_seed}", None, None, child_phases(None, args.sweep_seed)))

    shown = ["import", "derive", "python", "batch", "c", "selftest", "sheet", "figures", "pose", "verify", "docs"]
    header = f"{'arm':<16} {'wall':>6} {'min':>6} {'goal':>5} " + " ".join(f"{c:>8}" for c in shown) + f" {'total':>7}"
    print()
    print("seconds; wall = median of the command's runs, min = its fastest; the other columns are one")
    print("in-process run's phases (report phases: sheet, figures, sample pose with its figure, verification,")
    print("HTML and Markdown documents); total = import + build in that run")
    print(header)
    for name, wall, fastest, phases in rows:
        wall_text = f"{wall:6.2f} {fastest:6.2f}" if wall is not None else f"{'-':>6} {'-':>6}"
        cells = " ".join(f"{phases.get(c, 0.0):8.2f}" for c in COLUMNS)
        print(f"{name:<16} {wall_text} {GOAL_SECONDS:5.1f} {cells} {phases['total']:7.2f}")
    print(f"load average after: {load_average()}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
