"""Benchmark: a large random-arm sweep through generation and verification.

Draws arms within every structure the derivation engine accepts (tests/arm_draws.py: six-axis
spherical wrists with right-angle or general shoulder twists, three parallel axes with an offset
wrist, the first three axes meeting, and the shorter RRR, RRP, RPP, PPP, SCARA and five-joint arms),
generates each one's solver and verifies it against the precision contract (ikgen.verify), and
prints per structure how many were accepted (generated and verified), refused (a structure
diagnosis, ikgen.errors.StructureError) and failed (a generated solver that fails verification, or
an error), with the time spent. Failed arms are printed in full to reproduce them.

Run:  python3 benchmarks/sweep_arms.py [--arms 220] [--samples 300] [--seed 16] [--limit 180]
The time depends on the machine and its load (each arm's derivation takes seconds).
"""

from __future__ import annotations

import argparse
import signal
import sys
import time
from collections import defaultdict
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))
sys.path.insert(0, str(ROOT / "tests"))

from arm_draws import STRUCTURES, Draw, arm_text, outcome  # noqa: E402


class TooLong(BaseException):        # not an Exception: outcome() must not catch it
    pass


def timed_outcome(arm, samples: int, limit: int):
    """outcome() of one arm, or a failure when it takes more than ``limit`` seconds (a derivation
    that does not finish is a finding too, and must not stop the sweep)."""
    def expire(signum, frame):
        raise TooLong()
    previous = signal.signal(signal.SIGALRM, expire)
    signal.alarm(limit)
    started = time.perf_counter()
    try:
        return outcome(arm, samples)
    except TooLong:
        return "failed", f"did not finish within {limit} s", time.perf_counter() - started
    finally:
        signal.alarm(0)
        signal.signal(signal.SIGALRM, previous)


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--arms", type=int, default=220, help="arms in all, spread evenly over the structures")
    parser.add_argument("--samples", type=int, default=300, help="verification samples per arm")
    parser.add_argument("--seed", type=int, default=16)
    parser.add_argument("--limit", type=int, default=180,
                        help="seconds an arm may take (derivation and verification) before it counts as failed")
    args = parser.parse_args(argv)
    rng = np.random.default_rng(args.seed)
    names = list(STRUCTURES)
    counts = defaultdict(lambda: {"accepted": 0, "refused": 0, "failed": 0, "seconds": 0.0})
    failures, refusals = [], defaultdict(set)
    started = time.perf_counter()
    for index in range(args.arms):
        name = names[index % len(names)]
        arm = STRUCTURES[name](Draw(rng))
        kind, sentence, seconds = timed_outcome(arm, args.samples, args.limit)
        counts[name][kind] += 1
        counts[name]["seconds"] += seconds
        if kind == "failed":
            failures.append((name, sentence, arm_text(arm)))
        elif kind == "refused":
            refusals[name].add(sentence[:160])
        print(f"[{index + 1}/{args.arms}] {name}: {kind} ({seconds:.1f} s) {sentence[:120]}", file=sys.stderr, flush=True)
    total = time.perf_counter() - started
    print(f"random-arm sweep: {args.arms} arms, {args.samples} verification samples each, seed {args.seed}, "
          f"{total:.0f} s in all")
    print(f"{'structure':44s} {'arms':>5s} {'accepted':>9s} {'refused':>8s} {'failed':>7s} {'s/arm':>7s}")
    for name in names:
        c = counts[name]
        arms = c["accepted"] + c["refused"] + c["failed"]
        if arms:
            print(f"{name:44s} {arms:5d} {c['accepted']:9d} {c['refused']:8d} {c['failed']:7d} {c['seconds'] / arms:7.1f}")
    totals = {k: sum(c[k] for c in counts.values()) for k in ("accepted", "refused", "failed")}
    print(f"{'all':44s} {args.arms:5d} {totals['accepted']:9d} {totals['refused']:8d} {totals['failed']:7d} "
          f"{total / max(args.arms, 1):7.1f}")
    for name, sentences in refusals.items():
        for sentence in sorted(sentences):
            print(f"refused ({name}): {sentence}")
    for name, sentence, text in failures:
        print(f"FAILED ({name}): {sentence}\n{text}")
    return 1 if failures else 0


if __name__ == "__main__":
    sys.exit(main())
