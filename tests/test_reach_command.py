"""`ikgen reach` end to end (ikgen/reach/command.py, outputs.py): the files it writes, that they
are the same bytes however the map was run, and the errors that need a cluster or its absence.
The figures themselves are checked against outside references in tests/test_reach.py."""

from __future__ import annotations

import csv
import importlib.util
import io
import shutil
import socket
import sys
import zipfile

import numpy as np
import pytest

from helpers import EXAMPLES
from ikgen.cli import main
from ikgen.reach import run

ARM = str(EXAMPLES / "benchtop6.toml")
SMALL = ["--box", "-450,450,-450,450,-150,450", "--step", "75", "--orientations", "down:90,level:180", "-q"]
FILES = ("benchtop6_reach.npz", "benchtop6_reach_summary.csv", "benchtop6_reach_slices.png",
         "benchtop6_reach_side.png", "benchtop6_reach.html")
HAVE_DASK = importlib.util.find_spec("distributed") is not None


def reach(out, *extra) -> int:
    return main(["reach", ARM, *SMALL, "-o", str(out), *extra])


def files_of(folder) -> dict[str, bytes]:
    return {name: (folder / "benchtop6" / name).read_bytes() for name in FILES}


@pytest.fixture(scope="module")
def single(tmp_path_factory):
    """The files of a run in this process (one worker)."""
    folder = tmp_path_factory.mktemp("single")
    assert reach(folder, "--workers", "1") == 0
    return files_of(folder)


def test_the_archive_holds_every_figure_of_every_pose(single):
    data = np.load(io.BytesIO(single["benchtop6_reach.npz"]), allow_pickle=False)
    shape = (6, 13, 13, 9)                       # orientations, x, y, z
    assert data["count"].shape == data["margin"].shape == data["conditioning"].shape == shape
    np.testing.assert_array_equal(data["x"], np.arange(-450, 451, 75))
    assert list(data["orientation_names"]) == ["down yaw 0", "down yaw 90", "down yaw 180", "down yaw 270",
                                              "level heading 0", "level heading 180"]
    reached = data["count"] > 0
    assert reached.any() and (~reached).any()
    assert np.isnan(data["margin"][~reached]).all() and np.isfinite(data["margin"][reached]).all()
    assert np.isfinite(data["conditioning"][reached]).all()
    assert list(data["condition_names"]) and data["joint_limits"].shape == (6, 2)
    assert '"arm": "benchtop6"' in str(data["info"])
    for entry in zipfile.ZipFile(io.BytesIO(single["benchtop6_reach.npz"])).infolist():
        assert entry.date_time == (1980, 1, 1, 0, 0, 0)     # no time stamp: same map, same bytes


def test_the_summary_has_a_row_per_orientation_that_agrees_with_the_archive(single):
    rows = list(csv.DictReader(io.StringIO(single["benchtop6_reach_summary.csv"].decode("utf-8"))))
    data = np.load(io.BytesIO(single["benchtop6_reach.npz"]), allow_pickle=False)
    assert [r["orientation"] for r in rows] == list(data["orientation_names"])
    for o, row in enumerate(rows):
        count = data["count"][o]
        assert int(row["reachable"]) == int((count > 0).sum()) and int(row["positions"]) == count.size
        assert int(row["solutions_max"]) == int(count.max())
        assert float(row["margin_median"]) == pytest.approx(np.median(data["margin"][o][count > 0]), abs=1e-6)


def test_the_page_shows_the_pictures_and_the_caution(single):
    page = single["benchtop6_reach.html"].decode("utf-8")
    assert "Caution: robots can hurt people." in page and "ISO 10218-1" in page and "ISO/TS 15066" in page
    assert page.count('src="data:image/png;base64,') == 2
    assert "<script" not in page
    for name in FILES[:-1]:
        assert name in page
    assert single["benchtop6_reach_slices.png"].startswith(b"\x89PNG\r\n\x1a\n")


@pytest.mark.parametrize("extra", [("--workers", "2", "--pool", "threads"), ("--workers", "2", "--pool", "processes")],
                         ids=["threads", "processes"])
def test_the_files_are_the_same_bytes_however_the_map_ran(single, tmp_path, extra):
    assert reach(tmp_path, *extra) == 0
    assert files_of(tmp_path) == single


def test_another_chunking_gave_the_same_figures_here(single, tmp_path):
    """Only the same chunking is promised to give the same bits; on this machine another one
    did too (the archive differs only in the chunk size it records)."""
    assert reach(tmp_path, "--workers", "1", "--chunk", "1000") == 0
    other = files_of(tmp_path)
    assert {k: v for k, v in other.items() if not k.endswith(".npz")} == \
        {k: v for k, v in single.items() if not k.endswith(".npz")}
    first = np.load(io.BytesIO(single["benchtop6_reach.npz"]), allow_pickle=False)
    second = np.load(io.BytesIO(other["benchtop6_reach.npz"]), allow_pickle=False)
    for name in first.files:
        if name != "info":
            np.testing.assert_array_equal(first[name], second[name])
    assert '"chunk": 1000' in str(second["info"])


@pytest.mark.skipif(not HAVE_DASK, reason="dask.distributed is not installed (pip install '.[cluster]')")
def test_a_local_dask_cluster_writes_the_same_files(single, tmp_path):
    assert reach(tmp_path, "--cluster", "local", "--cluster-workers", "2") == 0
    assert files_of(tmp_path) == single


def free_port() -> int:
    with socket.socket() as probe:
        probe.bind(("127.0.0.1", 0))
        return probe.getsockname()[1]


@pytest.mark.skipif(not HAVE_DASK, reason="dask.distributed is not installed (pip install '.[cluster]')")
def test_an_unreachable_scheduler_is_a_clear_error_and_nothing_is_written(tmp_path, capsys, monkeypatch):
    monkeypatch.setattr(run, "CONNECT_TIMEOUT", 2.0)
    address = f"tcp://127.0.0.1:{free_port()}"           # nothing listens there
    assert reach(tmp_path / "out", "--cluster", address) == 2
    error = capsys.readouterr().err
    assert f"cannot reach the Dask scheduler at '{address}' within 2 s" in error
    assert "start one with 'dask scheduler'" in error and "Traceback" not in error
    assert not (tmp_path / "out").exists()


def test_without_dask_the_cluster_option_says_how_to_install_it(tmp_path, capsys, monkeypatch):
    monkeypatch.setitem(sys.modules, "distributed", None)       # import distributed now fails
    assert reach(tmp_path / "out", "--cluster", "local") == 2
    error = capsys.readouterr().err
    assert "--cluster needs Dask's distributed scheduler, which is not installed" in error
    assert "pip install 'ikgen[cluster]'" in error
    assert not (tmp_path / "out").exists()


@pytest.mark.skipif(shutil.which("cc") is None and shutil.which("gcc") is None, reason="no C compiler on this machine")
def test_the_c_solver_gives_the_same_counts_and_margins(single, tmp_path):
    assert reach(tmp_path, "--solver", "c", "--workers", "2") == 0
    numpy_map = np.load(io.BytesIO(single["benchtop6_reach.npz"]), allow_pickle=False)
    c_map = np.load(tmp_path / "benchtop6" / "benchtop6_reach.npz", allow_pickle=False)
    np.testing.assert_array_equal(c_map["count"], numpy_map["count"])
    np.testing.assert_allclose(c_map["margin"], numpy_map["margin"], atol=1e-9)
    assert np.isnan(c_map["conditioning"]).all()
    assert "not computed by the C solver" in (tmp_path / "benchtop6" / "benchtop6_reach.html").read_text()


def test_the_run_prints_an_estimate_before_and_a_summary_after(tmp_path, capsys):
    assert reach(tmp_path, "--workers", "1") == 0
    printed = capsys.readouterr().out
    assert "1,521 positions (spacing 75 mm) x 6 orientation(s) = 9,126 poses" in printed
    assert printed.index("estimated") < printed.index("done in")
    assert "down yaw 0" in printed and "wrote " in printed
