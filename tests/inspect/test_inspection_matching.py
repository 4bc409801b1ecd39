"""The node fields are chosen by how many pipe ends name a manhole; placeholders are found by their use.

Each test writes an invented pipe and manhole layer to a GeoPackage and counts the expected
rates itself from the frames it wrote.
"""

import tomllib
from pathlib import Path

import geopandas as gpd
import numpy as np
import pandas as pd
import pyogrio
import pytest
from shapely.geometry import LineString, Point

from audit.inspect.inspection import inspect_layers, inspect_path
from audit.inspect.listing import describe
from audit.inspect.matching import PLACEHOLDER_USES
from audit.inspect.profiling import SAMPLE

GRID = "EPSG:27700"  # a grid in metres; the coordinates below are invented


def _write(path: Path, pipes: dict[str, object], manholes: dict[str, object] | None) -> None:
    count = len(next(iter(pipes.values())))  # type: ignore[arg-type]
    x = 400000 + 30 * np.arange(count)
    frame = gpd.GeoDataFrame(pipes, geometry=[LineString([(a, 300000), (a + 30, 300000)]) for a in x], crs=GRID)
    pyogrio.write_dataframe(frame, path, layer="sewer_pipes", use_arrow=True)
    if manholes is not None:
        size = len(next(iter(manholes.values())))  # type: ignore[arg-type]
        points = gpd.GeoDataFrame(manholes, geometry=[Point(400000 + 30 * i, 300000) for i in range(size)], crs=GRID)
        pyogrio.write_dataframe(points, path, layer="manholes", use_arrow=True)


def _config(path: Path) -> dict[str, dict[str, object]]:
    inspect_path(path)
    return tomllib.loads(path.with_name(f"{path.stem}.audit.toml").read_text(encoding="utf-8"))


def test_the_manhole_id_field_is_the_one_the_pipes_name(tmp_path: Path) -> None:
    path = tmp_path / "renumbered.gpkg"
    new = [f"SW{100 + i}" for i in range(41)]
    manholes = {"MH_NO": [str(i) for i in range(41)], "ASSET_ID": new}  # the old number is listed first
    pipes = {"PIPE_NO": [f"P{i}" for i in range(40)], "US_NODE": new[:40], "DS_NODE": new[1:]}
    _write(path, pipes, manholes)
    found = inspect_layers(describe(path))
    assert found is not None
    assert found.nodes.manhole_id == "ASSET_ID"
    old = pd.Series(pipes["US_NODE"]).isin(manholes["MH_NO"]).mean()
    assert old == 0
    assert found.nodes.reasons["id"] == "100 % of the pipe ends (US_NODE, DS_NODE) name one of its values; other id candidates (named by US_NODE): MH_NO 0 %"
    assert _config(path)["manholes"]["fields"] == {"id": "ASSET_ID"}


def test_names_that_do_not_say_the_end_take_the_first_field_as_upstream(tmp_path: Path) -> None:
    path = tmp_path / "unsided.gpkg"
    ids = [f"N{i}" for i in range(21)]
    _write(path, {"NODE_A": ids[:20], "NODE_B": ids[1:], "PIPE_NO": list(range(20))}, {"NODE_REF": ids})
    found = inspect_layers(describe(path))
    assert found is not None
    assert (found.nodes.from_node, found.nodes.to_node) == ("NODE_A", "NODE_B")
    assert found.nodes.reasons["from_node"].endswith("the names do not say which end is upstream: the first field is taken")


def test_fields_that_match_no_manhole_are_named_so(tmp_path: Path) -> None:
    path = tmp_path / "unrelated.gpkg"
    _write(path, {"US_MH": [f"A{i}" for i in range(10)], "DS_MH": [f"A{i + 1}" for i in range(10)]},
           {"MH_ID": [f"B{i}" for i in range(11)]})  # fmt: skip
    found = inspect_layers(describe(path))
    assert found is not None
    assert (found.nodes.from_node, found.nodes.to_node, found.nodes.manhole_id) == ("US_MH", "DS_MH", "MH_ID")
    assert found.nodes.reasons["from_node"] == "named like it, but no pair of fields joins pipes to manholes; the best pair, US_MH in MH_ID, matches 0 %"


def test_without_manholes_placeholders_are_found_by_their_use(tmp_path: Path) -> None:
    path = tmp_path / "pipes_only.gpkg"
    up = [f"{i}" for i in range(30)]
    down = [f"{i + 1}" for i in range(24)] + ["0"] * 6  # six stubs drawn to the code 0
    _write(path, {"FROM_NODE": up, "TO_NODE": down}, None)
    found = inspect_layers(describe(path))
    assert found is not None
    assert found.manholes is None
    uses = pd.concat([pd.Series(up), pd.Series(down)]).value_counts()
    assert uses["0"] == 7  # six stubs and the first pipe's upstream end
    assert uses.drop("0").max() < PLACEHOLDER_USES
    assert found.nodes.placeholders == (("0", 7),)
    assert found.nodes.reasons["from_node"] == "named like the upstream node; no manhole layer to count matches against"


@pytest.mark.parametrize("unmatched_every", [7, 40])
def test_rates_shown_are_counted_over_every_pipe(tmp_path: Path, unmatched_every: int) -> None:
    path = tmp_path / "large.gpkg"
    count = 3 * SAMPLE + 11  # more pipes than are sampled while choosing
    ids = np.array([f"M{i}" for i in range(count + 1)], dtype=object)
    up = ids[:count].copy()
    up[::unmatched_every] = "LOST"
    _write(path, {"UPSTREAM_MH": up, "DOWNSTREAM_MH": ids[1:]}, {"MH_ID": ids})
    found = inspect_layers(describe(path))
    assert found is not None
    rate = pd.Series(up).isin(ids).mean()
    assert found.nodes.rate[("UPSTREAM_MH", "MH_ID")] == rate
    assert found.nodes.reasons["from_node"].startswith(f"{100 * rate:.0f} % of UPSTREAM_MH values")
    assert found.nodes.placeholders == (("LOST", int((up == "LOST").sum())),)
