"""ikgen.sidejobs: work done in a forked helper gives what the same work gives in this process,
and a helper that fails in any way costs only time (its work is then done here)."""

from __future__ import annotations

import os
import signal
import subprocess
import sys
import threading
import time
from pathlib import Path

import pytest

from ikgen import sidejobs
from ikgen.sidejobs import SideJob

PARENT = os.getpid()
TESTS = Path(__file__).resolve().parent
needs_fork = pytest.mark.skipif(not sys.platform.startswith("linux") or (os.cpu_count() or 1) < 2,
                                reason="helper processes need Linux (fork) and two or more CPUs")


def in_fresh_process(scenario) -> None:
    """Run ``scenario`` (a function of this module) in a new Python process: helpers are forked only
    from a process with one thread, and a long test session may have left threads running here."""
    code = f"import sys; sys.path[:0] = [{str(TESTS)!r}, {str(TESTS.parent)!r}]; import test_sidejobs as t; t.{scenario.__name__}()"
    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=300,
                          env={k: v for k, v in os.environ.items() if k != "IKGEN_HELPERS"})
    assert done.returncode == 0, done.stderr[-3000:]


def two_messages(receive, phases):
    """Reads two messages; says where it ran."""
    first = receive()
    second = receive()
    phases["work"] = 1.0
    return (first, second, os.getpid() != PARENT)


@needs_fork
def test_a_helper_receives_the_messages_in_order_and_returns_its_value():
    in_fresh_process(receives_in_order)


def receives_in_order():
    job = SideJob(two_messages)
    try:
        assert job.process is not None
        job.send([1, 2])
        job.send({"b": "text"})
        timings: dict = {}
        assert job.result(timings) == ([1, 2], {"b": "text"}, True)
        assert timings == {"work": 1.0}          # the helper's phases come back with its value
    finally:
        job.close()


def test_without_helpers_the_work_runs_here_with_the_same_messages(monkeypatch):
    monkeypatch.setenv("IKGEN_HELPERS", "0")
    job = SideJob(two_messages)
    assert job.process is None
    job.send("a")
    job.send("b")
    assert job.result() == ("a", "b", False)


def failing_in_helper(receive, phases):
    if os.getpid() != PARENT:
        raise RuntimeError("only in the helper")
    return receive() * 2


@needs_fork
def test_a_failing_helper_leaves_the_work_to_this_process():
    in_fresh_process(failing_helper)


def failing_helper():
    job = SideJob(failing_in_helper)
    assert job.process is not None
    job.send(21)
    assert job.result() == 42
    assert job.process is None                   # the helper is gone


def always_failing(receive, phases):
    raise ValueError("bad input found by the work")


def test_an_error_of_the_work_is_raised_here_as_it_would_be_without_helpers():
    job = SideJob(always_failing)
    with pytest.raises(ValueError, match="bad input found by the work"):
        job.result()


def slow_unless_here(receive, phases):
    if os.getpid() != PARENT:
        time.sleep(60)
    return "done here"


@needs_fork
def test_a_killed_helper_leaves_the_work_to_this_process():
    in_fresh_process(killed_helper)


def killed_helper():
    job = SideJob(slow_unless_here)
    os.kill(job.process.pid, signal.SIGKILL)
    assert job.result() == "done here"


@needs_fork
def test_a_value_that_cannot_come_back_is_made_here():
    in_fresh_process(unpicklable_value)


def unpicklable_value():
    job = SideJob(lambda receive, phases: (lambda: 1) if os.getpid() != PARENT else "here")
    assert job.process is not None
    assert job.result() == "here"


def test_no_helper_is_forked_while_another_thread_runs():
    stop = threading.Event()
    thread = threading.Thread(target=stop.wait)
    thread.start()
    try:
        assert not sidejobs.helpers_allowed()
        job = SideJob(two_messages)
        assert job.process is None
    finally:
        stop.set()
        thread.join()
