"""The condition table (a CSV and a GeoPackage table) and critical-area layers (GeoPackage), written
with the real libraries and read back; bad rows become findings, unusable files an InputError."""

import csv
from pathlib import Path

import geopandas as gpd
import numpy as np
import pandas as pd
import pyogrio
import pyproj
import pytest
import shapely

from audit.errors import InputError
from audit.findings import FindingLog
from audit.renewal import ConditionSource, CriticalAreaSource, condition_grades, read_condition, read_critical_areas, renewal_programme

from ._network import programme_inputs

UTM = pyproj.CRS.from_epsg(32630)  # the working CRS of these tests [m]


def write_csv(path: Path, rows: list[list[str]]) -> Path:
    with path.open("w", newline="", encoding="utf-8") as handle:
        csv.writer(handle).writerows(rows)
    return path


def test_a_csv_condition_table_is_joined_by_pipe_id_keeping_the_worst_grades(tmp_path: Path) -> None:
    path = write_csv(tmp_path / "cctv.csv", [
        ["ASSET", "SRM", "OPS"],
        ["P1", "4", "2"],
        ["P2", "x", ""],
        ["P3", "7", "1"],
        ["P1", "5", "1"],
        ["", "3", "3"],
        ["P9", "2", "2"],
    ])  # fmt: skip
    findings = FindingLog()
    source = ConditionSource(path, fields={"pipe_id": "asset", "structural": "SRM", "service": "OPS"})  # a field matched ignoring case
    condition = read_condition(source, findings=findings)
    structural, service = condition_grades(condition, np.array(["P1", "P2", "P3", "P4"], dtype=object), findings=findings)
    # P1: the worse of 4 and 5, of 2 and 1; P2: 'x' is no grade; P3: 7 is off the 1-5 scale
    np.testing.assert_array_equal(structural, [5.0, np.nan, np.nan, np.nan])
    np.testing.assert_array_equal(service, [2.0, np.nan, 1.0, np.nan])
    frame = findings.to_frame()
    assert sorted(zip(frame["code"], frame["feature"], strict=True)) == [
        ("duplicate_id", "P1"), ("missing_id", "#4"), ("not_a_number", "P2"), ("not_a_number", "P3"), ("unusual_setting", "renewal.condition")]  # fmt: skip
    message = dict(zip(frame["feature"], frame["message"], strict=True))
    assert message["P3"].startswith("structural grade '7' in field 'SRM'")
    assert "is not a grade from 1 to 5" in message["P3"]
    assert message["renewal.condition"].startswith("1 of 4 pipe ids of the condition table")
    assert "'P9'" in message["renewal.condition"]


def test_a_geopackage_table_with_numeric_ids_matches_the_register_text(tmp_path: Path) -> None:
    path = tmp_path / "inspections.gpkg"
    pyogrio.write_dataframe(pd.DataFrame({"pipe": [12.0, 13.0], "grade": [3, 5]}), path, layer="survey")
    condition = read_condition(ConditionSource(path, fields={"pipe_id": "pipe", "service": "grade"}), findings=FindingLog())
    assert condition.pipe_id.tolist() == ["12", "13"]
    _, service = condition_grades(condition, np.array(["13", "14"], dtype=object), findings=FindingLog())
    np.testing.assert_array_equal(service, [5.0, np.nan])


def test_an_unusable_condition_table_names_file_layer_and_field(tmp_path: Path) -> None:
    path = write_csv(tmp_path / "cctv.csv", [["ASSET", "SRM"], ["P1", "4"]])
    with pytest.raises(InputError, match=r"cctv.csv.*renewal.condition.fields.structural = 'STRUCT' is not a field of the layer; its fields are: ASSET, SRM"):
        read_condition(ConditionSource(path, fields={"pipe_id": "ASSET", "structural": "STRUCT"}), findings=FindingLog())
    with pytest.raises(InputError, match=r"missing.csv: file not found \(from renewal.condition.path\)"):
        read_condition(ConditionSource(tmp_path / "missing.csv", fields={"pipe_id": "ASSET"}), findings=FindingLog())


def write_areas(path: Path) -> None:
    """A railway corridor around x = 300 to 350 m (in WGS 84, so it is projected on reading) and a school beside pipe P1."""
    rail = gpd.GeoDataFrame({"name": ["main line", "empty"]}, geometry=[shapely.box(290, -10, 360, 10), None], crs=UTM).to_crs(4326)
    rail.to_file(path, layer="rail", engine="pyogrio")
    school = gpd.GeoDataFrame({"name": ["school"]}, geometry=[shapely.box(10, 4, 40, 30)], crs=UTM)  # 4 m from P1 (y = 0)
    school.to_file(path, layer="schools", engine="pyogrio")


def test_critical_areas_score_the_pipes_that_cross_them_or_lie_within_the_buffer(tmp_path: Path) -> None:
    path = tmp_path / "areas.gpkg"
    write_areas(path)
    findings = FindingLog()
    sources = (CriticalAreaSource("railway", path, 5, layer="rail"), CriticalAreaSource("school", path, 3, layer="schools", buffer_m=2.0),
               CriticalAreaSource("school, wide", path, 4, layer="schools", buffer_m=5.0))  # fmt: skip
    areas = read_critical_areas(sources, crs=UTM, findings=findings)
    assert areas is not None
    assert areas.names == ("railway", "school", "school, wide")
    assert areas.geometry.size == 3
    assert findings.to_frame()[["layer", "feature", "code"]].values.tolist() == [["critical_areas", "railway #1", "no_geometry"]]
    # pipes P1 to P5 run from x = 100 (i - 1) to 100 (i - 1) + 50 along y = 0; P5 is drawn 8 m north of the railway
    inputs = programme_inputs(5, population_served=np.full(5, 10.0), height=np.full(5, 0.225), critical_areas=areas)
    inputs["geometry"][4] = shapely.LineString([(400, 18), (450, 18)])
    programme = renewal_programme(**inputs)
    # P1: 4 m from the school: outside the 2 m buffer (3), inside the 5 m one (4); P4 crosses the railway (5);
    # P5: 8 m from the railway, outside the default 5 m buffer; the others are far from every area
    # (population 10 and size 225 mm score 1, so the critical area drives wherever it applies)
    np.testing.assert_array_equal(programme.consequence, [4.0, 1.0, 1.0, 5.0, 1.0])
    assert programme.consequence_driver.tolist() == ["critical area: school, wide", "population", "population", "critical area: railway", "population"]


def test_a_critical_area_layer_without_a_crs_needs_one_in_the_config(tmp_path: Path) -> None:
    path = tmp_path / "plain.gpkg"
    with pytest.warns(UserWarning, match="'crs' was not provided"):
        gpd.GeoDataFrame({"name": ["a"]}, geometry=[shapely.box(0, 0, 1, 1)]).to_file(path, engine="pyogrio")
    source = CriticalAreaSource("river", path, 4)
    with pytest.raises(InputError, match=r"plain.gpkg, layer 'plain': the layer has no CRS; give it as renewal.critical_areas\[0\].crs"):
        read_critical_areas((source,), crs=UTM, findings=FindingLog())
    with pytest.raises(InputError, match=r"renewal.critical_areas\[0\].crs = 'EPSG:nowhere' is not a CRS pyproj understands"):
        read_critical_areas((CriticalAreaSource("river", path, 4, crs="EPSG:nowhere"),), crs=UTM, findings=FindingLog())
    areas = read_critical_areas((CriticalAreaSource("river", path, 4, crs="EPSG:32630"),), crs=UTM, findings=FindingLog())
    assert areas is not None
    assert shapely.equals(areas.geometry[0], shapely.box(0, 0, 1, 1))
