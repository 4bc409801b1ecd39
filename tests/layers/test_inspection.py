"""``sewer-audit inspect``: layer listing, guesses, the starter config and exit codes."""

import hashlib
from pathlib import Path

import geopandas as gpd
import pytest
from shapely.geometry import LineString, Point

from audit import cli
from audit.config import load_config
from audit.findings import FindingLog
from audit.layers.inspection import describe, guess_fields, guess_roles, guess_unit
from audit.layers.reading import read_layers

# An invented town on an invented grid; no real place.
UTM = "EPSG:32630"


def _town(folder: Path) -> Path:
    path = folder / "fernhollow.gpkg"
    pipes = gpd.GeoDataFrame(
        {"PIPE_ID": ["F1", "F2"], "US_MH": ["A", "B"], "DS_MH": ["B", "C"], "US_IL": [5.0, 4.6],
         "DS_IL": [4.7, 4.2], "DIA_MM": [225, 300], "FLOW_LPS": [2.0, 4.5]},
        geometry=[LineString([(0, 0), (30, 0)]), LineString([(30, 0), (30, 40)])], crs=UTM,
    )  # fmt: skip
    nodes = gpd.GeoDataFrame(
        {"MH_REF": ["A", "B", "C"], "COVER_LEVEL": [6.5, 6.2, 5.9]},
        geometry=[Point(0, 0), Point(30, 0), Point(30, 40)], crs=UTM,
    )  # fmt: skip
    nodes.to_file(path, layer="chambers")
    pipes.to_file(path, layer="sewer_lines")
    return path


def _digest(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


def test_describe_lists_layers_types_crs_counts_and_fields(tmp_path: Path) -> None:
    layers = {layer.name: layer for layer in describe(_town(tmp_path))}
    assert set(layers) == {"chambers", "sewer_lines"}
    pipes = layers["sewer_lines"]
    assert pipes.geometry_type == "LineString"
    assert pipes.crs == UTM
    assert pipes.features == 2
    assert ("DIA_MM", "int64") in pipes.fields
    assert ("PIPE_ID", "object") in pipes.fields
    assert layers["chambers"].kind == "point"
    assert layers["chambers"].features == 3


def test_geometry_type_is_read_from_features_when_the_file_does_not_say(tmp_path: Path) -> None:
    path = tmp_path / "lines.geojson"
    gpd.GeoDataFrame({"REF": ["X"]}, geometry=[LineString([(0, 0), (1, 1)])], crs="EPSG:4326").to_file(path)
    (layer,) = describe(path)
    assert layer.kind == "line"
    assert layer.crs == "EPSG:4326"


def test_roles_are_guessed_from_geometry_and_names(tmp_path: Path) -> None:
    pipes, manholes = guess_roles(describe(_town(tmp_path)))
    assert pipes is not None
    assert pipes.name == "sewer_lines"
    assert manholes is not None
    assert manholes.name == "chambers"


@pytest.mark.parametrize(
    ("names", "expected"),
    [
        (["ID", "UpstreamInvert", "DownstreamInvert", "Diameter"],
         {"id": "ID", "upstream_invert": "UpstreamInvert", "downstream_invert": "DownstreamInvert",
          "diameter": "Diameter"}),
        (["asset_ref", "from_node", "to_node", "usil", "dsil", "size_in", "matl", "len_ft"],
         {"id": "asset_ref", "from_node": "from_node", "to_node": "to_node", "upstream_invert": "usil",
          "downstream_invert": "dsil", "diameter": "size_in", "material": "matl", "length": "len_ft"}),
        (["OWNER", "COLOUR"], {}),
    ],
)  # fmt: skip
def test_pipe_fields_are_guessed_from_common_names(names: list[str], expected: dict[str, str]) -> None:
    assert guess_fields(names, role="pipes") == expected


def test_manhole_fields_are_guessed_from_common_names() -> None:
    guesses = guess_fields(["NODE_ID", "RIM_ELEV", "INVERT", "DEPTH", "HAS_LID"], role="manholes")
    assert guesses == {"id": "NODE_ID", "rim": "RIM_ELEV", "invert": "INVERT", "depth": "DEPTH", "access": "HAS_LID"}


@pytest.mark.parametrize(
    ("name", "quantity", "unit"),
    [("DIA_MM", "length", "mm"), ("size_in", "length", "in"), ("RIM_FT", "length", "ft"),
     ("Q_CFS", "flow", "cfs"), ("flow_gpm", "flow", "gpm"), ("ADWF_MGD", "flow", "MGD"), ("DIAMETER", "length", None)],
)  # fmt: skip
def test_units_are_read_from_field_names(name: str, quantity: str, unit: str | None) -> None:
    assert guess_unit(name, quantity=quantity) == unit


def test_inspect_writes_a_starter_config_that_loads(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    path = _town(tmp_path)
    before = _digest(path)
    assert cli.main(["inspect", str(path)]) == cli.EXIT_OK
    out = capsys.readouterr().out
    assert "layer 'sewer_lines': LineString, 2 features, CRS EPSG:32630  <- pipes?" in out
    assert "DIA_MM: int64" in out
    config_path = tmp_path / "fernhollow.audit.toml"
    text = config_path.read_text(encoding="utf-8")
    assert 'diameter = "DIA_MM"  # check this' in text
    assert 'flow = "l/s"  # check this' in text
    config = load_config(config_path)
    layers = read_layers(config.pipes, manholes=config.manholes, options=config.input, findings=FindingLog())
    assert layers.pipes.canonical["pipe_id"].tolist() == ["F1", "F2"]
    assert layers.pipes.canonical["diameter"].tolist() == [0.225, 0.3]  # 225 mm and 300 mm
    assert layers.manholes is not None
    assert layers.manholes.canonical["rim"].tolist() == [6.5, 6.2, 5.9]
    assert _digest(path) == before


def test_existing_config_is_never_overwritten(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    path = _town(tmp_path)
    target = tmp_path / "mine.toml"
    target.write_text("# my own settings\n", encoding="utf-8")
    assert cli.main(["inspect", str(path), "--config-out", str(target)]) == cli.EXIT_OK
    assert target.read_text(encoding="utf-8") == "# my own settings\n"
    assert "exists and was left unchanged" in capsys.readouterr().out


def test_config_out_chooses_the_file(tmp_path: Path) -> None:
    path = _town(tmp_path)
    target = tmp_path / "configs" / "town.toml"
    target.parent.mkdir()
    assert cli.main(["inspect", str(path), "--config-out", str(target)]) == cli.EXIT_OK
    assert load_config(target).pipes.path == path.resolve()


def test_layer_without_crs_gets_a_crs_reminder(tmp_path: Path) -> None:
    path = tmp_path / "drains.shp"
    frame = gpd.GeoDataFrame({"REF": ["D1"]}, geometry=[LineString([(0, 0), (5, 0)])])
    with pytest.warns(UserWarning, match="'crs' was not provided"):
        frame.to_file(path)
    assert cli.main(["inspect", str(tmp_path)]) == cli.EXIT_OK
    text = (tmp_path / f"{tmp_path.name}.audit.toml").read_text(encoding="utf-8")
    assert "# required: the layer has no CRS" in text
    assert 'path = "drains.shp"' in text


def test_missing_file_exits_1_naming_the_file(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    missing = tmp_path / "nowhere.gpkg"
    assert cli.main(["inspect", str(missing)]) == cli.EXIT_BAD_INPUT
    assert f"{missing}: file not found" in capsys.readouterr().err


def test_unreadable_file_exits_1_naming_the_file(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    path = tmp_path / "broken.gpkg"
    path.write_bytes(b"this is not a vector file")
    assert cli.main(["inspect", str(path)]) == cli.EXIT_BAD_INPUT
    assert f"{path}: not a readable vector file" in capsys.readouterr().err
    assert path.read_bytes() == b"this is not a vector file"
