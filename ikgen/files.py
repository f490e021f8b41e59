"""Reading the files a user names (arm files, path files): regular files only, reads capped.

A name may point at anything: a device such as /dev/zero that never ends, a named pipe (FIFO)
that blocks until someone writes, a socket. ``read_limited`` refuses everything that is not a
regular file before reading a byte (a link is followed first, so a link to a device is a
device), opens without blocking, and reads at most ``limit`` bytes, so that no name can hang
ikgen or exhaust its memory. Problems come back as ``Unreadable`` (what was found, what was
expected), which each reader turns into its own error with file and place.
"""

from __future__ import annotations

import os
import stat
from pathlib import Path

KINDS = ((stat.S_ISCHR, "a character device"), (stat.S_ISBLK, "a block device"),
         (stat.S_ISFIFO, "a named pipe (FIFO)"), (stat.S_ISSOCK, "a socket"))


class Unreadable(Exception):
    """The file cannot be read as asked: ``problem`` (found) and ``expected``."""

    def __init__(self, problem: str, expected: str):
        super().__init__(problem)
        self.problem, self.expected = problem, expected


def kind_of(mode: int) -> str:
    """What a file that is neither a regular file nor a directory is, in words."""
    return next((name for test, name in KINDS if test(mode)), "not a regular file")


def size_text(count: int) -> str:
    """Bytes for people: '1 MiB' for whole mebibytes, else '1,234,567 bytes'."""
    if count >= 1 << 20 and count % (1 << 20) == 0:
        return f"{count >> 20} MiB"
    return f"{count:,} bytes"


def read_limited(path: str | Path, limit: int, what: str) -> bytes:
    """The bytes of the regular file ``path``, at most ``limit`` of them; ``what`` names the
    kind of file expected in messages, without an article ('arm file (.toml or .json)')."""
    try:
        info = os.stat(path)                 # follows links: a link to /dev/zero is a device
    except (FileNotFoundError, NotADirectoryError):
        raise Unreadable("file not found", f"a path to an existing {what}") from None
    except (OSError, ValueError) as exc:     # permission denied, name too long, NUL in the name
        raise Unreadable(f"cannot read the file: {getattr(exc, 'strerror', None) or exc}",
                         f"a readable {what}") from None
    _check_mode(info, limit, what)
    flags = os.O_RDONLY | getattr(os, "O_NONBLOCK", 0) | getattr(os, "O_NOCTTY", 0) | getattr(os, "O_BINARY", 0)
    try:
        handle = os.open(path, flags)        # non-blocking: a pipe swapped in now cannot hang us
    except OSError as exc:
        raise Unreadable(f"cannot read the file: {exc.strerror or exc}", f"a readable {what}") from None
    with os.fdopen(handle, "rb") as stream:
        _check_mode(os.fstat(stream.fileno()), limit, what)   # what was opened, not what was named
        try:
            data = stream.read(limit + 1)
        except OSError as exc:
            raise Unreadable(f"cannot read the file: {exc.strerror or exc}", f"a readable {what}") from None
    if len(data) > limit:                    # it grew after the size check
        raise Unreadable(f"the file is larger than {size_text(limit)}",
                         f"{_article(what)} of at most {size_text(limit)}")
    return data


def _article(what: str) -> str:
    return ("an " if what[:1] in "aeiou" else "a ") + what


def _check_mode(info: os.stat_result, limit: int, what: str) -> None:
    if stat.S_ISDIR(info.st_mode):
        raise Unreadable("is a directory", _article(what))
    if not stat.S_ISREG(info.st_mode):
        raise Unreadable(f"is {kind_of(info.st_mode)}, not a regular file", f"{_article(what)}, a regular file")
    if info.st_size > limit:
        raise Unreadable(f"the file is {info.st_size:,} bytes long",
                         f"{_article(what)} of at most {size_text(limit)}")
