"""Phase timings of one run (``ikgen generate`` and its benchmark): named wall-clock sections
added up in a dict the caller owns. With no dict, nothing is recorded and nothing is slower."""

from __future__ import annotations

import time
from contextlib import contextmanager


class Stopwatch:
    """``with watch("derive"): ...`` adds the section's seconds to ``timings["derive"]``."""

    def __init__(self, timings: dict | None = None):
        self.timings = timings

    @contextmanager
    def __call__(self, name: str):
        if self.timings is None:
            yield
            return
        started = time.perf_counter()
        try:
            yield
        finally:
            self.timings[name] = self.timings.get(name, 0.0) + time.perf_counter() - started
