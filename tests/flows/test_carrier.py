"""Design flows: hand-checked accumulation, given flows, splits and loops."""

import numpy as np
import pandas as pd
import pytest

from audit.findings import FindingLog
from audit.flows.carrier import design_flows
from audit.network.graph import order_pipes


def flows_for(up: list[int], down: list[int], inflow: list[float], given: list[float] | None = None, length: list[float] | None = None):  # type: ignore[no-untyped-def]
    upstream, downstream = np.array(up), np.array(down)
    order, in_cycle, _ = order_pipes(upstream, downstream, node_count=len(inflow))
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
    assert findings["code"].tolist() == ["flow_split"]
    assert findings["feature"].tolist() == ["N0"]


def test_pipes_on_and_below_a_loop_get_no_flow_but_pipes_above_do() -> None:
    # 0 -> 1, loop 1 -> 2 -> 1, then 2 -> 3 -> 4
    result, findings = flows_for([0, 1, 2, 2, 3], [1, 2, 1, 3, 4], [1.0, 1.0, 1.0, 1.0, 0.0])
    assert result.q_design[0] == 1.0
    assert result.source[0] == "accumulated"
    assert np.isnan(result.q_design[1:]).all()
    assert result.source[1:].tolist() == ["cycle"] * 4
    assert set(findings.loc[findings["code"] == "flow_below_loop", "feature"]) == {"P3", "P4"}


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


def _network(up: list[int], down: list[int], inflow: list[float]):  # type: ignore[no-untyped-def]
    from audit.network.build import Network

    upstream, downstream = np.array(up), np.array(down)
    order, in_cycle, group = order_pipes(upstream, downstream, node_count=len(inflow))
    count = len(inflow)
    nodes = pd.DataFrame({"node_id": [f"N{i}" for i in range(count)], "kind": "manhole", "manhole_row": np.arange(count),
                          "x": np.arange(count) * 50.0, "y": 0.0, "inflow": inflow})  # fmt: skip
    return Network(nodes, upstream, downstream, np.zeros(len(up), bool), order, in_cycle, np.zeros(len(up), np.int64),
                   np.array([count - 1]), "ids", node_group=group, left_out=np.zeros(len(up), bool))  # fmt: skip


def _hydraulics(count: int):  # type: ignore[no-untyped-def]
    from audit.flows.storm import PipeHydraulics
    from audit.hydraulics.friction import Friction
    from audit.hydraulics.sections import PipeSections

    sections = PipeSections.from_names(np.full(count, "circular"), np.full(count, 0.3), np.full(count, 0.3))
    return PipeHydraulics(sections, np.full(count, 0.005), Friction.uniform("manning", 0.013, count), np.full(count, 100.0))


def test_built_sanitary_flows_scale_by_growth_and_a_given_flow_wins_only_in_its_pipe() -> None:
    from audit.flows.building import built_flows
    from audit.flows.settings import FlowOptions

    # chain N0 -> N1 -> N2 -> N3; 2000 persons at N0 and N1, 1 l/s inflow at N1; pipe 1 has a study flow of 9 l/s
    network = _network([0, 1, 2], [1, 2, 3], [0.0, 0.001, 0.0, 0.0])
    manholes = pd.DataFrame({"population": [2000.0, 2000.0, 0.0, 0.0], "point_load": [0.0, 0.0, 0.0, 0.0]})
    options = FlowOptions(kind="sanitary", per_capita_l_day=216.0, peaking="constant", peaking_factor=2.0,
                          infiltration_l_s_km=1.0, growth_factor=1.5)  # fmt: skip
    log = FindingLog()
    flows = built_flows(network, manholes=manholes, catchments=None, given_flow=np.array([np.nan, 0.009, np.nan]), pipes=_hydraulics(3),
                        pipe_labels=np.array(["P0", "P1", "P2"], dtype=object), options=options, findings=log)  # fmt: skip
    assert flows.parts is not None
    # by hand: 2000 x 216 l/day = 5 l/s average, x 2 peaking = 10 l/s; 4000 persons give 20 l/s plus the 1 l/s inflow
    np.testing.assert_allclose(flows.parts.q_sanitary, np.array([10.0, 21.0, 21.0]) * 1.5e-3)
    np.testing.assert_allclose(flows.parts.q_infiltration, np.array([0.1, 0.2, 0.3]) * 1.5e-3)  # 1 l/s per km of 100 m pipes
    np.testing.assert_allclose(flows.q_design, [15.15e-3, 0.009, 31.95e-3])
    assert flows.source.tolist() == ["accumulated", "given", "accumulated"]
    np.testing.assert_allclose(flows.node_total, [15.15e-3, 0.009, 31.95e-3, 31.95e-3])
    assert np.isnan(flows.parts.tc_min).all()
    assert flows.parts.population_served.tolist() == [2000.0, 4000.0, 4000.0]


def test_given_kind_keeps_the_flows_as_before() -> None:
    from audit.flows.building import built_flows
    from audit.flows.settings import FlowOptions

    network = _network([0, 1], [1, 2], [0.002, 0.003, 0.0])
    flows = built_flows(network, manholes=None, catchments=None, given_flow=np.full(2, np.nan), pipes=_hydraulics(2),
                        pipe_labels=np.array(["P0", "P1"], dtype=object), options=FlowOptions(), findings=FindingLog())  # fmt: skip
    assert flows.parts is None
    np.testing.assert_allclose(flows.q_design, [0.002, 0.005])
