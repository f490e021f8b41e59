"""The command line with URDF input: `ikgen from-urdf`, and a .urdf wherever an arm file goes.

References: yourdfpy's own forward kinematics (a general-purpose URDF library) for the pose that
`ikgen forward` prints; exit status 2 for bad input and nothing written (the project's rule,
common practice for command-line tools).
"""

from __future__ import annotations

import numpy as np
import pytest

yourdfpy = pytest.importorskip("yourdfpy", reason="the urdf extra (yourdfpy) is not installed")
pytest.importorskip("defusedxml", reason="the urdf extra (defusedxml) is not installed")

from helpers import EXAMPLES  # noqa: E402
from ikgen.cli import main  # noqa: E402

DEMO_URDF = str(EXAMPLES / "seedling6.urdf")
ARM_COMMANDS = ("describe", "forward", "generate", "verify", "explain", "compile", "path")
BRANCHED = """<robot name="two_tools">
  <link name="base"/><link name="arm"/><link name="gripper"/><link name="camera"/>
  <joint name="j1" type="continuous"><parent link="base"/><child link="arm"/><axis xyz="0 0 1"/></joint>
  <joint name="grip_mount" type="fixed"><parent link="arm"/><child link="gripper"/></joint>
  <joint name="camera_mount" type="fixed"><parent link="arm"/><child link="camera"/></joint>
</robot>
"""


def clean_error(capsys, code: int, *pieces: str) -> None:
    captured = capsys.readouterr()
    assert code == 2, captured
    assert "ikgen: error:" in captured.err and "Traceback" not in captured.err + captured.out
    for piece in pieces:
        assert piece in captured.err, captured.err


def table_part(text: str) -> str:
    """describe's output from the DH table on (the 'file' line and notes differ by design)."""
    lines = text.splitlines()
    start = next(k for k, line in enumerate(lines) if line.startswith("#  name"))
    end = next(k for k, line in enumerate(lines) if line.startswith("note:")) if "note:" in text else len(lines)
    return "\n".join(lines[start:end])


def test_from_urdf_writes_an_arm_file_that_describes_the_same(tmp_path, capsys):
    target = tmp_path / "seedling6.toml"
    assert main(["from-urdf", DEMO_URDF, "-o", str(target)]) == 0
    assert f"wrote {target}: arm 'seedling6', 6 joints" in capsys.readouterr().out
    assert main(["describe", DEMO_URDF]) == 0
    from_urdf = capsys.readouterr().out
    assert main(["describe", str(target)]) == 0
    from_toml = capsys.readouterr().out
    assert "joint axes in the world frame" in table_part(from_urdf)
    assert table_part(from_urdf) == table_part(from_toml)


def test_from_urdf_refuses_to_replace_without_force(tmp_path, capsys):
    target = tmp_path / "arm.toml"
    target.write_text("keep me\n")
    clean_error(capsys, main(["from-urdf", DEMO_URDF, "-o", str(target)]), "the file exists", "--force")
    assert target.read_text() == "keep me\n"
    assert main(["from-urdf", DEMO_URDF, "-o", str(target), "--force", "--dh-convention", "modified"]) == 0
    assert 'convention = "modified"' in target.read_text()


def test_from_urdf_bad_input_writes_nothing(tmp_path, capsys):
    urdf = tmp_path / "two_tools.urdf"
    urdf.write_text(BRANCHED)
    target = tmp_path / "arm.toml"
    clean_error(capsys, main(["from-urdf", str(urdf), "-o", str(target)]),
                "the tree below 'base' branches at link 'arm'", "'gripper', 'camera'", "--tip-link")
    clean_error(capsys, main(["from-urdf", DEMO_URDF, "-o", str(tmp_path / "arm.json")]), "ending in .toml")
    assert list(tmp_path.iterdir()) == [urdf]
    assert main(["from-urdf", str(urdf), "-o", str(target), "--tip-link", "camera"]) == 0
    assert "continuous: limits of one turn either side" in capsys.readouterr().out


@pytest.mark.parametrize("command", ARM_COMMANDS)
def test_every_arm_command_takes_the_urdf_options(command, capsys):
    with pytest.raises(SystemExit) as info:
        main([command, "--help"])
    assert info.value.code == 0
    text = capsys.readouterr().out
    assert ".urdf" in text
    for option in ("--root-link", "--tip-link", "--dh-convention"):
        assert option in text


def test_forward_of_a_urdf_equals_the_library_fk(capsys):
    readings = [0.4, -0.3, 0.8, 1.2, -0.6, 2.5]
    assert main(["forward", DEMO_URDF, *map(str, readings)]) == 0
    lines = capsys.readouterr().out.splitlines()
    start = lines.index("matrix") + 1
    printed = np.array([[float(v) for v in line.strip().strip("[]").split()] for line in lines[start:start + 4]])
    model = yourdfpy.URDF.load(DEMO_URDF, load_meshes=False, build_scene_graph=True)
    model.update_cfg(dict(zip(["turret", "lifter", "outreach", "fork_roll", "fork_tilt", "fork_spin"],
                              readings)))
    np.testing.assert_allclose(printed, model.get_transform("fork_tcp", "bench"), atol=1e-6)


def test_generate_with_a_bad_urdf_writes_nothing(tmp_path, capsys):
    urdf = tmp_path / "two_tools.urdf"
    urdf.write_text(BRANCHED)
    out = tmp_path / "out"
    clean_error(capsys, main(["generate", str(EXAMPLES / "benchtop6.toml"), str(urdf), "-o", str(out)]),
                "two_tools.urdf", "branches at link 'arm'")
    assert not out.exists()


def test_verify_a_urdf_in_one_command(tmp_path, capsys):
    """The README's one-command path: URDF in, verified solvers written."""
    out = tmp_path / "out"
    assert main(["verify", DEMO_URDF, "-n", "500", "-q", "--out", str(out)]) == 0
    text = capsys.readouterr().out
    assert "PASSED" in text and "completeness" in text
    assert (out / "seedling6" / "seedling6_ik.py").is_file() and (out / "seedling6" / "seedling6_ik.c").is_file()
