"""The generation subcommands of ``ikgen``: generate (with --check), verify, explain, compile."""

from __future__ import annotations

import argparse
import os
import sys
import time
from pathlib import Path

from .armsource import ARM_HELP, add_arm_source_options, load_arm_source, load_arm_sources
from .backends.common import identifier
from .errors import PATH_LIMIT, IkgenError, VerificationError, clip, quote
from .exact import plain_whole
from .generate import build, build_report, load_module, stale, write
from .terminal import err, out, table
from .verify import (ROUND_TRIP_TOLERANCE, SINGULAR_DISTANCE, SOLUTION_BUDGET, Verification, band_rows, verify,
                     workload_note)

MAX_SAMPLES = 1_000_000     # verification samples (-n): beyond this the poses alone need gigabytes


def warn_workload(arm) -> None:
    """A warning up front when the arm's limits give very many solutions per pose."""
    note = workload_note(arm)
    if note:
        err(f"warning: {note}")


def load_checked(path: str, args=None):
    """The arm of an arm file or URDF (see armsource.py), with the workload warning."""
    arm = load_arm_source(path, args)
    warn_workload(arm)
    return arm


def load_arms(paths: list[str], args=None) -> list:
    """Every arm validated, and refused when two arms would write into one output folder
    (names are reduced to letters, digits and _ for folder and file names: 'Arm 1' and 'arm-1'
    are both arm_1), before anything is derived or written."""
    arms = load_arm_sources(paths, args)
    for arm in arms:
        warn_workload(arm)
    seen: dict[str, int] = {}
    for index, arm in enumerate(arms):
        folder = identifier(arm.name)
        if folder in seen:
            first = seen[folder]
            same = Path(paths[first]).resolve() == Path(paths[index]).resolve()
            raise IkgenError(
                f"{clip(paths[first], PATH_LIMIT)} and {clip(paths[index], PATH_LIMIT)}: "
                + ("the same file is named twice" if same else
                   f"the arm names {quote(arms[first].name)} and {quote(arm.name)} both give the output "
                   f"folder '{folder}'")
                + "; expected arms whose names differ in their letters or digits (nothing was written)")
        seen[folder] = index
    return arms


def write_or_check(results: list, out_dir: str, check: bool, what: str, fresh: str, describe) -> int:
    """The tail of generate and explain: with ``check``, list the stale files (exit 1); otherwise
    write every arm's files in one all-or-nothing step and say what was written."""
    if check:
        changed = [path for result, _ in results for path in stale(result.files, out_dir)]
        for path in changed:
            err(f"stale: {out_dir}/{path}")
        if changed:
            err(f"ikgen: {len(changed)} {what} file(s) differ from a fresh {fresh}; run without --check")
            return 1
        out(f"up to date: {sum(len(r.files) for r, _ in results)} {what + ' ' if what != 'generated' else ''}"
            f"file(s) in {out_dir}")
        return 0
    written = write({path: text for result, _ in results for path, text in result.files.items()}, out_dir)
    for result, seconds in results:
        out(describe(result, seconds))
        folder = os.path.join(out_dir, result.folder)
        for path in written:
            if os.path.dirname(str(path)) == folder:
                out(f"  wrote {path}")
    return 0


def timed(make, arm):
    started = time.perf_counter()
    result = make(arm)
    return result, time.perf_counter() - started


def cmd_generate(args) -> int:
    arms = load_arms(args.arms, args)                         # every file validated before anything is written
    results = [timed(build, arm) for arm in arms]       # every arm derived before anything is written
    return write_or_check(results, args.out, args.check, "generated", "generation",
                          lambda r, seconds: f"{r.arm.name}: {r.derivation.family}; target: "
                                             f"{target_words(r.derivation.target)}; at most "
                                             f"{r.derivation.max_solutions} solutions, derived in {seconds:.2f} s")


def target_words(target) -> str:
    from .engine.targets import words
    return words(target) if target is not None else "the full pose of the tool"


def count_summary(counts: dict, shown: int = 12) -> str:
    """'count: samples' pairs, or, when there are many different counts, their range and the
    most frequent ones."""
    pairs = sorted(counts.items())
    if len(pairs) <= shown:
        return ", ".join(f"{k}: {v}" for k, v in pairs)
    common = sorted(pairs, key=lambda kv: (-kv[1], kv[0]))[:3]
    return (f"{len(pairs)} different counts from {pairs[0][0]} to {pairs[-1][0]}; most frequent "
            + ", ".join(f"{k}: {v}" for k, v in common))


def print_verification(report: Verification, unit: str) -> None:
    out(f"verification of '{report.arm}': {report.samples} samples (seed {report.seed}), {report.seconds:.1f} s")
    if report.requested > report.samples:
        out(f"  ({report.samples:,} instead of the default {report.requested:,} samples: a pose can have up to "
            f"{report.per_pose:,} solutions, and the default work is bounded; -n N runs N samples)")
    counts = count_summary(report.counts)
    rows = [
        ["completeness", f"{report.complete}/{report.checked} ({100 * report.completeness:.2f} %)",
         "100 %", f"samples farther than {SINGULAR_DISTANCE:g} from the singular set"],
        ["worst position error", f"{report.worst_position:.3g} {unit}", f"{report.position_tolerance:.3g} {unit}",
         "FK of every returned solution vs the pose"],
        ["worst rotation error", f"{report.worst_rotation:.3g} rad", f"{ROUND_TRIP_TOLERANCE:g} rad", ""],
        ["solution counts", counts, "", "number of solutions: number of samples"],
        ["unreachable poses", f"{report.unreachable_ok}/{report.unreachable_tested} empty", "all", ""],
    ]
    for kind, tested in report.singular_tested.items():
        ok = report.singular_ok.get(kind, 0)
        rows.append([f"singular: {kind}", f"{ok}/{tested} reproduced" if tested else "none in limits", "all", ""])
    rows.append(["worst error at singular poses",
                 f"{report.worst_singular_position:.3g} {unit}, {report.worst_singular_rotation:.3g} rad", "", ""])
    rows += band_rows(report, unit)
    out(table(["check", "result", "threshold", "note"], rows, "llll"))
    out("PASSED" if report.passed else "FAILED")
    for failure in report.failures:
        out(f"  - {failure}")


def cmd_verify(args) -> int:
    arm = load_checked(args.arm, args)
    if args.out:
        result = build(arm)
        for path in write(result.files, args.out):
            out(f"wrote {path}")
        source, folder = result.files[result.python_path], result.folder
    else:   # only the Python solver is checked: the other back-ends and the report are not made
        from .backends import python as python_backend
        from .engine import derive as derive_arm
        source, folder = python_backend.render(arm, derive_arm(arm)), identifier(arm.name)
    module = load_module(source, folder + "_ik")
    samples = args.samples or 10000
    report = verify(arm, module, samples=samples, seed=args.seed, progress=not args.quiet and sys.stderr.isatty(),
                    budget=None if args.samples else SOLUTION_BUDGET)
    print_verification(report, arm.length_unit)
    if not report.passed:
        raise VerificationError(f"the generated solver for '{arm.name}' failed verification")
    return 0


def cmd_explain(args) -> int:
    arms = load_arms(args.arms, args)                         # every file validated before anything is written
    results = [timed(build_report, arm) for arm in arms]  # every report rendered before anything is written
    return write_or_check(results, args.out, args.check, "report", "rendering",
                          lambda r, seconds: f"{r.arm.name}: derivation report rendered in {seconds:.2f} s")


def cmd_compile(args) -> int:
    from .backends.c import DOUBLE, FLOAT
    from .cbuild import compile_solver
    arm = load_checked(args.arm, args)
    scalar = FLOAT if args.float else DOUBLE
    started = time.perf_counter()
    solver = compile_solver(arm, scalar=scalar, folder=args.out)
    out(f"{arm.name}: compiled the {scalar.name} C solver in {time.perf_counter() - started:.1f} s")
    wrapper = f"{solver.prefix}_c"
    for path in sorted(solver.folder.iterdir()):
        if path.name.startswith((solver.prefix, f"_{solver.prefix}_cffi")):
            out(f"  wrote {path}")
    out("use it from Python (the same forward, inverse and nearest as the generated Python solver, solving in C):")
    out(f"  import sys; sys.path.insert(0, {str(solver.folder)!r}); import {wrapper} as ik")
    return 0


def positive(text: str) -> int:
    """A -n value: a whole number from 1 to MAX_SAMPLES."""
    value = plain_whole(text)
    if value is None:
        raise argparse.ArgumentTypeError(f"{quote(text)} is not a whole number")
    if not 1 <= value <= MAX_SAMPLES:
        raise argparse.ArgumentTypeError(f"{value} is not between 1 and {MAX_SAMPLES:,}")
    return value


def seed(text: str) -> int:
    """A --seed value: a whole number from 0 to 2**63 - 1."""
    value = plain_whole(text)
    if value is None or not 0 <= value < 2 ** 63:
        raise argparse.ArgumentTypeError(f"{quote(text)} is not a whole number from 0 to {2 ** 63 - 1}")
    return value


def add_generation_commands(sub) -> None:
    p = sub.add_parser("generate", help="derive the closed-form IK and write the solver files",
                       description="Derive the closed-form inverse kinematics of each arm and write its "
                                   "generated files to OUT/<arm>/. Nothing is written unless every arm "
                                   "derives; with --check nothing is written at all.")
    p.add_argument("arms", nargs="+", metavar="ARM", help=ARM_HELP)
    p.add_argument("-o", "--out", default="generated", help="output folder (default: generated)")
    p.add_argument("--check", action="store_true",
                   help="write nothing; exit 1 if the files in OUT differ from a fresh generation")
    add_arm_source_options(p)
    p.set_defaults(run=cmd_generate)

    p = sub.add_parser("verify", help="generate a solver and check it against the forward kinematics",
                       description="Generate the solver in memory and check it on random joint vectors within "
                                   "the limits: completeness, round-trip error, solution counts, unreachable "
                                   "and singular poses. Exits 4 when a threshold fails.")
    p.add_argument("arm", help=ARM_HELP)
    p.add_argument("-n", "--samples", type=positive, default=None,
                   help="random samples (default 10000, fewer when the arm's limits give very many solutions "
                        "per pose)")
    p.add_argument("--seed", type=seed, default=2026, help="random seed (default 2026)")
    p.add_argument("-o", "--out", default=None, help="also write the generated files to this folder")
    p.add_argument("-q", "--quiet", action="store_true", help="no progress display")
    add_arm_source_options(p)
    p.set_defaults(run=cmd_verify)

    p = sub.add_parser("explain", help="write only the derivation report (HTML and Markdown) of each arm",
                       description="Derive each arm's closed-form inverse kinematics and write its derivation "
                                   "report to OUT/<arm>/: <arm>_report.html (self-contained, works offline: "
                                   "MathML equations, inline SVG figures, no script), <arm>_report.md (LaTeX "
                                   "math) and the two SVG figures the Markdown shows. The report holds the DH "
                                   "table, the structure analysis, every step as an equation, branches, guards "
                                   "and singular poses, verification figures and one sample pose with every "
                                   "solution. `ikgen generate` writes the same files beside the solvers.")
    p.add_argument("arms", nargs="+", metavar="ARM", help=ARM_HELP)
    p.add_argument("-o", "--out", default="generated", help="output folder (default: generated)")
    p.add_argument("--check", action="store_true",
                   help="write nothing; exit 1 if the report files in OUT differ from a fresh rendering")
    add_arm_source_options(p)
    p.set_defaults(run=cmd_explain)

    p = sub.add_parser("compile", help="build the generated C solver into a Python extension (cffi)",
                       description="Render the arm's C solver and compile it with cffi (API mode) into an "
                                   "importable Python extension in OUT, for planners and scripts that want C "
                                   "speed without writing C.")
    p.add_argument("arm", help=ARM_HELP)
    p.add_argument("-o", "--out", required=True, help="folder for the sources and the built extension")
    p.add_argument("--float", action="store_true", help="build the float (single precision) solver")
    add_arm_source_options(p)
    p.set_defaults(run=cmd_compile)

    from .path_command import register
    register(sub)
