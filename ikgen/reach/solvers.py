"""The solvers a reach map runs, as small objects that a worker can receive and use.

``BatchSolver`` carries the generated numpy batch solver as source text (a worker process or a
Dask worker loads it once and keeps it), so it travels by pickle; ``CompiledSolver`` wraps the
compiled C solver (ikgen/cbuild.py), which lives in this process only and so runs on threads
(cffi releases the GIL while C runs). Both have ``figures(poses)`` returning the per-pose
figures of core.py, and a ``kind`` ("numpy" or "c").

``ReachJob`` is one map's work: the grid and the solver; ``compute_chunk(job, start, stop)``
computes the figures of the flat indices start .. stop - 1 and is what every executor runs.
"""

from __future__ import annotations

import hashlib
import threading
import types
from dataclasses import dataclass

import numpy as np

from .core import JointWindow, figures_from_batch, figures_from_listed, windows_of
from .grid import Grid

_LOADED: dict[str, object] = {}      # per process: solver modules by the digest of their source
_LOCK = threading.Lock()


def _module(source: str, name: str):
    digest = hashlib.sha256(source.encode("utf-8")).hexdigest()
    with _LOCK:
        if digest not in _LOADED:
            # what generate.load_module does, without importing generate (and sympy with it) in
            # every worker: a worker needs numpy and this package only
            module = types.ModuleType(name)
            exec(compile(source, f"<generated {name}>", "exec"), module.__dict__)
            _LOADED[digest] = module
        return _LOADED[digest]


@dataclass(frozen=True)
class BatchSolver:
    """A generated numpy batch solver by its source text, with the arm's joint windows."""
    source: str
    name: str
    windows: tuple[JointWindow, ...]
    kind: str = "numpy"
    threads_only: bool = False

    def figures(self, poses: np.ndarray) -> dict[str, np.ndarray]:
        module = _module(self.source, self.name)
        if getattr(module, "GIVEN_JOINT", None) is None:
            joints, valid, _labels, _singular, conditioning = module.inverse_batch(poses)
            return figures_from_batch(joints, valid, conditioning, self.windows)
        window = self.windows[module.GIVEN_JOINT - 1]
        return best_over_given([figures_from_batch(*_batch(module, poses, value), self.windows)
                                for value in given_readings(window)])

    @property
    def condition_names(self) -> tuple[str, ...]:
        return tuple(_module(self.source, self.name).CONDITION_NAMES)


class CompiledSolver:
    """The compiled C solver (``cbuild.compile_solver``): counts and margins, no conditioning
    (its many-pose call does not return it)."""
    kind = "c"
    threads_only = True
    condition_names: tuple[str, ...] = ()

    def __init__(self, solver, windows: tuple[JointWindow, ...]):
        self.solver = solver
        self.windows = windows

    def figures(self, poses: np.ndarray) -> dict[str, np.ndarray]:
        given = self.solver.given
        if given is None:
            joints, counts, _labels, _singular = self.solver.inverse_many(poses, limits="drop")
            return figures_from_listed(joints, counts, self.windows)
        out = []
        for value in given_readings(self.windows[given - 1]):
            joints, counts, _labels, _singular = self.solver.inverse_many(poses, np.full(len(poses), value), "drop")
            out.append(figures_from_listed(joints, counts, self.windows))
        return best_over_given(out)


GIVEN_SAMPLES = 13   # readings of a given joint tried per pose, evenly over its limits (both ends)


def given_readings(window: JointWindow) -> np.ndarray:
    """The readings of a given joint a reach map tries (the map shows the best of them)."""
    return np.linspace(window.lower, window.upper, GIVEN_SAMPLES)


def _batch(module, poses, value):
    joints, valid, _labels, _singular, conditioning = module.inverse_batch(poses, value)
    return joints, valid, conditioning


def best_over_given(figures: list[dict]) -> dict[str, np.ndarray]:
    """Per pose, the best figures over the readings of a given joint tried: the most solutions at
    one reading, the largest margin and the largest conditioning (NaN where none reached)."""
    out = {"count": np.max([f["count"] for f in figures], axis=0)}
    for key in ("margin", "conditioning"):
        stack = np.array([f[key] for f in figures])
        out[key] = np.where(np.isnan(stack).all(axis=0), np.nan,
                            np.nanmax(np.where(np.isnan(stack), -np.inf, stack), axis=0))
    return out


def batch_solver(arm, derivation=None) -> BatchSolver:
    """The arm's numpy batch solver, rendered in memory from its derivation (the same source
    ``ikgen generate`` writes as <arm>/<arm>_ik_batch.py; only this back-end is rendered)."""
    from ..backends import batch, common
    from ..engine import derive
    source = batch.render(arm, derivation or derive(arm))
    return BatchSolver(source, common.identifier(arm.name) + "_ik_batch", windows_of(arm))


def compiled_solver(arm, derivation=None) -> CompiledSolver:
    """The arm's C solver, compiled with cffi into a temporary folder (needs a C compiler)."""
    from ..cbuild import compile_solver
    return CompiledSolver(compile_solver(arm, derivation), windows_of(arm))


@dataclass(frozen=True)
class ReachJob:
    grid: Grid
    solver: object          # BatchSolver, CompiledSolver or anything with figures(poses)


def compute_chunk(job: ReachJob, start: int, stop: int) -> dict[str, np.ndarray]:
    """The figures of the flat grid indices start .. stop - 1."""
    return job.solver.figures(job.grid.poses(start, stop))
