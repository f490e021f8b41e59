"""A reach map as data, and the one call that computes it.

``compute(job, chunk, mode, ...)`` cuts the grid's flat index into chunks, runs them the chosen
way (run.py) and returns the figures shaped like the grid (orientation, x, y, z); ``ReachMap``
bundles them with what the output files need (axes, orientations, arm facts).
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from . import run
from .core import FIGURES
from .grid import Grid
from .solvers import ReachJob, compute_chunk

MODES = ("here", "processes", "threads", "dask")


def compute(job: ReachJob, chunk: int, mode: str = "here", workers: int = 1, client=None,
            events: run.Events | None = None, chunk_function=compute_chunk) -> dict[str, np.ndarray]:
    """The figures of every pose of ``job.grid``, each shaped (O, X, Y, Z). ``mode`` is "here"
    (this process), "processes" or "threads" (``workers`` of them) or "dask" (on ``client``)."""
    events = events or run.Events(note=None)
    grid = job.grid
    ranges = run.chunk_ranges(grid.size, chunk)
    collector = run.Collector(grid.size, ranges)
    if mode == "here":
        run.run_here(job, ranges, collector, events, chunk_function)
    elif mode in run.POOLS:
        run.run_pool(job, ranges, collector, events, workers, mode, chunk_function)
    elif mode == "dask":
        run.run_dask(job, ranges, collector, events, client, chunk_function)
    else:
        raise ValueError(f"mode must be one of {MODES}, not {mode!r}")
    if collector.missing:       # every runner returns only when all chunks are in; a last guard
        raise RuntimeError(f"chunks {collector.missing[:5]} are missing")
    return {name: collector.arrays[name].reshape(grid.shape) for name in FIGURES}


@dataclass(eq=False)
class ReachMap:
    """A computed map with what its files say about it."""
    arm_name: str
    length_unit: str
    angle_unit: str
    grid: Grid
    step: tuple[float, float, float]        # grid spacing along x, y, z (the asked resolution)
    figures: dict[str, np.ndarray]          # count, conditioning, margin, each (O, X, Y, Z)
    solver: str                             # "numpy" or "c"
    chunk: int
    joint_names: tuple[str, ...]
    joint_limits: np.ndarray                # (J, 2), reading units
    condition_names: tuple[str, ...]
    base_position: np.ndarray               # the arm's base frame origin in the world
    caution: str = ""
    notes: list[str] = field(default_factory=list)

    @property
    def count(self) -> np.ndarray:
        return self.figures["count"]

    @property
    def reached(self) -> np.ndarray:
        return self.figures["count"] > 0

    @property
    def has_conditioning(self) -> bool:
        return self.solver != "c"
