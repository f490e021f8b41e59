"""A converted URDF chain as the text of a TOML arm file (docs/arm-file.md), for review and editing.

Every value is written so that the arm file reader gives back the same exact number: integers
as integers, exact decimals as decimals (0.3 is read as 3/10), multiples of pi as strings
("pi/2"), other rationals as strings ("7/3"). Base and tool rotations are written as fixed-axis
x-y-z angles, the form of a URDF's rpy. The text is deterministic: no dates, no paths beyond the
file name.
"""

from __future__ import annotations

import json
from pathlib import Path

import sympy as sp

from ..exact import parse_exact
from .convert import Converted, FrameParts


def toml_value(value: sp.Expr) -> str:
    """A TOML literal the arm file reader turns back into exactly ``value``."""
    if value.is_Integer:
        return str(int(value))
    if value.is_Rational:
        text = repr(float(value))
        if sp.Rational(text) == value:
            return text
    text = str(value)
    assert parse_exact(text) == value, f"{value} has no exact arm-file form"
    return json.dumps(text)


def toml_string(text: str) -> str:
    return json.dumps(text, ensure_ascii=False)   # a JSON string is a valid TOML basic string


def limit_value(value: float) -> str:
    for multiple in (2, -2):                      # continuous joints: one turn either side
        if value == float(multiple * sp.pi):
            return toml_string(str(multiple * sp.pi))
    return repr(float(value))


def comment(text: str) -> str:
    """A comment line; characters that could end it (a link name may hold a newline) are escaped."""
    return "".join(c if c.isprintable() else f"\\u{ord(c):04x}" for c in text)


def header(converted: Converted) -> list[str]:
    chain, arm = converted.chain, converted.arm
    lines = [f"# Converted by ikgen from the URDF file {Path(arm.source).name} (sha256 {arm.digest[:16]}),",
             f"# chain '{chain.root}' -> '{chain.tip}' of robot '{chain.robot}', {arm.convention} DH convention.",
             "# Lengths in m and angles in rad, the URDF's units: joint readings equal the URDF joint positions.",
             "# Review it before use (`ikgen describe` shows the table, the joint axes and the tool pose at the",
             "# zero reading): limits, collisions and speeds are the integrator's job.",
             "# Axis relations, joint by joint: "
             + (", ".join(f"{k + 1}-{k + 2} {r}" for k, r in enumerate(converted.relations)) or "one joint")]
    lines += [f"# note: {note}" for note in arm.notes]
    return [comment(line) for line in lines]


def joint_lines(joint) -> list[str]:
    lines = ["[[joint]]", f"name = {toml_string(joint.name)}", f"type = \"{joint.kind}\""]
    for field in ("a", "alpha", "d", "theta"):
        lines.append(f"{field} = {toml_value(getattr(joint, field))}")
    if joint.offset != 0:
        lines.append(f"offset = {toml_value(joint.offset)}")
    if joint.direction != 1:
        lines.append(f"direction = {joint.direction}")
    lines.append(f"limits = [{limit_value(joint.limits[0])}, {limit_value(joint.limits[1])}]")
    return lines


def frame_lines(key: str, parts: FrameParts) -> list[str]:
    if parts.identity:
        return []
    lines = [f"[{key}]", "translation = [" + ", ".join(toml_value(v) for v in parts.translation) + "]"]
    if any(v != 0 for v in parts.angles):
        angles = ", ".join(toml_value(v) for v in parts.angles)
        lines.append(f"rotation = {{ axes = \"xyz\", frame = \"fixed\", angles = [{angles}] }}")
    return lines


def arm_file_text(converted: Converted) -> str:
    arm = converted.arm
    blocks = [header(converted),
              ["[arm]", f"name = {toml_string(arm.name)}", f"description = {toml_string(arm.description)}",
               f"convention = \"{arm.convention}\"", f"length_unit = \"{arm.length_unit}\"",
               f"angle_unit = \"{arm.angle_unit}\""]]
    blocks += [joint_lines(joint) for joint in arm.joints]
    blocks += [b for b in (frame_lines("base", converted.base), frame_lines("tool", converted.tool)) if b]
    return "\n\n".join("\n".join(block) for block in blocks) + "\n"
