"""Flood screening at the nodes: how far the water level is below the cover, or above it.

A node *floods* when its water level reaches its rim (cover) level less a freeboard; it is
*surcharged* when the level is above the soffit of the lowest crown among the pipes at the node
but below flooding; else the water stays *below the soffit*. A node without a rim level, or
without a level, is *not evaluated*: a missing cover is never reported as safe.
"""

from __future__ import annotations

from enum import IntEnum

import numpy as np
from numpy.typing import NDArray

Array = NDArray[np.float64]


class FloodState(IntEnum):
    """The flood screening result of one node."""

    BELOW_SOFFIT = 0  # the level is at or below the lowest crown at the node
    SURCHARGED = 1  # above the lowest crown, below rim - freeboard
    FLOODING = 2  # at or above rim - freeboard
    NOT_EVALUATED = 3  # no rim level, or no water level (no evaluated pipe at the node)

    @property
    def label(self) -> str:
        """The lower-case name used in outputs, e.g. ``below_soffit``."""
        return self.name.lower()


def flood_screen(level: Array, rim: Array, lowest_crown: Array, *, freeboard_m: float) -> tuple[Array, Array, NDArray[np.int8]]:
    """Freeboard, flood depth and :class:`FloodState` of every node.

    Parameters
    ----------
    level : water level per node [m]; NaN where not computed
    rim : cover level per node [m]; NaN where unknown
    lowest_crown : the lowest crown (soffit) level of the pipes at each node [m]; NaN where none
    freeboard_m : a node floods when its level reaches ``rim - freeboard_m`` [m]

    Returns
    -------
    freeboard : rim - level [m]; negative where the level is above the rim, NaN where unknown
    flood_depth : max(level - rim, 0) [m], the water above the cover; NaN where unknown
    state : int8 :class:`FloodState` per node

    >>> freeboard, depth, state = flood_screen(np.array([9.0, 10.2, 9.95, 7.0]), np.array([10.0, 10.0, 10.0, np.nan]),
    ...                                        np.array([9.5, 9.5, 9.5, 6.0]), freeboard_m=0.1)
    >>> freeboard.round(2).tolist(), depth.round(2).tolist(), [FloodState(s).label for s in state]
    ([1.0, -0.2, 0.05, nan], [0.0, 0.2, 0.0, nan], ['below_soffit', 'flooding', 'flooding', 'not_evaluated'])
    """
    freeboard = rim - level
    flood_depth = np.maximum(level - rim, 0.0)
    state = np.select(
        [~(np.isfinite(level) & np.isfinite(rim)), level >= rim - freeboard_m, level > lowest_crown],
        [FloodState.NOT_EVALUATED, FloodState.FLOODING, FloodState.SURCHARGED],
        FloodState.BELOW_SOFFIT,
    ).astype(np.int8)
    return freeboard, flood_depth, state
