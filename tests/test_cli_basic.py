"""The ``describe`` and ``forward`` commands of ikgen.cli on the demo arms, help, and bad input.

References: the demo files themselves (read here with tomllib/json, independently of ikgen's
reader); scipy.spatial.transform.Rotation for the printed angles and quaternion (scipy
documentation: 'xyz' lower case = extrinsic = fixed axes, as_quat is scalar-last); exit status
0 for success and 2 for usage errors, as argparse does (common practice).
"""

from __future__ import annotations

import json
import math
import re
import subprocess
import sys
import tomllib

import numpy as np
import pytest
from scipy.spatial.transform import Rotation

from helpers import DEMO_FILES, ROOT, demo_arm
from ikgen.cli import main
from ikgen.kinematics import NumericChain

DEMO_IDS = [p.name for p in DEMO_FILES]
# joint readings in each arm's own units (benchtop6, inspector6: degrees; packer6: radians)
READINGS = {"benchtop6": [10, -20, 35, 120, -45, 75],
            "packer6": [0.3, -0.4, 0.5, 1.2, -0.8, 2.0],
            "inspector6": [-30, 15, 40, -100, 60, 200]}


def raw_file(path) -> dict:
    text = path.read_text(encoding="utf-8")
    return tomllib.loads(text) if path.suffix == ".toml" else json.loads(text)


def numbers_after(label: str, text: str) -> np.ndarray:
    """The numbers printed on the line that starts with ``label``, before its '[' unit note."""
    [line] = [l for l in text.splitlines() if l.startswith(label)]
    return np.array([float(v) for v in line[len(label):].split("[")[0].split()])


def printed_matrix(text: str, after: str, rows: int = 4) -> np.ndarray:
    lines = text.splitlines()
    start = lines.index(after) + 1
    return np.array([[float(v) for v in l.strip().strip("[]").split()] for l in lines[start:start + rows]])


def assert_clean_error(capsys, code, *pieces):
    """Exit status 2, 'ikgen: error:' and the given pieces on stderr, nothing on stdout, no traceback."""
    captured = capsys.readouterr()
    assert code == 2
    assert "ikgen: error:" in captured.err
    for piece in pieces:
        assert piece in captured.err
    assert "Traceback" not in captured.err + captured.out
    assert captured.out == ""


# --------------------------------------------------------------------------------- describe

@pytest.mark.parametrize("path", DEMO_FILES, ids=DEMO_IDS)
def test_describe_prints_table_units_and_joints(path, capsys):
    assert main(["describe", str(path)]) == 0
    captured = capsys.readouterr()
    out = captured.out
    raw = raw_file(path)
    lu, au = raw["arm"]["length_unit"], raw["arm"]["angle_unit"]
    assert re.search(rf"^arm\s+{raw['arm']['name']}$", out, re.M)
    assert re.search(rf"^units\s+lengths in {lu}, angles in {au}$", out, re.M)
    assert re.search(rf"^joints\s+{len(raw['joint'])}$", out, re.M)
    kind = {"standard": "standard (distal)", "distal": "standard (distal)",
            "modified": "modified (proximal)", "proximal": "modified (proximal)"}[raw["arm"]["convention"]]
    assert kind in out
    lines = out.splitlines()
    top = [i for i, l in enumerate(lines) if l.startswith("#  name")][0]   # the DH table comes first
    header, dh_rows = lines[top], lines[top + 2:top + 2 + len(raw["joint"])]
    for column in ("type", f"a [{lu}]", f"alpha [{au}]", f"d [{lu}]", f"theta [{au}]", "offset", "dir", "limits"):
        assert column in header
    # every DH row as written in the file (strings like "-pi/2" evaluated here with math.pi)
    value = lambda v: eval(v, {"__builtins__": {}}, {"pi": math.pi}) if isinstance(v, str) else v  # noqa: E731
    for index, j in enumerate(raw["joint"], 1):
        row = dh_rows[index - 1].split()
        assert row[:2] == [str(index), j["name"]]
        assert row[2] == j["type"]
        np.testing.assert_allclose([float(v) for v in row[3:7]],
                                   [value(j[k]) for k in ("a", "alpha", "d", "theta")], rtol=0, atol=5e-7)
        assert abs(float(row[7]) - value(j.get("offset", 0))) < 5e-7
        assert row[8] == (au if j["type"] == "revolute" else lu)
        assert row[9] == ("-1" if j.get("direction", 1) == -1 else "+1")
        lower, upper = (value(v) for v in j["limits"])
        assert (row[11], row[13]) == ("..", au if j["type"] == "revolute" else lu)
        np.testing.assert_allclose([float(row[10]), float(row[12])], [lower, upper], rtol=0, atol=5e-7)
    assert captured.err == ""


def test_describe_benchtop6_zero_pose_by_hand(capsys):
    # Hand derivation with the standard-convention frame rules (Spong, Hutchinson, Vidyasagar,
    # Robot Modeling and Control, 1st ed. (2006), sec. 3.2, from memory) for benchtop6 at zero:
    # joint 2's theta = -90 deg turns the upper arm up, alpha = -90 at joint 3 points z3 along world
    # x, and the wrist (alpha +90, -90) keeps z6 = z3. So the tool sits at
    #   x = a1 + d4 + d6 + tool_z,  y = 0,  z = d1 + a2 + a3,
    # with x6 = world z, y6 = -world y, z6 = world x; the joint axes are z0..z5 = z, y, y, x, y, x.
    assert main(["describe", str(DEMO_FILES[0])]) == 0
    out = capsys.readouterr().out
    raw = raw_file(DEMO_FILES[0])
    j = raw["joint"]
    expected = np.array([[0, 0, 1, j[0]["a"] + j[3]["d"] + j[5]["d"] + raw["tool"]["translation"][2]],
                         [0, -1, 0, 0],
                         [1, 0, 0, j[0]["d"] + j[1]["a"] + j[2]["a"]],
                         [0, 0, 0, 1]], dtype=float)
    np.testing.assert_allclose(printed_matrix(out, "tool pose at the zero reading:"), expected, rtol=0, atol=1e-9)
    lines = out.splitlines()
    start = [i for i, l in enumerate(lines) if l.startswith("joint axes in the world frame")][0] + 3
    directions = np.array([[float(v) for v in l.split()[-3:]] for l in lines[start:start + 6]])
    np.testing.assert_allclose(directions, np.eye(3)[[2, 1, 1, 0, 1, 0]], rtol=0, atol=1e-9)


# ---------------------------------------------------------------------------------- forward

@pytest.mark.parametrize("path", DEMO_FILES, ids=DEMO_IDS)
def test_forward_prints_the_pose(path, capsys):
    readings = READINGS[path.stem]
    assert main(["forward", str(path), *map(str, readings)]) == 0
    captured = capsys.readouterr()
    out = captured.out
    arm = demo_arm(path.stem)
    pose = NumericChain(arm).pose(readings)
    assert f"arm {arm.name}: tool pose in the world frame ({arm.length_unit}, {arm.angle_unit})" in out
    # position and matrix: printed with 6 decimals, so within 5e-7 of the numeric chain
    np.testing.assert_allclose(numbers_after("position", out), pose[:3, 3], rtol=0, atol=5.1e-7)
    np.testing.assert_allclose(printed_matrix(out, "matrix"), pose, rtol=0, atol=5.1e-7)
    # fixed xyz angles: scipy's extrinsic 'xyz' rebuilds the rotation (6 printed decimals)
    angles = numbers_after("fixed xyz", out)
    rebuilt = Rotation.from_euler("xyz", angles, degrees=arm.angle_unit == "deg").as_matrix()
    np.testing.assert_allclose(rebuilt, pose[:3, :3], rtol=0, atol=3e-6)
    # quaternion (w x y z, 9 decimals) against scipy's as_quat (x y z w), up to sign
    q = numbers_after("quaternion", out)
    x, y, z, w = Rotation.from_matrix(pose[:3, :3]).as_quat()
    reference = np.array([w, x, y, z]) * (1 if np.dot([w, x, y, z], q) >= 0 else -1)
    np.testing.assert_allclose(q, reference, rtol=0, atol=5.1e-9)
    assert captured.err == ""


def test_forward_frames_and_commas(capsys):
    path = DEMO_FILES[2]
    readings = READINGS[path.stem]
    assert main(["forward", str(path), ",".join(map(str, readings)), "--frames"]) == 0
    out = capsys.readouterr().out
    frames = NumericChain(demo_arm(path.stem)).frames(np.array([readings], dtype=float))[0]
    lines = out.splitlines()
    start = lines.index("DH frames in the world frame:") + 3
    origins = np.array([[float(v) for v in l.split()[2:5]] for l in lines[start:start + 7]])
    np.testing.assert_allclose(origins, frames[:, :3, 3], rtol=0, atol=5.1e-5)   # 4 decimals printed
    assert lines[start].split()[1] == "base"


def test_forward_warns_outside_limits_but_succeeds(capsys):
    # benchtop6's carousel is limited to -170 .. 170 deg in the file
    assert main(["forward", str(DEMO_FILES[0]), "200", "0", "0", "0", "0", "0"]) == 0
    captured = capsys.readouterr()
    assert "warning: joint 1 'carousel' reading 200 deg is outside its limits -170 .. 170" in captured.err
    assert "position" in captured.out


# ------------------------------------------------------------------------------------ help

@pytest.mark.parametrize("argv", [["--help"], ["describe", "--help"], ["forward", "-h"]])
def test_help(argv, capsys):
    with pytest.raises(SystemExit) as exit_info:
        main(argv)
    assert exit_info.value.code == 0
    out = capsys.readouterr().out
    assert out.startswith("usage: ikgen")
    if argv[0] == "forward":
        assert "--frames" in out and "VALUE" in out


def test_version(capsys):
    from ikgen import __version__
    with pytest.raises(SystemExit) as exit_info:
        main(["--version"])
    assert exit_info.value.code == 0
    assert capsys.readouterr().out.strip() == f"ikgen {__version__}"


# ------------------------------------------------------------------------------ bad input

@pytest.mark.parametrize("values, pieces", [
    (["1", "2", "3", "4", "5"], ["got 5 values, expected 6", "deg for revolute joints"]),
    (["1", "2", "3", "4", "5", "6", "7"], ["got 7 values, expected 6"]),
    (["1", "2", "abc", "4", "5", "6"], ["value 3 'abc' is not a number"]),
    (["1", "2", "3", "4", "5", "nan"], ["value 6 is nan; expected a finite number"]),
    (["1,2,3", "4,5,1e400"], ["value 6 is 1e400; expected a finite number"]),
])
def test_forward_bad_values(values, pieces, capsys):
    code = main(["forward", str(DEMO_FILES[0]), *values])
    assert_clean_error(capsys, code, *pieces)


def test_forward_bad_value_count_on_radian_arm(capsys):
    code = main(["forward", str(DEMO_FILES[1]), "0.1", "0.2"])
    assert_clean_error(capsys, code, "got 2 values, expected 6", "rad for revolute joints", "packer6")


@pytest.mark.parametrize("argv", [[], ["forward", str(DEMO_FILES[0])], ["describe"], ["spin", "x"]])
def test_usage_errors_exit_2(argv, capsys):
    with pytest.raises(SystemExit) as exit_info:
        main(argv)
    captured = capsys.readouterr()
    assert exit_info.value.code == 2
    assert re.search(r"^ikgen( \w+)?: error: ", captured.err, re.M)   # argparse names the subcommand
    assert "Traceback" not in captured.err


def test_missing_arm_file(tmp_path, capsys):
    missing = tmp_path / "nowhere.toml"
    code = main(["describe", str(missing)])
    assert_clean_error(capsys, code, str(missing), "file not found")


@pytest.mark.parametrize("values", [["-1e-3", "0", "0", "0", "0", "0"], ["-10,20,-30", "-.5", "0", "1"]])
def test_forward_accepts_negative_values_in_any_float_form(values, capsys):
    # Python's float() accepts "-1e-3" and "-.5"; argparse alone would take such words (and a
    # comma list starting with a minus) for unknown options.
    assert main(["forward", str(DEMO_FILES[0]), *values]) == 0
    readings = [float(v) for item in values for v in item.split(",")]
    pose = NumericChain(demo_arm("benchtop6")).pose(readings)
    np.testing.assert_allclose(numbers_after("position", capsys.readouterr().out), pose[:3, 3], rtol=0, atol=5.1e-7)


# ------------------------------------------------------------------------------ subprocess

def test_module_entry_point_describe():
    result = subprocess.run([sys.executable, "-m", "ikgen.cli", "describe", "examples/benchtop6.toml"],
                            cwd=ROOT, capture_output=True, text=True, timeout=120)
    assert result.returncode == 0, result.stderr
    assert result.stderr == ""
    assert re.search(r"^arm\s+benchtop6$", result.stdout, re.M)
    for name in ("carousel", "boom", "jib", "jib_roll", "wrist_tilt", "gripper_spin"):
        assert name in result.stdout
