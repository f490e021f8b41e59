"""User-facing errors: what went wrong, where, and what was expected.

Every error a user can cause by their input is an ``IkgenError``; the command line prints its
message and exits non-zero without a traceback. Anything else is a bug in ikgen.
"""

from __future__ import annotations


class IkgenError(Exception):
    """An error caused by the user's input (file, option, pose), with a readable message."""

    exit_code = 2


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
        location = self.path if self.line is None else f"{self.path}:{self.line}"
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
