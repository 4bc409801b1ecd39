"""Damaged layers: a bad feature is a finding and the rest is read; a damaged file stops with a
message naming it; a feature is never lost without a word (failures found by scripts/fuzz.py)."""

import sqlite3
import struct
import subprocess
import sys
from contextlib import closing
from pathlib import Path

import geopandas as gpd
import numpy as np
import pyogrio
import pytest
import shapely

from audit.errors import ConfigProblems, InputError
from audit.findings import FindingLog
from audit.layers import InputOptions, LayerSource, parse_layer_source, read_layers
from audit.layers.files import check_source
from audit.network.snapping import nearest_points

# An invented town on an invented grid (metres, UTM zone 30N numbers, no real place).
UTM = "EPSG:32630"
X0, Y0 = 500_000.0, 5_700_000.0
DRIVERS = {"gpkg": "GPKG", "shp": "ESRI Shapefile", "geojson": "GeoJSON", "fgb": "FlatGeobuf"}
FIELDS = {"id": "REF", "material": "MAT", "diameter": "DIA"}
NOT_UTF8 = "QQNOTUTF8QQ"  # written as text, then its bytes replaced by as many that are not UTF-8


def _pipes(count: int = 4) -> gpd.GeoDataFrame:
    return gpd.GeoDataFrame(
        {"REF": [f"P{i}" for i in range(count)], "MAT": ["VC"] * count, "DIA": [300.0] * count},
        geometry=[shapely.LineString([(X0 + 50 * i, Y0), (X0 + 50 * i + 40, Y0)]) for i in range(count)],
        crs=UTM,
    )


def _write(frame: gpd.GeoDataFrame, folder: Path, ext: str, name: str = "pipes") -> Path:
    path = folder / f"{name}.{ext}"
    pyogrio.write_dataframe(frame, path, driver=DRIVERS[ext], layer_options={"SPATIAL_INDEX": "NO"} if ext == "fgb" else None)
    return path


def _source(path: Path, key: str = "pipes", fields: dict[str, str] | None = None) -> LayerSource:
    """The layer as a config would give it (every unit at its default)."""
    check = ConfigProblems(path.parent / "audit.toml")
    source = parse_layer_source(check, {"path": path.name, "fields": FIELDS if fields is None else fields}, key, path.parent)
    assert check.problems == []
    return source


def _read(path: Path, *, engine: str = "pyogrio") -> tuple[gpd.GeoDataFrame, gpd.GeoDataFrame]:
    """The canonical pipes and the findings of reading ``path``."""
    findings = FindingLog()
    layers = read_layers(_source(path), options=InputOptions(engine=engine), findings=findings)
    return layers.pipes.canonical, findings.to_frame()


def _files(path: Path) -> list[Path]:
    return sorted(path.parent.glob(path.stem + ".*"))


@pytest.mark.parametrize("ext", list(DRIVERS))
def test_text_that_is_not_utf8_is_read_with_replacement_characters(tmp_path: Path, engine: str, ext: str) -> None:
    frame = _pipes().assign(MAT=["VC", NOT_UTF8, "PVC", "VC"])
    path = _write(frame, tmp_path, ext)
    for part in _files(path):
        part.write_bytes(part.read_bytes().replace(NOT_UTF8.encode(), b"\xff\xfe" + b"caf\xe9" + b"\xa0" * 5))
    pipes, _ = _read(path, engine=engine)
    assert pipes["pipe_id"].tolist() == ["P0", "P1", "P2", "P3"]  # every feature, in order
    material = pipes["material"].tolist()
    assert material[0] == "VC"
    assert material[2] == "PVC"
    assert material[1].startswith("\ufffd")  # U+FFFD, the Unicode replacement character (The Unicode Standard, sec. 3.9)
    assert "caf" in material[1]


def test_a_flatgeobuf_with_a_null_geometry_is_read_without_crashing(tmp_path: Path) -> None:
    frame = _pipes()
    frame.loc[1, "geometry"] = None
    path = _write(frame, tmp_path, "fgb")
    # in a fresh process: GDAL's Arrow reader of such a file ends the process (a segmentation fault)
    script = (f"from pathlib import Path; from tests_reader import read; print(read(Path({str(path)!r})))")
    reader = tmp_path / "tests_reader.py"
    reader.write_text(
        "from audit.findings import FindingLog\nfrom audit.layers import InputOptions, LayerSource, read_layers\n"
        "def read(path):\n    log = FindingLog()\n"
        "    layers = read_layers(LayerSource(path=path, fields={'id': 'REF'}, units={'diameter': 'mm'}), options=InputOptions(engine='pyogrio'), findings=log)\n"
        "    return list(layers.pipes.canonical.geometry.isna()), list(log.to_frame()['code'])\n",
        encoding="utf-8",
    )
    done = subprocess.run([sys.executable, "-c", script], cwd=tmp_path, capture_output=True, text=True, timeout=120, check=False)
    assert done.returncode == 0, done.stderr
    assert done.stdout.strip() == "([False, True, False, False], ['no_geometry'])"


def test_a_damaged_geometry_blob_is_a_finding_and_the_rest_is_read(tmp_path: Path) -> None:
    path = _write(_pipes(), tmp_path, "gpkg")
    with closing(sqlite3.connect(path)) as database:
        database.create_function("ST_IsEmpty", 1, lambda blob: 0)  # GDAL's function, called by the R-tree triggers
        for name in ("ST_MinX", "ST_MaxX", "ST_MinY", "ST_MaxY"):
            database.create_function(name, 1, lambda blob: 0)
        # Source: OGC GeoPackage 1.3, 2.1.3: "GP", version 0, flags, srs_id, then WKB; this WKB stops after its type
        database.execute("UPDATE pipes SET geom = ? WHERE fid = 3", (b"GP\x00\x01" + struct.pack("<i", 32630) + b"\x01\x02\x00\x00\x00",))
        database.commit()
    pipes, findings = _read(path)
    assert pipes.geometry.isna().tolist() == [False, False, True, False]
    assert findings[["feature", "code"]].values.tolist() == [["P2", "no_geometry"]]
    assert "cannot be read (a damaged blob)" in findings["message"].iloc[0]


@pytest.mark.parametrize("value", [np.nan, np.inf, -np.inf, 1e300])
def test_coordinates_that_are_no_position_are_a_finding(tmp_path: Path, value: float) -> None:
    frame = _pipes()
    with np.errstate(invalid="ignore"):
        frame.loc[2, "geometry"] = shapely.LineString([(X0, Y0), (value, Y0)])
    path = _write(frame, tmp_path, "gpkg")
    pipes, findings = _read(path)
    assert pipes.geometry.isna().tolist() == [False, False, True, False]
    assert findings[["feature", "code"]].values.tolist() == [["P2", "no_geometry"]]
    expected = "not a finite number" if not np.isfinite(value) else "lies farther out than any place on Earth"
    assert expected in findings["message"].iloc[0]
    np.testing.assert_allclose(pipes.geometry.length.dropna(), [40.0, 40.0, 40.0])  # the others as drawn


def test_a_multipart_line_with_an_empty_part_is_merged(tmp_path: Path) -> None:
    path = _write(_pipes(), tmp_path, "gpkg")
    parts = [shapely.to_wkb(shapely.LineString([(X0, Y0), (X0 + 20, Y0)])), shapely.to_wkb(shapely.LineString([(X0 + 20, Y0), (X0 + 40, Y0)]))]
    # Source: OGC Simple Features 1.2.1 (06-103r4), 8.2: MultiLineString = order, type 5, count, parts; empty LineString = type 2, 0 points
    multi = b"\x01" + struct.pack("<II", 5, 3) + b"".join(parts) + b"\x01" + struct.pack("<II", 2, 0)
    with closing(sqlite3.connect(path)) as database:
        for name in ("ST_IsEmpty", "ST_MinX", "ST_MaxX", "ST_MinY", "ST_MaxY"):
            database.create_function(name, 1, lambda blob: 0)
        database.execute("UPDATE pipes SET geom = ? WHERE fid = 1", (b"GP\x00\x01" + struct.pack("<i", 32630) + multi,))
        database.commit()
    pipes, findings = _read(path)
    assert pipes.geometry.iloc[0].equals(shapely.LineString([(X0, Y0), (X0 + 20, Y0), (X0 + 40, Y0)]))
    assert "no_geometry" not in set(findings["code"])


def test_a_multipoint_manhole_whose_first_point_is_empty_keeps_its_point(tmp_path: Path) -> None:
    manholes = gpd.GeoDataFrame({"MH": ["M1"]}, geometry=[shapely.Point(X0, Y0)], crs=UTM)
    path = _write(manholes, tmp_path, "gpkg", "manholes")
    multi = b"\x01" + struct.pack("<II", 4, 2) + b"\x01" + struct.pack("<Idd", 1, np.nan, np.nan) + shapely.to_wkb(shapely.Point(X0 + 5, Y0))
    with closing(sqlite3.connect(path)) as database:
        for name in ("ST_IsEmpty", "ST_MinX", "ST_MaxX", "ST_MinY", "ST_MaxY"):
            database.create_function(name, 1, lambda blob: 0)
        database.execute("UPDATE manholes SET geom = ?", (b"GP\x00\x01" + struct.pack("<i", 32630) + multi,))
        database.commit()
    findings = FindingLog()
    layers = read_layers(_source(_write(_pipes(), tmp_path, "gpkg")), manholes=_source(path, "manholes", {"id": "MH"}), findings=findings)
    assert layers.manholes is not None
    assert layers.manholes.canonical.geometry.iloc[0].equals(shapely.Point(X0 + 5, Y0))  # WKB's empty point is NaN, NaN (OGC 06-103r4)


def _cut_dbf(path: Path, records: int) -> None:
    """Cut the .dbf after ``records`` records; its header still declares them all.

    Source: the dBASE III file header (record count at byte 4, header and record sizes at 8 and
    10, little endian), as GDAL writes it; from memory.
    """
    dbf = path.with_suffix(".dbf")
    data = dbf.read_bytes()
    _, header, record = struct.unpack_from("<IHH", data, 4)
    dbf.write_bytes(data[: header + record * records])


@pytest.mark.parametrize("kept", [0, 2])
def test_a_shapefile_whose_dbf_was_cut_stops_with_the_counts(tmp_path: Path, engine: str, kept: int) -> None:
    path = _write(_pipes(6), tmp_path, "shp")
    _cut_dbf(path, kept)
    with pytest.raises(InputError) as error:
        _read(path, engine=engine)
    message = str(error.value)
    assert message.startswith(f"{path}, layer 'pipes': ")
    assert "the file declares 6 features but" in message or "cannot be read" in message


def test_a_flatgeobuf_counting_more_features_than_it_holds_stops(tmp_path: Path, engine: str) -> None:
    path = _write(_pipes(5), tmp_path, "fgb")
    data = bytearray(path.read_bytes())
    # Source: FlatGeobuf header.fbs: features_count is field 8 of the Header table, a uint64 (flatgeobuf.org);
    # FlatBuffers: root offset at the table's start, vtable entries uint16 (flatbuffers.dev)
    table = 12 + struct.unpack_from("<I", data, 12)[0]
    vtable = table - struct.unpack_from("<i", data, table)[0]
    at = table + struct.unpack_from("<H", data, vtable + 4 + 2 * 8)[0]
    assert struct.unpack_from("<Q", data, at)[0] == 5
    data[at : at + 8] = struct.pack("<Q", 9)
    path.write_bytes(bytes(data))
    with pytest.raises(InputError, match=r"the file declares 9 features but 5 could be read"):
        _read(path, engine=engine)


@pytest.mark.parametrize(("dx", "dy"), [(0.0, 38.55), (0.0, 38.6)])
def test_a_geographic_layer_no_utm_zone_covers_is_refused(tmp_path: Path, dx: float, dy: float) -> None:
    frame = _pipes().to_crs("EPSG:4326")
    frame = frame.set_geometry(frame.geometry.translate(xoff=dx, yoff=dy))  # from about 51.4 N to the pole
    path = _write(frame, tmp_path, "gpkg")
    with pytest.raises(InputError, match="no UTM zone covers the layer's extent"):
        _read(path)


def test_manholes_in_a_crs_that_cannot_be_projected_are_refused(tmp_path: Path) -> None:
    manholes = gpd.GeoDataFrame({"MH": ["M1"]}, geometry=[shapely.Point(0.0, 0.0)], crs='LOCAL_CS["local grid",UNIT["metre",1]]')
    path = _write(manholes, tmp_path, "gpkg", "manholes")
    with pytest.raises(InputError, match="cannot be projected from"):
        read_layers(_source(_write(_pipes(), tmp_path, "gpkg")), manholes=_source(path, "manholes", {}), findings=FindingLog())


def test_a_layer_path_that_is_a_fifo_or_a_device_is_refused_unopened(tmp_path: Path) -> None:
    fifo = tmp_path / "pipes.gpkg"
    import os

    os.mkfifo(fifo)
    with pytest.raises(InputError, match=r"pipes.gpkg: is not a file but a FIFO, a device or a socket \(from pipes.path\)"):
        check_source(fifo, "pipes")
    with pytest.raises(InputError, match=r"^/dev/zero: is not a file"):
        check_source(Path("/dev/zero"), "manholes")


def test_ends_at_infinity_never_snap() -> None:
    hit, distance = nearest_points(np.array([[np.inf, 0.0], [0.2, 0.0]]), np.array([[0.0, 0.0], [np.inf, np.inf]]), tolerance_m=1.0)
    assert hit.tolist() == [[-1], [0]]
    assert np.isnan(distance[0, 0])
    assert distance[1, 0] == pytest.approx(0.2)


def test_a_geojson_member_the_driver_passes_over_stops_with_its_position(tmp_path: Path, engine: str) -> None:
    path = _write(_pipes(4), tmp_path, "geojson")
    text = path.read_text(encoding="utf-8")
    second = text.index('"type": "Feature"', text.index('"type": "Feature"') + 1)
    path.write_text(text[:second] + '"type": "Fe\\ture"' + text[second + len('"type": "Feature"') :], encoding="utf-8")
    with pytest.raises(InputError, match=r"its features list holds 4 members but 3 features could be read; members 1 \(from 0\) are not Feature"):
        _read(path, engine=engine)
