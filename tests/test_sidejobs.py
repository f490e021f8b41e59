"""ikgen.sidejobs: work done in a forked helper gives what the same work gives in this process,
and a helper that fails in any way costs only time (its work is then done here)."""

from __future__ import annotations

import os
import signal
import threading
import time

import pytest

from ikgen import sidejobs
from ikgen.sidejobs import SideJob

PARENT = os.getpid()
needs_helpers = pytest.mark.skipif(not sidejobs.helpers_allowed(),
                                   reason="helper processes need Linux, fork, two or more CPUs and one thread")


def two_messages(receive, phases):
    """Reads two messages; says where it ran."""
    first = receive()
    second = receive()
    phases["work"] = 1.0
    return (first, second, os.getpid() != PARENT)


@needs_helpers
def test_a_helper_receives_the_messages_in_order_and_returns_its_value():
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


@needs_helpers
def test_a_failing_helper_leaves_the_work_to_this_process():
    job = SideJob(failing_in_helper)
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


@needs_helpers
def test_a_killed_helper_leaves_the_work_to_this_process():
    job = SideJob(slow_unless_here)
    os.kill(job.process.pid, signal.SIGKILL)
    assert job.result() == "done here"


@needs_helpers
def test_a_value_that_cannot_come_back_is_made_here():
    job = SideJob(lambda receive, phases: (lambda: 1) if os.getpid() != PARENT else "here")
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
