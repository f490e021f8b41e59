"""Strategies: recognised structures that add equations, unknowns or labels to the pool.

A strategy module provides ``NAME`` (words), ``recognise(arm) -> Finding`` (does the structure
hold, in words, and how far the arm is from it when it does not) and ``contribute(setup, finding)``
(adds identities, group coordinates and labels to the setup). It never writes solver steps: the
one engine (engine/solver.py) solves whatever pool it is given, and no back-end knows which
strategy ran. To add a structure, add a module here and list it in ``STRATEGIES``.
"""

from __future__ import annotations

from dataclasses import dataclass, field

from . import parallel_axes, tool_axis, wrist_centre


@dataclass
class Finding:
    applies: bool
    words: list[str]                         # what holds, or why not and by how much
    data: dict = field(default_factory=dict)


STRATEGIES = (wrist_centre.LAST, wrist_centre.FIRST, tool_axis.STRATEGY, parallel_axes.STRATEGY)
