"""Design flows: hand-checked accumulation, given flows, splits and loops."""

import numpy as np
import pytest

from audit.findings import FindingLog
from audit.flows.carrier import Carrier, design_flows
from audit.network.graph import order_pipes


def flows_for(up: list[int], down: list[int], inflow: list[float], given: list[float] | None = None,
              length: list[float] | None = None, capacity: list[float] | None = None):  # type: ignore[no-untyped-def]
    upstream, downstream = np.array(up), np.array(down)
    order, _, group = order_pipes(upstream, downstream, node_count=len(inflow))
    carrier = Carrier.build(upstream=upstream, downstream=downstream, order=order, node_group=group, node_count=len(inflow),
                            capacity=None if capacity is None else np.array(capacity, dtype=float))  # fmt: skip
    log = FindingLog()
    result = design_flows(
        carrier,
        node_inflow=np.array(inflow, dtype=float),
        given_flow=np.full(len(up), np.nan) if given is None else np.array(given, dtype=float),
        length=np.ones(len(up)) if length is None else np.array(length, dtype=float),
        pipe_labels=np.array([f"P{i}" for i in range(len(up))], dtype=object),
        node_labels=np.array([f"N{i}" for i in range(len(inflow))], dtype=object),
        findings=log,
    )
    return result, log.to_frame()


def test_loads_add_up_down_a_small_tree() -> None:
    # Nodes 0 and 1 drain to 2, 2 and 3 drain to 4, 4 to the outfall 5; pipes listed out of order.
    # By hand: P(2->4) = 2 + 1 + 3 = 6; P(4->5) = 6 + 4 + 5 = 15.
    result, findings = flows_for([4, 0, 2, 1, 3], [5, 2, 4, 2, 4], [1.0, 3.0, 2.0, 4.0, 5.0, 0.0], length=[10, 20, 30, 40, 50])
    assert result.q_design.tolist() == [15.0, 1.0, 6.0, 3.0, 4.0]
    assert result.source.tolist() == ["accumulated"] * 5
    assert result.node_total.tolist() == [1.0, 3.0, 6.0, 4.0, 15.0, 15.0]
    # upstream length served: the pipe itself plus every pipe above it
    assert result.upstream_length.tolist() == [150.0, 20.0, 90.0, 40.0, 50.0]
    assert findings.empty


def test_a_given_flow_replaces_the_accumulated_one_and_is_carried_on() -> None:
    # chain 0 -> 1 -> 2 -> 3 with loads 1, 1, 1; the middle pipe has a given total of 10
    result, _ = flows_for([0, 1, 2], [1, 2, 3], [1.0, 1.0, 1.0, 0.0], given=[np.nan, 10.0, np.nan])
    assert result.q_design.tolist() == [1.0, 10.0, 11.0]
    assert result.source.tolist() == ["accumulated", "given", "accumulated"]


def test_a_bifurcation_splits_equally_and_is_reported() -> None:
    # node 0 (load 4) feeds two pipes to nodes 1 and 2, which both drain to 3; no capacities known
    result, findings = flows_for([0, 0, 1, 2], [1, 2, 3, 3], [4.0, 1.0, 0.0, 0.0])
    assert result.q_design.tolist() == [2.0, 2.0, 3.0, 2.0]
    assert result.node_total[3] == 5.0  # peak of the sum, nothing counted twice
    assert findings["code"].tolist() == ["flow_split"]
    assert findings["feature"].tolist() == ["N0"]
    assert findings["message"].iloc[0] == "2 pipes leave this node; its flow is split between them: P0 50 %, P1 50 %"


def test_a_bifurcation_splits_by_full_bore_capacity() -> None:
    # the same node 0 with a 1 m3/s pipe and a 3 m3/s pipe: a quarter and three quarters of 4
    result, findings = flows_for([0, 0, 1, 2], [1, 2, 3, 3], [4.0, 1.0, 0.0, 0.0], capacity=[1.0, 3.0, 5.0, 5.0])
    assert result.q_design.tolist() == [1.0, 3.0, 2.0, 3.0]
    assert result.node_total[3] == 5.0
    assert findings["message"].iloc[0] == "2 pipes leave this node; its flow is split between them: P0 25 %, P1 75 %"


def test_a_loop_passes_its_flow_on_and_its_pipes_carry_the_whole_of_it() -> None:
    # 0 -> 1, loop 1 -> 2 -> 1, then 2 -> 3 -> 4; a load of 1 at nodes 0 to 3.
    # By hand: 1 enters the loop, which adds 1 + 1: 3 leave it by P3; P4 carries 3 + 1 = 4.
    result, findings = flows_for([0, 1, 2, 2, 3], [1, 2, 1, 3, 4], [1.0, 1.0, 1.0, 1.0, 0.0], length=[10, 20, 30, 40, 50])
    assert result.q_design.tolist() == [1.0, 3.0, 3.0, 3.0, 4.0]
    assert result.source.tolist() == ["accumulated", "loop", "loop", "accumulated", "accumulated"]
    assert result.node_total.tolist() == [1.0, 3.0, 3.0, 4.0, 4.0]
    # the length served counts each pipe once: P3 serves P0, both loop pipes and itself
    assert result.upstream_length.tolist() == [10.0, 60.0, 60.0, 100.0, 150.0]
    loops = findings[findings["code"] == "loop_flow"]
    assert loops["feature"].tolist() == ["N1"]
    assert loops["message"].iloc[0].startswith("a loop of 2 nodes and 2 pipes")


def test_a_loop_with_two_exits_splits_by_capacity_and_a_self_loop_carries_nothing() -> None:
    # loop 0 -> 1 -> 0 with loads 2 and 2; exits 0 -> 2 (capacity 1) and 1 -> 3 (capacity 3);
    # node 3 has a self-loop P4 and drains on by P5 to 4.
    result, findings = flows_for([0, 1, 0, 1, 3, 3], [1, 0, 2, 3, 3, 4], [2.0, 2.0, 0.0, 0.0, 0.0],
                                 capacity=[9.0, 9.0, 1.0, 3.0, 9.0, 9.0])  # fmt: skip
    np.testing.assert_allclose(result.q_design, [4.0, 4.0, 1.0, 3.0, np.nan, 3.0])
    assert result.source.tolist() == ["loop", "loop", "accumulated", "accumulated", "self_loop", "accumulated"]
    assert findings.loc[findings["code"] == "flow_split", "message"].tolist() == [
        "2 pipes leave this node; its flow is split between them: P2 25 %, P3 75 %"
    ]


def test_unplaced_pipes_and_missing_loads() -> None:
    result, _ = flows_for([0, -1], [1, -1], [np.nan, 2.0])
    assert result.q_design[0] == 0.0
    assert result.source[0] == "accumulated"
    assert np.isnan(result.q_design[1])
    assert result.source[1] == "missing"


def test_a_random_tree_conserves_its_load() -> None:
    rng = np.random.default_rng(3)
    count = 20_000
    parent = (rng.random(count - 1) * np.arange(1, count)).astype(int)
    load = rng.random(count)
    result, _ = flows_for(list(np.arange(1, count)), list(parent), list(load))
    assert result.node_total[0] == pytest.approx(load.sum(), rel=1e-12)
    # every pipe carries its upstream node's load plus all loads above it
    children_sum = np.zeros(count)
    np.add.at(children_sum, parent, result.q_design)
    np.testing.assert_allclose(result.q_design, load[1:] + children_sum[1:], rtol=1e-12)
