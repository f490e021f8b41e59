"""The ``generate`` (with --check) and ``verify`` subcommands through ikgen.cli.main.

Expectations are the project's documented contract (exit codes 0 ok, 1 stale under --check,
2 bad input, 3 arm outside the family; a one-line 'ikgen: error:' message and no traceback;
nothing written unless every arm derives) plus one outside check: the written solver, imported
from disk, inverts poses computed by the test's own forward kinematics (common practice).
"""

from __future__ import annotations

import contextlib
import io
import tomllib
from pathlib import Path

import numpy as np
import pytest

from helpers import EXAMPLES, demo_arm
from ikgen.cli import main
from ikgen.generate import load_module
from ikgen.kinematics import NumericChain

BENCHTOP = str(EXAMPLES / "benchtop6.toml")


def all_files(folder: Path) -> list[Path]:
    return sorted(p for p in folder.rglob("*") if p.is_file()) if folder.exists() else []


def bad_arm_file(folder: Path) -> Path:
    """benchtop6 with a4 = 12 mm: the last three axes no longer meet (outside the family)."""
    text = (EXAMPLES / "benchtop6.toml").read_text(encoding="utf-8")
    data = tomllib.loads(text)
    assert data["joint"][3]["name"] == "jib_roll" and data["joint"][3]["a"] == 0
    marker = 'name = "jib_roll"\ntype = "revolute"\na = 0\n'
    assert marker in text
    path = folder / "offset_wrist.toml"
    path.write_text(text.replace(marker, marker.replace("a = 0", "a = 12"))
                    .replace('name = "benchtop6"', 'name = "offset_wrist"'), encoding="utf-8")
    return path


@pytest.fixture(scope="module")
def generated(tmp_path_factory):
    """One `generate` run into a fresh folder: (exit code, stdout, stderr, folder)."""
    out_dir = tmp_path_factory.mktemp("gen") / "out"
    stdout, stderr = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(stdout), contextlib.redirect_stderr(stderr):
        code = main(["generate", BENCHTOP, "-o", str(out_dir)])
    return code, stdout.getvalue(), stderr.getvalue(), out_dir


def test_generate_writes_solver_and_derivation(generated):
    code, stdout, stderr, out_dir = generated
    assert code == 0, stderr
    solver = out_dir / "benchtop6" / "benchtop6_ik.py"
    derivation = out_dir / "benchtop6" / "benchtop6_derivation.txt"
    reported = sorted(Path(line.split("wrote ", 1)[1]) for line in stdout.splitlines() if "  wrote " in line)
    assert solver in reported and derivation in reported
    # exactly the reported files are on disk: no temporary files left behind, nothing unreported
    assert all_files(out_dir) == reported
    assert not any(p.name.startswith(".") for p in all_files(out_dir))
    assert derivation.read_text(encoding="utf-8").startswith("derivation for 'benchtop6'")
    # The written file is a working solver: it inverts poses from the reference FK.
    module = load_module(solver.read_text(encoding="utf-8"), "benchtop6_from_disk")
    arm = demo_arm("benchtop6")
    chain = NumericChain(arm)
    rng = np.random.default_rng(8)
    limits = arm.limits_in_readings()
    for _ in range(20):
        q = limits[:, 0] + rng.random(6) * (limits[:, 1] - limits[:, 0])
        solutions = module.inverse(chain.pose(q))
        gaps = [np.max(np.abs((np.array(s[0]) - q + 180) % 360 - 180)) for s in solutions]
        assert min(gaps) < 1e-7


def test_check_is_clean_when_fresh_and_stale_after_an_edit(generated, capsys):
    code, _, _, out_dir = generated
    assert code == 0
    before = {p: p.read_bytes() for p in all_files(out_dir)}
    capsys.readouterr()
    assert main(["generate", BENCHTOP, "-o", str(out_dir), "--check"]) == 0
    assert "up to date" in capsys.readouterr().out
    assert {p: p.read_bytes() for p in all_files(out_dir)} == before      # --check writes nothing
    edited = out_dir / "benchtop6" / "benchtop6_ik.py"
    edited.write_text(edited.read_text(encoding="utf-8") + "# edited by hand\n", encoding="utf-8")
    try:
        assert main(["generate", BENCHTOP, "-o", str(out_dir), "--check"]) == 1
        err = capsys.readouterr().err
        assert "stale" in err and "benchtop6/benchtop6_ik.py" in err
        assert "benchtop6_derivation.txt" not in err        # only the edited file is reported
    finally:
        edited.write_bytes(before[edited])


def test_check_on_an_empty_folder_reports_stale_and_writes_nothing(tmp_path, capsys):
    out_dir = tmp_path / "empty"
    out_dir.mkdir()
    assert main(["generate", BENCHTOP, "-o", str(out_dir), "--check"]) == 1
    assert "stale" in capsys.readouterr().err
    assert all_files(out_dir) == []


@pytest.mark.parametrize("with_good_first", [False, True], ids=["bad_only", "good_then_bad"])
def test_arm_outside_the_family_exits_3_and_writes_nothing(tmp_path, capsys, with_good_first):
    bad = bad_arm_file(tmp_path)
    out_dir = tmp_path / "out"
    out_dir.mkdir()
    arms = [BENCHTOP, str(bad)] if with_good_first else [str(bad)]
    assert main(["generate", *arms, "-o", str(out_dir)]) == 3
    captured = capsys.readouterr()
    assert captured.err.startswith("ikgen: error:")
    assert "Traceback" not in captured.err + captured.out
    assert "offset_wrist" in captured.err and "axes 4 and 5" in captured.err and "12 mm apart" in captured.err
    assert all_files(out_dir) == []
    assert list(out_dir.iterdir()) == []                   # not even an empty arm folder


def test_verify_prints_the_table_and_returns_0(capsys):
    assert main(["verify", BENCHTOP, "-n", "200", "-q"]) == 0
    captured = capsys.readouterr()
    text = captured.out
    assert "verification of 'benchtop6': 200 samples" in text
    header = next(line for line in text.splitlines() if line.startswith("check"))
    assert header.split()[:3] == ["check", "result", "threshold"]
    for row in ("completeness", "worst position error", "worst rotation error", "solution counts",
                "unreachable poses"):
        assert any(line.startswith(row) for line in text.splitlines()), row
    assert text.rstrip().splitlines()[-1] == "PASSED"
    completeness = next(line for line in text.splitlines() if line.startswith("completeness"))
    assert "(100.00 %)" in completeness


def test_verify_of_a_malformed_arm_file_returns_2(tmp_path, capsys):
    broken = tmp_path / "broken.toml"
    broken.write_text('[arm]\nname = "broken"\nconvention = "standard"\nlength_unit = "mm"\n'
                      'angle_unit = "deg"\n\n[[joint]]\ntype = "revolute"\na = 1\nalpha = \n', encoding="utf-8")
    assert main(["verify", str(broken), "-n", "10", "-q"]) == 2
    captured = capsys.readouterr()
    assert captured.err.startswith("ikgen: error:") and str(broken) in captured.err
    assert "Traceback" not in captured.err and captured.out == ""


def test_verify_of_a_missing_file_returns_2(tmp_path, capsys):
    missing = tmp_path / "nowhere.toml"
    assert main(["verify", str(missing), "-n", "10", "-q"]) == 2
    err = capsys.readouterr().err
    assert err.startswith("ikgen: error:") and "file not found" in err


def test_verify_of_an_arm_outside_the_family_returns_3(tmp_path, capsys):
    assert main(["verify", str(bad_arm_file(tmp_path)), "-n", "10", "-q"]) == 3
    err = capsys.readouterr().err
    assert err.startswith("ikgen: error:") and "Traceback" not in err
