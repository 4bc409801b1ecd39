"""Walks over a tree of manholes given as a downstream pointer per node, level by level."""

from __future__ import annotations

from collections.abc import Iterator

import numpy as np


def levels(down: np.ndarray) -> np.ndarray:
    """Number of pipes between each node and its outfall (pointer jumping; one pass per level)."""
    level = np.zeros(down.size, dtype=int)
    cur = down.copy()
    while (cur >= 0).any():
        level += cur >= 0
        cur = np.where(cur >= 0, down[cur], -1)
    return level


def sweep(level: np.ndarray, up: np.ndarray) -> Iterator[np.ndarray]:
    """Pipe indices level by level from the heads of runs down (few levels, not one per pipe)."""
    return (np.flatnonzero(level[up] == lvl) for lvl in range(level.max(), 0, -1))


def accumulate(load: np.ndarray, up: np.ndarray, dn: np.ndarray, level: np.ndarray) -> np.ndarray:
    """Load [l/s] arriving at each node from itself and everything upstream of it."""
    acc = load.astype(float).copy()
    for p in sweep(level, up):
        np.add.at(acc, dn[p], acc[up[p]])
    return acc
