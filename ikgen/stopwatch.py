"""Phase timings of one run (``ikgen generate`` and its benchmark): named sections added up in a
dict the caller owns. With no dict, nothing is recorded and nothing is slower. ``clock`` is the
wall clock; a benchmark may set it to ``time.process_time`` (CPU seconds of the process that runs
the section), the steadier figure on a busy machine."""

from __future__ import annotations

import time
from contextlib import contextmanager

clock = time.perf_counter


class Stopwatch:
    """``with watch("derive"): ...`` adds the section's seconds to ``timings["derive"]``."""

    def __init__(self, timings: dict | None = None):
        self.timings = timings

    @contextmanager
    def __call__(self, name: str):
        if self.timings is None:
            yield
            return
        started = clock()
        try:
            yield
        finally:
            self.timings[name] = self.timings.get(name, 0.0) + clock() - started
