"""Terminal output: aligned tables and number formatting. All printing of results goes through here."""

from __future__ import annotations

import sys

import numpy as np


def fmt(value: float, digits: int = 6) -> str:
    """A number for people: fixed decimals, no '-0', trailing zeros trimmed."""
    if value is None:
        return "-"
    value = float(value)
    if not np.isfinite(value):
        return str(value)
    text = f"{value:.{digits}f}".rstrip("0").rstrip(".")
    return "0" if text in ("-0", "") else text


def table(headers: list[str], rows: list[list[str]], align: str | None = None) -> str:
    """Rows under headers, columns padded; ``align`` holds 'l' or 'r' per column (numbers right)."""
    columns = len(headers)
    align = align or "l" * columns
    widths = [max(len(str(r[i])) for r in [headers] + rows) for i in range(columns)]

    def line(cells):
        parts = [str(c).ljust(w) if a == "l" else str(c).rjust(w) for c, w, a in zip(cells, widths, align)]
        return "  ".join(parts).rstrip()

    rule = "  ".join("-" * w for w in widths)
    return "\n".join([line(headers), rule] + [line(r) for r in rows])


def matrix(values: np.ndarray, digits: int = 6) -> str:
    cells = [[fmt(v, digits) for v in row] for row in np.asarray(values)]
    widths = [max(len(r[i]) for r in cells) for i in range(len(cells[0]))]
    return "\n".join("  [ " + "  ".join(c.rjust(w) for c, w in zip(r, widths)) + " ]" for r in cells)


def out(text: str = "") -> None:
    sys.stdout.write(text + "\n")


def err(text: str) -> None:
    sys.stderr.write(text + "\n")
