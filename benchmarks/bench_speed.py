"""Benchmark: ikgen's generated solvers against hand-written ones for the same arm, side by side.

For the demo arm examples/benchtop6.toml, in one run, on the same N seeded poses (random readings
within the limits, NumericChain.poses), every solver returning every closed-form solution with
joint limits ignored:
- C, gcc -O2: the generated double solver (<arm>_ik.c, BENCHTOP6_IK_LIMITS_IGNORE) against the
  hand-written benchmarks/hand/benchtop6_hand.c, ns per full solve and their ratio (goal <= 1.05x):
  the full call against the hand-written readings-only solver (the comparison as first made), the
  full call against the hand-written solver's full build (the same outputs: labels, singular flag,
  conditioning measures, within-limits flag), and the readings-only entry _inverse_joints against
  the readings-only solver;
  the generated float build (<arm>_ik_f32.c) against the double one (goal <= 1.0x); and the same
  two rows with the generated solvers built with their opt-in atan2 kernel (-DIKGEN_FAST_ATAN2;
  the hand-written solver keeps the maths library's atan2). One harness
  (benchmarks/hand/speed_harness.c) times them in interleaved rounds and keeps each one's best;
- Python: the generated <arm>_ik.py, inverse(pose, limits="ignore") and the readings-only
  inverse_joints(pose) (the same output as the hand-written inverse's), against the hand-written
  benchmarks/hand/benchtop6_hand.py, us per full solve and their ratio (goal <= 1.5x): the same
  three pairs as for C (the full call also against the hand-written inverse_full, which returns
  the same outputs);
- the generated C called once per pose through cffi (ikgen.cbuild.compile_solver(arm).inverse,
  rendered by the installed generator) against the generated pure-Python solver (goal <= 1.0x).
Before timing, the generated and hand-written solvers must find the same number of solutions on
every pose (C) and on the first --check-poses poses (Python), and the hand-written full builds the
same labels and flags as the generated full calls (measures within 1e-9, readings as the
readings-only hand solvers'); tests/test_hand_reference.py checks the hand solvers' solution sets,
round trips and full outputs in full.

The generated files are read from generated/benchtop6/ (as committed or as the lead regenerated
them), or, with --fresh, generated now by ikgen.generate.build into a temporary folder.

Run:  python3 benchmarks/bench_speed.py [--poses 50000] [--rounds 25] [--python-rounds 5] [--fresh]
Figures depend on the machine and its load (printed beside them): quote them with care.
"""

from __future__ import annotations

import argparse
import datetime
import hashlib
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
HAND = ROOT / "benchmarks" / "hand"
sys.path.insert(0, str(ROOT))

from ikgen.armfile import load_arm  # noqa: E402
from ikgen.backends import c as c_backend  # noqa: E402
from ikgen.errors import IkgenError  # noqa: E402
from ikgen.generate import build, load_module  # noqa: E402
from ikgen.kinematics import NumericChain  # noqa: E402
from ikgen.verify import random_readings  # noqa: E402

ARM_FILE = ROOT / "examples" / "benchtop6.toml"
CFLAGS = ["-O2", "-std=c99", "-Wall"]
GOALS = {"c": 1.05, "python": 1.5, "cffi": 1.0, "float": 1.0}


class BenchError(Exception):
    """A failure worth one clear line (missing compiler, failed compile or run, disagreeing solvers)."""


def run(command: list[str], cwd: Path) -> str:
    done = subprocess.run(command, cwd=cwd, capture_output=True, text=True)
    if done.returncode != 0:
        raise BenchError(f"`{' '.join(command)}` failed (exit {done.returncode}) in {cwd}:\n"
                         f"{done.stdout}{done.stderr}".rstrip())
    if done.stderr.strip():  # compiler warnings are worth seeing, but not fatal
        print(done.stderr.rstrip(), file=sys.stderr)
    return done.stdout


def solver_files(arm, fresh: bool, work: Path) -> tuple[Path, str, str]:
    """(folder holding the C files, Python solver source, where they came from) for ``arm``."""
    if not fresh:
        folder = ROOT / "generated" / arm.name
        python_path = folder / f"{arm.name}_ik.py"
        if not python_path.is_file():
            raise BenchError(f"{python_path} is missing: run `ikgen generate` or pass --fresh")
        return folder, python_path.read_text(encoding="utf-8"), f"generated/{arm.name}/ (as on disk)"
    started = time.perf_counter()
    result = build(arm)
    seconds = time.perf_counter() - started
    for relative, text in result.files.items():
        target = work / "fresh" / relative
        target.parent.mkdir(parents=True, exist_ok=True)
        target.write_text(text, encoding="utf-8")
    return (work / "fresh" / result.folder, result.files[result.python_path],
            f"--fresh: ikgen.generate.build now ({seconds:.1f} s wall, all files and report)")


BUILDS = {  # variant: (flags for the two double solvers, flags for the harness, extra objects, flags for the float build)
    "time": ([], [], [], []),
    "count": (["-include", str(ROOT / "benchmarks" / "c" / "count_math.h")], ["-DIK_COUNTING"], ["counters.o"], []),
    "stub": (["-include", str(ROOT / "benchmarks" / "c" / "stub_atan2.h")], [], [], []),
    # the generated solvers with their opt-in atan2 kernel (the hand-written one keeps the library's)
    "kernel": (["-DIKGEN_FAST_ATAN2"], [], [], ["-DIKGEN_FAST_ATAN2"]),
}


def compile_harness(cc: str, arm, sources: Path, work: Path, variant: str) -> Path:
    """The speed harness linked with the generated double and float solvers and the hand solver:
    ``time`` as they are; ``count`` with the double solvers' atan2 and sqrt calls counted
    (benchmarks/c/count_math.h); ``stub`` with their atan2 replaced by a cheap inline stand-in
    (benchmarks/c/stub_atan2.h), to time what the solvers cost apart from atan2."""
    double, single = c_backend.names(arm, c_backend.DOUBLE), c_backend.names(arm, c_backend.FLOAT)
    solver_flags, harness_flags, extra, float_flags = BUILDS[variant]
    include = [f"-I{sources}", f"-I{HAND}"]
    macros = [f'-DIK_HEADER="{double["header"]}"', f"-DIK_PREFIX={double['prefix']}", f"-DIK_UPPER={double['upper']}",
              f'-DIK32_HEADER="{single["header"]}"', f"-DIK32_PREFIX={single['prefix']}",
              f"-DIK32_UPPER={single['upper']}"]
    units = {f"generated_{variant}.o": [*solver_flags, *include, str(sources / double["source"])],
             f"generated_f32_{variant}.o": [*float_flags, *include, str(sources / single["source"])],
             f"hand_{variant}.o": [*solver_flags, *include, str(HAND / "benchtop6_hand.c")],
             f"hand_full_{variant}.o": [*solver_flags, *include, "-DBENCHTOP6_HAND_FULL",
                                        str(HAND / "benchtop6_hand.c")],
             f"harness_{variant}.o": [*harness_flags, *include, *macros, str(HAND / "speed_harness.c")]}
    if extra:
        units["counters.o"] = [str(ROOT / "benchmarks" / "c" / "counters.c")]
    for target, args in units.items():
        run([cc, *CFLAGS, "-c", *args, "-o", target], work)
    run([cc, *units.keys(), "-lm", "-o", f"speed_{variant}"], work)
    return work / f"speed_{variant}"


def key_values(text: str) -> dict[str, float]:
    pairs = (line.partition("=") for line in text.splitlines() if "=" in line)
    return {key.strip(): float(value) for key, _, value in pairs}


def time_c(cc: str, arm, sources: Path, poses: np.ndarray, rounds: int, work: Path) -> dict[str, float]:
    """Key figures of the C solvers: timing rounds, maths calls per pose, timing with atan2 stubbed."""
    binaries = {variant: compile_harness(cc, arm, sources, work, variant) for variant in BUILDS}
    pose_file = work / "poses.bin"
    np.ascontiguousarray(poses.reshape(-1, 16), dtype=np.float64).tofile(pose_file)
    figures = key_values(run([str(binaries["count"]), str(pose_file), "1"], work))
    if figures["count_mismatches"]:
        raise BenchError(f"the generated and hand-written C solvers disagree on the number of solutions "
                         f"on {int(figures['count_mismatches'])} poses: fix that before timing them")
    figures.update(key_values(run([str(binaries["time"]), str(pose_file), str(rounds)], work)))
    if figures["readings_mismatches"]:
        raise BenchError(f"the generated C solver's readings-only entry and its full one differ on "
                         f"{int(figures['readings_mismatches'])} poses: fix that before timing them")
    if figures["hand_full_mismatches"]:
        raise BenchError(f"the hand-written C solver's full build and the generated full call (or the hand-written "
                         f"readings-only build) differ on {int(figures['hand_full_mismatches'])} poses: fix that "
                         f"before timing them")
    stubbed = key_values(run([str(binaries["stub"]), str(pose_file), str(rounds)], work))
    figures.update({f"stub_{key}": value for key, value in stubbed.items()})
    kernel = key_values(run([str(binaries["kernel"]), str(pose_file), str(rounds)], work))
    figures.update({f"kernel_{key}": value for key, value in kernel.items()})
    return figures


def check_python(generated, hand, poses: list) -> None:
    for index, pose in enumerate(poses):
        full, lean = generated.inverse(pose, limits="ignore"), hand.inverse(pose)
        want, got = len(full), len(lean)
        if hasattr(generated, "inverse_joints") and len(generated.inverse_joints(pose)) != want:
            raise BenchError(f"pose {index}: inverse_joints and inverse disagree on the number of solutions")
        if want != got:
            raise BenchError(f"pose {index}: the generated Python solver finds {want} solutions, "
                             f"the hand-written one {got}: fix that before timing them")
        rows = hand.inverse_full(pose)
        if [tuple(r.joints) for r in rows] != lean or any(
                r.config != s.config or r.singular != s.singular or r.within_limits != s.within_limits
                or max(abs(a - b) for a, b in zip(r.conditioning, s.conditioning)) > 1e-9 for r, s in zip(rows, full)):
            raise BenchError(f"pose {index}: the hand-written inverse_full and the generated inverse disagree on "
                             f"labels, flags or measures (or inverse_full on readings with inverse): fix that first")


def time_python(solvers: dict, poses: list, rounds: int) -> dict[str, tuple[float, float]]:
    """{name: (best, median) us per call}, in rounds that rotate the solvers' order."""
    names = list(solvers)
    passes: dict[str, list[float]] = {name: [] for name in names}
    for r in range(rounds):
        for k in range(len(names)):
            name = names[(r + k) % len(names)]
            solve = solvers[name]
            started = time.perf_counter()
            for pose in poses:
                solve(pose)
            passes[name].append((time.perf_counter() - started) / len(poses) * 1e6)
    return {name: (min(times), sorted(times)[len(times) // 2]) for name, times in passes.items()}


def machine_lines(cc: str) -> list[str]:
    model = "unknown CPU"
    try:
        model = next(line.split(":", 1)[1].strip() for line in Path("/proc/cpuinfo").read_text().splitlines()
                     if line.startswith("model name"))
    except (OSError, StopIteration):
        pass
    compiler = subprocess.run([cc, "--version"], capture_output=True, text=True).stdout.splitlines()[0]
    when = datetime.datetime.now(datetime.timezone.utc).strftime("%Y-%m-%d %H:%M UTC")
    return [f"date: {when}",
            f"machine: {model}, {os.cpu_count()} logical cores, {platform.system()} {platform.machine()}",
            f"compiler: {compiler}; flags {' '.join(CFLAGS)}, one translation unit a solver",
            f"Python {platform.python_version()} ({platform.python_implementation()})"]


def digest(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()[:12]


def print_table(c: dict, py: dict, rounds: tuple[int, int], counts: tuple[int, int]) -> None:
    def line(label: str, left: str, right: str, ratio: float | None = None, goal: float | None = None) -> None:
        cells = f"{label:<40}{left:>12}{right:>12}"
        if ratio is not None:
            cells += f"{ratio:>9.2f}x"
        if goal is not None:
            cells += f"   <= {goal:.2f}x {'met' if ratio <= goal else 'NOT met'}"
        print(cells)

    print(f"{'figure':<40}{'generated':>12}{'reference':>12}{'ratio':>10}   goal")
    print("-" * 92)
    ratio = c["generated_best_ns"] / c["hand_best_ns"]
    line("C double, ns per full solve (best)", f"{c['generated_best_ns']:.0f}", f"{c['hand_best_ns']:.0f}",
         ratio, GOALS["c"])
    line("  (median round)", f"{c['generated_median_ns']:.0f}", f"{c['hand_median_ns']:.0f}",
         c["generated_median_ns"] / c["hand_median_ns"])
    line("C double, full vs hand-written full, ns", f"{c['generated_best_ns']:.0f}", f"{c['hand_full_best_ns']:.0f}",
         c["generated_best_ns"] / c["hand_full_best_ns"], GOALS["c"])
    line("  (median round)", f"{c['generated_median_ns']:.0f}", f"{c['hand_full_median_ns']:.0f}",
         c["generated_median_ns"] / c["hand_full_median_ns"])
    line("C double inverse_joints (readings only), ns", f"{c['readings_best_ns']:.0f}", f"{c['hand_best_ns']:.0f}",
         c["readings_best_ns"] / c["hand_best_ns"], GOALS["c"])
    line("  (median round)", f"{c['readings_median_ns']:.0f}", f"{c['hand_median_ns']:.0f}",
         c["readings_median_ns"] / c["hand_median_ns"])
    gen, hand = py["generated"], py["hand"]
    line("Python, us per full solve (best)", f"{gen[0]:.2f}", f"{hand[0]:.2f}", gen[0] / hand[0], GOALS["python"])
    line("  (median round)", f"{gen[1]:.2f}", f"{hand[1]:.2f}", gen[1] / hand[1])
    whole = py["hand_full"]
    line("Python, full vs hand-written full, us", f"{gen[0]:.2f}", f"{whole[0]:.2f}", gen[0] / whole[0],
         GOALS["python"])
    line("  (median round)", f"{gen[1]:.2f}", f"{whole[1]:.2f}", gen[1] / whole[1])
    if "readings" in py:
        lean = py["readings"]
        line("Python inverse_joints (readings only), us", f"{lean[0]:.2f}", f"{hand[0]:.2f}", lean[0] / hand[0],
             GOALS["python"])
    if "cffi" in py:
        cffi = py["cffi"]
        line("cffi per-pose call vs pure Python, us", f"{cffi[0]:.2f}", f"{gen[0]:.2f}", cffi[0] / gen[0],
             GOALS["cffi"])
    line("C double, atan2 calls per full solve", f"{c['generated_atan2_calls']:.2f}", f"{c['hand_atan2_calls']:.2f}",
         c["generated_atan2_calls"] / c["hand_atan2_calls"])
    line("C double, sqrt calls per full solve", f"{c['generated_sqrt_calls']:.2f}", f"{c['hand_sqrt_calls']:.2f}",
         c["generated_sqrt_calls"] / c["hand_sqrt_calls"])
    line("C double, atan2 stubbed, ns (best)", f"{c['stub_generated_best_ns']:.0f}", f"{c['stub_hand_best_ns']:.0f}",
         c["stub_generated_best_ns"] / c["stub_hand_best_ns"])
    line("float build vs double, ns per solve", f"{c['float_best_ns']:.0f}", f"{c['generated_best_ns']:.0f}",
         c["float_best_ns"] / c["generated_best_ns"], GOALS["float"])
    line("with IKGEN_FAST_ATAN2: C double, ns", f"{c['kernel_generated_best_ns']:.0f}",
         f"{c['kernel_hand_best_ns']:.0f}", c["kernel_generated_best_ns"] / c["kernel_hand_best_ns"])
    line("with IKGEN_FAST_ATAN2: float vs double, ns", f"{c['kernel_float_best_ns']:.0f}",
         f"{c['kernel_generated_best_ns']:.0f}", c["kernel_float_best_ns"] / c["kernel_generated_best_ns"],
         GOALS["float"])
    poses = c["poses"]
    print("-" * 92)
    print("reference column: hand-written C / hand-written Python (benchmarks/hand/), readings only; in the "
          "'full vs hand-written full' rows their full builds (benchtop6_hand_inverse_full, inverse_full), which "
          "return what the generated full call returns; for the cffi row the generated pure-Python solver; for "
          "the float row the generated double build.")
    print(f"hand-written C full build {c['hand_full_best_ns']:.0f} ns against its readings-only build "
          f"{c['hand_best_ns']:.0f} ns ({c['hand_full_best_ns'] / c['hand_best_ns']:.2f}x); Python "
          f"{py['hand_full'][0]:.2f} against {py['hand'][0]:.2f} us ({py['hand_full'][0] / py['hand'][0]:.2f}x): "
          f"what the full outputs cost written by hand.")
    print(f"C: {int(poses)} poses, {rounds[0]} interleaved rounds (order rotating), best and median round; "
          f"solutions per pose {c['generated_solutions'] / poses:.3f} generated, {c['hand_solutions'] / poses:.3f} "
          f"hand-written, {c['float_solutions'] / poses:.3f} float build.")
    print("atan2 stubbed: a diagnostic build of both double solvers with every atan2 an inline y + 0.5*x "
          "(benchmarks/c/stub_atan2.h): what each costs apart from its atan2 calls. Calls are counted at "
          "source level (benchmarks/c/count_math.h); gcc -O2 inlines sqrt as one instruction.")
    print("IKGEN_FAST_ATAN2: the generated double and float solvers built with their opt-in atan2 kernel "
          "(docs/solvers.md), the hand-written one with the maths library's atan2 as always.")
    print(f"Python: {counts[0]} poses as nested lists, {rounds[1]} interleaved rounds; solution counts of the "
          f"generated and hand-written solvers compared on the first {counts[1]} poses (all equal; with the hand-written full build, labels, flags and measures too).")


def parse_args(argv):
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--poses", type=int, default=50_000, help="seeded poses for every solver (default 50000)")
    parser.add_argument("--rounds", type=int, default=25, help="interleaved rounds of the C solvers")
    parser.add_argument("--python-rounds", type=int, default=5, help="interleaved rounds of the Python solvers")
    parser.add_argument("--python-poses", type=int, default=None, help="poses for Python (default: all)")
    parser.add_argument("--check-poses", type=int, default=2000, help="Python count check before timing")
    parser.add_argument("--seed", type=int, default=20260311)
    parser.add_argument("--fresh", action="store_true", help="generate the solvers now instead of reading generated/")
    parser.add_argument("--no-cffi", action="store_true", help="skip the per-pose cffi row (saves a derivation)")
    args = parser.parse_args(argv)
    for name in ("poses", "rounds", "python_rounds", "check_poses"):
        if getattr(args, name) < 1:
            parser.error(f"--{name.replace('_', '-')} must be at least 1, got {getattr(args, name)}")
    if args.python_poses is not None and args.python_poses < 1:
        parser.error(f"--python-poses must be at least 1, got {args.python_poses}")
    return args


def measure(args, cc: str, work: Path) -> None:
    arm = load_arm(ARM_FILE)
    sources, python_source, origin = solver_files(arm, args.fresh, work)
    print(f"generated solvers: {origin}; {arm.name}_ik.c sha256 {digest(sources / f'{arm.name}_ik.c')}, "
          f"{arm.name}_ik.py sha256 {digest(sources / f'{arm.name}_ik.py')}")
    poses = NumericChain(arm).poses(random_readings(arm, args.poses, np.random.default_rng(args.seed)))
    generated = load_module(python_source, f"{arm.name}_ik_bench_speed")
    hand = load_module((HAND / "benchtop6_hand.py").read_text(encoding="utf-8"), "benchtop6_hand_bench_speed")
    nested = [p.tolist() for p in poses[:args.python_poses or len(poses)]]
    check_python(generated, hand, nested[:args.check_poses])
    solvers = {"generated": lambda pose: generated.inverse(pose, limits="ignore"), "hand": hand.inverse,
               "hand_full": hand.inverse_full}
    if hasattr(generated, "inverse_joints"):          # readings only, as the hand-written solver returns
        solvers["readings"] = generated.inverse_joints
    if not args.no_cffi:
        from ikgen.cbuild import compile_solver
        compiled = compile_solver(arm, folder=work / "cffi")
        solvers["cffi"] = lambda pose: compiled.inverse(pose, limits="ignore")
    load_before = os.getloadavg()
    c_figures = time_c(cc, arm, sources, poses, args.rounds, work)
    py_figures = time_python(solvers, nested, args.python_rounds)
    load_after = os.getloadavg()
    print(f"load average (1/5/15 min) before timing {' '.join(f'{v:.2f}' for v in load_before)}, "
          f"after {' '.join(f'{v:.2f}' for v in load_after)}")
    print()
    print_table(c_figures, py_figures, (args.rounds, args.python_rounds), (len(nested), min(args.check_poses, len(nested))))


def main(argv=None) -> int:
    args = parse_args(argv)
    cc = os.environ.get("CC", "gcc")
    if shutil.which(cc) is None:
        print(f"bench_speed: C compiler '{cc}' not found (set CC or install gcc)", file=sys.stderr)
        return 2
    for line in machine_lines(cc):
        print(line)
    try:
        with tempfile.TemporaryDirectory(prefix="ikgen-bench-speed-") as scratch:
            measure(args, cc, Path(scratch))
    except (BenchError, IkgenError) as exc:
        print(f"bench_speed: {exc}", file=sys.stderr)
        return 1
    return 0


if __name__ == "__main__":
    sys.exit(main())
