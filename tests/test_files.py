"""ikgen.files.read_limited: regular files only, reads capped, nothing blocks.

References: POSIX stat(2) file types (S_ISREG, S_ISDIR, S_ISCHR, S_ISFIFO, S_ISSOCK) and open(2)
with O_NONBLOCK (an open of a FIFO for reading returns at once), as documented for Python's
os and stat modules (Python 3.11 library reference).
"""

from __future__ import annotations

import os

import pytest

from ikgen.files import Unreadable, read_limited, size_text


def test_reads_a_regular_file_and_a_link_to_one(tmp_path):
    path = tmp_path / "a.toml"
    path.write_bytes(b"abc")
    (tmp_path / "link.toml").symlink_to(path)
    assert read_limited(path, 10, "arm file") == b"abc"
    assert read_limited(tmp_path / "link.toml", 3, "arm file") == b"abc"


@pytest.mark.parametrize("make, problem", [
    (lambda p: os.mkfifo(p), "is a named pipe (FIFO), not a regular file"),
    (lambda p: p.symlink_to("/dev/null"), "is a character device, not a regular file"),
    (lambda p: p.mkdir(), "is a directory"),
    (lambda p: None, "file not found"),
    (lambda p: p.symlink_to(p.parent / "nowhere"), "file not found"),
])
def test_refuses_without_reading(tmp_path, make, problem):
    path = tmp_path / "x.toml"
    make(path)
    with pytest.raises(Unreadable) as info:
        read_limited(path, 100, "arm file (.toml or .json)")
    assert info.value.problem == problem
    assert "arm file (.toml or .json)" in info.value.expected


def test_size_cap(tmp_path):
    path = tmp_path / "big.csv"
    path.write_bytes(b"x" * 101)
    with pytest.raises(Unreadable) as info:
        read_limited(path, 100, "path file (.csv)")
    assert info.value.problem == "the file is 101 bytes long"
    assert info.value.expected == "a path file (.csv) of at most 100 bytes"
    assert size_text(1 << 20) == "1 MiB" and size_text(32 << 20) == "32 MiB" and size_text(1000) == "1,000 bytes"
