"""Open channels among the storm drains: bank-full capacity, no cover rule, no pressurised flow."""

from pathlib import Path

import geopandas as gpd
import numpy as np
import pytest
from shapely.geometry import LineString, Point

from audit.pipeline import run

UTM = "EPSG:32630"  # invented coordinates in UTM zone 30N numbers, no real place


def _write(folder: Path) -> Path:
    # Two channels in a row, A -> B -> C, 100 m each at 0.2 % slope, n = 0.03 (a grassed channel):
    # D1 a trapezoid, 1.0 m bottom, 0.8 m deep, side slope 2 H : 1 V; D2 an open rectangle 2 m wide,
    # 0.6 m deep. A design flow of 1.5 m3/s in both.
    pipes = gpd.GeoDataFrame(
        {"REF": ["D1", "D2"], "US": ["A", "B"], "DS": ["B", "C"], "FORM": ["TRAP", "OPENBOX"], "DEPTH_MM": [800.0, 600.0],
         "BASE_MM": [1000.0, 2000.0], "SIDES": [2.0, None], "IL_US": [10.2, 10.0], "IL_DS": [10.0, 9.8], "Q": [1500.0, 1500.0]},
        geometry=[LineString([(500000, 5700000), (500100, 5700000)]), LineString([(500100, 5700000), (500200, 5700000)])],
        crs=UTM,
    )  # fmt: skip
    pipes.to_file(folder / "drains.gpkg")
    nodes = gpd.GeoDataFrame({"MH": ["A", "B", "C"], "GROUND": [11.0, 10.8, 10.6]},
                             geometry=[Point(500000, 5700000), Point(500100, 5700000), Point(500200, 5700000)], crs=UTM)  # fmt: skip
    nodes.to_file(folder / "nodes.gpkg")
    config = folder / "drains.toml"
    config.write_text(
        '[pipes]\npath = "drains.gpkg"\n[pipes.fields]\nid = "REF"\nfrom_node = "US"\nto_node = "DS"\nshape = "FORM"\n'
        'height = "DEPTH_MM"\nwidth = "BASE_MM"\nside_slope = "SIDES"\nupstream_invert = "IL_US"\ndownstream_invert = "IL_DS"\n'
        'flow = "Q"\n[pipes.shapes]\nTRAP = "trapezoidal"\nOPENBOX = "open_rectangular"\n'
        '[manholes]\npath = "nodes.gpkg"\n[manholes.fields]\nid = "MH"\nrim = "GROUND"\n[hydraulics]\nmanning_n = 0.03\n',
        encoding="utf-8",
    )
    return config


def test_open_channels_are_judged_at_bank_full_without_a_cover_rule(tmp_path: Path) -> None:
    result = run(_write(tmp_path))
    pipes = result.pipe_results.set_index(result.pipes["REF"])
    # Manning at bank-full, written out here (Chow 1959, table 2-1 for the trapezoid):
    # A = (b + z y) y, P = b + 2 y sqrt(1 + z^2); the rectangle has no lid in P
    area = np.array([(1.0 + 2.0 * 0.8) * 0.8, 2.0 * 0.6])
    perimeter = np.array([1.0 + 2 * 0.8 * np.sqrt(5.0), 2.0 + 2 * 0.6])
    q_full = area / 0.03 * (area / perimeter) ** (2 / 3) * 0.002**0.5
    np.testing.assert_allclose(pipes["q_full"], q_full, rtol=1e-9)
    # the trapezoid carries 1.5 m3/s in bank (q_full about 1.75); the rectangle (about 1.16) overtops
    assert q_full[0] > 1.5 > q_full[1]
    assert pipes.loc["D1", "flags"] == "near_capacity"  # load ratio about 0.86 > 0.8
    assert pipes.loc["D1", "hydraulic_status"] == "ok"
    assert pipes.loc["D2", "hydraulic_status"] == "above_bank_full"
    assert pipes.loc["D2", "flags"] == "surcharge;diameter_decrease"  # a smaller channel below a larger one
    assert pipes.loc["D2", "reasons"].startswith(f"load ratio {1.5 / q_full[1]:.2f} > 1.00 (above bank-full); ")
    # no crown, so no cover: neither a shallow_cover flag nor a "no cover" data gap
    assert pipes["up_cover_m"].isna().all()
    assert pipes["down_cover_m"].isna().all()
    assert pipes.loc["D2", "depth_ratio"] == pytest.approx(1.0)
