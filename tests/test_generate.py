"""ikgen.generate.build: the files of an arm are the same whether the report's figures and
documents are made by helper processes (sidejobs.py) or in this process, and each phase is timed
when asked."""

from __future__ import annotations

import pytest

from helpers import demo_arm
from ikgen import sidejobs
from ikgen.backends import report
from ikgen.generate import build


@pytest.mark.skipif(not sidejobs.helpers_allowed(), reason="helper processes need Linux, fork, two CPUs, one thread")
def test_helpers_change_no_byte_of_any_file(monkeypatch):
    arm = demo_arm("mast3")
    timings: dict = {}
    with_helpers = build(arm, timings=timings)
    monkeypatch.setenv("IKGEN_HELPERS", "0")
    alone = build(demo_arm("mast3"))
    assert sorted(with_helpers.files) == sorted(alone.files)
    for path, text in alone.files.items():
        assert with_helpers.files[path] == text, path
    for phase in ("derive", "python", "batch", "c", "selftest", "report: sheet", "report: figures",
                  "report: verification", "report: documents"):
        assert timings[phase] >= 0.0, phase        # the helpers' phases come back too


def test_the_report_of_build_is_the_report_of_render(monkeypatch):
    """generate.build makes the report in parts (sample evidence, figures, sheet, documents);
    report.render makes it in one call: the same files."""
    monkeypatch.setenv("IKGEN_HELPERS", "0")
    arm = demo_arm("mast3")
    result = build(arm)
    rendered = report.render(arm, result.derivation, result.files[result.python_path])
    for name, text in rendered.items():
        assert result.files[f"{result.folder}/{name}"] == text, name


def test_a_failing_figure_helper_gives_the_same_files(monkeypatch):
    """A helper that dies (here: the figures' helper, killed by its own work) costs time only."""
    import os
    parent = os.getpid()
    draw = report.figure_texts

    def dying(arm, receive, timings=None):
        if os.getpid() != parent:
            os._exit(3)
        return draw(arm, receive, timings)
    monkeypatch.setattr(report, "figure_texts", dying)
    arm = demo_arm("mast3")
    files = build(arm).files
    monkeypatch.setattr(report, "figure_texts", draw)
    monkeypatch.setenv("IKGEN_HELPERS", "0")
    assert build(demo_arm("mast3")).files == files
