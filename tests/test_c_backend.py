"""The generated C of the demo arms: strict compilation, what it may call (distance,
sort_nearest and nearest only sqrt), agreement with the generated Python in each limits mode
(drop, flag, ignore), sanitizers (inverse, inverse_rp, distance, sort_nearest, nearest into
exact-size buffers), float accuracy, the self-tests, and hostile names in arm files. The
choices of nearest/sort_nearest against Python are in tests/test_limits_nearest.py.

Outside references used here (named again beside each check):
- ISO/IEC 9899:1999 (C99): 6.4.4.2 floating constants (an unsuffixed constant is a double, the
  suffix f makes a float), 7.1.3 reserved identifiers, 7.12 <math.h> (sqrt, atan2, sin, cos,
  fabs and their f forms).
- IEEE 754-2008, 3.6 table 3.5: binary32 has a 24-bit significand, unit roundoff 2^-24 ~ 6e-8.
- The compilers themselves (gcc, clang, g++) with strict warning flags, binutils nm for the
  symbols an object file defines and needs, and gcc's AddressSanitizer/UndefinedBehaviorSanitizer.
- scipy.spatial.transform.Rotation for rotation angles between a pose and its round trip.

Demo arms are invented (examples/). Each arm is derived and its C solver compiled once per test
session (tests/shared.py); the strict-compile files go to a tmp_path_factory folder. C mains live in tests/c_harness/.
"""

from __future__ import annotations

import ast
import math
import os
import re
import shutil
import subprocess
import tomllib
from pathlib import Path

import numpy as np
import pytest
from scipy.spatial.transform import Rotation

import shared
from helpers import EXAMPLES, demo_arm
from ikgen.armfile import arm_from_data, load_arm
from ikgen.backends import c as c_backend
from ikgen.cbuild import compile_solver
from ikgen.errors import ArmFileError
from ikgen.generate import build_code, load_module, write
from ikgen.kinematics import NumericChain
from ikgen.verify import jacobian_distance, random_readings, verify

DEMOS = ("benchtop6", "packer6", "inspector6")
HARNESS = Path(__file__).resolve().parent / "c_harness"

# The flags of the brief: C99 with every warning that matters for generated numeric code an error.
STRICT_C = ["-std=c99", "-Wall", "-Wextra", "-Wpedantic", "-Wconversion", "-Wdouble-promotion",
            "-Wshadow", "-Werror"]
STRICT_CXX = ["-x", "c++", "-Wall", "-Wextra", "-Werror"]
# (compiler, extra flags): gcc at -O0 (the plain flags) and -O2 (flow warnings such as
# -Wmaybe-uninitialized need the optimiser), clang, and the C sources compiled as C++.
COMPILE_VARIANTS = {"gcc-O0": ("gcc", STRICT_C + ["-O0"]), "gcc-O2": ("gcc", STRICT_C + ["-O2"]),
                    "clang-O2": ("clang", STRICT_C + ["-O2"]), "g++-O2": ("g++", STRICT_CXX + ["-O2"])}

# C99 7.12: the <math.h> functions the generated code may call (the f forms in the float build).
MATH_DOUBLE = {"sqrt", "atan2", "sin", "cos", "fabs", "fmod"}   # fmod: a free joint's reading (C99 7.12.10.1)
MATH_FLOAT = {name + "f" for name in MATH_DOUBLE}
# The opt-in atan2 kernel (#ifdef IKGEN_FAST_ATAN2, templates/c_atan2.c.j2) also reads signs:
# C99 7.12.3.6 signbit, 7.12.11.1 copysign. Allowed in that block only (tests/test_atan2_kernel.py).
KERNEL_BLOCK = re.compile(r"^#ifdef IKGEN_FAST_ATAN2\n(?:(?!^#else).)*?^#endif\n", re.M | re.S)
# The float build's one widened call: the library's atan2 on double arguments, in the branch that
# IKGEN_ATAN2_IN_DOUBLE selects (templates/c_atan2.c.j2: cores with double-precision hardware).
WIDENED_ATAN2 = re.compile(r"^#elif IKGEN_ATAN2_IN_DOUBLE\n\s*return \(float\)atan2\(\(double\)y, \(double\)x\);\n", re.M)
C_KEYWORDS_CALLED = {"if", "for", "while", "switch", "return", "sizeof"}


# ------------------------------------------------------------------------------ helpers

def need_compiler(name: str) -> str:
    path = shutil.which(name)
    if path is None:
        if name == "clang":
            pytest.skip("clang not installed: install it (apt-get install clang) to run the clang checks")
        pytest.fail(f"{name} not installed: the C back-end tests need gcc and g++ (apt-get install gcc g++)")
    return path


def run(command: list[str], cwd: Path | None = None, env: dict | None = None, timeout: float = 300):
    return subprocess.run([str(c) for c in command], cwd=cwd, env=env, capture_output=True, text=True,
                          timeout=timeout)


def compile_objects(variant: str, sources: list[Path], include: Path, out: Path):
    """Compile ``sources`` with one COMPILE_VARIANTS entry into objects in a fresh folder ``out``."""
    compiler, flags = COMPILE_VARIANTS[variant]
    need_compiler(compiler)
    out.mkdir(parents=True, exist_ok=True)
    return run([compiler, *flags, "-I", include, "-c", *sources], cwd=out)


def assert_strict_compile(variant: str, folder: Path, out: Path):
    sources = sorted(folder.glob("*.c"))
    assert len(sources) == 4, f"expected 4 C files (solver and self-test; double and float) in {folder}"
    result = compile_objects(variant, sources, folder, out)
    assert result.returncode == 0, f"{variant} rejected the generated C of {folder.name}:\n{result.stderr}"
    assert len(list(out.glob("*.o"))) == len(sources)


def split_comments(text: str) -> tuple[str, list[str]]:
    """(the C text with every comment replaced by one space, the comment bodies). String and
    character literals are kept whole, so a '/*' inside one is not taken for a comment."""
    code: list[str] = []
    comments: list[str] = []
    i = 0
    while i < len(text):
        if text.startswith("/*", i):
            end = text.find("*/", i + 2)
            assert end >= 0, f"unterminated comment at offset {i}"
            comments.append(text[i + 2:end])
            code.append(" ")
            i = end + 2
        elif text.startswith("//", i):
            end = text.find("\n", i)
            end = len(text) if end < 0 else end
            comments.append(text[i + 2:end])
            i = end
        elif text[i] in "\"'":
            j = i + 1
            while text[j] != text[i]:
                assert text[j] != "\n", f"unterminated literal at offset {i}"
                j += 2 if text[j] == "\\" else 1
            code.append(text[i:j + 1])
            i = j + 1
        else:
            code.append(text[i])
            i += 1
    return "".join(code), comments


# C99 6.4.4.2: a floating constant has a '.' or an exponent; suffix f or F makes it a float.
FLOAT_CONSTANT = re.compile(r"(?<![\w.])((?:\d+\.\d*|\.\d+)(?:[eE][+-]?\d+)?|\d+[eE][+-]?\d+)([fFlL]?)(?![\w.])")
CALL = re.compile(r"\b([A-Za-z_]\w*)\s*\(")
IDENTIFIER = re.compile(r"[A-Za-z_][A-Za-z0-9_]*")
PREPROCESSOR = re.compile(r"^#(include|define|ifndef|ifdef|if|endif|else|elif)\b")


def functions_defined(code: str) -> set[str]:
    """Names of functions this file defines (a type, the name, a parameter list, then '{')."""
    return set(re.findall(r"^(?:static\s+)?(?:inline\s+)?(?:const\s+)?[A-Za-z_]\w*\s+\*?([A-Za-z_]\w*)\s*\([^;{}]*\)\s*\{",
                          code, re.M))


def function_body(code: str, name: str) -> str:
    """The text between the braces of the definition of function ``name`` (comments removed)."""
    match = re.search(r"\b" + re.escape(name) + r"\s*\([^;{}]*\)\s*\{", code)
    assert match, f"no definition of {name}"
    depth, i = 1, match.end()
    while depth:
        depth += {"{": 1, "}": -1}.get(code[i], 0)
        i += 1
    return code[match.end():i - 1]


def nm_symbols(obj: Path) -> list[tuple[str, str]]:
    """(name, type) of every symbol of an object file, from binutils nm in POSIX format."""
    result = run(["nm", "-P", obj])
    assert result.returncode == 0, result.stderr
    return [tuple(line.split()[:2]) for line in result.stdout.splitlines() if line.strip()]


def c_list(values, scalar) -> str:
    """A C initialiser list of readings; every constant a float constant of the scalar's type."""
    suffix = "f" if scalar is c_backend.FLOAT else ""
    return "{" + ", ".join(repr(float(v)) + suffix for v in values) + "}"


def labels_of(signs, labels: list[tuple[str, str]]) -> tuple[str, ...]:
    """The label words of a solution's signs (+1: a label's first value, -1: its second)."""
    return tuple(positive if sign > 0 else negative for sign, (positive, negative) in zip(signs, labels))


def wrist_singular_reading(arm) -> float:
    """The reading of joint 5 at which its DH angle is 0 (wrist axes 4 and 6 aligned)."""
    joint = arm.joints[4]
    reading = -float(joint.theta + joint.offset) / (joint.direction * float(arm.angle_scale))
    low, high = arm.limits_in_readings()[4]
    assert low <= reading <= high
    return reading


class Demo:
    """One demo arm: derived once, its files written once, the Python module, compiled solvers."""

    def __init__(self, stem: str, factory):
        self.stem = stem
        self.factory = factory
        self.arm = demo_arm(stem)
        self.build = shared.built(self.arm)
        self.derivation = self.build.derivation
        root = factory.mktemp(f"{stem}-files")
        write(self.build.files, root)
        self.folder = root / self.build.folder
        self.python = load_module(self.build.files[self.build.python_path], f"{stem}_ik_under_test")
        self.chain = NumericChain(self.arm)
        self._solvers: dict = {}
        self.verification = None

    def solver(self, scalar=c_backend.DOUBLE):
        if scalar.name not in self._solvers:
            self._solvers[scalar.name] = shared.c_solver(self.arm, scalar)
        return self._solvers[scalar.name]

    def prefix(self, scalar) -> str:
        return c_backend.names(self.arm, scalar)["prefix"]

    def regular_readings(self, count: int, seed: int) -> np.ndarray:
        """Seeded readings within the limits, farther than 1e-2 from the singular set."""
        readings = random_readings(self.arm, 4 * count, np.random.default_rng(seed))
        readings = readings[jacobian_distance(self.chain, readings) > 1e-2]
        assert len(readings) >= count
        return readings[:count]


@pytest.fixture(scope="module")
def demos(tmp_path_factory):
    cache: dict[str, Demo] = {}

    def get(stem: str) -> Demo:
        if stem not in cache:
            cache[stem] = Demo(stem, tmp_path_factory)
        return cache[stem]

    return get


def test_a_free_joint_keeps_the_callers_reading_within_one_turn(demos):
    """The wrist centre on axis 1 leaves joint 1 free: it keeps the caller's reading, reduced by
    whole turns into one turn (fmod, exact: C99 7.12.10.1), the same bit for bit in C and Python, and
    within rounding in the numpy batch. A reading turns away once came back beyond a turn (1000 deg gave 640)."""
    demo = demos("benchtop6")
    arm = demo.arm
    tool_reach = float(arm.tool[2, 3]) + float(arm.joints[5].d)       # tool point to wrist centre, along z
    pose = np.array([[0.0, 0.0, 1.0, tool_reach], [0.0, -1.0, 0.0, 0.0], [1.0, 0.0, 0.0, 600.0], [0, 0, 0, 1.0]])
    assert np.allclose(pose[:3, 3] - tool_reach * pose[:3, 2], [0.0, 0.0, 600.0])
    batch = load_module(demo.build.files[f"{demo.build.folder}/{demo.build.folder}_ik_batch.py"], "benchtop6_free_batch")
    for first in (30.0, 179.0, 540.0, 1000.0, -1000.0, 1e6 + 0.25):
        current = [first, 0.0, 0.0, 0.0, 0.0, 0.0]
        expected = 180.0 - (180.0 - first) % 360.0        # the reading in (-180, 180]
        py = demo.python.inverse_joints(pose.tolist(), current)
        assert py and all(abs(q[0] - expected) < 1e-9 for q in py), (first, [q[0] for q in py])
        assert [tuple(q) for q in demo.solver().inverse_joints(pose, current)] == [tuple(q) for q in py]
        joints, valid, *_ = batch.inverse_batch(pose[None], np.array([current]))
        rows = joints[0][valid[0]]                # the batch's own arithmetic: equal within rounding
        assert len(rows) == len(py) and all(np.abs(rows - np.array(q)).max(axis=1).min() < 1e-9 for q in py)
    assert any(s[2] for s in demo.python.inverse(pose.tolist(), [1000.0, 0, 0, 0, 0, 0], limits="ignore"))


@pytest.mark.parametrize("bend", [30.0, 1.0, 1e-2, 5e-3, 1e-4, 1e-7, 0.0])
def test_the_wrist_angles_round_trip_on_either_side_of_the_direct_form(demos, bend):
    """Once joint 5 is known, joints 4 and 6 each come from one pair of equations without the other
    (the usual path) only where the bend is well conditioned (|det| = sin(th5)^2 above 1e-8, a bend
    above about 6e-3 deg); nearer the aligned wrist joint 6 reads joint 4's angle, so their sum stays
    exact where each alone is ill determined, and at the aligned wrist joint 4 is free. On both
    sides of that band, and on it: every solution is the pose (rotation error by scipy's
    Rotation), the C and Python solvers agree bit for bit, and one solution is the readings we
    started from (near the aligned wrist: but for the sum of joints 4 and 6). The tolerances are the
    double build's round trip of tests/test_atan2_kernel.py."""
    demo = demos("benchtop6")
    arm, chain = demo.arm, demo.chain
    step = next(s for s in demo.derivation.steps if getattr(s, "key", None) == "6")
    assert step.forms[0].after == "4" and not {str(x) for x in step.forms[0].cos_num.free_symbols} & {"c4", "s4"}
    readings = demo.regular_readings(20, seed=41)
    readings[:, 4] = wrist_singular_reading(arm) + bend
    poses = chain.poses(readings)
    reach = arm.reach_scale()
    for reading, pose in zip(readings, poses):
        py = demo.python.inverse_joints(pose.tolist())
        assert [tuple(q) for q in demo.solver().inverse_joints(pose, None)] == [tuple(q) for q in py]
        assert py, reading
        got = np.array(py)
        achieved = chain.poses(got)
        position = np.linalg.norm(achieved[:, :3, 3] - pose[:3, 3], axis=1) / reach
        rotation = Rotation.from_matrix(np.einsum("ji,njk->nik", pose[:3, :3], achieved[:, :3, :3])).magnitude()
        assert position.max() < 1e-9 and rotation.max() < 1e-9, (bend, position.max(), rotation.max())
        gap = np.abs((got - reading + 180.0) % 360.0 - 180.0)
        if bend < 1e-2:       # joints 4 and 6 alone are ill determined here (by about 1e-16 / sin(th5))
            together = (got[:, 3] + got[:, 5]) - (reading[3] + reading[5])
            gap[:, 3] = gap[:, 5] = np.abs((together + 180.0) % 360.0 - 180.0)
        assert gap.max(axis=1).min() < 1e-6, (bend, gap.max(axis=1).min())


def test_a_free_angle_is_taken_into_one_turn(demos):
    """A free joint's angle (or a free sum of parallel-axis angles, the sum of its members'
    readings) enters the later steps in (-pi, pi], so the wrap counts of the readings hold: the
    generated helper (fmod, exact, then one conditional turn) against the IEEE remainder of C99
    7.12.10.2 (math.remainder), and the batch module's helper equal to it bit for bit."""
    demo = demos("benchtop6")
    batch = load_module(demo.build.files[f"{demo.build.folder}/{demo.build.folder}_ik_batch.py"], "benchtop6_turn_batch")
    rng = np.random.default_rng(3)
    values = [0.0, -0.0, math.pi, -math.pi, 2 * math.pi, -2 * math.pi, 3 * math.pi, -3 * math.pi, 17.45, -17.45,
              1e3, -1e3, 1e6 + 0.3] + list(rng.uniform(-40.0, 40.0, 200))
    for x in values:
        got = demo.python._one_turn(x)
        assert -math.pi < got <= math.pi, (x, got)
        reference = math.remainder(x, 2 * math.pi)
        assert abs(got - reference) < 1e-12 or abs(abs(got - reference) - 2 * math.pi) < 1e-12, (x, got, reference)
    assert batch._one_turn(np.array(values)).tolist() == [demo.python._one_turn(x) for x in values]


# ------------------------------------------------------------------------------ 1. strict compilation

@pytest.mark.parametrize("variant", list(COMPILE_VARIANTS))
@pytest.mark.parametrize("stem", DEMOS)
def test_generated_c_compiles_strictly(demos, stem, variant, tmp_path):
    """Every generated C file (solver and self-test, double and float) compiles without a warning
    under the strict flags: gcc and clang as C99, g++ as C++ (the header's extern "C" path)."""
    demo = demos(stem)
    assert_strict_compile(variant, demo.folder, tmp_path)


def test_strict_flags_reject_a_double_constant_in_float_code(tmp_path):
    """The flags can fail: a double constant in float arithmetic (C99 6.4.4.2, 6.3.1.8) is an error."""
    source = tmp_path / "promote.c"
    source.write_text("float half(float x);\nfloat half(float x)\n{\n    return x * 0.5;\n}\n")
    result = compile_objects("gcc-O2", [source], tmp_path, tmp_path / "out")
    assert result.returncode != 0 and ("double-promotion" in result.stderr or "conversion" in result.stderr)


# ------------------------------------------------------------------------------ 2. what the C may call and hold

def generated_c(demo: Demo) -> dict[str, tuple[str, object]]:
    """{file name: (text, scalar)} of the generated C files of a demo arm."""
    out = {}
    for path in sorted(demo.folder.glob("*_ik*.[ch]")):
        scalar = c_backend.FLOAT if "_f32" in path.name else c_backend.DOUBLE
        out[path.name] = (path.read_text(encoding="utf-8"), scalar)
    return out


@pytest.mark.parametrize("stem", DEMOS)
def test_source_calls_only_the_allowed_math_functions(demos, stem):
    demo = demos(stem)
    files = generated_c(demo)
    assert len(files) == 6
    for name, (text, scalar) in files.items():
        code, _ = split_comments(text)
        code = KERNEL_BLOCK.sub("", code)
        widened = len(WIDENED_ATAN2.findall(code))
        assert widened == (1 if scalar is c_backend.FLOAT and name.endswith(".c") and "selftest" not in name else 0), name
        code = WIDENED_ATAN2.sub("", code)
        calls = set(CALL.findall(re.sub(r"^\s*#.*$", "", code, flags=re.M)))   # not '#define X (1u)'
        allowed_math = MATH_FLOAT if scalar is c_backend.FLOAT else MATH_DOUBLE
        own = {n for n in calls if n.startswith(demo.prefix(scalar) + "_")}
        others = calls - C_KEYWORDS_CALLED - own - functions_defined(code)
        assert others <= allowed_math, f"{name} calls {sorted(others - allowed_math)}"
        assert not re.search(r"\b(malloc|calloc|realloc|free|alloca)\b", code), f"{name} allocates"
        includes = re.findall(r"^#include\s+(\S+)", code, re.M)
        header = f'"{demo.prefix(scalar)}.h"'
        assert set(includes) <= {header, "<math.h>"}, f"{name} includes {includes}"
        # static only for const data (the limit tables, the self-test vectors) and for helper
        # functions: no static mutable state, so the solver is re-entrant
        for match in re.finditer(r"\bstatic\b([^;{=]*)", code):
            declaration = match.group(1).strip()
            assert declaration.startswith("const ") or "(" in declaration, \
                f"{name}: mutable static '{match.group(0).strip()}'"
        if name.endswith(".c") and not name.endswith("_selftest.c"):
            # distance, sort_nearest and nearest: no allocation and, of <math.h>, only sqrt
            prefix = demo.prefix(scalar)
            for function in ("distance", "sort_nearest", "nearest"):
                body = function_body(code, f"{prefix}_{function}")
                body_calls = set(CALL.findall(body)) - C_KEYWORDS_CALLED
                allowed = {scalar.fn("sqrt"), f"{prefix}_distance", f"{prefix}_inverse", "labels_match"}
                assert body_calls <= allowed, f"{name}: {function} calls {sorted(body_calls - allowed)}"
            assert scalar.fn("sqrt") in CALL.findall(function_body(code, f"{prefix}_distance"))


@pytest.mark.parametrize("stem", DEMOS)
def test_float_build_has_only_float_constants(demos, stem):
    """C99 6.4.4.2: an unsuffixed floating constant is a double; every one in the float files must
    carry the f suffix, and the double files must not carry it. The strict compile above (with
    -Wdouble-promotion -Wconversion) is the compiler's side of the same check."""
    demo = demos(stem)
    checked = 0
    for name, (text, scalar) in generated_c(demo).items():
        code, _ = split_comments(text)
        code = WIDENED_ATAN2.sub("", code)        # the one widened atan2 (test_source_calls_only_...)
        constants = FLOAT_CONSTANT.findall(code)
        if scalar is c_backend.FLOAT:
            bad = [value + suffix for value, suffix in constants if suffix not in ("f", "F")]
            assert not bad, f"{name}: double constants {bad[:5]}"
            assert not re.search(r"\bdouble\b", code), f"{name} mentions double"
            assert not set(CALL.findall(code)) & MATH_DOUBLE, f"{name} calls a double math function"
        else:
            bad = [value + suffix for value, suffix in constants if suffix]
            assert not bad, f"{name}: suffixed constants {bad[:5]}"
            assert not re.search(r"\bfloat\b", code), f"{name} mentions float"
        checked += len(constants)
    assert checked > 100     # the regular expression did find the constants


@pytest.mark.parametrize("stem", DEMOS)
def test_objects_need_only_libm_and_hold_no_mutable_data(demos, stem, tmp_path):
    """binutils nm on objects built at -O0 -fno-builtin (every call stays a call): the undefined
    symbols are the allowed <math.h> functions; no data in .data/.bss/common (types D d B b C G g
    S s); the solver exports exactly its six functions, the self-test one function. The float
    build is compiled as on a single-precision core (IKGEN_ATAN2_IN_DOUBLE=0: float functions
    only); its widened atan2 is checked in tests/test_atan2_kernel.py."""
    demo = demos(stem)
    need_compiler("gcc")
    sources = sorted(demo.folder.glob("*.c"))
    result = run(["gcc", "-std=c99", "-O0", "-fno-builtin", "-DIKGEN_ATAN2_IN_DOUBLE=0", "-I", demo.folder, "-c",
                  *sources], cwd=tmp_path)
    assert result.returncode == 0, result.stderr
    mutable = set("DdBbCGgSs")
    for source in sources:
        scalar = c_backend.FLOAT if "_f32" in source.name else c_backend.DOUBLE
        prefix = demo.prefix(scalar)
        symbols = nm_symbols(tmp_path / (source.stem + ".o"))
        undefined = {n for n, t in symbols if t == "U"}
        allowed = MATH_FLOAT if scalar is c_backend.FLOAT else MATH_DOUBLE
        assert not [s for s in symbols if s[1] in mutable], f"{source.name} holds mutable data: {symbols}"
        exported = {n for n, t in symbols if t == "T"}
        if source.name.endswith("_selftest.c"):
            solver_calls = {f"{prefix}_inverse", f"{prefix}_forward"}
            assert exported == {f"{prefix}_selftest"}
            assert solver_calls <= undefined <= allowed | solver_calls, f"{source.name} needs {sorted(undefined)}"
        else:
            assert undefined <= allowed, f"{source.name} needs {sorted(undefined - allowed)}"
            public = ("forward", "inverse", "inverse_rp", "distance", "sort_nearest", "nearest")
            kind = demo.derivation.target.kind if demo.derivation.target else "pose"
            if kind in ("pose", "point") and scalar is c_backend.DOUBLE:
                public += ("inverse_joints",)       # the readings-only entry (double builds)
            assert exported == {f"{prefix}_{f}" for f in public}
            assert {scalar.fn("sqrt"), scalar.fn("atan2")} <= undefined, f"{source.name} needs only {undefined}"


# ------------------------------------------------------------------------------ 3. C (double) against Python

LIMIT_MODES = ("drop", "flag", "ignore")


@pytest.mark.parametrize("stem", DEMOS)
def test_c_and_python_give_the_same_solutions(demos, stem):
    """10,000 seeded poses, each limits mode: the C solver (batch entry point) and the generated
    Python give the same number of solutions, in the same order, with the same labels and
    singular flags, and readings within 1e-12 (both evaluate the same plan in IEEE double)."""
    demo = demos(stem)
    solver = demo.solver()
    readings = random_readings(demo.arm, 10_000, np.random.default_rng(20260101))
    poses = demo.chain.poses(readings)
    summary = []
    for limits in LIMIT_MODES:
        joints, counts, config, singular = solver.inverse_many(poses, limits=limits)
        worst = 0.0
        total = 0
        for i, pose in enumerate(poses):
            expected = demo.python.inverse(pose, None, limits)
            assert counts[i] == len(expected), \
                f"{limits}, pose {i} (readings {readings[i]}): C {counts[i]}, Python {len(expected)}"
            for k, (py_joints, py_labels, py_singular, _, _) in enumerate(expected):
                assert labels_of(config[i, k], solver.labels) == tuple(py_labels), \
                    f"{limits}, pose {i} solution {k}"
                assert bool(singular[i, k]) == py_singular, f"{limits}, pose {i} solution {k}"
                worst = max(worst, float(np.abs(joints[i, k] - np.array(py_joints)).max()))
            total += len(expected)
        summary.append(f"{limits}: {total} solutions, largest |C - Python| = {worst:.3g} {demo.arm.angle_unit}")
        # every source reading lies within the limits, so even "drop" keeps at least it
        assert total >= (4 if limits != "drop" else 1) * len(poses), summary[-1]
        assert worst <= 1e-12, summary[-1]
    print(f"{stem}, 10000 poses: " + "; ".join(summary))


@pytest.mark.parametrize("stem", DEMOS)
def test_single_and_batch_entry_points_agree(demos, stem):
    """CSolver.inverse (one pose, Python tuples) and inverse_many (the C loop) give the same."""
    demo = demos(stem)
    solver = demo.solver()
    readings = demo.regular_readings(300, seed=11)
    poses = demo.chain.poses(readings)
    for limits in LIMIT_MODES:
        joints, counts, config, singular = solver.inverse_many(poses, limits=limits)
        # a pose's row: every solution the mode can give (no multi-turn equivalents when ignored)
        slots = solver.closed_form if limits == "ignore" else solver.max_solutions
        assert joints.shape == (len(poses), slots, solver.dof) and singular.shape == (len(poses), slots)
        assert config.shape[:2] == (len(poses), slots) and counts.max() <= slots
        for i, pose in enumerate(poses):
            one = solver.inverse(pose, limits=limits)
            assert len(one) == counts[i]
            for k, (j, labels, flag, conditioning, within) in enumerate(one):
                assert j == tuple(float(v) for v in joints[i, k])
                assert labels == labels_of(config[i, k], solver.labels) and flag == bool(singular[i, k])
                assert len(conditioning) == solver.conditions and isinstance(within, bool)


@pytest.mark.parametrize("stem", DEMOS)
@pytest.mark.parametrize("scalar", [c_backend.DOUBLE, c_backend.FLOAT], ids=["double", "float"])
def test_the_within_limits_flag_follows_the_joint_limits(demos, stem, scalar):
    """With limits ignored every closed-form solution comes back with its within-limits flag: for
    poses from readings over a whole turn (many solutions outside the limits), the flag of each C
    solution (double and float builds) is whether each of its readings lies within the arm's limits,
    as read from the arm file (readings within 1e-4 of a limit, where the widening by 1e-9 of the
    range or float rounding decides, are left out); the Python solver's flags equal the double
    build's."""
    demo = demos(stem)
    solver = demo.solver(scalar)
    rng = np.random.default_rng(3101)
    half = 180.0 if demo.arm.angle_unit == "deg" else math.pi
    readings = rng.uniform(-half, half, (500, demo.arm.dof))
    limits = demo.arm.limits_in_readings()
    found, flags = [], []
    for pose in demo.chain.poses(readings):
        ours = solver.inverse(pose, limits="ignore")
        if scalar is c_backend.DOUBLE:
            assert [s[4] for s in ours] == [s[4] for s in demo.python.inverse(pose, None, "ignore")]
        found += [s[0] for s in ours]
        flags += [s[4] for s in ours]
    q, flags = np.array(found), np.array(flags)
    clear = np.minimum(np.abs(q - limits[:, 0]), np.abs(q - limits[:, 1])).min(axis=1) >= 1e-4
    expected = np.all((q >= limits[:, 0]) & (q <= limits[:, 1]), axis=1)
    wrong = np.nonzero(clear & (flags != expected))[0]
    assert len(wrong) == 0, (q[wrong[0]], flags[wrong[0]])
    seen = {True: int((clear & expected).sum()), False: int((clear & ~expected).sum())}
    assert seen[True] > 500 and seen[False] > 500, seen


def test_inverse_many_threads_give_the_same_arrays(demos):
    """inverse_many split over threads (cffi releases the GIL in the C call) fills exactly the
    arrays one thread does, for part sizes that do not divide the pose count; a bad thread count is
    a clear ValueError."""
    demo = demos(DEMOS[0])
    solver = demo.solver()
    poses = demo.chain.poses(demo.regular_readings(1001, seed=5))
    one = solver.inverse_many(poses, limits="ignore", threads=1)
    assert one[1].sum() > 1001      # several solutions a pose: a real comparison
    for threads in (2, 3, 7):
        for a, b in zip(one, solver.inverse_many(poses, limits="ignore", threads=threads)):
            assert np.array_equal(a, b), threads
    for bad in (0, -1, 1.5, True, "2"):
        with pytest.raises(ValueError, match="threads must be"):
            solver.inverse_many(poses[:3], threads=bad)


def test_per_pose_calls_from_several_threads_do_not_share_buffers(demos):
    """The wrapper's per-pose calls (inverse, inverse_joints, status) from several threads at once
    on one solver give what one thread gets: cffi releases the GIL during the C call, and each
    thread has its own pose, solution and status buffers (CSolver._buffers). Two threads solve
    different poses, each many times over, and every answer is compared with the one-thread one."""
    import threading
    demo = demos(DEMOS[0])
    solver = demo.solver()
    poses = [p.tolist() for p in demo.chain.poses(demo.regular_readings(40, seed=11))]
    far = [[1.0, 0.0, 0.0, 10.0 * demo.arm.reach_scale()], [0.0, 1.0, 0.0, 0.0], [0.0, 0.0, 1.0, 0.0]]
    expected = {i: (solver.inverse(p, limits="ignore"), solver.inverse_joints(p)) for i, p in enumerate(poses)}
    assert solver.inverse(far, limits="ignore") == [] and solver.status() == 1
    wrong: list = []

    def work(part):
        for _ in range(60):
            for i in part:
                full, readings = expected[i]
                if solver.inverse(poses[i], limits="ignore") != full or solver.status() != 0 \
                        or solver.inverse_joints(poses[i]) != readings:
                    wrong.append(i)
                if solver.inverse(far, limits="ignore") or solver.status() != 1:
                    wrong.append(("far", i))
    threads = [threading.Thread(target=work, args=(range(k, len(poses), 2),)) for k in (0, 1)]
    for t in threads:
        t.start()
    for t in threads:
        t.join()
    assert sum(len(full) for full, _ in expected.values()) > 40 and not wrong, wrong[:10]


def test_inverse_many_refills_the_arrays_it_is_given(demos):
    """inverse_many(..., out=arrays) writes into those arrays (the same objects come back) exactly
    what a call with new arrays returns, every slot: stale values from a pose with more solutions
    are zeroed. Arrays of another shape or type are a clear ValueError."""
    demo = demos(DEMOS[0])
    solver = demo.solver()
    poses = demo.chain.poses(demo.regular_readings(500, seed=9))
    poses[::7, :3, 3] += 10.0 * demo.arm.reach_scale()          # out of reach: rows of zeros
    fresh = solver.inverse_many(poses, limits="ignore")
    assert (fresh[1] == 0).sum() > 50 and fresh[1].sum() > 500
    stale = tuple(np.full_like(a, 7) for a in fresh)
    again = solver.inverse_many(poses, limits="ignore", out=stale)
    assert all(a is b for a, b in zip(again, stale))
    for a, b in zip(fresh, again):
        assert np.array_equal(a, b)
    for bad in (fresh[:3], fresh[0], (fresh[0][:10],) + fresh[1:], (fresh[0].astype(np.float32),) + fresh[1:],
                (np.asfortranarray(fresh[0]),) + fresh[1:]):
        with pytest.raises(ValueError, match="out"):
            solver.inverse_many(poses, limits="ignore", out=bad)


@pytest.mark.parametrize("stem", DEMOS)
def test_c_and_python_agree_at_wrist_singular_poses(demos, stem):
    """Poses with joint 5 at its DH zero (wrist axes 4 and 6 aligned, a singular set, common
    practice for spherical wrists): same solutions with `current` None and set, in each limits
    mode, flagged singular; conditioning within 1e-12 and the same within_limits flags."""
    demo = demos(stem)
    solver = demo.solver()
    readings = random_readings(demo.arm, 100, np.random.default_rng(77))
    readings[:, 4] = wrist_singular_reading(demo.arm)
    flagged = 0
    for q in readings:
        pose = demo.chain.pose(q)
        for current in (None, list(q)):
            for limits in LIMIT_MODES:
                expected = demo.python.inverse(pose, current, limits)
                got = solver.inverse(pose, current, limits)
                assert len(got) == len(expected) > 0
                for (cj, cl, cs, cc, cw), (pj, pl, ps, pc, pw) in zip(got, expected):
                    assert cl == tuple(pl) and cs == ps and cw == pw
                    assert np.abs(np.subtract(cj, pj)).max() <= 1e-12
                    assert np.abs(np.subtract(cc, pc)).max() <= 1e-12
            flagged += any(s[2] for s in got)
    assert flagged == 2 * len(readings)


def verification(demo: Demo):
    if demo.verification is None:
        demo.verification = verify(demo.arm, demo.solver(), samples=2000, seed=4242)
    return demo.verification


@pytest.mark.parametrize("stem", DEMOS)
def test_verify_passes_on_the_c_solver(demos, stem):
    result = verification(demos(stem))
    print(f"{stem}: worst round trip {result.worst_position:.3g} {demos(stem).arm.length_unit}, "
          f"{result.worst_rotation:.3g} rad; counts {result.counts}; singular {result.singular_ok}")
    assert result.passed, result.failures
    assert result.checked >= 1900 and result.complete == result.checked
    assert result.worst_position <= result.position_tolerance
    assert result.unreachable_tested == result.unreachable_ok == 200
    for kind in ("wrist point on the reach boundary (reach_forward / reach_backward)", "elbow fully stretched or folded"):
        assert result.singular_tested[kind] > 0 and result.singular_ok[kind] == result.singular_tested[kind]


def test_verify_tests_wrist_singular_poses(demos):
    """ikgen.verify's singular check reaches the wrist kind too (it once missed roots that fall
    exactly on its search grid, as joint 5's DH zero does for symmetric limits)."""
    result = verification(demos("benchtop6"))
    kind = "wrist axis 4 and axis 6 aligned"
    assert result.singular_tested[kind] > 0 and result.singular_ok[kind] == result.singular_tested[kind]


@pytest.mark.parametrize("stem", DEMOS)
def test_status_codes(demos, stem):
    demo = demos(stem)
    solver = demo.solver()
    pose = demo.chain.pose(demo.regular_readings(1, seed=5)[0])
    assert solver.inverse(pose) and solver.status() == 0
    for bad in (np.full((4, 4), np.nan), np.where(np.eye(4) > 0, np.inf, 0.0)):
        assert solver.inverse(bad) == [] and solver.status() == 2
    one_nan = pose.copy()
    one_nan[1, 2] = np.nan
    assert solver.inverse(one_nan) == [] and solver.status() == 2
    far = pose.copy()
    far[:3, 3] += 100.0 * demo.arm.reach_scale()
    assert solver.inverse(far) == [] and solver.status() == 1
    assert solver.inverse(pose) and solver.status() == 0      # the status follows the last call


@pytest.mark.parametrize("stem", DEMOS)
def test_inverse_rp_equals_inverse(demos, stem):
    demo = demos(stem)
    solver = demo.solver()
    ffi, lib, prefix = solver.ffi, solver.lib, demo.prefix(c_backend.DOUBLE)
    inverse_rp = getattr(lib, f"{prefix}_inverse_rp")
    inverse = getattr(lib, f"{prefix}_inverse")
    size = solver.max_solutions
    readings = demo.regular_readings(200, seed=9)
    compared = 0
    for q, pose in zip(readings, demo.chain.poses(readings)):
        for current in (ffi.NULL, ffi.new("double[]", [float(v) for v in q])):
            for limits in range(3):                     # DROP, FLAG, IGNORE
                a, b = ffi.new(f"{prefix}_solution[{size}]"), ffi.new(f"{prefix}_solution[{size}]")
                status_a, status_b = ffi.new(f"{prefix}_status *"), ffi.new(f"{prefix}_status *")
                count_a = inverse(ffi.new("double[16]", pose.reshape(-1).tolist()), current, limits, a, status_a)
                count_b = inverse_rp(ffi.new("double[3]", pose[:3, 3].tolist()),
                                     ffi.new("double[9]", pose[:3, :3].reshape(-1).tolist()), current, limits, b,
                                     status_b)
                assert count_a == count_b > 0 and status_a[0] == status_b[0] == 0
                # field by field: the struct's padding bytes (after within_limits) are unspecified
                assert solver._reader.read(a, count_a) == solver._reader.read(b, count_b)
                compared += count_a
    assert compared >= 4 * 2 * 2 * len(readings)


# ------------------------------------------------------------------------------ 4. sanitizers

def sanitizer_available(tmp_path: Path) -> None:
    need_compiler("gcc")
    probe = tmp_path / "probe.c"
    probe.write_text("int main(void) { return 0; }\n")
    result = run(["gcc", "-fsanitize=address,undefined", probe, "-o", tmp_path / "probe"])
    if result.returncode != 0:
        pytest.skip(f"gcc's sanitizer runtime is missing (libasan/libubsan): {result.stderr.strip()[:300]}")
    ran = run([tmp_path / "probe"])
    if ran.returncode != 0:
        pytest.skip(f"sanitized programs do not run here: {ran.stderr.strip()[:300]}")


def harness_defines(demo: Demo) -> list[str]:
    sample = demo.regular_readings(1, seed=3)[0]
    singular = sample.copy()
    singular[4] = wrist_singular_reading(demo.arm)
    # joints whose range spans a turn or more at their lower limit: the most equivalent readings
    # for multi-turn joints (inspector6), the -180/180 deg seam for the others
    many = sample.copy()
    turn = 2 * np.pi / float(demo.arm.angle_scale)
    for j, (low, high) in enumerate(demo.python.JOINT_LIMITS):
        if high - low >= turn * (1 - 1e-12):
            many[j] = low
    assert not np.array_equal(many, sample), f"{demo.stem}: no joint spans a turn"
    defines = [f"-DIK_LENGTH_SCALE={float(demo.arm.reach_scale())!r}"]
    for scalar, tag in ((c_backend.DOUBLE, "D"), (c_backend.FLOAT, "F")):
        names = c_backend.names(demo.arm, scalar)
        defines += [f'-DIK_HEADER_{tag}="{names["header"]}"', f"-DIK_PREFIX_{tag}={names['prefix']}",
                    f"-DIK_UPPER_{tag}={names['upper']}", f"-DIK_SAMPLE_{tag}={c_list(sample, scalar)}",
                    f"-DIK_SINGULAR_{tag}={c_list(singular, scalar)}", f"-DIK_MANY_{tag}={c_list(many, scalar)}"]
    return defines


@pytest.mark.parametrize("stem", DEMOS)
def test_sanitized_build_runs_clean(demos, stem, tmp_path):
    """gcc -fsanitize=address,undefined: both precisions, both self-tests and the harness
    (NULL and non-NULL current, NaN/infinite/unreachable poses, inverse_rp, each limits mode,
    distance, sort_nearest and nearest into exact-size buffers, multi-turn joints at their
    limits) run without a report."""
    sanitizer_available(tmp_path)
    demo = demos(stem)
    sources = sorted(demo.folder.glob("*.c")) + [HARNESS / "solver_main.c"]
    exe = tmp_path / f"{stem}_sanitized"
    result = run(["gcc", "-std=c99", "-O1", "-g", "-Wall", "-Wextra", "-Werror", "-fsanitize=address,undefined",
                  "-fno-omit-frame-pointer", "-fno-sanitize-recover=all", "-I", demo.folder, "-I", HARNESS,
                  *harness_defines(demo), *sources, "-lm", "-o", exe])
    assert result.returncode == 0, result.stderr
    env = dict(os.environ, ASAN_OPTIONS="detect_leaks=1:abort_on_error=1",
               UBSAN_OPTIONS="halt_on_error=1:print_stacktrace=1")
    ran = run([exe], env=env)
    print(ran.stdout)
    assert ran.returncode == 0, f"exit {ran.returncode}\n{ran.stdout}\n{ran.stderr}"
    assert "runtime error" not in ran.stderr and "Sanitizer" not in ran.stderr, ran.stderr
    assert "double selftest failures: 0" in ran.stdout and "float selftest failures: 0" in ran.stdout
    assert ran.stdout.strip().splitlines()[-1] == "failures: 0"


# ------------------------------------------------------------------------------ 5. float accuracy

@pytest.fixture(scope="module")
def float_round_trip(demos):
    """Round trip of the float build of packer6 (metres, about 1 m reach) on seeded poses whose
    source readings are farther than 1e-2 from the singular set: FK of every float solution in
    double (NumericChain) against the double pose."""
    demo = demos("packer6")
    assert demo.arm.length_unit == "m"
    solver = demo.solver(c_backend.FLOAT)
    readings = random_readings(demo.arm, 20_000, np.random.default_rng(31337))
    readings = readings[jacobian_distance(demo.chain, readings) > 1e-2]
    poses = demo.chain.poses(readings)
    joints, counts, config, _ = solver.inverse_many(poses)
    index = [(i, k) for i in range(len(poses)) for k in range(counts[i])]
    solutions = np.array([joints[i, k] for i, k in index], dtype=np.float64)
    targets = poses[[i for i, _ in index]]
    achieved = demo.chain.poses(solutions)
    position = np.linalg.norm(achieved[:, :3, 3] - targets[:, :3, 3], axis=1)
    relative = np.einsum("nji,njk->nik", targets[:, :3, :3], achieved[:, :3, :3])
    rotation = Rotation.from_matrix(relative).magnitude()           # scipy: angle of R_target^T R_achieved
    entries = np.abs(achieved[:, :3, :3] - targets[:, :3, :3]).reshape(-1, 9)
    return dict(demo=demo, readings=readings, poses=poses, joints=joints, counts=counts, index=index,
                solutions=solutions, position=position, rotation=rotation, entries=entries)


def describe_worst(data: dict, errors: np.ndarray, what: str, shown: int = 3) -> str:
    demo = data["demo"]
    lines = []
    for w in np.argsort(-errors)[:shown]:
        i, k = data["index"][w]
        entry = int(np.argmax(data["entries"][w]))
        lines.append(f"  {what} {errors[w]:.3g}: pose {i} solution {k}, float readings "
                     f"{np.array2string(data['solutions'][w], precision=5)}, source "
                     f"{np.array2string(data['readings'][i], precision=5)}, worst rotation entry "
                     f"({entry // 3 + 1},{entry % 3 + 1}) off by {data['entries'][w, entry]:.3g}, "
                     f"Jacobian distance of the solution "
                     f"{jacobian_distance(demo.chain, data['solutions'][w][None])[0]:.3g}")
    return "\n".join(lines)


# Bound: IEEE 754-2008 binary32 has a 24-bit significand, unit roundoff u = 2^-24 ~ 6e-8. The
# solver runs about 100 dependent operations from the pose to the readings; a rounding-error
# bound of order n*u (Higham, Accuracy and Stability of Numerical Algorithms, 2nd ed., 3.1; from
# memory) gives ~6e-6, and divisions by determinants that are small but farther than 1e-2 from
# the singular set may amplify that a few times: 2e-5 m on a 1 m arm and 2e-5 rad.
FLOAT_POSITION_BOUND = 2e-5     # m
FLOAT_ROTATION_BOUND = 2e-5     # rad


def test_float_round_trip_within_bound(float_round_trip):
    data = float_round_trip
    worst_position, worst_rotation = float(data["position"].max()), float(data["rotation"].max())
    report = (f"packer6 float build, {len(data['poses'])} poses, {len(data['index'])} solutions: worst "
              f"position {worst_position:.3g} m (99.9th percentile {np.percentile(data['position'], 99.9):.3g}), "
              f"worst rotation {worst_rotation:.3g} rad (99.9th percentile "
              f"{np.percentile(data['rotation'], 99.9):.3g})\n"
              + describe_worst(data, data["position"], "position error (m)") + "\n"
              + describe_worst(data, data["rotation"], "rotation error (rad)"))
    print(report)
    assert len(data["index"]) > 4 * len(data["poses"])
    assert worst_position < FLOAT_POSITION_BOUND and worst_rotation < FLOAT_ROTATION_BOUND, report


def test_float_build_finds_every_solution(float_round_trip):
    """Away from singular sets the float build returns as many solutions as the double build and
    the source readings are among them (1e-3 rad)."""
    data = float_round_trip
    demo = data["demo"]
    _, double_counts, _, _ = demo.solver().inverse_many(data["poses"])
    fewer = np.nonzero(data["counts"] != double_counts)[0]
    revolute = np.array([j.revolute for j in demo.arm.joints])
    missing = []
    for i, q in enumerate(data["readings"]):
        found = data["joints"][i, :data["counts"][i]].astype(np.float64)
        gap = np.abs((found - q + np.pi) % (2 * np.pi) - np.pi)
        gap = np.where(revolute, gap, np.abs(found - q))
        if not (gap.max(axis=1) < 1e-3).any():
            missing.append(i)
    detail = "; ".join(f"pose {i} source {np.array2string(data['readings'][i], precision=4)} "
                       f"float {data['counts'][i]} double {double_counts[i]}" for i in list(fewer)[:5])
    assert len(fewer) == 0 and not missing, \
        f"{len(fewer)} poses with fewer solutions, {len(missing)} without their source readings: {detail}"


# ------------------------------------------------------------------------------ 6. self-tests

def build_selftest(demo: Demo, scalar, folder: Path, out: Path, extra: list[str] = ()) -> Path:
    need_compiler("gcc")
    prefix = demo.prefix(scalar)
    exe = out / f"{prefix}_selftest"
    result = run(["gcc", *STRICT_C, "-O2", *extra, "-I", folder, f"-DIK_PREFIX={prefix}",
                  folder / f"{prefix}.c", folder / f"{prefix}_selftest.c", HARNESS / "selftest_main.c",
                  "-lm", "-o", exe])
    assert result.returncode == 0, result.stderr
    return exe


def selftest_failures(exe: Path) -> tuple[int, int]:
    ran = run([exe])
    match = re.search(r"selftest failures: (\d+)", ran.stdout)
    assert match, ran.stdout + ran.stderr
    return int(match.group(1)), ran.returncode


@pytest.mark.parametrize("scalar", [c_backend.DOUBLE, c_backend.FLOAT], ids=["double", "float"])
@pytest.mark.parametrize("stem", DEMOS)
def test_selftest_passes(demos, stem, scalar, tmp_path):
    demo = demos(stem)
    failures, code = selftest_failures(build_selftest(demo, scalar, demo.folder, tmp_path))
    assert failures == 0 and code == 0


@pytest.mark.parametrize("scalar", [c_backend.DOUBLE, c_backend.FLOAT], ids=["double", "float"])
def test_selftest_detects_a_wrong_solver(demos, scalar, tmp_path):
    """The self-test can fail: a solver whose joint 1 reading is off by 0.5 (deg) fails it."""
    demo = demos("benchtop6")
    prefix = demo.prefix(scalar)
    source = (demo.folder / f"{prefix}.c").read_text(encoding="utf-8")
    literal = "0.5f" if scalar is c_backend.FLOAT else "0.5"
    mutated = source.replace("out->joints[0] = ", f"out->joints[0] = {literal} + ")
    assert mutated != source
    for name in (f"{prefix}.h", f"{prefix}_selftest.c"):
        shutil.copy(demo.folder / name, tmp_path / name)
    (tmp_path / f"{prefix}.c").write_text(mutated, encoding="utf-8")
    failures, code = selftest_failures(build_selftest(demo, scalar, tmp_path, tmp_path))
    assert failures > 0 and code == 1


# ------------------------------------------------------------------------------ 7. hostile names

def benchtop6_data() -> dict:
    with open(EXAMPLES / "benchtop6.toml", "rb") as stream:
        return tomllib.load(stream)


HOSTILE = {
    "keyword": dict(
        name="int",
        description='line one\nline two */ int evil; /* """ \\ \' "q"\n#define EVIL 1\n#include <stdio.h>',
        joints=['it\'s "quoted"', "*/ int evil = 1; /*", "#include <stdio.h>", "back\\slash\\",
                "Gelenk-Ä", "机械臂"]),
    "digit": dict(
        name="6 \"arm\" */ #define X /* \\ 'q' Ä",
        description="*/",
        joints=["int", "return 0; }", '"""', "'''", "\\n not a newline", "# x"]),
    "unicode": dict(
        name="机械臂",
        description="检查臂 \\\" */",
        joints=["关节1", "关节2", "关节3", "关节4", "关节5", "关节6"]),
}


def hostile_arm(kind: str):
    data = benchtop6_data()
    spec = HOSTILE[kind]
    data["arm"]["name"] = spec["name"]
    data["arm"]["description"] = spec["description"]
    for joint, name in zip(data["joint"], spec["joints"]):
        joint["name"] = name
    return arm_from_data(data)


@pytest.fixture(scope="module")
def hostile(demos, tmp_path_factory):
    cache: dict = {}

    def get(kind: str):
        if kind not in cache:
            arm = hostile_arm(kind)
            result = build_code(arm)       # every code file (the report's escaping: tests/test_report.py)
            root = tmp_path_factory.mktemp(f"hostile-{kind}")
            write(result.files, root)
            cache[kind] = (arm, result, root / result.folder)
        return cache[kind]

    return get


def normalised_code(text: str, prefixes: dict[str, str]) -> str:
    """The C code without comments, with the arm's name prefixes replaced, whitespace collapsed."""
    code, _ = split_comments(text)
    for prefix, placeholder in prefixes.items():
        code = re.sub(r"\b" + re.escape(prefix) + r"(?![A-Za-z0-9])", placeholder, code)
    return " ".join(code.split())


def blank_strings(source: str) -> str:
    class Blank(ast.NodeTransformer):
        def visit_Constant(self, node):
            return ast.copy_location(ast.Constant(""), node) if isinstance(node.value, str) else node
    return ast.dump(Blank().visit(ast.parse(source)))


def name_prefixes(arm) -> dict[str, str]:
    out = {}
    for scalar in (c_backend.FLOAT, c_backend.DOUBLE):       # the longer (_f32) prefix first
        names = c_backend.names(arm, scalar)
        out[names["prefix"]] = f"PREFIX{scalar.suffix}"
        out[names["upper"]] = f"UPPER{scalar.suffix}"
    return out


def test_loader_refuses_a_newline_escape_in_a_name(tmp_path):
    """TOML (v1.0.0, 'String') turns "\\n" into a newline; the loader refuses it with the field."""
    path = tmp_path / "newline.toml"
    text = (EXAMPLES / "benchtop6.toml").read_text(encoding="utf-8")
    path.write_text(text.replace('name = "benchtop6"', 'name = "bench\\ntop6"'), encoding="utf-8")
    with pytest.raises(ArmFileError) as caught:
        load_arm(path)
    message = str(caught.value)
    assert "name" in message and "control characters" in message and str(path) in message


@pytest.mark.parametrize("variant", list(COMPILE_VARIANTS))
@pytest.mark.parametrize("kind", list(HOSTILE))
def test_hostile_names_compile_strictly(hostile, kind, variant, tmp_path):
    _, _, folder = hostile(kind)
    assert_strict_compile(variant, folder, tmp_path)


@pytest.mark.parametrize("kind", list(HOSTILE))
def test_hostile_names_stay_in_comments(demos, hostile, kind):
    """Identifiers are plain C/Python identifiers; user text reaches only comments and strings:
    with comments removed and the name prefix replaced, the C equals the plain benchtop6's; the
    Python's syntax tree (strings blanked) equals the plain one's; no comment closes early; no
    line starts with '#' but the real preprocessor lines."""
    arm, result, folder = hostile(kind)
    plain = demos("benchtop6")
    prefixes = name_prefixes(arm)
    for prefix in prefixes:
        assert IDENTIFIER.fullmatch(prefix), prefix
    assert IDENTIFIER.fullmatch(result.folder)
    plain_prefixes = name_prefixes(plain.arm)
    c_files = {r: t for r, t in result.files.items() if r.endswith((".c", ".h"))}
    assert len(c_files) == 6
    for relative, text in c_files.items():
        plain_name = Path(relative).name.replace(result.folder, "benchtop6", 1)
        plain_text = (plain.folder / plain_name).read_text(encoding="utf-8")
        assert normalised_code(text, prefixes) == normalised_code(plain_text, plain_prefixes), relative
        _, comments = split_comments(text)
        assert not [c for c in comments if "/*" in c], f"{relative}: a comment opens another"
        for line in text.splitlines():
            if line.lstrip().startswith("#"):
                assert PREPROCESSOR.match(line), f"{relative}: stray line {line!r}"
        for name in re.findall(r"^#define\s+(\S+)", text, re.M):
            assert IDENTIFIER.fullmatch(name), name
    python_source = result.files[result.python_path]
    assert blank_strings(python_source) == blank_strings(plain.build.files[plain.build.python_path])
    module = load_module(python_source, f"hostile_{kind}")
    assert module.ARM_NAME.isidentifier() and len(module.JOINT_NAMES) == 6
    for name in module.JOINT_NAMES:
        assert name.isascii() and not set(name) & set("\"\\\n")


@pytest.mark.parametrize("kind", list(HOSTILE))
def test_hostile_names_solve_like_plain_names(demos, hostile, kind, tmp_path):
    arm, result, _ = hostile(kind)
    plain = demos("benchtop6")
    readings = random_readings(arm, 2000, np.random.default_rng(8))
    poses = plain.chain.poses(readings)
    solver = compile_solver(arm, result.derivation, c_backend.DOUBLE, tmp_path / "cffi")
    got = solver.inverse_many(poses)
    expected = plain.solver().inverse_many(poses)
    for a, b in zip(got, expected):
        assert np.array_equal(a, b)
    module = load_module(result.files[result.python_path], f"hostile_{kind}_solve")
    for pose in poses[:300]:
        assert module.inverse(pose) == plain.python.inverse(pose)


def test_digit_name_gives_unreserved_c_identifiers(hostile, tmp_path):
    """C99 7.1.3: identifiers that begin with an underscore are reserved at file scope; a name
    that starts with a digit must not produce one (clang -Wreserved-identifier reports them)."""
    need_compiler("clang")
    _, _, folder = hostile("digit")
    sources = sorted(folder.glob("*.c"))
    result = run(["clang", *STRICT_C, "-Wreserved-identifier", "-I", folder, "-c", *sources], cwd=tmp_path)
    assert result.returncode == 0, result.stderr[:2000]
