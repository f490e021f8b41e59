"""Benchmark: the committed float solvers on a Cortex-M4F: flash, RAM, stack and instructions.

For every generated/<arm>/<arm>_ik_f32.c (so new demo arms are covered without edits), with the
arm file found in examples/ by name, and for two builds, the project's flags
(arm-none-eabi-gcc -mcpu=cortex-m4 -mthumb -mfpu=fpv4-sp-d16 -mfloat-abi=hard -Os, newlib) and the
same with -fno-math-errno (the compiler may then use the FPU's vsqrt.f32 instead of calling sqrtf):

- sections of the solver object alone (`arm-none-eabi-size -A`: .text with its literal pools,
  .rodata, .data, .bss; libm not included), and the flash and RAM the solver adds to a firmware
  with the maths library (tools/mcu/size_probe.c linked with and without a call of inverse under
  --gc-sections, Berkeley `size` text+data and data+bss, difference);
- worst-case stack of `<prefix>_inverse`: the solver's own frames from gcc's -fstack-usage,
  walked along gcc's call graph (-fcallgraph-info=su, which names every callee), and for each
  library callee (atan2f, sqrtf, sinf, cosf, memcpy, ...) the deepest chain of frames in the
  linked firmware, read from its disassembly (every push/vpush/stmdb/sub sp of a function summed,
  which can only over-count, plus the deepest callee by bl/b.w; an indirect call stops the walk
  and is reported). The same disassembly walk is checked against gcc's figure for every solver
  function. Next to it, the deepest stack measured on the emulated core (stack painted before one
  solve of every pose, the lowest changed word after);
- instructions per full solve (every solution of one pose, LIMITS_DROP) on QEMU's mps2-an386 with
  -icount shift=0: the virtual clock then advances 1 ns per executed instruction, and SysTick,
  clocked from the core clock, counts them at its resolution (40 instructions per tick on this
  board at 25 MHz, measured each run on a loop of known length and printed); each pose is solved
  8 times between two readings, less the same loop around an empty function with the solver's
  signature, so one solve is resolved to about 5 instructions. Instructions, not cycles: QEMU
  models no pipeline, wait states or FPU latencies (a Cortex-M4 runs most instructions in one
  cycle, loads, divisions and square roots in more);
- the same instruction count for the arm's double build (generated/<arm>/<arm>_ik.c, the same
  poses in double, the project's flags): the Cortex-M4F's FPU is single precision only, so the
  double build's arithmetic runs in libgcc's software routines and newlib's double maths; the
  float/double ratio is the goal "float at least as fast as double" on this core, in instructions.

QEMU 7.2 as packaged by Debian is built with TCG plugin support but ships no plugins (nor the
header to build one), so instruction counting uses -icount instead.

Run:  python3 benchmarks/bench_mcu.py [--poses 200] [--seed 7] [--generated DIR]
Needs: apt-get install gcc-arm-none-eabi libnewlib-arm-none-eabi qemu-system-arm
"""

from __future__ import annotations

import argparse
import re
import statistics
import sys
import tempfile
from dataclasses import dataclass
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))
sys.path.insert(0, str(ROOT / "tools" / "mcu"))

import firmware  # noqa: E402
from ikgen.armfile import load_arm  # noqa: E402
from ikgen.backends.common import identifier  # noqa: E402
from ikgen.errors import IkgenError  # noqa: E402
from ikgen.kinematics import NumericChain  # noqa: E402
from ikgen.verify import random_readings  # noqa: E402

VARIANTS = {"-Os": (), "-Os -fno-math-errno": ("-fno-math-errno",)}
SECTIONS = (".text", ".rodata", ".data", ".bss")
TEXT_GOAL = 8192        # bytes of .text for the float solver object (the project's goal)


class BenchError(Exception):
    """A failure worth one clear line."""


# ------------------------------------------------------------------------------ inputs

def arm_files(examples: Path) -> dict[str, Path]:
    """{generated folder name: arm file}, for every arm file in ``examples``."""
    out = {}
    for path in sorted(examples.glob("*")):
        if path.suffix in (".toml", ".json"):
            try:
                out[identifier(load_arm(path).name)] = path
            except IkgenError:
                continue
    return out


def write_poses(arm_path: Path, count: int, seed: int, path: Path, real: str = "float") -> None:
    """``count`` seeded poses (random readings within the limits, ikgen's forward kinematics) as C,
    in ``real`` ("float", or "double" for the double build)."""
    arm = load_arm(arm_path)
    readings = random_readings(arm, count, np.random.default_rng(seed))
    poses = NumericChain(arm).poses(readings)
    if real == "float":
        rows = ["    { " + ", ".join(f"{float(v):.8e}f" for v in pose.reshape(-1)) + " }," for pose in poses]
    else:
        rows = ["    { " + ", ".join(f"{float(v):.17e}" for v in pose.reshape(-1)) + " }," for pose in poses]
    path.write_text(f"const {real} bench_poses[][16] = {{\n" + "\n".join(rows) + "\n};\n"
                    f"const int bench_pose_count = {count};\n", encoding="utf-8")


def solver_defines(solver: firmware.FloatSolver) -> tuple[str, ...]:
    return (f'IK_HEADER="{solver.header.name}"', f"IK_PREFIX={solver.prefix}", f"IK_UPPER={solver.prefix.upper()}")


# ------------------------------------------------------------------------------ sizes

def object_sizes(tools, solver, extra: tuple, work: Path) -> dict[str, int]:
    """Bytes per section kind of the solver object alone (sections .text.* summed into .text, ...)."""
    obj = work / "solver.o"
    firmware.run([tools.cc, *firmware.CPU_FLAGS, *firmware.OPTIMISE, *firmware.WARNINGS, *extra,
                  f"-I{solver.folder}", "-c", solver.source, "-o", obj])
    sizes = dict.fromkeys(SECTIONS, 0)
    for line in firmware.run([tools.size, "-A", obj]).splitlines():
        parts = line.split()
        if len(parts) >= 2 and parts[1].isdigit():
            kind = next((s for s in SECTIONS if parts[0] == s or parts[0].startswith(s + ".")), None)
            if kind:
                sizes[kind] += int(parts[1])
    return sizes


def berkeley(tools, elf: Path) -> tuple[int, int, int]:
    text, data, bss = firmware.run([tools.size, elf]).splitlines()[1].split()[:3]
    return int(text), int(data), int(bss)


def linked_footprint(tools, solver, extra: tuple, work: Path) -> tuple[int, int]:
    """(flash, RAM) bytes that a call of inverse adds to a firmware, maths library included."""
    sizes = []
    for call in (1, 0):
        elf = firmware.link(tools, [solver.source, firmware.HERE / "size_probe.c"], work / f"probe{call}.elf",
                            includes=(solver.folder,), defines=(*solver_defines(solver), f"IK_CALL={call}"),
                            extra=extra)
        sizes.append(berkeley(tools, elf))
    (text1, data1, bss1), (text0, data0, bss0) = sizes
    return (text1 + data1) - (text0 + data0), (data1 + bss1) - (data0 + bss0)


# ------------------------------------------------------------------------------ stack

@dataclass
class CallGraph:
    frames: dict[str, int | None]      # bytes of a function's own frame; None: not sized here
    calls: dict[str, set[str]]
    unbounded: dict[str, str]          # functions whose frame cannot be bounded, and why
    notes: list[str]
    complete: bool                     # every function reached must be sized (a linked firmware)

    def deepest(self, name: str, outside: "CallGraph | None" = None, seen: tuple = ()) -> tuple[int, tuple]:
        """(bytes, chain of functions) of the deepest stack from entering ``name``: its frame plus
        its deepest callee's. A function this graph does not size counts 0 when ``outside`` is
        None, and is otherwise looked up in ``outside``, which must size all it reaches."""
        if name in seen:
            raise BenchError(f"recursion through {' -> '.join((*seen, name))}: no static stack bound")
        frame = self.frames.get(name)
        if frame is None and outside is not None:
            return outside.deepest(bare(name), None, ())
        if frame is None and self.complete:
            raise BenchError(f"{name}: {self.unbounded.get(name, 'not in the firmware')}: no static stack bound")
        if frame is None:
            return 0, (bare(name),)
        below = [self.deepest(c, outside, (*seen, name)) for c in sorted(self.calls.get(name, ()))]
        size, chain = max(below, default=(0, ()), key=lambda item: item[0])
        return frame + size, (bare(name), *chain)


def bare(name: str) -> str:
    """gcc's call graph names static functions 'file:name' and builtins '__builtin_x'."""
    return name.rsplit(":", 1)[-1].removeprefix("__builtin_")


def gcc_call_graph(tools, solver, extra: tuple, work: Path) -> CallGraph:
    """Frames from -fstack-usage and calls from -fcallgraph-info=su, for the solver's object."""
    obj = work / "graph.o"
    firmware.run([tools.cc, *firmware.compile_flags(extra), "-fstack-usage", "-fcallgraph-info=su",
                  f"-I{solver.folder}", "-c", solver.source, "-o", obj])
    text = (work / "graph.ci").read_text(encoding="utf-8")
    frames: dict[str, int | None] = {}
    notes = []
    for title, label in re.findall(r'node: \{ title: "([^"]+)" label: "([^"]+)"', text):
        size = re.search(r"(\d+) bytes \(([^)]*)\)", label)
        frames[title] = int(size.group(1)) if size else None
        if size and size.group(2) != "static":
            notes.append(f"{bare(title)}: gcc says its frame is {size.group(2)}")
    calls: dict[str, set[str]] = {}
    for source, target in re.findall(r'edge: \{ sourcename: "([^"]+)" targetname: "([^"]+)"', text):
        calls.setdefault(source, set()).add(target)
    return CallGraph(frames, calls, {}, notes, complete=False)


INSTRUCTION = re.compile(r"^\s+[0-9a-f]+:\s+(\S+)\s*(.*)$")
FUNCTION = re.compile(r"^[0-9a-f]+ <([^>]+)>:$")
TARGET = re.compile(r"^[0-9a-f]+ <([^>+]+)>$")


def register_count(listing: str) -> tuple[int, int]:
    """(32-bit core or s registers, d registers) in a register list such as {r4, r5, lr} or {d8-d15}."""
    words = count_d = 0
    for item in listing.strip("{} ").split(","):
        item = item.strip()
        span = re.fullmatch(r"([rsd])(\d+)-[rsd](\d+)", item)
        width = int(span.group(3)) - int(span.group(2)) + 1 if span else 1
        if item.startswith("d"):
            count_d += width
        else:
            words += width
    return words, count_d


def sp_decrement(mnemonic: str, operands: str) -> int | None:
    """Bytes an instruction moves sp down (0 when it does not); None when it sets sp from a register."""
    op = mnemonic.split(".")[0]
    if op in ("push", "vpush") or (op in ("stmdb", "vstmdb") and operands.startswith("sp!")):
        words, doubles = register_count(operands[operands.index("{"):])
        return 4 * words + 8 * doubles
    if op in ("sub", "subw") and re.match(r"sp,\s*(sp,\s*)?#", operands):
        return int(operands.rsplit("#", 1)[1], 0)
    if re.match(r"sp,", operands) and op in ("mov", "sub", "add") and "#" not in operands:
        return None
    if op in ("str", "strd") and re.search(r"\[sp, #-(\d+)\]!", operands):
        return int(re.search(r"\[sp, #-(\d+)\]!", operands).group(1))
    return 0


def disassembly_graph(tools, elf: Path) -> CallGraph:
    """Frames and calls of every function of a linked firmware, from its disassembly."""
    frames: dict[str, int | None] = {}
    calls: dict[str, set[str]] = {}
    unbounded: dict[str, str] = {}
    current = None
    for line in firmware.run([tools.objdump, "-d", "--no-show-raw-insn", elf]).splitlines():
        start = FUNCTION.match(line)
        if start:
            current = start.group(1)
            frames[current], calls[current] = 0, set()
            continue
        instruction = INSTRUCTION.match(line)
        if not (instruction and current):
            continue
        mnemonic, operands = instruction.group(1), re.split(r"[@;]", instruction.group(2))[0].strip()  # @: a comment
        step = sp_decrement(mnemonic, operands)
        if step is None:
            unbounded[current] = f"sets sp from a register ({mnemonic} {operands})"
        elif mnemonic in ("blx", "bx") and operands != "lr":
            unbounded[current] = f"indirect call ({mnemonic} {operands})"
        elif frames[current] is not None:
            frames[current] += step
        if current in unbounded:
            frames[current] = None
        target = TARGET.match(operands)
        if mnemonic.startswith("b") and target and target.group(1) != current:
            calls[current].add(target.group(1))           # a call, or a tail call by b/b.w
    return CallGraph(frames, calls, unbounded, [], complete=True)


def stack_figures(tools, solver, extra: tuple, elf: Path, work: Path) -> dict:
    """The solver's own worst stack (gcc), the worst with the library (gcc + disassembly), checks."""
    gcc = gcc_call_graph(tools, solver, extra, work)
    linked = disassembly_graph(tools, elf)
    inverse = f"{solver.prefix}_inverse"
    # the frame reader checked against gcc on every function of the solver's own object
    unlinked = disassembly_graph(tools, work / "graph.o")
    compared = [n for n, f in gcc.frames.items() if f is not None and bare(n) in unlinked.frames]
    disagree = [f"{bare(n)}: gcc {gcc.frames[n]}, disassembly {unlinked.frames[bare(n)]}"
                for n in compared if unlinked.frames[bare(n)] != gcc.frames[n]]
    library = sorted({bare(n) for n in gcc.frames if gcc.frames[n] is None})
    own, _ = gcc.deepest(inverse)
    total, chain = gcc.deepest(inverse, linked)
    return dict(own=own, total=total, chain=chain, compared=len(compared), disagree=disagree,
                library=library, notes=gcc.notes)


# ------------------------------------------------------------------------------ emulation

def emulated_figures(tools, solver, extra: tuple, poses_c: Path, work: Path,
                     defines: tuple = ()) -> tuple[dict, Path]:
    elf = firmware.link(tools, [solver.source, firmware.HERE / "bench_main.c", poses_c], work / "bench.elf",
                        includes=(solver.folder,), defines=solver_defines(solver) + defines, extra=extra)
    run = firmware.emulate(tools, elf, count_instructions=True)
    if run.status != 0:
        raise BenchError(f"{elf.name} for {solver.prefix} exited {run.status}:\n{run.output}")
    lines = [line.split() for line in run.output.splitlines() if line.strip()]
    if any(line[0] == "stack-overflowed-paint" for line in lines):
        raise BenchError(f"{solver.prefix}: the solver used more than the painted stack (bench_main.c PAINT_BYTES)")
    loops = [(int(n), int(t)) for word, n, t in (l for l in lines if l[0] == "loop")]
    (n1, t1), (n2, t2) = loops
    per_tick = 2 * (n2 - n1) / (t2 - t1)          # the loop runs subs + bne: two instructions a turn
    [(repeats, empty)] = [(int(r), int(t)) for word, r, t in (l for l in lines if l[0] == "empty")]
    per_pose = [(int(t) - empty) * per_tick / repeats for word, _, _, t in (l for l in lines if l[0] == "pose")]
    counts = [int(c) for word, _, c, _ in (l for l in lines if l[0] == "pose")]
    [stack] = [int(l[1]) for l in lines if l[0] == "stack"]
    return dict(per_tick=per_tick, resolution=per_tick / repeats, mean=statistics.fmean(per_pose),
                low=min(per_pose), high=max(per_pose), solutions=statistics.fmean(counts), poses=len(per_pose),
                measured_stack=stack), elf


# ------------------------------------------------------------------------------ report

def measure(tools, solver, arm_path: Path, poses: int, seed: int) -> list[dict]:
    rows = []
    with tempfile.TemporaryDirectory() as folder:
        work = Path(folder)
        poses_c = work / "poses.c"
        write_poses(arm_path, poses, seed, poses_c)
        for variant, extra in VARIANTS.items():
            sizes = object_sizes(tools, solver, extra, work)
            flash, ram = linked_footprint(tools, solver, extra, work)
            counts, elf = emulated_figures(tools, solver, extra, poses_c, work)
            stack = stack_figures(tools, solver, extra, elf, work)
            calls = firmware.run([tools.nm, "-u", work / "solver.o"]).split()
            rows.append(dict(arm=solver.stem, variant=variant, sizes=sizes, flash=flash, ram=ram, stack=stack,
                             counts=counts, calls=sorted(c for c in calls if c != "U")))
        # the double build of the same arm on the same poses (in double), the project's flags: the
        # FPU has no double precision, so its arithmetic runs in libgcc's software routines
        double = firmware.FloatSolver(stem=solver.stem, folder=solver.folder, prefix=solver.prefix[: -len("_f32")])
        poses_double = work / "poses_double.c"
        write_poses(arm_path, poses, seed, poses_double, real="double")
        counts, _ = emulated_figures(tools, double, (), poses_double, work, defines=("BENCH_SCALAR=double",))
        rows[0]["double"] = counts
    return rows


def print_table(rows: list[dict]) -> None:
    head = ("arm", "build", ".text", ".rodata", ".data", ".bss", "flash+libm", "RAM", "stack own",
            "stack+libm", "stack seen", "instr/solve", "min", "max")
    form = "{:<11} {:<19} {:>6} {:>7} {:>5} {:>4} {:>10} {:>4} {:>9} {:>10} {:>10} {:>11} {:>6} {:>6}"
    print(form.format(*head))
    for r in rows:
        s, c, k = r["sizes"], r["counts"], r["stack"]
        print(form.format(r["arm"], r["variant"], s[".text"], s[".rodata"], s[".data"], s[".bss"], r["flash"],
                          r["ram"], k["own"], k["total"], c["measured_stack"], f"{c['mean']:.0f}",
                          f"{c['low']:.0f}", f"{c['high']:.0f}"))
    print()
    for r in rows:
        c, k = r["counts"], r["stack"]
        print(f"{r['arm']} ({r['variant']}): {c['poses']} poses, {c['solutions']:.2f} solutions per pose; "
              f"calls {' '.join(r['calls'])}; library callees sized from the disassembly: {', '.join(k['library'])}")
        print(f"  deepest static chain: {' -> '.join(k['chain'])}; disassembly frames agree with gcc's for "
              f"{k['compared'] - len(k['disagree'])} of {k['compared']} solver functions")
        for line in k["notes"] + k["disagree"]:
            print(f"  note: {line}")
    print("\nfloat and double builds (-Os), instructions per full solve on the same poses:")
    print(f"{'arm':<11} {'float':>7} {'double':>7} {'float/double':>12}")
    ratios = []
    for r in rows:
        if "double" in r:
            single, double = r["counts"]["mean"], r["double"]["mean"]
            ratios.append(single / double)
            print(f"{r['arm']:<11} {single:7.0f} {double:7.0f} {single / double:11.3f}x")
    print(f"Float build at least as fast as the double build on the Cortex-M4F (instructions): "
          f"{'met' if max(ratios) <= 1.0 else 'NOT met'} (worst {max(ratios):.3f}x).")
    largest = max(r["sizes"][".text"] for r in rows)
    print(f"\nLargest .text of a solver object: {largest} bytes; goal at most {TEXT_GOAL} bytes (8 KiB): "
          f"{'met' if largest <= TEXT_GOAL else 'NOT met'}.")
    r = rows[0]["counts"]
    print(f"\nSizes in bytes. .text/.rodata/.data/.bss: the solver object alone (libm not linked). "
          f"flash+libm/RAM: what a call of inverse adds to a firmware, newlib's maths included. "
          f"stack own: gcc -fstack-usage along gcc's call graph, library calls counted 0; stack+libm: "
          f"the same with the library callees' deepest frames from the linked disassembly; stack seen: "
          f"measured on the emulated core. instr/solve: instructions per full solve on QEMU -icount "
          f"(mean, min, max over the poses; {r['per_tick']:.2f} instructions per SysTick tick measured, "
          f"resolution {r['resolution']:.0f} instructions per solve).")


def takes_given(solver: firmware.FloatSolver) -> bool:
    """Whether the solver's inverse takes a given joint's reading (a seven-axis arm)."""
    return f"{solver.prefix}_inverse(const float pose[16], float given," in solver.header.read_text(encoding="utf-8")


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--poses", type=int, default=200, help="seeded poses per arm (default 200)")
    parser.add_argument("--seed", type=int, default=7, help="seed of the poses (default 7)")
    parser.add_argument("--generated", type=Path, default=ROOT / "generated", help="the generated folder")
    args = parser.parse_args(argv)
    if args.poses < 1:
        parser.error(f"--poses must be at least 1, got {args.poses}")
    try:
        tools = firmware.find_tools(need_qemu=True)
        solvers = firmware.float_solvers(args.generated)
        if not solvers:
            raise BenchError(f"no <arm>/<arm>_ik_f32_selftest.c under {args.generated}; run 'ikgen generate' first")
        files = arm_files(ROOT / "examples")
        print(f"compiler: {tools.version()}\nemulator: {firmware.run([tools.qemu, '--version']).splitlines()[0]}, "
              f"machine {firmware.MACHINE}\nflags:    {' '.join(firmware.compile_flags())}\n")
        rows, skipped = [], []
        for solver in solvers:
            if takes_given(solver):
                skipped.append(solver.stem)
                continue
            if solver.stem not in files:
                raise BenchError(f"no arm file in examples/ named '{solver.stem}' (needed for its poses)")
            rows += measure(tools, solver, files[solver.stem], args.poses, args.seed)
    except (firmware.ToolsMissing, firmware.FirmwareError, BenchError) as error:
        print(f"bench_mcu: {error}", file=sys.stderr)
        return 2
    print_table(rows)
    if skipped:
        print(f"not measured: {', '.join(skipped)} (a seven-axis solver takes the given joint's reading as an "
              f"argument, which the firmware mains here do not pass; tests/test_mcu.py covers its self-test)")
    return 0


if __name__ == "__main__":
    sys.exit(main())
