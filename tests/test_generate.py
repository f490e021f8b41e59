"""ikgen.generate.build: the files of an arm are the same whether the report's figures and
documents are made by helper processes (sidejobs.py) or in this process, and each phase is timed
when asked. Helpers are forked only from a process with one thread (a long test session may have
left threads running), so the scenarios that need them run in a fresh Python process."""

from __future__ import annotations

import os
import subprocess
import sys
from pathlib import Path

import pytest

from helpers import demo_arm
from ikgen.backends import report
from ikgen.generate import build, build_code

TESTS = Path(__file__).resolve().parent
needs_fork = pytest.mark.skipif(not sys.platform.startswith("linux") or (os.cpu_count() or 1) < 2,
                                reason="helper processes need Linux (fork) and two or more CPUs")


def in_fresh_process(scenario) -> None:
    code = (f"import sys; sys.path[:0] = [{str(TESTS)!r}, {str(TESTS.parent)!r}]; import test_generate as t; "
            f"t.{scenario.__name__}()")
    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=600,
                          env={k: v for k, v in os.environ.items() if k != "IKGEN_HELPERS"})
    assert done.returncode == 0, done.stderr[-3000:]


def files_without_helpers(stem: str) -> dict:
    os.environ["IKGEN_HELPERS"] = "0"
    try:
        return build(demo_arm(stem)).files
    finally:
        del os.environ["IKGEN_HELPERS"]


@needs_fork
def test_helpers_change_no_byte_of_any_file():
    in_fresh_process(helpers_change_nothing)


def helpers_change_nothing():
    from ikgen import sidejobs
    assert sidejobs.helpers_allowed()
    timings: dict = {}
    with_helpers = build(demo_arm("mast3"), timings=timings)
    alone = files_without_helpers("mast3")
    assert sorted(with_helpers.files) == sorted(alone)
    for path, text in alone.items():
        assert with_helpers.files[path] == text, path
    for phase in ("derive", "python", "batch", "c", "selftest", "report: sheet", "report: figures",
                  "report: verification", "report: documents"):
        assert timings[phase] >= 0.0, phase        # the helpers' phases come back too


@needs_fork
def test_a_dying_helper_costs_time_only():
    in_fresh_process(dying_helper)


def dying_helper():
    """The figures' helper is killed by its own work (os._exit): its work is done in the main
    process, and the files are those of a run without helpers."""
    parent = os.getpid()
    draw = report.figure_texts

    def dying(arm, receive, timings=None):
        if os.getpid() != parent:
            os._exit(3)
        return draw(arm, receive, timings)
    report.figure_texts = dying
    files = build(demo_arm("mast3")).files
    report.figure_texts = draw
    assert files == files_without_helpers("mast3")


def test_the_report_of_build_is_the_report_of_render(monkeypatch):
    """generate.build makes the report in parts (sample evidence, figures, sheet, documents);
    report.render makes it in one call: the same files."""
    monkeypatch.setenv("IKGEN_HELPERS", "0")
    arm = demo_arm("mast3")
    result = build(arm)
    rendered = report.render(arm, result.derivation, result.files[result.python_path])
    for name, text in rendered.items():
        assert result.files[f"{result.folder}/{name}"] == text, name


def test_build_code_gives_builds_code_files_and_no_report():
    """generate.build_code (the solvers without the report): exactly build's files but the report's."""
    arm = demo_arm("mast3")
    whole, code = build(arm).files, build_code(arm).files
    report_files = {name for name in whole if name.endswith(("_report.html", "_report.md", ".svg"))}
    assert report_files and set(code) == set(whole) - report_files
    assert all(code[name] == whole[name] for name in code)
