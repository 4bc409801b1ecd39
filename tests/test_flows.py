"""Design flows: hand-checked accumulation, given flows, splits and loops."""

import numpy as np
import pytest

from audit._graph import order_pipes
from audit.findings import FindingLog
from audit.flows import design_flows


def flows_for(up: list[int], down: list[int], inflow: list[float], given: list[float] | None = None, length: list[float] | None = None):  # type: ignore[no-untyped-def]
    upstream, downstream = np.array(up), np.array(down)
    order, in_cycle = order_pipes(upstream, downstream, node_count=len(inflow))
    log = FindingLog()
    result = design_flows(
        upstream=upstream,
        downstream=downstream,
        order=order,
        in_cycle=in_cycle,
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
    # node 0 (load 4) feeds two pipes to nodes 1 and 2, which both drain to 3
    result, findings = flows_for([0, 0, 1, 2], [1, 2, 3, 3], [4.0, 1.0, 0.0, 0.0])
    assert result.q_design.tolist() == [2.0, 2.0, 3.0, 2.0]
    assert result.node_total[3] == 5.0  # peak of the sum, nothing counted twice
    assert findings["code"].tolist() == ["flow_split"] and findings["feature"].tolist() == ["N0"]


def test_pipes_on_and_below_a_loop_get_no_flow_but_pipes_above_do() -> None:
    # 0 -> 1, loop 1 -> 2 -> 1, then 2 -> 3 -> 4
    result, findings = flows_for([0, 1, 2, 2, 3], [1, 2, 1, 3, 4], [1.0, 1.0, 1.0, 1.0, 0.0])
    assert result.q_design[0] == 1.0 and result.source[0] == "accumulated"
    assert np.isnan(result.q_design[1:]).all()
    assert result.source[1:].tolist() == ["cycle"] * 4
    assert set(findings.loc[findings["code"] == "flow_below_loop", "feature"]) == {"P3", "P4"}


def test_unplaced_pipes_and_missing_loads() -> None:
    result, _ = flows_for([0, -1], [1, -1], [np.nan, 2.0])
    assert result.q_design[0] == 0.0 and result.source[0] == "accumulated"
    assert np.isnan(result.q_design[1]) and result.source[1] == "missing"


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
