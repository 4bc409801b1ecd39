"""The order of the sweep: levels of the network counted from its ends, and the cycles left out.

The hydraulic grade line is known at a node once every pipe leaving it is known, so the sweep
runs from the terminal nodes (no evaluated pipe leaves them) upstream. A node's *height* is the
most pipes on any path from it down to a terminal; a pipe's height is the height of its
downstream node. Kahn's algorithm on the reversed graph finds the heights one level at a time:
the Python loop turns once per level, and each turn is a few numpy calls over that level's
pipes (Kahn, A. B. (1962). Topological sorting of large networks. Comm. ACM 5, 558-562).

A pipe whose two ends lie in one strongly connected set of nodes lies on a directed cycle and
has no downstream end to start from: it is left out of the sweep (a self loop included). The
nodes on and above the cycle are still reached through their other pipes.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray
from scipy.sparse import csr_matrix
from scipy.sparse.csgraph import connected_components

Index = NDArray[np.intp]


@dataclass(frozen=True)
class SweepOrder:
    """Pipes and nodes grouped by height, lowest first.

    Attributes
    ----------
    pipes : pipe positions in sweep order (ascending height)
    pipe_bounds : pipes of height h are ``pipes[pipe_bounds[h]:pipe_bounds[h + 1]]``
    nodes : node positions in sweep order (ascending height); nodes that no swept pipe touches
        are left out
    node_bounds : nodes of height h are ``nodes[node_bounds[h]:node_bounds[h + 1]]``
    on_cycle : bool per pipe, True for a pipe left out because it lies on a directed cycle
    """

    pipes: Index
    pipe_bounds: Index
    nodes: Index
    node_bounds: Index
    on_cycle: NDArray[np.bool_]

    @property
    def levels(self) -> int:
        """How many heights there are (0 when no pipe is swept)."""
        return int(self.node_bounds.size - 1)


def joined_ranges(starts: Index, stops: Index) -> Index:
    """``arange(start, stop)`` for every pair, joined, without a Python loop per pair."""
    lengths = stops - starts
    ends = np.cumsum(lengths)
    return np.arange(int(ends[-1]) if ends.size else 0) + np.repeat(starts - ends + lengths, lengths)


def node_heights(upstream: Index, downstream: Index, node_count: int) -> NDArray[np.int64]:
    """Height of every node over the pipes given (-1: touched by none, or waiting on a cycle).

    >>> node_heights(np.array([0, 1, 3]), np.array([1, 2, 1]), 5).tolist()  # 0 -> 1 -> 2 <- ... 3 -> 1
    [2, 1, 0, 2, -1]
    """
    leaving = np.bincount(upstream, minlength=node_count)
    by_downstream = np.argsort(downstream, kind="stable")
    first = np.searchsorted(downstream[by_downstream], np.arange(node_count + 1))
    height = np.full(node_count, -1, dtype=np.int64)
    touched = np.zeros(node_count, dtype=bool)
    touched[upstream] = touched[downstream] = True
    front = np.flatnonzero(touched & (leaving == 0))
    level = 0
    while front.size:  # one turn per level of the network
        height[front] = level
        arriving = by_downstream[joined_ranges(first[front], first[front + 1])]
        sources, counts = np.unique(upstream[arriving], return_counts=True)
        leaving[sources] -= counts
        front = sources[leaving[sources] == 0]
        level += 1
    return height


def _cycle_pipes(upstream: Index, downstream: Index, node_count: int) -> NDArray[np.bool_]:
    """Per pipe given: True where both ends lie in one strongly connected set of nodes."""
    graph = csr_matrix((np.ones(upstream.size, dtype=np.int8), (upstream, downstream)), shape=(node_count, node_count))
    _, label = connected_components(graph, directed=True, connection="strong")
    return np.asarray(label[upstream] == label[downstream])


def sweep_order(upstream: Index, downstream: Index, node_count: int, take: NDArray[np.bool_]) -> SweepOrder:
    """Heights of the pipes ``take`` (both ends placed) and of their nodes, cycles left out.

    Parameters
    ----------
    upstream, downstream : node index of each pipe's ends in flow direction (-1: not placed)
    node_count : how many nodes the indices refer to
    take : bool per pipe, the pipes of the sweep

    Returns
    -------
    the :class:`SweepOrder`; a pipe on a directed cycle is in neither ``pipes`` nor, unless
    another swept pipe touches it, are its nodes in ``nodes``

    >>> # 0 -> 1 and 3 -> 1 drain into the loop 1 -> 2 -> 1, which is left out: node 1 ends them
    >>> order = sweep_order(np.array([0, 1, 2, 3]), np.array([1, 2, 1, 1]), 4, np.ones(4, dtype=bool))
    >>> order.pipes.tolist(), order.on_cycle.tolist(), order.levels
    ([0, 3], [False, True, True, False], 2)
    """
    take = take & (upstream >= 0) & (downstream >= 0)
    on_cycle = np.zeros(upstream.size, dtype=bool)
    chosen = np.flatnonzero(take)
    height = node_heights(upstream[chosen], downstream[chosen], node_count)
    waiting = chosen[height[downstream[chosen]] < 0]
    if waiting.size:  # some pipes wait on a cycle: find the cycles among them and leave them out
        on_cycle[waiting[_cycle_pipes(upstream[waiting], downstream[waiting], node_count)]] = True
        chosen = np.flatnonzero(take & ~on_cycle)
        height = node_heights(upstream[chosen], downstream[chosen], node_count)
    pipe_height = height[downstream[chosen]]
    by_height = np.argsort(pipe_height, kind="stable")
    levels = int(height.max(initial=-1)) + 1
    nodes = np.flatnonzero(height >= 0)
    nodes = nodes[np.argsort(height[nodes], kind="stable")]
    return SweepOrder(
        pipes=chosen[by_height],
        pipe_bounds=np.searchsorted(pipe_height[by_height], np.arange(levels + 1)),
        nodes=nodes,
        node_bounds=np.searchsorted(height[nodes], np.arange(levels + 1)),
        on_cycle=on_cycle,
    )
