"""The float solvers on a microcontroller: each committed float self-test, cross-compiled for a
Cortex-M4F and run on an emulated board, and the self-test's embedded vectors checked on the host.

Covered arms: every generated/<arm>/<arm>_ik_f32_selftest.c (globbed, so a new demo arm is covered
without editing this file), with its arm file found in examples/ by name.

On the target (tools/mcu/: our start-up, linker script and mains; tools/mcu/firmware.py builds
and runs): arm-none-eabi-gcc -mcpu=cortex-m4 -mthumb -mfpu=fpv4-sp-d16 -mfloat-abi=hard -Os with
newlib's libm, on QEMU's mps2-an386 board (Cortex-M4 with its single-precision FPU), semihosting
for the output and the exit status. Skipped, with the reason, when the toolchain, newlib or QEMU
is missing (Debian: gcc-arm-none-eabi, libnewlib-arm-none-eabi, qemu-system-arm).

Outside references used here (named again beside each check; section numbers as recalled, not
re-checked against a copy):
- Arm, "ARMv7-M Architecture Reference Manual" (DDI 0403E): B1.5 exceptions (a fault in a
  handler-less configuration escalates to HardFault), B3.2.20 CPACR (the FPU is off until enabled).
- Arm, "Run-time ABI for the Arm Architecture" / "Addenda to the ABI": the build attributes
  Tag_FP_arch and Tag_ABI_VFP_args, and the __aeabi_d* helper names of software double arithmetic.
- IEEE 754-2008, 3.6 table 3.5: binary32 has a 24-bit significand, unit roundoff 2^-24 ~ 6e-8.
- The standard and modified DH link transforms, Spong, Hutchinson, Vidyasagar, *Robot Modeling and
  Control*, 1st ed. (2006), sec. 3.2, and Craig, *Introduction to Robotics*, 3rd ed. (2005),
  sec. 3.5 (from memory): the host-side forward kinematics below is written from them with scipy's
  Rotation and numpy only, not with ikgen's own kinematics.
"""

from __future__ import annotations

import math
import re
import sys
from pathlib import Path

import numpy as np
import pytest
from scipy.spatial.transform import Rotation

from helpers import EXAMPLES, ROOT
from ikgen.verify import given_of
from ikgen.armfile import load_arm
from ikgen.backends.common import identifier
from ikgen.errors import IkgenError
from ikgen.generate import load_module

sys.path.insert(0, str(ROOT / "tools" / "mcu"))
import firmware  # noqa: E402  (tools/mcu/firmware.py: build and emulate)

GENERATED = ROOT / "generated"
SOLVERS = firmware.float_solvers(GENERATED)
SOLVER_IDS = [solver.stem for solver in SOLVERS]
# The flags alone, and the same with -fno-math-errno (sqrtf becomes the FPU's vsqrt.f32).
VARIANTS = {"Os": (), "Os-fno-math-errno": ("-fno-math-errno",)}
SELFTEST_LINE = re.compile(r"^selftest failures: (\d+)$", re.M)


@pytest.fixture(scope="module")
def tools():
    try:
        return firmware.find_tools(need_qemu=True)
    except firmware.ToolsMissing as missing:
        pytest.skip(f"emulated Cortex-M4F runs skipped: {missing}")


def emulated_failures(run: firmware.Emulated) -> int:
    match = SELFTEST_LINE.search(run.output)
    assert match, f"the firmware printed no 'selftest failures: N' line (exit {run.status}):\n{run.output}"
    return int(match.group(1))


def test_generated_folder_has_float_selftests():
    """The glob finds the demo arms' float self-tests (the emulated tests are not vacuous)."""
    assert len(SOLVERS) >= 3, f"expected the demo arms' *_ik_f32_selftest.c under {GENERATED}, found {SOLVER_IDS}"
    for solver in SOLVERS:
        for path in (solver.source, solver.header, solver.selftest):
            assert path.is_file(), f"{path} is missing beside {solver.selftest}"


# ------------------------------------------------------------------------------ on the emulated core

@pytest.mark.parametrize("variant", list(VARIANTS))
@pytest.mark.parametrize("solver", SOLVERS, ids=SOLVER_IDS)
def test_float_selftest_passes_on_emulated_cortex_m4f(tools, solver, variant, tmp_path):
    """The committed float solver and its self-test, built for the Cortex-M4F and run on QEMU's
    mps2-an386: zero failed checks, and exit status 0 from the firmware's main."""
    elf = firmware.selftest_firmware(tools, solver, tmp_path, extra=VARIANTS[variant])
    run = firmware.emulate(tools, elf)
    failures = emulated_failures(run)
    assert failures == 0 and run.status == 0, \
        f"{solver.prefix} ({variant}) on {firmware.MACHINE}: {failures} failed checks, exit {run.status}\n{run.output}"


WRONG_ATAN2F = """\
/* A solver whose every atan2f is off by 0.05 rad: the self-test must catch it on the target. */
#include <math.h>
#undef atan2f
float atan2f(float y, float x);
float ikgen_wrong_atan2f(float y, float x);
float ikgen_wrong_atan2f(float y, float x)
{
    return atan2f(y, x) + 0.05f;
}
"""


def test_emulated_selftest_detects_a_wrong_solver(tools, tmp_path):
    """The check can fail: the first arm's solver with atan2f renamed (-D) to a version off by
    0.05 rad reports failures and a non-zero exit status on the target."""
    solver = SOLVERS[0]
    wrong = tmp_path / "wrong_atan2f.c"
    wrong.write_text(WRONG_ATAN2F, encoding="utf-8")
    elf = firmware.link(tools, [solver.source, solver.selftest, firmware.HERE / "selftest_main.c", wrong],
                        tmp_path / "wrong.elf", includes=(solver.folder,),
                        defines=(f"IK_PREFIX={solver.prefix}", "atan2f=ikgen_wrong_atan2f"))
    run = firmware.emulate(tools, elf)
    failures = emulated_failures(run)
    assert failures > 0 and run.status == 1, f"{failures} failures, exit {run.status}:\n{run.output}"


CRASHING_MAIN = """\
/* A main that stops on an undefined instruction (ARMv7-M ARM B1.5: UsageFault, escalated to
 * HardFault when the UsageFault handler is not enabled). */
int main(void);
int main(void)
{
    __builtin_trap();
}
"""


def test_a_fault_on_the_target_is_not_a_pass(tools, tmp_path):
    """A firmware that faults says so and exits with 120 + the HardFault number (3): a crash of
    the solver could never read as zero failures."""
    main = tmp_path / "crash.c"
    main.write_text(CRASHING_MAIN, encoding="utf-8")
    run = firmware.emulate(tools, firmware.link(tools, [main], tmp_path / "crash.elf"))
    assert run.status == 123 and "fault: HardFault" in run.output, f"exit {run.status}:\n{run.output}"


def test_firmware_uses_the_single_precision_fpu(tools, tmp_path):
    """The build really targets the FPU: the Arm build attributes say VFPv4-D16 with arguments in
    VFP registers (Addenda to the Arm ABI, Tag_FP_arch, Tag_ABI_VFP_args), and no software
    double-precision helper (__aeabi_d*, Run-time ABI for the Arm Architecture) is linked:
    a double promotion in the float solver would pull them in."""
    solver = SOLVERS[0]
    elf = firmware.selftest_firmware(tools, solver, tmp_path)
    attributes = firmware.run([tools.readelf, "-A", elf])
    assert re.search(r"Tag_FP_arch: VFPv4-D16", attributes), attributes
    assert re.search(r"Tag_ABI_VFP_args: VFP registers", attributes), attributes
    symbols = firmware.run([tools.nm, elf]).split()
    assert f"{solver.prefix}_inverse" in symbols and "atan2f" in symbols
    assert not [s for s in symbols if s.startswith("__aeabi_d")], "software double arithmetic linked"


# ------------------------------------------------------------------------------ the vectors, on the host

def arm_files_by_folder() -> dict[str, Path]:
    """{generated folder name: arm file in examples/}: every arm file there, named the way
    `ikgen generate` names its folder (files that are not arm files are passed over)."""
    out = {}
    for path in sorted(EXAMPLES.iterdir()):
        if path.suffix not in (".toml", ".json"):
            continue
        try:
            arm = load_arm(path)
        except IkgenError:
            continue
        out[identifier(arm.name)] = path
    return out


def screw(axis: str, turn: float, shift: float) -> np.ndarray:
    """Rotation by ``turn`` about ``axis`` and translation ``shift`` along it (they commute)."""
    out = np.eye(4)
    out[:3, :3] = Rotation.from_euler(axis, turn).as_matrix()
    out[:3, 3] = np.eye(3)["xyz".index(axis)] * shift
    return out


def textbook_pose(arm, readings) -> np.ndarray:
    """Tool pose for readings: base, the DH links ([SHV] 3.2: Rz Tz Tx Rx; [Craig] 3.5: Rx Tx Rz Tz),
    tool. Reading to joint variable: theta + offset + direction * reading (docs/arm-file.md)."""
    pose = np.array(arm.base, dtype=float)
    for joint, reading in zip(arm.joints, readings):
        variable = float(joint.offset) + joint.direction * reading * (arm.angle_scale if joint.revolute else 1.0)
        theta = float(joint.theta) + (variable if joint.revolute else 0.0)
        d = float(joint.d) + (0.0 if joint.revolute else variable)
        z, x = screw("z", theta, d), screw("x", float(joint.alpha), float(joint.a))
        pose = pose @ (z @ x if arm.convention == "standard" else x @ z)
    return pose @ np.array(arm.tool, dtype=float)


ARRAY = re.compile(r"\b(\w+)\s*\[\s*(\d+)\s*\]\s*\[\s*(\d+)\s*\]\s*=\s*\{(.*?)\};", re.S)
NUMBER = re.compile(r"[-+]?(?:\d+\.\d*|\.\d+|\d+)(?:[eE][-+]?\d+)?")


def embedded_vectors(path: Path, dof: int) -> tuple[np.ndarray, np.ndarray]:
    """(poses (N, 4, 4), joint readings (N, dof)) from the self-test's two initialised 2-D arrays:
    the one with 12 columns (the top three rows of each pose) and the one with `dof` columns.
    Each literal rounded to binary32, as the target's compiler reads it."""
    arrays = {}
    for name, rows, columns, body in ARRAY.findall(path.read_text(encoding="utf-8")):
        values = np.array([float(v) for v in NUMBER.findall(body)], dtype=np.float32)
        assert values.size == int(rows) * int(columns), f"{path.name}: {name} has {values.size} numbers"
        arrays[int(columns)] = values.reshape(int(rows), int(columns)).astype(np.float64)
    assert 12 in arrays and dof in arrays, \
        f"{path.name}: expected initialised arrays [N][12] (poses) and [N][{dof}] (readings); the " \
        f"self-test's layout changed, update embedded_vectors()"
    poses = np.tile(np.eye(4), (len(arrays[12]), 1, 1))
    poses[:, :3, :] = arrays[12].reshape(-1, 3, 4)
    assert len(arrays[dof]) == len(poses)
    return poses, arrays[dof]


def reading_gaps(found: np.ndarray, wanted: np.ndarray, arm) -> np.ndarray:
    """Per joint, how far ``found`` is from ``wanted``: revolute joints in radians modulo a full
    turn, prismatic joints as a fraction of the arm's scale."""
    revolute = np.array([j.revolute for j in arm.joints])
    gap = np.abs(found - wanted) * np.where(revolute, arm.angle_scale if arm.angle_unit == "deg" else 1.0,
                                            1.0 / arm.reach_scale())
    return np.where(revolute, np.abs((gap + math.pi) % (2 * math.pi) - math.pi), gap)


# Bounds for vectors stored as binary32 (unit roundoff u = 2^-24 ~ 6e-8, IEEE 754-2008 table 3.5):
# each reading carries at most u*|q| <= 2e-7 rad, each pose entry u relative; through six links
# of an arm of scale L that moves the tool by a few 1e-7 L and turns it by a few 1e-7 rad. 5e-6
# (of L, rad, rotation entries) leaves a margin of ten; the target's own tolerances (1e-4 and
# about 2e-2 rad) are far wider, so a vector that passes here cannot be what fails there.
VECTOR_BOUND = 5e-6
# Readings recovered by the double solver from a rounded pose: the rounding divided by the
# conditioning (the generator keeps poses farther than 1e-2 from the singular set): 1e-4 rad.
READING_BOUND = 1e-4


def vector_problems(arm, double, poses: np.ndarray, readings: np.ndarray) -> tuple[list[str], dict]:
    """(what is wrong with the vectors, the worst gaps seen): each pose a rigid transform, each
    reading within the limits and giving its pose by the textbook forward kinematics, and the
    double solver returning the readings among its solutions, not flagged singular."""
    problems: list[str] = []
    worst = {"position": 0.0, "rotation": 0.0, "reading": 0.0}
    scale = arm.reach_scale()
    limits = arm.limits_in_readings()
    for i, (pose, wanted) in enumerate(zip(poses, readings)):
        rigid = np.abs(pose[:3, :3] @ pose[:3, :3].T - np.eye(3)).max()
        if rigid > VECTOR_BOUND:
            problems.append(f"vector {i}: rotation not orthonormal (R R^T - I up to {rigid:.3g})")
        if not np.all((wanted >= limits[:, 0]) & (wanted <= limits[:, 1])):
            problems.append(f"vector {i}: readings {wanted} outside the joint limits")
        reference = textbook_pose(arm, wanted)
        position = np.abs(reference[:3, 3] - pose[:3, 3]).max() / scale
        rotation = np.abs(reference[:3, :3] - pose[:3, :3]).max()
        worst["position"], worst["rotation"] = max(worst["position"], position), max(worst["rotation"], rotation)
        if position > VECTOR_BOUND or rotation > VECTOR_BOUND:
            problems.append(f"vector {i}: the readings' pose is {position:.3g} of the scale and "
                            f"{rotation:.3g} per rotation entry from the embedded pose")
        solutions = double.inverse(pose.tolist(), *given_of(arm, wanted))
        if not solutions:
            problems.append(f"vector {i}: the double solver finds no solution of the embedded pose")
            continue
        gaps = [reading_gaps(np.array(s.joints), wanted, arm).max() for s in solutions]
        best = int(np.argmin(gaps))
        worst["reading"] = max(worst["reading"], gaps[best])
        if gaps[best] > READING_BOUND:
            problems.append(f"vector {i}: the double solver's nearest solution is {gaps[best]:.3g} rad "
                            f"from the embedded readings")
        elif solutions[best].singular:
            problems.append(f"vector {i}: the double solver flags the embedded readings singular")
    return problems, worst


def load_double_solver(solver: firmware.FloatSolver):
    """The arm (from examples/) and the committed double solver generated/<arm>/<arm>_ik.py."""
    arm_files = arm_files_by_folder()
    assert solver.stem in arm_files, f"no arm file in {EXAMPLES} is named '{solver.stem}' (have {sorted(arm_files)})"
    arm = load_arm(arm_files[solver.stem])
    double_path = solver.folder / f"{solver.stem}_ik.py"
    double = load_module(double_path.read_text(encoding="utf-8"), f"{solver.stem}_double_for_vectors")
    return arm, double


@pytest.mark.parametrize("solver", SOLVERS, ids=SOLVER_IDS)
def test_selftest_vectors_agree_with_the_double_solver(solver):
    """What the target's self-test takes for granted, checked in double precision on the host,
    with the vectors rounded to binary32 as the target holds them (see vector_problems)."""
    arm, double = load_double_solver(solver)
    poses, readings = embedded_vectors(solver.selftest, arm.dof)
    assert len(poses) >= 50, f"{solver.selftest.name}: only {len(poses)} vectors"
    problems, worst = vector_problems(arm, double, poses, readings)
    print(f"{solver.stem}: {len(poses)} vectors; worst gaps: FK {worst['position']:.2g} of the arm's scale, "
          f"{worst['rotation']:.2g} per rotation entry; double solver {worst['reading']:.2g} rad")
    assert not problems, f"{solver.selftest.name}: {len(problems)} problems:\n" + "\n".join(problems[:10])


def test_vector_check_rejects_wrong_vectors():
    """The host check can fail: one reading moved by 0.1 (deg or rad) and one pose moved off its
    readings are both reported."""
    solver = SOLVERS[0]
    arm, double = load_double_solver(solver)
    poses, readings = embedded_vectors(solver.selftest, arm.dof)
    poses, readings = poses[:3].copy(), readings[:3].copy()
    readings[0, 1] += 0.1
    poses[2, :3, :3] = poses[2, :3, :3] @ Rotation.from_euler("z", 0.01).as_matrix()
    problems, _ = vector_problems(arm, double, poses, readings)
    assert any(p.startswith("vector 0: the readings' pose") for p in problems), problems
    assert any(p.startswith("vector 0: the double solver") for p in problems), problems
    assert not any(p.startswith("vector 1") for p in problems), problems
    assert any(p.startswith("vector 2: the readings' pose") for p in problems), problems


# ------------------------------------------------------------------------------ the benchmark's stack reader

@pytest.fixture(scope="module")
def cross_tools():
    try:
        return firmware.find_tools(need_qemu=False)
    except firmware.ToolsMissing as missing:
        pytest.skip(f"cross-compiler checks skipped: {missing}")


def bench_mcu():
    sys.path.insert(0, str(ROOT / "benchmarks"))
    import bench_mcu as module
    return module


@pytest.mark.parametrize(("mnemonic", "operands", "bytes_down"), [
    ("push", "{r4, r5, lr}", 12),                                   # 4 bytes per core register
    ("stmdb", "sp!, {r4, r5, r6, r7, r8, r9, sl, fp, lr}", 36),
    ("vpush", "{d8-d15}", 64),                                      # 8 bytes per d register
    ("vpush", "{s16-s19}", 16),                                     # 4 bytes per s register
    ("sub", "sp, #364", 364), ("sub.w", "sp, sp, #564", 564),
    ("str.w", "sl, [sp, #-4]!", 4),                                 # pre-indexed store with write-back
    ("add", "r3, sp, #360", 0), ("vstmdb", "r0!, {s15}", 0),          # sp read, or another base register
    ("mov", "sp, r7", None),                                        # sp from a register: no static bound
])
def test_bench_frame_reader_on_single_instructions(mnemonic, operands, bytes_down):
    """How far each instruction moves sp down, by the instruction pages of the ARMv7-M
    Architecture Reference Manual (PUSH, STMDB, VPUSH, SUB SP minus immediate, STR pre-indexed)."""
    assert bench_mcu().sp_decrement(mnemonic, operands) == bytes_down


@pytest.mark.parametrize("solver", SOLVERS, ids=SOLVER_IDS)
def test_bench_frame_reader_agrees_with_gcc(cross_tools, solver, tmp_path):
    """The benchmark sizes library frames from disassembly; on the solver's own object that reader
    must give exactly gcc's -fstack-usage figure for every function gcc sizes."""
    bench = bench_mcu()
    gcc = bench.gcc_call_graph(cross_tools, solver, (), tmp_path)
    read = bench.disassembly_graph(cross_tools, tmp_path / "graph.o")
    sized = {bench.bare(name): frame for name, frame in gcc.frames.items() if frame is not None}
    assert f"{solver.prefix}_inverse" in sized and len(sized) >= 5, sized
    assert {name: read.frames.get(name) for name in sized} == sized
