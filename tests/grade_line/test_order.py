"""The order of the sweep: heights from the network's ends, directed cycles left out."""

from __future__ import annotations

import networkx as nx
import numpy as np
from hypothesis import given, settings
from hypothesis import strategies as st

from audit.grade_line.order import node_heights, sweep_order


def test_heights_count_the_most_pipes_to_an_end() -> None:
    # 4 -> 3 -> 1 -> 0, 2 -> 0, 5 -> 3
    upstream, downstream = np.array([4, 3, 1, 2, 5]), np.array([3, 1, 0, 0, 3])
    assert node_heights(upstream, downstream, 7).tolist() == [0, 1, 1, 2, 3, 3, -1]


def test_the_sweep_goes_level_by_level_from_the_ends() -> None:
    upstream, downstream = np.array([4, 3, 1, 2, 5]), np.array([3, 1, 0, 0, 3])
    order = sweep_order(upstream, downstream, 7, np.ones(5, dtype=bool))
    levels = [order.pipes[order.pipe_bounds[h] : order.pipe_bounds[h + 1]].tolist() for h in range(order.levels)]
    assert levels == [[2, 3], [1], [0, 4], []]
    nodes = [order.nodes[order.node_bounds[h] : order.node_bounds[h + 1]].tolist() for h in range(order.levels)]
    assert nodes == [[0], [1, 2], [3], [4, 5]]
    assert not order.on_cycle.any()


def test_pipes_left_out_or_not_placed_do_not_take_part() -> None:
    upstream, downstream = np.array([1, 2, -1, 3]), np.array([0, 1, 0, -1])
    order = sweep_order(upstream, downstream, 4, np.array([True, False, True, True]))
    assert order.pipes.tolist() == [0]
    assert order.nodes.tolist() == [0, 1]  # nodes 2 and 3 touch no swept pipe


def test_cycles_are_left_out_and_the_nodes_above_them_still_reached() -> None:
    # 5 -> 4 -> 1 -> 2 -> 3 -> 1 (a loop 1-2-3), 1 -> 0; a self loop at 6, 6 -> 0
    upstream = np.array([5, 4, 1, 2, 3, 1, 6, 6])
    downstream = np.array([4, 1, 2, 3, 1, 0, 6, 0])
    order = sweep_order(upstream, downstream, 7, np.ones(8, dtype=bool))
    assert order.on_cycle.tolist() == [False, False, True, True, True, False, True, False]
    assert sorted(order.pipes.tolist()) == [0, 1, 5, 7]
    assert {5, 4, 1, 0, 6} <= set(order.nodes.tolist())


def test_no_pipes_no_levels() -> None:
    order = sweep_order(np.zeros(0, dtype=np.intp), np.zeros(0, dtype=np.intp), 3, np.zeros(0, dtype=bool))
    assert order.levels == 0
    assert order.pipes.size == order.nodes.size == 0


@settings(max_examples=60, deadline=None)
@given(seed=st.integers(0, 2**32 - 1), nodes=st.integers(2, 30), pipes=st.integers(1, 60))
def test_every_pipe_comes_after_the_pipes_below_it_and_cycles_match_networkx(seed: int, nodes: int, pipes: int) -> None:
    rng = np.random.default_rng(seed)
    upstream, downstream = rng.integers(0, nodes, pipes), rng.integers(0, nodes, pipes)
    order = sweep_order(upstream, downstream, nodes, np.ones(pipes, dtype=bool))
    graph = nx.MultiDiGraph()
    graph.add_edges_from(zip(upstream.tolist(), downstream.tolist(), strict=True))
    component = {node: k for k, part in enumerate(nx.strongly_connected_components(graph)) for node in part}
    cyclic = [component[u] == component[d] for u, d in zip(upstream.tolist(), downstream.tolist(), strict=True)]
    assert order.on_cycle.tolist() == cyclic
    height = np.full(nodes, -1)
    for level in range(order.levels):
        height[order.nodes[order.node_bounds[level] : order.node_bounds[level + 1]]] = level
    swept = order.pipes
    assert sorted(swept.tolist()) == [p for p in range(pipes) if not cyclic[p]]
    assert np.all(height[upstream[swept]] > height[downstream[swept]])
