"""The optional atan2 kernel of the generated C, checked on its own: what the accuracy script
(tools/atan2/accuracy.py), the unit test (tests/test_atan2_kernel.py) and the speed benchmark
(benchmarks/bench_atan2.py) share.

- ``kernel_source``: templates/c_atan2.c.j2 rendered alone for one scalar type (as it appears in
  every generated source, under a fixed prefix);
- ``build_evaluator`` / ``evaluate``: a small C program (gcc -O2 -DIKGEN_FAST_ATAN2) that reads
  argument pairs (y, x) from a binary file and writes the kernel's atan2 of each;
- ``arguments``: a deterministic mix of arguments (seeded), ``edge_cases``: the special and
  boundary cases, ``annex_f``: C99 Annex F.9.1.4's result for a special case;
- ``ulp_errors``: the error of each result in units in the last place of the exact atan2,
  computed with mpmath (the outside reference) at 100 bits.
"""

from __future__ import annotations

import math
import os
import subprocess
import sys
from concurrent.futures import ProcessPoolExecutor
from pathlib import Path

import mpmath
import numpy as np

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT))

from ikgen.backends import c as c_backend  # noqa: E402
from ikgen.backends.common import environment  # noqa: E402

PREFIXES = {"double": "kernel", "float": "kernel_f32"}
DTYPES = {"double": np.float64, "float": np.float32}
# IEEE 754-2008 3.3 table 3.2 / 3.5: precision p (bits), emin, so ulp(v) = 2^(max(e, emin) - p + 1)
FORMATS = {"double": (53, -1022), "float": (24, -126)}

HARNESS = r"""
#include <math.h>
#include <stdio.h>
#include <stdlib.h>

#include "kernel.inc"

/* evaluator IN OUT: IN holds pairs (y, x) of REAL, OUT gets the kernel's atan2(y, x) of each. */
int main(int argc, char **argv)
{
    if (argc != 3) {
        fprintf(stderr, "usage: evaluator IN OUT\n");
        return 2;
    }
    FILE *in = fopen(argv[1], "rb");
    FILE *out = fopen(argv[2], "wb");
    if (!in || !out) {
        fprintf(stderr, "evaluator: cannot open the files\n");
        return 2;
    }
    REAL pair[2];
    while (fread(pair, sizeof pair, 1, in) == 1) {
        const REAL r = ATAN2(pair[0], pair[1]);
        if (fwrite(&r, sizeof r, 1, out) != 1) {
            return 2;
        }
    }
    return fclose(out) == 0 ? 0 : 2;
}
"""


def kernel_source(real: str) -> str:
    """templates/c_atan2.c.j2 rendered for ``real`` ("double" or "float") with the prefix
    PREFIXES[real]: it defines <prefix>_atan2 (the kernel with IKGEN_FAST_ATAN2, else the library's)."""
    scalar = c_backend.DOUBLE if real == "double" else c_backend.FLOAT
    printer = c_backend.SolverCPrinter(scalar)
    return environment().get_template("c_atan2.c.j2").render(
        real=real, num=printer.number, names={"prefix": PREFIXES[real]})


def build_evaluator(real: str, folder: Path, source: str | None = None, flags=("-O2",)) -> Path:
    """Compile the evaluator for ``real`` into ``folder`` (gcc); ``source`` replaces the kernel text."""
    folder.mkdir(parents=True, exist_ok=True)
    (folder / "kernel.inc").write_text(source if source is not None else kernel_source(real), encoding="utf-8")
    (folder / "evaluator.c").write_text(HARNESS, encoding="utf-8")
    exe = folder / f"evaluator_{real}"
    command = ["gcc", "-std=c99", *flags, "-Wall", "-Wextra", "-Werror", "-DIKGEN_FAST_ATAN2", f"-DREAL={real}", f"-DATAN2={PREFIXES[real]}_atan2",
               "-I", str(folder), str(folder / "evaluator.c"), "-lm", "-o", str(exe)]
    done = subprocess.run(command, capture_output=True, text=True)
    if done.returncode != 0:
        raise RuntimeError(f"`{' '.join(command)}` failed:\n{done.stderr}")
    return exe


def evaluate(exe: Path, real: str, y: np.ndarray, x: np.ndarray, folder: Path) -> np.ndarray:
    """The kernel's atan2(y, x) of every pair, through the compiled evaluator."""
    dtype = DTYPES[real]
    pairs = np.empty((len(y), 2), dtype=dtype)
    pairs[:, 0], pairs[:, 1] = y, x
    source, target = folder / "args.bin", folder / "results.bin"
    pairs.tofile(source)
    done = subprocess.run([str(exe), str(source), str(target)], capture_output=True, text=True)
    if done.returncode != 0:
        raise RuntimeError(f"evaluator failed: {done.stderr}")
    out = np.fromfile(target, dtype=dtype)
    if len(out) != len(y):
        raise RuntimeError(f"evaluator wrote {len(out)} results for {len(y)} pairs")
    return out


# ------------------------------------------------------------------------------ arguments

def random_bits(rng, count: int, real: str) -> np.ndarray:
    """Values with uniformly random bit patterns, NaN and infinities excluded (every binade,
    subnormals and both signs alike)."""
    if real == "double":
        values = rng.integers(0, 2 ** 64, size=count, dtype=np.uint64).view(np.float64)
    else:
        values = rng.integers(0, 2 ** 32, size=count, dtype=np.uint64).astype(np.uint32).view(np.float32)
    values = values.copy()
    values[~np.isfinite(values)] = 1.0
    return values


def arguments(count: int, real: str, seed: int = 20261203) -> tuple[np.ndarray, np.ndarray]:
    """``count`` seeded pairs (y, x): a quarter on the circle with magnitudes over 2^+-40, a
    quarter with random bit patterns (huge and tiny ratios, subnormals), a quarter close to the
    kernel's region thresholds and to x = +-y (a few ulps off), a quarter near the axes (ratios
    2^-1..2^-60) and pairs of subnormals."""
    dtype = DTYPES[real]
    rng = np.random.default_rng(seed)
    part = count // 4
    angle = rng.uniform(-math.pi, math.pi, part)
    radius = np.exp2(rng.uniform(-40, 40, part))
    circle = (radius * np.sin(angle), radius * np.cos(angle))
    bits = (random_bits(rng, part, real), random_bits(rng, part, real))
    # thresholds of z = lo / hi: tan(1/4), (sqrt(10) - 1) / 3 and 1 (x = +-y), nudged by a few ulps
    ratio = rng.choice([0.25534192122103627, 0.72075922005612647, 1.0, 0.5, 0.25], part)
    hi = np.exp2(rng.uniform(-30, 30, part)).astype(dtype)
    lo = (ratio * hi).astype(dtype)
    nudge = rng.integers(-8, 9, part)
    lo = np.nextafter(lo, np.where(nudge > 0, np.inf, -np.inf).astype(dtype))
    for _ in range(3):
        step = np.abs(nudge) > 1
        lo = np.where(step, np.nextafter(lo, np.where(nudge > 0, np.inf, -np.inf).astype(dtype)), lo)
        nudge = np.where(step, nudge - np.sign(nudge), nudge)
    boundary = swap_and_sign(rng, lo, hi)
    rest = count - 3 * part
    small = rng.integers(0, 2, rest).astype(bool)
    axis_hi = np.exp2(rng.uniform(-20, 20, rest))
    axis_lo = axis_hi * np.exp2(-rng.uniform(1, 60, rest))
    tiny = random_bits(rng, rest, real)
    subnormal = np.finfo(dtype).smallest_normal * rng.uniform(0, 1, rest)
    axis_lo = np.where(small, subnormal, axis_lo).astype(dtype)
    axis_hi = np.where(small, np.abs(tiny) % np.finfo(dtype).smallest_normal + np.finfo(dtype).smallest_subnormal,
                       axis_hi).astype(dtype)
    axis = swap_and_sign(rng, axis_lo, axis_hi)
    y = np.concatenate([circle[0], bits[0], boundary[0], axis[0]]).astype(dtype)
    x = np.concatenate([circle[1], bits[1], boundary[1], axis[1]]).astype(dtype)
    return y, x


def swap_and_sign(rng, lo, hi):
    """(y, x) from magnitudes lo <= hi: randomly which one is y, each with a random sign."""
    swap = rng.integers(0, 2, len(lo)).astype(bool)
    y, x = np.where(swap, lo, hi), np.where(swap, hi, lo)
    return y * rng.choice([-1, 1], len(lo)), x * rng.choice([-1, 1], len(lo))


def edge_cases(real: str) -> tuple[np.ndarray, np.ndarray]:
    """Every pair of the special values (signed zeros, infinities, NaN, the smallest subnormal,
    the smallest normal, the largest finite, 1, 2^+-600), plus x = +-y at several scales."""
    info = np.finfo(DTYPES[real])
    special = [0.0, math.inf, math.nan, float(info.smallest_subnormal), float(info.smallest_normal),
               float(info.max), 1.0, 3.0, 2.0 ** -60, 2.0 ** 60]
    if real == "double":
        special += [2.0 ** -600, 2.0 ** 600, 2.0 ** -1000, 2.0 ** 1000]
    values = [v for s in special for v in (s, -s)]
    y = [a for a in values for _ in values]
    x = [b for _ in values for b in values]
    for scale in (info.smallest_subnormal, info.smallest_normal, 1e-30, 1.0, 1e30, float(info.max)):
        for sy in (1, -1):
            for sx in (1, -1):
                y.append(sy * float(scale))
                x.append(sx * float(scale))
    dtype = DTYPES[real]
    return np.array(y, dtype=dtype), np.array(x, dtype=dtype)


def annex_f(y: float, x: float, real: str):
    """C99 Annex F.9.1.4's atan2(y, x) rounded to ``real`` when one argument is a zero, an
    infinity or a NaN; None otherwise."""
    exact = _annex_f_exact(y, x)
    if exact is None:
        return None
    return float(exact) if real == "double" else float(np.float32(float(exact)))


def _annex_f_exact(y: float, x: float):
    if math.isnan(x) or math.isnan(y):
        return math.nan
    pi = mpmath.pi
    sign = -1 if math.copysign(1.0, y) < 0 else 1
    negative_x = math.copysign(1.0, x) < 0
    zero = math.copysign(0.0, y)       # mpmath has no signed zero
    if y == 0:
        return sign * pi if negative_x else zero
    if x == 0:
        return sign * pi / 2
    if math.isinf(y):
        if math.isinf(x):
            return sign * (3 * pi / 4 if negative_x else pi / 4)
        return sign * pi / 2
    if math.isinf(x):
        return sign * pi if negative_x else zero
    return None


# ------------------------------------------------------------------------------ errors against mpmath

def _reference_chunk(args) -> tuple[np.ndarray, np.ndarray]:
    """(high, low) double parts of the exact atan2 of each pair, mpmath at 100 bits."""
    y, x = args
    mpmath.mp.prec = 100
    high = np.empty(len(y))
    low = np.empty(len(y))
    for k, (a, b) in enumerate(zip(y.tolist(), x.tolist())):
        exact = mpmath.atan2(a, b)
        high[k] = float(exact)
        low[k] = float(exact - high[k])
    return high, low


def reference(y: np.ndarray, x: np.ndarray, workers: int = 1, chunk: int = 50_000) -> tuple[np.ndarray, np.ndarray]:
    """The exact atan2 of finite pairs as a double-double (high + low), computed with mpmath;
    ``workers`` processes share the work."""
    pieces = [(y[k:k + chunk].astype(np.float64), x[k:k + chunk].astype(np.float64))
              for k in range(0, len(y), chunk)]
    if workers > 1 and len(pieces) > 1:
        with ProcessPoolExecutor(max_workers=workers) as pool:
            parts = list(pool.map(_reference_chunk, pieces))
    else:
        parts = [_reference_chunk(p) for p in pieces]
    return np.concatenate([p[0] for p in parts]), np.concatenate([p[1] for p in parts])


def ulp_of(high: np.ndarray, low: np.ndarray, real: str) -> np.ndarray:
    """The spacing of ``real`` numbers in the binade of the exact value high + low (|low| is below
    half an ulp of high; subnormals: the smallest subnormal)."""
    precision, emin = FORMATS[real]
    mantissa, exponent = np.frexp(np.abs(high))    # |high| = m 2^exponent, 0.5 <= m < 1
    # high a power of two with the exact value just below it: the binade below
    exponent = np.where((mantissa == 0.5) & (np.sign(low) == -np.sign(high)), exponent - 1, exponent)
    return np.exp2(np.maximum(exponent - 1, emin) - precision + 1)


def ulp_errors(computed: np.ndarray, high: np.ndarray, low: np.ndarray, real: str) -> np.ndarray:
    """|computed - exact| in ulps of the exact value's binade in ``real``."""
    c = computed.astype(np.float64)
    return np.abs((c - high) - low) / ulp_of(high, low, real)


def default_workers() -> int:
    return max(1, min(2, os.cpu_count() or 1))
