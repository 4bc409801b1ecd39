"""Fields as real registers hold them: dates, per-field sentinels, kind codes, end depths, types kept."""

import datetime as dt
import sqlite3
from contextlib import closing
from pathlib import Path

import geopandas as gpd
import numpy as np
import pandas as pd
import pyarrow as pa
import pyogrio
import pytest
from shapely.geometry import LineString, Point

from audit.config import load_config
from audit.findings import FindingLog
from audit.layers.reading import Layers, read_layers

UTM = "EPSG:32630"  # an invented grid in UTM zone 30N numbers, no real place


def _lines(count: int) -> list[LineString]:
    return [LineString([(500000 + 50 * i, 5700000), (500050 + 50 * i, 5700000)]) for i in range(count)]


def _read(config_text: str, folder: Path, engine: str) -> tuple[Layers, pd.DataFrame]:
    path = folder / "audit.toml"
    path.write_text(f'[input]\nengine = "{engine}"\n{config_text}', encoding="utf-8")
    loaded = load_config(path)
    findings = FindingLog()
    layers = read_layers(loaded.pipes, manholes=loaded.manholes, options=loaded.input, findings=findings)
    return layers, findings.to_frame()


def test_install_dates_from_date_and_datetime_fields(tmp_path: Path, engine: str) -> None:
    frame = gpd.GeoDataFrame(
        {
            "REF": ["A", "B", "C"],
            "LAID": pd.array([dt.date(1987, 10, 31), None, dt.date(1902, 1, 2)], dtype=pd.ArrowDtype(pa.date32())),
            "SURVEYED": pd.to_datetime(["1985-11-01 10:00:00", None, "2019-06-30 23:59:00"]),
        },
        geometry=_lines(3),
        crs=UTM,
    )
    pyogrio.write_dataframe(frame, tmp_path / "pipes.gpkg", use_arrow=True)
    info = pyogrio.read_info(tmp_path / "pipes.gpkg")
    assert dict(zip(info["fields"], info["dtypes"], strict=True)) == {"REF": "object", "LAID": "datetime64[D]", "SURVEYED": "datetime64[ms]"}
    for field, expected in (("LAID", [1987.0, np.nan, 1902.0]), ("SURVEYED", [1985.0, np.nan, 2019.0])):
        layers, found = _read(f'[pipes]\npath = "pipes.gpkg"\n[pipes.fields]\nid = "REF"\ninstall_year = "{field}"\n', tmp_path, engine)
        np.testing.assert_array_equal(layers.pipes.canonical["install_year"], expected)
        assert found.empty  # an empty date is no date, silently; never an epoch count


def test_install_dates_from_text_and_numbers(tmp_path: Path, engine: str) -> None:
    text = ["1987-10-31", "10/31/1987", "31/10/1987", "31.10.1987", "1987", "1987-10-31T08:00:00", "", None,
            "13/13/1987", "yesterday", "87"]  # fmt: skip
    numbers = [1987, 1902, 0, -9999, 499651200000, 1987, 2024, 1999, 1850, 2199, 2300]
    frame = gpd.GeoDataFrame({"REF": [f"P{i}" for i in range(11)], "LAID_TXT": text, "LAID_NUM": numbers},
                             geometry=_lines(11), crs=UTM)  # fmt: skip
    frame.to_file(tmp_path / "pipes.gpkg")
    base = '[pipes]\npath = "pipes.gpkg"\n[pipes.fields]\nid = "REF"\n'
    layers, found = _read(base + 'install_year = "LAID_TXT"\n', tmp_path, engine)
    years = layers.pipes.canonical["install_year"].to_numpy()
    np.testing.assert_array_equal(years, [1987] * 6 + [np.nan] * 5)
    assert found["feature"].tolist() == ["P8", "P9", "P10"]
    assert set(found["code"]) == {"not_a_date"}
    assert found["message"].iloc[0] == "install date field 'LAID_TXT' = '13/13/1987' is neither a date nor a year; no year is taken"
    layers, found = _read(base + 'install_year = "LAID_NUM"\n', tmp_path, engine)
    # 0 is no year; -9999 is a global sentinel; an epoch count in milliseconds is no year
    np.testing.assert_array_equal(layers.pipes.canonical["install_year"], [1987, 1902, np.nan, np.nan, np.nan, 1987, 2024, 1999, 1850, 2199, np.nan])
    assert found[["feature", "code"]].values.tolist() == [["P2", "not_a_date"], ["P4", "not_a_date"], ["P10", "not_a_date"]]


def test_sentinels_per_field_leave_the_same_value_alone_elsewhere(tmp_path: Path, engine: str) -> None:
    frame = gpd.GeoDataFrame(
        {"REF": ["A", "B", "C"], "DIA": [300.0, 0.0, 225.0], "US_IL": [0.0, 12.5, 11.0], "DS_IL": [0.0, 12.1, 10.6]},
        geometry=_lines(3), crs=UTM,
    )  # fmt: skip
    frame.to_file(tmp_path / "pipes.gpkg")
    text = ('[pipes]\npath = "pipes.gpkg"\n[pipes.fields]\nid = "REF"\ndiameter = "DIA"\nupstream_invert = "US_IL"\n'
            'downstream_invert = "DS_IL"\n[pipes.sentinels]\nupstream_invert = 0\n')  # fmt: skip
    layers, found = _read(text, tmp_path, engine)
    canonical = layers.pipes.canonical
    # 0 means unknown in the upstream invert only: a downstream invert of 0 m (datum level) stays
    np.testing.assert_array_equal(canonical["upstream_invert"], [np.nan, 12.5, 11.0])
    np.testing.assert_array_equal(canonical["downstream_invert"], [0.0, 12.1, 10.6])
    assert found[["feature", "code"]].values.tolist() == [["B", "nonpositive_size"], ["A", "sentinel_value"]]
    assert found["message"].iloc[1] == "upstream_invert field 'US_IL' = '0.0' is a 'missing' sentinel"


def test_kind_codes_map_to_canonical_kinds(tmp_path: Path, engine: str) -> None:
    pipes = gpd.GeoDataFrame({"REF": ["A", "B", "C", "D", "E", "F"], "TYPE": ["GRAV", "FM", "aband", "Siphon", None, "CULV"]},
                             geometry=_lines(6), crs=UTM)  # fmt: skip
    pipes.to_file(tmp_path / "pipes.gpkg")
    nodes = gpd.GeoDataFrame({"MH": ["1", "2", "3"], "CLASS": ["MH", "LS", "JB"]},
                             geometry=[Point(500000, 5700000), Point(500050, 5700000), Point(500100, 5700000)], crs=UTM)  # fmt: skip
    nodes.to_file(tmp_path / "nodes.gpkg")
    text = ('[pipes]\npath = "pipes.gpkg"\n[pipes.fields]\nid = "REF"\nkind = "TYPE"\n'
            '[pipes.kinds]\nGRAV = "gravity"\nFM = "rising_main"\nABAND = "abandoned"\n'
            '[manholes]\npath = "nodes.gpkg"\n[manholes.fields]\nid = "MH"\nkind = "CLASS"\n'
            '[manholes.kinds]\nMH = "manhole"\nLS = "pump_station"\nJB = "chamber"\n')  # fmt: skip
    layers, found = _read(text, tmp_path, engine)
    # codes match the table ignoring case; a canonical word needs no table; unknown -> gravity
    assert layers.pipes.canonical["kind"].tolist() == ["gravity", "rising_main", "abandoned", "siphon", "gravity", "gravity"]
    assert layers.manholes is not None
    assert layers.manholes.canonical["kind"].tolist() == ["manhole", "pump_station", "chamber"]
    assert layers.manholes.canonical["access"].tolist() == [True, True, False]  # a chamber has no cover to open
    assert found[["feature", "code"]].values.tolist() == [["F", "unknown_kind"]]
    assert found["message"].iloc[0] == (
        "kind field 'TYPE' = 'CULV' is neither in [pipes.kinds] nor one of gravity, private, rising_main, siphon, "
        "overflow, abandoned; taken as gravity"
    )


def test_end_depths_are_read_in_their_unit(tmp_path: Path, engine: str) -> None:
    frame = gpd.GeoDataFrame({"REF": ["A", "B"], "US_DEPTH": [6.5, 0.0], "DS_DEPTH": [7.0, 8.2]}, geometry=_lines(2), crs=UTM)
    frame.to_file(tmp_path / "pipes.gpkg")
    text = ('[pipes]\npath = "pipes.gpkg"\n[pipes.fields]\nid = "REF"\nupstream_depth = "US_DEPTH"\n'
            'downstream_depth = "DS_DEPTH"\n[pipes.units]\nupstream_depth = "ft"\ndownstream_depth = "ft"\n')  # fmt: skip
    layers, found = _read(text, tmp_path, engine)
    # Source: NIST SP 811 (2008), appendix B: 1 ft = 0.3048 m exactly; a depth of 0 is no depth
    np.testing.assert_allclose(layers.pipes.canonical["upstream_depth"], [6.5 * 0.3048, np.nan])
    np.testing.assert_allclose(layers.pipes.canonical["downstream_depth"], [7.0 * 0.3048, 8.2 * 0.3048])
    assert found[["feature", "code"]].values.tolist() == [["B", "nonpositive_size"]]


def test_integer_and_date_fields_keep_their_types_in_the_output(tmp_path: Path, engine: str) -> None:
    from audit.outputs import write_outputs
    from audit.pipeline import run

    frame = gpd.GeoDataFrame(
        {
            "REF": ["A", "B"],
            "DIA": pd.array([300, None], dtype="Int32"),
            "YEAR": pd.array([1987, 1990], dtype="Int16"),
            "LAID": pd.array([dt.date(1987, 10, 31), None], dtype=pd.ArrowDtype(pa.date32())),
        },
        geometry=_lines(2), crs=UTM,
    )  # fmt: skip
    pyogrio.write_dataframe(frame, tmp_path / "pipes.gpkg", use_arrow=True)
    config = tmp_path / "audit.toml"
    config.write_text(f'[input]\nengine = "{engine}"\n[pipes]\npath = "pipes.gpkg"\n[pipes.fields]\nid = "REF"\n'
                      'diameter = "DIA"\ninstall_year = "LAID"\n', encoding="utf-8")  # fmt: skip
    write_outputs(run(config), tmp_path / "out")
    with closing(sqlite3.connect(tmp_path / "out" / "audit.gpkg")) as database:
        declared = {row[1]: row[2] for row in database.execute("PRAGMA table_info(pipes)")}
    assert declared["DIA"] == "MEDIUMINT"  # GeoPackage 1.3, table 1: MEDIUMINT is a 32-bit integer
    assert declared["YEAR"] == "SMALLINT"
    assert declared["LAID"] == "DATE"
    back = pyogrio.read_dataframe(tmp_path / "out" / "audit.gpkg", layer="pipes")
    assert back["DIA"].iloc[0] == 300
    assert pd.isna(back["DIA"].iloc[1])


@pytest.mark.parametrize("ext", ["gpkg", "shp"])
def test_a_zero_size_is_no_size_in_any_format(tmp_path: Path, ext: str) -> None:
    frame = gpd.GeoDataFrame({"REF": ["A"], "DIA": [0.0]}, geometry=_lines(1), crs=UTM)
    frame.to_file(tmp_path / f"pipes.{ext}")
    layers, found = _read(f'[pipes]\npath = "pipes.{ext}"\n[pipes.fields]\nid = "REF"\ndiameter = "DIA"\n', tmp_path, "pyogrio")
    assert np.isnan(layers.pipes.canonical["diameter"].iloc[0])
    assert found["code"].tolist() == ["nonpositive_size"]
