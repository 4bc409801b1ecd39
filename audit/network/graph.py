"""Graph questions on the integer arrays of a network: parts, cycles, order, outfalls, what lies upstream.

A network (:class:`Network`) is held as two int64 arrays, the upstream and downstream node of every pipe (-1 for a
pipe that is not placed). Every answer here is a handful of numpy / scipy.sparse operations over
all pipes; the topological order runs Kahn's algorithm one level at a time, so its Python loop
turns once per level of the network, never once per pipe.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd
from scipy.sparse import coo_matrix
from scipy.sparse.csgraph import breadth_first_order, connected_components


@dataclass(frozen=True, eq=False)
class Network:
    """A sewer network as integer arrays over pipe positions (0 .. n-1, in input order).

    Attributes
    ----------
    nodes : one row per node, columns ``NODE_COLUMNS``; manholes first (in layer order), then
        junctions; ``manhole_row`` is the row in the manhole layer, -1 for a junction
    upstream, downstream : int64 node index per pipe in flow direction; -1 for a pipe that
        could not be placed (no usable geometry and no known ids)
    reversed : bool per pipe, True where flow runs from the last vertex to the first
    order : int64 pipe positions, every pipe after all pipes upstream of it; pipes on cycles
        follow, then pipes that are not placed
    in_cycle : bool per pipe, True for a pipe on a directed cycle (a self loop included)
    component : int64 connected part per pipe (0 = the part with most pipes), -1 if not placed
    outfalls : int64 node indices that pipes flow into and that no pipe leaves
    direction : the direction rule that was applied (``"ids"``, ``"digitised"``, ``"inverts"``)
    node_group : int64 per node: the lowest node index of the strongly connected set of nodes
        (a loop) it lies in, else its own index; the flows stage carries loads through a loop
        as through one node
    left_out : bool per pipe kept out of the network on purpose (an abandoned pipe)
    """

    nodes: pd.DataFrame
    upstream: np.ndarray
    downstream: np.ndarray
    reversed: np.ndarray
    order: np.ndarray
    in_cycle: np.ndarray
    component: np.ndarray
    outfalls: np.ndarray
    direction: str
    node_group: np.ndarray
    left_out: np.ndarray


def _adjacency(upstream: np.ndarray, downstream: np.ndarray, node_count: int) -> coo_matrix:
    placed = (upstream >= 0) & (downstream >= 0)
    ones = np.ones(int(placed.sum()), dtype=np.int8)
    return coo_matrix((ones, (upstream[placed], downstream[placed])), shape=(node_count, node_count))


def pipe_components(upstream: np.ndarray, downstream: np.ndarray, *, node_count: int) -> np.ndarray:
    """Connected part of the network each pipe belongs to, ignoring flow direction.

    Parameters
    ----------
    upstream, downstream : int64 node index per pipe, -1 where the pipe is not placed
    node_count : number of nodes

    Returns
    -------
    int64 part number per pipe: 0 for the part with the most pipes, then 1, ... by falling size
    (ties by the first pipe); -1 for a pipe that is not placed

    Examples
    --------
    >>> pipe_components(np.array([0, 3, 1]), np.array([1, 4, 2]), node_count=5).tolist()
    [0, 1, 0]
    """
    _, node_label = connected_components(_adjacency(upstream, downstream, node_count), directed=False)
    placed = upstream >= 0
    part = np.full(len(upstream), -1, dtype=np.int64)
    labels, first, inverse, sizes = np.unique(
        node_label[upstream[placed]], return_index=True, return_inverse=True, return_counts=True
    )
    rank = np.empty(labels.size, dtype=np.int64)
    rank[np.lexsort((first, -sizes))] = np.arange(labels.size)
    part[placed] = rank[inverse.ravel()]
    return part


def _strong_labels(upstream: np.ndarray, downstream: np.ndarray, node_count: int) -> np.ndarray:
    _, strong = connected_components(
        _adjacency(upstream, downstream, node_count), directed=True, connection="strong"
    )
    return strong.astype(np.int64)


def _gather(starts: np.ndarray, stops: np.ndarray) -> np.ndarray:
    """Concatenate ``arange(start, stop)`` for every pair, without a Python loop."""
    counts = stops - starts
    offsets = np.repeat(starts - np.r_[0, np.cumsum(counts)[:-1]], counts)
    return offsets + np.arange(int(counts.sum()), dtype=np.int64)


def _kahn_levels(source: np.ndarray, target: np.ndarray, node_count: int) -> np.ndarray:
    """Positions of the edges of a directed acyclic graph, upstream first, level by level."""
    by_source = np.argsort(source, kind="stable")
    starts = np.searchsorted(source[by_source], np.arange(node_count + 1))
    waiting = np.bincount(target, minlength=node_count)
    ready = np.flatnonzero(waiting == 0)
    released: list[np.ndarray] = [np.zeros(0, dtype=np.int64)]
    while ready.size:
        edges = by_source[_gather(starts[ready], starts[ready + 1])]
        released.append(edges)
        reached, arrivals = np.unique(target[edges], return_counts=True)
        waiting[reached] -= arrivals
        ready = reached[waiting[reached] == 0]
    return np.concatenate(released)


def order_pipes(
    upstream: np.ndarray, downstream: np.ndarray, *, node_count: int
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Topological order of the pipes, which pipes lie on a directed cycle, and each node's loop.

    A pipe is on a cycle when both its ends fall in one strongly connected set of nodes (a
    pipe whose two ends are the same node is a cycle of one pipe). Every such set is merged into
    one node, which leaves a directed acyclic graph; Kahn's algorithm then releases its pipes one
    level at a time: a pipe goes once every pipe flowing into its upstream node has gone. So every
    pipe off a cycle comes after all pipes upstream of it, also through a loop. Pipes on cycles
    follow, then pipes that are not placed, each group in row order.

    Parameters
    ----------
    upstream, downstream : node index of each pipe's ends in flow direction (-1: not placed)
    node_count : how many nodes the indices refer to

    Returns
    -------
    order : int64 permutation of the pipe positions
    in_cycle : bool per pipe
    node_group : int64 per node, the lowest node index of its strongly connected set

    Examples
    --------
    >>> order, in_cycle, group = order_pipes(np.array([1, 0, 2, 3, 4]), np.array([2, 1, 3, 4, 3]),
    ...                                      node_count=5)
    >>> order.tolist(), in_cycle.tolist(), group.tolist()
    ([1, 0, 2, 3, 4], [False, False, False, True, True], [0, 1, 2, 3, 3])
    """
    strong = _strong_labels(upstream, downstream, node_count)
    placed = (upstream >= 0) & (downstream >= 0)
    in_cycle = np.zeros(len(upstream), dtype=bool)
    in_cycle[placed] = strong[upstream[placed]] == strong[downstream[placed]]
    acyclic = np.flatnonzero(placed & ~in_cycle)
    edges = _kahn_levels(strong[upstream[acyclic]], strong[downstream[acyclic]], node_count)
    rest = [np.flatnonzero(placed & in_cycle), np.flatnonzero(~placed)]
    lowest = np.full(node_count, node_count, dtype=np.int64)
    np.minimum.at(lowest, strong, np.arange(node_count, dtype=np.int64))
    return np.concatenate([acyclic[edges], *rest]).astype(np.int64), in_cycle, lowest[strong]


def outfall_nodes(upstream: np.ndarray, downstream: np.ndarray, *, node_count: int) -> np.ndarray:
    """Nodes that pipes flow into and that no pipe leaves.

    Examples
    --------
    >>> outfall_nodes(np.array([0, 1, 3]), np.array([1, 2, 2]), node_count=4).tolist()
    [2]
    """
    placed = (upstream >= 0) & (downstream >= 0)
    inflow = np.bincount(downstream[placed], minlength=node_count)
    outflow = np.bincount(upstream[placed], minlength=node_count)
    return np.flatnonzero((inflow > 0) & (outflow == 0)).astype(np.int64)


def nodes_upstream(starts: np.ndarray, upstream: np.ndarray, downstream: np.ndarray, *, node_count: int) -> np.ndarray:
    """Which nodes drain, through the placed pipes, to one of ``starts`` (the starts included), as a mask.

    One breadth-first search against the flow from a node added before every start
    (``scipy.sparse.csgraph.breadth_first_order``).

    Examples
    --------
    >>> nodes_upstream(np.array([1]), np.array([1, 2, 4]), np.array([0, 1, 3]), node_count=5).tolist()
    [False, True, True, False, False]
    """
    placed = (upstream >= 0) & (downstream >= 0)
    added = node_count
    rows = np.concatenate([downstream[placed], np.full(starts.size, added)])
    columns = np.concatenate([upstream[placed], starts])
    graph = coo_matrix((np.ones(rows.size, dtype=np.int8), (rows, columns)), shape=(node_count + 1, node_count + 1)).tocsr()
    reached = np.zeros(node_count + 1, dtype=bool)
    reached[breadth_first_order(graph, added, directed=True, return_predecessors=False)] = True
    return reached[:node_count]
