"""The ``path`` subcommand: solve a path file for an arm, print a summary, write the joint path
as CSV and, on request, a PNG plot of the joint curves. File format and rules: docs/path-file.md.

``register(sub)`` adds the subcommand to an argparse sub-parser collection; ``cmd_path(args)``
runs it. Every file is rendered in memory first and written only when everything succeeded
(each to a temporary name, then all renamed), so bad input leaves no output file behind.
"""

from __future__ import annotations

import argparse
import csv
import io
import math
import re
from pathlib import Path

import numpy as np

from .armsource import ARM_HELP, add_arm_source_options, load_arm_source
from .cli import parse_values, warn_outside_limits
from .errors import PATH_LIMIT, IkgenError, clip, quote
from .exact import plain_decimal, plain_whole
from .generate import write
from .model import Arm
from .path import (CHANGE_NEEDED, CONFIGURATION_CHANGE, CROSSES_SINGULARITY, LABEL_CHANGE, LARGE_STEP,
                   LEAVES_WORKSPACE,
                   MAX_POSES, NEAR_SINGULARITY, OUTSIDE_LIMITS, SINGULAR_THRESHOLD, STOPPED,
                   PathResult, describe_config, polyline, pose_quaternion, read_path_file, solve_path)
from .terminal import err, fmt, out, table
from .verify import workload_note

EXIT_INCOMPLETE = 1     # the path was solved and written, but not every step is solved


def solver_module(arm: Arm):
    """The arm's generated Python solver, imported from memory (nothing is written): the same
    source text ``ikgen generate`` writes as <arm>/<arm>_ik.py (generate.build renders it the same
    way; only the Python back-end is rendered here)."""
    from .backends import common, python as python_backend
    from .engine import derive as derive_arm
    from .generate import load_module
    module = load_module(python_backend.render(arm, derive_arm(arm)), common.identifier(arm.name) + "_ik")
    if arm.given_joint is not None:
        from .path import GivenFollower
        return GivenFollower(module)
    return module


# -------------------------------------------------------------------------- option values

def line_steps(text: str) -> int:
    value = plain_whole(text)
    if value is None:
        raise argparse.ArgumentTypeError(f"{quote(text)} is not a whole number")
    if value < 2:
        raise argparse.ArgumentTypeError(f"{value} is less than 2 (a line's poses include both ends)")
    if value > MAX_POSES:
        raise argparse.ArgumentTypeError(f"{value} is more than {MAX_POSES} (the most poses of a path)")
    return value


def non_negative(text: str) -> float:
    value = plain_decimal(text)
    if value is None:
        raise argparse.ArgumentTypeError(f"{quote(text)} is not a number")
    if not (math.isfinite(value) and value >= 0):
        raise argparse.ArgumentTypeError(f"{clip(text)} is not a finite number >= 0")
    return value


def positive_number(text: str) -> float:
    value = non_negative(text)
    if value == 0:
        raise argparse.ArgumentTypeError("0 is not greater than 0")
    return value


# ------------------------------------------------------------------------------ rendering

def joint_headers(arm: Arm) -> list[str]:
    return [f"{j.name} [{arm.reading_unit(j)}]" for j in arm.joints]


def joints_csv(arm: Arm, result: PathResult) -> str:
    """The joint path: header 'step' then one column per joint (name and unit); steps count from 1;
    a step that is not solved has 'nan' in every joint column."""
    buffer = io.StringIO()
    writer = csv.writer(buffer, lineterminator="\n")
    writer.writerow(["step"] + joint_headers(arm))
    for index, row in enumerate(result.joints):
        writer.writerow([index + 1] + [fmt(v, 9) if np.isfinite(v) else "nan" for v in row])
    return buffer.getvalue()


EVENT_STYLE = {   # kind -> (colour, mark): a shaded band over the step, or a vertical line (with its style)
    LEAVES_WORKSPACE: ("#9aa0a8", "band"),
    OUTSIDE_LIMITS: ("#c9b07a", "band"),
    NEAR_SINGULARITY: ("#e8c547", "band"),
    LARGE_STEP: ("#7b4fa0", ":"),
    LABEL_CHANGE: ("#4d8a4a", "-."),
    CROSSES_SINGULARITY: ("#d9822b", "--"),
    CONFIGURATION_CHANGE: ("#b5333c", "--"),
}
JOINT_COLOURS = ("#3c6a9e", "#b5533c", "#4d8a4a", "#8a5fb0", "#c08a1e", "#2f8f9d", "#6b6f7a", "#a0527a")


def plot_png(arm: Arm, result: PathResult, title: str) -> bytes:
    """PNG bytes: one curve per joint over the step number, grouped in one panel per reading unit;
    events are marked (bands for near-singular or unsolved steps, lines for crossings, configuration
    changes and large steps). Deterministic: matplotlib's Agg renderer, the DejaVu Sans font that
    matplotlib bundles, fixed size and resolution, no metadata beyond the image."""
    import matplotlib
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure
    from matplotlib.patches import Patch
    from matplotlib.lines import Line2D
    from matplotlib.ticker import MaxNLocator

    from .figures import bundled_font
    font = bundled_font(8.0)
    title_font = bundled_font(9.0, bold=True)
    units = []
    for j in arm.joints:
        if arm.reading_unit(j) not in units:
            units.append(arm.reading_unit(j))
    steps = np.arange(1, result.count + 1)
    style = {"path.simplify": False, "axes.unicode_minus": True, "font.size": 8.0}
    with matplotlib.rc_context(style):
        fig = Figure(figsize=(9.0, 3.2 + 2.2 * len(units)), dpi=100)
        FigureCanvasAgg(fig)
        axes_list = [fig.add_subplot(len(units), 1, k + 1) for k in range(len(units))]
        marked = {}
        for ax, unit in zip(axes_list, units):
            for j, joint in enumerate(arm.joints):
                if arm.reading_unit(joint) != unit:
                    continue
                ax.plot(steps, result.joints[:, j], color=JOINT_COLOURS[j % len(JOINT_COLOURS)], linewidth=1.4,
                        label=f"{joint.index} {joint.name}", marker="." if result.count <= 60 else None,
                        markersize=3)
            order = list(EVENT_STYLE)
            for event in sorted(result.events, key=lambda e: (order.index(e.kind) if e.kind in order else -1, e.index)):
                colour, kind = EVENT_STYLE.get(event.kind, (None, None))
                if colour is None:
                    continue
                if kind == "band":
                    ax.axvspan(event.step - 0.5, event.step + 0.5, color=colour, alpha=0.35, linewidth=0, zorder=0)
                else:
                    ax.axvline(event.step, color=colour, linestyle=kind, linewidth=1.6, zorder=1)
                marked[event.kind] = (colour, kind)
            for index, state in enumerate(result.status):
                if state in (STOPPED, CHANGE_NEEDED):
                    ax.axvspan(index + 0.5, index + 1.5, color="#d0d3d8", alpha=0.5, linewidth=0, zorder=0)
                    marked["not solved (stopped)"] = ("#d0d3d8", "band")
            ax.set_ylabel(f"joint reading [{unit}]", fontproperties=font)
            ax.set_xlim(0.5, max(result.count, 1) + 0.5)
            ax.xaxis.set_major_locator(MaxNLocator(integer=True))
            ax.grid(True, color="#e3e5e8", linewidth=0.6)
            for label in ax.get_xticklabels() + ax.get_yticklabels():
                label.set_fontproperties(font)
        axes_list[-1].set_xlabel("step", fontproperties=font)
        event_handles = [Patch(color=c, alpha=0.5, label=k) if s == "band" else
                         Line2D([0], [0], color=c, linestyle=s, linewidth=1.6, label=k) for k, (c, s) in marked.items()]
        for k, ax in enumerate(axes_list):
            handles, _ = ax.get_legend_handles_labels()
            if k == len(axes_list) - 1:
                handles = handles + event_handles
            ax.legend(handles=handles, loc="upper left", bbox_to_anchor=(1.01, 1.0), prop=font, frameon=False)
        fig.suptitle(title, fontproperties=title_font)
        fig.tight_layout(rect=(0, 0, 1, 0.97))
        buffer = io.BytesIO()
        fig.savefig(buffer, format="png", metadata={"Software": None})
    return buffer.getvalue()


def check_output(path: str | None, option: str, suffix: str) -> Path | None:
    """The output file ``path`` of ``option``, refused (before anything is computed) when it is a
    directory, does not end in ``suffix``, or lies in a folder that does not exist: an output
    never creates folders, so a typo in a folder name cannot scatter files."""
    if path is None:
        return None
    target = Path(path)
    shown = f"{option} {clip(path, PATH_LIMIT)}"
    if target.is_dir():
        raise IkgenError(f"{shown}: is a directory; expected a file name ending in {suffix}")
    if target.suffix.lower() != suffix:
        raise IkgenError(f"{shown}: the name does not end in {suffix}; expected a {suffix} file name")
    folder = target.parent
    if not folder.is_dir():
        found = "is not a folder" if folder.exists() else "does not exist"
        raise IkgenError(f"{shown}: the folder {quote(str(folder), PATH_LIMIT)} {found}; expected a file in an "
                         "existing folder (create the folder first)")
    return target


# ------------------------------------------------------------------------------- summary

def pose_text(pose: np.ndarray, unit: str) -> str:
    p = pose[:3, 3]
    q = pose_quaternion(pose)
    return (f"x y z = {' '.join(fmt(v, 3) for v in p)} {unit}, "
            f"qw qx qy qz = {' '.join(fmt(v, 4) for v in q)}")


def grouped(events) -> list[tuple[int, int, object]]:
    """Consecutive events of one kind and branches as (first index, last index, first event)."""
    groups: list[list] = []
    for event in sorted(events, key=lambda e: (e.kind, e.branches, e.index)):
        last = groups[-1] if groups else None
        if last and last[2].kind == event.kind and last[2].branches == event.branches and last[1] == event.index - 1:
            last[1] = event.index
        else:
            groups.append([event.index, event.index, event])
    return sorted((tuple(g) for g in groups), key=lambda g: (g[0], g[2].kind))


def print_summary(arm: Arm, result: PathResult, poses: np.ndarray, source: str, origin_text) -> None:
    L = arm.length_unit
    units = {arm.reading_unit(j) for j in arm.joints}
    unit_note = f" {units.pop()}" if len(units) == 1 else ""
    out(f"path {source} for arm '{arm.name}': {result.count} pose(s), {origin_text}")
    out(f"start          {', '.join(fmt(v, 4) for v in result.start)}{unit_note}")
    if result.kept is None:
        out(f"solved         0 of {result.count} steps: no pose of the path has a solution")
    else:
        out(f"configuration  {describe_config(result.kept, result.label_names)} (that of the solution nearest "
            f"the start at the first solved step)")
        if result.final != result.kept:
            out(f"               at the end: {describe_config(result.final, result.label_names)}")
        out(f"solved         {result.solved} of {result.count} steps"
            + (f"; stopped at step {result.stopped_at + 1}" if result.stopped_at is not None else ""))
    out()
    largest, at = result.largest_step, result.largest_step_at
    rows = []
    mask = result.solved_mask
    for j, joint in enumerate(arm.joints):
        column = result.joints[mask, j]
        moved = np.isfinite(largest[j]) and largest[j] > 1e-9
        rows.append([str(joint.index), joint.name, arm.reading_unit(joint)]
                    + ([fmt(column[0], 3), fmt(column[-1], 3), fmt(column.min(), 3), fmt(column.max(), 3)]
                       if len(column) else ["-"] * 4)
                    + [fmt(result.approach[j], 3) if result.approach is not None else "-",
                       fmt(largest[j], 4) if np.isfinite(largest[j]) else "-",
                       str(at[j] + 1) if moved and at[j] is not None else "-"])
    out(table(["#", "joint", "unit", "first", "last", "min", "max", "from start", "largest step", "at step"],
              rows, "rllrrrrrrr"))
    out("(from start: change from the start readings to the first solved step; largest step: between two "
        "consecutive solved steps)")
    out()
    groups = grouped(result.events)
    if not groups:
        out(f"events         none (every step solved in one configuration, every conditioning measure "
            f">= {result.threshold:g})")
        return
    out(f"events ({len(groups)})")
    for first, last, event in groups:
        steps = f"step {first + 1}" if first == last else f"steps {first + 1}-{last + 1}"
        what = event.kind + (f" ({', '.join(event.branches)})" if event.branches and event.kind != LARGE_STEP else "")
        out(f"  {steps}: {what}")
        if event.kind == NEAR_SINGULARITY and first != last:
            parts = []
            for name in event.branches:
                m = result.condition_names.index(name)
                values = result.conditioning[first:last + 1, m]
                k = int(np.nanargmin(values))
                parts.append(f"{name} down to {values[k]:.3g} at step {first + k + 1}")
            detail = ", ".join(parts) + f" (below {result.threshold:g})"
        else:
            detail = event.detail
        out(f"      {detail}")
        out(f"      pose at step {first + 1}: {pose_text(poses[first], L)}")


def origin_description(path_file, line: int | None) -> str:
    if line is None:
        return f"one per row of the file (lines {path_file.lines[0]}-{path_file.lines[-1]})"
    rows = len(path_file.lines)
    if rows == 2:
        return f"a straight line of {line} poses from line {path_file.lines[0]} to line {path_file.lines[1]}"
    return f"straight lines of {line} poses between the {rows} rows (shared ends counted once)"


# -------------------------------------------------------------------------------- command

def cmd_path(args) -> int:
    arm = load_arm_source(args.arm, args)
    note = workload_note(arm)
    if note:
        err(f"warning: {note}")
    start = parse_values(arm, [args.start], "--start")
    weights = parse_values(arm, [args.weights], "--weights", minimum=0.0) if args.weights else None
    if weights is not None and not weights.any():
        raise IkgenError("--weights: every weight is 0; expected at least one weight > 0")
    out_path = check_output(args.out, "--out", ".csv")
    plot_path = check_output(args.plot, "--plot", ".png")
    if out_path is not None and plot_path is not None and out_path.resolve() == plot_path.resolve():
        raise IkgenError("--out and --plot name the same file; expected two different files")
    path_file = read_path_file(args.pathfile, arm.length_unit)
    poses = path_file.poses
    if args.line is not None:
        if len(poses) < 2:
            raise IkgenError(f"{clip(args.pathfile, PATH_LIMIT)}: --line needs at least two rows (start and end pose); the file "
                             f"has {len(poses)}")
        total = (len(poses) - 1) * (args.line - 1) + 1
        if total > MAX_POSES:
            raise IkgenError(f"--line {args.line}: the path would have {total} poses; expected at most {MAX_POSES}")
        poses, _ = polyline(poses, args.line)
    warn_outside_limits(arm, start, "--start: ")
    module = solver_module(arm)
    result = solve_path(module, poses, start, weights=weights, singular_threshold=args.near,
                        on_change=args.on_change, max_step=args.max_step,
                        joint_units=[arm.reading_unit(j) for j in arm.joints])
    files: dict[Path, bytes] = {}
    if out_path is not None:
        files[out_path] = joints_csv(arm, result).encode("utf-8")
    if plot_path is not None:
        files[plot_path] = plot_png(arm, result, f"{arm.name}: joint path along {Path(args.pathfile).name} "
                                                 f"({result.solved} of {result.count} steps solved)")
    print_summary(arm, result, poses, args.pathfile, origin_description(path_file, args.line))
    for target in write(files):
        out(f"wrote {target}")
    if result.solved < result.count:
        err(f"ikgen: {result.count - result.solved} of {result.count} step(s) not solved (exit status "
            f"{EXIT_INCOMPLETE})")
        return EXIT_INCOMPLETE
    return 0


def register(sub) -> argparse.ArgumentParser:
    """Add the ``path`` subcommand to ``sub`` (the result of ArgumentParser.add_subparsers)."""
    p = sub.add_parser(
        "path", help="solve a path of tool poses on one configuration and write the joint path",
        description="Generate the arm's solver in memory and solve every pose of PATHFILE (see "
                    "docs/path-file.md): keep the configuration of the solution nearest --start at the "
                    "first pose, then take the solution of that configuration nearest the previous step. "
                    "Prints the steps solved, the largest joint steps and every event (leaves the workspace, "
                    "needs a configuration change, near or crossing a singularity). Exit status 0 when "
                    "every step is solved, 1 when some are not (the files are still written), 2 for bad "
                    "input (nothing written). Check every joint path in simulation before a real arm "
                    "moves: collisions and speeds are not checked.")
    p.add_argument("arm", help=ARM_HELP)
    p.add_argument("pathfile", metavar="PATHFILE", help="path file (CSV: x, y, z, qw, qx, qy, qz per row)")
    p.add_argument("--start", required=True, metavar="Q1,...,QN",
                   help="the joint readings the arm is at before the path, in the arm's units (commas)")
    p.add_argument("-o", "--out", metavar="JOINTS.csv", help="write the joint path to this CSV file")
    p.add_argument("--plot", metavar="JOINTS.png", help="draw the joint curves, events marked, to this PNG file")
    p.add_argument("--line", type=line_steps, metavar="N",
                   help="straight lines of N poses (both ends included) between consecutive rows of "
                        "PATHFILE, instead of one pose per row")
    p.add_argument("--near", type=non_negative, default=SINGULAR_THRESHOLD, metavar="VALUE",
                   help=f"flag steps where a conditioning measure is below VALUE (default {SINGULAR_THRESHOLD:g})")
    p.add_argument("--on-change", choices=("stop", "switch"), default="stop",
                   help="when the kept configuration has no solution: stop there (default), or switch to "
                        "the nearest solution of any configuration and keep that one")
    p.add_argument("--weights", metavar="W1,...,WN",
                   help="per-joint weights of the distance used to pick the nearest solution (default all 1)")
    p.add_argument("--max-step", type=positive_number, metavar="VALUE",
                   help="flag steps where a joint changes by more than VALUE (the joint's unit)")
    add_arm_source_options(p)
    p.set_defaults(run=cmd_path)
    # readings such as "-30,15,40" start with '-': this parser has no option that looks like a
    # number, so every word "-<digit>..." or "-.<digit>..." is a value (as for `ikgen forward`).
    p._negative_number_matcher = re.compile(r"^-\.?\d")
    return p
