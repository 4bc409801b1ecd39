"""Registers as they are: stubs with placeholder ids drawn backwards, snapping that never closes a
pipe on itself, abandoned pipes kept out, node roles.

Every layout is drawn by hand in the comments; the expected joins are read off the drawing.
"""

from __future__ import annotations

import geopandas as gpd
import numpy as np
import pandas as pd
from shapely import LineString, Point

from audit.findings import FindingLog
from audit.network.build import Network, build_network

# Three manholes on a line, 40 m apart; the main run A -> B -> C.
#   A(0,0) ---- B(40,0) ---- C(80,0)
XY = {"A": (0.0, 0.0), "B": (40.0, 0.0), "C": (80.0, 0.0)}


def manholes(**extra: list[object]) -> gpd.GeoDataFrame:
    names = list(XY)
    columns: dict[str, object] = {"manhole_id": names, "rim": np.nan, "invert": np.nan, "depth": np.nan, "inflow": np.nan,
                                  "access": True, **extra}  # fmt: skip
    return gpd.GeoDataFrame(columns, geometry=[Point(XY[name]) for name in names])


def pipes(rows: list[tuple[str, str | None, str | None, list[tuple[float, float]]]], kind: list[str] | None = None) -> gpd.GeoDataFrame:
    frame = gpd.GeoDataFrame(
        {"pipe_id": [r[0] for r in rows], "from_node": [r[1] for r in rows], "to_node": [r[2] for r in rows],
         "upstream_invert": np.nan, "downstream_invert": np.nan},
        geometry=[LineString(r[3]) for r in rows],
    )  # fmt: skip
    if kind is not None:
        frame["kind"] = kind
    return frame


def joins(network: Network) -> list[tuple[str | None, str | None]]:
    names = network.nodes["node_id"].to_numpy(dtype=object)
    return [(None if u < 0 else str(names[u]), None if d < 0 else str(names[d])) for u, d in zip(network.upstream, network.downstream, strict=True)]


MAIN = [("P1", "A", "B", [(0, 0), (40, 0)]), ("P2", "B", "C", [(40, 0), (80, 0)])]


def test_a_stub_drawn_from_its_downstream_manhole_gets_a_head_of_run() -> None:
    # S1 drains into B from the north; the register says from 'EOL' to B, but it is drawn from B
    # (40, 0) up to its free end (40, 25).
    layer = pipes([*MAIN, ("S1", "EOL", "B", [(40, 0), (40, 25)])])
    log = FindingLog()
    network = build_network(layer, manholes(), snap_tolerance_m=1.0, findings=log)
    assert joins(network)[2] == ("J1", "B")
    head = network.nodes.iloc[network.upstream[2]]
    assert (head["x"], head["y"]) == (40.0, 25.0)  # the free vertex, not the one on B
    assert not network.in_cycle.any()
    found = log.to_frame()
    assert "self_loop" not in set(found["code"])
    unknown = found[found["code"] == "unknown_node"]
    assert unknown["message"].tolist() == ["pipe S1: from_node 'EOL' names no manhole; end left as a head of run, node 'J1'"]
    assert found.loc[found["code"] == "drawn_against_flow", "feature"].tolist() == ["S1"]


def test_a_stub_end_snaps_to_another_manhole_never_to_its_own() -> None:
    # S2: from A to a pump code that names no manhole, drawn from (79.6, 0.5), 0.64 m from C,
    # along y = 0.5 to A (0, 0). Its known end A sits at the last vertex, so the free end is the
    # first vertex, which snaps to C, not to A.
    layer = pipes([*MAIN, ("S2", "A", "PS-7", [(79.6, 0.5), (40, 0.5), (0, 0)])])
    log = FindingLog()
    network = build_network(layer, manholes(), snap_tolerance_m=1.0, findings=log)
    assert joins(network)[2] == ("A", "C")
    message = log.to_frame().query("code == 'unknown_node'")["message"].tolist()
    assert message == ["pipe S2: to_node 'PS-7' names no manhole; end joined by snapping to manhole 'C'"]


def test_a_stub_shorter_than_the_tolerance_does_not_close_on_its_manhole() -> None:
    # S3 is 0.6 m long, from B to nowhere; both vertices lie within 1 m of B.
    layer = pipes([*MAIN, ("S3", "B", None, [(40, 0), (40.6, 0)])])
    log = FindingLog()
    network = build_network(layer, manholes(), snap_tolerance_m=1.0, findings=log)
    assert joins(network)[2] == ("B", "J1")
    assert not network.in_cycle.any()
    assert "self_loop" not in set(log.to_frame()["code"])


def test_snapping_without_ids_never_joins_both_ends_to_one_manhole() -> None:
    # No ids at all. T1 is a 0.7 m pipe beside A: both of its ends lie within 1 m of A; the end
    # farther from A takes a node of its own. T2 runs A -> B normally.
    layer = pipes([("T1", None, None, [(0.2, 0), (0.9, 0)]), ("T2", None, None, [(0.1, 0.1), (39.8, 0)])])
    network = build_network(layer, manholes(), snap_tolerance_m=1.0, findings=FindingLog())
    assert joins(network) == [("A", "J1"), ("A", "B")]


def test_placeholder_ids_are_no_node_even_where_a_manhole_bears_them() -> None:
    # The register writes '0' for "no node"; one manhole is also (wrongly) numbered '0'.
    extra = gpd.GeoDataFrame({"manhole_id": ["0"], "rim": [np.nan], "invert": [np.nan], "depth": [np.nan], "inflow": [np.nan],
                              "access": [True]}, geometry=[Point(500, 500)])  # fmt: skip
    layer = pipes([*MAIN, ("S4", "0", "C", [(80, 0), (80, 30)])])
    all_manholes = gpd.GeoDataFrame(pd.concat([manholes(), extra], ignore_index=True))
    log = FindingLog()
    network = build_network(layer, all_manholes, snap_tolerance_m=1.0, placeholder_ids=("0",), findings=log)
    assert joins(network)[2] == ("J1", "C")
    message = log.to_frame().query("code == 'unknown_node'")["message"].tolist()
    assert message == ["pipe S4: from_node '0' is a placeholder id; end left as a head of run, node 'J1'"]


def test_abandoned_pipes_are_kept_out_of_the_network() -> None:
    layer = pipes([*MAIN, ("X1", "B", "C", [(40, 0), (80, 0)])], kind=["gravity", "gravity", "abandoned"])
    log = FindingLog()
    network = build_network(layer, manholes(), findings=log)
    assert joins(network) == [("A", "B"), ("B", "C"), (None, None)]
    assert network.left_out.tolist() == [False, False, True]
    assert network.component[2] == -1
    assert "X1" not in set(log.to_frame()["feature"])  # left out on purpose: not an unplaced pipe


def test_node_roles_come_from_the_manhole_kinds() -> None:
    layer = pipes([*MAIN, ("S1", "EOL", "B", [(40, 0), (40, 25)])])
    network = build_network(layer, manholes(kind=["manhole", "chamber", "pump_station"]), findings=FindingLog())
    assert network.nodes["role"].tolist() == ["manhole", "chamber", "pump_station", "junction"]
