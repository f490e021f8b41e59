"""The committed generated/ files equal a fresh generation, byte for byte.

Regenerate them with:  ikgen generate examples/*.toml examples/*.json
(every arm file under examples/ is a demo whose generated files are committed).
"""

from pathlib import Path

import pytest
import sympy

ROOT = Path(__file__).resolve().parents[1]
DEMOS = sorted(p.name for p in (ROOT / "examples").iterdir() if p.suffix in (".toml", ".json"))
PINNED_SYMPY = "1.14.0"   # the version the golden files were made with (pinned in pyproject.toml)


def test_sympy_is_the_pinned_version():
    assert sympy.__version__ == PINNED_SYMPY


@pytest.mark.parametrize("demo", DEMOS)
def test_generated_files_are_fresh(built, demo):
    result = built(ROOT / "examples" / demo)
    for relative, text in result.files.items():
        golden = ROOT / "generated" / relative
        assert golden.is_file(), f"generated/{relative} is missing; regenerate (see this file's docstring)"
        assert golden.read_text(encoding="utf-8") == text, \
            f"generated/{relative} is stale; regenerate (see this file's docstring)"


def test_no_unexpected_files_in_generated(built):
    expected = set()
    for demo in DEMOS:
        expected |= set(built(ROOT / "examples" / demo).files)
    present = {str(p.relative_to(ROOT / "generated")) for p in (ROOT / "generated").rglob("*") if p.is_file()}
    assert present <= expected | {"README.md"}, f"files no generation writes: {sorted(present - expected)}"
