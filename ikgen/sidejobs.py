"""Work done in a forked helper process while this process goes on (generate.build overlaps the
report's figures and documents with the derivation and the code back-ends this way).

A side job is a function ``work(receive, timings)``: it may call ``receive()`` for the next message
the caller sends (``job.send(message)``), records its phases in ``timings``, and returns a
picklable value, which ``job.result()`` returns. Helpers are used only where that is safe and
useful: on Linux (fork), from a process with no other Python thread (a thread holding a lock at
the fork could leave the helper stuck), with more than one CPU, and unless ``IKGEN_HELPERS=0``.
Otherwise, and whenever a helper fails in any way (an exception, a signal, a lost pipe), the work
is done here by the same function with the messages already sent, when ``result()`` is asked for:
the value, and any error raised, are exactly those of a run without helpers.
"""

from __future__ import annotations

import multiprocessing
import os
import sys
import threading
from typing import Any, Callable

Work = Callable[[Callable[[], Any], dict], Any]


def helpers_allowed() -> bool:
    return (sys.platform.startswith("linux") and os.environ.get("IKGEN_HELPERS", "1") != "0"
            and (os.cpu_count() or 1) > 1 and threading.active_count() == 1)


HELPER_LIMIT = 900.0   # seconds a helper may take (the biggest reports took minutes under load)


class SideJob:
    """One call of ``work``, in a forked helper when allowed (see the module docstring), else here."""

    def __init__(self, work: Work):
        self.work = work
        self.sent: list = []
        self.process = self.connection = None
        if helpers_allowed():
            self._fork()

    def _fork(self) -> None:
        context = multiprocessing.get_context("fork")
        mine, theirs = context.Pipe()
        sys.stdout.flush()          # nothing buffered before the fork may be written twice
        sys.stderr.flush()
        try:
            process = context.Process(target=_helper_main, args=(self.work, theirs), daemon=True)
            process.start()
        except OSError:             # no process to be had (limits): the work is done here
            mine.close()
            return
        finally:
            theirs.close()
        self.process, self.connection = process, mine

    def send(self, message: Any) -> None:
        self.sent.append(message)
        if self.connection is not None:
            try:
                self.connection.send(message)
            except (OSError, ValueError):
                self._abandon()

    def result(self, timings: dict | None = None) -> Any:
        """The work's value; ``timings`` receives the work's phases (as measured where it ran)."""
        if self.connection is not None:
            try:
                # a helper that neither answers nor dies within the limit is ended and its work
                # done here (the same result): generate never waits on a stuck helper for ever
                if self.connection.poll(HELPER_LIMIT):
                    status, value, phases = self.connection.recv()
                else:
                    status = "failed"
            except (EOFError, OSError, ValueError):
                status = "failed"
            self._abandon()
            if status == "done":
                if timings is not None:
                    timings.update({name: timings.get(name, 0.0) + t for name, t in phases.items()})
                return value
        messages = iter(self.sent)
        return self.work(lambda: next(messages), {} if timings is None else timings)

    def _abandon(self) -> None:
        """Close the pipe and end the helper (it has finished, or its work will be done here)."""
        if self.connection is not None:
            self.connection.close()
            self.connection = None
        if self.process is not None:
            self.process.join(timeout=0.5)
            if self.process.is_alive():
                self.process.kill()
                self.process.join()
            self.process = None

    def close(self) -> None:
        self._abandon()


def _helper_main(work: Work, connection) -> None:
    """The helper's whole life: do the work, send back ("done", value, timings) or ("failed", ...)."""
    phases: dict = {}
    try:
        value = work(connection.recv, phases)
        message = ("done", value, phases)
    except BaseException:           # the caller does the work itself and meets the error there
        message = ("failed", None, phases)
    try:
        connection.send(message)
    except BaseException:
        pass
    finally:
        connection.close()
