"""The poses of a reach map: a box of positions at a resolution, times tool orientations.

Positions: ``axis_values(low, high, step)`` gives low, low + step, ... up to high (high itself
when the step divides the side); a box is three such axes. Orientations come from
orientations.py. ``Grid`` holds the axes and rotations and makes the poses of any range of the
flat index (orientation first, then x, y, z, in C order), so a chunk of work is just two
numbers. This module needs numpy only: every worker imports it.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np


@dataclass(frozen=True, eq=False)
class Grid:
    """Positions (three axes) times orientations; the flat index runs over (orientation, x, y, z)."""
    x: np.ndarray
    y: np.ndarray
    z: np.ndarray
    rotations: np.ndarray           # (O, 3, 3)
    names: tuple[str, ...]

    @property
    def shape(self) -> tuple[int, int, int, int]:
        return (len(self.rotations), len(self.x), len(self.y), len(self.z))

    @property
    def positions(self) -> int:
        return len(self.x) * len(self.y) * len(self.z)

    @property
    def size(self) -> int:
        return math.prod(self.shape)

    def poses(self, start: int, stop: int) -> np.ndarray:
        """(stop - start, 4, 4) poses of the flat indices start .. stop - 1."""
        return self.poses_at(np.arange(start, stop))

    def poses_at(self, indices: np.ndarray) -> np.ndarray:
        """(n, 4, 4) poses of the given flat indices."""
        o, i, j, k = np.unravel_index(indices, self.shape)
        poses = np.zeros((len(indices), 4, 4))
        poses[:, :3, :3] = self.rotations[o]
        poses[:, 0, 3], poses[:, 1, 3], poses[:, 2, 3] = self.x[i], self.y[j], self.z[k]
        poses[:, 3, 3] = 1.0
        return poses


def axis_count(low: float, high: float, step: float) -> int:
    """How many values axis_values(low, high, step) has (without making them)."""
    return int(math.floor((high - low) / step + 1e-9)) + 1


def axis_values(low: float, high: float, step: float) -> np.ndarray:
    """low, low + step, ... <= high (high included when within 1e-9 steps of a grid value)."""
    return low + step * np.arange(axis_count(low, high, step))
