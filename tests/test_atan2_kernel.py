"""The generated C's optional atan2 kernel (templates/c_atan2.c.j2, on with -DIKGEN_FAST_ATAN2):
accuracy against mpmath, C99 special cases, its constants, and benchtop6's solver built with it.

Outside references used here (named again beside each check):
- mpmath's atan2 at 100 bits (tools/atan2/kernel_check.py): the exact value each result is
  measured against, in ulps of its binade (IEEE 754-2008 3.3: binary64 p = 53, emin = -1022;
  binary32 p = 24, emin = -126);
- ISO/IEC 9899:1999 (C99) Annex F.9.1.4: atan2 of signed zeros, infinities and NaN; 7.12.3.6
  signbit and 7.12.11.1 copysign (the only <math.h> names the kernel adds);
- the compilers (gcc, clang, g++ with the strict flags of tests/test_c_backend.py), binutils nm;
- scipy.spatial.transform.Rotation for the rotation angle of a round trip.
The full 10^7-argument run is tools/atan2/accuracy.py (minutes); here a seeded 10^5 sample plus
every edge case. The kernel is built by gcc into a small evaluator (kernel_check.HARNESS).
"""

from __future__ import annotations

import math
import platform
import re
import shutil
import subprocess
import sys
from pathlib import Path

import mpmath
import numpy as np
import pytest
from scipy.spatial.transform import Rotation

from helpers import ROOT, demo_arm
import shared
from ikgen.backends import c as c_backend
from ikgen.cbuild import compile_solver
from ikgen.kinematics import NumericChain
from ikgen.verify import jacobian_distance, random_readings

sys.path.insert(0, str(ROOT / "tools" / "atan2"))
sys.path.insert(0, str(ROOT / "tools" / "mcu"))

import kernel_check  # noqa: E402

FAST = "-DIKGEN_FAST_ATAN2"
REALS = ("double", "float")
BOUND_ULPS = 2.0
SAMPLE = 100_000
STRICT_C = ["-std=c99", "-Wall", "-Wextra", "-Wpedantic", "-Wconversion", "-Wdouble-promotion", "-Wshadow", "-Werror"]
VARIANTS = {"gcc-O0": ("gcc", STRICT_C + ["-O0"]), "gcc-O2": ("gcc", STRICT_C + ["-O2"]),
            "clang-O2": ("clang", STRICT_C + ["-O2"]), "g++-O2": ("g++", ["-x", "c++", "-Wall", "-Wextra", "-Werror", "-O2"])}
HARNESS = ROOT / "tests" / "c_harness"


def need(tool: str) -> None:
    if shutil.which(tool) is None:
        if tool == "clang":
            pytest.skip("clang not installed: apt-get install clang to run the clang check")
        pytest.fail(f"{tool} not installed: these tests need gcc (apt-get install gcc g++ binutils)")


def run(command: list, cwd: Path | None = None) -> subprocess.CompletedProcess:
    return subprocess.run([str(c) for c in command], cwd=cwd, capture_output=True, text=True, timeout=300)


# ------------------------------------------------------------------------------ the kernel alone

@pytest.fixture(scope="module")
def evaluators(tmp_path_factory):
    need("gcc")
    folder = tmp_path_factory.mktemp("atan2-kernel")
    return {real: (kernel_check.build_evaluator(real, folder / real), folder / real) for real in REALS}


def ulp_report(y, x, results, errors, real) -> str:
    worst = np.argsort(-errors)[:3]
    return "; ".join(f"atan2({float(y[k])!r}, {float(x[k])!r}) = {float(results[k])!r}: {errors[k]:.3f} ulp"
                     for k in worst)


def kernel_errors(evaluators, real: str, y, x):
    exe, folder = evaluators[real]
    results = kernel_check.evaluate(exe, real, y, x, folder)
    high, low = kernel_check.reference(y, x)                 # mpmath atan2 at 100 bits
    return results, kernel_check.ulp_errors(results, high, low, real)


@pytest.mark.parametrize("real", REALS)
def test_kernel_within_two_ulps_on_a_seeded_sample(evaluators, real):
    """10^5 seeded arguments (circle, random bit patterns, region thresholds and x = +-y a few ulps
    off, near the axes, subnormals): every result within 2 ulps of mpmath's atan2."""
    y, x = kernel_check.arguments(SAMPLE, real, seed=20261204)
    assert np.isfinite(y).all() and np.isfinite(x).all() and (x != 0).any()
    results, errors = kernel_errors(evaluators, real, y, x)
    assert errors.max() <= BOUND_ULPS, ulp_report(y, x, results, errors, real)
    # the sample does reach the hard places: subnormal arguments and results, both octant halves
    info = np.finfo(kernel_check.DTYPES[real])
    assert (np.abs(y) < info.smallest_normal).sum() > 100 and (np.abs(results) < info.smallest_normal).sum() > 10
    assert (np.abs(y) > np.abs(x)).sum() > SAMPLE // 4 and (np.abs(y) < np.abs(x)).sum() > SAMPLE // 4


@pytest.mark.parametrize("real", REALS)
def test_kernel_special_cases_exact_and_other_edges_within_two_ulps(evaluators, real):
    """Every pair of signed zeros, infinities, NaN, the smallest subnormal and normal, the largest
    finite and a few others: Annex F.9.1.4's value exactly (sign of zero included) when a zero,
    an infinity or a NaN is involved, else within 2 ulps of mpmath."""
    y, x = kernel_check.edge_cases(real)
    exe, folder = evaluators[real]
    results = kernel_check.evaluate(exe, real, y, x, folder)
    special, wrong = [], []
    for k, (a, b, r) in enumerate(zip(y.tolist(), x.tolist(), results.tolist())):
        want = kernel_check.annex_f(a, b, real)
        if want is None:
            continue
        special.append(k)
        if not ((math.isnan(want) and math.isnan(r)) or (want == r and math.copysign(1, want) == math.copysign(1, r))):
            wrong.append(f"atan2({a!r}, {b!r}) = {r!r}, Annex F {want!r}")
    assert len(special) > 150 and not wrong, "; ".join(wrong[:8])
    finite = np.setdiff1d(np.arange(len(y)), special)
    _, errors = kernel_errors(evaluators, real, y[finite], x[finite])
    assert errors.max() <= BOUND_ULPS, ulp_report(y[finite], x[finite], results[finite], errors, real)


def test_a_wrong_coefficient_fails_the_check(evaluators, tmp_path):
    """The check can fail: the double kernel with its fourth coefficient off in the ninth digit
    is beyond 2 ulps on the sample."""
    source = kernel_check.kernel_source("double")
    mutated = source.replace("0.11111110845748942", "0.11111110945748942")
    assert mutated != source
    exe = kernel_check.build_evaluator("double", tmp_path, source=mutated)
    y, x = kernel_check.arguments(20_000, "double", seed=20261204)
    results = kernel_check.evaluate(exe, "double", y, x, tmp_path)
    high, low = kernel_check.reference(y, x)
    assert kernel_check.ulp_errors(results, high, low, "double").max() > BOUND_ULPS


# ------------------------------------------------------------------------------ its constants

TEMPLATE = ROOT / "templates" / "c_atan2.c.j2"


def table(real: str, name: str) -> list[float]:
    text = TEMPLATE.read_text(encoding="utf-8")
    [values] = re.findall(rf"/\* {real} {name} \*/ \{{([^}}]*)\}}", text)
    return [float(v.strip().rstrip("f")) for v in values.split(",")]


def test_base_angles_are_the_rounded_exact_angles():
    """mpmath: the double kernel's base angles K + S atan(c) (K = 0, pi/2, pi, pi/2 by octant pair,
    c = 0, 1/2, 1) are high + low parts with high the nearest double and high + low within 2^-104
    of the exact angle; the float kernel's K are the nearest floats of 0, pi/2, pi, pi/2."""
    mpmath.mp.prec = 200
    pi = mpmath.pi
    quadrants = ((0, 1), (pi / 2, -1), (pi, -1), (pi / 2, 1))
    high, low, sign = table("double", "BASE_HIGH"), table("double", "BASE_LOW"), table("double", "SIGN")
    for q, (k, s) in enumerate(quadrants):
        for r, c in enumerate((0, mpmath.mpf(1) / 2, 1)):
            exact = k + s * mpmath.atan(c)
            entry = 3 * q + r
            assert high[entry] == float(exact) and sign[entry] == s
            assert abs(mpmath.mpf(high[entry]) + low[entry] - exact) <= mpmath.mpf(2) ** -104 * max(abs(exact), 1)
    single = [float(np.float32(float(k))) for k, _ in quadrants]
    assert [float(np.float32(v)) for v in table("float", "BASE_HIGH")] == single


@pytest.mark.parametrize("real, t_max, bound", [("double", 0.2554, 2.0 ** -58), ("float", 1.0, 2.0 ** -25)])
def test_polynomial_relative_error(real, t_max, bound):
    """mpmath: t + t s P(s) with the template's coefficients (as rounded) is within the bound the
    coefficient script reports (tools/atan2/remez.py) of atan(t) on 2,000 points of (0, t_max]."""
    mpmath.mp.prec = 120
    coefficients = [mpmath.mpf(c) for c in table(real, "POLY")]
    worst = mpmath.mpf(0)
    for k in range(1, 2001):
        t = mpmath.mpf(t_max) * k / 2000
        s = t * t
        p = mpmath.mpf(0)
        for c in reversed(coefficients):
            p = p * s + c
        worst = max(worst, abs((t + t * s * p) / mpmath.atan(t) - 1))
    assert worst < bound


# ------------------------------------------------------------------------------ benchtop6 with the kernel

@pytest.fixture(scope="module")
def benchtop6(tmp_path_factory):
    arm = demo_arm("benchtop6")
    result = shared.built(arm)          # the session's one build of the demo (tests/shared.py)
    root = tmp_path_factory.mktemp("benchtop6-kernel")
    for relative, text in result.files.items():
        target = root / relative
        target.parent.mkdir(parents=True, exist_ok=True)
        target.write_text(text, encoding="utf-8")
    return arm, result, root / result.folder


@pytest.mark.parametrize("variant", list(VARIANTS))
def test_solver_with_the_kernel_compiles_strictly(benchtop6, variant, tmp_path):
    """benchtop6's four C files compile without a warning with -DIKGEN_FAST_ATAN2 under the strict
    flags (gcc -O0 and -O2, clang, g++ as C++)."""
    compiler, flags = VARIANTS[variant]
    need(compiler)
    _, _, folder = benchtop6
    sources = sorted(folder.glob("*.c"))
    assert len(sources) == 4
    ran = run([compiler, *flags, FAST, "-I", folder, "-c", *sources], cwd=tmp_path)
    assert ran.returncode == 0, ran.stderr


def test_kernel_block_calls_only_sign_functions(benchtop6):
    """Inside #ifdef IKGEN_FAST_ATAN2 the source calls fabs, copysign and signbit (C99 7.12) and
    its own functions, and holds only const static data."""
    arm, _, folder = benchtop6
    for scalar in c_backend.SCALARS:
        names = c_backend.names(arm, scalar)
        text = (folder / names["source"]).read_text(encoding="utf-8")
        text = re.sub(r"/\*.*?\*/", " ", text, flags=re.S)
        [block] = re.findall(r"^#ifdef IKGEN_FAST_ATAN2\n((?:(?!^#else).)*?)^#endif\n", text, re.M | re.S)
        calls = set(re.findall(r"\b([A-Za-z_]\w*)\s*\(", block)) - {"if", "return"}
        own = {c for c in calls if c.startswith(names["prefix"] + "_atan2")}
        allowed = {scalar.fn("fabs"), scalar.fn("copysign"), "signbit"}
        assert own and calls - own <= allowed, sorted(calls - own - allowed)
        statics = re.findall(r"\bstatic\b([^;{=(]*)", block)
        assert statics and all(s.strip().startswith(("const ", "inline ", scalar.name)) for s in statics), statics
        # every atan2 of the solver goes through <prefix>_atan2: no direct library call is left
        outside = text.replace(block, "")
        direct = re.findall(rf"\b{scalar.fn('atan2')}\s*\(", outside)
        assert len(direct) == 1, f"{len(direct)} direct {scalar.fn('atan2')} calls (only the wrapper's expected)"
        assert len(re.findall(rf"\b{names['prefix']}_atan2\s*\(", outside)) > 5


def test_objects_with_the_kernel_need_no_atan2(benchtop6, tmp_path):
    """binutils nm at gcc -O2 (builtins on, as a user would build): with the macro the solver
    objects need neither atan2 nor atan2f; without it the double build needs atan2, and the float
    build atan2f, or atan2 on its widened arguments with IKGEN_ATAN2_IN_DOUBLE=1 (the default on
    x86-64 and 64-bit Arm, where the library's atan2 is the faster)."""
    need("gcc")
    arm, _, folder = benchtop6
    for scalar in c_backend.SCALARS:
        source = folder / c_backend.names(arm, scalar)["source"]
        cases = [([FAST], set()), ([], {"atan2"})]
        if scalar is c_backend.FLOAT:
            cases = [([FAST], set()), (["-DIKGEN_ATAN2_IN_DOUBLE=0"], {"atan2f"}),
                     (["-DIKGEN_ATAN2_IN_DOUBLE=1"], {"atan2"}), ([FAST, "-DIKGEN_ATAN2_IN_DOUBLE=1"], set())]
        for number, (flags, expected) in enumerate(cases):
            obj = tmp_path / f"{source.stem}{number}.o"
            ran = run(["gcc", "-std=c99", "-O2", *flags, "-I", folder, "-c", source, "-o", obj])
            assert ran.returncode == 0, ran.stderr
            undefined = set(run(["nm", "-u", obj]).stdout.split()) - {"U"}
            assert undefined & {"atan2", "atan2f"} == expected, (flags, sorted(undefined))
    if platform.machine() in ("x86_64", "AMD64", "aarch64", "arm64"):
        obj = tmp_path / "default_f32.o"
        source = folder / c_backend.names(arm, c_backend.FLOAT)["source"]
        assert run(["gcc", "-std=c99", "-O2", "-I", folder, "-c", source, "-o", obj]).returncode == 0
        assert "atan2" in run(["nm", "-u", obj]).stdout.split()


@pytest.mark.parametrize("scalar", c_backend.SCALARS, ids=["double", "float"])
def test_selftest_passes_with_the_kernel(benchtop6, scalar, tmp_path):
    """The embedded self-test of each build (the generator's vectors, checked by the solver's own
    forward kinematics) passes with -DIKGEN_FAST_ATAN2."""
    need("gcc")
    arm, _, folder = benchtop6
    prefix = c_backend.names(arm, scalar)["prefix"]
    exe = tmp_path / "selftest"
    ran = run(["gcc", *STRICT_C, "-O2", FAST, "-I", folder, f"-DIK_PREFIX={prefix}", folder / f"{prefix}.c",
               folder / f"{prefix}_selftest.c", HARNESS / "selftest_main.c", "-lm", "-o", exe])
    assert ran.returncode == 0, ran.stderr
    done = run([exe])
    match = re.search(r"selftest failures: (\d+)", done.stdout)
    assert match and int(match.group(1)) == 0 and done.returncode == 0, done.stdout + done.stderr


# Round-trip bounds as tests/test_c_backend.py: double 1e-9 of the reach and 1e-9 rad; float (a
# 24-bit significand, about 100 dependent operations, Higham, "Accuracy and Stability of Numerical
# Algorithms", 2nd ed., 3.1, from memory) 2e-5 of the reach and 2e-5 rad.
ROUND_TRIP = {"double": (1e-9, 1e-9), "float": (2e-5, 2e-5)}


@pytest.mark.parametrize("scalar", c_backend.SCALARS, ids=["double", "float"])
def test_solver_with_the_kernel_round_trips_like_the_library_build(benchtop6, scalar, tmp_path_factory):
    """10,000 seeded poses farther than 1e-2 from the singular set, limits ignored: the build with
    the kernel finds as many solutions as the library build on every pose, their readings agree
    (1e-9 rad double, 1e-4 float), and the forward kinematics (ikgen.kinematics.NumericChain, in
    double) of every solution reproduces the pose within the bounds above."""
    arm, result, _ = benchtop6
    chain = NumericChain(arm)
    readings = random_readings(arm, 14_000, np.random.default_rng(4242))
    readings = readings[jacobian_distance(chain, readings) > 1e-2][:10_000]
    poses = chain.poses(readings)
    builds = {}
    for label, flags in (("library", ()), ("kernel", (FAST,))):
        folder = tmp_path_factory.mktemp(f"cffi-{scalar.name}-{label}")
        solver = compile_solver(arm, result.derivation, scalar, folder, extra_compile_args=flags)
        builds[label] = solver.inverse_many(poses, limits="ignore")
    (joints, counts, _, _), (base, base_counts, _, _) = builds["kernel"], builds["library"]
    assert len(poses) == 10_000 and (counts == base_counts).all() and counts.min() > 0
    index = [(i, k) for i in range(len(poses)) for k in range(counts[i])]
    got = np.array([joints[i, k] for i, k in index], dtype=np.float64)
    want = np.array([base[i, k] for i, k in index], dtype=np.float64)
    gap = np.abs((np.radians(got - want) + np.pi) % (2 * np.pi) - np.pi)
    assert gap.max() < (1e-9 if scalar.name == "double" else 1e-4), gap.max()
    achieved = chain.poses(got)
    targets = poses[[i for i, _ in index]]
    position = np.linalg.norm(achieved[:, :3, 3] - targets[:, :3, 3], axis=1) / arm.reach_scale()
    rotation = Rotation.from_matrix(np.einsum("nji,njk->nik", targets[:, :3, :3], achieved[:, :3, :3])).magnitude()
    position_bound, rotation_bound = ROUND_TRIP[scalar.name]
    assert position.max() < position_bound and rotation.max() < rotation_bound, (position.max(), rotation.max())


def test_float_selftest_with_the_kernel_on_cortex_m4f(benchtop6, tmp_path):
    """benchtop6's float self-test with -DIKGEN_FAST_ATAN2, cross-built for a Cortex-M4F and run
    on QEMU's mps2-an386 (tools/mcu/firmware.py, as tests/test_mcu.py), passes."""
    import firmware
    try:
        tools = firmware.find_tools(need_qemu=True)
    except firmware.ToolsMissing as missing:
        pytest.skip(str(missing))
    arm, _, folder = benchtop6
    prefix = c_backend.names(arm, c_backend.FLOAT)["prefix"]
    solver = firmware.FloatSolver(stem="benchtop6", folder=folder, prefix=prefix)
    elf = firmware.selftest_firmware(tools, solver, tmp_path, extra=(FAST,))
    ran = firmware.emulate(tools, elf)
    match = re.search(r"selftest failures: (\d+)", ran.output)
    assert ran.status == 0 and match and int(match.group(1)) == 0, ran.output
