"""Shared fixtures: each demo arm is derived and rendered once per test session.

``built(path)`` returns ikgen.generate.build(load_arm(path)) for an arm file, cached for the whole
session, so the tests that need a demo's generated files (golden files, back-ends, report) pay
for its derivation once.
"""

from __future__ import annotations

from pathlib import Path

import pytest

from ikgen.armfile import load_arm
from ikgen.generate import build

_BUILDS: dict[Path, object] = {}


def build_once(path) -> object:
    path = Path(path).resolve()
    if path not in _BUILDS:
        _BUILDS[path] = build(load_arm(path))
    return _BUILDS[path]


@pytest.fixture(scope="session")
def built():
    return build_once
