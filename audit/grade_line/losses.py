r"""Manhole losses that grow with the turn the flow makes through the manhole.

Water leaving a node along a pipe loses :math:`k\, v^2 / 2g`, with v the pipe's velocity at its
upstream end. Through a benched manhole whose outgoing pipe carries on in the line of the
incoming one k is small; where the flow has to turn it is larger. The turn of a pipe is the
angle between the direction of the main pipe into its upstream node (the incoming pipe with the
largest design flow) and its own direction, each taken as the chord from node to node: 0 degrees
straight on, 90 degrees a right-angle bend, up to 180 degrees where the flow doubles back. k
rises linearly from ``manhole_loss`` at 0 degrees to ``bend_loss`` at 90 degrees and stays there
beyond (a choice of this tool). A pipe that leaves a node no pipe enters (the head of a run), or
whose direction is unknown (a node without coordinates, two nodes at one place), takes
``manhole_loss``.

Values (from memory; local design manuals give tables): a benched straight-through manhole 0.1 to
0.2, a 45 degree bend about 0.5, a right-angle bend 1.0 and more where the benching is poor.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import NDArray

Array = NDArray[np.float64]
Index = NDArray[np.intp]


def turn_angles(upstream: Index, downstream: Index, flow: Array, x: Array, y: Array) -> Array:
    """The turn [degrees, 0 to 180] of every pipe from the main pipe into its upstream node; NaN
    where no pipe enters that node or a direction is unknown.

    Parameters
    ----------
    upstream, downstream : node index at each end of each pipe in flow direction (-1: not placed)
    flow : design flow per pipe [m^3/s] (NaN counts as none): the main incoming pipe has the most
    x, y : coordinates of every node [m]

    >>> # 0 -> 1 -> 2 turns right through 90 degrees at node 1; 3 -> 1 brings less water in
    >>> xy = np.array([[0.0, 0.0], [10.0, 0.0], [10.0, -10.0], [10.0, 10.0]])
    >>> turn_angles(np.array([0, 1, 3]), np.array([1, 2, 1]), np.array([0.2, 0.3, 0.1]), xy[:, 0], xy[:, 1]).round(6).tolist()
    [nan, 90.0, nan]
    """
    up, down = np.asarray(upstream), np.asarray(downstream)
    placed = (up >= 0) & (down >= 0)
    dx = np.where(placed, x[np.maximum(down, 0)] - x[np.maximum(up, 0)], np.nan)
    dy = np.where(placed, y[np.maximum(down, 0)] - y[np.maximum(up, 0)], np.nan)
    with np.errstate(invalid="ignore", divide="ignore"):
        reach = np.hypot(dx, dy)
        ux, uy = np.where(reach > 0, dx / reach, np.nan), np.where(reach > 0, dy / reach, np.nan)
    main = np.full(x.size, -1, dtype=np.intp)  # per node, the incoming pipe with the most flow
    arriving = np.flatnonzero(placed)
    # written from the least flow to the most, and on a tie from the later pipe to the earlier: the
    # last write to a node wins, so it keeps the pipe with the most flow (the first of equals)
    writes = arriving[np.argsort(-np.nan_to_num(flow[arriving], nan=-np.inf), kind="stable")][::-1]
    main[down[writes]] = writes
    feeder = np.where(placed, main[np.maximum(up, 0)], -1)
    fed = feeder >= 0
    at = np.maximum(feeder, 0)
    cosine = np.where(fed, ux[at] * ux + uy[at] * uy, np.nan)
    return np.degrees(np.arccos(np.clip(cosine, -1.0, 1.0)))


def loss_coefficients(turn: Array, *, straight: float, right_angle: float) -> Array:
    """k per pipe from its turn [degrees]: ``straight`` at 0, ``right_angle`` at 90 and beyond,
    linear between; ``straight`` where the turn is unknown (NaN).

    >>> loss_coefficients(np.array([0.0, 45.0, 90.0, 150.0, np.nan]), straight=0.15, right_angle=1.0).round(4).tolist()
    [0.15, 0.575, 1.0, 1.0, 0.15]
    """
    share = np.clip(np.nan_to_num(np.asarray(turn, dtype=float), nan=0.0), 0.0, 90.0) / 90.0
    return straight + (right_angle - straight) * share
