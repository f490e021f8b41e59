"""The ``ikgen`` command: argument parsing and dispatch. Output formatting lives in terminal.py.

Exit codes: 0 success; 2 bad input (arm file, options, values); 3 the arm is outside what the
derivation handles; 4 a verification threshold failed.
"""

from __future__ import annotations

import argparse
import math
import re
import sys

import numpy as np

from . import __version__
from .armsource import ARM_HELP, add_arm_source_options, load_arm_source
from .errors import IkgenError, clip, printable, quote, safe_message
from .exact import plain_decimal
from .kinematics import NumericChain
from .model import Arm
from .rotations import matrix_to_fixed_xyz, matrix_to_quaternion
from .terminal import err, fmt, matrix, out, table


def parse_values(arm: Arm, raw: list[str], what: str = "joint values", minimum: float | None = None) -> np.ndarray:
    """One number per joint from command-line words (spaces or commas), checked for count,
    finiteness and, when given, a ``minimum``."""
    words = [w for item in raw for w in item.replace(",", " ").split()]
    values = []
    for position, word in enumerate(words, 1):
        value = plain_decimal(word)
        if value is None:
            raise IkgenError(f"{what}: value {position} {quote(word)} is not a number; expected a decimal "
                             "number such as 12.5 or -0.25")
        if not math.isfinite(value):
            raise IkgenError(f"{what}: value {position} is {clip(word)}; expected a finite number")
        if minimum is not None and value < minimum:
            raise IkgenError(f"{what}: value {position} is {clip(word)}; expected a number >= {minimum:g}")
        values.append(value)
    if len(values) != arm.dof:
        raise IkgenError(f"{what}: got {len(values)} values, expected {arm.dof} "
                         f"(one per joint of '{arm.name}', in {unit_summary(arm)})")
    return np.array(values)


def warn_outside_limits(arm: Arm, readings, prefix: str = "") -> None:
    """A warning on stderr for each reading outside its joint's limits."""
    for j, value, (lo, hi) in zip(arm.joints, readings, arm.limits_in_readings()):
        if not lo <= value <= hi:
            err(f"warning: {prefix}{j.label} reading {fmt(value)} {arm.reading_unit(j)} is outside its limits "
                f"{fmt(lo)} .. {fmt(hi)}")


def unit_summary(arm: Arm) -> str:
    kinds = {j.kind for j in arm.joints}
    parts = []
    if "revolute" in kinds:
        parts.append(f"{arm.angle_unit} for revolute joints")
    if "prismatic" in kinds:
        parts.append(f"{arm.length_unit} for prismatic joints")
    return " and ".join(parts)


def target_words(arm) -> str:
    """What the arm is asked for, or why no target fits (describe never fails on that)."""
    from .engine.targets import resolve, words
    from .errors import StructureError
    try:
        return words(resolve(arm))
    except StructureError as exc:
        return f"none: {exc}"


def cmd_describe(args) -> int:
    arm = load_arm_source(args.arm, args)
    convention = {"standard": "standard (distal) DH: A_i = Rz(theta) Tz(d) Tx(a) Rx(alpha)",
                  "modified": "modified (proximal) DH: A_i = Rx(alpha) Tx(a) Rz(theta) Tz(d)"}[arm.convention]
    out(f"arm          {arm.name}")
    if arm.description:
        out(f"description  {printable(arm.description)}")
    out(f"file         {printable(arm.source)}")
    out(f"convention   {convention}")
    out(f"units        lengths in {arm.length_unit}, angles in {arm.angle_unit}")
    out(f"joints       {arm.dof}")
    out(f"target       {target_words(arm)}")
    if arm.given_joint is not None or arm.dof == 7:
        from .engine import choices_words, given_choices
        given = (f"{arm.given_joint} '{arm.joints[arm.given_joint - 1].name}' (its reading is an input beside the "
                 "pose)") if arm.given_joint is not None else "none chosen"
        out(f"given joint  {given}")
        out(f"choices      {choices_words(arm, given_choices(arm))}")
    out()
    unit = arm.angle_unit
    rows = []
    scale = arm.angle_scale
    for j in arm.joints:
        lo, hi = (v / (scale if j.revolute else 1.0) for v in j.limits)
        offset_unit = unit if j.revolute else arm.length_unit
        rows.append([str(j.index), j.name, j.kind, fmt(float(j.a)), fmt(float(j.alpha) / scale),
                     fmt(float(j.d)), fmt(float(j.theta) / scale),
                     fmt(float(j.offset) / (scale if j.revolute else 1.0)) + " " + offset_unit,
                     "+1" if j.direction > 0 else "-1",
                     f"{fmt(lo)} .. {fmt(hi)} {arm.reading_unit(j)}"])
    L, A = arm.length_unit, arm.angle_unit
    out(table(["#", "name", "type", f"a [{L}]", f"alpha [{A}]", f"d [{L}]", f"theta [{A}]", "offset",
               "dir", "limits"], rows, "rllrrrrrrl"))
    out()
    out("DH variable: theta_i = theta + offset + dir * reading (revolute); d_i = d + offset + dir * reading (prismatic)")
    out()
    chain = NumericChain(arm)
    origins, directions = chain.joint_axes(np.zeros(arm.dof))
    out(f"joint axes in the world frame at the zero reading (origin in {L}):")
    rows = [[str(j.index), j.name, "  ".join(fmt(v, 4).rjust(9) for v in o),
             "  ".join(fmt(v, 4).rjust(7) for v in d)] for j, o, d in zip(arm.joints, origins, directions)]
    out(table(["#", "name", "point on axis (x y z)", "direction (x y z)"], rows, "rlll"))
    out()
    pose = chain.pose(np.zeros(arm.dof))
    out("tool pose at the zero reading:")
    out(matrix(pose, 4))
    for note in arm.notes:
        out(f"note: {note}")
    return 0


def cmd_forward(args) -> int:
    arm = load_arm_source(args.arm, args)
    readings = parse_values(arm, args.values)
    warn_outside_limits(arm, readings)
    chain = NumericChain(arm)
    pose = chain.pose(readings)
    L = arm.length_unit
    out(f"arm {arm.name}: tool pose in the world frame ({L}, {arm.angle_unit})")
    out()
    out(f"position     {'  '.join(fmt(v) for v in pose[:3, 3])}   [{L}]")
    angles = matrix_to_fixed_xyz(pose[:3, :3]) / arm.angle_scale
    out(f"fixed xyz    {'  '.join(fmt(v) for v in angles)}   [{arm.angle_unit}; R = Rz(c) Ry(b) Rx(a)]")
    out(f"quaternion   {'  '.join(fmt(v, 9) for v in matrix_to_quaternion(pose[:3, :3]))}   [w x y z]")
    out("matrix")
    out(matrix(pose))
    if args.frames:
        out()
        frames = chain.frames(readings)[0]
        rows = []
        for k, frame in enumerate(frames):
            name = "base" if k == 0 else arm.joints[k - 1].name
            rows.append([str(k), name] + [fmt(v, 4) for v in frame[:3, 3]] +
                        ["  ".join(fmt(v, 4) for v in frame[:3, 2])])
        out("DH frames in the world frame:")
        out(table(["frame", "after joint", f"x [{L}]", f"y [{L}]", f"z [{L}]", "z axis"], rows, "rlrrrl"))
    return 0


class Parser(argparse.ArgumentParser):
    """argparse with its usage errors made safe to print: an option value of a million
    characters or with control characters is shown cut and escaped (errors.safe_message)."""

    def error(self, message: str):
        self.print_usage(sys.stderr)
        self.exit(2, f"{self.prog}: error: {safe_message(message, 400)}\n")


def build_parser() -> argparse.ArgumentParser:
    parser = Parser(
        prog="ikgen",
        description="Closed-form inverse kinematics generator: reads an arm's DH table, derives every "
                    "closed-form solution, and writes standalone, verified solvers.")
    parser.add_argument("--version", action="version", version=f"ikgen {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    sub.required = True

    p = sub.add_parser("describe", help="print an arm's DH table, units, conventions and joint axes",
                       description="Print the arm's DH table with units and conventions, each joint's axis "
                                   "in the world frame at the zero reading, and the tool pose there.")
    p.add_argument("arm", help=ARM_HELP)
    add_arm_source_options(p)
    p.set_defaults(run=cmd_describe)

    p = sub.add_parser("forward", help="compute the tool pose for given joint readings",
                       description="Forward kinematics: joint readings in the arm's units in, the tool pose "
                                   "in the world frame out (position, fixed-axis xyz angles, quaternion, matrix).")
    p.add_argument("arm", help=ARM_HELP)
    p.add_argument("values", nargs="+", metavar="VALUE",
                   help="one reading per joint, in the arm's units (spaces or commas between them)")
    p.add_argument("--frames", action="store_true", help="also print every DH frame's origin and z axis")
    add_arm_source_options(p)
    p.set_defaults(run=cmd_forward)
    # argparse takes a word that starts with '-' and is not a plain decimal ("-5", "-0.5") for an
    # option, so readings such as "-1e-3" or "-30,15,40" were refused. This parser has no option
    # that looks like a number: every word "-<digit>..." or "-.<digit>..." is a value.
    p._negative_number_matcher = re.compile(r"^-\.?\d")

    from .commands import add_generation_commands
    add_generation_commands(sub)
    from .urdf_command import register as register_from_urdf
    register_from_urdf(sub)
    from .reach.command import register as register_reach
    register_reach(sub)
    return parser


def main(argv: list[str] | None = None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    try:
        return args.run(args)
    except IkgenError as exc:
        err(f"ikgen: error: {exc}")
        return exc.exit_code
    except KeyboardInterrupt:
        err("ikgen: interrupted")
        return 130
    except BrokenPipeError:
        return 0


if __name__ == "__main__":
    sys.exit(main())
