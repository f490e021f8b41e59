"""Benchmark: how long `ikgen generate` takes for one arm, whole and phase by phase.

For each demo arm it runs, in fresh processes (so every run pays what a user's run pays: imports,
first use of matplotlib; compiled templates come from jinja2's cache after the first run):
- the command itself, `python -m ikgen.cli generate ARM -o TMP`: wall time (median and fastest of
  --runs), CPU time (user + system of the command and its helper processes), and the wall time
  with no helper process (IKGEN_HELPERS=0, everything in one process);
- the same work in one process with each phase timed (generate.build's ``timings``): import of the
  command's modules, derive, render per back-end (Python, numpy batch, C double and float, the C
  self-tests), and the report: its equation sheet, figures, sample pose, verification, documents,
  and how long the main process waited for the helpers that make the figures and documents.

It prints one table, a row per arm, with the goal (3 s for a six-axis arm, all files and report)
beside the wall time. Optionally an arm of the random-arm sweep (--sweep-arm SEED NUMBER, drawn as
benchmarks/sweep_arms.py draws it, from tests/arm_draws.py) is timed in-process too.

Run:  python3 benchmarks/bench_generate.py [--arms benchtop6 packer6 kitter6] [--runs 3] [--sweep-arm 16 36]
      [--clock cpu]
Figures depend on the machine and its load (the load average is printed beside them): quote them
with care; on a busy machine the CPU column is the steadier figure.
"""

from __future__ import annotations

import argparse
import json
import os
import resource
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
           "report: sample pose", "report: verification", "report: documents", "report: waiting for helpers"]


def sweep_draw(seed: int, number: int):
    """Arm ``number`` (1-based, as benchmarks/sweep_arms.py prints it) of the random-arm sweep with ``seed``:
    the same draws in the same order (tests/arm_draws.py)."""
    import numpy as np
    sys.path.insert(0, str(ROOT / "tests"))
    from arm_draws import STRUCTURES, Draw
    rng, names = np.random.default_rng(seed), list(STRUCTURES)
    for index in range(number):
        arm = STRUCTURES[names[index % len(names)]](Draw(rng))
    return arm


def phases_in_process(arm_path: str | None, sweep_arm: tuple[int, int] | None, clock: str) -> dict:
    """Phase seconds of one generation in this (fresh) process, as a dict; ``clock`` "cpu" times
    the phases in CPU seconds of the process that runs each (the import is always wall time)."""
    started = time.perf_counter()
    sys.path.insert(0, str(ROOT))
    import ikgen.cli  # noqa: F401  (what the command imports before it runs)
    import ikgen.commands  # noqa: F401
    import ikgen.stopwatch
    from ikgen.generate import build
    timings = {"import": time.perf_counter() - started}
    if clock == "cpu":
        ikgen.stopwatch.clock = time.process_time
    if sweep_arm is not None:
        arm = sweep_draw(*sweep_arm)
    else:
        from ikgen.armsource import load_arm_source
        arm = load_arm_source(arm_path)
    begun = time.perf_counter()
    build(arm, timings=timings)
    timings["build"] = time.perf_counter() - begun
    timings["total"] = time.perf_counter() - started
    return timings


def child_phases(arm_path: str | None, sweep_arm: tuple[int, int] | None, clock: str) -> dict:
    command = [sys.executable, __file__, "--child", "--clock", clock]
    command += ["--sweep-arm", *map(str, sweep_arm)] if sweep_arm is not None else ["--arm", arm_path]
    done = subprocess.run(command, capture_output=True, text=True, cwd=ROOT, check=True, env=warm_environment())
    return json.loads(done.stdout.strip().splitlines()[-1])


def warm_environment(**extra) -> dict:
    """The environment of a user's run: Python keeps its bytecode caches (PYTHONDONTWRITEBYTECODE,
    set on some development machines, is dropped), plus ``extra``."""
    env = {k: v for k, v in os.environ.items() if k != "PYTHONDONTWRITEBYTECODE"}
    return {**env, **extra}


def cold_wall(arm_path: str) -> float:
    """Wall seconds of a first run: no compiled template kept (a fresh temporary folder for jinja2's
    cache) and ikgen's own modules compiled from source (no bytecode written or read)."""
    with tempfile.TemporaryDirectory() as scratch, tempfile.TemporaryDirectory() as out:
        env = {**warm_environment(TMPDIR=scratch), "PYTHONDONTWRITEBYTECODE": "1", "PYTHONPYCACHEPREFIX": scratch}
        started = time.perf_counter()
        subprocess.run([sys.executable, "-m", "ikgen.cli", "generate", arm_path, "-o", out],
                       capture_output=True, check=True, cwd=ROOT, env=env)
        return time.perf_counter() - started


def command_runs(arm_path: str, runs: int, helpers: bool = True) -> tuple[list[float], list[float]]:
    """(wall seconds, CPU seconds) of `python -m ikgen.cli generate ARM -o TMP`, one per run, after
    an untimed run that fills the caches. The CPU time (user + system, the command and its helper
    processes) says more than the wall time when the machine is busy with other work."""
    walls, cpus = [], []
    for run in range(runs + 1):
        with tempfile.TemporaryDirectory() as out:
            before = resource.getrusage(resource.RUSAGE_CHILDREN)
            started = time.perf_counter()
            subprocess.run([sys.executable, "-m", "ikgen.cli", "generate", arm_path, "-o", out],
                           capture_output=True, check=True, cwd=ROOT, env=warm_environment(IKGEN_HELPERS=str(int(helpers))))
            if run == 0:
                continue
            walls.append(time.perf_counter() - started)
            after = resource.getrusage(resource.RUSAGE_CHILDREN)
            cpus.append(after.ru_utime - before.ru_utime + after.ru_stime - before.ru_stime)
    return walls, cpus


def load_average() -> str:
    try:
        return " ".join(Path("/proc/loadavg").read_text().split()[:3])
    except OSError:
        return "unknown"


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--arms", nargs="+", default=DEFAULT_ARMS, help="demo arm names under examples/")
    parser.add_argument("--runs", type=int, default=3, help="command runs per arm (the median is shown)")
    parser.add_argument("--sweep-arm", type=int, nargs=2, metavar=("SEED", "NUMBER"), default=None,
                        help="also time arm NUMBER of benchmarks/sweep_arms.py --seed SEED (36 and 179 of seed 16 "
                             "are 'three parallel axes, offset wrist' arms, the slowest kind to render)")
    parser.add_argument("--clock", choices=("wall", "cpu"), default="wall",
                        help="the phases' clock: wall seconds, or CPU seconds of the process that runs each "
                             "(steadier on a busy machine)")
    parser.add_argument("--child", action="store_true", help=argparse.SUPPRESS)
    parser.add_argument("--arm", help=argparse.SUPPRESS)
    args = parser.parse_args(argv)
    if args.child:
        print(json.dumps(phases_in_process(args.arm, args.sweep_arm, args.clock)))
        return 0

    print(f"ikgen generate, one arm per run; load average before: {load_average()}; "
          f"{os.cpu_count()} CPUs; Python {sys.version.split()[0]}")
    rows = []
    for name in args.arms:
        path = str(next(p for p in (ROOT / "examples").iterdir() if p.stem == name and p.suffix in (".toml", ".json")))
        walls, cpus = command_runs(path, args.runs)
        alone, _ = command_runs(path, args.runs, helpers=False)
        rows.append((name, (statistics.median(walls), min(walls), statistics.median(cpus), statistics.median(alone),
                            cold_wall(path)), child_phases(path, None, args.clock)))
    if args.sweep_arm is not None:
        seed, number = args.sweep_arm
        rows.append((f"sweep {seed}/{number}", None, child_phases(None, (seed, number), args.clock)))

    shown = ["import", "derive", "python", "batch", "c", "selftest", "sheet", "figures", "pose", "verify", "docs",
             "waited"]
    header = (f"{'arm':<16} {'wall':>6} {'min':>6} {'cpu':>6} {'alone':>6} {'cold':>6} {'goal':>5} " + " ".join(f"{c:>7}" for c in shown)
              + f" {'total':>7}")
    print()
    print("seconds. wall: median of the command's runs; min: the fastest; cpu: median user + system time of")
    print("the command and its helpers; alone: median wall with no helper process (IKGEN_HELPERS=0); cold: a")
    print("first run's wall (templates compiled, ikgen's modules compiled from source); the timed runs follow an")
    print("untimed one, with Python's bytecode caches and jinja2's template cache as a user's runs have them.")
    print(f"Then one in-process run's phases in {args.clock} seconds (generate.build's timings): the")
    print("report's sheet, figures and documents run in helper processes beside the rest where allowed")
    print("(ikgen/sidejobs.py), so the phases can add up to more than the total; waited: the time the main")
    print("process waited for them; total: import + build in that run")
    print(header)
    for name, command, phases in rows:
        wall_text = ("{:6.2f} {:6.2f} {:6.2f} {:6.2f} {:6.2f}".format(*command) if command is not None
                     else " ".join(f"{'-':>6}" for _ in range(5)))
        cells = " ".join(f"{phases.get(c, 0.0):7.2f}" for c in COLUMNS)
        print(f"{name:<16} {wall_text} {GOAL_SECONDS:5.1f} {cells} {phases['total']:7.2f}")
    print(f"load average after: {load_average()}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
