"""The committed C solvers (generated/) from other compilers and from C++.

tests/test_c_backend.py already compiles freshly generated C with gcc and clang as C99 under strict
warnings, and the .c files with g++ as C++ (compiler default standard). This file adds, for every
header under generated/ (double and float, so a new demo arm is covered without edits):
- a C++17 program that includes the header, calls forward and inverse, and links against the
  solver compiled as C: g++ and clang++ with -std=c++17 -Wall -Wextra -Wpedantic -Werror; this fails
  to link when the header lacks its extern "C" block (C++ would look for mangled names);
- the solver's .c files compiled as C++17 by clang++ and by g++ with the explicit -std=c++17.

Outside references: ISO/IEC 14882:2017 (C++17) 10.5 [dcl.link], linkage specifications (a C
function is declared to C++ with extern "C"); ISO/IEC 9899:1999 (C99). The compilers themselves
are the judges. Skipped with a reason when clang/clang++ are not installed (apt-get install clang).
"""

from __future__ import annotations

import math
import re
import shutil
import subprocess
from pathlib import Path

import pytest

from helpers import ROOT
from ikgen.generate import load_module

GENERATED = ROOT / "generated"
HEADERS = sorted(GENERATED.glob("*/*_ik.h")) + sorted(GENERATED.glob("*/*_ik_f32.h"))
HEADER_IDS = [h.stem for h in HEADERS]
CXX17 = ["-std=c++17", "-Wall", "-Wextra", "-Wpedantic", "-Werror"]
C99 = ["-std=c99", "-Wall", "-Wextra", "-Wpedantic", "-Werror"]
# (C++ compiler, the C compiler whose objects it links against)
PAIRS = {"g++": "gcc", "clang++": "clang"}

# A C++17 caller of the C solver. Readings are passed in (-DCALLER_READINGS=...), the solver's names
# are built from CALLER_PREFIX and CALLER_UPPER; it exits 0 when inverse(forward(q)) finds a solution whose
# own forward pose matches within 1e-3 (relative to the largest position entry).
CXX_CALLER = r"""
#include HEADER_FILE

#include <array>
#include <cmath>
#include <cstdio>

#define CALLER_JOIN(a, b) a##b
#define CALLER_CAT(a, b) CALLER_JOIN(a, b)
#define CALLER_NAME(suffix) CALLER_CAT(CALLER_PREFIX, suffix)
#define CALLER_MACRO(suffix) CALLER_CAT(CALLER_UPPER, suffix)

using real = CALLER_SCALAR;

int main()
{
    const std::array<real, CALLER_MACRO(_JOINTS)> readings{CALLER_READINGS};
    std::array<real, 16> pose{};
    CALLER_NAME(_forward)(readings.data(), pose.data());
    std::array<CALLER_NAME(_solution), CALLER_MACRO(_MAX_SOLUTIONS)> solutions{};
    CALLER_NAME(_status) status{};
    const int count = CALLER_NAME(_inverse)(pose.data(), CALLER_GIVEN nullptr, CALLER_MACRO(_LIMITS_IGNORE), solutions.data(), &status);
    real scale = 1;
    for (int k = 3; k < 12; k += 4) {
        scale = std::fmax(scale, std::fabs(pose[static_cast<std::size_t>(k)]));
    }
    for (int s = 0; s < count; ++s) {
        std::array<real, 16> again{};
        CALLER_NAME(_forward)(solutions[static_cast<std::size_t>(s)].joints, again.data());
        real worst = 0;
        for (std::size_t k = 0; k < 12; ++k) {
            worst = std::fmax(worst, std::fabs(again[k] - pose[k]) / (k % 4 == 3 ? scale : real(1)));
        }
        if (worst < real(1e-3)) {
            std::printf("solutions %d, round trip ok\n", count);
            return 0;
        }
    }
    std::printf("solutions %d, status %d, no round trip\n", count, static_cast<int>(status));
    return 1;
}
"""


def need(compiler: str) -> str:
    path = shutil.which(compiler)
    if path is None:
        if "clang" in compiler:
            pytest.skip(f"{compiler} not installed: install it (apt-get install clang) to run the clang checks")
        pytest.fail(f"{compiler} not installed: these tests need gcc and g++ (apt-get install gcc g++)")
    return path


def compile_ok(command: list, cwd: Path) -> subprocess.CompletedProcess:
    done = subprocess.run([str(c) for c in command], cwd=cwd, capture_output=True, text=True, timeout=300)
    assert done.returncode == 0, f"`{' '.join(str(c) for c in command)}` failed:\n{done.stdout}{done.stderr}"
    return done


def readings_for(header: Path) -> str:
    """Generic readings (away from the zero reading, where wrists usually align): 0.3 to 0.8 of a
    radian per joint, in the arm's angle unit (the middle of the limits where that lies outside
    them, as for a slide's stroke), taken with the joint count from the constants of
    the arm's committed Python solver (ANGLE_UNIT, JOINT_COUNT; docs/solvers.md)."""
    stem = header.parent.name
    python = load_module((header.parent / f"{stem}_ik.py").read_text(encoding="utf-8"), f"{stem}_constants")
    per_radian = 180.0 / math.pi if python.ANGLE_UNIT == "deg" else 1.0
    suffix = "f" if header.stem.endswith("_f32") else ""
    values = []
    for j, (low, high) in enumerate(python.JOINT_LIMITS):
        value = (0.3 + 0.1 * j) * per_radian
        values.append(value if low < value < high else 0.5 * (low + high))    # a slide: mid-stroke
    return ",".join(f"{v!r}{suffix}" for v in values)


def given_argument(header: Path) -> str:
    """The argument a solver of an arm with a given joint takes after the pose (that joint's reading
    from the caller's readings, docs/solvers.md), or nothing."""
    found = re.search(r"#define \w+_GIVEN_JOINT (\d+)", header.read_text(encoding="utf-8"))
    return f"readings[{int(found.group(1)) - 1}]," if found else ""


def test_headers_found():
    assert len(HEADERS) >= 6, f"expected double and float headers of the demo arms under {GENERATED}"


@pytest.mark.parametrize("cxx", list(PAIRS))
@pytest.mark.parametrize("header", HEADERS, ids=HEADER_IDS)
def test_cxx17_program_calls_the_c_solver(header, cxx, tmp_path):
    """The header in a C++17 program (strict warnings as errors), linked to the solver built as C99
    by the matching C compiler, solves a pose it made with forward."""
    cxx_path, cc_path = need(cxx), need(PAIRS[cxx])
    prefix = header.stem
    compile_ok([cc_path, *C99, "-O2", "-I", header.parent, "-c", header.with_suffix(".c"), "-o", "solver.o"], tmp_path)
    caller = tmp_path / "caller.cpp"
    caller.write_text(CXX_CALLER, encoding="utf-8")
    real = "float" if prefix.endswith("_f32") else "double"
    compile_ok([cxx_path, *CXX17, "-O2", "-I", header.parent, f'-DHEADER_FILE="{header.name}"',
                f"-DCALLER_PREFIX={prefix}", f"-DCALLER_UPPER={prefix.upper()}", f"-DCALLER_SCALAR={real}",
                f"-DCALLER_READINGS={readings_for(header)}", f"-DCALLER_GIVEN={given_argument(header)}",
                "-c", caller, "-o", "caller.o"], tmp_path)
    compile_ok([cxx_path, "caller.o", "solver.o", "-lm", "-o", "caller"], tmp_path)
    ran = subprocess.run([tmp_path / "caller"], capture_output=True, text=True, timeout=60)
    assert ran.returncode == 0 and "round trip ok" in ran.stdout, ran.stdout + ran.stderr


@pytest.mark.parametrize("cxx", list(PAIRS))
@pytest.mark.parametrize("header", HEADERS, ids=HEADER_IDS)
def test_c_sources_compile_as_cxx17(header, cxx, tmp_path):
    """The solver and its self-test, compiled as C++17 with every warning an error."""
    cxx_path = need(cxx)
    sources = [header.with_suffix(".c"), header.parent / f"{header.stem}_selftest.c"]
    compile_ok([cxx_path, "-x", "c++", *CXX17, "-O2", "-I", header.parent, "-c", *sources], tmp_path)
    assert len(list(tmp_path.glob("*.o"))) == len(sources)


def test_cxx_caller_needs_the_extern_c_block(tmp_path):
    """The link check can fail: a C++ declaration of the same function without extern "C"
    (C++17 10.5) asks for a mangled name that the C object does not define."""
    cxx_path, cc_path = need("g++"), need("gcc")
    header = HEADERS[0]
    prefix = header.stem
    compile_ok([cc_path, *C99, "-I", header.parent, "-c", header.with_suffix(".c"), "-o", "solver.o"], tmp_path)
    (tmp_path / "mangled.cpp").write_text(
        f"void {prefix}_forward(const double *joints, double *pose);\n"
        f"int main() {{ double q[16] = {{}}, p[16]; {prefix}_forward(q, p); return p[15] == 1.0 ? 0 : 1; }}\n",
        encoding="utf-8")
    compile_ok([cxx_path, *CXX17, "-c", "mangled.cpp", "-o", "mangled.o"], tmp_path)
    done = subprocess.run([cxx_path, "mangled.o", "solver.o", "-lm", "-o", "mangled"], cwd=tmp_path,
                          capture_output=True, text=True, timeout=120)
    assert done.returncode != 0 and "undefined reference" in done.stderr, done.stderr
