"""Sanitary loads: peaking formulas at published points, peak of the sum, accumulation by hand."""

from __future__ import annotations

import geopandas as gpd
import numpy as np
import pandas as pd
import pytest
import shapely

from audit.findings import FindingLog
from audit.flows.carrier import Carrier
from audit.flows.sanitary import (
    babbitt_peaking,
    catchment_outlets,
    harmon_peaking,
    node_loads,
    peaking_factor,
    sanitary_flows,  # fmt: skip
)
from audit.flows.settings import FlowOptions

DAY = 86_400.0


@pytest.mark.parametrize(
    ("persons", "expected"),
    [
        # Source: Harmon's formula as given in Metcalf & Eddy, Wastewater Engineering (from memory);
        # the values are the formula's published evaluation points, worked by hand here.
        (1_000, 3.8),  # 1 + 14 / (4 + 1)
        (16_000, 2.75),  # 1 + 14 / (4 + 4)
        (100_000, 2.0),  # 1 + 14 / (4 + 10)
        (1_000_000, 1 + 14 / (4 + 1000**0.5)),  # about 1.39, the large-city end of the curve
    ],
)
def test_harmon_at_published_points(persons: float, expected: float) -> None:
    assert float(harmon_peaking(persons)) == pytest.approx(expected, rel=1e-12)


@pytest.mark.parametrize(
    ("persons", "expected"),
    [
        # Source: Babbitt's formula PF = 5 / P^0.2, P in thousands, Metcalf & Eddy (from memory).
        (1_000, 5.0),
        (32_000, 2.5),  # 32^0.2 = 2 exactly
        (100_000, 5 / 100**0.2),  # about 1.99
    ],
)
def test_babbitt_at_published_points(persons: float, expected: float) -> None:
    assert float(babbitt_peaking(persons)) == pytest.approx(expected, rel=1e-12)


def test_peaking_caps_constant_and_table() -> None:
    harmon = FlowOptions(peaking="harmon")
    assert peaking_factor([10.0, 0.0], options=harmon).tolist() == pytest.approx([3.8, 3.8])  # held at 1000 persons
    assert float(peaking_factor([500.0], options=FlowOptions(peaking="babbitt", min_peaking_population=0.0))[0]) == pytest.approx(5 / 0.5**0.2)
    assert peaking_factor([5.0, 5e6], options=FlowOptions(peaking="constant", peaking_factor=2.5)).tolist() == [2.5, 2.5]
    table = FlowOptions(peaking="table", peaking_table=((1000.0, 4.0), (11000.0, 2.0)))
    assert peaking_factor([0.0, 6000.0, 50_000.0], options=table).tolist() == pytest.approx([4.0, 3.0, 2.0])


def _tree() -> Carrier:
    """Pipes a: node 0 -> 2, b: 1 -> 2, c: 2 -> 3 (the outfall)."""
    upstream, downstream = np.array([0, 1, 2]), np.array([2, 2, 3])
    return Carrier.build(upstream=upstream, downstream=downstream, order=np.array([0, 1, 2]),
                         node_group=np.arange(4), node_count=4)  # fmt: skip


def _nodes(inflow: list[float]) -> pd.DataFrame:
    return pd.DataFrame({"node_id": ["A", "B", "C", "OUT"], "manhole_row": [0, 1, 2, 3], "inflow": inflow,
                         "x": [0.0, 0.0, 50.0, 100.0], "y": [20.0, -20.0, 0.0, 0.0]})  # fmt: skip


def _manholes(population: list[float], point_load: list[float]) -> pd.DataFrame:
    return pd.DataFrame({"population": population, "point_load": point_load})


def test_sanitary_flow_of_a_small_tree_by_hand() -> None:
    options = FlowOptions(kind="sanitary", per_capita_l_day=200.0, peaking="harmon", infiltration_l_s_km=0.5)
    findings = FindingLog()
    loads = node_loads(_nodes([0.0, 0.0, 0.001, 0.0]), _manholes([4000, 12000, 0, 0], [0.0, 0.002, 0.0, 0.0]),
                       None, options=options, findings=findings)  # fmt: skip
    flows = sanitary_flows(_tree(), loads, length=np.array([100.0, 300.0, 600.0]), options=options)
    # by hand: pipe a serves 4000 persons, b 12000, c all 16000 (Harmon: 1 + 14/6, 1 + 14/(4 + sqrt 12), 2.75)
    average = np.array([4000, 12000, 16000]) * 200e-3 / DAY
    peak = np.array([1 + 14 / 6, 1 + 14 / (4 + 12**0.5), 2.75]) * average
    point = np.array([0.0, 0.002, 0.003])  # b's trade load 2 l/s; c adds the 1 l/s inflow at C
    np.testing.assert_allclose(flows.population_served, [4000, 12000, 16000])
    np.testing.assert_allclose(flows.q_sanitary, peak + point, rtol=1e-12)
    np.testing.assert_allclose(flows.q_infiltration, np.array([0.1, 0.3, 1.0]) * 0.5e-3, rtol=1e-12)
    assert len(findings) == 0


def test_peak_of_the_sum_not_the_sum_of_peaks() -> None:
    options = FlowOptions(kind="sanitary", per_capita_l_day=250.0, peaking="babbitt")
    loads = node_loads(_nodes([0.0] * 4), _manholes([5000, 5000, 0, 0], [0.0] * 4), None, options=options, findings=FindingLog())
    flows = sanitary_flows(_tree(), loads, length=np.full(3, np.nan), options=options)
    each = 5 / 5**0.2 * 5000 * 0.25 / DAY  # Babbitt at 5000 persons, worked by hand
    whole = 5 / 10**0.2 * 10000 * 0.25 / DAY  # Babbitt at the 10000 persons of the trunk
    np.testing.assert_allclose(flows.q_sanitary, [each, each, whole], rtol=1e-12)
    assert flows.q_sanitary[2] < flows.q_sanitary[0] + flows.q_sanitary[1]


def test_storm_sewer_keeps_only_point_loads() -> None:
    options = FlowOptions(kind="storm", infiltration_l_s_km=1.0)
    loads = node_loads(_nodes([0.0] * 4), _manholes([5000, 5000, 0, 0], [0.004, 0.0, 0.0, 0.0]), None, options=options, findings=FindingLog())
    flows = sanitary_flows(_tree(), loads, length=np.full(3, 10.0), options=options)
    np.testing.assert_allclose(flows.q_sanitary, [0.004, 0.0, 0.004])
    np.testing.assert_allclose(flows.q_infiltration, [0.0, 0.0, 0.0])


def _areas(drains_to: list[object], geometry: list[object]) -> gpd.GeoDataFrame:
    count = len(drains_to)
    return gpd.GeoDataFrame({"catchment_id": [f"S{i}" for i in range(count)], "drains_to": drains_to,
                             "population": [100.0, np.nan, np.nan][:count], "dwellings": [np.nan, 10.0, np.nan][:count],
                             "occupancy": [np.nan] * count, "area_ha": [np.nan, 2.0, np.nan][:count]},
                            geometry=geometry, crs="EPSG:32630")  # fmt: skip


def test_catchments_drain_to_their_manhole_else_the_nearest_node() -> None:
    near_b = shapely.box(-10, -40, 10, -30)  # centroid (0, -35): nearest node B
    near_out = shapely.box(90, 10, 110, 30)  # centroid (100, 20): nearest node OUT
    areas = _areas(["C", "X9", None], [near_b, near_b, near_out])
    findings = FindingLog()
    assert catchment_outlets(areas, _nodes([0.0] * 4), findings=findings).tolist() == [2, 1, 3]
    frame = findings.to_frame()
    assert frame["code"].tolist() == ["unknown_outlet"]
    assert frame["feature"].tolist() == ["S1"]
    assert "X9" in frame["message"][0]


def test_catchment_population_and_area_reach_their_nodes() -> None:
    areas = _areas(["A", "B", None], [shapely.box(0, 0, 100, 100), shapely.box(0, 0, 10, 10), None])
    findings = FindingLog()
    loads = node_loads(_nodes([0.0] * 4), None, areas, options=FlowOptions(occupancy=2.5), findings=findings)
    np.testing.assert_allclose(loads.population, [100.0, 25.0, 0.0, 0.0])  # 10 dwellings x 2.5 persons
    np.testing.assert_allclose(loads.area_ha, [1.0, 2.0, 0.0, 0.0])  # 100 m x 100 m drawn; 2 ha given
    assert findings.to_frame()["code"].tolist() == ["catchment_unplaced"]
