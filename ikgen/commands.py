"""The generation subcommands of ``ikgen``: generate (with --check) and verify."""

from __future__ import annotations

import argparse
import os
import sys
import time

from .armsource import ARM_HELP, add_arm_source_options, load_arm_source, load_arm_sources
from .errors import VerificationError
from .generate import build, build_report, load_module, stale, write
from .terminal import err, fmt, out, table
from .verify import ROUND_TRIP_TOLERANCE, SINGULAR_DISTANCE, Verification, verify


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
    arms = load_arm_sources(args.arms, args)             # every file validated before anything is written
    results = [timed(build, arm) for arm in arms]       # every arm derived before anything is written
    return write_or_check(results, args.out, args.check, "generated", "generation",
                          lambda r, seconds: f"{r.arm.name}: {r.derivation.family}, at most "
                                             f"{r.derivation.max_solutions} solutions, derived in {seconds:.2f} s")


def print_verification(report: Verification, unit: str) -> None:
    out(f"verification of '{report.arm}': {report.samples} samples (seed {report.seed}), {report.seconds:.1f} s")
    counts = ", ".join(f"{k}: {v}" for k, v in sorted(report.counts.items()))
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
    out(table(["check", "result", "threshold", "note"], rows, "llll"))
    out("PASSED" if report.passed else "FAILED")
    for failure in report.failures:
        out(f"  - {failure}")


def cmd_verify(args) -> int:
    arm = load_arm_source(args.arm, args)
    result = build(arm)
    if args.out:
        for path in write(result.files, args.out):
            out(f"wrote {path}")
    module = load_module(result.files[result.python_path], result.folder + "_ik")
    report = verify(arm, module, samples=args.samples, seed=args.seed, progress=not args.quiet and sys.stderr.isatty())
    print_verification(report, arm.length_unit)
    if not report.passed:
        raise VerificationError(f"the generated solver for '{arm.name}' failed verification")
    return 0


def cmd_explain(args) -> int:
    arms = load_arm_sources(args.arms, args)             # every file validated before anything is written
    results = [timed(build_report, arm) for arm in arms]  # every report rendered before anything is written
    return write_or_check(results, args.out, args.check, "report", "rendering",
                          lambda r, seconds: f"{r.arm.name}: derivation report rendered in {seconds:.2f} s")


def cmd_compile(args) -> int:
    from .backends.c import DOUBLE, FLOAT
    from .cbuild import compile_solver
    arm = load_arm_source(args.arm, args)
    scalar = FLOAT if args.float else DOUBLE
    started = time.perf_counter()
    solver = compile_solver(arm, scalar=scalar, folder=args.out)
    out(f"{arm.name}: compiled the {scalar.name} C solver in {time.perf_counter() - started:.1f} s")
    for path in sorted(solver.folder.glob("*")):
        if path.suffix in (".so", ".pyd", ".c", ".h"):
            out(f"  {path}")
    module = f"_{solver.prefix}_cffi"
    out(f"use it from Python: sys.path.insert(0, '{args.out}'); from {module} import lib "
        f"(lib.{solver.prefix}_inverse ...), or ikgen.cbuild.compile_solver() for a ready wrapper")
    return 0


def positive(text: str) -> int:
    try:
        value = int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"'{text}' is not a whole number") from None
    if value < 1:
        raise argparse.ArgumentTypeError(f"{value} is not at least 1")
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
    p.add_argument("-n", "--samples", type=positive, default=10000, help="random samples (default 10000)")
    p.add_argument("--seed", type=int, default=2026, help="random seed (default 2026)")
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
