r"""Design flows: given per pipe, or manhole loads accumulated down the network.

Each pipe's design flow is its given value where the register holds one (the pipe's total design
flow). Elsewhere it is the flow leaving its upstream node: that node's own inflow plus the flows
of every pipe entering it, so loads add up downstream. A node with several outgoing pipes (a
bifurcation, rare in a gravity tree) splits its flow equally between them and is reported. A
given flow replaces the accumulated flow in its pipe, and the pipes below carry the given value
on.

Pipes on a loop, and every pipe downstream of one, get no design flow (NaN, source ``cycle``):
a loop's flow cannot be summed without knowing how it divides, and a silent sum would be wrong.

The accumulation is one sparse triangular solve over all nodes in topological order: with
:math:`T` the flow leaving each node, :math:`b` the node inflows plus the given flows entering
each node, and :math:`W_{d,u}` the share of node u's flow that its pipe carries to node d,

.. math:: (I - W)\, T = b

Finding codes emitted: ``flow_split`` (a node with more than one outgoing pipe),
``flow_below_loop`` (pipes given no flow because a loop lies upstream).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import scipy.sparse as sparse
from numpy.typing import NDArray
from scipy.sparse.linalg import spsolve_triangular

from audit.findings import FindingLog

Array = NDArray[np.float64]
Index = NDArray[np.int64]

SOURCES = ("given", "accumulated", "missing", "cycle")


@dataclass(frozen=True)
class DesignFlows:
    """Per pipe: design flow [m^3/s] and its source; per node: the flow leaving it [m^3/s]."""

    q_design: Array
    source: NDArray[np.str_]
    node_total: Array
    upstream_length: Array  # this pipe and every pipe upstream of it [m]
    parts: FlowParts | None = None  # the parts of a flow built from the catchment, else None


@dataclass(frozen=True)
class FlowParts:
    """The parts of a design flow built from the catchment, per pipe (NaN where not built)."""

    q_sanitary: Array  # peaked domestic flow plus point loads and manhole inflows [m^3/s]
    q_infiltration: Array  # infiltration [m^3/s]
    q_storm: Array  # rational-method runoff [m^3/s]
    tc_min: Array  # time of concentration at the pipe's upstream end [min]
    population_served: Array  # persons upstream [-]
    area_served_ha: Array  # catchment area upstream [ha]
    iterations: int = 0  # passes of the time-of-concentration iteration (0 without storm)

    @property
    def total(self) -> Array:
        """Sum of the parts [m^3/s]; NaN in the pipes on or below a loop."""
        return self.q_sanitary + self.q_infiltration + self.q_storm


@dataclass(frozen=True)
class Carrier:
    """Carries node loads down a network once its split shares and loops are known.

    ``usable`` marks the pipes whose carried value is defined: placed, on no loop and with no
    loop upstream. Each call is one sparse triangular solve (:func:`accumulate`).
    """

    upstream: Index
    downstream: Index
    rank: Index
    weight: Array  # share of the upstream node's total each pipe carries; 0 on loops
    usable: NDArray[np.bool_]

    @classmethod
    def build(cls, *, upstream: Index, downstream: Index, order: Index, in_cycle: NDArray[np.bool_], node_count: int) -> Carrier:
        """Equal split at bifurcations, loops cut out, pipes below a loop marked unusable."""
        placed = (upstream >= 0) & (downstream >= 0)
        rank = node_rank(upstream, downstream, order, node_count=node_count)
        out_degree = np.bincount(upstream[placed], minlength=node_count)
        carries = placed & ~in_cycle
        weight = np.where(carries, 1.0 / np.maximum(out_degree[np.maximum(upstream, 0)], 1), 0.0)
        cycle_nodes = np.zeros(node_count)
        cycle_nodes[downstream[in_cycle & placed]] = 1.0
        below, _ = accumulate(upstream, downstream, rank, node_load=cycle_nodes, pipe_weight=carries.astype(float), pipe_offset=np.zeros(upstream.size))
        usable = carries & (below[np.maximum(upstream, 0)] == 0)
        return cls(upstream, downstream, rank, weight, usable)

    def carry(self, node_load: Array, pipe_load: Array | None = None) -> Array:
        """Per pipe, the sum of ``node_load`` (per node) and ``pipe_load`` (per pipe, its own
        included) upstream of it; NaN where not ``usable``. NaN loads count as zero."""
        offset = np.zeros(self.upstream.size) if pipe_load is None else np.where(self.weight > 0, np.nan_to_num(pipe_load), 0.0)
        _, carried = accumulate(self.upstream, self.downstream, self.rank, node_load=np.nan_to_num(node_load),
                                pipe_weight=np.where(self.weight > 0, self.weight, 0.0), pipe_offset=offset)  # fmt: skip
        return np.where(self.usable, carried, np.nan)


def node_rank(upstream: Index, downstream: Index, order: Index, *, node_count: int) -> Index:
    """A topological rank per node from the pipes' topological ``order``.

    A node ranks at the position of the first of its outgoing pipes in ``order``; nodes that no
    pipe leaves rank after all of them. Every pipe into a node precedes every pipe out of it, so
    an upstream node always ranks before the nodes below it.
    """
    position = np.empty(order.size, dtype=np.int64)
    position[order] = np.arange(order.size)
    rank = np.full(node_count, order.size, dtype=np.int64)
    placed = upstream >= 0
    np.minimum.at(rank, upstream[placed], position[placed])
    return rank


def accumulate(
    upstream: Index,
    downstream: Index,
    rank: Index,
    *,
    node_load: Array,
    pipe_weight: Array,
    pipe_offset: Array,
) -> tuple[Array, Array]:
    r"""Values carried down a directed acyclic network, for all nodes at once.

    Each pipe carries :math:`v_p = w_p T_{u(p)} + o_p` and each node passes on
    :math:`T_n = \ell_n + \sum_{p \to n} v_p`. Pipes with weight 0 and offset 0 carry nothing
    (use that to cut loops out). Solved as :math:`(I - W) T = \ell + \sum o` by one sparse
    triangular solve in the order ``rank``.

    Returns
    -------
    node total T per node, pipe value v per pipe (NaN for pipes that are not placed)

    >>> up, down = np.array([0, 1, 3]), np.array([1, 2, 1])
    >>> rank = np.array([0, 2, 3, 1])
    >>> total, carried = accumulate(up, down, rank, node_load=np.array([1.0, 2.0, 0.0, 4.0]),
    ...                             pipe_weight=np.ones(3), pipe_offset=np.zeros(3))
    >>> total.tolist(), carried.tolist()
    ([1.0, 7.0, 7.0, 4.0], [1.0, 7.0, 4.0])
    """
    count = node_load.size
    placed = (upstream >= 0) & (downstream >= 0)
    position = np.empty(count, dtype=np.int64)
    position[np.argsort(rank, kind="stable")] = np.arange(count)
    rows, cols = position[downstream[placed]], position[upstream[placed]]
    linked = pipe_weight[placed] != 0.0  # pipes that carry nothing from upstream stay out
    coupling = sparse.csr_matrix((pipe_weight[placed][linked], (rows[linked], cols[linked])), shape=(count, count))
    system = (sparse.identity(count, format="csr") - coupling).tocsr()
    load = np.zeros(count)
    load[position] = node_load
    np.add.at(load, rows, pipe_offset[placed])
    solved = spsolve_triangular(system, load, lower=True, unit_diagonal=True)
    total = solved[position]
    carried = np.full(upstream.size, np.nan)
    carried[placed] = pipe_weight[placed] * total[upstream[placed]] + pipe_offset[placed]
    return total, carried


def design_flows(
    *,
    upstream: Index,
    downstream: Index,
    order: Index,
    in_cycle: NDArray[np.bool_],
    node_inflow: Array,
    given_flow: Array,
    length: Array,
    pipe_labels: NDArray[np.object_],
    node_labels: NDArray[np.object_],
    findings: FindingLog,
    carrier: Carrier | None = None,
) -> DesignFlows:
    """Design flow per pipe from given flows and manhole inflows [m^3/s].

    ``node_inflow`` NaN counts as no load. ``carrier``, when the caller has built it for the
    same network, saves building it again. Returns the flows, their source, the flow leaving
    each node, and each pipe's upstream length served [m].
    """
    node_count = node_inflow.size
    if carrier is None:
        carrier = Carrier.build(upstream=upstream, downstream=downstream, order=order, in_cycle=in_cycle, node_count=node_count)
    placed = (upstream >= 0) & (downstream >= 0)
    carries = carrier.weight > 0  # placed and on no loop
    out_degree = np.bincount(upstream[placed], minlength=node_count)
    given = np.isfinite(given_flow) & (given_flow >= 0) & ~in_cycle
    weight = np.where(given, 0.0, carrier.weight)
    offset = np.where(carries & given, given_flow, 0.0)
    load = np.nan_to_num(node_inflow, nan=0.0)
    node_total, q_design = accumulate(upstream, downstream, carrier.rank, node_load=load, pipe_weight=weight, pipe_offset=offset)
    tainted = carries & ~given & ~carrier.usable  # a loop lies upstream
    _, upstream_length = accumulate(
        upstream, downstream, carrier.rank, node_load=np.zeros(node_count), pipe_weight=carries.astype(float), pipe_offset=np.where(carries, np.nan_to_num(length), 0.0)
    )

    source = np.where(given, "given", "accumulated").astype("<U11")
    source[~placed & ~given] = "missing"
    source[in_cycle | tainted] = "cycle"
    q_design = np.where(source == "given", given_flow, q_design)
    q_design[(source == "cycle") | (source == "missing")] = np.nan
    upstream_length[~carries] = np.nan
    _report(findings, out_degree, node_labels, tainted, pipe_labels)
    return DesignFlows(q_design, source, node_total, upstream_length)


def _report(findings: FindingLog, out_degree: Index, node_labels: NDArray[np.object_], tainted: NDArray[np.bool_], pipe_labels: NDArray[np.object_]) -> None:
    """Findings for split nodes and for pipes left without a flow below a loop."""
    split = np.flatnonzero(out_degree > 1)
    if split.size:
        messages = [f"{count} pipes leave this node; its flow is split equally between them" for count in out_degree[split]]
        findings.add_many("network", node_labels[split], "flow_split", messages)
    if tainted.any():
        findings.add_many("pipes", pipe_labels[tainted], "flow_below_loop", "no design flow: a loop upstream makes the accumulated flow unknown")
