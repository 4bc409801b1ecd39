"""``sewer-audit inspect`` on a register published as GeoJSON in longitude and latitude.

Invented (no real place): two files in one folder, sizes in metres, flows in m3/s, install years
with 0 for unknown, node kinds in plain words. Expected values are counted here from the data the
test writes.
"""

import tomllib
from pathlib import Path

import geopandas as gpd
import numpy as np
import pytest
from shapely.geometry import LineString, Point

from audit import cli
from audit.config import load_config
from audit.findings import FindingLog
from audit.layers.reading import read_layers

WGS84 = "EPSG:4326"
COUNT = 30


def _write(folder: Path) -> None:
    rows = np.arange(COUNT)
    years = 1955 + rows
    years[[2, 9, 20]] = 0  # unknown years
    lon = -1.5 + 0.0005 * rows
    pipes = gpd.GeoDataFrame(
        {"id": rows + 1, "start_node": [f"N{i}" for i in rows], "end_node": [f"N{i + 1}" for i in rows],
         "diameter": np.array([0.3, 0.45, 0.6])[rows % 3], "flow": 0.01 + 0.005 * rows,
         "year_built": years, "upstream_invert": 50.0 - 0.2 * rows, "downstream_invert": 49.9 - 0.2 * rows},
        geometry=[LineString([(x, 53.0), (x + 0.0005, 53.0)]) for x in lon], crs=WGS84,
    )  # fmt: skip
    kinds = ["manhole"] * (COUNT - 1) + ["pump", "outfall"]
    nodes = gpd.GeoDataFrame(
        {"node_id": [f"N{i}" for i in range(COUNT + 1)], "rim_level": 52.0 - 0.2 * np.arange(COUNT + 1), "kind": kinds},
        geometry=[Point(-1.5 + 0.0005 * i, 53.0) for i in range(COUNT + 1)], crs=WGS84,
    )  # fmt: skip
    pipes.to_file(folder / "pipes.geojson", driver="GeoJSON")
    nodes.to_file(folder / "nodes.geojson", driver="GeoJSON")


@pytest.fixture
def inspected(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> tuple[Path, str, dict[str, object], str]:
    """The folder, the printed summary, the starter config as TOML reads it and as text."""
    folder = tmp_path / "greyford_open_data"
    folder.mkdir()
    _write(folder)
    assert cli.main(["inspect", str(folder)]) == cli.EXIT_OK
    text = (folder / "greyford_open_data.toml").read_text(encoding="utf-8")
    return folder, capsys.readouterr().out, tomllib.loads(text), text


def test_sizes_below_4_in_a_degree_crs_are_metres(inspected: tuple[Path, str, dict[str, object], str]) -> None:
    folder, _, _, text = inspected
    median = np.median(gpd.read_file(folder / "pipes.geojson")["diameter"])
    assert median == 0.45
    assert 'diameter = "m"  # check this: median of diameter is 0.45: below 4, so metres or feet; metres, as the CRS is not in feet' in text


def test_levels_in_a_degree_crs_follow_the_pipe_sizes(inspected: tuple[Path, str, dict[str, object], str]) -> None:
    _, _, _, text = inspected
    why = "the CRS (WGS 84) is not projected and says nothing of lengths; the pipe sizes are in m, so m is taken"
    assert f'upstream_invert = "m"  # check this: {why}' in text
    assert f'rim = "m"  # check this: {why}' in text


def test_flows_in_cubic_metres_per_second(inspected: tuple[Path, str, dict[str, object], str]) -> None:
    folder, out, config, _ = inspected
    pipes = gpd.read_file(folder / "pipes.geojson")
    velocity = np.median(pipes["flow"] / (np.pi * pipes["diameter"] ** 2 / 4))  # m/s if the flows are m3/s
    assert 0.05 < velocity < 3
    assert config["pipes"]["units"]["flow"] == "m3/s"  # type: ignore[index]
    assert f"{velocity:.3g} m/s as m3/s" in out


def test_year_numbers_with_zeros(inspected: tuple[Path, str, dict[str, object], str]) -> None:
    _, _, config, text = inspected
    assert config["pipes"]["fields"]["install_year"] == "year_built"  # type: ignore[index]
    assert config["pipes"]["sentinels"] == {"install_year": [0]}  # type: ignore[index]
    assert "install_year = [0]  # check this: 3 of 30 values are 0, which cannot be a real install year" in text


def test_node_kinds_and_the_config_reads_the_files(inspected: tuple[Path, str, dict[str, object], str]) -> None:
    folder, _, config, _ = inspected
    assert config["manholes"]["kinds"] == {"manhole": "manhole", "pump": "pump_station", "outfall": "outfall"}  # type: ignore[index]
    loaded = load_config(folder / "greyford_open_data.toml")
    assert loaded.manholes is not None
    layers = read_layers(loaded.pipes, manholes=loaded.manholes, options=loaded.input, findings=FindingLog())
    assert layers.pipes.canonical["diameter"].iloc[:3].tolist() == [0.3, 0.45, 0.6]
    assert layers.pipes.canonical["from_node"].iloc[0] == "N0"
    assert layers.manholes is not None
    assert layers.manholes.canonical["manhole_id"].iloc[-1] == "N30"
