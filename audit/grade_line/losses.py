r"""Manhole losses that grow with the turn the flow makes through the manhole.

Water leaving a node along a pipe loses :math:`k\, v^2 / 2g`, with v the pipe's velocity at its
upstream end. Through a benched manhole whose outgoing pipe carries on in the line of the
incoming one k is small; where the flow has to turn it is larger. The turn of a pipe is the
angle between the direction of the main pipe into its upstream node (the incoming pipe with the
largest design flow; of equal flows, the one that turns most) and its own direction, each taken
as the chord from node to node: 0 degrees straight on, 90 degrees a right-angle bend, up to 180
degrees where the flow doubles back. k rises linearly from ``manhole_loss`` at 0 degrees to
``bend_loss`` at 90 degrees and stays there beyond (a choice of this tool).

Where the water leaving starts from rest it must gather its whole velocity head in the chamber,
so k is ``bend_loss`` whatever the plan angle (a choice of this tool; strictly 1 plus an entrance
loss): at the head of a run or where no pipe brings water in, where the main pipe in drops into
the chamber (its invert at the node above the crown of the pipe leaving: a backdrop or a
cascade), and where the turn is unknown (a node without coordinates, two nodes at one place).
Laterals add no loss of their own (a choice of this tool: a lateral bringing a large share of
the flow in at a right angle would add to it), nor do bends drawn inside a pipe: its direction
is the chord from manhole to manhole, since sewers are laid straight between manholes (common
practice) and a chord is not thrown by a digitising kink beside a manhole (a choice of this
tool; a sewer laid on a curve turns by more at its manhole than its chord shows).

Values (from memory; local design manuals give tables): a benched straight-through manhole 0.1 to
0.2, a 45 degree bend about 0.5, a right-angle bend 1.0 and more where the benching is poor.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from audit.grade_line.order import joined_ranges

Array = NDArray[np.float64]
Index = NDArray[np.intp]
Flags = NDArray[np.bool_]


@dataclass(frozen=True)
class Turns:
    """Per pipe: the turn [degrees, 0 to 180] from the main pipe into its upstream node (NaN where
    no pipe brings water in or a direction is unknown), and whether the water leaving along it
    starts from rest (no water arriving, a drop into the chamber, or an unknown turn)."""

    angle: Array
    from_rest: Flags


def manhole_turns(upstream: Index, downstream: Index, flow: Array, x: Array, y: Array, *, up_invert: Array, down_invert: Array,
                  height: Array) -> Turns:  # fmt: skip
    """The turn of every pipe at its upstream node, and whether its water starts from rest there.

    Parameters
    ----------
    upstream, downstream : node index at each end of each pipe in flow direction (-1: not placed)
    flow : design flow per pipe [m^3/s]; a pipe with no positive flow (NaN, 0) brings no water in
    x, y : coordinates of every node [m]
    up_invert, down_invert : invert level at each end in flow direction [m] (NaN: unknown)
    height : internal height of each pipe [m]

    >>> # 0 -> 1 -> 2 turns right through 90 degrees at node 1; 3 -> 1 brings less water in
    >>> xy = np.array([[0.0, 0.0], [10.0, 0.0], [10.0, -10.0], [10.0, 10.0]])
    >>> level = np.full(3, 10.0)
    >>> turns = manhole_turns(np.array([0, 1, 3]), np.array([1, 2, 1]), np.array([0.2, 0.3, 0.1]), xy[:, 0], xy[:, 1],
    ...                       up_invert=level, down_invert=level, height=np.full(3, 0.3))
    >>> turns.angle.round(6).tolist(), turns.from_rest.tolist()
    ([nan, 90.0, nan], [True, False, True])
    """
    up, down = np.asarray(upstream, dtype=np.intp), np.asarray(downstream, dtype=np.intp)
    flow, x, y = (np.asarray(values, dtype=float) for values in (flow, x, y))
    up_invert, down_invert, height = (np.asarray(values, dtype=float) for values in (up_invert, down_invert, height))
    count = up.size
    placed = (up >= 0) & (down >= 0)
    dx = np.where(placed, x[np.maximum(down, 0)] - x[np.maximum(up, 0)], np.nan)
    dy = np.where(placed, y[np.maximum(down, 0)] - y[np.maximum(up, 0)], np.nan)
    with np.errstate(invalid="ignore", divide="ignore"):
        reach = np.hypot(dx, dy)
        ux, uy = np.where(reach > 0, dx / reach, np.nan), np.where(reach > 0, dy / reach, np.nan)
    # every (pipe in, pipe out) pair at a node, the pipes in that bring water, grouped by the pipe out
    wet = np.flatnonzero(placed & (np.nan_to_num(flow, nan=0.0) > 0))
    wet = wet[np.argsort(down[wet], kind="stable")]
    first = np.searchsorted(down[wet], np.arange(x.size + 1))
    leaving = np.flatnonzero(placed)
    starts, stops = first[up[leaving]], first[up[leaving] + 1]
    fed = stops > starts
    out_pipe, lengths = leaving[fed], (stops - starts)[fed]
    pair_in = wet[joined_ranges(starts[fed], stops[fed])]
    pair_out = np.repeat(out_pipe, lengths)
    group = np.cumsum(lengths) - lengths  # the first pair of each pipe out
    cosine = np.clip(ux[pair_in] * ux[pair_out] + uy[pair_in] * uy[pair_out], -1.0, 1.0)
    pair_angle = np.degrees(np.arccos(cosine))  # NaN where a direction is unknown
    angle = np.full(count, np.nan)
    rest = np.ones(count, dtype=bool)
    if out_pipe.size:
        # the main pipe in: the most flow; of equal flows the largest turn (NaN, unknown, the largest of all)
        most = np.maximum.reduceat(flow[pair_in], group)
        main = flow[pair_in] == np.repeat(most, lengths)
        turning = np.where(np.isnan(pair_angle), np.inf, pair_angle)
        widest = np.maximum.reduceat(np.where(main, turning, -np.inf), group)
        chosen = main & (turning == np.repeat(widest, lengths))
        with np.errstate(invalid="ignore"):
            drops = down_invert[pair_in] > up_invert[pair_out] + height[pair_out]
        dropping = np.maximum.reduceat((chosen & drops).astype(np.int8), group) > 0
        angle[out_pipe] = np.where(np.isfinite(widest), widest, np.nan)
        rest[out_pipe] = dropping | ~np.isfinite(widest)
    return Turns(angle, rest)


def loss_coefficients(turns: Turns, *, straight: float, right_angle: float) -> Array:
    """k per pipe: ``straight`` at a turn of 0, ``right_angle`` at 90 degrees and beyond, linear
    between; ``right_angle`` where the water starts from rest.

    >>> turns = Turns(np.array([0.0, 45.0, 90.0, 150.0, np.nan, 10.0]), np.array([False] * 4 + [True, True]))
    >>> loss_coefficients(turns, straight=0.15, right_angle=1.0).round(4).tolist()
    [0.15, 0.575, 1.0, 1.0, 1.0, 1.0]
    """
    share = np.clip(np.nan_to_num(turns.angle, nan=90.0), 0.0, 90.0) / 90.0
    return np.where(turns.from_rest, right_angle, straight + (right_angle - straight) * share)
