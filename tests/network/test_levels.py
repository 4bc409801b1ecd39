"""Lengths, inverts, slopes and cover on a small network with levels worked out by hand."""

from __future__ import annotations

import geopandas as gpd
import numpy as np
import pandas as pd
import pytest
from shapely import LineString, Point

from audit.errors import ConfigError, InputError
from audit.findings import FindingLog
from audit.network.build import build_network
from audit.network.levels import LEVEL_COLUMNS, derive_levels

# Manholes: A, C with inverts; D with rim and depth only (invert 11 - 2 = 9 m); E with no level.
MANHOLES = gpd.GeoDataFrame(
    {
        "manhole_id": ["A", "C", "D", "E"],
        "rim": [12.0, 11.5, 11.0, 10.5],
        "invert": [10.0, 9.5, np.nan, np.nan],
        "depth": [np.nan, np.nan, 2.0, np.nan],
        "inflow": 0.0,
        "access": True,
    },
    geometry=[Point(0, 0), Point(30, 40), Point(30, 0), Point(60, 0)],
)
PIPES = gpd.GeoDataFrame(
    {
        "pipe_id": ["P1", "P2", "P3", "P4"],
        "from_node": ["A", "C", "D", "E"],
        "to_node": ["C", "D", "E", "E"],
        "shape": ["circular", "rectangular", "circular", "circular"],
        "diameter": [0.3, np.nan, 0.3, 0.3],
        "height": [np.nan, 1.2, np.nan, np.nan],
        "width": [np.nan, 1.0, np.nan, np.nan],
        "upstream_invert": [np.nan, 9.4, np.nan, 8.0],
        "downstream_invert": [np.nan, 9.0, np.nan, 8.0],
        "length": [50.0, np.nan, 36.0, np.nan],
    },
    geometry=[
        LineString([(0, 0), (30, 40)]),  # 50 m drawn
        LineString([(30, 40), (30, 0)]),  # 40 m drawn
        LineString([(30, 0), (60, 0)]),  # 30 m drawn, 36 m typed
        LineString([(60, 0), (60, 0)]),  # no length at all
    ],
)


@pytest.fixture(name="levels_and_log")
def _levels_and_log() -> tuple[pd.DataFrame, FindingLog]:
    network = build_network(PIPES, MANHOLES, findings=FindingLog())
    log = FindingLog()
    return derive_levels(PIPES, network, MANHOLES, findings=log), log


def test_columns_and_index(levels_and_log: tuple[pd.DataFrame, FindingLog]) -> None:
    levels, _ = levels_and_log
    assert tuple(levels.columns) == LEVEL_COLUMNS
    assert levels.index.equals(PIPES.index)


def test_lengths_prefer_the_attribute(levels_and_log: tuple[pd.DataFrame, FindingLog]) -> None:
    levels, _ = levels_and_log
    assert levels["length_m"].tolist() == pytest.approx([50.0, 40.0, 36.0, 0.0])
    assert levels["geometry_length_m"].tolist() == pytest.approx([50.0, 40.0, 30.0, 0.0])


def test_inverts_from_manholes_and_from_pipe_fields(levels_and_log: tuple[pd.DataFrame, FindingLog]) -> None:
    levels, _ = levels_and_log
    assert levels["up_invert"].tolist() == pytest.approx([10.0, 9.4, 9.0, 8.0])
    assert levels["down_invert"].tolist()[:2] == pytest.approx([9.5, 9.0])
    assert np.isnan(levels["down_invert"].iloc[2])
    assert levels["invert_source"].tolist() == ["manhole", "pipe", "", "pipe"]


def test_slopes_by_hand(levels_and_log: tuple[pd.DataFrame, FindingLog]) -> None:
    levels, _ = levels_and_log
    slope = levels["slope"].to_numpy()
    assert slope[0] == pytest.approx((10.0 - 9.5) / 50.0)  # 0.01
    assert slope[1] == pytest.approx((9.4 - 9.0) / 40.0)  # 0.01
    assert np.isnan(slope[2])
    assert np.isnan(slope[3])


def test_cover_to_the_crown(levels_and_log: tuple[pd.DataFrame, FindingLog]) -> None:
    levels, _ = levels_and_log
    assert levels["up_cover"].tolist()[:3] == pytest.approx([12.0 - 10.3, 11.5 - 10.6, 11.0 - 9.3])
    assert levels["down_cover"].tolist()[:2] == pytest.approx([11.5 - 9.8, 11.0 - 10.2])
    assert np.isnan(levels["down_cover"].iloc[2])


def test_findings_name_the_pipe_and_the_numbers(levels_and_log: tuple[pd.DataFrame, FindingLog]) -> None:
    _, log = levels_and_log
    frame = log.to_frame()
    # P2 leaves manhole C at 9.4 m, 0.1 m below C's invert of 9.5 m: one of the two is wrong
    assert log.codes() == {"length_mismatch": 1, "zero_length": 1, "missing_invert": 1, "invert_below_manhole": 1}
    assert frame[frame["code"] == "invert_below_manhole"]["feature"].tolist() == ["P2"]
    mismatch = frame[frame["code"] == "length_mismatch"].iloc[0]
    assert mismatch["feature"] == "P3"
    assert "36.000" in mismatch["message"]
    assert "30.000" in mismatch["message"]
    assert (mismatch["x"], mismatch["y"]) == (45.0, 0.0)
    missing = frame[frame["code"] == "missing_invert"].iloc[0]
    assert missing["feature"] == "P3"
    assert "downstream end" in missing["message"]
    assert "upstream end" not in missing["message"]
    assert frame[frame["code"] == "zero_length"].iloc[0]["feature"] == "P4"


def test_small_length_difference_is_tolerated() -> None:
    pipes = PIPES.iloc[:1].assign(length=51.0)  # 1 m off 50 m: under 5 % = 2.5 m
    network = build_network(pipes, MANHOLES, findings=FindingLog())
    log = FindingLog()
    derive_levels(pipes, network, MANHOLES, findings=log)
    assert "length_mismatch" not in log.codes()
    log = FindingLog()
    derive_levels(pipes, network, MANHOLES, length_tolerance_ratio=0.0, length_tolerance_m=0.5, findings=log)
    assert log.codes() == {"length_mismatch": 1}


def test_reversed_pipe_swaps_its_levels() -> None:
    manholes = gpd.GeoDataFrame(
        {"manhole_id": ["A", "B"], "rim": [10.0, 9.9], "invert": np.nan, "depth": np.nan},
        geometry=[Point(0, 0), Point(30, 0)],
    )
    pipes = gpd.GeoDataFrame(
        {"pipe_id": ["R1"], "shape": ["circular"], "diameter": [0.225],
         "upstream_invert": [8.0], "downstream_invert": [8.6], "length": [np.nan]},
        geometry=[LineString([(30, 0), (0, 0)])],  # drawn from B to A; A lies higher
    )
    network = build_network(pipes, manholes, direction="inverts", findings=FindingLog())
    assert network.reversed.tolist() == [True]
    row = derive_levels(pipes, network, manholes, findings=FindingLog()).iloc[0]
    assert (row["up_invert"], row["down_invert"]) == (8.6, 8.0)
    assert row["slope"] == pytest.approx(0.6 / 30.0)
    assert row["up_cover"] == pytest.approx(10.0 - 8.825)
    assert row["down_cover"] == pytest.approx(9.9 - 8.225)


def test_without_manholes_levels_come_from_pipes_only() -> None:
    network = build_network(PIPES, None, findings=FindingLog())
    levels = derive_levels(PIPES, network, None, findings=FindingLog())
    assert levels["invert_source"].tolist() == ["", "pipe", "", "pipe"]
    assert levels["up_cover"].isna().all()


def test_bad_tolerance_and_foreign_network_are_errors() -> None:
    network = build_network(PIPES, MANHOLES, findings=FindingLog())
    with pytest.raises(ConfigError, match="ratio"):
        derive_levels(PIPES, network, MANHOLES, length_tolerance_ratio=-0.1, findings=FindingLog())
    with pytest.raises(InputError, match="pipes layer"):
        derive_levels(PIPES.iloc[:2], network, MANHOLES, findings=FindingLog())


def test_a_pipe_invert_below_its_manholes_invert_is_a_finding() -> None:
    # A -> B -> C; the first pipe's downstream invert lies 0.40 m below B's invert, the second's
    # upstream invert 0.03 m below it (within the 0.05 m of typing and benching): one finding
    pipes = gpd.GeoDataFrame(
        {"pipe_id": ["P1", "P2"], "from_node": ["A", "B"], "to_node": ["B", "C"], "upstream_invert": [10.5, 9.97],
         "downstream_invert": [9.6, 9.5], "diameter": [0.3, 0.3], "height": [0.3, 0.3], "shape": ["circular", "circular"]},
        geometry=[LineString([(0, 0), (40, 0)]), LineString([(40, 0), (80, 0)])], crs="EPSG:27700",
    )  # fmt: skip
    manholes = gpd.GeoDataFrame(
        {"manhole_id": ["A", "B", "C"], "rim": [12.0, 12.0, 12.0], "invert": [10.5, 10.0, 9.5]},
        geometry=[Point(0, 0), Point(40, 0), Point(80, 0)], crs="EPSG:27700",
    )  # fmt: skip
    findings = FindingLog()
    network = build_network(pipes, manholes, findings=findings)
    derive_levels(pipes, network, manholes, findings=findings)
    found = findings.to_frame()
    found = found[found["code"] == "invert_below_manhole"]
    assert found["feature"].tolist() == ["P1"]
    assert found["message"].iloc[0] == ("pipe P1: its downstream invert as recorded, 9.600 m, lies 0.400 m below the invert of manhole 'B', "
                                        "10.000 m: one of the two levels is wrong")
