"""Flood screening at the nodes: how far the water level is below the cover, or above it.

A node *floods* when its water level reaches its rim (cover) level less a freeboard; it is
*surcharged* when the level is above the soffit of the pipe leaving it (the highest crown of the
pipes leaving it, which then run full from their inlets; at a node no pipe leaves, an outfall,
the highest crown of the pipes arriving) but below flooding; else the water stays *below the
soffit*. A smaller pipe joining invert to invert under a higher water level is drowned at its
outlet, but the manhole is not surcharged while the pipe leaving it still runs part full. A node
without a rim level, or without a level, is *not evaluated*: a missing cover is never reported
as safe.
"""

from __future__ import annotations

from enum import IntEnum

import numpy as np
from numpy.typing import NDArray

Array = NDArray[np.float64]


class FloodState(IntEnum):
    """The flood screening result of one node."""

    BELOW_SOFFIT = 0  # the level is at or below the soffit of the pipe leaving the node
    SURCHARGED = 1  # above that soffit, below rim - freeboard
    FLOODING = 2  # at or above rim - freeboard
    NOT_EVALUATED = 3  # no rim level, or no water level (no evaluated pipe at the node)

    @property
    def label(self) -> str:
        """The lower-case name used in outputs, e.g. ``below_soffit``."""
        return self.name.lower()


def flood_screen(level: Array, rim: Array, soffit: Array, *, freeboard_m: float) -> tuple[Array, Array, NDArray[np.int8]]:
    """Freeboard, flood depth and :class:`FloodState` of every node.

    Parameters
    ----------
    level : water level per node [m]; NaN where not computed
    rim : cover level per node [m]; NaN where unknown
    soffit : the soffit level that surcharges each node [m] (:func:`node_soffits`); inf where none
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
        [~(np.isfinite(level) & np.isfinite(rim)), level >= rim - freeboard_m, level > soffit],
        [FloodState.NOT_EVALUATED, FloodState.FLOODING, FloodState.SURCHARGED],
        FloodState.BELOW_SOFFIT,
    ).astype(np.int8)
    return freeboard, flood_depth, state


def node_soffits(node_count: int, *, up_node: NDArray[np.intp], down_node: NDArray[np.intp], up_crown: Array, down_crown: Array) -> Array:
    """The level above which each node is surcharged [m]: the highest crown of the pipes leaving it,
    else (no pipe leaves) of the pipes arriving; inf where it has no pipe with a known crown.

    >>> node_soffits(3, up_node=np.array([1, 2]), down_node=np.array([0, 1]), up_crown=np.array([10.5, 11.2]),
    ...              down_crown=np.array([10.3, 11.0])).tolist()
    [10.3, 10.5, 11.2]
    """
    leaving, arriving = np.full(node_count, np.nan), np.full(node_count, np.nan)
    np.fmax.at(leaving, up_node, up_crown)
    np.fmax.at(arriving, down_node, down_crown)
    return np.where(np.isfinite(leaving), leaving, np.where(np.isfinite(arriving), arriving, np.inf))
