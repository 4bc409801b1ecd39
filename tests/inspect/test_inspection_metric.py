"""``sewer-audit inspect`` on a register shaped like a European utility's: one GeoPackage in metres.

Invented (no real place): integer node numbers, sizes in millimetres, shape and use codes, depths
from cover to invert at each pipe end instead of invert levels, a DateTime install date, flows in
l/s with no unit in the name, and a polygon layer of catchments. Expected values are counted here
from the data the test writes.
"""

import datetime as dt
import re
import tomllib
from pathlib import Path

import geopandas as gpd
import numpy as np
import pandas as pd
import pyarrow as pa
import pyogrio
import pytest
from shapely.geometry import LineString, Point, box

from audit.config import load_config
from audit.inspect.inspection import inspect_path

ETRS89_UTM32 = "EPSG:25832"  # a grid in metres
SHAPES = {"C": 30, "E": 6, "R": 3, "ARCH": 1}
USES = {"FW": 28, "SW": 6, "RM": 3, "CSO": 2, "XX": 1}
NODE_TYPES = {"MH": 36, "PS": 2, "OF": 1, "CH": 2}


def _write(folder: Path) -> Path:
    """40 pipes between 41 numbered nodes, 41 nodes and 5 catchments in one GeoPackage."""
    path = folder / "brookfield.gpkg"
    count = 40
    rows = np.arange(count)
    sizes = np.array([150, 225, 300, 300, 375, 450, 600, 300], dtype=np.int64)[rows % 8]
    depth = 1.5 + 0.05 * rows
    depth[[5, 22]] = 0.0  # depth unknown, typed as 0
    pipes = gpd.GeoDataFrame(
        {
            "sewer_ref": [f"S{i:03d}" for i in rows],
            "us_node": rows + 1,
            "ds_node": rows + 2,
            "size": sizes,
            "shape_code": [code for code, used in SHAPES.items() for _ in range(used)],
            "use_code": [code for code, used in USES.items() for _ in range(used)],
            "us_depth": depth,
            "ds_depth": depth + 0.1,
            "laid_on": pd.array([dt.date(1960 + i % 50, 1 + i % 12, 1) for i in rows], dtype=pd.ArrowDtype(pa.date32())),
            "q_design": 2.0 + 1.5 * rows,  # litres per second
        },
        geometry=[LineString([(500000 + 40 * i, 5700000), (500040 + 40 * i, 5700000)]) for i in rows],
        crs=ETRS89_UTM32,
    )
    nodes = gpd.GeoDataFrame(
        {"node_no": np.arange(1, 42), "cover_lvl": 210.0 - 0.2 * np.arange(41),
         "node_type": [code for code, used in NODE_TYPES.items() for _ in range(used)]},
        geometry=[Point(500000 + 40 * i, 5700000) for i in range(41)], crs=ETRS89_UTM32,
    )  # fmt: skip
    areas = gpd.GeoDataFrame(
        {"catch_ref": ["K1", "K2", "K3", "K4", "K5"], "outlet_node": [3, 9, 17, 30, 99], "pop": [120, 340, 80, 410, 55],
         "area_ha": [1.2, 3.4, 0.8, 4.0, 0.6], "imperv": [0.35, 0.5, 0.2, 0.6, 0.4]},
        geometry=[box(500000 + 300 * i, 5700010, 500300 + 300 * i, 5700200) for i in range(5)], crs=ETRS89_UTM32,
    )  # fmt: skip
    pyogrio.write_dataframe(pipes, path, layer="foul_sewers", use_arrow=True)
    pyogrio.write_dataframe(nodes, path, layer="access_points", use_arrow=True)
    pyogrio.write_dataframe(areas, path, layer="subcatchments", use_arrow=True)
    return path


@pytest.fixture
def inspected(tmp_path: Path) -> tuple[Path, str, str]:
    """The GeoPackage, the printed summary and the starter config."""
    path = _write(tmp_path)
    out = inspect_path(path)
    return path, out, (tmp_path / "brookfield.audit.toml").read_text(encoding="utf-8")


def _table(text: str, name: str) -> dict[str, object]:
    """One table of the config as TOML reads it (commented lines left out)."""
    body = text.split(f"\n[{name}]")[1].split("\n[")[0]
    return tomllib.loads(body.split("\n", 1)[1])


def test_integer_node_numbers_join_pipes_to_manholes(inspected: tuple[Path, str, str]) -> None:
    path, out, text = inspected
    pipes = gpd.read_file(path, layer="foul_sewers")
    nodes = gpd.read_file(path, layer="access_points")
    rate = pipes["us_node"].isin(nodes["node_no"]).mean()
    assert rate == 1.0
    assert f"from_node = us_node: {100 * rate:.0f} % of us_node values name a manhole in node_no" in out
    assert _table(text, "pipes.fields")["to_node"] == "ds_node"
    assert _table(text, "manholes.fields")["id"] == "node_no"
    assert "placeholder_ids" not in text  # every end names a manhole


def test_sizes_in_millimetres_from_their_median(inspected: tuple[Path, str, str]) -> None:
    path, _, text = inspected
    sizes = gpd.read_file(path, layer="foul_sewers")["size"]
    assert np.median(sizes) == 300
    assert _table(text, "pipes.units")["diameter"] == "mm"
    assert 'diameter = "mm"  # check this: median of size is 300: millimetres (about 100 to 3,000)' in text
    assert 'upstream_depth = "m"  # check this: CRS unit is metre' in text


def test_depths_at_the_ends_and_a_date_field(inspected: tuple[Path, str, str]) -> None:
    _, _, text = inspected
    fields = _table(text, "pipes.fields")
    assert (fields["upstream_depth"], fields["downstream_depth"]) == ("us_depth", "ds_depth")
    assert "upstream_invert" not in fields
    assert fields["install_year"] == "laid_on"
    assert 'install_year = "laid_on"  # check this: named like install year; a date field' in text
    # two of 40 depths are 0: 5 %, and a depth of 0 is no depth
    assert _table(text, "pipes.sentinels") == {"upstream_depth": [0]}


def test_flow_in_litres_per_second_from_the_pipe_areas(inspected: tuple[Path, str, str]) -> None:
    path, out, text = inspected
    pipes = gpd.read_file(path, layer="foul_sewers")
    area = np.pi * (pipes["size"] / 1000) ** 2 / 4  # m2
    as_m3s = np.median(pipes["q_design"] / area)  # m/s if the flows were m3/s
    as_ls = np.median(pipes["q_design"] / 1000 / area)
    assert as_ls < 3 < as_m3s
    assert _table(text, "pipes.units")["flow"] == "l/s"
    assert f"{as_m3s:.3g} m/s as m3/s, {as_ls:.3g} m/s as l/s: l/s keeps it below 3 m/s" in out


def test_shape_and_use_codes(inspected: tuple[Path, str, str]) -> None:
    path, out, text = inspected
    config = load_config(path.with_name("brookfield.audit.toml"))
    assert dict(config.pipes.shapes) == {"C": "circular", "E": "egg", "R": "rectangular"}
    assert '# "ARCH" = ""  # 1 pipe: no word rule knows this code' in text
    assert dict(config.pipes.kinds) == {"FW": "gravity", "SW": "gravity", "RM": "rising_main", "CSO": "overflow"}
    assert config.manholes is not None
    assert dict(config.manholes.kinds) == {"MH": "manhole", "PS": "pump_station", "OF": "outfall"}
    assert '# "CH" = ""  # 2 manholes: no word rule knows this code' in text
    for code, used in {**SHAPES, **USES}.items():
        assert re.search(rf"'{code}'\s+{used}\s+->", out), code


def test_the_polygon_layer_is_offered_as_catchments_commented_out(inspected: tuple[Path, str, str]) -> None:
    path, out, text = inspected
    assert load_config(path.with_name("brookfield.audit.toml")).catchments is None
    areas = gpd.read_file(path, layer="subcatchments")
    nodes = gpd.read_file(path, layer="access_points")
    rate = areas["outlet_node"].isin(nodes["node_no"]).mean()
    assert rate == 0.8  # node 99 does not exist
    assert "# [catchments]" in text
    assert f'# drains_to = "outlet_node"  # check this: {100 * rate:.0f} % of outlet_node values name a manhole in node_no' in text
    uncommented = "\n".join(line[2:] for line in text.split("# [catchments]")[1].split("\n[network]")[0].splitlines() if line.startswith("# "))
    catchments = tomllib.loads("[catchments]\n" + uncommented)["catchments"]
    assert catchments["fields"] == {"id": "catch_ref", "drains_to": "outlet_node", "population": "pop", "area_ha": "area_ha",
                                    "impervious_fraction": "imperv"}  # fmt: skip
    assert "catchments: brookfield.gpkg, layer 'subcatchments' (the only polygon layer)" in out
