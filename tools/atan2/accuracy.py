"""Accuracy of the generated C's optional atan2 kernel (templates/c_atan2.c.j2) against mpmath.

For double and float: --count seeded arguments (tools/atan2/kernel_check.py `arguments`: the
circle over 2^+-40, random bit patterns with huge and tiny ratios and subnormals, the kernel's
region thresholds and x = +-y a few ulps off, near the axes) plus every edge case
(`edge_cases`), through the kernel compiled by gcc -O2 -DIKGEN_FAST_ATAN2. Each finite result is
compared with mpmath's atan2 at 100 bits (the outside reference) in ulps of the exact value's
binade; each special case (a zero, an infinity or a NaN among the arguments) must equal C99 Annex
F.9.1.4's value exactly, sign of zero included. Prints the worst error, where, and the count of
results per half-ulp band; numpy's arctan2 on the same
arguments beside it (for comparison only: numpy may use its own SIMD code instead of libm). Exit status 1 when an error exceeds 2 ulps or a special case differs.

Run:  python3 tools/atan2/accuracy.py [--count 10000000] [--workers 2]
mpmath runs at about 16 us an argument here: 10^7 arguments take several minutes a type.
"""

from __future__ import annotations

import argparse
import math
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent))

import kernel_check  # noqa: E402

BANDS = (0.0, 0.5, 1.0, 1.5, 2.0, math.inf)
BOUND = 2.0


def special_mismatches(y: np.ndarray, x: np.ndarray, results: np.ndarray, real: str) -> tuple[list, np.ndarray]:
    """(pairs whose result differs from Annex F's, mask of the special pairs)."""
    bad, special = [], np.zeros(len(y), dtype=bool)
    for k, (a, b, r) in enumerate(zip(y.tolist(), x.tolist(), results.tolist())):
        want = kernel_check.annex_f(a, b, real)
        if want is None:
            continue
        special[k] = True
        same = (math.isnan(want) and math.isnan(r)) or (want == r and math.copysign(1, want) == math.copysign(1, r))
        if not same:
            bad.append((a, b, r, want))
    return bad, special


def band_counts(errors: np.ndarray) -> str:
    counts = np.histogram(errors, bins=BANDS)[0]
    return ", ".join(f"[{lo:g}, {hi:g}) {n}" for lo, hi, n in zip(BANDS[:-1], BANDS[1:], counts))


def check(real: str, count: int, workers: int, folder: Path) -> bool:
    started = time.perf_counter()
    exe = kernel_check.build_evaluator(real, folder / real)
    y, x = kernel_check.arguments(count, real)
    ey, ex = kernel_check.edge_cases(real)
    y, x = np.concatenate([y, ey]), np.concatenate([x, ex])
    results = kernel_check.evaluate(exe, real, y, x, folder / real)
    bad, special = special_mismatches(y, x, results, real)
    finite = ~special
    high, low = kernel_check.reference(y[finite], x[finite], workers=workers)
    errors = kernel_check.ulp_errors(results[finite], high, low, real)
    library = np.arctan2(y[finite], x[finite])
    library_errors = kernel_check.ulp_errors(library, high, low, real)
    worst = int(np.argmax(errors))
    fy, fx = y[finite].tolist(), x[finite].tolist()
    fr = results[finite].tolist()
    print(f"{real}: {len(y):,} arguments ({count:,} seeded + {len(ey)} edge cases), "
          f"{int(special.sum())} special, {time.perf_counter() - started:.0f} s")
    print(f"  kernel: worst {errors[worst]:.3f} ulp at atan2({fy[worst]!r}, {fx[worst]!r}) = {fr[worst]!r}; "
          f"mean {errors.mean():.3f}")
    print(f"  kernel, results per band of ulps: {band_counts(errors)}")
    lw = int(np.argmax(library_errors))
    print(f"  numpy.arctan2 for comparison (numpy {np.__version__}; its float32 path may be numpy's own): "
          f"worst {library_errors[lw]:.3f} ulp "
          f"at atan2({fy[lw]!r}, {fx[lw]!r}); mean {library_errors.mean():.3f}")
    print(f"  special cases (C99 Annex F.9.1.4): {int(special.sum()) - len(bad)} of {int(special.sum())} exact")
    for a, b, r, want in bad[:10]:
        print(f"    atan2({a!r}, {b!r}) = {r!r}, Annex F: {want!r}")
    return errors[worst] <= BOUND and not bad


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--count", type=int, default=10_000_000)
    parser.add_argument("--workers", type=int, default=kernel_check.default_workers())
    parser.add_argument("--type", choices=("double", "float", "both"), default="both")
    args = parser.parse_args()
    kinds = ("double", "float") if args.type == "both" else (args.type,)
    with tempfile.TemporaryDirectory() as folder:
        ok = [check(real, args.count, args.workers, Path(folder)) for real in kinds]
    print(f"bound {BOUND:g} ulp and exact special cases: {'met' if all(ok) else 'NOT met'}")
    return 0 if all(ok) else 1


if __name__ == "__main__":
    sys.exit(main())
