"""Tests for ikgen.armfile: loading arm files (TOML and JSON) and every kind of bad input.

Every bad input must give an ArmFileError whose message names the file, the place (joint index
and name, field) and what was expected, with ``path:line`` when the line is known; the command
line must print it as ``ikgen: error: ...`` on stderr, exit with status 2 and show no traceback.

Outside references used here:
- sympy (general-purpose CAS) for exact values (sp.pi/2, sp.cos(...) == 0).
- scipy.spatial.transform.Rotation (general-purpose library) for the rotation forms: lower-case
  axis sequences are extrinsic (fixed axes), upper-case intrinsic (moving axes); quaternions in
  scalar-last (x, y, z, w) order (scipy documentation, Rotation.from_euler / from_quat).
- JSON has no NaN or Infinity: RFC 8259 (The JSON Data Interchange Format, 2017), section 6.
- TOML has nan and inf float values: TOML v1.0.0 specification, section "Float".
- A rotation matrix is orthonormal with determinant +1 (common practice).
"""

from __future__ import annotations

import dataclasses
import hashlib
import json
import math
import re
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

import ikgen.files
import sympy as sp
from scipy.spatial.transform import Rotation

from ikgen.armfile import arm_from_data, load_arm
from ikgen.cli import main
from ikgen.errors import ArmFileError, IkgenError
from ikgen.model import Arm

REPO = Path(__file__).resolve().parents[1]
EXAMPLES = REPO / "examples"

# A small invented arm (two revolute joints and a prismatic one), standard DH, mm and degrees.
BASE = """\
# small invented test arm
[arm]
name = "bench3"
description = "three-joint test arm"
convention = "standard"
length_unit = "mm"
angle_unit = "deg"

[[joint]]
name = "waist"
type = "revolute"
a = 0
alpha = 90
d = 100
theta = 0

[[joint]]
name = "elbow"
type = "revolute"
a = 200
alpha = 0
d = 0
theta = 0
limits = [-90, 90]

[[joint]]
name = "slide"
type = "prismatic"
a = 0
alpha = 0
d = 0
theta = 0
limits = [0, 150]
"""


# --------------------------------------------------------------------------- helpers

def sub(text: str, old: str, new: str, nth: int = 1) -> str:
    """Replace the nth occurrence of ``old`` (which must exist) by ``new``."""
    start = -1
    for _ in range(nth):
        start = text.find(old, start + 1)
        assert start >= 0, f"{old!r} occurrence {nth} not in the text"
    return text[:start] + new + text[start + len(old):]


def in_joint(text: str, joint: int, old: str, new: str) -> str:
    """Replace ``old`` by ``new`` inside the given joint's table (1-based) of a TOML text."""
    parts = text.split("[[joint]]")
    assert len(parts) > joint
    parts[joint] = sub(parts[joint], old, new)
    return "[[joint]]".join(parts)


def line_of(text: str, needle: str, nth: int = 1) -> int:
    """1-based number of the line holding the nth occurrence of ``needle``."""
    hits = [i for i, line in enumerate(text.splitlines(), 1) if needle in line]
    assert len(hits) >= nth, f"{needle!r} not found {nth} times"
    return hits[nth - 1]


def write(tmp_path: Path, text: str | bytes, name: str = "arm.toml") -> Path:
    path = tmp_path / name
    if isinstance(text, bytes):
        path.write_bytes(text)
    else:
        path.write_text(text, encoding="utf-8")
    return path


def load_error(path) -> ArmFileError:
    with pytest.raises(ArmFileError) as info:
        load_arm(path)
    return info.value


def check_message(error: ArmFileError, path: Path, fragments, line: int | None = None,
                  expected: str | None = None):
    """The message names the file (with :line when given), holds every fragment, and says what was expected."""
    message = str(error)
    prefix = f"{path}:{line}: " if line is not None else f"{path}"
    assert message.startswith(prefix), (message, prefix)
    if line is not None:
        assert error.line == line
    for fragment in fragments:
        assert fragment in message, (fragment, message)
    assert "; expected " in message, message
    assert error.expected
    if expected is not None:
        assert expected in error.expected, (expected, error.expected)
    assert "Traceback" not in message


def run_cli(argv, capsys) -> tuple[int, str, str]:
    code = main(argv)
    captured = capsys.readouterr()
    return code, captured.out, captured.err


def run_subprocess(*args) -> subprocess.CompletedProcess:
    return subprocess.run([sys.executable, "-m", "ikgen.cli", *map(str, args)], cwd=REPO,
                          capture_output=True, text=True, timeout=300)


# --------------------------------------------------------------------------- loading: positive

def test_base_arm_loads(tmp_path):
    arm = load_arm(write(tmp_path, BASE))
    assert isinstance(arm, Arm)
    assert (arm.name, arm.description, arm.convention, arm.length_unit, arm.angle_unit) == \
        ("bench3", "three-joint test arm", "standard", "mm", "deg")
    assert [j.name for j in arm.joints] == ["waist", "elbow", "slide"]
    assert [j.index for j in arm.joints] == [1, 2, 3]
    assert [j.kind for j in arm.joints] == ["revolute", "revolute", "prismatic"]
    assert arm.dof == 3
    assert arm.joints[1].a == 200 and arm.joints[0].d == 100
    assert arm.base == sp.eye(4) and arm.tool == sp.eye(4)
    assert arm.source == str(tmp_path / "arm.toml")
    assert arm.digest == hashlib.sha256(BASE.encode()).hexdigest()


@pytest.mark.parametrize("name, convention, unit, angle", [
    ("benchtop6.toml", "standard", "mm", "deg"),
    ("packer6.toml", "modified", "m", "rad"),
    ("inspector6.json", "standard", "mm", "deg"),   # written as "distal"
])
def test_demo_arms_load(name, convention, unit, angle):
    arm = load_arm(EXAMPLES / name)
    assert arm.name == Path(name).stem
    assert arm.dof == 6
    assert (arm.convention, arm.length_unit, arm.angle_unit) == (convention, unit, angle)
    assert len({j.name for j in arm.joints}) == 6
    for transform in (arm.base, arm.tool):
        rotation = sp.Matrix(transform[:3, :3])
        assert sp.simplify(rotation.T * rotation - sp.eye(3)) == sp.zeros(3)  # exact, common practice
        assert sp.simplify(rotation.det()) == 1
        assert list(transform[3, :]) == [0, 0, 0, 1]
    for joint in arm.joints:
        assert joint.limits[0] < joint.limits[1]
        # DH alphas of these arms are multiples of 90 degrees: the cosines are exact 0, 1 or -1.
        assert sp.cos(joint.alpha) in (sp.S.Zero, sp.S.One, sp.S.NegativeOne)


@pytest.mark.parametrize("name", ["benchtop6.toml", "packer6.toml", "inspector6.json"])
def test_demo_arms_describe(name, capsys):
    code, out, err = run_cli(["describe", str(EXAMPLES / name)], capsys)
    assert code == 0, err
    assert Path(name).stem in out
    assert err == ""


def test_demo_transforms_match_scipy():
    # packer6 base: xyz fixed angles (0, 0, pi); tool: xyz fixed (0, pi/2, 0).
    packer = load_arm(EXAMPLES / "packer6.toml")
    np.testing.assert_allclose(np.array(packer.base[:3, :3], dtype=float),
                               Rotation.from_euler("xyz", [0, 0, math.pi]).as_matrix(), atol=1e-15)
    np.testing.assert_allclose(np.array(packer.tool[:3, :3], dtype=float),
                               Rotation.from_euler("xyz", [0, math.pi / 2, 0]).as_matrix(), atol=1e-15)
    assert list(packer.base[:3, 3]) == [0, 0, sp.Rational(45, 100)]
    # inspector6 base: quaternion (w, x, y, z) = (0, 1, 0, 0); tool: zyx moving (90, 0, 0) deg.
    inspector = load_arm(EXAMPLES / "inspector6.json")
    np.testing.assert_allclose(np.array(inspector.base[:3, :3], dtype=float),
                               Rotation.from_quat([1, 0, 0, 0]).as_matrix(), atol=1e-15)
    np.testing.assert_allclose(np.array(inspector.tool[:3, :3], dtype=float),
                               Rotation.from_euler("ZYX", [90, 0, 0], degrees=True).as_matrix(), atol=1e-15)


def test_alpha_90_degrees_is_exactly_pi_over_2(tmp_path):
    arm = load_arm(write(tmp_path, BASE))
    alpha = arm.joints[0].alpha
    assert alpha == sp.pi / 2
    assert sp.cos(alpha) == 0
    assert sp.cos(alpha) is sp.S.Zero          # exact zero, not 6.1e-17
    assert float(sp.cos(alpha)) == 0.0
    assert math.cos(math.radians(90)) != 0.0   # what a float pipeline would have given


def test_angles_in_degrees_are_exact_multiples_of_pi(tmp_path):
    text = in_joint(BASE, 2, "theta = 0", "theta = -90")
    text = in_joint(text, 2, "alpha = 0", "alpha = 12.5")
    arm = load_arm(write(tmp_path, text))
    assert arm.joints[1].theta == -sp.pi / 2
    assert arm.joints[1].alpha == sp.Rational(125, 10) * sp.pi / 180 == 5 * sp.pi / 72


def test_decimal_lengths_are_exact(tmp_path):
    arm = load_arm(write(tmp_path, in_joint(BASE, 2, "a = 200", "a = 0.1")))
    assert arm.joints[1].a == sp.Rational(1, 10)


def test_pi_in_a_degree_file_is_refused(tmp_path):
    path = write(tmp_path, in_joint(BASE, 1, "alpha = 90", 'alpha = "pi/2"'))
    with pytest.raises(ArmFileError) as caught:
        load_arm(path)
    message = str(caught.value)
    assert "joint 1 'waist'" in message and "field 'alpha'" in message and "degrees" in message


def test_expression_strings_in_a_radian_file(tmp_path):
    text = sub(BASE, 'angle_unit = "deg"', 'angle_unit = "rad"')
    text = in_joint(text, 1, "alpha = 90", 'alpha = "pi/2"')
    text = in_joint(text, 2, "theta = 0", 'theta = "-3*pi/4"')
    text = in_joint(text, 2, "limits = [-90, 90]", 'limits = ["-pi/2", "pi/2"]')
    arm = load_arm(write(tmp_path, text))
    assert arm.joints[0].alpha == sp.pi / 2
    assert arm.joints[1].theta == -3 * sp.pi / 4
    assert arm.joints[1].limits == (float(-sp.pi / 2), float(sp.pi / 2))
    assert arm.notes == ()


def test_radian_floats_snap_to_multiples_of_pi_over_12_with_a_note(tmp_path):
    text = sub(BASE, 'angle_unit = "deg"', 'angle_unit = "rad"')
    text = in_joint(text, 1, "alpha = 90", f"alpha = {math.pi / 2!r}")
    text = in_joint(text, 2, "theta = 0", "theta = 1.5708")            # rounded: must stay as written
    arm = load_arm(write(tmp_path, text))
    assert arm.joints[0].alpha == sp.pi / 2
    assert sp.cos(arm.joints[0].alpha) is sp.S.Zero
    assert arm.joints[1].theta == sp.Rational(15708, 10000)
    assert len(arm.notes) == 1 and "joint 1 'waist'" in arm.notes[0] and "alpha" in arm.notes[0]


def test_radian_rotation_angles_of_base_and_tool_snap_too(tmp_path):
    text = sub(BASE, 'angle_unit = "deg"', 'angle_unit = "rad"')
    text = in_joint(text, 1, "alpha = 90", 'alpha = "pi/2"')
    text += f'\n[tool]\nrotation = {{ axes = "xyz", frame = "fixed", angles = [0, {math.pi / 2!r}, 0] }}\n'
    arm = load_arm(write(tmp_path, text))
    expected = sp.Matrix([[0, 0, 1], [0, 1, 0], [-1, 0, 0]])   # Ry(pi/2) exactly (common practice)
    assert sp.Matrix(arm.tool[:3, :3]) == expected
    assert any("[tool.rotation]" in note for note in arm.notes)


def test_defaults(tmp_path):
    arm = load_arm(write(tmp_path, BASE))
    waist = arm.joints[0]
    assert waist.offset == 0 and waist.direction == 1
    assert waist.limits == (-math.pi, math.pi)                       # revolute default: +-180 deg
    assert list(arm.limits_in_readings()[0]) == pytest.approx([-180.0, 180.0], abs=1e-12)
    assert arm.joints[2].offset == 0 and arm.joints[2].direction == 1
    assert arm.description == "three-joint test arm"
    assert load_arm(write(tmp_path, sub(BASE, 'description = "three-joint test arm"\n', ""),
                          "nodesc.toml")).description == ""


def test_default_joint_name(tmp_path):
    arm = load_arm(write(tmp_path, in_joint(BASE, 2, 'name = "elbow"\n', "")))
    assert arm.joints[1].name == "j2"


def test_limits_are_converted_to_internal_units(tmp_path):
    arm = load_arm(write(tmp_path, BASE))
    assert arm.joints[1].limits == (float(-sp.pi / 2), float(sp.pi / 2))
    assert arm.joints[2].limits == (0.0, 150.0)                      # prismatic: length unit


def test_offset_and_direction(tmp_path):
    text = in_joint(BASE, 2, "theta = 0", "theta = 0\noffset = 90\ndirection = -1")
    text = in_joint(text, 3, "theta = 0", "theta = 0\noffset = 12.5")
    arm = load_arm(write(tmp_path, text))
    assert arm.joints[1].offset == sp.pi / 2 and arm.joints[1].direction == -1
    assert arm.joints[2].offset == sp.Rational(25, 2)                 # prismatic offset: length unit


@pytest.mark.parametrize("written, meant", [("standard", "standard"), ("distal", "standard"),
                                            ("modified", "modified"), ("proximal", "modified"),
                                            ("Distal", "standard"), ("MODIFIED", "modified")])
def test_convention_aliases(tmp_path, written, meant):
    arm = load_arm(write(tmp_path, sub(BASE, '"standard"', f'"{written}"')))
    assert arm.convention == meant


def _json_twin() -> str:
    # The same arm as TWIN_TOML below, written as JSON (one key per line so lines are known).
    return """\
{
  "arm": {
    "name": "twin",
    "convention": "modified",
    "length_unit": "m",
    "angle_unit": "deg"
  },
  "joint": [
    {
      "name": "base_turn",
      "type": "revolute",
      "a": 0,
      "alpha": 0,
      "d": 0.3,
      "theta": 0,
      "limits": [-170, 170]
    },
    {
      "name": "lift",
      "type": "prismatic",
      "a": 0.05,
      "alpha": -90,
      "d": 0,
      "theta": 90,
      "offset": 0.1,
      "direction": -1,
      "limits": [0, 0.5]
    }
  ],
  "base": {
    "translation": [0, 0, 0.45],
    "rotation": {"quaternion": [0.5, 0.5, 0.5, 0.5], "order": "xyzw"}
  },
  "tool": {
    "translation": [0.01, 0, 0.2],
    "rotation": {"axes": "zyz", "frame": "moving", "angles": [90, 45, -30]}
  }
}
"""


TWIN_TOML = """\
[arm]
name = "twin"
convention = "modified"
length_unit = "m"
angle_unit = "deg"

[[joint]]
name = "base_turn"
type = "revolute"
a = 0
alpha = 0
d = 0.3
theta = 0
limits = [-170, 170]

[[joint]]
name = "lift"
type = "prismatic"
a = 0.05
alpha = -90
d = 0
theta = 90
offset = 0.1
direction = -1
limits = [0, 0.5]

[base]
translation = [0, 0, 0.45]
rotation = { quaternion = [0.5, 0.5, 0.5, 0.5], order = "xyzw" }

[tool]
translation = [0.01, 0, 0.2]
rotation = { axes = "zyz", frame = "moving", angles = [90, 45, -30] }
"""


def test_toml_and_json_forms_give_equal_arms(tmp_path):
    from_toml = load_arm(write(tmp_path, TWIN_TOML, "twin.toml"))
    from_json = load_arm(write(tmp_path, _json_twin(), "twin.json"))
    assert from_toml.source != from_json.source and from_toml.digest != from_json.digest
    strip = dict(source="", digest="")
    assert dataclasses.replace(from_toml, **strip) == dataclasses.replace(from_json, **strip)
    # and the same as validating the parsed dict directly
    direct = arm_from_data(json.loads(_json_twin()))
    assert dataclasses.replace(direct, **strip) == dataclasses.replace(from_json, **strip)


def test_twin_transforms_match_scipy(tmp_path):
    arm = load_arm(write(tmp_path, TWIN_TOML, "twin.toml"))
    np.testing.assert_allclose(np.array(arm.base[:3, :3], dtype=float),
                               Rotation.from_quat([0.5, 0.5, 0.5, 0.5]).as_matrix(), atol=1e-14)
    np.testing.assert_allclose(np.array(arm.tool[:3, :3], dtype=float),
                               Rotation.from_euler("ZYZ", [90, 45, -30], degrees=True).as_matrix(), atol=1e-14)
    assert list(arm.tool[:3, 3]) == [sp.Rational(1, 100), 0, sp.Rational(1, 5)]


def test_examples_in_the_documentation_load(tmp_path):
    doc = (REPO / "docs" / "arm-file.md").read_text(encoding="utf-8")
    blocks = re.findall(r"```(toml|json)\n(.*?)```", doc, re.S)
    assert [kind for kind, _ in blocks] == ["toml", "json", "toml"]
    # the full example is a verbatim copy of the demo arm
    assert blocks[0][1] == (EXAMPLES / "benchtop6.toml").read_text(encoding="utf-8")
    arms = [load_arm(write(tmp_path, text, f"doc{i}.{kind}")) for i, (kind, text) in enumerate(blocks)]
    strip = dict(source="", digest="")
    # the short JSON example and its TOML form describe the same arm
    assert dataclasses.replace(arms[1], **strip) == dataclasses.replace(arms[2], **strip)
    assert arms[1].convention == "modified"


@pytest.mark.parametrize("axes", ["xyz", "zyx", "zyz", "xzx", "yxz"])
@pytest.mark.parametrize("frame", ["fixed", "moving"])
def test_angle_rotation_forms_match_scipy(tmp_path, axes, frame):
    angles = [20, -35, 50]
    text = BASE + f'\n[base]\nrotation = {{ axes = "{axes}", frame = "{frame}", angles = {angles} }}\n'
    arm = load_arm(write(tmp_path, text))
    sequence = axes if frame == "fixed" else axes.upper()   # scipy: lower = extrinsic, upper = intrinsic
    np.testing.assert_allclose(np.array(arm.base[:3, :3], dtype=float),
                               Rotation.from_euler(sequence, angles, degrees=True).as_matrix(), atol=1e-14)


def test_fixed_xyz_equals_moving_zyx_with_reversed_angles(tmp_path):
    # Rotations about fixed axes in one order equal rotations about moving axes in the reverse
    # order (common practice; Craig, Introduction to Robotics, 3rd ed., sec. 2.8, section number from memory).
    fixed = BASE + '\n[base]\nrotation = { axes = "xyz", frame = "fixed", angles = [30, 45, 60] }\n'
    moving = BASE + '\n[base]\nrotation = { axes = "zyx", frame = "moving", angles = [60, 45, 30] }\n'
    a = load_arm(write(tmp_path, fixed, "fixed.toml"))
    b = load_arm(write(tmp_path, moving, "moving.toml"))
    assert sp.simplify(sp.Matrix(a.base) - sp.Matrix(b.base)) == sp.zeros(4)


def test_quaternion_orders_agree_with_scipy(tmp_path):
    q = Rotation.from_euler("xyz", [10, 20, 30], degrees=True).as_quat()   # scipy order: x, y, z, w
    wxyz = [q[3], q[0], q[1], q[2]]
    a = load_arm(write(tmp_path, BASE + f'\n[base]\nrotation = {{ quaternion = {list(map(float, wxyz))}, '
                       f'order = "wxyz" }}\n', "a.toml"))
    b = load_arm(write(tmp_path, BASE + f'\n[base]\nrotation = {{ quaternion = {list(map(float, q))}, '
                       f'order = "xyzw" }}\n', "b.toml"))
    expected = Rotation.from_quat(q).as_matrix()
    for arm in (a, b):
        np.testing.assert_allclose(np.array(arm.base[:3, :3], dtype=float), expected, atol=1e-12)


def test_matrix_rotation_form(tmp_path):
    text = BASE + '\n[tool]\ntranslation = [0, 0, 95]\nrotation = { matrix = [[0, -1, 0], [1, 0, 0], [0, 0, 1]] }\n'
    arm = load_arm(write(tmp_path, text))
    assert sp.Matrix(arm.tool) == sp.Matrix([[0, -1, 0, 0], [1, 0, 0, 0], [0, 0, 1, 95], [0, 0, 0, 1]])


def test_rotation_as_a_sub_table(tmp_path):
    text = BASE + '\n[tool]\ntranslation = [0, 0, 95]\n\n[tool.rotation]\naxes = "xyz"\nframe = "fixed"\nangles = [0, 0, 90]\n'
    arm = load_arm(write(tmp_path, text))
    assert sp.Matrix(arm.tool[:3, :3]) == sp.Matrix([[0, -1, 0], [1, 0, 0], [0, 0, 1]])


# --------------------------------------------------------------------------- bad input: TOML cases

# (id, text, fragments the message must hold, line needle (nth occurrence) or None, expected fragment)
J1, J2, J3 = "joint 1 'waist'", "joint 2 'elbow'", "joint 3 'slide'"

TOML_CASES = [
    # unknown and missing keys
    ("unknown-key-alpah", in_joint(BASE, 2, "alpha = 0", "alpah = 0"),
     [J2, "unknown key 'alpah'", "did you mean 'alpha'?"], ("alpah", 1), "alpha"),
    ("unknown-key-lenght", sub(BASE, "length_unit", "lenght_unit"),
     ["[arm]", "unknown key 'lenght_unit'", "did you mean 'length_unit'?"], ("lenght_unit", 1), "length_unit"),
    ("unknown-key-no-close-match", in_joint(BASE, 1, "theta = 0", "theta = 0\nzzzz = 1"),
     [J1, "unknown key 'zzzz'"], ("zzzz", 1), "one of name, type, a, alpha"),
    ("unknown-top-table", BASE + "\n[tooll]\ntranslation = [0, 0, 1]\n",
     ["top level", "unknown key 'tooll'", "did you mean 'tool'?"], ("[tooll]", 1), "arm, joint, base, tool"),
    ("missing-a", in_joint(BASE, 2, "a = 200\n", ""),
     [J2, "missing field 'a'"], ("[[joint]]", 2), "a number"),
    ("missing-alpha", in_joint(BASE, 3, "alpha = 0\n", ""),
     [J3, "missing field 'alpha'"], ("[[joint]]", 3), "a number"),
    ("missing-d", in_joint(BASE, 1, "d = 100\n", ""),
     [J1, "missing field 'd'"], ("[[joint]]", 1), "a number"),
    ("missing-theta", in_joint(BASE, 1, "theta = 0\n", ""),
     [J1, "missing field 'theta'"], ("[[joint]]", 1), "a number"),
    ("missing-type", in_joint(BASE, 3, 'type = "prismatic"\n', ""),
     [J3, "missing field 'type'"], ("[[joint]]", 3), "revolute, prismatic"),
    ("missing-convention", sub(BASE, 'convention = "standard"\n', ""),
     ["[arm]", "missing field 'convention'"], ("[arm]", 1), "standard"),
    ("missing-length-unit", sub(BASE, 'length_unit = "mm"\n', ""),
     ["[arm]", "missing field 'length_unit'"], ("[arm]", 1), "m, mm"),
    ("missing-arm-name", sub(BASE, 'name = "bench3"\n', ""),
     ["[arm]", "missing field 'name'"], ("[arm]", 1), "a non-empty string"),
    ("missing-arm-table", sub(BASE, "[arm]\n", "").replace('name = "bench3"\ndescription = "three-joint test arm"\n'
                                                            'convention = "standard"\nlength_unit = "mm"\n'
                                                            'angle_unit = "deg"\n', ""),
     ["missing table 'arm'"], None, "[arm] table"),
    # wrong types
    ("string-not-number", in_joint(BASE, 2, "a = 200", 'a = "abc"'),
     [J2, "field 'a'", "'abc'"], ('a = "abc"', 1), "a finite number"),
    ("boolean-number", in_joint(BASE, 1, "d = 100", "d = true"),
     [J1, "field 'd'", "boolean"], ("d = true", 1), "a finite number"),
    ("list-number", in_joint(BASE, 1, "alpha = 90", "alpha = [90]"),
     [J1, "field 'alpha'", "list"], ("alpha = [90]", 1), "a finite number"),
    ("table-number", in_joint(BASE, 1, "alpha = 90", "alpha = { value = 90 }"),
     [J1, "field 'alpha'", "dict"], ("alpha = {", 1), "a finite number"),
    ("date-number", in_joint(BASE, 1, "d = 100", "d = 1979-05-27"),
     [J1, "field 'd'", "date"], ("d = 1979", 1), "a finite number"),
    ("name-integer", in_joint(BASE, 1, 'name = "waist"', "name = 5"),
     ["joint 1", "field 'name' is an integer"], ("name = 5", 1), "a non-empty string"),
    ("name-empty", in_joint(BASE, 1, 'name = "waist"', 'name = "  "'),
     ["joint 1", "field 'name' is an empty string"], ('name = "  "', 1), "a non-empty string"),
    ("name-control-character", in_joint(BASE, 1, 'name = "waist"', 'name = "wa\\u0007ist"'),
     ["joint 1", "field 'name'", "control characters"], ('name = "wa', 1), "printable name"),
    ("description-integer", sub(BASE, 'description = "three-joint test arm"', "description = 5"),
     ["[arm]", "field 'description' is an integer"], ("description = 5", 1), "a string"),
    ("convention-integer", sub(BASE, 'convention = "standard"', "convention = 1"),
     ["[arm]", "field 'convention' is an integer"], ("convention = 1", 1), "standard"),
    ("type-boolean", in_joint(BASE, 2, 'type = "revolute"', "type = true"),
     [J2, "field 'type' is a boolean"], ("type = true", 1), "revolute, prismatic"),
    ("limits-string", in_joint(BASE, 2, "limits = [-90, 90]", 'limits = "wide"'),
     [J2, "field 'limits' is a string"], ('limits = "wide"', 1), "a list of 2 numbers"),
    ("limits-three", in_joint(BASE, 2, "limits = [-90, 90]", "limits = [-90, 0, 90]"),
     [J2, "field 'limits' is a list of 3"], ("limits = [-90, 0", 1), "a list of 2 numbers"),
    ("limits-item", in_joint(BASE, 2, "limits = [-90, 90]", 'limits = [-90, "ninety"]'),
     [J2, "field 'limits' item 2", "'ninety'"], ("limits = [-90, \"ninety", 1), "a finite number"),
    ("joint-not-table", "joint = [1, 2]\n" + BASE.split("[[joint]]")[0],
     ["joint 1", "is an integer"], ("joint = [1, 2]", 1), "a table of joint fields"),
    ("joint-not-array", "joint = 3\n" + BASE.split("[[joint]]")[0],
     ["top level", "'joint' is an integer"], ("joint = 3", 1), "an array of tables"),
    ("base-not-table", "base = 3\n" + BASE,
     ["top level", "'base' is an integer"], ("base = 3", 1), "a table of keys"),
    # non-finite numbers (TOML v1.0.0 has nan and inf)
    ("toml-nan", in_joint(BASE, 1, "alpha = 90", "alpha = nan"),
     [J1, "field 'alpha'", "nan is not finite"], ("alpha = nan", 1), "a finite number"),
    ("toml-inf", in_joint(BASE, 1, "d = 100", "d = inf"),
     [J1, "field 'd'", "inf is not finite"], ("d = inf", 1), "a finite number"),
    ("toml-minus-inf", in_joint(BASE, 2, "limits = [-90, 90]", "limits = [-inf, 90]"),
     [J2, "field 'limits' item 1", "-inf is not finite"], ("limits = [-inf", 1), "a finite number"),
    ("toml-nan-translation", BASE + "\n[tool]\ntranslation = [0, nan, 0]\n",
     ["[tool]", "field 'translation' item 2", "nan is not finite"], ("translation = [0, nan", 1), "a finite number"),
    ("float-overflow-in-string", in_joint(BASE, 1, "d = 100", 'd = "1e400"'),
     [J1, "field 'd'", "not finite"], ('d = "1e400"', 1), "a finite number"),
    # expressions that are not plain arithmetic
    ("expression-import", in_joint(BASE, 1, "alpha = 90", "alpha = \"__import__('os')\""),
     [J1, "field 'alpha'", "__import__", "may only use numbers, pi"], ("alpha = \"__import__", 1), "a finite number"),
    ("expression-power", in_joint(BASE, 1, "alpha = 90", 'alpha = "2**3"'),
     [J1, "field 'alpha'", "'2**3'"], ('alpha = "2**3"', 1), "a finite number"),
    ("expression-call", in_joint(BASE, 1, "alpha = 90", 'alpha = "sin(pi)"'),
     [J1, "field 'alpha'", "'sin(pi)'"], ('alpha = "sin(pi)"', 1), "a finite number"),
    ("expression-divide-by-zero", in_joint(BASE, 1, "alpha = 90", 'alpha = "pi/0"'),
     [J1, "field 'alpha'", "divides by zero"], ('alpha = "pi/0"', 1), "a finite number"),
    # conventions and units
    ("unknown-convention", sub(BASE, '"standard"', '"standart"'),
     ["[arm]", "unknown convention 'standart'", "did you mean 'standard'?"], ("convention =", 1),
     "standard, distal, modified, proximal"),
    ("unknown-convention-far", sub(BASE, '"standard"', '"craig"'),
     ["[arm]", "unknown convention 'craig'"], ("convention =", 1), "standard, distal, modified, proximal"),
    ("unknown-length-unit", sub(BASE, '"mm"', '"cm"'),
     ["[arm]", "unknown length unit 'cm'"], ("length_unit =", 1), "m, mm"),
    ("unknown-angle-unit", sub(BASE, '"deg"', '"degrees"'),
     ["[arm]", "unknown angle unit 'degrees'", "did you mean 'deg'?"], ("angle_unit =", 1), "deg, rad"),
    ("unknown-joint-type", in_joint(BASE, 3, '"prismatic"', '"linear"'),
     [J3, "unknown type 'linear'"], ('type = "linear"', 1), "revolute, prismatic"),
    # limits
    ("lower-above-upper", in_joint(BASE, 2, "limits = [-90, 90]", "limits = [90, -90]"),
     [J2, "lower limit 90 is not below upper limit -90"], ("limits = [90, -90]", 1), "lower < upper"),
    ("lower-equals-upper", in_joint(BASE, 2, "limits = [-90, 90]", "limits = [10, 10]"),
     [J2, "lower limit 10 is not below upper limit 10"], ("limits = [10, 10]", 1), "lower < upper"),
    ("prismatic-lower-above-upper", in_joint(BASE, 3, "limits = [0, 150]", "limits = [150, 0]"),
     [J3, "lower limit 150 is not below upper limit 0"], ("limits = [150, 0]", 1), "lower < upper"),
    ("prismatic-without-limits", in_joint(BASE, 3, "limits = [0, 150]\n", ""),
     [J3, "missing field 'limits'", "prismatic"], ("[[joint]]", 3), "[lower, upper] in the length unit"),
    # joints
    ("zero-joints", "joint = []\n" + BASE.split("[[joint]]")[0],
     ["top level", "zero joints"], ("joint = []", 1), "at least one joint"),
    ("no-joints", BASE.split("[[joint]]")[0],
     ["top level", "no joints"], None, "at least one [[joint]]"),
    ("duplicate-joint-name", in_joint(BASE, 3, 'name = "slide"', 'name = "elbow"'),
     ["joint 3 'elbow'", "duplicate joint name 'elbow'", "joint 2 has it too"], ('name = "elbow"', 2),
     "unique"),
    # direction
    ("direction-two", in_joint(BASE, 2, "theta = 0", "theta = 0\ndirection = 2"),
     [J2, "field 'direction' is 2"], ("direction = 2", 1), "1 or -1"),
    ("direction-zero", in_joint(BASE, 2, "theta = 0", "theta = 0\ndirection = 0"),
     [J2, "field 'direction' is 0"], ("direction = 0", 1), "1 or -1"),
    ("direction-boolean", in_joint(BASE, 2, "theta = 0", "theta = 0\ndirection = true"),
     [J2, "field 'direction' is true"], ("direction = true", 1), "1 or -1"),
    ("direction-string", in_joint(BASE, 2, "theta = 0", "theta = 0\ndirection = \"-1\""),
     [J2, "field 'direction' is \"-1\""], ("direction = \"-1\"", 1), "1 or -1"),
    ("direction-half", in_joint(BASE, 2, "theta = 0", "theta = 0\ndirection = 0.5"),
     [J2, "field 'direction' is 0.5"], ("direction = 0.5", 1), "1 or -1"),
    # base and tool frames
    ("translation-two", BASE + "\n[tool]\ntranslation = [0, 95]\n",
     ["[tool]", "field 'translation' is a list of 2"], ("translation = [0, 95]", 1), "a list of 3 numbers"),
    ("frame-unknown-key", BASE + "\n[base]\ntranslate = [0, 0, 1]\n",
     ["[base]", "unknown key 'translate'", "did you mean 'translation'?"], ("translate =", 1),
     "translation, rotation"),
    ("rotation-not-table", BASE + "\n[base]\nrotation = 90\n",
     ["[base.rotation]", "'rotation' is an integer"], ("rotation = 90", 1), "angles+axes+frame"),
    ("non-unit-quaternion", BASE + '\n[base]\nrotation = { quaternion = [1, 1, 0, 0], order = "wxyz" }\n',
     ["[base.rotation]", "quaternion has norm 1.41421356"], ("rotation = {", 1), "a unit quaternion"),
    ("zero-quaternion", BASE + '\n[base]\nrotation = { quaternion = [0, 0, 0, 0], order = "xyzw" }\n',
     ["[base.rotation]", "quaternion has norm 0"], ("rotation = {", 1), "a unit quaternion"),
    ("quaternion-three", BASE + '\n[base]\nrotation = { quaternion = [1, 0, 0], order = "wxyz" }\n',
     ["[base.rotation]", "field 'quaternion' is a list of 3"], ("rotation = {", 1), "a list of 4 numbers"),
    ("quaternion-without-order", BASE + '\n[base]\nrotation = { quaternion = [1, 0, 0, 0] }\n',
     ["[base.rotation]", "missing field 'order'"], ("rotation = {", 1), '"wxyz" or "xyzw"'),
    ("quaternion-bad-order", BASE + '\n[base]\nrotation = { quaternion = [1, 0, 0, 0], order = "wzyx" }\n',
     ["[base.rotation]", "unknown order 'wzyx'"], ("rotation = {", 1), "wxyz, xyzw"),
    ("two-rotation-forms", BASE + '\n[base]\nrotation = { quaternion = [1, 0, 0, 0], order = "wxyz", '
     'matrix = [[1, 0, 0], [0, 1, 0], [0, 0, 1]] }\n',
     ["[base.rotation]", "found quaternion and matrix"], ("rotation = {", 1),
     "exactly one of 'angles', 'quaternion' or 'matrix'"),
    ("angles-and-quaternion", BASE + '\n[tool]\nrotation = { angles = [0, 0, 0], axes = "xyz", frame = "fixed", '
     'quaternion = [1, 0, 0, 0] }\n',
     ["[tool.rotation]", "found angles and quaternion"], ("rotation = {", 1), "exactly one of"),
    ("no-rotation-form", BASE + "\n[tool]\nrotation = { }\n",
     ["[tool.rotation]", "found none of them"], ("rotation = {", 1), "exactly one of"),
    ("angles-without-axes", BASE + '\n[tool]\nrotation = { angles = [0, 0, 90], frame = "fixed" }\n',
     ["[tool.rotation]", "missing field 'axes'"], ("rotation = {", 1), "xyz"),
    ("angles-without-frame", BASE + '\n[tool]\nrotation = { angles = [0, 0, 90], axes = "xyz" }\n',
     ["[tool.rotation]", "missing field 'frame'"], ("rotation = {", 1), '"fixed" or "moving"'),
    ("angles-bad-axes", BASE + '\n[tool]\nrotation = { angles = [0, 0, 90], axes = "xxy", frame = "fixed" }\n',
     ["[tool.rotation]", "field 'axes' is 'xxy'"], ("rotation = {", 1), "no two neighbours equal"),
    ("angles-axes-letters", BASE + '\n[tool]\nrotation = { angles = [0, 0, 90], axes = "abc", frame = "fixed" }\n',
     ["[tool.rotation]", "field 'axes' is 'abc'"], ("rotation = {", 1), "three letters of x, y, z"),
    ("angles-bad-frame", BASE + '\n[tool]\nrotation = { angles = [0, 0, 90], axes = "xyz", frame = "rotating" }\n',
     ["[tool.rotation]", "unknown frame 'rotating'"], ("rotation = {", 1), "fixed, moving"),
    ("angles-two-values", BASE + '\n[tool]\nrotation = { angles = [0, 90], axes = "xyz", frame = "fixed" }\n',
     ["[tool.rotation]", "field 'angles' is a list of 2"], ("rotation = {", 1), "a list of 3 numbers"),
    ("angles-with-order", BASE + '\n[tool]\nrotation = { angles = [0, 0, 90], axes = "xyz", frame = "fixed", '
     'order = "wxyz" }\n',
     ["[tool.rotation]", "'order' belongs to the 'quaternion' form"], ("rotation = {", 1), "'angles', 'axes', 'frame'"),
    ("quaternion-with-axes", BASE + '\n[base]\nrotation = { quaternion = [1, 0, 0, 0], order = "wxyz", axes = "xyz" }\n',
     ["[base.rotation]", "'axes' belongs to the 'angles' form"], ("rotation = {", 1), "'quaternion', 'order'"),
    ("matrix-with-frame", BASE + '\n[base]\nrotation = { matrix = [[1, 0, 0], [0, 1, 0], [0, 0, 1]], frame = "fixed" }\n',
     ["[base.rotation]", "'frame' belongs to the 'angles' form"], ("rotation = {", 1), "'matrix'"),
    ("rotation-unknown-key", BASE + '\n[tool]\n\n[tool.rotation]\nangles = [0, 0, 90]\naxes = "xyz"\nframe = "fixed"\n'
     'angels = 1\n',
     ["[tool.rotation]", "unknown key 'angels'", "did you mean 'angles'?"], ("angels = 1", 1), "axes, frame, angles"),
    ("reflection-matrix", BASE + '\n[tool]\nrotation = { matrix = [[1, 0, 0], [0, 1, 0], [0, 0, -1]] }\n',
     ["[tool.rotation]", "matrix is not a rotation", "det = -1"], ("rotation = {", 1), "determinant +1"),
    ("scaled-matrix", BASE + '\n[tool]\nrotation = { matrix = [[2, 0, 0], [0, 1, 0], [0, 0, 1]] }\n',
     ["[tool.rotation]", "matrix is not a rotation"], ("rotation = {", 1), "an orthonormal matrix"),
    ("skewed-matrix", BASE + '\n[tool]\nrotation = { matrix = [[1, 0.1, 0], [0, 1, 0], [0, 0, 1]] }\n',
     ["[tool.rotation]", "matrix is not a rotation"], ("rotation = {", 1), "an orthonormal matrix"),
    ("matrix-two-rows", BASE + '\n[tool]\nrotation = { matrix = [[1, 0, 0], [0, 1, 0]] }\n',
     ["[tool.rotation]", "field 'matrix' is not 3 rows of 3 numbers"], ("rotation = {", 1), "[[r11, r12, r13]"),
    ("matrix-bad-entry", BASE + '\n[tool]\nrotation = { matrix = [[1, 0, 0], [0, 1, 0], [0, 0, "one"]] }\n',
     ["[tool.rotation]", "matrix row 3", "'one'"], ("rotation = {", 1), "a finite number"),
]


@pytest.mark.parametrize("case_id, text, fragments, line_spec, expected", TOML_CASES,
                         ids=[c[0] for c in TOML_CASES])
def test_bad_toml_input(tmp_path, case_id, text, fragments, line_spec, expected):
    path = write(tmp_path, text)
    error = load_error(path)
    line = line_of(text, *line_spec) if line_spec else None
    check_message(error, path, fragments, line, expected)


@pytest.mark.parametrize("case_id, text, fragments, line_spec, expected", TOML_CASES[::6],
                         ids=[c[0] for c in TOML_CASES[::6]])
def test_bad_toml_input_through_cli(tmp_path, capsys, case_id, text, fragments, line_spec, expected):
    path = write(tmp_path, text)
    code, out, err = run_cli(["describe", str(path)], capsys)
    assert code == 2
    assert out == ""
    assert err.startswith("ikgen: error: " + str(path))
    assert err.count("\n") == 1                  # one line, no traceback
    assert "Traceback" not in err
    for fragment in fragments:
        assert fragment in err


# --------------------------------------------------------------------------- bad input: the file itself

def test_malformed_toml_reports_the_line(tmp_path):
    text = in_joint(BASE, 2, "d = 0", "d = = 0")
    path = write(tmp_path, text)
    check_message(load_error(path), path, ["malformed TOML", "column"], line_of(text, "d = = 0"), "valid TOML")


def test_duplicate_toml_key_is_malformed(tmp_path):
    text = in_joint(BASE, 1, "d = 100", "d = 100\nd = 120")
    path = write(tmp_path, text)
    check_message(load_error(path), path, ["malformed TOML"], line_of(text, "d = 120"), "valid TOML")


def test_unterminated_toml_string(tmp_path):
    text = sub(BASE, 'name = "bench3"', 'name = "bench3')
    path = write(tmp_path, text)
    check_message(load_error(path), path, ["malformed TOML"], line_of(text, 'name = "bench3'), "valid TOML")


@pytest.mark.parametrize("content", [b"", b"   \n\n\t\n"])
def test_empty_file(tmp_path, content):
    path = write(tmp_path, content)
    check_message(load_error(path), path, ["the file is empty"], None, "an arm description")


def test_comment_only_file_misses_the_arm_table(tmp_path):
    path = write(tmp_path, "# nothing here\n")
    check_message(load_error(path), path, ["missing table 'arm'"], None, "[arm] table")


def test_binary_file(tmp_path):
    path = write(tmp_path, bytes(range(256)) * 4)
    check_message(load_error(path), path, ["binary data"], None, "a UTF-8 text file")


def test_non_utf8_file(tmp_path):
    path = write(tmp_path, BASE.replace("three-joint", "drei-gelenk-\u00e4").encode("latin-1"))
    check_message(load_error(path), path, ["not valid UTF-8"], None, "a UTF-8 text file")


def test_missing_file(tmp_path):
    path = tmp_path / "no_such_arm.toml"
    check_message(load_error(path), path, ["file not found"], None, "an existing arm file (.toml or .json)")


def test_path_through_a_file_is_not_found(tmp_path):
    path = write(tmp_path, BASE) / "inner.toml"
    check_message(load_error(path), path, ["file not found"], None, "an existing")


def test_directory(tmp_path):
    folder = tmp_path / "arms.toml"
    folder.mkdir()
    check_message(load_error(folder), folder, ["is a directory"], None, "an arm file")


@pytest.mark.parametrize("name", ["arm.yaml", "arm.txt", "arm", "arm.toml.bak"])
def test_unsupported_extension(tmp_path, name):
    path = write(tmp_path, BASE, name)
    error = load_error(path)
    check_message(error, path, ["unknown file type"], None, "a .toml or .json file")


def test_file_name_too_long(tmp_path):
    # The name is shown cut, with its length (a message never echoes a value of thousands of characters).
    path = tmp_path / ("a" * 5000 + ".toml")
    error = load_error(path)
    assert str(error).startswith(str(path)[:200] + "... (" + f"{len(str(path)):,}" + " characters): ")
    assert "cannot read the file" in str(error) and "a readable" in error.expected
    assert len(str(error)) < 400


def test_unreadable_file(tmp_path, monkeypatch):
    # Permission bits do not stop root, so the denial is simulated at the read.
    path = write(tmp_path, BASE)

    def deny(*args):
        raise PermissionError(13, "Permission denied", str(path))

    monkeypatch.setattr(ikgen.files.os, "open", deny)
    check_message(load_error(path), path, ["cannot read the file", "Permission denied"], None, "a readable")


def test_integer_with_too_many_digits(tmp_path):
    path = write(tmp_path, in_joint(BASE, 1, "d = 100", "d = 1" + "0" * 5000))
    check_message(load_error(path), path, ["too many digits"], None, "at most 4300 digits")


def test_too_deep_nesting_toml(tmp_path):
    path = write(tmp_path, "deep = " + "[" * 50_000 + "]" * 50_000 + "\n" + BASE)
    check_message(load_error(path), path, ["nested too deeply"], None, "nesting")


# --------------------------------------------------------------------------- bad input: JSON

GOOD_JSON = _json_twin()


def _json_case(old: str, new: str) -> str:
    return sub(GOOD_JSON, old, new)


JSON_CASES = [
    ("json-nan", _json_case('"d": 0.3', '"d": NaN'),
     ["joint 1 'base_turn'", "field 'd'", "nan is not finite"], ('"d": NaN', 1), "a finite number"),
    ("json-infinity", _json_case('"limits": [0, 0.5]', '"limits": [0, Infinity]'),
     ["joint 2 'lift'", "field 'limits' item 2", "inf is not finite"], ("Infinity", 1), "a finite number"),
    ("json-minus-infinity", _json_case('"translation": [0, 0, 0.45]', '"translation": [0, 0, -Infinity]'),
     ["[base]", "field 'translation' item 3", "-inf is not finite"], ("-Infinity", 1), "a finite number"),
    ("json-unknown-key", _json_case('"alpha": -90', '"alpah": -90'),
     ["joint 2 'lift'", "unknown key 'alpah'", "did you mean 'alpha'?"], ('"alpah"', 1), "alpha"),
    ("json-null", _json_case('"a": 0.05', '"a": null'),
     ["joint 2 'lift'", "field 'a'", "null (no value) is not a number"], ('"a": null', 1), "a finite number"),
    ("json-boolean", _json_case('"theta": 90', '"theta": false'),
     ["joint 2 'lift'", "field 'theta'", "false is a boolean"], ('"theta": false', 1), "a finite number"),
    ("json-zero-joints", re.sub(r'"joint": \[.*?\n  \],', '"joint": [],', GOOD_JSON, flags=re.S),
     ["top level", "zero joints"], ('"joint": []', 1), "at least one joint"),
    ("json-joint-object", re.sub(r'"joint": \[.*?\n  \],', '"joint": {"a": 1},', GOOD_JSON, flags=re.S),
     ["top level", "'joint' is a table"], ('"joint"', 1), "a list of objects in JSON"),
    ("json-joint-number", re.sub(r'"joint": \[.*?\n  \],', '"joint": [\n    7\n  ],', GOOD_JSON, flags=re.S),
     ["joint 1", "is an integer"], None, "a table of joint fields"),
    ("json-duplicate-name", _json_case('"name": "lift"', '"name": "base_turn"'),
     ["joint 2 'base_turn'", "duplicate joint name 'base_turn'"], None, "unique"),
    ("json-prismatic-without-limits", _json_case(',\n      "limits": [0, 0.5]', ""),
     ["joint 2 'lift'", "missing field 'limits'"], None, "[lower, upper]"),
    ("json-bad-convention", _json_case('"modified"', '"proximall"'),
     ["[arm]", "unknown convention 'proximall'", "did you mean 'proximal'?"], ('"convention"', 1), "modified"),
]


@pytest.mark.parametrize("case_id, text, fragments, line_spec, expected", JSON_CASES,
                         ids=[c[0] for c in JSON_CASES])
def test_bad_json_input(tmp_path, case_id, text, fragments, line_spec, expected):
    path = write(tmp_path, text, "arm.json")
    error = load_error(path)
    line = line_of(text, *line_spec) if line_spec else None
    check_message(error, path, fragments, line, expected)


def test_json_twin_itself_is_valid(tmp_path):
    assert load_arm(write(tmp_path, GOOD_JSON, "arm.json")).name == "twin"


def test_malformed_json_reports_the_line(tmp_path):
    text = _json_case('"d": 0.3,', '"d": 0.3')      # missing comma
    path = write(tmp_path, text, "arm.json")
    check_message(load_error(path), path, ["malformed JSON", "Expecting ',' delimiter"],
                  line_of(text, '"theta": 0,', 1), "valid JSON")


def test_json_trailing_comma(tmp_path):
    text = _json_case('"angle_unit": "deg"', '"angle_unit": "deg",')
    path = write(tmp_path, text, "arm.json")
    check_message(load_error(path), path, ["malformed JSON"], line_of(text, '"angle_unit"') + 1, "valid JSON")


def test_json_top_level_not_an_object(tmp_path):
    path = write(tmp_path, "[1, 2, 3]\n", "arm.json")
    check_message(load_error(path), path, ["the top level is a JSON list"], None, "a JSON object")


def test_json_duplicate_key(tmp_path):
    text = _json_case('"alpha": -90,', '"alpha": -90,\n      "alpha": 90,')
    path = write(tmp_path, text, "arm.json")
    check_message(load_error(path), path, ["duplicate key 'alpha'"], None, "each key at most once")


def test_json_integer_with_too_many_digits(tmp_path):
    path = write(tmp_path, _json_case('"d": 0.3', '"d": 1' + "0" * 5000), "arm.json")
    check_message(load_error(path), path, ["too many digits"], None, "at most 4300 digits")


def test_json_too_deep(tmp_path):
    path = write(tmp_path, '{"arm": ' + "[" * 100_000 + "]" * 100_000 + "}", "arm.json")
    check_message(load_error(path), path, ["nested too deeply"], None, "nesting")


def test_empty_json_file(tmp_path):
    path = write(tmp_path, b"", "arm.json")
    check_message(load_error(path), path, ["the file is empty"], None, "an arm description")


def test_arm_from_data_reports_place_without_a_file():
    data = json.loads(GOOD_JSON)
    data["joint"][1]["direction"] = 3
    with pytest.raises(ArmFileError) as info:
        arm_from_data(data)
    assert str(info.value).startswith("<data>: joint 2 'lift': field 'direction' is 3; expected 1 or -1")


def test_arm_file_error_is_a_user_error_with_exit_code_2():
    error = ArmFileError("x.toml", "joint 1 'a'", "problem", "something", line=4, hint="did you mean 'b'?")
    assert isinstance(error, IkgenError) and error.exit_code == 2
    assert str(error) == "x.toml:4: joint 1 'a': problem; expected something (did you mean 'b'?)"


# --------------------------------------------------------------------------- command line

@pytest.mark.parametrize("make", [
    lambda p: write(p, in_joint(BASE, 2, "alpha = 0", "alpah = 0")),
    lambda p: write(p, b"\x00\x01binary"),
    lambda p: write(p, b""),
    lambda p: p / "missing.toml",
    lambda p: p,                                                   # a directory
    lambda p: write(p, BASE, "arm.yaml"),
    lambda p: write(p, _json_case('"d": 0.3', '"d": NaN'), "arm.json"),
    lambda p: write(p, _json_case('"d": 0.3,', '"d": 0.3'), "arm.json"),
], ids=["unknown-key", "binary", "empty", "missing", "directory", "extension", "json-nan", "json-malformed"])
def test_cli_main_bad_file(tmp_path, capsys, make):
    path = make(tmp_path)
    for command in (["describe", str(path)], ["forward", str(path), "0", "0", "0"]):
        code, out, err = run_cli(command, capsys)
        assert code == 2
        assert out == ""
        assert err.startswith(f"ikgen: error: {path}")
        assert "; expected " in err
        assert "Traceback" not in err


def test_cli_describe_good_file(tmp_path, capsys):
    path = write(tmp_path, BASE)
    code, out, err = run_cli(["describe", str(path)], capsys)
    assert code == 0 and err == ""
    assert "bench3" in out and "elbow" in out


def test_cli_creates_no_files_on_error(tmp_path, capsys):
    path = write(tmp_path, in_joint(BASE, 2, "alpha = 0", "alpha = nan"))
    before = sorted(tmp_path.iterdir())
    assert run_cli(["describe", str(path)], capsys)[0] == 2
    assert sorted(tmp_path.iterdir()) == before


SUBPROCESS_CASES = [
    ("unknown-key", lambda p: write(p, in_joint(BASE, 2, "alpha = 0", "alpah = 0")), "did you mean 'alpha'?"),
    ("lower-above-upper", lambda p: write(p, in_joint(BASE, 2, "limits = [-90, 90]", "limits = [90, -90]")),
     "lower limit 90 is not below upper limit -90"),
    ("malformed-json", lambda p: write(p, "{\n  \"arm\": {\n    \"name\": \n}\n", "arm.json"), "malformed JSON"),
    ("missing", lambda p: p / "nope.toml", "file not found"),
    ("binary", lambda p: write(p, b"\x7fELF\x02\x01\x01\x00\x00\x00"), "binary data"),
    ("deep-expression", lambda p: write(p, in_joint(BASE, 1, "alpha = 90", 'alpha = "' + "-" * 100_000 + '1"')),
     "nested too deeply"),
    # a finite but huge number is refused at load time (it once overflowed in the derivation)
    ("huge-radian", lambda p: write(p, in_joint(sub(BASE, '"deg"', '"rad"'), 1, "alpha = 90", "alpha = 1e308")),
     "beyond the accepted size"),
]


@pytest.mark.parametrize("case_id, make, fragment", SUBPROCESS_CASES, ids=[c[0] for c in SUBPROCESS_CASES])
def test_cli_subprocess(tmp_path, case_id, make, fragment):
    path = make(tmp_path)
    result = run_subprocess("describe", path)
    assert "Traceback" not in result.stderr and "Traceback" not in result.stdout
    if fragment is None:      # a valid (if odd) file: must simply not crash
        assert result.returncode == 0, result.stderr
        return
    assert result.returncode == 2
    assert result.stdout == ""
    assert result.stderr.startswith(f"ikgen: error: {path}")
    assert fragment in result.stderr
