"""Shared fixtures: each demo arm is derived and rendered once per test session.

``built(path)`` returns ikgen.generate.build(load_arm(path)) for an arm file, from the session
caches of tests/shared.py, so the tests that need a demo's generated files (golden files,
back-ends, report) pay for its derivation once. ikgen's own calls of the engine are routed
through the same memo before any test module is imported (tests/shared.py says why that keeps
every check: a derivation is a deterministic function of the arm).
"""

from __future__ import annotations

import pytest

import shared

shared.remember_derivations()


def build_once(path) -> object:
    return shared.built(shared.arm_at(path))


@pytest.fixture(scope="session")
def built():
    return build_once
