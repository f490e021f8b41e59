"""Shared fixtures: each demo arm is derived and rendered once per test session.

``built(path)`` returns ikgen.generate.build(load_arm(path)) for an arm file, from the session
caches of tests/shared.py, so the tests that need a demo's generated files (golden files,
back-ends, report) pay for its derivation once. ikgen's own calls of the engine are routed
through the same memo before any test module is imported (tests/shared.py says why that keeps
every check: a derivation is a deterministic function of the arm).
"""

from __future__ import annotations

import os
import shutil
import tempfile

import pytest

import shared

shared.remember_derivations()


def pytest_configure(config):
    """The main process (not a pytest-xdist worker) makes the folder in which the session's test
    processes share derivations and builds (tests/shared.py); the workers it starts inherit the
    variable that names it."""
    if not hasattr(config, "workerinput") and shared.SHARE_ENV not in os.environ:
        folder = tempfile.mkdtemp(prefix="ikgen-tests-share-")
        os.environ[shared.SHARE_ENV] = folder
        config._ikgen_share = folder


def pytest_unconfigure(config):
    folder = getattr(config, "_ikgen_share", None)
    if folder:
        shutil.rmtree(folder, ignore_errors=True)
        os.environ.pop(shared.SHARE_ENV, None)


def build_once(path) -> object:
    return shared.built(shared.arm_at(path))


@pytest.fixture(scope="session")
def built():
    return build_once
