"""Design flows of the demo town end to end, against an accumulation written out with networkx."""

from __future__ import annotations

from pathlib import Path

import geopandas as gpd
import networkx as nx
import numpy as np
import pytest

import audit
from audit.result import AuditResult

TOWN = Path(__file__).resolve().parents[2] / "sample_gis" / "town.toml"
PER_CAPITA_L_DAY, PEAKING = 220.0, 3.0  # the town's design rule, as town.toml states it  # common practice, no source


@pytest.fixture(scope="module")
def town() -> AuditResult:
    return audit.run(TOWN)


def test_sanitary_flows_come_from_the_catchments_people(town: AuditResult) -> None:
    manholes = gpd.read_file(TOWN.parent / "town.gpkg", layer="manholes").set_index("mh_ref")
    catchments = gpd.read_file(TOWN.parent / "town.gpkg", layer="catchments").set_index("outlet_mh")
    assert town.computed is not None
    # the joins as the network stage made them (the mistyped mh_down is snapped by geometry)
    pipes = town.computed.rename(columns={"from_node_id": "from_node", "to_node_id": "to_node"})
    known = pipes["to_node"].isin(manholes.index) & pipes["from_node"].isin(manholes.index)
    graph = nx.DiGraph(list(zip(pipes.loc[known, "from_node"], pipes.loc[known, "to_node"])))
    persons = catchments["persons"].reindex(manholes.index).fillna(0)
    upstream = {node: {node} | nx.ancestors(graph, node) for node in graph}
    people = pipes.loc[known, "from_node"].map(lambda node: persons[list(upstream[node])].sum())
    trade = pipes.loc[known, "from_node"].map(lambda node: manholes.loc[list(upstream[node]), "trade_ls"].sum())
    expected = (people * PER_CAPITA_L_DAY / 86_400 * PEAKING + trade) / 1000
    computed = town.computed.loc[known.to_numpy()]
    np.testing.assert_allclose(computed["population_served"], people)
    np.testing.assert_allclose(computed["q_sanitary"], expected, rtol=1e-9)
    np.testing.assert_allclose(computed["q_design"], expected, rtol=1e-9)
    assert (computed["flow_source"] == "accumulated").all()


def test_every_part_is_a_column_of_the_pipes_layer(town: AuditResult) -> None:
    for name in ("q_sanitary", "q_infiltration", "q_storm", "tc_min", "population_served", "area_served_ha"):
        assert name in town.pipes.columns
    assert town.settings["flows"]["kind"] == "sanitary" and town.settings["flows"]["peaking_factor"] == PEAKING


def test_the_town_as_a_combined_sewer(tmp_path: Path) -> None:
    text = TOWN.read_text(encoding="utf-8").replace('kind = "sanitary"', 'kind = "combined"')
    text = text.replace('path = "town.gpkg"', f'path = "{(TOWN.parent / "town.gpkg").as_posix()}"')
    config = tmp_path / "combined.toml"
    config.write_text(text, encoding="utf-8")
    result = audit.run(config)
    computed = result.computed
    assert computed is not None
    usable = computed["flow_source"] == "accumulated"
    parts = computed["q_sanitary"] + computed["q_infiltration"] + computed["q_storm"]
    np.testing.assert_allclose(computed.loc[usable, "q_design"], parts[usable], rtol=1e-12)
    assert (computed.loc[usable, "q_storm"] > 0).all() and (computed.loc[usable, "tc_min"] >= 10.0).all()
    # tc grows downstream: every pipe's tc is at least that of each pipe flowing into its upstream node
    into = computed.reset_index(drop=True)
    by_down = into.groupby("to_node_id")["tc_min"].max()
    feeder = into["from_node_id"].map(by_down)
    has_feeder = feeder.notna() & into["tc_min"].notna()
    assert (into.loc[has_feeder, "tc_min"] > feeder[has_feeder]).all()
    assert result.settings["flows"]["tc_iterations"] >= 2 and result.settings["flows"]["rainfall"]["a"] == 1200.0
