r"""Design flows: given per pipe, or manhole loads accumulated down the network.

Each pipe's design flow is its given value where the register holds one (the pipe's total design
flow). Elsewhere it is the flow leaving its upstream node: that node's own inflow plus the flows
of every pipe entering it, so loads add up downstream. A given flow replaces the accumulated flow
in its pipe, and the pipes below carry the given value on.

A node with several outgoing pipes (a bifurcation, rare in a gravity tree) splits its flow
between them in proportion to their full-bore capacities, where every one of them has a known
capacity, else equally; either way it is reported. Overflow pipes carry no design flow: they
spill only above it.

Loops (a real interconnection, or a register error) do not stop the flow. The nodes of one
strongly connected set are carried as one node: the flow entering the loop, with the loads of
its own nodes, leaves it by the pipes that leave it, split as at a bifurcation. A pipe on the
loop is given the whole flow passing through the loop, an upper bound (how the flow divides
around a loop is unknown), with source ``loop``. A pipe whose two ends are one node (a
self-loop) carries nothing and is left out of the flow graph (source ``self_loop``).

The accumulation is one sparse triangular solve over all nodes in topological order: with
:math:`T` the flow leaving each node, :math:`b` the node inflows plus the given flows entering
each node, and :math:`W_{d,u}` the share of node u's flow that its pipe carries to node d,

.. math:: (I - W)\, T = b

Finding codes emitted: ``flow_split`` (a node or loop with more than one outgoing pipe),
``loop_flow`` (per loop: its pipes carry an upper bound).
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

SOURCES = ("given", "accumulated", "loop", "self_loop", "overflow", "missing", "left_out")
"""Where a design flow comes from: a given value, the loads carried down, the flow through a loop
(an upper bound), none (a self-loop, an overflow pipe), no place in the network (``missing``:
unplaced, ``left_out``: abandoned)."""


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
    q_sanitary_average: Array | None = None  # q_sanitary unpeaked [m^3/s]

    def dry_weather(self, which: str) -> Array:
        """The dry-weather flow [m^3/s]: the sanitary part with infiltration, at its daily ``peak`` or its ``average``."""
        sanitary = self.q_sanitary if which == "peak" or self.q_sanitary_average is None else self.q_sanitary_average
        return sanitary + self.q_infiltration

    @property
    def total(self) -> Array:
        """Sum of the parts [m^3/s]; NaN in the pipes that carry nothing."""
        return self.q_sanitary + self.q_infiltration + self.q_storm


@dataclass(frozen=True)
class Carrier:
    """Carries node loads down a network once its loops, splits and carrying pipes are known.

    Nodes are carried by their loop group (``Network.node_group``): ``group_up`` and
    ``group_down`` are the groups at a pipe's ends, -1 for a pipe that carries nothing between
    groups. ``between`` pipes link two groups and carry ``share`` of their upstream group's
    total; ``on_loop`` pipes lie inside a group of several nodes and are given its whole total.
    ``usable`` = between or on a loop. Each call is one sparse triangular solve
    (:func:`accumulate`).
    """

    upstream: Index
    downstream: Index
    node_group: Index
    group_up: Index
    group_down: Index
    rank: Index
    share: Array
    between: NDArray[np.bool_]
    on_loop: NDArray[np.bool_]
    self_loop: NDArray[np.bool_]

    @classmethod
    def build(cls, *, upstream: Index, downstream: Index, order: Index, node_group: Index, node_count: int,
              capacity: Array | None = None, carries: NDArray[np.bool_] | None = None) -> Carrier:  # fmt: skip
        """Shares at splits by full-bore capacity (equal where one is unknown), loops as one node.

        Parameters
        ----------
        upstream, downstream : node per pipe in flow direction, -1 where not placed
        order : the network's topological pipe order (``Network.order``)
        node_group : loop group per node (``Network.node_group``)
        node_count : number of nodes
        capacity : full-bore capacity per pipe [m^3/s] for the shares at a split; None: equal shares
        carries : pipes that may carry flow at all (False for overflow pipes); None: every pipe
        """
        placed = (upstream >= 0) & (downstream >= 0)
        carrying = placed if carries is None else placed & np.asarray(carries, dtype=bool)
        group = np.asarray(node_group, dtype=np.int64)
        up_group = np.where(placed, group[np.maximum(upstream, 0)], -1)
        down_group = np.where(placed, group[np.maximum(downstream, 0)], -1)
        self_loop = placed & (upstream == downstream)
        between = carrying & (up_group != down_group)
        on_loop = carrying & (up_group == down_group) & ~self_loop
        group_up, group_down = np.where(between, up_group, -1), np.where(between, down_group, -1)
        rank = node_rank(group_up, group_down, order, node_count=node_count)
        share = split_shares(group_up, node_count=node_count, capacity=capacity)
        return cls(upstream, downstream, group, group_up, group_down, rank, share, between, on_loop, self_loop)

    @property
    def usable(self) -> NDArray[np.bool_]:
        """Pipes whose carried value is defined: between loop groups, or on a loop."""
        return self.between | self.on_loop

    def through(self, node_load: Array, pipe_load: Array | None = None, *, split: bool = True) -> tuple[Array, Array]:
        """The total leaving every node, and the value every pipe carries, for one set of loads.

        ``node_load`` per node and ``pipe_load`` per pipe (its own value included in what it
        carries; NaN counts as zero). ``split`` False carries every total whole down every pipe
        (a sum over everything upstream, such as the length served). A pipe on a loop carries the
        total passing through its loop; pipes that carry nothing get NaN.
        """
        load = np.bincount(self.node_group, weights=np.nan_to_num(node_load), minlength=self.node_group.size).astype(float)
        own = np.zeros(self.upstream.size) if pipe_load is None else np.nan_to_num(pipe_load)
        np.add.at(load, self.node_group[self.upstream[self.on_loop]], own[self.on_loop])  # a loop's own pipes load the loop
        weight = np.where(self.between, self.share if split else 1.0, 0.0)
        total, carried = accumulate(self.group_up, self.group_down, self.rank, node_load=load, pipe_weight=weight,
                                    pipe_offset=np.where(self.between, own, 0.0))  # fmt: skip
        carried[self.on_loop] = total[self.node_group[self.upstream[self.on_loop]]]
        return total[self.node_group], np.where(self.usable, carried, np.nan)

    def carry(self, node_load: Array, pipe_load: Array | None = None) -> Array:
        """Per pipe, the sum of ``node_load`` and ``pipe_load`` upstream of it, split at bifurcations."""
        return self.through(node_load, pipe_load)[1]


def split_shares(group_up: Index, *, node_count: int, capacity: Array | None) -> Array:
    r"""Share of its upstream node's total each pipe carries: by full-bore capacity, else equal.

    .. math:: w_p = \frac{Q_{f,p}}{\sum_{q \in out(u)} Q_{f,q}}

    over the pipes ``q`` leaving the same node ``u``; equal shares :math:`1 / n_{out}` at a node
    where any of its outgoing pipes has no positive finite capacity. ``group_up`` is -1 for
    pipes that carry nothing.

    Examples
    --------
    >>> split_shares(np.array([0, 0, 1, 2, 2]), node_count=3, capacity=np.array([1.0, 3.0, 2.0, 5.0, np.nan])).tolist()
    [0.25, 0.75, 1.0, 0.5, 0.5]
    """
    leaving = group_up >= 0
    node = np.maximum(group_up, 0)
    count = np.bincount(group_up[leaving], minlength=node_count)
    equal = np.where(leaving, 1.0 / np.maximum(count[node], 1), 0.0)
    if capacity is None:
        return equal
    known = leaving & np.isfinite(capacity) & (capacity > 0)
    all_known = np.bincount(group_up[leaving], weights=known[leaving].astype(float), minlength=node_count) == count
    total = np.bincount(group_up[known], weights=capacity[known], minlength=node_count)
    with np.errstate(invalid="ignore", divide="ignore"):
        by_capacity = np.where(known, capacity / total[node], 0.0)
    return np.where(leaving & all_known[node], by_capacity, equal)


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
    carrier: Carrier,
    *,
    node_inflow: Array,
    given_flow: Array,
    length: Array,
    left_out: NDArray[np.bool_] | None = None,
    pipe_labels: NDArray[np.object_],
    node_labels: NDArray[np.object_],
    findings: FindingLog,
) -> DesignFlows:
    """Design flow per pipe from given flows and manhole inflows [m^3/s].

    ``node_inflow`` NaN counts as no load; ``given_flow`` NaN where none. Returns the flows, their
    source (``SOURCES``), the flow leaving each node, and each pipe's upstream length served [m].
    """
    given = np.isfinite(given_flow) & (given_flow >= 0) & carrier.usable
    # a given flow replaces the carried one in its pipe and goes on downstream in its place
    replaced = Carrier(carrier.upstream, carrier.downstream, carrier.node_group, carrier.group_up, carrier.group_down,
                       carrier.rank, np.where(given, 0.0, carrier.share), carrier.between, carrier.on_loop, carrier.self_loop)  # fmt: skip
    node_total, q_design = replaced.through(node_inflow, np.where(given & carrier.between, given_flow, 0.0))
    _, upstream_length = carrier.through(np.zeros(node_inflow.size), length, split=False)
    source = flow_sources(carrier, left_out=left_out)
    source[given] = "given"
    q_design = np.where(given, given_flow, q_design)
    q_design[source == "overflow"] = 0.0
    report_flow_paths(carrier, pipe_labels=pipe_labels, node_labels=node_labels, findings=findings)
    return DesignFlows(q_design, source, node_total, upstream_length)


def flow_sources(carrier: Carrier, *, left_out: NDArray[np.bool_] | None = None) -> NDArray[np.str_]:
    """Where each pipe's flow comes from, before given flows: accumulated, loop, self_loop, overflow, missing, left_out."""
    placed = (carrier.upstream >= 0) & (carrier.downstream >= 0)
    source = np.full(carrier.upstream.size, "accumulated", dtype="<U11")
    source[carrier.on_loop] = "loop"
    source[placed & ~carrier.usable] = "overflow"
    source[carrier.self_loop] = "self_loop"
    source[~placed] = "missing"
    if left_out is not None:
        source[left_out] = "left_out"
    return source


def report_flow_paths(carrier: Carrier, *, pipe_labels: NDArray[np.object_], node_labels: NDArray[np.object_], findings: FindingLog) -> None:
    """``flow_split`` per node or loop that more than one pipe leaves; ``loop_flow`` per loop."""
    leaving = carrier.group_up[carrier.between]
    count = np.bincount(leaving, minlength=carrier.node_group.size)
    split = np.flatnonzero(count > 1)
    if split.size:
        pipes = np.flatnonzero(carrier.between & np.isin(carrier.group_up, split))
        pipes = pipes[np.argsort(carrier.group_up[pipes], kind="stable")]
        shares: dict[int, list[str]] = {int(group): [] for group in split}
        for pipe in pipes:  # one entry per pipe that leaves a split: a handful in a gravity network
            shares[int(carrier.group_up[pipe])].append(f"{pipe_labels[pipe]} {100 * carrier.share[pipe]:.0f} %")
        messages = [f"{count[group]} pipes leave this node; its flow is split between them: {', '.join(shares[int(group)])}"
                    for group in split]  # fmt: skip
        findings.add_many("network", node_labels[split], "flow_split", messages)
    loop_pipes = np.flatnonzero(carrier.on_loop)
    if loop_pipes.size:
        groups, pipes_per_loop = np.unique(carrier.node_group[carrier.upstream[loop_pipes]], return_counts=True)
        members = np.bincount(carrier.node_group, minlength=carrier.node_group.size)[groups]
        messages = [f"a loop of {nodes} nodes and {pipes} pipes: the flow entering it, with its own loads, leaves by the pipes "
                    "leaving it; each pipe on it is given the whole flow through the loop, an upper bound"
                    for nodes, pipes in zip(members, pipes_per_loop, strict=True)]  # fmt: skip
        findings.add_many("network", node_labels[groups], "loop_flow", messages)
