"""The name rules, the word rules for codes and the recognition of dates, on names and layers written here."""

import datetime as dt
from pathlib import Path

import geopandas as gpd
import pandas as pd
import pyarrow as pa
import pyogrio
import pytest
from shapely.geometry import LineString, box

from audit.inspect.codes import NODE_KIND_WORDS, PIPE_KIND_WORDS, SHAPE_WORDS, read_code
from audit.inspect.guessing import guess_fields, guess_unit, node_candidates, side_of
from audit.inspect.inspection import inspect_layers
from audit.inspect.listing import describe

UTM = "EPSG:32630"  # an invented grid in UTM zone 30N numbers, no real place


def _lines(count: int) -> list[LineString]:
    return [LineString([(500000 + 25 * i, 5600000), (500025 + 25 * i, 5600000)]) for i in range(count)]


@pytest.mark.parametrize(
    ("names", "expected"),
    [
        (["ID", "UpstreamInvert", "DownstreamInvert", "Diameter"],
         {"id": "ID", "upstream_invert": "UpstreamInvert", "downstream_invert": "DownstreamInvert", "diameter": "Diameter"}),
        (["asset_ref", "usil", "dsil", "size_in", "matl", "len_ft"],
         {"id": "asset_ref", "upstream_invert": "usil", "downstream_invert": "dsil", "diameter": "size_in", "material": "matl",
          "length": "len_ft"}),
        (["US_DEPTH", "DepthDS", "INV_UP", "INV_DN"],
         {"upstream_depth": "US_DEPTH", "downstream_depth": "DepthDS", "upstream_invert": "INV_UP", "downstream_invert": "INV_DN"}),
        (["Shape_Length", "PIPE_LEN", "FLOW_DIR", "DES_Q"], {"length": "PIPE_LEN", "flow": "DES_Q"}),
        (["OWNER_NAME", "COLOUR"], {}),
    ],
)  # fmt: skip
def test_pipe_fields_are_guessed_from_common_names(names: list[str], expected: dict[str, str]) -> None:
    assert {key: guess.value for key, guess in guess_fields(names, role="pipes").items()} == expected


def test_manhole_fields_are_guessed_from_common_names() -> None:
    guesses = guess_fields(["RIM_ELEV", "INVERT", "DEPTH", "HAS_LID", "POP_SERVED", "POINT_LOAD"], role="manholes")
    assert {key: guess.value for key, guess in guesses.items()} == {
        "rim": "RIM_ELEV", "invert": "INVERT", "depth": "DEPTH", "access": "HAS_LID", "population": "POP_SERVED",
        "point_load": "POINT_LOAD"}  # fmt: skip


@pytest.mark.parametrize(
    ("name", "side"),
    [("US_MH", "up"), ("FromNode", "up"), ("dsmh", "down"), ("TO_STRUCT", "down"), ("NODE1", "up"), ("NODE2", "down"),
     ("UPSTREAM", "up"), ("NODE_A", None), ("DIAMETER", None)],
)  # fmt: skip
def test_the_end_a_name_belongs_to(name: str, side: str | None) -> None:
    assert side_of(name) == side


def test_node_candidates_leave_levels_and_the_pipe_id_out() -> None:
    assert node_candidates(["PIPE_ID", "UP_INV", "US_NODE", "FROM", "TO", "DS_NODE", "NODE_X"]) == (
        ["US_NODE", "FROM"], ["DS_NODE", "TO"], ["NODE_X"])  # fmt: skip


@pytest.mark.parametrize(
    ("name", "quantity", "unit"),
    [("DIA_MM", "length", "mm"), ("size_in", "length", "in"), ("RIM_FT", "length", "ft"), ("Q_CFS", "flow", "cfs"),
     ("flow_gpm", "flow", "gpm"), ("ADWF_MGD", "flow", "MGD"), ("FlowLps", "flow", "l/s"), ("DIAMETER", "length", None)],
)  # fmt: skip
def test_units_are_read_from_field_names(name: str, quantity: str, unit: str | None) -> None:
    assert guess_unit(name, quantity=quantity) == unit


PIPE_KIND_CODES = {
    "GRAVITY MAIN": "gravity", "Sanitary Sewer": "gravity", "ForceMain": "rising_main", "FM": "rising_main",
    "Pressure Main": "rising_main", "RISING MAIN": "rising_main", "Abandoned Force Main": "abandoned", "ABAND": "abandoned",
    "Inverted Siphon": "siphon", "CSO": "overflow", "Emergency Overflow": "overflow", "PRIVATE": "private",
    "Service Lateral": "private", "ROOF": None, "12": None,
}  # fmt: skip
SHAPE_CODES = {
    "CIRC": "circular", "Circular": "circular", "C": "circular", "BOX": "rectangular", "RCB": "rectangular",
    "Rectangular": "rectangular", "EGG": "egg", "Ovoid": "egg", "Open Channel": "open_rectangular",
    "RECT OPEN": "open_rectangular", "Trapezoidal Ditch": "trapezoidal", "SWALE": "trapezoidal", "ARCH": None, "Horseshoe": None,
}  # fmt: skip
NODE_KIND_CODES = {
    "SSMH": "manhole", "Manhole": "manhole", "MH": "manhole", "Lift Station": "pump_station", "PS": "pump_station",
    "Pump": "pump_station", "OUTFALL": "outfall", "OF": "outfall", "ROOF DRAIN": None, "Junction Box": "chamber",
    "Cleanout": "chamber", "Inspection Chamber": "chamber",
}  # fmt: skip
WORD_CASES = [
    (rules, code, expected)
    for rules, codes in ((PIPE_KIND_WORDS, PIPE_KIND_CODES), (SHAPE_WORDS, SHAPE_CODES), (NODE_KIND_WORDS, NODE_KIND_CODES))
    for code, expected in codes.items()
]


@pytest.mark.parametrize(("rules", "code", "expected"), WORD_CASES, ids=[f"{expected}:{code}" for _, code, expected in WORD_CASES])
def test_word_rules_read_codes(rules: tuple[tuple[str, str], ...], code: str, expected: str | None) -> None:
    assert read_code(code, rules)[0] == expected


DATES = {
    "iso": ["1987-10-31", "1990-01-02", "2001-12-31T08:00:00"],
    "month_first": ["10/31/1987", "1/2/1990", "12/31/2001"],
    "day_first": ["31.10.1987", "2.1.1990", "31.12.2001"],
    "bare_year": ["1987", "1990", "2001"],
}


def _install_date(tmp_path: Path, columns: dict[str, object]) -> tuple[str, str] | None:
    """Write one pipe layer with these columns, inspect it, and return its install-date guess (field, reason)."""
    count = len(next(iter(columns.values())))  # type: ignore[arg-type]
    path = tmp_path / "pipes.gpkg"
    pyogrio.write_dataframe(gpd.GeoDataFrame(columns, geometry=_lines(count), crs=UTM), path, use_arrow=True)
    found = inspect_layers(describe(path))
    assert found is not None
    guess = found.pipes.guess.fields.get("install_year")
    return None if guess is None else (guess.value, guess.reason)


@pytest.mark.parametrize("style", sorted(DATES))
def test_date_text_is_taken_as_the_install_date(tmp_path: Path, style: str) -> None:
    found = _install_date(tmp_path, {"PIPE_REF": ["A", "B", "C"], "INSTALL_DT": DATES[style], "REMARK": ["x", "y", "z"]})
    assert found == ("INSTALL_DT", "named like install year; 100 % of its values are dates or years")


def test_date_fields_but_not_inspection_dates(tmp_path: Path) -> None:
    found = _install_date(tmp_path, {
        "PIPE_REF": ["A", "B"],
        "LAST_INSPECTED": pd.array([dt.date(2019, 5, 1), dt.date(2020, 6, 2)], dtype=pd.ArrowDtype(pa.date32())),
        "DATE_LAID": pd.to_datetime(["1975-03-01 00:00:00", "1981-07-15 00:00:00"]),
    })  # fmt: skip
    assert pyogrio.read_info(tmp_path / "pipes.gpkg")["dtypes"].tolist() == ["object", "datetime64[D]", "datetime64[ms]"]
    assert found == ("DATE_LAID", "named like install year; a date field")


def test_text_that_is_not_dates_is_no_install_date(tmp_path: Path) -> None:
    assert _install_date(tmp_path, {"INSTALLED": ["yes", "no", "1987"]}) is None


def test_describe_lists_layers_types_crs_counts_and_fields(tmp_path: Path) -> None:
    path = tmp_path / "two.gpkg"
    gpd.GeoDataFrame({"REF": ["A", "B"], "DIA": [225, 300]}, geometry=_lines(2), crs=UTM).to_file(path, layer="sewer_lines")
    (layer,) = describe(path)
    assert (layer.name, layer.geometry_type, layer.crs, layer.features, layer.kind) == ("sewer_lines", "LineString", UTM, 2, "line")
    assert layer.fields == (("REF", "object"), ("DIA", "int64"))


def test_geometry_type_is_read_from_features_when_the_file_does_not_say(tmp_path: Path) -> None:
    path = tmp_path / "lines.geojson"
    gpd.GeoDataFrame({"REF": ["X"]}, geometry=[LineString([(0, 0), (1, 1)])], crs="EPSG:4326").to_file(path)
    (layer,) = describe(path)
    assert layer.kind == "line"
    assert layer.crs == "EPSG:4326"


def test_a_percentage_is_no_fraction(tmp_path: Path) -> None:
    path = tmp_path / "storm.gpkg"
    gpd.GeoDataFrame({"PIPE_REF": ["A", "B"]}, geometry=_lines(2), crs=UTM).to_file(path, layer="storm_pipes")
    areas = [box(500000 + 100 * i, 5600010, 500090 + 100 * i, 5600090) for i in range(3)]
    gpd.GeoDataFrame({"AREA_REF": ["C1", "C2", "C3"], "IMPERV_PCT": [35.0, 50.0, 20.0], "RUNOFF_C": [0.4, 0.6, 0.3]},
                     geometry=areas, crs=UTM).to_file(path, layer="catchments")  # fmt: skip
    found = inspect_layers(describe(path))
    assert found is not None
    assert found.catchments is not None
    fields = {key: guess.value for key, guess in found.catchments.guess.fields.items()}
    assert fields == {"id": "AREA_REF", "runoff_coefficient": "RUNOFF_C"}  # 35 % is not a fraction from 0 to 1
