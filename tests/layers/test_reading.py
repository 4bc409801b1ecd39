"""Reading pipe and manhole layers: formats, engines, CRS, geometry, fields and bad input."""

import sqlite3
import struct
from collections.abc import Callable
from contextlib import closing
from pathlib import Path

import geopandas as gpd
import numpy as np
import pandas as pd
import pyproj
import pytest
import shapely
from shapely.geometry import LineString, MultiLineString, Point

from audit.config import load_config
from audit.errors import InputError
from audit.findings import FindingLog
from audit.layers.reading import Layers, read_layers

# An invented town on an invented grid (metres, UTM zone 30N numbers, no real place).
UTM = "EPSG:32630"
DRIVERS = {"gpkg": "GPKG", "shp": "ESRI Shapefile", "geojson": "GeoJSON", "fgb": "FlatGeobuf"}
MapConfig = Callable[[str], Path]
Check = Callable[[], None]


def _pipes() -> gpd.GeoDataFrame:
    return gpd.GeoDataFrame(
        {
            "REF": ["P1", "P2", "P3"],
            "US_MH": ["M1", "M2", "M3"],
            "DS_MH": ["M2", "M3", "M4"],
            "DIA_MM": [225.0, 300.0, 375.0],
            "US_IL": [10.0, 9.5, 9.0],
            "DS_IL": [9.6, 9.1, 8.5],
            "FLOW_LS": [5.0, 12.5, 30.0],
            "MAT": ["VC", "PVC", "CONC"],
        },
        geometry=[LineString([(500000, 5700000), (500040, 5700000)]),
                  LineString([(500040, 5700000), (500080, 5700030)]),
                  LineString([(500080, 5700030), (500080, 5700090)])],
        crs=UTM,
    )  # fmt: skip


def _manholes() -> gpd.GeoDataFrame:
    return gpd.GeoDataFrame(
        {"MH": ["M1", "M2", "M3", "M4"], "COVER": [11.5, 11.2, 10.9, 10.4], "LID": ["Y", "Y", "N", "yes"]},
        geometry=[Point(500000, 5700000), Point(500040, 5700000), Point(500080, 5700030), Point(500080, 5700090)],
        crs=UTM,
    )


def _write(frame: gpd.GeoDataFrame, folder: Path, name: str, ext: str) -> Path:
    path = folder / f"{name}.{ext}"
    # without a spatial index FlatGeobuf keeps the features in the order written
    options = {"SPATIAL_INDEX": "NO"} if ext in ("fgb", "gpkg") else {}
    if frame.crs is None:
        with pytest.warns(UserWarning, match="'crs' was not provided"):
            frame.to_file(path, driver=DRIVERS[ext], **options)
    else:
        frame.to_file(path, driver=DRIVERS[ext], **options)
    return path


def _write_measured_line(folder: Path) -> Path:
    """A GeoPackage holding one LINESTRING ZM; the writers drop M, so the blob is set directly."""
    path = _write(gpd.GeoDataFrame({"REF": ["Z"]}, geometry=[LineString([(0, 0, 5), (10, 0, 4)])], crs=UTM),
                  folder, "pipes", "gpkg")  # fmt: skip
    line = shapely.from_wkt("LINESTRING ZM (0 0 5 1, 10 0 4 2)")
    # Source: OGC GeoPackage 1.3 standard, 2.1.3: "GP", version 0, flags (little endian, no envelope), srs_id
    blob = b"GP\x00\x01" + struct.pack("<i", 32630) + shapely.to_wkb(line, flavor="iso", output_dimension=4, byte_order=1)
    with closing(sqlite3.connect(path)) as database:
        database.execute("UPDATE pipes SET geom = ?", (blob,))
        database.execute("UPDATE gpkg_geometry_columns SET m = 1")
        database.commit()
    return path


PIPE_FIELDS = """
[pipes.fields]
id = "REF"
from_node = "US_MH"
to_node = "DS_MH"
diameter = "DIA_MM"
upstream_invert = "US_IL"
downstream_invert = "DS_IL"
flow = "FLOW_LS"
material = "MAT"
"""


def _read(config: Path) -> tuple[Layers, FindingLog]:
    findings = FindingLog()
    loaded = load_config(config)
    layers = read_layers(loaded.pipes, manholes=loaded.manholes, catchments=loaded.catchments, options=loaded.input, findings=findings)
    return layers, findings


def _pipes_config(path: Path, extra: str = "") -> str:
    return f'[pipes]\npath = "{path.name}"\n{extra}'


@pytest.mark.parametrize("ext", ["gpkg", "shp"])
def test_original_frame_is_what_geopandas_reads(tmp_path: Path, make_config: MapConfig, engine: str, ext: str) -> None:
    path = _write(_pipes(), tmp_path, "pipes", ext)
    layers, _ = _read(make_config(_pipes_config(path, PIPE_FIELDS)))
    options = {"use_arrow": True} if engine == "pyogrio" else {}
    direct = gpd.read_file(path, engine=engine, **options)
    pd.testing.assert_frame_equal(layers.pipes.original, direct)
    assert list(layers.pipes.original.columns) == [*_pipes().columns]


@pytest.mark.parametrize("ext", list(DRIVERS))
def test_each_format_gives_canonical_si_columns(tmp_path: Path, make_config: MapConfig, ext: str) -> None:
    path = _write(_pipes(), tmp_path, "pipes", ext)
    layers, findings = _read(make_config(_pipes_config(path, PIPE_FIELDS)))
    pipes = layers.pipes.canonical
    assert len(findings) == 0
    assert pipes["pipe_id"].tolist() == ["P1", "P2", "P3"]
    assert pipes["from_node"].tolist() == ["M1", "M2", "M3"]
    assert pipes["to_node"].tolist() == ["M2", "M3", "M4"]
    np.testing.assert_allclose(pipes["diameter"], [0.225, 0.300, 0.375])  # mm to m by definition
    np.testing.assert_allclose(pipes["flow"], [0.005, 0.0125, 0.030])  # l/s to m3/s by definition
    np.testing.assert_allclose(pipes["upstream_invert"], [10.0, 9.5, 9.0])
    assert pipes["shape"].tolist() == ["circular"] * 3
    assert pipes.index.equals(layers.pipes.original.index)
    assert layers.crs == pyproj.CRS(UTM)
    assert layers.pipes.layer == "pipes"
    np.testing.assert_allclose(pipes.length, [40.0, 50.0, 60.0])  # 3-4-5 triangle, by hand


def test_units_from_the_config_are_converted(tmp_path: Path, make_config: MapConfig) -> None:
    frame = _pipes().assign(DIA_MM=[9.0, 12.0, 15.0], US_IL=[100.0, 90.0, 80.0], FLOW_LS=[1.0, 2.0, 0.5])
    path = _write(frame, tmp_path, "pipes", "gpkg")
    units = '[pipes.units]\ndiameter = "in"\nupstream_invert = "ft"\nflow = "cfs"\n'
    layers, _ = _read(make_config(_pipes_config(path, PIPE_FIELDS + units)))
    pipes = layers.pipes.canonical
    # Source: NIST SP 811 (2008), appendix B: 1 in = 0.0254 m, 1 ft = 0.3048 m exactly
    np.testing.assert_allclose(pipes["diameter"], [0.2286, 0.3048, 0.381])
    np.testing.assert_allclose(pipes["upstream_invert"], [30.48, 27.432, 24.384])
    np.testing.assert_allclose(pipes["flow"], [0.028316846592, 0.056633693184, 0.014158423296])


def test_pipes_and_manholes_in_different_files_formats_and_crs(tmp_path: Path, make_config: MapConfig) -> None:
    pipes = _write(_pipes(), tmp_path, "pipes", "shp")
    manholes = _write(_manholes().to_crs("EPSG:4326"), tmp_path, "nodes", "geojson")
    body = _pipes_config(pipes, PIPE_FIELDS) + (
        f'[manholes]\npath = "{manholes.name}"\n[manholes.fields]\nid = "MH"\nrim = "COVER"\naccess = "LID"\n'
    )
    layers, findings = _read(make_config(body))
    assert layers.manholes is not None
    assert len(findings) == 0
    nodes = layers.manholes.canonical
    assert nodes.crs == pyproj.CRS(UTM)
    np.testing.assert_allclose(shapely.get_x(nodes.geometry.values), [500000, 500040, 500080, 500080], atol=1e-3)
    assert nodes["access"].tolist() == [True, True, False, True]
    np.testing.assert_allclose(nodes["rim"], [11.5, 11.2, 10.9, 10.4])
    assert layers.missing_fields["manholes"] == ("kind", "invert", "depth", "inflow", "population", "point_load")


def test_geographic_layer_is_projected_and_lengths_match_the_ellipsoid(tmp_path: Path, make_config: MapConfig) -> None:
    lines = [LineString([(-27.5, 40.0), (-27.49, 40.004), (-27.48, 40.0)]), LineString([(-27.2, 40.3), (-27.2, 40.31)])]
    path = _write(gpd.GeoDataFrame({"REF": ["A", "B"]}, geometry=lines, crs="EPSG:4326"), tmp_path, "lines", "geojson")
    layers, _ = _read(make_config(_pipes_config(path)))
    assert layers.crs.is_projected
    assert layers.crs.axis_info[0].unit_name == "metre"
    # Source: pyproj.Geod.line_length on the WGS84 ellipsoid (an independent geodesic length)
    geod = pyproj.Geod(ellps="WGS84")
    expected = [geod.line_length(*line.xy) for line in lines]
    np.testing.assert_allclose(layers.pipes.canonical.length, expected, rtol=1e-3)


def test_layer_without_crs_names_file_and_layer(tmp_path: Path, make_config: MapConfig, unchanged: Check) -> None:
    path = _write(_pipes().set_crs(None, allow_override=True), tmp_path, "pipes", "shp")
    unchanged()
    with pytest.raises(InputError) as error:
        _read(make_config(_pipes_config(path)))
    assert str(path) in str(error.value)
    assert "layer 'pipes'" in str(error.value)
    assert "pipes.crs" in str(error.value)
    unchanged()


def test_crs_from_the_config_is_used_when_the_layer_has_none(tmp_path: Path, make_config: MapConfig) -> None:
    path = _write(_pipes().set_crs(None, allow_override=True), tmp_path, "pipes", "shp")
    layers, _ = _read(make_config(_pipes_config(path, f'crs = "{UTM}"\n')))
    assert layers.crs == pyproj.CRS(UTM)


def test_multipart_lines_are_merged_or_chained_across_their_gaps(
    tmp_path: Path, make_config: MapConfig, unchanged: Check
) -> None:
    joined = MultiLineString([[(0, 0), (10, 0)], [(10, 0), (10, 5)]])
    # three parts that do not join; the third is drawn backwards against the second's end
    apart = MultiLineString([[(0, 0), (3, 0)], [(50, 0), (50, 20)], [(61, 0), (60, 0)]])
    # two parts that touch, the second drawn backwards: no gap, only a direction to set right
    turned = MultiLineString([[(0, 0), (10, 0)], [(10, 8), (10, 0)]])
    frame = gpd.GeoDataFrame({"REF": ["J", "S", "T"], "LEN": [15.0, 24.0, 18.0]}, geometry=[joined, apart, turned], crs=UTM)
    path = _write(frame, tmp_path, "pipes", "gpkg")
    unchanged()
    layers, findings = _read(make_config(_pipes_config(path, '[pipes.fields]\nid = "REF"\nlength = "LEN"\n')))
    geometry = layers.pipes.canonical.geometry
    assert geometry.iloc[0].equals(LineString([(0, 0), (10, 0), (10, 5)]))
    # chained in stored order; the third part is turned so that it starts nearer (50, 20)
    assert geometry.iloc[1].equals(LineString([(0, 0), (3, 0), (50, 0), (50, 20), (60, 0), (61, 0)]))
    # the drawn length is the total of the parts, without the gaps: 3 + 20 + 1 m
    assert list(geometry.iloc[2].coords) == [(0, 0), (10, 0), (10, 8)]
    assert layers.pipes.canonical["drawn_length"].tolist() == [15.0, 24.0, 18.0]
    found = findings.to_frame()
    assert found[["feature", "code"]].values.tolist() == [["S", "multipart_line"], ["T", "multipart_line"]]
    gap = float(np.hypot(10.0, 20.0))  # from (50, 20) to (60, 0)
    assert found["message"].tolist() == [
        "the line has 3 parts that do not join (lengths 3.00, 20.00, 1.00 m, 24.00 m in all; "
        f"gaps 47.00, {gap:.2f} m); the parts are joined in order across the gaps",
        "the line has 2 parts drawn in different directions (lengths 10.00, 8.00 m, 18.00 m in all); "
        "1 part was turned to follow the first and they are joined into one line",
    ]
    unchanged()


def test_z_and_m_are_dropped(tmp_path: Path, make_config: MapConfig) -> None:
    path = _write_measured_line(tmp_path)
    layers, findings = _read(make_config(_pipes_config(path)))
    geometry = layers.pipes.canonical.geometry.iloc[0]
    assert not geometry.has_z
    assert not shapely.has_m(geometry)
    assert geometry.length == 10.0
    assert len(findings) == 0


def test_null_geometry_keeps_the_row_with_a_finding(tmp_path: Path, make_config: MapConfig) -> None:
    frame = _pipes()
    frame.loc[1, "geometry"] = None
    path = _write(frame, tmp_path, "pipes", "gpkg")
    layers, findings = _read(make_config(_pipes_config(path, PIPE_FIELDS)))
    assert len(layers.pipes.canonical) == 3
    assert layers.pipes.canonical.geometry.iloc[1] is None
    assert findings.to_frame()[["feature", "code"]].values.tolist() == [["P2", "no_geometry"]]


def test_points_in_a_pipe_layer_are_a_finding(tmp_path: Path, make_config: MapConfig) -> None:
    path = _write(_manholes(), tmp_path, "points", "gpkg")
    layers, findings = _read(make_config(_pipes_config(path, '[pipes.fields]\nid = "MH"\n')))
    found = findings.to_frame()
    assert set(found["code"]) == {"wrong_geometry_type"}
    assert "Point" in found["message"].iloc[0]
    assert layers.pipes.canonical.geometry.isna().all()


def test_missing_mapped_field_names_file_layer_key_and_fields(
    tmp_path: Path, make_config: MapConfig, unchanged: Check
) -> None:
    path = _write(_pipes(), tmp_path, "pipes", "gpkg")
    unchanged()
    with pytest.raises(InputError) as error:
        _read(make_config(_pipes_config(path, '[pipes.fields]\ndiameter = "BORE"\n')))
    message = str(error.value)
    for part in (str(path), "layer 'pipes'", "pipes.fields.diameter", "'BORE'", "REF, US_MH, DS_MH, DIA_MM"):
        assert part in message
    unchanged()


def test_field_names_match_without_regard_to_case(tmp_path: Path, make_config: MapConfig) -> None:
    path = _write(_pipes(), tmp_path, "pipes", "shp")
    layers, _ = _read(make_config(_pipes_config(path, '[pipes.fields]\nid = "ref"\n')))
    assert layers.pipes.canonical["pipe_id"].tolist() == ["P1", "P2", "P3"]


def test_text_in_a_number_field_becomes_nan_with_a_finding(
    tmp_path: Path, make_config: MapConfig, unchanged: Check
) -> None:
    frame = _pipes().assign(DIA_MM=["225", "about 300", " "])
    path = _write(frame, tmp_path, "pipes", "gpkg")
    unchanged()
    layers, findings = _read(make_config(_pipes_config(path, PIPE_FIELDS)))
    np.testing.assert_allclose(layers.pipes.canonical["diameter"], [0.225, np.nan, np.nan])
    found = findings.to_frame()
    assert found[["feature", "code"]].values.tolist() == [["P2", "not_a_number"]]
    assert "'DIA_MM'" in found["message"].iloc[0]
    assert "'about 300'" in found["message"].iloc[0]
    unchanged()


def test_sentinels_become_nan_with_a_finding(tmp_path: Path, make_config: MapConfig, unchanged: Check) -> None:
    frame = _pipes().assign(US_IL=[-9999.0, 9.5, -1.0])
    path = _write(frame, tmp_path, "pipes", "gpkg")
    unchanged()
    body = _pipes_config(path, PIPE_FIELDS)
    layers, findings = _read(make_config(body.replace("[pipes]", "sentinels = [-9999, -1]\n[pipes]", 1)))
    np.testing.assert_allclose(layers.pipes.canonical["upstream_invert"], [np.nan, 9.5, np.nan])
    found = findings.to_frame()
    assert found[["feature", "code"]].values.tolist() == [["P1", "sentinel_value"], ["P3", "sentinel_value"]]
    assert "'-9999.0'" in found["message"].iloc[0]
    assert "'US_IL'" in found["message"].iloc[0]
    unchanged()


def test_zero_and_negative_sizes_become_nan_with_a_finding(
    tmp_path: Path, make_config: MapConfig, unchanged: Check
) -> None:
    path = _write(_pipes().assign(DIA_MM=[0.0, 300.0, -150.0]), tmp_path, "pipes", "fgb")
    unchanged()
    layers, findings = _read(make_config(_pipes_config(path, PIPE_FIELDS)))
    np.testing.assert_allclose(layers.pipes.canonical["diameter"], [np.nan, 0.3, np.nan])
    found = findings.to_frame()
    assert found[["feature", "code"]].values.tolist() == [["P1", "nonpositive_size"], ["P3", "nonpositive_size"]]
    assert "'-150.0'" in found["message"].iloc[1]
    unchanged()


def test_duplicate_and_missing_ids_are_findings(tmp_path: Path, make_config: MapConfig, unchanged: Check) -> None:
    path = _write(_pipes().assign(REF=["P1", None, "P1"]), tmp_path, "pipes", "gpkg")
    unchanged()
    layers, findings = _read(make_config(_pipes_config(path, PIPE_FIELDS)))
    assert layers.pipes.canonical["pipe_id"].tolist() == ["P1", "#1", "P1"]
    found = findings.to_frame()
    assert found[["feature", "code"]].values.tolist() == [["#1", "missing_id"], ["P1", "duplicate_id"],
                                                          ["P1", "duplicate_id"]]  # fmt: skip
    assert "'P1'" in found["message"].iloc[1]
    assert "2 features" in found["message"].iloc[1]
    unchanged()


def test_whole_float_ids_lose_their_decimal_point(tmp_path: Path, make_config: MapConfig) -> None:
    path = _write(_pipes().assign(REF=[101.0, 102.0, np.nan]), tmp_path, "pipes", "shp")
    layers, _ = _read(make_config(_pipes_config(path, '[pipes.fields]\nid = "REF"\n')))
    assert layers.pipes.canonical["pipe_id"].tolist()[:2] == ["101", "102"]


def test_unmapped_fields_are_listed_and_left_empty(tmp_path: Path, make_config: MapConfig) -> None:
    path = _write(_pipes(), tmp_path, "pipes", "gpkg")
    layers, _ = _read(make_config(_pipes_config(path)))
    pipes = layers.pipes.canonical
    assert pipes["pipe_id"].tolist() == ["#0", "#1", "#2"]
    assert pipes["diameter"].isna().all()
    assert pipes["from_node"].isna().all()
    assert "pipe_id" in layers.missing_fields["pipes"]
    assert "diameter" in layers.missing_fields["pipes"]
    assert "manholes" not in layers.missing_fields


def test_shape_codes_are_mapped_and_unknown_ones_flagged(tmp_path: Path, make_config: MapConfig) -> None:
    frame = _pipes().assign(FORM=["C", "box", "TRAP"], H=[np.nan, 600.0, 900.0], W=[np.nan, 900.0, 1200.0])
    path = _write(frame, tmp_path, "pipes", "gpkg")
    mapping = 'shape = "FORM"\nheight = "H"\nwidth = "W"\n[pipes.shapes]\nC = "circular"\nBOX = "rectangular"\n'
    layers, findings = _read(make_config(_pipes_config(path, PIPE_FIELDS + mapping)))
    assert layers.pipes.canonical["shape"].tolist() == ["circular", "rectangular", "TRAP"]
    found = findings.to_frame()
    assert found[["feature", "code"]].values.tolist() == [["P3", "unknown_shape"]]
    assert "'TRAP'" in found["message"].iloc[0]


def test_shape_is_inferred_from_the_sizes_given(tmp_path: Path, make_config: MapConfig) -> None:
    frame = _pipes().assign(DIA_MM=[300.0, np.nan, np.nan], H=[np.nan, 600.0, 450.0], W=[np.nan, 900.0, np.nan])
    path = _write(frame, tmp_path, "pipes", "gpkg")
    layers, _ = _read(make_config(_pipes_config(path, PIPE_FIELDS + 'height = "H"\nwidth = "W"\n')))
    pipes = layers.pipes.canonical
    assert pipes["shape"].tolist() == ["circular", "rectangular", "circular"]
    np.testing.assert_allclose(pipes["diameter"], [0.3, np.nan, 0.45])


def test_unknown_access_value_is_a_finding(tmp_path: Path, make_config: MapConfig) -> None:
    pipes = _write(_pipes(), tmp_path, "pipes", "gpkg")
    nodes = _write(_manholes().assign(LID=["Y", "perhaps", None, "0"]), tmp_path, "nodes", "gpkg")
    body = _pipes_config(pipes) + f'[manholes]\npath = "{nodes.name}"\n[manholes.fields]\nid = "MH"\naccess = "LID"\n'
    layers, findings = _read(make_config(body))
    assert layers.manholes is not None
    assert layers.manholes.canonical["access"].tolist() == [True, True, True, False]
    assert findings.to_frame()[["feature", "code"]].values.tolist() == [["M2", "unknown_access"]]


def test_missing_file_names_the_file(tmp_path: Path, make_config: MapConfig) -> None:
    with pytest.raises(InputError, match=r"nowhere\.gpkg: file not found \(from pipes\.path\)"):
        _read(make_config('[pipes]\npath = "nowhere.gpkg"\n'))


def test_unreadable_file_names_the_file(tmp_path: Path, make_config: MapConfig, unchanged: Check) -> None:
    path = tmp_path / "pipes.gpkg"
    path.write_bytes(b"not a geopackage")
    unchanged()
    with pytest.raises(InputError, match=r"pipes\.gpkg: not a readable vector file"):
        _read(make_config(_pipes_config(path)))
    unchanged()


def test_file_with_several_layers_needs_a_layer_name(tmp_path: Path, make_config: MapConfig) -> None:
    path = tmp_path / "town.gpkg"
    _pipes().to_file(path, layer="sewers")
    _manholes().to_file(path, layer="chambers")
    with pytest.raises(InputError, match=r"several layers \('sewers', 'chambers'\); set pipes\.layer"):
        _read(make_config(_pipes_config(path)))
    with pytest.raises(InputError, match=r"layer 'drains' not found \(pipes\.layer\)"):
        _read(make_config(_pipes_config(path, 'layer = "drains"\n')))
    layers, _ = _read(make_config(_pipes_config(path, 'layer = "sewers"\n')))
    assert layers.pipes.layer == "sewers"
    assert len(layers.pipes.canonical) == 3


def _catchments() -> gpd.GeoDataFrame:
    """Two invented catchments in EPSG:4326 (one a multi-polygon) and a line that is no area."""
    square = shapely.box(500000, 5700000, 500100, 5700100)  # 1.0 ha
    two = shapely.MultiPolygon([shapely.box(500100, 5700000, 500150, 5700100), shapely.box(500200, 5700000, 500250, 5700100)])
    shapes = list(gpd.GeoSeries([square, two], crs=UTM).to_crs("EPSG:4326"))
    return gpd.GeoDataFrame(
        {"AREA": ["A1", "A2", "A3"], "OUTLET": ["M1", None, "M3"], "POP": [120.0, -9999.0, 5.0], "HOUSES": [None, 40.0, 2.0],
         "IMP": [0.5, "lots", 0.2], "HA": [None, 0.0, 0.3]},
        geometry=[*shapes, LineString([(-3.0, 51.46), (-3.0, 51.47)])],
        crs="EPSG:4326",
    )  # fmt: skip


CATCHMENT_FIELDS = """
[catchments]
path = "{path}"
[catchments.fields]
id = "AREA"
drains_to = "OUTLET"
population = "POP"
dwellings = "HOUSES"
impervious_fraction = "IMP"
area_ha = "HA"
"""


def test_catchments_are_read_as_polygons_in_the_working_crs(tmp_path: Path, make_config: MapConfig, unchanged: Check) -> None:
    pipes = _write(_pipes(), tmp_path, "pipes", "gpkg")
    areas = _write(_catchments(), tmp_path, "areas", "geojson")
    unchanged()
    layers, findings = _read(make_config(_pipes_config(pipes, PIPE_FIELDS) + CATCHMENT_FIELDS.format(path=areas.as_posix())))
    unchanged()
    assert layers.catchments is not None
    areas_read = layers.catchments.canonical
    assert areas_read.crs == pyproj.CRS(UTM)
    assert areas_read["catchment_id"].tolist() == ["A1", "A2", "A3"]
    # the projected square keeps its 10,000 m2 to well within a square metre
    np.testing.assert_allclose(areas_read.geometry.area.to_numpy()[:2], [10_000.0, 10_000.0], rtol=1e-4)
    assert areas_read.geometry.geom_type.tolist()[:2] == ["Polygon", "MultiPolygon"]
    assert areas_read.geometry.iloc[2] is None
    assert areas_read["drains_to"].fillna("none").tolist() == ["M1", "none", "M3"]
    np.testing.assert_allclose(areas_read["population"], [120.0, np.nan, 5.0])
    np.testing.assert_allclose(areas_read["impervious_fraction"], [0.5, np.nan, 0.2])
    np.testing.assert_allclose(areas_read["area_ha"], [np.nan, np.nan, 0.3])
    found = findings.to_frame()
    assert sorted(zip(found["feature"], found["code"], strict=True)) == [
        ("A2", "nonpositive_size"), ("A2", "not_a_number"), ("A2", "sentinel_value"), ("A3", "wrong_geometry_type")
    ]
    assert set(found["layer"]) == {"catchments"}
    assert "occupancy" in layers.missing_fields["catchments"]
    assert "population" not in layers.missing_fields["catchments"]


def test_a_finding_sits_at_the_midpoint_of_its_own_pipe(tmp_path: Path, make_config: MapConfig) -> None:
    path = _write(_pipes().assign(DIA_MM=[225.0, 300.0, 0.0]), tmp_path, "pipes", "gpkg")
    _, findings = _read(make_config(_pipes_config(path, PIPE_FIELDS)))
    found = findings.to_frame()
    # P3 runs from (500080, 5700030) to (500080, 5700090): its midpoint, from the fixture above
    assert found[["feature", "code", "x", "y"]].values.tolist() == [["P3", "nonpositive_size", 500080.0, 5700060.0]]


def test_each_duplicate_id_counts_its_own_uses(tmp_path: Path, make_config: MapConfig) -> None:
    frame = pd.concat([_pipes(), _pipes()], ignore_index=True).assign(REF=["A", "B", "A", "A", "B", "C"])
    path = _write(gpd.GeoDataFrame(frame, crs=UTM), tmp_path, "pipes", "gpkg")
    _, findings = _read(make_config(_pipes_config(path, PIPE_FIELDS)))
    found = findings.to_frame()
    assert found["feature"].tolist() == ["A", "B", "A", "A", "B"]
    assert [message.split("used by ")[1] for message in found["message"]] == ["3 features", "2 features", "3 features",
                                                                             "3 features", "2 features"]  # fmt: skip
