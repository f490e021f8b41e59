"""Figures for the derivation report: the arm at its zero reading with every DH frame, and the
solutions of one pose side by side (small multiples).

Output is SVG text, byte-for-byte reproducible: matplotlib's SVG writer with a fixed hash salt,
glyphs drawn as paths from the DejaVu Sans file that matplotlib bundles (never a system font, so
the outlines do not depend on the machine), no date or creator metadata, fixed figure sizes and
view angles. No pyplot and no interactive back-end is involved: each figure is a plain
``matplotlib.figure.Figure`` written by matplotlib's SVG back-end inside an ``rc_context``, so
importing or using this module changes no global matplotlib state (a non-GUI, headless path).
matplotlib is imported on first use (about 0.4 s): the SVG helpers (``inline``, ``standalone``) and
the commands that draw nothing do not pay for it.
"""

from __future__ import annotations

import html
import io
import math
import os
import re
from typing import TYPE_CHECKING

import numpy as np

from .kinematics import NumericChain
from .model import Arm

if TYPE_CHECKING:                       # only for the annotations: matplotlib is imported on first use
    from matplotlib.figure import Figure
    from matplotlib.font_manager import FontProperties

STYLE = {
    "svg.hashsalt": "ikgen-report",     # element ids from a fixed salt, not a random one
    "svg.fonttype": "path",             # glyph outlines, no dependence on installed fonts
    "svg.id": None,
    "path.simplify": False,
    "axes.unicode_minus": True,
    "font.size": 8.0,
}
METADATA = {"Date": None, "Creator": None, "Format": None, "Type": None}

INK = "#2b3140"          # links and text
MUTED = "#8a90a0"        # secondary marks
AXIS_COLOURS = ("#b5533c", "#4d8a4a", "#3c6a9e")   # x, y, z (muted red, green, blue)
TARGET = "#c08a1e"       # the target tool frame in the pose figure


def bundled_font(size: float = 8.0, bold: bool = False) -> FontProperties:
    """DejaVu Sans from matplotlib's own data folder (same outlines on every machine)."""
    import matplotlib
    from matplotlib.font_manager import FontProperties
    name = "DejaVuSans-Bold.ttf" if bold else "DejaVuSans.ttf"
    return FontProperties(fname=os.path.join(matplotlib.get_data_path(), "fonts", "ttf", name), size=size)


# ----------------------------------------------------------------------------- geometry

def skeleton(chain: NumericChain, readings) -> dict:
    """World-frame geometry of one configuration: the polyline of the links (with the kinks the
    DH offsets make), the DH frames 0..n, the world origin and the tool frame."""
    arm = chain.arm
    frames = chain.frames(np.asarray(readings, dtype=float))[0]
    points = [np.zeros(3), frames[0][:3, 3]]
    for i, joint in enumerate(arm.joints, 1):
        previous, current = frames[i - 1], frames[i]
        if chain.standard:      # A_i = Rz Tz(d) Tx(a) Rx: along z_(i-1) by d_i, then along x_i by a_i
            kink = previous[:3, 3] + float(joint.d) * previous[:3, 2]
        else:                   # A_i = Rx Tx(a) Rz Tz(d): along x_(i-1) by a_i, then along z_i by d_i
            kink = previous[:3, 3] + float(joint.a) * previous[:3, 0]
        points += [kink, current[:3, 3]]
    tool = frames[-1] @ chain.tool
    points.append(tool[:3, 3])
    origins, directions = chain.joint_axes(readings)
    return {"links": np.array(points), "frames": frames, "tool": tool,
            "axis_points": origins, "axis_directions": directions}


def span_of(point_sets: list[np.ndarray]) -> tuple[np.ndarray, float]:
    """Centre and half-width of a cube holding every point (equal scales on the three axes)."""
    allp = np.vstack(point_sets)
    lo, hi = allp.min(axis=0), allp.max(axis=0)
    half = 0.5 * float(np.max(hi - lo))
    half = half if half > 0 else 1.0
    return 0.5 * (lo + hi), half * 1.08


def nice_length(value: float) -> float:
    """1, 2 or 5 times a power of ten, at most ``value`` (for the scale bar)."""
    power = 10.0 ** math.floor(math.log10(value))
    for step in (5.0, 2.0, 1.0):
        if step * power <= value:
            return step * power
    return power


def number_text(value: float) -> str:
    text = f"{value:.6f}".rstrip("0").rstrip(".")
    return text


# ----------------------------------------------------------------------------- drawing

def new_axes(fig: Figure, position, centre: np.ndarray, half: float, elevation: float, azimuth: float,
             zoom: float = 1.35):
    ax = fig.add_subplot(*position, projection="3d", proj_type="ortho")
    ax.view_init(elev=elevation, azim=azimuth)
    ax.set_xlim(centre[0] - half, centre[0] + half)
    ax.set_ylim(centre[1] - half, centre[1] + half)
    ax.set_zlim(centre[2] - half, centre[2] + half)
    ax.set_box_aspect((1, 1, 1), zoom=zoom)
    ax.set_axis_off()
    return ax


def draw_floor(ax, centre: np.ndarray, half: float, lines: int = 7):
    """A faint square grid in the world's z = 0 plane under (or over) the arm."""
    xs = np.linspace(centre[0] - half, centre[0] + half, lines)
    ys = np.linspace(centre[1] - half, centre[1] + half, lines)
    for x in xs:
        ax.plot([x, x], [ys[0], ys[-1]], [0.0, 0.0], color="#e3e0d8", linewidth=0.6)
    for y in ys:
        ax.plot([xs[0], xs[-1]], [y, y], [0.0, 0.0], color="#e3e0d8", linewidth=0.6)


def draw_wrist_marks(ax, geometry: dict, length: float):
    """Short stubs along the x axes of the DH frames after joints 4 and 5: the wrist's roll and bend
    show in them, so solutions that differ only in the wrist (flip / no flip) look different."""
    frames = geometry["frames"]
    for index in range(4, min(6, len(frames) - 1)):
        origin = frames[index][:3, 3]
        tip = origin + length * frames[index][:3, 0]
        ax.plot(*zip(origin, tip), color=AXIS_COLOURS[0], linewidth=1.6, solid_capstyle="round")


def draw_triad(ax, frame: np.ndarray, length: float, width: float = 1.2, alpha: float = 1.0):
    origin = frame[:3, 3]
    for k in range(3):
        tip = origin + length * frame[:3, k]
        ax.plot(*zip(origin, tip), color=AXIS_COLOURS[k], linewidth=width, alpha=alpha, solid_capstyle="round")


def draw_links(ax, geometry: dict, width: float = 2.4, colour: str = INK):
    links = geometry["links"]
    ax.plot(links[1:, 0], links[1:, 1], links[1:, 2], color=colour, linewidth=width,
            solid_joinstyle="round", solid_capstyle="round")
    ax.plot(*zip(links[0], links[1]), color=MUTED, linewidth=0.8, linestyle=(0, (2, 2)))   # world -> frame 0
    axis_points = geometry["axis_points"]
    ax.scatter(axis_points[:, 0], axis_points[:, 1], axis_points[:, 2], s=14, color="white",
               edgecolors=colour, linewidths=1.1, depthshade=False, zorder=5)


def draw_scale_bar(ax, centre: np.ndarray, half: float, font, unit: str):
    """A scale bar along world x at the bottom corner of the cube, labelled with its length."""
    length = nice_length(0.5 * half)
    start = np.array([centre[0] - 0.9 * half, centre[1] - 0.9 * half, centre[2] - 0.95 * half])
    end = start + np.array([length, 0.0, 0.0])
    ax.plot(*zip(start, end), color=INK, linewidth=1.0)
    ax.text(*(start + np.array([0.5 * length, 0, 0.04 * half])), f"{number_text(length)} {unit}",
            fontproperties=font, color=INK, ha="center", va="bottom")


def save_svg(fig: Figure) -> str:
    buffer = io.StringIO()
    fig.savefig(buffer, format="svg", metadata=METADATA)
    return buffer.getvalue()


def arm_zero_figure(arm: Arm) -> str:
    """SVG: the arm at its zero reading, every DH frame as an x/y/z triad, the tool frame."""
    import matplotlib
    from matplotlib.figure import Figure
    with matplotlib.rc_context(STYLE):
        chain = NumericChain(arm)
        zero = np.zeros(arm.dof)
        geometry = skeleton(chain, zero)
        centre, half = span_of([geometry["links"], np.zeros((1, 3))])
        fig = Figure(figsize=(6.4, 5.2))
        fig.subplots_adjust(left=0.0, right=1.0, bottom=0.0, top=1.0)
        ax = new_axes(fig, (1, 1, 1), centre, half, elevation=24.0, azimuth=-55.0, zoom=1.3)
        font = bundled_font(8.0)
        small = bundled_font(7.0)
        triad = 0.16 * half
        draw_floor(ax, centre, half)
        draw_links(ax, geometry)
        draw_triad(ax, np.eye(4), triad * 1.2, width=1.0, alpha=0.8)
        ax.text(0, 0, -0.12 * half, "world", fontproperties=small, color=MUTED, ha="center", va="top")
        frames = geometry["frames"]
        groups: list[tuple[np.ndarray, list[int]]] = []
        for index, frame in enumerate(frames):
            draw_triad(ax, frame, triad)
            origin = frame[:3, 3]
            for point, members in groups:
                if np.linalg.norm(point - origin) < 1e-6 * half:
                    members.append(index)
                    break
            else:
                groups.append((origin, [index]))
        placed: list[np.ndarray] = []
        for point, members in groups:
            label = "frame " + ", ".join(str(m) for m in members)
            crowded = any(np.linalg.norm(point - other) < 0.15 * half for other in placed)
            offset = np.array([-0.06, -0.06, 0.0] if crowded else [0.05, 0.05, 0.06]) * half
            ax.text(*(point + offset), label, fontproperties=font, color=INK,
                    ha="right" if crowded else "left", va="center" if crowded else "bottom")
            placed.append(point)
        tool = geometry["tool"]
        draw_triad(ax, tool, triad * 0.8, width=1.0)
        ax.text(*(tool[:3, 3] + np.array([0.05, 0.05, -0.08]) * half), "tool", fontproperties=font,
                color=INK, ha="left", va="top")
        draw_scale_bar(ax, centre, half, small, arm.length_unit)
        return save_svg(fig)


def solutions_figure(arm: Arm, solutions: list[tuple[list[float], str]], target: np.ndarray) -> str:
    """SVG small multiples: one panel per solution (joint readings, caption), same view and scale,
    with the target tool frame drawn in every panel."""
    import matplotlib
    from matplotlib.figure import Figure
    with matplotlib.rc_context(STYLE):
        chain = NumericChain(arm)
        shapes = [skeleton(chain, readings) for readings, _ in solutions]
        centre, half = span_of([g["links"] for g in shapes] + [np.zeros((1, 3))])
        count = max(1, len(shapes))
        columns = min(4, count)
        rows = int(math.ceil(count / columns))
        fig = Figure(figsize=(1.9 * columns, 2.0 * rows))
        fig.subplots_adjust(left=0.0, right=1.0, bottom=0.0, top=0.95, wspace=0.0, hspace=0.08)
        caption_font = bundled_font(7.5)
        for index, (geometry, (_, caption)) in enumerate(zip(shapes, solutions)):
            ax = new_axes(fig, (rows, columns, index + 1), centre, half, elevation=20.0, azimuth=-60.0, zoom=1.4)
            draw_floor(ax, centre, half, lines=5)
            draw_links(ax, geometry, width=1.8)
            draw_wrist_marks(ax, geometry, 0.14 * half)
            draw_triad(ax, target, 0.22 * half, width=1.2)
            ax.set_title(caption, fontproperties=caption_font, color=INK, pad=-4.0)
        return save_svg(fig)


# ----------------------------------------------------------------------------- embedding

_HEADER = re.compile(r"<\?xml[^>]*\?>\s*|<!DOCTYPE[^>]*>\s*")
_METADATA = re.compile(r"\s*<metadata>.*?</metadata>", re.S)


def standalone(svg: str) -> str:
    """The SVG as a file of its own (for the Markdown twin): metadata block removed."""
    return _METADATA.sub("", svg)


def inline(svg: str, prefix: str, title: str) -> str:
    """The SVG for embedding in HTML: no XML prolog, no namespace declarations (the HTML parser
    supplies them), element ids prefixed so that two figures on one page cannot collide, and an
    accessible title."""
    text = _METADATA.sub("", _HEADER.sub("", svg))
    text = re.sub(r'\s+xmlns(:xlink)?="[^"]*"', "", text)
    text = re.sub(r'\bid="([^"]+)"', lambda m: f'id="{prefix}-{m.group(1)}"', text)
    text = re.sub(r'url\(#([^)]+)\)', lambda m: f"url(#{prefix}-{m.group(1)})", text)
    text = re.sub(r'href="#([^"]+)"', lambda m: f'href="#{prefix}-{m.group(1)}"', text)
    text = text.replace("<svg ", f'<svg role="img" aria-label="{html.escape(title, quote=True)}" ', 1)
    return text.strip() + "\n"
