"""The network: joins by id and by snapping, direction, junctions, graph findings.

Every network here is drawn by hand, so the expected joins, directions and outfalls are read off
the drawing, not computed by the code under test.
"""

from __future__ import annotations

import geopandas as gpd
import networkx as nx
import numpy as np
import pandas as pd
import pyarrow as pa
import pytest
from shapely import LineString, Point

from audit.errors import ConfigError, InputError
from audit.findings import FindingLog
from audit.network import first_places
from audit.network.build import Network, build_network

# A Y-shaped tree: A and B drain to C, C drains to the outfall D.
#   A(0,10)     B(10,10)
#        \     /
#        C(5,5)
#          |
#        D(5,0)
MANHOLE_XY = {"A": (0.0, 10.0), "B": (10.0, 10.0), "C": (5.0, 5.0), "D": (5.0, 0.0)}
Y_PIPES = {"P1": ("A", "C"), "P2": ("B", "C"), "P3": ("C", "D")}


def manhole_layer(xy: dict[str, tuple[float, float]], **levels: list[float]) -> gpd.GeoDataFrame:
    names = list(xy)
    columns: dict[str, object] = {"manhole_id": names}
    for name in ("rim", "invert", "depth", "inflow"):
        columns[name] = levels.get(name, [np.nan] * len(names))
    columns["access"] = [True] * len(names)
    return gpd.GeoDataFrame(columns, geometry=[Point(xy[name]) for name in names])


def pipe_layer(
    ends: dict[str, tuple[str, str]],
    *,
    ids: bool = True,
    offset: float = 0.0,
    xy: dict[str, tuple[float, float]] = MANHOLE_XY,
) -> gpd.GeoDataFrame:
    """Straight pipes between the named manholes; ``offset`` moves both ends off the manholes [m]."""
    lines = [
        LineString([(xy[a][0] + offset, xy[a][1]), (xy[b][0], xy[b][1] - offset)]) for a, b in ends.values()
    ]
    return gpd.GeoDataFrame(
        {
            "pipe_id": list(ends),
            "from_node": [a if ids else None for a, _ in ends.values()],
            "to_node": [b if ids else None for _, b in ends.values()],
            "upstream_invert": np.nan,
            "downstream_invert": np.nan,
        },
        geometry=lines,
    )


def joins(network: Network) -> list[tuple[str, str]]:
    names = network.nodes["node_id"].to_numpy()
    return [(str(names[u]), str(names[d])) for u, d in zip(network.upstream, network.downstream, strict=True)]


def codes(log: FindingLog) -> dict[str, int]:
    return log.codes()


def rows(log: FindingLog, code: str) -> list[dict[str, object]]:
    frame = log.to_frame()
    return frame[frame["code"] == code].to_dict("records")


def assert_upstream_first(network: Network) -> None:
    """Every pipe comes after each pipe that flows into its upstream node."""
    position = np.empty(len(network.order), dtype=int)
    position[network.order] = np.arange(len(network.order))
    for i, j in np.argwhere(network.downstream[:, None] == network.upstream[None, :]):
        if network.downstream[i] >= 0 and not network.in_cycle[i] and not network.in_cycle[j]:
            assert position[i] < position[j]


def test_y_tree_by_ids_joins_named_manholes() -> None:
    log = FindingLog()
    network = build_network(pipe_layer(Y_PIPES), manhole_layer(MANHOLE_XY), findings=log)
    assert joins(network) == [("A", "C"), ("B", "C"), ("C", "D")]
    assert network.direction == "ids"
    assert network.nodes["kind"].tolist() == ["manhole"] * 4
    assert network.outfalls.tolist() == [3]
    assert network.component.tolist() == [0, 0, 0]
    assert not network.reversed.any()
    assert not network.in_cycle.any()
    assert sorted(network.order.tolist()) == [0, 1, 2]
    assert network.order[-1] == 2
    assert_upstream_first(network)
    assert codes(log) == {"outfall": 1}
    (outfall,) = rows(log, "outfall")
    assert (outfall["layer"], outfall["feature"], outfall["x"], outfall["y"]) == ("manholes", "D", 5.0, 0.0)


def _in_pieces(values: list[str | None]) -> pd.Series:
    """Text held as several Arrow chunks, as a layer read in batches is."""
    pieces = pa.chunked_array([values[:1], values[1:]], type=pa.large_string())
    return pd.Series(pd.arrays.ArrowStringArray(pieces))


def test_ids_read_in_pieces_join_as_whole_columns() -> None:
    log = FindingLog()
    pipes, manholes = pipe_layer(Y_PIPES), manhole_layer(MANHOLE_XY)
    for name in ("from_node", "to_node"):
        pipes[name] = _in_pieces(pipes[name].tolist())
    manholes["manhole_id"] = _in_pieces([" A", "B ", "C", "D"])
    network = build_network(pipes, manholes, findings=log)
    assert joins(network) == [("A", "C"), ("B", "C"), ("C", "D")]
    assert codes(log) == {"outfall": 1}


def test_y_tree_by_snapping_matches_the_drawing() -> None:
    log = FindingLog()
    pipes = pipe_layer(Y_PIPES, ids=False, offset=0.3)
    network = build_network(pipes, manhole_layer(MANHOLE_XY), snap_tolerance_m=0.5, findings=log)
    assert joins(network) == [("A", "C"), ("B", "C"), ("C", "D")]
    assert network.direction == "digitised"
    assert network.outfalls.tolist() == [3]
    assert_upstream_first(network)
    assert codes(log) == {"direction_fallback": 1, "outfall": 1}
    assert rows(log, "direction_fallback")[0]["feature"] == "*"


def test_tolerance_below_the_offset_leaves_junctions() -> None:
    log = FindingLog()
    pipes = pipe_layer(Y_PIPES, ids=False, offset=0.3)
    network = build_network(pipes, manhole_layer(MANHOLE_XY), snap_tolerance_m=0.2, findings=log)
    assert set(network.nodes["kind"].iloc[4:]) == {"junction"}
    assert codes(log)["orphan_manhole"] == 4  # no end lies within 0.2 m of any manhole


def test_backwards_pipe_is_turned_by_pipe_inverts() -> None:
    pipes = pipe_layer({"P1": ("A", "C"), "P2": ("B", "C"), "P3": ("D", "C")}, ids=False)
    pipes["upstream_invert"] = [9.0, 9.0, 6.0]  # at the first vertex, as digitised
    pipes["downstream_invert"] = [8.0, 8.0, 7.0]
    log = FindingLog()
    network = build_network(pipes, manhole_layer(MANHOLE_XY), direction="inverts", findings=log)
    assert joins(network) == [("A", "C"), ("B", "C"), ("C", "D")]
    assert network.reversed.tolist() == [False, False, True]
    assert network.outfalls.tolist() == [3]
    (turned,) = rows(log, "reversed_by_inverts")
    assert turned["feature"] == "P3"
    assert "6.000" in turned["message"]
    assert "7.000" in turned["message"]
    assert (turned["x"], turned["y"]) == (5.0, 2.5)


def test_backwards_pipe_is_turned_by_manhole_levels() -> None:
    pipes = pipe_layer({"P3": ("D", "C")}, ids=False)
    manholes = manhole_layer(MANHOLE_XY, rim=[12.0, 12.0, 11.0, 10.0], depth=[2.0, 2.0, 3.0, 4.0])
    network = build_network(pipes, manholes, direction="inverts", findings=FindingLog())
    assert joins(network) == [("C", "D")]  # C: 11 - 3 = 8 m, D: 10 - 4 = 6 m
    assert network.reversed.tolist() == [True]


def test_ends_meeting_without_a_manhole_form_a_junction() -> None:
    lines = [
        LineString([(40, 0), (20, 0)]),
        LineString([(20, 10), (20.1, 0.2)]),
        LineString([(20.2, 0), (5, 0.3)]),
    ]
    pipes = gpd.GeoDataFrame({"pipe_id": ["Q1", "Q2", "Q3"]}, geometry=lines)
    log = FindingLog()
    network = build_network(pipes, manhole_layer({"D": (5.0, 0.0)}), snap_tolerance_m=0.5, findings=log)
    assert joins(network) == [("J1", "J2"), ("J3", "J2"), ("J2", "D")]
    junction = network.nodes.set_index("node_id").loc["J2"]
    assert junction["kind"] == "junction"
    assert not junction["access"]
    assert junction["manhole_row"] == -1
    assert junction["x"] == pytest.approx((20 + 20.1 + 20.2) / 3)
    assert junction["y"] == pytest.approx(0.2 / 3)
    dangling = rows(log, "dangling_end")
    assert [(r["feature"], r["x"], r["y"]) for r in dangling] == [("Q1", 40.0, 0.0), ("Q2", 20.0, 10.0)]
    assert all("upstream end" in r["message"] for r in dangling)


def test_loop_is_found_and_ordered_last() -> None:
    xy = {**MANHOLE_XY, "E": (-10.0, 10.0)}
    ends = {"L1": ("A", "B"), "L2": ("B", "C"), "L3": ("C", "A"), "L4": ("C", "D"), "L5": ("E", "A")}
    log = FindingLog()
    network = build_network(pipe_layer(ends, xy=xy), manhole_layer(xy), findings=log)
    assert network.in_cycle.tolist() == [True, True, True, False, False]
    assert network.order.tolist() == [4, 3, 0, 1, 2]  # E->A before C->D (through the loop), loop last
    assert [r["feature"] for r in rows(log, "cycle")] == ["L1", "L2", "L3"]
    assert network.outfalls.tolist() == [3]


def test_two_components_are_numbered_by_size() -> None:
    xy = {**MANHOLE_XY, "E": (50.0, 0.0), "F": (60.0, 0.0)}
    log = FindingLog()
    network = build_network(pipe_layer({"S1": ("E", "F"), **Y_PIPES}, xy=xy), manhole_layer(xy), findings=log)
    assert network.component.tolist() == [1, 0, 0, 0]
    assert sorted(network.outfalls.tolist()) == [3, 5]
    parts = rows(log, "separate_components")
    assert [r["feature"] for r in parts] == ["P1", "S1"]
    assert "2 separate parts" in parts[0]["message"]
    assert "3 pipes" in parts[0]["message"]
    assert "1 pipes" in parts[1]["message"]
    assert (parts[1]["x"], parts[1]["y"]) == (50.0, 0.0)


def test_orphan_manhole_is_reported() -> None:
    log = FindingLog()
    build_network(pipe_layer(Y_PIPES), manhole_layer({**MANHOLE_XY, "Z": (99.0, 99.0)}), findings=log)
    (orphan,) = rows(log, "orphan_manhole")
    assert (orphan["layer"], orphan["feature"], orphan["x"], orphan["y"]) == ("manholes", "Z", 99.0, 99.0)
    assert "Z" in orphan["message"]


def test_duplicate_manhole_id_keeps_the_first() -> None:
    manholes = manhole_layer(MANHOLE_XY)
    copy = manhole_layer({"C": (70.0, 70.0)})
    manholes = gpd.GeoDataFrame(
        {**{c: list(manholes[c]) + list(copy[c]) for c in manholes.columns if c != "geometry"}},
        geometry=list(manholes.geometry) + list(copy.geometry),
    )
    log = FindingLog()
    network = build_network(pipe_layer(Y_PIPES), manholes, findings=log)
    assert network.nodes["manhole_row"].tolist() == [0, 1, 2, 3]
    assert joins(network) == [("A", "C"), ("B", "C"), ("C", "D")]
    (dup,) = rows(log, "duplicate_id")
    assert (dup["feature"], dup["x"], dup["y"]) == ("C", 70.0, 70.0)
    assert "first" in dup["message"]
    assert "row 4" in dup["message"]
    assert "orphan_manhole" not in codes(log)


def test_unknown_id_falls_back_to_snapping() -> None:
    pipes = pipe_layer(Y_PIPES)
    pipes.loc[2, "to_node"] = "X9"
    log = FindingLog()
    network = build_network(pipes, manhole_layer(MANHOLE_XY), findings=log)
    assert joins(network)[2] == ("C", "D")
    (unknown,) = rows(log, "unknown_node")
    assert unknown["feature"] == "P3"
    assert "X9" in unknown["message"]
    assert "'D'" in unknown["message"]
    assert (unknown["x"], unknown["y"]) == (5.0, 0.0)


def test_unknown_id_without_geometry_becomes_a_named_junction() -> None:
    pipes = pipe_layer(Y_PIPES)
    pipes.loc[2, "to_node"] = "X9"
    pipes.loc[2, "geometry"] = None
    log = FindingLog()
    network = build_network(pipes, manhole_layer(MANHOLE_XY), findings=log)
    assert joins(network)[2] == ("C", "X9")
    assert network.nodes["kind"].iloc[-1] == "junction"
    assert "head of run, node 'X9'" in rows(log, "unknown_node")[0]["message"]  # no other pipe ends there


def test_self_loop_and_unplaced_pipe() -> None:
    pipes = pipe_layer({**Y_PIPES, "P4": ("A", "A")})
    pipes = gpd.GeoDataFrame(
        {"pipe_id": [*pipes["pipe_id"], "P5"], "from_node": [*pipes["from_node"], None],
         "to_node": [*pipes["to_node"], None]},
        geometry=[*pipes.geometry, None],
    )
    log = FindingLog()
    network = build_network(pipes, manhole_layer(MANHOLE_XY), findings=log)
    assert (network.upstream[4], network.downstream[4], network.component[4]) == (-1, -1, -1)
    assert network.in_cycle.tolist() == [False, False, False, True, False]
    assert network.order.tolist()[-2:] == [3, 4]
    (loop,) = rows(log, "self_loop")
    assert (loop["feature"], loop["x"], loop["y"]) == ("P4", 0.0, 10.0)
    assert [r["feature"] for r in rows(log, "unplaced_pipe")] == ["P5"]
    assert "cycle" not in codes(log)


def test_without_manholes_every_node_is_a_junction() -> None:
    network = build_network(pipe_layer(Y_PIPES, ids=False), None, findings=FindingLog())
    assert network.nodes["node_id"].tolist() == ["J1", "J2", "J3", "J4"]
    assert joins(network) == [("J1", "J2"), ("J3", "J2"), ("J2", "J4")]


@pytest.mark.parametrize(
    ("options", "error"),
    [({"direction": "uphill"}, ConfigError), ({"snap_tolerance_m": -1.0}, ConfigError)],
)
def test_bad_options_are_config_errors(options: dict[str, object], error: type[Exception]) -> None:
    with pytest.raises(error, match="direction|tolerance"):
        build_network(pipe_layer(Y_PIPES), None, findings=FindingLog(), **options)  # type: ignore[arg-type]


def test_manhole_layer_without_ids_is_an_input_error() -> None:
    manholes = manhole_layer(MANHOLE_XY).drop(columns="manhole_id")
    with pytest.raises(InputError, match="manholes layer.*manhole_id"):
        build_network(pipe_layer(Y_PIPES), manholes, findings=FindingLog())


def test_input_layers_are_not_modified() -> None:
    pipes, manholes = pipe_layer(Y_PIPES), manhole_layer(MANHOLE_XY)
    before = (pipes.copy(), manholes.copy())
    build_network(pipes, manholes, direction="inverts", findings=FindingLog())
    assert pipes.equals(before[0])
    assert manholes.equals(before[1])


@pytest.mark.parametrize("seed", [1, 2, 3])
def test_cycles_components_and_order_agree_with_networkx(seed: int) -> None:
    """networkx (strongly/weakly connected components, condensation) is the independent reference."""
    rng = np.random.default_rng(seed)
    names = [f"M{i}" for i in range(100)]
    source, target = rng.integers(0, 100, 110), rng.integers(0, 100, 110)
    pipes = gpd.GeoDataFrame(
        {"pipe_id": [f"P{i}" for i in range(110)], "from_node": [names[i] for i in source],
         "to_node": [names[i] for i in target]},
        geometry=[None] * 110,
    )
    manholes = manhole_layer({name: (float(i), 0.0) for i, name in enumerate(names)})
    network = build_network(pipes, manholes, findings=FindingLog())
    graph = nx.MultiDiGraph()
    graph.add_nodes_from(range(100))
    graph.add_edges_from(zip(source, target, strict=True))
    strong = {node: k for k, part in enumerate(nx.strongly_connected_components(graph)) for node in part}
    assert network.in_cycle.tolist() == [strong[a] == strong[b] for a, b in zip(source, target, strict=True)]
    assert network.in_cycle.any()
    weak = {node: k for k, part in enumerate(nx.weakly_connected_components(graph)) for node in part}
    weak_part = np.array([weak[a] for a in source])
    same_part = network.component[:, None] == network.component[None, :]
    assert np.array_equal(same_part, weak_part[:, None] == weak_part[None, :])
    assert len(set(network.component.tolist())) == len(set(weak_part.tolist())) > 1
    position = np.empty(110, dtype=int)
    position[network.order] = np.arange(110)
    for i, j in [(i, j) for i in range(110) for j in range(110) if strong[target[i]] == strong[source[j]]]:
        if not network.in_cycle[i] and not network.in_cycle[j]:
            assert position[i] < position[j]


def test_an_end_exactly_at_the_tolerance_still_snaps() -> None:
    pipes = gpd.GeoDataFrame({"pipe_id": ["T1"]}, geometry=[LineString([(0.5, 10.0), (5.0, 4.5)])])
    network = build_network(pipes, manhole_layer(MANHOLE_XY), snap_tolerance_m=0.5, findings=FindingLog())
    assert joins(network) == [("A", "C")]  # both ends 0.5 m off, read off the drawing


def test_a_pipe_drawn_against_its_ids_is_reported_and_the_ids_keep_the_direction() -> None:
    pipes = pipe_layer(Y_PIPES)
    # P2 runs B -> C by its ids but is drawn from C to B
    pipes.loc[1, "geometry"] = LineString([MANHOLE_XY["C"], MANHOLE_XY["B"]])
    findings = FindingLog()
    network = build_network(pipes, manhole_layer(MANHOLE_XY), findings=findings)
    frame = findings.to_frame()
    drawn = frame[frame["code"] == "drawn_against_flow"]
    assert drawn["feature"].tolist() == ["P2"]
    assert "drawn from C to B" in drawn["message"].iloc[0]
    node = dict(zip(network.nodes["node_id"], range(len(network.nodes)), strict=True))
    assert network.upstream[1] == node["B"]
    assert network.downstream[1] == node["C"]
    # by digitising order there is nothing to compare the drawing with
    digitised = FindingLog()
    build_network(pipe_layer(Y_PIPES, ids=False), manhole_layer(MANHOLE_XY), findings=digitised)
    assert "drawn_against_flow" not in set(digitised.to_frame()["code"])


def test_the_first_place_of_each_wanted_value_or_minus_one() -> None:
    values = np.array(["b", "a", "b", "c"], dtype=object)
    assert first_places(values, pd.Index(["b", "c", "x", "a"])).tolist() == [0, 3, -1, 1]
    assert first_places(np.array([], dtype=object), pd.Index(["b"])).tolist() == [-1]  # no manhole at all (a fuzz case)
