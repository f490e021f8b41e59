"""Benchmark: the generated C's optional atan2 kernel (templates/c_atan2.c.j2, compiled in with
-DIKGEN_FAST_ATAN2) against the maths library, side by side in one run.

- x86-64, gcc -O2, glibc: ns per call of atan2 and of the double kernel, of atan2f and of the
  float kernel, on the same --calls seeded pairs (y, x uniform in [-1, 1]; the float functions
  get the pairs rounded to float), in interleaved rounds whose order rotates (best and median);
  the kernel is static in the timing translation unit, as it is in a generated source, and the
  library's function a call into libm, as it is for the generated solver. Goal: the double
  kernel at least 2x faster than glibc's atan2;
- the whole generated solver of benchtop6 (double and float builds, limits ignored, every
  solution) built as it is and with -DIKGEN_FAST_ATAN2, ns per full solve on the same --poses
  seeded poses, in the same rounds; the solver's files are generated now by this tree's ikgen
  (generated/ may predate the kernel), and the number of poses whose solution count differs
  between the builds is printed;
- Cortex-M4F (arm-none-eabi-gcc -Os, newlib, QEMU mps2-an386 with -icount, as
  benchmarks/bench_mcu.py): instructions per call of newlib's atan2f and of the float kernel on
  --mcu-calls pairs (tools/mcu/atan2_main.c), and instructions per full solve of benchtop6's
  float build without and with the kernel (tools/mcu/bench_main.c). Goal: at least 2x fewer
  than atan2f. Skipped with the reason when the cross tools are missing.

Run:  python3 benchmarks/bench_atan2.py [--calls 20000] [--rounds 15] [--poses 20000] [--mcu-calls 2000]
Figures depend on the machine and its load (printed beside them): quote them with care.
"""

from __future__ import annotations

import argparse
import os
import shutil
import subprocess
import sys
import tempfile
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))
sys.path.insert(0, str(ROOT / "tools" / "atan2"))
sys.path.insert(0, str(ROOT / "tools" / "mcu"))
sys.path.insert(0, str(ROOT / "benchmarks"))

import firmware  # noqa: E402
import kernel_check  # noqa: E402
from ikgen.armfile import load_arm  # noqa: E402
from ikgen.backends import c as c_backend  # noqa: E402
from ikgen.generate import build  # noqa: E402
from ikgen.kinematics import NumericChain  # noqa: E402
from ikgen.verify import random_readings  # noqa: E402

ARM_FILE = ROOT / "examples" / "benchtop6.toml"
HARNESS = ROOT / "benchmarks" / "c" / "atan2_speed.c"
CFLAGS = ["-O2", "-std=c99", "-Wall"]
FAST = "-DIKGEN_FAST_ATAN2"
GOAL = 2.0


class BenchError(Exception):
    """A failure worth one clear line."""


def run(command: list, cwd: Path) -> str:
    done = subprocess.run([str(c) for c in command], cwd=cwd, capture_output=True, text=True)
    if done.returncode != 0:
        raise BenchError(f"`{' '.join(map(str, command))}` failed (exit {done.returncode}):\n"
                         f"{done.stdout}{done.stderr}".rstrip())
    return done.stdout


def key_values(text: str) -> dict[str, float]:
    pairs = (line.partition("=") for line in text.splitlines() if "=" in line)
    return {key.strip(): float(value) for key, _, value in pairs}


def kernel_include(folder: Path) -> Path:
    """kernel.inc with both kernels (kernel_atan2, kernel_f32_atan2) for the harnesses."""
    path = folder / "kernel.inc"
    path.write_text(kernel_check.kernel_source("double") + kernel_check.kernel_source("float"), encoding="utf-8")
    return path


def generated_solver(work: Path):
    """(folder, double names, float names) of benchtop6's C files generated now."""
    arm = load_arm(ARM_FILE)
    result = build(arm)
    for relative, text in result.files.items():
        target = work / "gen" / relative
        target.parent.mkdir(parents=True, exist_ok=True)
        target.write_text(text, encoding="utf-8")
    folder = work / "gen" / result.folder
    return arm, folder, c_backend.names(arm, c_backend.DOUBLE), c_backend.names(arm, c_backend.FLOAT)


def renamed_object(source: Path, build_name: str, flags: list[str], work: Path) -> Path:
    """``source`` compiled, every symbol it defines renamed <build_name>_<symbol> (objcopy)."""
    obj = work / f"{build_name}_{source.stem}.o"
    run(["gcc", *CFLAGS, *flags, f"-I{source.parent}", "-c", source, "-o", obj], work)
    defined = [line.split()[-1] for line in run(["nm", "--defined-only", "-g", obj], work).splitlines()]
    run(["objcopy", *(f"--redefine-sym={name}={build_name}_{name}" for name in defined), obj], work)
    return obj


def time_x86(calls: int, rounds: int, poses: int, work: Path) -> dict[str, float]:
    rng = np.random.default_rng(20261203)
    pairs = rng.uniform(-1.0, 1.0, (calls, 2))
    pairs.tofile(work / "args.bin")
    arm, folder, double, single = generated_solver(work)
    readings = random_readings(arm, poses, np.random.default_rng(7))
    np.ascontiguousarray(NumericChain(arm).poses(readings).reshape(-1, 16)).tofile(work / "poses.bin")
    kernel_include(work)
    objects = []
    for names in (double, single):
        objects.append(renamed_object(folder / names["source"], "lib", [], work))
        objects.append(renamed_object(folder / names["source"], "fast", [FAST], work))
    macros = [f'-DIK_HEADER="{double["header"]}"', f"-DIK_PREFIX={double['prefix']}", f"-DIK_UPPER={double['upper']}",
              f'-DIK32_HEADER="{single["header"]}"', f"-DIK32_PREFIX={single['prefix']}",
              f"-DIK32_UPPER={single['upper']}"]
    run(["gcc", *CFLAGS, FAST, "-DWITH_SOLVER", *macros, f"-I{work}", f"-I{folder}", HARNESS, *objects, "-lm",
         "-o", work / "atan2_speed"], work)
    return key_values(run([work / "atan2_speed", work / "args.bin", str(rounds), work / "poses.bin"], work))


# ------------------------------------------------------------------------------ Cortex-M4F

def mcu_figures(calls: int, poses: int, work: Path) -> dict:
    """Instructions per call (newlib atan2f, kernel) and per solve (benchtop6 float, both builds)."""
    import bench_mcu
    tools = firmware.find_tools(need_qemu=True)
    rng = np.random.default_rng(20261203)
    pairs = rng.uniform(-1.0, 1.0, (calls, 2)).astype(np.float32)
    rows = ",\n".join(f"    {{ {y!r}f, {x!r}f }}" for y, x in pairs.tolist())
    args_c = work / "args.c"
    args_c.write_text(f"const float bench_args[][2] = {{\n{rows}\n}};\nconst int bench_arg_count = {calls};\n",
                      encoding="utf-8")
    (work / "mcu").mkdir(exist_ok=True)
    (work / "mcu" / "kernel.inc").write_text(kernel_check.kernel_source("float"), encoding="utf-8")
    elf = firmware.link(tools, [firmware.HERE / "atan2_main.c", args_c], work / "atan2.elf",
                        includes=(work / "mcu",), extra=(FAST,))
    ran = firmware.emulate(tools, elf, count_instructions=True)
    if ran.status != 0:
        raise BenchError(f"atan2.elf exited {ran.status}:\n{ran.output}")
    lines = [line.split() for line in ran.output.splitlines() if line.strip()]
    loops = [(int(n), int(t)) for word, n, t in (l for l in lines if l[0] == "loop")]
    (n1, t1), (n2, t2) = loops
    per_tick = 2 * (n2 - n1) / (t2 - t1)
    ticks = {l[0]: int(l[2]) for l in lines if l[0] in ("empty", "atan2f", "kernel")}
    out = {"version": tools.version(), "per_tick": per_tick, "calls": calls,
           "atan2f": (ticks["atan2f"] - ticks["empty"]) * per_tick / calls,
           "kernel": (ticks["kernel"] - ticks["empty"]) * per_tick / calls,
           "differ": int(next(l[1] for l in lines if l[0] == "differ"))}
    folder = work / "gen" / "benchtop6"
    prefix = c_backend.names(load_arm(ARM_FILE), c_backend.FLOAT)["prefix"]
    solver = firmware.FloatSolver(stem="benchtop6", folder=folder, prefix=prefix)
    poses_c = work / "poses.c"
    bench_mcu.write_poses(ARM_FILE, poses, 7, poses_c)
    for label, extra in (("solve_library", ()), ("solve_kernel", (FAST,))):
        (work / label).mkdir(exist_ok=True)
        counts, _ = bench_mcu.emulated_figures(tools, solver, extra, poses_c, work / label)
        out[label] = counts["mean"]
        out[label + "_solutions"] = counts["solutions"]
    return out


# ------------------------------------------------------------------------------ report

def print_x86(figures: dict, calls: int, rounds: int) -> None:
    print(f"x86-64, gcc -O2, {int(figures['calls_per_pass'])} pairs a pass, {rounds} interleaved rounds "
          f"(best / median ns)")
    print(f"{'':<34}{'maths library':>18}{'kernel':>18}{'speed-up':>10}")
    rows = (("atan2, double, ns per call", "atan2", "kernel"), ("atan2f, float, ns per call", "atan2f", "kernel_f32"),
            ("benchtop6 double, ns per solve", "solver_library", "solver_kernel"),
            ("benchtop6 float, ns per solve", "solver_f32_library", "solver_f32_kernel"))
    for label, library, kernel in rows:
        lb, lm = figures[f"{library}_best_ns"], figures[f"{library}_median_ns"]
        kb, km = figures[f"{kernel}_best_ns"], figures[f"{kernel}_median_ns"]
        print(f"{label:<34}{lb:>9.2f} /{lm:>7.2f}{kb:>9.2f} /{km:>7.2f}{lb / kb:>9.2f}x")
    ratio = figures["atan2_best_ns"] / figures["kernel_best_ns"]
    print(f"goal: double kernel >= {GOAL:.1f}x faster than glibc's atan2: {'met' if ratio >= GOAL else 'NOT met'} "
          f"({ratio:.2f}x)")
    print(f"poses whose solution count differs between the builds: double "
          f"{int(figures['solver_count_differences'])}, float {int(figures['solver_f32_count_differences'])} "
          f"of {int(figures['poses_per_pass'])}")


def print_mcu(figures: dict) -> None:
    print(f"\nCortex-M4F ({figures['version']}; -Os, newlib; QEMU mps2-an386 -icount, "
          f"{figures['per_tick']:.0f} instructions a tick): instructions, not cycles")
    ratio = figures["atan2f"] / figures["kernel"]
    print(f"{'':<34}{'newlib':>12}{'kernel':>12}{'ratio':>10}")
    print(f"{'atan2f, per call':<34}{figures['atan2f']:>12.1f}{figures['kernel']:>12.1f}{ratio:>9.2f}x"
          f"   ({figures['calls']} pairs; {figures['differ']} differ by more than 2 ulps)")
    solve = figures["solve_library"] / figures["solve_kernel"]
    print(f"{'benchtop6 float, per full solve':<34}{figures['solve_library']:>12.0f}{figures['solve_kernel']:>12.0f}"
          f"{solve:>9.2f}x   (mean solutions {figures['solve_library_solutions']:.2f} / "
          f"{figures['solve_kernel_solutions']:.2f})")
    print(f"goal: kernel >= {GOAL:.1f}x fewer instructions than atan2f: {'met' if ratio >= GOAL else 'NOT met'}")


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--calls", type=int, default=20000)
    parser.add_argument("--rounds", type=int, default=15)
    parser.add_argument("--poses", type=int, default=20000)
    parser.add_argument("--mcu-calls", type=int, default=2000)
    parser.add_argument("--mcu-poses", type=int, default=100)
    args = parser.parse_args(argv)
    if shutil.which("gcc") is None or shutil.which("objcopy") is None:
        print("bench_atan2: gcc and binutils are needed (apt-get install gcc binutils)", file=sys.stderr)
        return 1
    print(f"load average at start: {' '.join(f'{v:.2f}' for v in os.getloadavg())}")
    try:
        with tempfile.TemporaryDirectory() as folder:
            work = Path(folder)
            figures = time_x86(args.calls, args.rounds, args.poses, work)
            print_x86(figures, args.calls, args.rounds)
            try:
                print_mcu(mcu_figures(args.mcu_calls, args.mcu_poses, work))
            except firmware.ToolsMissing as missing:
                print(f"\nCortex-M4F: skipped ({missing})")
    except (BenchError, firmware.FirmwareError) as error:
        print(f"bench_atan2: {error}", file=sys.stderr)
        return 1
    print(f"load average at end: {' '.join(f'{v:.2f}' for v in os.getloadavg())}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
