"""Design flows built from the catchment: parts, growth, given flows, outfalls, assumed loads, overflow pipes."""

import numpy as np
import pandas as pd
import shapely

from audit.findings import FindingLog
from audit.flows.building import built_flows
from audit.flows.settings import FlowOptions, Rainfall
from audit.hydraulics import Friction, PipeHydraulics, PipeSections
from audit.network.graph import Network, order_pipes


def _network(up: list[int], down: list[int], inflow: list[float]):  # type: ignore[no-untyped-def]
    upstream, downstream = np.array(up), np.array(down)
    order, in_cycle, group = order_pipes(upstream, downstream, node_count=len(inflow))
    count = len(inflow)
    nodes = pd.DataFrame({"node_id": [f"N{i}" for i in range(count)], "kind": "manhole", "manhole_row": np.arange(count),
                          "x": np.arange(count) * 50.0, "y": 0.0, "inflow": inflow})  # fmt: skip
    nodes["role"] = "manhole"
    return Network(nodes, upstream, downstream, np.zeros(len(up), bool), order, in_cycle, np.zeros(len(up), np.int64),
                   np.array([count - 1]), "ids", node_group=group, left_out=np.zeros(len(up), bool))  # fmt: skip


def _hydraulics(count: int):  # type: ignore[no-untyped-def]
    sections = PipeSections.from_names(np.full(count, "circular"), np.full(count, 0.3), np.full(count, 0.3))
    return PipeHydraulics(sections, np.full(count, 0.005), Friction.uniform("manning", 0.013, count), np.full(count, 100.0))


def test_built_sanitary_flows_grow_with_the_population_and_a_given_flow_wins_only_in_its_pipe() -> None:
    # chain N0 -> N1 -> N2 -> N3; 2000 persons at N0 and N1, 1 l/s inflow at N1; pipe 1 has a study flow of 9 l/s;
    # the population grows by half by the design horizon
    network = _network([0, 1, 2], [1, 2, 3], [0.0, 0.001, 0.0, 0.0])
    manholes = pd.DataFrame({"population": [2000.0, 2000.0, 0.0, 0.0], "point_load": [0.0, 0.0, 0.0, 0.0]})
    options = FlowOptions(kind="sanitary", per_capita_l_day=216.0, peaking="constant", peaking_factor=2.0,
                          infiltration_l_s_km=1.0, population_growth=1.5)  # fmt: skip
    log = FindingLog()
    flows = built_flows(network, manholes=manholes, catchments=None, given_flow=np.array([np.nan, 0.009, np.nan]), pipes=_hydraulics(3),
                        pipe_labels=np.array(["P0", "P1", "P2"], dtype=object), options=options, findings=log)  # fmt: skip
    assert flows.parts is not None
    # by hand: 3000 x 216 l/day = 7.5 l/s average, x 2 peaking = 15 l/s; 6000 persons give 30 l/s plus the
    # 1 l/s inflow, which does not grow with the population; nor does the infiltration
    np.testing.assert_allclose(flows.parts.q_sanitary, np.array([15.0, 31.0, 31.0]) * 1e-3)
    np.testing.assert_allclose(flows.parts.q_infiltration, np.array([0.1, 0.2, 0.3]) * 1e-3)  # 1 l/s per km of 100 m pipes
    np.testing.assert_allclose(flows.q_design, [15.1e-3, 0.009, 31.3e-3])
    assert flows.source.tolist() == ["accumulated", "given", "accumulated"]
    np.testing.assert_allclose(flows.node_total, [15.1e-3, 0.009, 31.3e-3, 31.3e-3])
    assert np.isnan(flows.parts.tc_min).all()
    assert flows.parts.population_served.tolist() == [3000.0, 6000.0, 6000.0]


def test_rainfall_uplift_and_urban_creep_raise_the_runoff() -> None:
    network = _network([0], [1], [0.0, 0.0])
    rainfall = Rainfall(table=((5.0, 72.0), (60.0, 72.0)), inlet_time_min=10.0, return_period_years=30.0)  # flat 72 mm/h, invented
    catchment = _catchments(["N0"], [0.0], [2.0]).assign(runoff_coefficient=np.nan, impervious_fraction=0.5)
    options = FlowOptions(kind="storm", rainfall=rainfall, rainfall_uplift=1.2, urban_creep=0.1)
    flows = built_flows(network, manholes=None, catchments=catchment, given_flow=np.full(1, np.nan), pipes=_hydraulics(1),
                        pipe_labels=np.array(["P0"], dtype=object), options=options, findings=FindingLog())  # fmt: skip
    # by hand: impervious 0.5 -> 0.55; C = 0.55 x 0.9 + 0.45 x 0.2 = 0.585; i = 1.2 x 72 = 86.4 mm/h;
    # Q = C i A / 360 = 0.585 x 86.4 x 2 / 360 (rational method; HEC-22, from memory)
    np.testing.assert_allclose(flows.q_design, [0.585 * 86.4 * 2 / 360])


def test_given_kind_keeps_the_flows_as_before() -> None:
    network = _network([0, 1], [1, 2], [0.002, 0.003, 0.0])
    flows = built_flows(network, manholes=None, catchments=None, given_flow=np.full(2, np.nan), pipes=_hydraulics(2),
                        pipe_labels=np.array(["P0", "P1"], dtype=object), options=FlowOptions(), findings=FindingLog())  # fmt: skip
    assert flows.parts is None
    np.testing.assert_allclose(flows.q_design, [0.002, 0.005])


def _catchments(outlets: list[str], population: list[float], area_ha: list[float]) -> pd.DataFrame:
    squares = [shapely.box(0, 0, 100, 100)] * len(outlets)
    return pd.DataFrame({"catchment_id": [f"C{i}" for i in range(len(outlets))], "drains_to": outlets, "population": population,
                         "dwellings": np.nan, "occupancy": np.nan, "area_ha": area_ha, "runoff_coefficient": 0.5,
                         "impervious_fraction": np.nan, "geometry": squares})  # fmt: skip


def test_a_catchment_draining_straight_to_an_outfall_is_counted_there() -> None:
    # chain N0 -> N1 -> N2 (the outfall); 1000 persons drain to N0 and 500 straight to N2
    network = _network([0, 1], [1, 2], [0.0, 0.0, 0.0])
    options = FlowOptions(kind="sanitary", per_capita_l_day=172.8, peaking="constant", peaking_factor=2.0)
    log = FindingLog()
    flows = built_flows(network, manholes=None, catchments=_catchments(["N0", "N2"], [1000.0, 500.0], [1.0, 1.0]),
                        given_flow=np.full(2, np.nan), pipes=_hydraulics(2), pipe_labels=np.array(["P0", "P1"], dtype=object),
                        options=options, findings=log)  # fmt: skip
    # by hand: 1000 x 172.8 l/day = 2 l/s, peaked x 2 = 4 l/s in both pipes; the outfall adds 500 persons: 2 l/s
    np.testing.assert_allclose(flows.q_design, [0.004, 0.004])
    np.testing.assert_allclose(flows.node_total, [0.004, 0.004, 0.006])
    found = log.to_frame()
    assert found[["feature", "code"]].values.tolist() == [["C1", "catchment_at_outfall"]]
    assert found["message"].iloc[0] == "drains straight to 'N2', which no pipe leaves; its flow is counted there"


def test_storm_runoff_straight_to_an_outfall_is_counted_at_the_inlet_time() -> None:
    network = _network([0], [1], [0.0, 0.0])
    rainfall = Rainfall(table=((5.0, 72.0), (60.0, 72.0)), inlet_time_min=10.0)  # a flat 72 mm/h, invented
    options = FlowOptions(kind="storm", rainfall=rainfall)
    flows = built_flows(network, manholes=None, catchments=_catchments(["N0", "N1"], [0.0, 0.0], [2.0, 1.0]),
                        given_flow=np.full(1, np.nan), pipes=_hydraulics(1), pipe_labels=np.array(["P0"], dtype=object),
                        options=options, findings=FindingLog())  # fmt: skip
    # Q = C i A / 360 (rational method, m3/s with i in mm/h and A in ha; HEC-22, from memory): 0.5 x 72 x 2 / 360 = 0.2
    np.testing.assert_allclose(flows.q_design, [0.2])
    np.testing.assert_allclose(flows.node_total, [0.2, 0.3])


def test_assumed_loads_screen_a_bare_register() -> None:
    # N0 -> N1 -> N2, 100 m pipes, no load fields at all: 40 persons per manhole, 100 persons per km,
    # and 0.5 l/s at every manhole
    network = _network([0, 1], [1, 2], [np.nan, np.nan, np.nan])
    options = FlowOptions(kind="sanitary", per_capita_l_day=216.0, peaking="constant", peaking_factor=1.0,
                          persons_per_manhole=40.0, persons_per_km=100.0, load_per_manhole_l_s=0.5)  # fmt: skip
    flows = built_flows(network, manholes=None, catchments=None, given_flow=np.full(2, np.nan), pipes=_hydraulics(2),
                        pipe_labels=np.array(["P0", "P1"], dtype=object), options=options, findings=FindingLog())  # fmt: skip
    assert flows.parts is not None
    # by hand: P0 serves 40 + 10 persons, P1 serves 2 x (40 + 10) = 100; 216 l/day per person = 0.0025 l/s
    np.testing.assert_allclose(flows.parts.population_served, [50.0, 100.0])
    np.testing.assert_allclose(flows.q_design, [50 * 0.0025e-3 + 0.5e-3, 100 * 0.0025e-3 + 1.0e-3])


def test_an_overflow_pipe_carries_no_design_flow_and_takes_no_share() -> None:
    # N0 (2 l/s) -> N1; at N1 the continuation P1 -> N2 and an overflow P2 -> N3
    network = _network([0, 1, 1], [1, 2, 3], [0.002, 0.0, 0.0, 0.0])
    flows = built_flows(network, manholes=None, catchments=None, given_flow=np.full(3, np.nan), pipes=_hydraulics(3),
                        pipe_labels=np.array(["P0", "P1", "P2"], dtype=object), options=FlowOptions(), findings=FindingLog(),
                        carries=np.array([True, True, False]))  # fmt: skip
    np.testing.assert_allclose(flows.q_design, [0.002, 0.002, 0.0])
    assert flows.source.tolist() == ["accumulated", "accumulated", "overflow"]
