"""The standing sweep of bad inputs: arm files, path files, command options, names, special files.

Each case runs the real command line (``ikgen.cli.main``, or a subprocess of ``python -m
ikgen.cli`` where a regression could hang or exhaust the test process) in a fresh folder that
holds only the case's input files, and checks the contract of DEVELOPERS.md ("Rules of the
house") and docs/arm-file.md / docs/path-file.md: the documented exit status, one line
``ikgen: error: ...`` (or argparse's ``ikgen ...: error: ...`` for option syntax) holding the
expected fragment, no traceback, no control character and no very long line on the terminal,
and no file or folder written. The expectations are this project's documented behaviour; the
exit status 2 for usage errors follows argparse's convention (common practice).
"""

from __future__ import annotations

import os
import re
import socket
import subprocess
import sys
from dataclasses import dataclass, field
from pathlib import Path

import pytest

from helpers import EXAMPLES
from ikgen.cli import main

BENCHTOP = (EXAMPLES / "benchtop6.toml").read_text(encoding="utf-8")
INSPECTOR = (EXAMPLES / "inspector6.json").read_text(encoding="utf-8")
LINE = (EXAMPLES / "benchtop6_line.csv").read_text(encoding="utf-8")
HEADER = "x [mm], y [mm], z [mm], qw, qx, qy, qz\n"
ROW = "360, -100, 120, 0, 1, 0, 0\n"
START = "0,30,0,0,60,0"
LONGEST_LINE = 1000          # no message line may be longer (values are cut, with their length)


def arm_with(old: str, new: str, text: str = BENCHTOP, count: int = 1) -> str:
    """benchtop6 with the first ``count`` occurrences of ``old`` replaced."""
    assert old in text, old
    return text.replace(old, new, count)


def all_limits(low, high) -> str:
    return re.sub(r"limits = \[[^\]]*\]", f"limits = [{low}, {high}]", BENCHTOP)


@dataclass
class Case:
    id: str
    files: dict                       # name -> text, bytes, or a callable(path) that makes it
    argv: list                        # "{dir}" stands for the case's folder
    status: int
    fragments: tuple = ()             # pieces of stderr (after escaping)
    subprocess: bool = False          # run as a separate process (with a timeout)
    stdout_empty: bool = True
    warning: str | None = None        # a warning expected on stderr (exit 0 cases)
    output: str | None = None         # a path (relative to the folder) that must not appear
    extra: dict = field(default_factory=dict)


# ------------------------------------------------------------------------ special files

def fifo(path: Path) -> None:
    os.mkfifo(path)


def link_to(target: str):
    def make(path: Path) -> None:
        if not os.path.exists(target):
            pytest.skip(f"{target} is not on this system")
        path.symlink_to(target)
    return make


def socket_file(path: Path) -> None:
    server = socket.socket(socket.AF_UNIX)
    try:
        server.bind(str(path))
    except OSError as exc:      # a path too long for a socket name on some systems
        pytest.skip(f"cannot make a socket here: {exc}")
    server.close()


def sparse(size: int):
    def make(path: Path) -> None:
        with open(path, "wb") as stream:
            stream.truncate(size)
    return make


# ------------------------------------------------------------------------------- catalogue

def describe(name: str = "arm.toml") -> list:
    return ["describe", "{dir}/" + name]


def generate(*names: str) -> list:
    return ["generate", *("{dir}/" + n for n in names), "-o", "{dir}/out"]


def path_command(path_file: str = "p.csv", *extra: str, arm: str = str(EXAMPLES / "benchtop6.toml")) -> list:
    return ["path", arm, "{dir}/" + path_file, "--start", START, *extra]


LONG_NAME = "n" * 100_000
ARM_CASES = [
    # item 1: finite but huge numbers, refused at load time (exit 2, the line of the field)
    Case("a-1e308", {"arm.toml": arm_with("a = 25", "a = 1e308")}, generate("arm.toml"), 2,
         ("arm.toml:15: joint 1 'carousel': field 'a' is '1e+308'", "beyond the accepted size",
          "expected a length of at most 1,000,000 mm (1 km)"), output="out"),
    Case("a-overflowing-expression", {"arm.toml": arm_with("a = 25", 'a = "1e300*1e300"')}, generate("arm.toml"), 2,
         ("field 'a' is '1e300*1e300' (about 1.00e+600), beyond the accepted size",), output="out"),
    Case("limits-1e308", {"arm.toml": arm_with("limits = [-170, 170]", "limits = [-1e308, 1e308]")},
         generate("arm.toml"), 2, ("field 'limits' item 1 is '-1e+308'", "an angle of at most 36,000 deg"),
         output="out"),
    Case("integer-4000-digits", {"arm.toml": arm_with("d = 220", "d = " + "9" * 4000)}, generate("arm.toml"), 2,
         ("field 'd' is '9999", "(4,000 characters)", "beyond the accepted size"), output="out"),
    Case("integer-5000-digits", {"arm.toml": arm_with("d = 220", "d = " + "9" * 5000)}, describe(), 2,
         ("too many digits",)),
    Case("expression-growing-digits", {"arm.toml": arm_with("d = 220", 'd = "' + "*".join(["1e300"] * 40) + '"')},
         describe(), 2, ("reaches an exact value of more than 1,200 digits",)),
    Case("tool-translation-huge", {"arm.toml": arm_with("translation = [0, 0, 95]", "translation = [0, 0, 2e6]")},
         describe(), 2, ("[tool]: field 'translation' item 3 is '2000000.0'", "1 km")),
    Case("quaternion-huge", {"arm.toml": BENCHTOP + '\n[base]\nrotation = { quaternion = ["1e300*1e300", 0, 0, 0], '
                                                    'order = "wxyz" }\n'},
         describe(), 2, ("[base.rotation]: field 'quaternion' item 1", "a number of at most 10")),
    Case("nan", {"arm.toml": arm_with("d = 220", "d = nan")}, describe(), 2, ("nan is not finite",)),
    Case("json-1e308", {"arm.json": arm_with('"d": 180', '"d": 1e308', INSPECTOR)}, describe("arm.json"), 2,
         ("arm.json:10: joint 1 'slew': field 'd' is '1e+308', beyond the accepted size",)),
    Case("json-1e999", {"arm.json": arm_with('"d": 180', '"d": 1e999', INSPECTOR)}, describe("arm.json"), 2,
         ("field 'd': inf is not finite",)),
    Case("json-direction-1.0", {"arm.json": arm_with('"theta": 0, "limits": [-175, 175]',
                                                     '"theta": 0, "direction": -1.0, "limits": [-175, 175]', INSPECTOR)},
         describe("arm.json"), 2, ("field 'direction' is -1.0 (a decimal)",)),
    # item 8: direction must be an integer
    Case("direction-1.0", {"arm.toml": arm_with("theta = 0\nlimits = [-170, 170]",
                                                "theta = 0\ndirection = 1.0\nlimits = [-170, 170]")},
         describe(), 2, ("field 'direction' is 1.0 (a decimal)", "expected 1 or -1 (an integer)")),
    # item 8: the description is capped
    Case("description-2000", {"arm.toml": arm_with('description = "', 'description = "' + "d" * 2000)},
         describe(), 2, ("field 'description' is 2,", "characters long", "at most 1,000 characters")),
    # item 8: limits that give thousands of solutions per pose: refused beyond 1,000 equivalent readings
    Case("limits-36000", {"arm.toml": all_limits(-36000, 36000)}, describe(), 2,
         ("the limits allow", "equivalent readings", "at most 1,000 in all")),
    # item 7: long values are cut with their length, control characters escaped
    Case("name-100000", {"arm.toml": arm_with('name = "benchtop6"', f'name = "{LONG_NAME}"')}, describe(), 2,
         ("field 'name' 'nnnn", "(100,000 characters) is too long",)),
    Case("name-bel", {"arm.toml": arm_with('name = "carousel"', 'name = "wa\\u0007ist"')}, describe(), 2,
         ("field 'name' 'wa\\x07ist' holds control characters",)),
    Case("name-right-to-left-override", {"arm.toml": arm_with('name = "carousel"', 'name = "wa\\u202eist"')},
         describe(), 2, ("'wa\\u202eist' holds control characters",)),
    Case("name-c1-control", {"arm.toml": arm_with('name = "carousel"', 'name = "wa\\u009bist"')}, describe(), 2,
         ("'wa\\x9bist' holds control characters",)),
    Case("unknown-key-100000", {"arm.toml": arm_with("a = 25", f"{LONG_NAME} = 25")}, describe(), 2,
         ("unknown key 'nnnn", "(100,000 characters)")),
    Case("nested-parentheses", {"arm.toml": arm_with("a = 25", 'a = "' + "(" * 100_000 + "1" + ")" * 100_000 + '"')},
         describe(), 2, ("field 'a'",)),
    Case("expression-1mb-string", {"arm.toml": arm_with("a = 25", 'a = "' + "x" * 900_000 + '"')}, describe(), 2,
         ("(900,000 characters) may only use numbers",)),
    # item 6: not a regular file, or too large
    Case("link-to-dev-zero", {"arm.toml": link_to("/dev/zero")}, describe(), 2,
         ("is a character device, not a regular file",), subprocess=True),
    Case("link-to-dev-urandom", {"arm.toml": link_to("/dev/urandom")}, describe(), 2,
         ("is a character device, not a regular file",), subprocess=True),
    Case("fifo", {"arm.toml": fifo}, describe(), 2, ("is a named pipe (FIFO), not a regular file",), subprocess=True),
    Case("socket", {"arm.toml": socket_file}, describe(), 2, ("is a socket, not a regular file",)),
    Case("larger-than-1-mib", {"arm.toml": sparse((1 << 20) + 1)}, describe(), 2,
         ("the file is 1,048,577 bytes long", "of at most 1 MiB")),
    Case("huge-sparse-file", {"arm.toml": sparse(8 << 30)}, describe(), 2, ("the file is 8,589,934,592 bytes long",),
         subprocess=True),
]

PATH_CASES = [
    # item 8: decimal numbers only
    Case("path-underscore-number", {"p.csv": HEADER + "3_60, -100, 120, 0, 1, 0, 0\n"}, path_command(), 2,
         ("p.csv:2: column 'x' (field 1): '3_60' is not a number",)),
    Case("path-fullwidth-digits", {"p.csv": HEADER + "\uff13\uff16\uff10, -100, 120, 0, 1, 0, 0\n"}, path_command(), 2,
         ("is not a number",)),
    Case("path-hex", {"p.csv": HEADER + "0x10, -100, 120, 0, 1, 0, 0\n"}, path_command(), 2, ("'0x10' is not a number",)),
    Case("path-infinity", {"p.csv": HEADER + "inf, -100, 120, 0, 1, 0, 0\n"}, path_command(), 2,
         ("'inf' is not a finite number",)),
    # item 7: a 1 MB field is cut; a BEL in a column name is escaped
    Case("path-1mb-field", {"p.csv": HEADER + "1" * 1_000_000 + "x, -100, 120, 0, 1, 0, 0\n"}, path_command(), 2,
         ("(1,000,001 characters) is not a number",)),
    Case("path-bel-column", {"p.csv": HEADER.replace("qz", "q\x07z") + ROW}, path_command(), 2,
         ("unknown column 'q\\x07z'",)),
    # item 6
    Case("path-fifo", {"p.csv": fifo}, path_command(), 2, ("is a named pipe (FIFO), not a regular file",),
         subprocess=True),
    Case("path-link-to-dev-zero", {"p.csv": link_to("/dev/zero")}, path_command(), 2,
         ("is a character device",), subprocess=True),
    Case("path-larger-than-32-mib", {"p.csv": sparse((32 << 20) + 1)}, path_command(), 2, ("of at most 32 MiB",)),
    Case("path-binary", {"p.csv": b"\x00\x01\x02"}, path_command(), 2, ("binary data",)),
]

OPTION_CASES = [
    # item 8: outputs into a missing folder are refused (nothing is created)
    Case("plot-missing-folder", {"p.csv": HEADER + ROW + ROW}, path_command("p.csv", "--plot", "{dir}/figs/j.png"), 2,
         ("--plot", "the folder", "does not exist"), output="figs"),
    Case("out-missing-folder", {"p.csv": HEADER + ROW + ROW}, path_command("p.csv", "--out", "{dir}/sub/j.csv"), 2,
         ("--out", "does not exist"), output="sub"),
    Case("out-under-a-file", {"p.csv": HEADER + ROW + ROW, "f": "x"},
         path_command("p.csv", "--out", "{dir}/f/j.csv"), 2, ("is not a folder",)),
    Case("start-underscore", {"p.csv": HEADER + ROW}, ["path", str(EXAMPLES / "benchtop6.toml"), "{dir}/p.csv",
                                                      "--start", "0,3_0,0,0,60,0"], 2,
         ("--start: value 2 '3_0' is not a number",)),
    Case("forward-underscore", {}, ["forward", str(EXAMPLES / "benchtop6.toml"), "1_0", "0", "0", "0", "0", "0"], 2,
         ("value 1 '1_0' is not a number",)),
    Case("forward-long-value", {}, ["forward", str(EXAMPLES / "benchtop6.toml"), "9" * 100_000 + "x", "0", "0", "0",
                                    "0", "0"], 2, ("(100,001 characters) is not a number",)),
    Case("near-underscore", {"p.csv": HEADER + ROW}, path_command("p.csv", "--near", "1_0"), 2,
         ("argument --near: '1_0' is not a number",)),
    Case("line-underscore", {"p.csv": HEADER + ROW + ROW}, path_command("p.csv", "--line", "1_0"), 2,
         ("argument --line: '1_0' is not a whole number",)),
    Case("line-huge", {"p.csv": HEADER + ROW + ROW}, path_command("p.csv", "--line", "123456789"), 2,
         ("is more than 100000",)),
    Case("on-change-long", {"p.csv": HEADER + ROW}, path_command("p.csv", "--on-change", "s" * 100_000), 2,
         ("argument --on-change: invalid choice",)),
    Case("samples-zero", {}, ["verify", str(EXAMPLES / "benchtop6.toml"), "-n", "0"], 2,
         ("argument -n/--samples: 0 is not between 1 and 1,000,000",)),
    Case("samples-huge", {}, ["verify", str(EXAMPLES / "benchtop6.toml"), "-n", "1000000000"], 2,
         ("is not between 1 and 1,000,000",)),
    Case("seed-negative", {}, ["verify", str(EXAMPLES / "benchtop6.toml"), "--seed", "-1"], 2,
         ("argument --seed: '-1' is not a whole number from 0",)),
    Case("seed-control-character", {}, ["verify", str(EXAMPLES / "benchtop6.toml"), "--seed", "1\x1b[2J"], 2,
         ("'1\\x1b[2J' is not a whole number",)),
]

NAME_CASES = [
    # item 5: two arms whose names give one output folder
    Case("names-collide", {"a.toml": arm_with('name = "benchtop6"', 'name = "!!!"'),
                           "b.toml": arm_with('name = "benchtop6"', 'name = "?"')},
         generate("a.toml", "b.toml"), 2,
         ("a.toml and ", "b.toml: the arm names '!!!' and '?' both give the output folder 'arm'"), output="out"),
    Case("names-differ-in-case-and-punctuation", {"a.toml": arm_with('name = "benchtop6"', 'name = "Arm 1"'),
                                                  "b.toml": arm_with('name = "benchtop6"', 'name = "arm-1"')},
         generate("a.toml", "b.toml"), 2, ("both give the output folder 'arm_1'",), output="out"),
    Case("same-file-twice", {"a.toml": BENCHTOP}, generate("a.toml", "a.toml"), 2,
         ("the same file is named twice",), output="out"),
    Case("explain-names-collide", {"a.toml": arm_with('name = "benchtop6"', 'name = "!!!"'),
                                   "b.toml": arm_with('name = "benchtop6"', 'name = "?"')},
         ["explain", "{dir}/a.toml", "{dir}/b.toml", "-o", "{dir}/out"], 2, ("both give the output folder 'arm'",),
         output="out"),
]

def reach(*extra: str) -> list:
    return ["reach", str(EXAMPLES / "benchtop6.toml"), "-q", *extra]


BOX = "-300,300,-300,300,0,300"
REACH_CASES = [
    # `ikgen reach` (docs/reach.md, "Errors"): refused before any solving, nothing written
    Case("reach-empty-box", {}, reach("--box", "0,100,50,-50,0,10"), 2,
         ("--box: the box is empty: y runs from 50 to -50", "expected ymin <= ymax"), output="reach"),
    Case("reach-box-five-values", {}, reach("--box", "0,100,0,100,0"), 2, ("--box: got 5 values, expected 6",)),
    Case("reach-too-many-poses", {}, reach("--step", "10"), 2,
         ("more than 5,000,000; expected --allow-large",), output="reach"),
    Case("reach-beyond-the-hard-limit", {}, reach("--step", "1", "--allow-large"), 2,
         ("expected at most 200,000,000",), output="reach"),
    # a step so fine that the grid's axes alone would not fit in memory: counted, never made
    Case("reach-tiny-step", {}, reach("--step", "1e-9", "--allow-large"), 2, ("expected at most 200,000,000",)),
    Case("reach-unknown-orientation-set", {}, reach("--box", BOX, "--orientations", "sideways:30"), 2,
         ("orientation set 'sideways:30': unknown set 'sideways'",)),
    Case("reach-zero-step-set", {}, reach("--box", BOX, "--orientations", "down:0"), 2,
         ("step 0 deg; expected more than 0",)),
    Case("reach-rotation-file-header", {"r.csv": "name, w, x, y, z\nA, 1, 0, 0, 0\n"},
         reach("--box", BOX, "--rotations", "{dir}/r.csv"), 2, ("r.csv:1: header", "'name, qw, qx, qy, qz'")),
    Case("reach-rotation-not-unit", {"r.csv": "name, qw, qx, qy, qz\nA, 1, 1, 0, 0\n"},
         reach("--box", BOX, "--rotations", "{dir}/r.csv"), 2, ("r.csv:2: the quaternion's length is 1.41421",)),
    Case("reach-rotation-file-is-a-fifo", {"r.csv": fifo}, reach("--box", BOX, "--rotations", "{dir}/r.csv"), 2,
         ("is a named pipe (FIFO), not a regular file",)),
    Case("reach-height-outside-the-box", {}, reach("--box", BOX, "--heights", "900"), 2,
         ("--heights: 900 lies outside the box's z range",)),
    Case("reach-out-is-a-file", {"f": "x"}, reach("--box", BOX, "-o", "{dir}/f"), 2, ("is not a folder",)),
    Case("reach-cluster-address", {}, reach("--box", BOX, "--cluster", "no where"), 2,
         ("--cluster 'no where': not a scheduler address",)),
    Case("reach-c-solver-on-a-cluster", {}, reach("--box", BOX, "--cluster", "local", "--solver", "c"), 2,
         ("--solver c cannot run on a Dask cluster",)),
    Case("reach-chunk-too-small", {}, reach("--chunk", "10"), 2, ("10 is not between 256 and 10,000,000",)),
]

CASES = ARM_CASES + PATH_CASES + OPTION_CASES + NAME_CASES + REACH_CASES


# ---------------------------------------------------------------------------------- runner

def materialise(case: Case, folder: Path) -> None:
    for name, content in case.files.items():
        path = folder / name
        if callable(content):
            content(path)
        elif isinstance(content, bytes):
            path.write_bytes(content)
        else:
            path.write_text(content, encoding="utf-8")


def snapshot(folder: Path) -> list[str]:
    return sorted(str(p.relative_to(folder)) for p in folder.rglob("*"))


def run_case(case: Case, folder: Path, capsys) -> tuple[int, str, str]:
    argv = [a.replace("{dir}", str(folder)) for a in case.argv]
    if case.subprocess:
        result = subprocess.run([sys.executable, "-m", "ikgen.cli", *argv], cwd=folder, capture_output=True,
                                text=True, timeout=120)
        return result.returncode, result.stdout, result.stderr
    try:
        code = main(argv)
    except SystemExit as exc:        # argparse's own usage errors
        code = exc.code
    captured = capsys.readouterr()
    return code, captured.out, captured.err


@pytest.mark.parametrize("case", CASES, ids=[c.id for c in CASES])
def test_bad_input(case: Case, tmp_path, capsys, monkeypatch):
    monkeypatch.chdir(tmp_path)
    materialise(case, tmp_path)
    before = snapshot(tmp_path)
    code, out, err = run_case(case, tmp_path, capsys)
    assert code == case.status, err[-2000:]
    assert "Traceback" not in out + err
    lines = [line for line in err.splitlines() if line]
    errors = [line for line in lines if re.match(r"^ikgen( \w+)?: error: ", line)]
    assert len(errors) == 1, err[-2000:]
    for fragment in case.fragments:
        assert fragment in errors[0], (fragment, errors[0][:2000])
    for line in lines:
        assert len(line) <= LONGEST_LINE, line[:200]
        assert line.isprintable(), repr(line[:200])
    if case.stdout_empty:
        assert out == ""
    assert snapshot(tmp_path) == before          # nothing written, not even a folder
    if case.output:
        assert not (tmp_path / case.output).exists()


def test_catalogue_ids_are_unique():
    ids = [c.id for c in CASES]
    assert len(ids) == len(set(ids))


# ------------------------------------------------------------------ told up front, bounded

def test_wide_limits_are_told_up_front_and_verification_is_bounded(tmp_path, capsys):
    """Every joint -400..400 deg: 3 readings per joint, 3**6 = 729 equivalents of each of the 8
    closed-form solutions (5,832 per pose). The warning comes before the derivation; the default
    verification cuts its samples to the solution budget and says so."""
    arm = tmp_path / "wide.toml"
    arm.write_text(all_limits(-400, 400), encoding="utf-8")
    code = main(["verify", str(arm), "-q"])
    captured = capsys.readouterr()
    assert code == 0, captured.err
    assert captured.err.startswith("warning: arm 'benchtop6': its joint limits allow 729 equivalent readings")
    [line] = [l for l in captured.out.splitlines() if l.startswith("verification of")]
    samples = int(re.search(r": (\d+) samples", line).group(1))
    assert samples == 2_000_000 // 5832
    assert "instead of the default 10,000 samples" in captured.out
    assert "PASSED" in captured.out
    counts_line = next(l for l in captured.out.splitlines() if l.startswith("solution counts"))
    assert len(counts_line) < 300


def test_explicit_samples_are_not_cut(tmp_path):
    from ikgen.armfile import load_arm
    from ikgen.path_command import solver_module
    from ikgen.verify import bounded_samples, verify
    path = tmp_path / "wide.toml"
    path.write_text(all_limits(-400, 400), encoding="utf-8")
    arm = load_arm(path)
    module = solver_module(arm)
    assert module.MAX_SOLUTIONS == 5832
    report = verify(arm, module, samples=150, budget=None)          # what -n 150 asks for
    assert (report.samples, report.requested, report.passed) == (150, 150, True)
    assert bounded_samples(10_000, 5832) == 342 and bounded_samples(10_000, 8) == 10_000
    assert bounded_samples(10_000, 10 ** 9) == 100                    # never below MIN_SAMPLES


def test_ordinary_arms_get_no_warning(capsys):
    assert main(["describe", str(EXAMPLES / "inspector6.json")]) == 0    # 2 x 3 = 6 equivalents: quiet
    from ikgen.armfile import load_arm
    from ikgen.verify import workload_note
    assert workload_note(load_arm(EXAMPLES / "inspector6.json")) is None
    assert capsys.readouterr().err == ""


# ---------------------------------------------------------------------- the error's format

def test_long_path_in_messages_is_cut(tmp_path, capsys):
    deep = tmp_path
    for _ in range(40):                      # a long but valid path of about 1,000 characters
        deep = deep / ("d" * 20)
    deep.mkdir(parents=True)
    arm = deep / "arm.toml"
    arm.write_text(arm_with("a = 25", "a = 1e308"), encoding="utf-8")
    assert main(["describe", str(arm)]) == 2
    err = capsys.readouterr().err
    assert f"({len(str(arm)):,} characters)" in err and len(err) < 1000


def test_subprocess_entry_point_agrees(tmp_path):
    """The installed entry point (python -m ikgen.cli) gives the same one-line error."""
    (tmp_path / "arm.toml").write_text(arm_with("a = 25", "a = 1e308"), encoding="utf-8")
    result = subprocess.run([sys.executable, "-m", "ikgen.cli", "describe", "arm.toml"], cwd=tmp_path,
                            capture_output=True, text=True, timeout=120)
    assert result.returncode == 2 and result.stdout == ""
    assert result.stderr.startswith("ikgen: error: arm.toml:15: joint 1 'carousel': field 'a' is '1e+308'")
    assert result.stderr.count("\n") == 1
