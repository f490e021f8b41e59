"""Cross-build and emulate firmware for a Cortex-M4F: what tests/test_mcu.py and
benchmarks/bench_mcu.py share.

The target is QEMU's ``mps2-an386`` board (an Arm MPS2 FPGA image with a Cortex-M4 core and its
single-precision FPU). Firmware is the generated float solver plus a C main from this folder,
linked with our own start-up (startup.c, semihost.c, mps2_an386.ld) against newlib's libm/libc,
and run by ``qemu-system-arm`` with semihosting: the firmware prints through the debug host and
its main's return value becomes QEMU's exit status.

Everything comes from Debian packages: gcc-arm-none-eabi, libnewlib-arm-none-eabi and
qemu-system-arm. ``find_tools`` raises ``ToolsMissing`` with the reason and the install command
when any is absent, so callers can skip (tests) or stop with one clear line (benchmarks).
"""

from __future__ import annotations

import re
import shutil
import subprocess
import tempfile
from dataclasses import dataclass
from pathlib import Path

HERE = Path(__file__).resolve().parent
STARTUP = (HERE / "startup.c", HERE / "semihost.c")
LINKER_SCRIPT = HERE / "mps2_an386.ld"
MACHINE = "mps2-an386"

# The core and its FPU (the flags the project documents for a Cortex-M4F), and the optimisation.
CPU_FLAGS = ("-mcpu=cortex-m4", "-mthumb", "-mfpu=fpv4-sp-d16", "-mfloat-abi=hard")
OPTIMISE = ("-Os",)
# Warnings that matter on a single-precision FPU: a double promotion becomes slow software maths.
WARNINGS = ("-std=c99", "-Wall", "-Wextra", "-Wdouble-promotion", "-Werror")
# Each function and object in its own section, so --gc-sections keeps only what is called.
SECTIONS = ("-ffunction-sections", "-fdata-sections")
LINK = ("-nostartfiles", "-Wl,--gc-sections", "-lm", "-lc", "-lgcc")

INSTALL = "apt-get install -y gcc-arm-none-eabi libnewlib-arm-none-eabi qemu-system-arm"


class ToolsMissing(Exception):
    """The cross toolchain, newlib or QEMU (with the board) is not installed; the text says which."""


class FirmwareError(Exception):
    """A build or an emulator run failed; the text holds the command and its output."""


@dataclass(frozen=True)
class Tools:
    cc: str
    size: str
    nm: str
    objdump: str
    readelf: str
    qemu: str | None      # None when only building was asked for

    def version(self) -> str:
        return run([self.cc, "--version"]).splitlines()[0]


@dataclass(frozen=True)
class FloatSolver:
    """One arm's committed float solver: generated/<stem>/<prefix>.c, .h and _selftest.c."""
    stem: str
    folder: Path
    prefix: str

    @property
    def source(self) -> Path:
        return self.folder / f"{self.prefix}.c"

    @property
    def header(self) -> Path:
        return self.folder / f"{self.prefix}.h"

    @property
    def selftest(self) -> Path:
        return self.folder / f"{self.prefix}_selftest.c"


def float_solvers(generated: Path) -> list[FloatSolver]:
    """Every arm folder under ``generated`` that holds a float self-test, sorted by name."""
    out = []
    for selftest in sorted(generated.glob("*/*_ik_f32_selftest.c")):
        prefix = selftest.name[: -len("_selftest.c")]
        out.append(FloatSolver(stem=selftest.parent.name, folder=selftest.parent, prefix=prefix))
    return out


def run(command: list, timeout: float = 300) -> str:
    """stdout of ``command``; FirmwareError with the command and its output when it fails."""
    words = [str(word) for word in command]
    try:
        done = subprocess.run(words, capture_output=True, text=True, timeout=timeout)
    except subprocess.TimeoutExpired as expired:
        raise FirmwareError(f"`{' '.join(words)}` did not finish within {timeout} s") from expired
    if done.returncode != 0:
        raise FirmwareError(f"`{' '.join(words)}` failed (exit {done.returncode}):\n"
                            f"{done.stdout}{done.stderr}".rstrip())
    return done.stdout


def find_tools(need_qemu: bool = True) -> Tools:
    """The cross tools on PATH, checked to link against newlib (and QEMU to offer the board)."""
    names = {"cc": "arm-none-eabi-gcc", "size": "arm-none-eabi-size", "nm": "arm-none-eabi-nm",
             "objdump": "arm-none-eabi-objdump", "readelf": "arm-none-eabi-readelf"}
    found = {key: shutil.which(name) for key, name in names.items()}
    absent = [names[key] for key, path in found.items() if path is None]
    if absent:
        raise ToolsMissing(f"{', '.join(absent)} not found: install the Arm cross toolchain ({INSTALL})")
    tools = Tools(qemu=None, **found)
    check_newlib(tools)
    if need_qemu:
        qemu = shutil.which("qemu-system-arm")
        if qemu is None:
            raise ToolsMissing(f"qemu-system-arm not found: install QEMU ({INSTALL})")
        machines = run([qemu, "-machine", "help"], timeout=60)
        if not re.search(rf"^{re.escape(MACHINE)}\s", machines, re.M):
            raise ToolsMissing(f"{qemu} has no '{MACHINE}' machine (a Cortex-M4F board); "
                               f"its machines: {', '.join(line.split()[0] for line in machines.splitlines()[1:] if line.strip())}")
        tools = Tools(qemu=qemu, **found)
    return tools


def check_newlib(tools: Tools) -> None:
    """Link a one-line program against libm: fails when newlib (libnewlib-arm-none-eabi) is absent."""
    with tempfile.TemporaryDirectory() as folder:
        probe = Path(folder) / "probe.c"
        probe.write_text("#include <math.h>\nint main(void);\n"
                         "int main(void) { volatile float y = 1.0f; return (int)atan2f(y, 2.0f); }\n")
        try:
            link(tools, [probe], Path(folder) / "probe.elf")
        except FirmwareError as error:
            raise ToolsMissing(f"arm-none-eabi-gcc cannot build against newlib ({INSTALL}):\n{error}") from error


def compile_flags(extra: tuple = ()) -> list[str]:
    return [*CPU_FLAGS, *OPTIMISE, *WARNINGS, *SECTIONS, *extra]


def link(tools: Tools, sources: list[Path], elf: Path, includes: tuple = (), defines: tuple = (),
         extra: tuple = ()) -> Path:
    """Compile ``sources`` with our start-up into ``elf`` for the board; returns ``elf``."""
    command = [tools.cc, *compile_flags(extra), *(f"-I{path}" for path in (*includes, HERE)),
               *(f"-D{define}" for define in defines), *sources, *STARTUP,
               "-T", LINKER_SCRIPT, *LINK, "-o", elf]
    run(command)
    return elf


def selftest_firmware(tools: Tools, solver: FloatSolver, out: Path, extra: tuple = ()) -> Path:
    """The solver, its self-test and selftest_main.c linked into ``out/<prefix>_selftest.elf``."""
    out.mkdir(parents=True, exist_ok=True)
    return link(tools, [solver.source, solver.selftest, HERE / "selftest_main.c"],
                out / f"{solver.prefix}_selftest.elf", includes=(solver.folder,),
                defines=(f"IK_PREFIX={solver.prefix}",), extra=extra)


@dataclass(frozen=True)
class Emulated:
    status: int           # QEMU's exit status: the firmware's main() return value
    output: str           # what the firmware wrote through semihosting (and QEMU's own messages)


def emulate(tools: Tools, elf: Path, count_instructions: bool = False, timeout: float = 300) -> Emulated:
    """Run ``elf`` on the board. With ``count_instructions``, QEMU's -icount shift=0 makes the
    virtual clock advance exactly 1 ns per executed guest instruction, so the board's timers
    count instructions (at the timer's resolution)."""
    if tools.qemu is None:
        raise FirmwareError("emulate needs QEMU: call find_tools(need_qemu=True)")
    command = [tools.qemu, "-machine", MACHINE, "-nographic", "-monitor", "none", "-serial", "none",
               "-semihosting-config", "enable=on,target=native", "-kernel", str(elf)]
    if count_instructions:
        command += ["-icount", "shift=0"]
    try:
        done = subprocess.run(command, capture_output=True, text=True, timeout=timeout)
    except subprocess.TimeoutExpired as expired:
        raise FirmwareError(f"`{' '.join(command)}` did not finish within {timeout} s "
                            f"(the firmware hung)") from expired
    return Emulated(status=done.returncode, output=done.stdout + done.stderr)
