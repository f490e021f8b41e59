"""User-facing errors: what went wrong, where, and what was expected.

Every error a user can cause by their input is an ``IkgenError``; the command line prints its
message and exits non-zero without a traceback. Anything else is a bug in ikgen.

User text that reaches a message (a value, a name, a file name) goes through ``quote`` or
``clip``: characters that are not printable are written as escapes (a BEL as ``\\x07``, a
right-to-left override as ``\\u202e``) so that a message can neither ring, move the cursor nor
reorder the terminal's text, and a long value is cut, with its length, so that one bad field
cannot flood the screen. Every ``IkgenError`` message is also passed through ``safe_message`` as
a last guard.
"""

from __future__ import annotations

VALUE_LIMIT = 60          # characters of a user value shown in a message before it is cut
PATH_LIMIT = 200          # characters of a file name shown in a message before it is cut
MESSAGE_LIMIT = 4000      # characters of a whole message


def printable(text: str) -> str:
    """``text`` with every character that is not printable (control and format characters,
    line and paragraph separators, unassigned code points) written as its Python escape."""
    if text.isprintable():
        return text
    return "".join(c if c.isprintable() else c.encode("unicode_escape").decode("ascii") for c in text)


def clip(value, limit: int = VALUE_LIMIT) -> str:
    """User text for a message: escaped, and cut after ``limit`` characters with its length
    ("abc... (100,000 characters)")."""
    text = value if isinstance(value, str) else str(value)
    if len(text) <= limit:
        return printable(text)
    return f"{printable(text[:limit])}... ({len(text):,} characters)"


def quote(value, limit: int = VALUE_LIMIT) -> str:
    """User text in quotes for a message: 'abc', or 'abc...' (100,000 characters) when cut."""
    text = value if isinstance(value, str) else str(value)
    if len(text) <= limit:
        return f"'{printable(text)}'"
    return f"'{printable(text[:limit])}...' ({len(text):,} characters)"


def safe_message(text: str, limit: int = MESSAGE_LIMIT) -> str:
    """A whole message made safe to print: escaped, and cut when longer than ``limit``."""
    text = printable(text)
    if len(text) <= limit:
        return text
    return f"{text[:limit]}... (message of {len(text):,} characters cut)"


class IkgenError(Exception):
    """An error caused by the user's input (file, option, pose), with a readable message."""

    exit_code = 2

    def __init__(self, message: str = ""):
        super().__init__(safe_message(str(message)))


class ArmFileError(IkgenError):
    """A problem in an arm description file.

    ``where`` names the place in the file (for example ``joint 3 'elbow', field 'alpha'``);
    ``line`` is the 1-based line number when it is known.
    """

    def __init__(self, path: str, where: str, problem: str, expected: str | None = None,
                 line: int | None = None, hint: str | None = None):
        self.path = path
        self.where = where
        self.problem = problem
        self.expected = expected
        self.line = line
        self.hint = hint
        super().__init__(self.format())

    def format(self) -> str:
        shown = clip(self.path, PATH_LIMIT)
        location = shown if self.line is None else f"{shown}:{self.line}"
        text = f"{location}: {self.where}: {self.problem}" if self.where else f"{location}: {self.problem}"
        if self.expected:
            text += f"; expected {self.expected}"
        if self.hint:
            text += f" ({self.hint})"
        return text


class StructureError(IkgenError):
    """The arm is outside what the derivation handles; the message says why."""

    exit_code = 3


class VerificationError(IkgenError):
    """A generated solver failed its numerical verification."""

    exit_code = 4
