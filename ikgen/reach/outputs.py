"""A reach map's files, rendered in memory (written all or nothing by the command):

- ``<arm>_reach.npz``: every figure of every pose, with the axes and orientations (``npz_bytes``);
- ``<arm>_reach_summary.csv``: one row per orientation (``summary_csv``);
- ``<arm>_reach_slices.png`` and ``<arm>_reach_side.png``: horizontal slices at chosen heights
  and a vertical slice through the base (``slices_png``, ``side_png``);
- ``<arm>_reach.html``: the pictures, the summary and the safety caution on one page
  (``html_page``, self-contained: the pictures are embedded).

Every file is deterministic (same map, same bytes): the archive's entries carry a fixed date,
the pictures are drawn by matplotlib's Agg renderer with the font matplotlib bundles and no
metadata, and nothing records the time or the machine. docs/reach.md explains every field.
"""

from __future__ import annotations

import base64
import csv
import html
import io
import json
import textwrap
import zipfile

import numpy as np

from ..rotations import matrix_to_quaternion
from ..terminal import fmt
from .maps import ReachMap

ZIP_DATE = (1980, 1, 1, 0, 0, 0)
UNREACHED = "#dcd6cb"           # background of points out of reach (warm light grey)
INK = "#23303f"
BASE_MARK = "#b5333c"
REACH_COLOURS = ("#23415f", "#2f8f9d", "#8cc6a2", "#e8c547")     # few -> many (orientations, solutions)
QUALITY_COLOURS = ("#9e2b35", "#e08b3a", "#f0d98c", "#7fb88a", "#2f7a55")  # near a limit / singular -> far


# ------------------------------------------------------------------------------ the archive

def npz_bytes(reach: ReachMap) -> bytes:
    """The map as a numpy .npz archive (np.load(path) reads it, no pickle needed)."""
    grid = reach.grid
    info = {"arm": reach.arm_name, "length_unit": reach.length_unit, "angle_unit": reach.angle_unit,
            "solver": reach.solver, "chunk": reach.chunk, "step": list(reach.step),
            "index_order": "count[o, i, j, k] is orientation o at (x[i], y[j], z[k])",
            "count": "solutions within the joint limits",
            "conditioning": "best over those solutions of the smallest conditioning measure; NaN where none "
                            "(and everywhere with the C solver)",
            "margin": "best over those solutions of the smallest distance of a reading to its nearer limit, "
                      "as a share of the joint's range (0 .. 0.5); NaN where none"}
    arrays = {"x": grid.x, "y": grid.y, "z": grid.z, "rotations": grid.rotations,
              "orientation_names": np.array(grid.names, dtype=str), "count": reach.figures["count"],
              "conditioning": reach.figures["conditioning"], "margin": reach.figures["margin"],
              "joint_names": np.array(reach.joint_names, dtype=str), "joint_limits": reach.joint_limits,
              "condition_names": np.array(reach.condition_names, dtype=str),
              "base_position": reach.base_position, "info": np.array(json.dumps(info, sort_keys=True))}
    buffer = io.BytesIO()
    with zipfile.ZipFile(buffer, "w", compression=zipfile.ZIP_DEFLATED) as archive:
        for name, value in arrays.items():
            member = io.BytesIO()
            np.lib.format.write_array(member, np.ascontiguousarray(value), allow_pickle=False)
            entry = zipfile.ZipInfo(f"{name}.npy", date_time=ZIP_DATE)
            entry.compress_type = zipfile.ZIP_DEFLATED
            entry.external_attr = 0o644 << 16
            archive.writestr(entry, member.getvalue())
    return buffer.getvalue()


# ------------------------------------------------------------------------------ the summary

SUMMARY_COLUMNS = ("orientation", "qw", "qx", "qy", "qz", "positions", "reachable", "reachable_percent",
                   "solutions_max", "solutions_mean", "margin_min", "margin_median", "conditioning_min",
                   "conditioning_median")


def orientation_rows(reach: ReachMap) -> list[dict]:
    """One dict per orientation: its quaternion and the summary figures (None where no point is
    reachable, or no conditioning was computed)."""
    rows = []
    for o, name in enumerate(reach.grid.names):
        count = reach.figures["count"][o]
        reached = count > 0
        margin = reach.figures["margin"][o][reached]
        conditioning = reach.figures["conditioning"][o][reached]
        any_reached = bool(reached.any())
        rows.append({
            "orientation": name, "quaternion": matrix_to_quaternion(reach.grid.rotations[o]),
            "positions": int(count.size), "reachable": int(reached.sum()),
            "reachable_percent": 100.0 * reached.mean(),
            "solutions_max": int(count.max()),
            "solutions_mean": float(count[reached].mean()) if any_reached else None,
            "margin_min": float(margin.min()) if any_reached else None,
            "margin_median": float(np.median(margin)) if any_reached else None,
            "conditioning_min": float(conditioning.min()) if any_reached and reach.has_conditioning else None,
            "conditioning_median": (float(np.median(conditioning)) if any_reached and reach.has_conditioning
                                    else None)})
    return rows


def _cell(value, digits: int = 6) -> str:
    return "" if value is None else fmt(value, digits)


def summary_csv(reach: ReachMap) -> str:
    buffer = io.StringIO()
    writer = csv.writer(buffer, lineterminator="\n")
    writer.writerow(SUMMARY_COLUMNS)
    for row in orientation_rows(reach):
        writer.writerow([row["orientation"], *(fmt(v, 9) for v in row["quaternion"]), row["positions"],
                         row["reachable"], fmt(row["reachable_percent"], 3), row["solutions_max"],
                         _cell(row["solutions_mean"], 4), _cell(row["margin_min"]), _cell(row["margin_median"]),
                         _cell(row["conditioning_min"]), _cell(row["conditioning_median"])])
    return buffer.getvalue()


# ------------------------------------------------------------------------------ the pictures

def position_views(reach: ReachMap) -> dict[str, np.ndarray]:
    """Per position (X, Y, Z), over the orientations: how many reach it ("orientations"), and
    among those the fewest solutions, the smallest margin and the smallest conditioning (NaN
    where no orientation reaches it): the figures the position has whichever of the reached
    orientations the process needs."""
    reached = reach.reached
    some = reached.any(axis=0)
    views = {"orientations": reached.sum(axis=0).astype(float)}
    fewest = np.where(reached, reach.figures["count"], np.iinfo(np.int32).max).min(axis=0)
    views["solutions"] = np.where(some, fewest, np.nan)
    for name in ("margin", "conditioning"):
        worst = np.where(reached, reach.figures[name], np.inf).min(axis=0)
        views[name] = np.where(some & np.isfinite(worst), worst, np.nan)
    return views


def panels(reach: ReachMap) -> list[tuple[str, str, str]]:
    """(view, colour-bar label, row title) of each row of pictures."""
    count = len(reach.grid.names)
    rows = [("orientations", f"orientations reached (of {count})", "reach"),
            ("solutions", "solutions within limits (fewest)", "solutions"),
            ("margin", "margin to joint limits (smallest; share of range)", "limit margin")]
    if reach.has_conditioning:
        rows.append(("conditioning", "conditioning (smallest; 0 = singular)", "conditioning"))
    return rows


def nearest_index(values: np.ndarray, target: float) -> int:
    return int(np.argmin(np.abs(values - target)))


def default_heights(reach: ReachMap) -> list[float]:
    """Three grid planes spread over the heights where some point is reached (a fifth, half and
    four fifths of the way up), or over the whole box when nothing is reached; fewer when the
    grid has fewer planes."""
    z = reach.grid.z
    levels = np.flatnonzero(reach.reached.any(axis=(0, 1, 2)))
    low, high = (z[levels[0]], z[levels[-1]]) if levels.size else (z[0], z[-1])
    picks = sorted({nearest_index(z, low + share * (high - low)) for share in (0.2, 0.5, 0.8)})
    return [float(z[i]) for i in picks]


def _colour_scale(view: str, values: np.ndarray, orientations: int):
    """(colour map, norm, ticks) for one row: discrete steps for counts, a continuous scale for
    margin and conditioning."""
    from matplotlib.colors import BoundaryNorm, LinearSegmentedColormap, ListedColormap, Normalize
    if view in ("orientations", "solutions"):
        top = orientations if view == "orientations" else int(np.nanmax(values)) if np.isfinite(values).any() else 1
        top = max(top, 1)
        ramp = LinearSegmentedColormap.from_list("reach", REACH_COLOURS)
        colours = ListedColormap([ramp(k / max(top - 1, 1)) for k in range(top)]).with_extremes(bad=UNREACHED)
        ticks = list(range(1, top + 1)) if top <= 12 else list(np.linspace(1, top, 7).round().astype(int))
        return colours, BoundaryNorm(np.arange(0.5, top + 1.5), top), ticks
    colours = LinearSegmentedColormap.from_list("quality", QUALITY_COLOURS).with_extremes(bad=UNREACHED)
    if view == "margin":
        return colours, Normalize(0.0, 0.5), [0.0, 0.1, 0.2, 0.3, 0.4, 0.5]
    finite = values[np.isfinite(values)]
    top = float(np.percentile(finite, 99)) if finite.size else 1.0
    return colours, Normalize(0.0, top if top > 0 else 1.0), None


def _plane(values: np.ndarray, view: str) -> np.ma.MaskedArray:
    """A 2-D slice with the points no orientation reaches masked (drawn in the background colour)."""
    plane = np.ma.masked_invalid(values)
    if view == "orientations":
        plane = np.ma.masked_where(values <= 0, values)
    return plane


def _panel(ax, reach: ReachMap, view: str, values: np.ndarray, extent: tuple, base, scale, font):
    """One map panel: ``values`` (first axis across, second up) in the view's colours, the base marked."""
    colours, norm, _ = scale
    ax.set_facecolor(UNREACHED)
    image = ax.imshow(_plane(values.T, view), origin="lower", extent=extent, cmap=colours, norm=norm,
                      interpolation="nearest", aspect="equal")
    ax.plot([base[0]], [base[1]], marker="+", color=BASE_MARK, markersize=9, markeredgewidth=1.6)
    for tick in ax.get_xticklabels() + ax.get_yticklabels():
        tick.set_fontproperties(font)
    return image


def _colour_bar(fig, image, axes, scale, label: str, font) -> None:
    bar = fig.colorbar(image, ax=axes, ticks=scale[2], shrink=0.9, aspect=18)
    bar.set_label(label, fontproperties=font)
    for tick in bar.ax.get_yticklabels():
        tick.set_fontproperties(font)


def _draw_slices(fig, reach: ReachMap, planes: list, font, title_font) -> None:
    """One row per view, one column per height; each row has its colour bar."""
    views = position_views(reach)
    rows = panels(reach)
    grid = fig.subplots(len(rows), len(planes), squeeze=False)
    unit = reach.length_unit
    for r, (view, label, title) in enumerate(rows):
        scale = _colour_scale(view, views[view], len(reach.grid.names))
        for c, (heading, index, extent, base) in enumerate(planes):
            ax = grid[r][c]
            image = _panel(ax, reach, view, views[view][index], extent, base, scale, font)
            if r == 0:
                ax.set_title(heading, fontproperties=title_font)
            if c == 0:
                ax.set_ylabel(f"{title}\ny [{unit}]", fontproperties=font)
            if r == len(rows) - 1:
                ax.set_xlabel(f"x [{unit}]", fontproperties=font)
        _colour_bar(fig, image, list(grid[r]), scale, label, font)


def _draw_side(fig, reach: ReachMap, plane: tuple, font, title_font) -> None:
    """The views of one vertical plane, two by two, each with its colour bar."""
    views = position_views(reach)
    rows = panels(reach)
    grid = fig.subplots(2, 2, squeeze=False)
    unit = reach.length_unit
    heading, index, extent, base = plane
    for k, (view, label, title) in enumerate(rows):
        ax = grid[k // 2][k % 2]
        scale = _colour_scale(view, views[view], len(reach.grid.names))
        image = _panel(ax, reach, view, views[view][index], extent, base, scale, font)
        ax.set_title(title, fontproperties=title_font)
        ax.set_xlabel(f"x [{unit}]", fontproperties=font)
        ax.set_ylabel(f"z [{unit}]", fontproperties=font)
        _colour_bar(fig, image, ax, scale, label, font)
    for k in range(len(rows), 4):
        grid[k // 2][k % 2].set_axis_off()


def _extent(first: np.ndarray, second: np.ndarray, steps: tuple[float, float]) -> tuple:
    return (first[0] - steps[0] / 2, first[-1] + steps[0] / 2, second[0] - steps[1] / 2, second[-1] + steps[1] / 2)


def _render(draw, size: tuple[float, float], title: str, legend_note: str) -> bytes:
    import matplotlib
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure
    from matplotlib.lines import Line2D
    from matplotlib.patches import Patch

    from ..figures import bundled_font
    font, title_font = bundled_font(8.0), bundled_font(9.0, bold=True)
    with matplotlib.rc_context({"path.simplify": False, "axes.unicode_minus": True, "font.size": 8.0}):
        fig = Figure(figsize=size, dpi=100, facecolor="white", layout="constrained")
        FigureCanvasAgg(fig)
        draw(fig, font, title_font)
        fig.suptitle(title, fontproperties=bundled_font(11.0, bold=True))
        handles = [Patch(facecolor=UNREACHED, edgecolor="#b9b3a8", label="out of reach in every orientation"),
                   Line2D([0], [0], marker="+", color=BASE_MARK, linestyle="none", markersize=9,
                          markeredgewidth=1.6, label="base of the arm (world position of frame 0)")]
        fig.legend(handles=handles, loc="outside lower center", ncol=2, prop=font, frameon=False,
                   title=textwrap.fill(legend_note, int(size[0] * 15)), title_fontproperties=font)
        buffer = io.BytesIO()
        fig.savefig(buffer, format="png", metadata={"Software": None})
    return buffer.getvalue()


LEGEND_NOTE = ("Each point: how many orientations of the set reach it, and over those the fewest solutions, "
               "the smallest limit margin and the smallest conditioning.")


def slices_png(reach: ReachMap, heights: list[float]) -> bytes:
    """Horizontal slices (x across, y up) at the grid planes nearest ``heights``."""
    grid = reach.grid
    planes = []
    for height in heights:
        k = nearest_index(grid.z, height)
        planes.append((f"z = {fmt(grid.z[k], 4)} {reach.length_unit}", (slice(None), slice(None), k),
                       _extent(grid.x, grid.y, reach.step[:2]), reach.base_position[:2]))
    rows = len(panels(reach))
    size = (1.6 + 3.0 * len(planes), 1.2 + 2.8 * rows)
    return _render(lambda fig, font, title_font: _draw_slices(fig, reach, planes, font, title_font),
                   size, f"{reach.arm_name}: reach map, horizontal slices", LEGEND_NOTE)


def side_plane(reach: ReachMap) -> int:
    """The index of the y plane nearest the arm's base: the vertical slice of the side view."""
    return nearest_index(reach.grid.y, float(reach.base_position[1]))


def side_png(reach: ReachMap) -> bytes:
    """A vertical slice (x across, z up) through the grid plane nearest the base's y."""
    grid = reach.grid
    j = side_plane(reach)
    plane = (f"y = {fmt(grid.y[j], 4)}", (slice(None), j, slice(None)),
             _extent(grid.x, grid.z, (reach.step[0], reach.step[2])), reach.base_position[[0, 2]])
    return _render(lambda fig, font, title_font: _draw_side(fig, reach, plane, font, title_font), (9.0, 8.4),
                   f"{reach.arm_name}: reach map, side view (vertical plane y = {fmt(grid.y[j], 4)} "
                   f"{reach.length_unit}, nearest the base)", LEGEND_NOTE)


# ------------------------------------------------------------------------------ the page

STYLE = """
body { font-family: "DejaVu Sans", "Segoe UI", Helvetica, Arial, sans-serif; color: #23303f; background: #faf8f4;
       max-width: 72rem; margin: 0 auto; padding: 1.5rem; line-height: 1.45; }
h1 { font-size: 1.6rem; margin-bottom: 0.2rem; } h2 { font-size: 1.2rem; border-bottom: 2px solid #2f8f9d; }
.lead { color: #55606e; margin-top: 0; }
.caution { border-left: 6px solid #e8c547; background: #fff8df; padding: 0.6rem 1rem; margin: 1rem 0; }
table { border-collapse: collapse; font-size: 0.85rem; } th, td { padding: 0.2rem 0.6rem; text-align: right; }
th { background: #23415f; color: white; } td:first-child, th:first-child { text-align: left; }
tr:nth-child(even) td { background: #f0ece4; }
figure { margin: 1rem 0; } figure img { max-width: 100%; border: 1px solid #ddd6ca; background: white; }
figcaption { font-size: 0.9rem; color: #55606e; } dt { font-weight: bold; } code { background: #f0ece4; }
"""


def _table(reach: ReachMap) -> str:
    head = ("orientation", "reachable positions", "share", "most solutions", "mean solutions", "smallest margin",
            "median margin", "smallest conditioning", "median conditioning")
    lines = ["<table>", "<tr>" + "".join(f"<th>{h}</th>" for h in head) + "</tr>"]
    for row in orientation_rows(reach):
        cells = [html.escape(row["orientation"]), f"{row['reachable']:,} of {row['positions']:,}",
                 f"{row['reachable_percent']:.1f} %", str(row["solutions_max"]), _cell(row["solutions_mean"], 2),
                 _cell(row["margin_min"], 3), _cell(row["margin_median"], 3), _cell(row["conditioning_min"], 3),
                 _cell(row["conditioning_median"], 3)]
        lines.append("<tr>" + "".join(f"<td>{c or '-'}</td>" for c in cells) + "</tr>")
    lines.append("</table>")
    return "\n".join(lines)


def _image(data: bytes, alt: str) -> str:
    return f'<img alt="{html.escape(alt)}" src="data:image/png;base64,{base64.b64encode(data).decode("ascii")}">'


def html_page(reach: ReachMap, slices: bytes, side: bytes, files: dict[str, str]) -> str:
    """The page: what was mapped, the caution, the pictures with what their colours mean, the
    summary per orientation, the definitions and the other files."""
    grid = reach.grid
    unit = reach.length_unit
    box = ", ".join(f"{name} {fmt(axis[0], 4)} to {fmt(axis[-1], 4)}" for name, axis in zip("xyz", (grid.x, grid.y, grid.z)))
    step = " / ".join(fmt(s, 4) for s in reach.step)
    solver = ("the generated numpy batch solver" if reach.solver == "numpy" else
              "the compiled C solver (no conditioning figure: its many-pose call does not return it)")
    names = html.escape(", ".join(grid.names[:12]) + (f" and {len(grid.names) - 12} more" if len(grid.names) > 12 else ""))
    conditioning = (f"<dd>the smallest of the solution's measures ({html.escape(', '.join(reach.condition_names))}); each "
                    "is 0 where its branch is singular and grows away from it; the map keeps the best solution's "
                    "value.</dd>" if reach.has_conditioning else "<dd>not computed by the C solver.</dd>")
    listing = "".join(f"<li><code>{html.escape(name)}</code>: {html.escape(text)}</li>" for name, text in files.items())
    return f"""<!DOCTYPE html>
<html lang="en">
<head>
<meta charset="utf-8">
<title>Reach map: {html.escape(reach.arm_name)}</title>
<style>{STYLE}</style>
</head>
<body>
<h1>Reach map: {html.escape(reach.arm_name)}</h1>
<p class="lead">{grid.positions:,} positions ({box} {unit}; spacing {step} {unit}) times {len(grid.names)} tool
orientation(s): {names}. Solved with {solver}.</p>
<div class="caution"><strong>Caution: robots can hurt people.</strong> {html.escape(reach.caution)}</div>
<h2>Horizontal slices</h2>
<figure>{_image(slices, "reach map slices")}
<figcaption>Each column is the horizontal grid plane at the height above it (x across, y up, as seen from above).
Row <em>reach</em>: how many of the {len(grid.names)} orientations reach the point (grey: none).
Row <em>solutions</em>: the fewest joint solutions within the limits among the orientations that reach it.
Row <em>limit margin</em>: the smallest margin to the joint limits among those orientations (red: a joint near a
limit; green: every joint near the middle of its range, 0.5 at most). {"Row <em>conditioning</em>: the smallest conditioning among them (red: near a singular pose)." if reach.has_conditioning else ""}
The red cross marks the base of the arm.</figcaption></figure>
<h2>Side view</h2>
<figure>{_image(side, "reach map side view")}
<figcaption>The vertical grid plane nearest the base (x across, z up), in the same colours.</figcaption></figure>
<h2>Per orientation</h2>
{_table(reach)}
<h2>What the figures mean</h2>
<dl>
<dt>solutions within limits</dt><dd>the joint solutions of the pose whose readings lie within the joint limits,
counted like the generated solver's <code>inverse(pose)</code>: a joint whose range exceeds a turn gives each
equivalent reading as a solution of its own.</dd>
<dt>margin to joint limits</dt><dd>for one solution, the smallest distance of any joint reading to its nearer
limit, as a share of that joint's range (0 at a limit, 0.5 mid-range); the map keeps the best solution's value.</dd>
<dt>conditioning</dt>{conditioning}
</dl>
<p>The map samples the grid points only: a point between them, or a pose between the orientations, is not
checked. Reach here means the inverse kinematics has a solution within the limits; it says nothing about
collisions, speeds or payload.</p>
<h2>Files</h2>
<ul>{listing}</ul>
</body>
</html>
"""
