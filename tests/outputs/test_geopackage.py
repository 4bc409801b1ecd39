"""The GeoPackage written by the second process is the one pyogrio writes in process.

Both routes write the same awkward layers (mixed single and multi lines, a missing geometry,
dates and times as objects and in a zone, nullable integers, a column of nulls, text with
gaps); the two files must hold the same tables, column types, geometry types, CRS and values.
"""

import errno
import json
import os
import shutil
import sqlite3
import subprocess
import sys
from datetime import date, datetime
from pathlib import Path

import geopandas as gpd
import numpy as np
import pandas as pd
import pyarrow as pa
import pyogrio
import pytest
import shapely
from pandas.testing import assert_frame_equal

from audit.outputs import geopackage
from audit.outputs.geopackage import Layer, LayerWriteError, LayerWriter, arrow_layer

CRS = "EPSG:27700"


def _awkward_pipes() -> gpd.GeoDataFrame:
    lines = [
        shapely.LineString([(0, 0), (10, 0)]),
        shapely.MultiLineString([[(10, 0), (20, 0)], [(20, 0), (20, 5)]]),
        None,
        shapely.LineString([(20, 5), (30, 5)]),
    ]
    return gpd.GeoDataFrame(
        {
            "Pipe ID": pd.array(["P1", "P2", None, "P4"], dtype="str"),
            "note": np.array(["cracked", None, "", "relined"], dtype=object),
            "surveyed": np.array([datetime(1998, 5, 1, 9, 30), None, datetime(2004, 1, 2), datetime(2011, 7, 3, 17, 5)], dtype=object),
            "laid": np.array([date(1968, 4, 1), None, date(2001, 11, 30), date(1985, 6, 15)], dtype=object),
            "inspected": pd.to_datetime(["2020-03-28 01:30", "2020-07-01 12:00", None, "2021-01-01 00:00"]).tz_localize("Europe/London"),
            "size_mm": pd.array([225, None, 150, 375], dtype="Int64"),
            "public": [True, False, True, True],
            "unknown": np.array([None, None, None, None], dtype=object),
            "load_ratio": [0.5, np.nan, 1.25, 2.0],
            "flag_surcharge": np.array([False, False, True, True]),
        },
        geometry=lines,
        crs=CRS,
    )


def _points() -> gpd.GeoDataFrame:
    return gpd.GeoDataFrame({"code": ["a", "b"]}, geometry=shapely.points([[0, 0], [5, 5]]), crs=CRS)


def _both(tmp_path: Path, monkeypatch: pytest.MonkeyPatch, layers: list[Layer]) -> tuple[Path, Path]:
    in_process = tmp_path / "in_process.gpkg"
    for layer in layers:
        geopackage.write_layer(layer.frame, in_process, layer=layer.name, geometry_type=layer.geometry_type)
    monkeypatch.setattr(geopackage, "SECOND_PROCESS_FROM", 0)
    second = tmp_path / "second.gpkg"
    with LayerWriter(second, layers, scratch=tmp_path) as writer:
        assert writer._process is not None  # the second process is at work while the block runs
    assert not writer.written_here  # and it, not a fallback here, wrote the file
    assert [path.name for path in tmp_path.iterdir() if path.name.startswith("layers-")] == []  # the Arrow files are gone
    return in_process, second


def _schema(path: Path) -> list[tuple[object, ...]]:
    with sqlite3.connect(path) as connection:
        tables = connection.execute("SELECT name, sql FROM sqlite_master WHERE type = 'table' AND name NOT LIKE 'rtree%' ORDER BY name").fetchall()
        columns = connection.execute("SELECT table_name, column_name, geometry_type_name, srs_id, z, m FROM gpkg_geometry_columns ORDER BY 1").fetchall()
    connection.close()
    return [*tables, *columns]


def _points_writer(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> LayerWriter:
    """A writer of the two points that uses the second process, however few the features."""
    monkeypatch.setattr(geopackage, "SECOND_PROCESS_FROM", 0)
    return LayerWriter(tmp_path / "out.gpkg", [Layer("findings", _points(), "Point")], scratch=tmp_path)


# GDAL notes, as it reads them back, that a time with a zone offset is stored as text it could parse (both files alike)
@pytest.mark.filterwarnings("ignore::RuntimeWarning", "ignore::pytest.PytestUnraisableExceptionWarning")
def test_the_second_process_writes_the_same_geopackage(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    layers = [Layer("pipes", _awkward_pipes()), Layer("findings", _points(), "Point")]
    in_process, second = _both(tmp_path, monkeypatch, layers)
    assert _schema(second) == _schema(in_process)
    for name in ("pipes", "findings"):
        assert pyogrio.read_info(second, layer=name)["fields"].tolist() == pyogrio.read_info(in_process, layer=name)["fields"].tolist()
        assert pyogrio.read_info(second, layer=name)["dtypes"].tolist() == pyogrio.read_info(in_process, layer=name)["dtypes"].tolist()
        assert_frame_equal(pyogrio.read_dataframe(second, layer=name), pyogrio.read_dataframe(in_process, layer=name))
    pipes = pyogrio.read_info(second, layer="pipes")
    assert pipes["geometry_type"] == "MultiLineString"  # singles promoted beside a multi, as GeoPackage wants one kind
    assert pipes["crs"] == CRS
    assert pipes["features"] == 4
    surveyed = pyogrio.read_dataframe(second, layer="pipes")["surveyed"]
    assert surveyed.iloc[0] == pd.Timestamp("1998-05-01 09:30")  # written as a date and time, not as text


def test_the_layer_geometry_type_is_inferred_as_pyogrio_does() -> None:
    _, kind, crs = arrow_layer(_awkward_pipes(), geometry_type=None)
    assert (kind, crs) == ("MultiLineString", CRS)
    _, kind, _ = arrow_layer(_points(), geometry_type=None)
    assert kind == "Point"
    raised = gpd.GeoDataFrame({"a": [1]}, geometry=[shapely.Point(0, 0, 3)], crs=CRS)
    assert arrow_layer(raised, geometry_type=None)[1] == "Point Z"
    mixed = gpd.GeoDataFrame({"a": [1, 2]}, geometry=[shapely.Point(0, 0), shapely.LineString([(0, 0), (1, 1)])], crs=CRS)
    assert arrow_layer(mixed, geometry_type=None)[1] == "Unknown"
    empty = gpd.GeoDataFrame({"a": []}, geometry=gpd.GeoSeries([], crs=CRS))
    assert arrow_layer(empty, geometry_type="Point")[1] == "Point"


def test_an_interrupted_block_stops_the_second_process(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    writer = _points_writer(tmp_path, monkeypatch)
    started = []

    def interrupted_while_writing() -> None:
        with writer:
            started.append(writer._process)
            raise KeyboardInterrupt

    with pytest.raises(KeyboardInterrupt):
        interrupted_while_writing()
    assert started[0] is not None
    assert started[0].returncode is not None  # stopped and waited for: no writer left behind
    assert [path.name for path in tmp_path.iterdir() if path.name.startswith("layers-")] == []


def test_inside_an_application_that_embeds_python_the_layers_are_written_here(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    # a GIS's Python console: sys.executable is the GIS itself, which must never be started again
    monkeypatch.setattr(geopackage, "SECOND_PROCESS_FROM", 0)
    monkeypatch.setattr(geopackage.sys, "executable", "/opt/some-gis/bin/some-gis")
    with LayerWriter(tmp_path / "out.gpkg", [Layer("findings", _points(), "Point")], scratch=tmp_path) as writer:
        assert writer._process is None  # written in this process, before the block
        assert pyogrio.read_info(tmp_path / "out.gpkg", layer="findings")["features"] == 2
    monkeypatch.setattr(geopackage.sys, "executable", "")
    assert geopackage.python_interpreter() is None


def test_interrupted_while_waiting_the_second_process_is_stopped(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    writer = _points_writer(tmp_path, monkeypatch)
    started = []

    def wait_interrupted() -> None:
        with writer:
            process = writer._process
            assert process is not None
            started.append(process)
            real_wait, calls = process.wait, []

            def interrupted_once(timeout: float | None = None) -> int:
                calls.append(timeout)
                if len(calls) == 1:
                    raise KeyboardInterrupt  # Ctrl-C while the block waits for the writer
                return real_wait(timeout)

            monkeypatch.setattr(process, "wait", interrupted_once)

    with pytest.raises(KeyboardInterrupt):
        wait_interrupted()
    assert started[0].returncode is not None  # killed and waited for
    assert writer._process is None
    assert [path.name for path in tmp_path.iterdir() if path.name.startswith("layers-")] == []


def test_a_full_disk_in_the_second_process_is_said_as_such(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    # the free space is judged while the Arrow files still take their room, before they are removed
    monkeypatch.setattr(geopackage, "SECOND_PROCESS_FROM", 0)
    real = geopackage.arrow_layer
    monkeypatch.setattr(geopackage, "arrow_layer", lambda frame, *, geometry_type: (real(frame, geometry_type=geometry_type)[0], "NoSuchType", CRS))
    free = shutil.disk_usage(tmp_path)
    monkeypatch.setattr(shutil, "disk_usage", lambda path: free._replace(free=4096))
    with pytest.raises(OSError, match="No space left") as raised, LayerWriter(tmp_path / "out.gpkg", [Layer("findings", _points(), "Point")], scratch=tmp_path):
        pass
    assert raised.value.errno == errno.ENOSPC


def test_a_second_process_without_pyarrow_leaves_the_layers_to_this_one(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    # a Python that cannot import the libraries (no site-packages): the writer says so at once and the layers are written here
    bare = tmp_path / "python-bare"
    bare.write_text(f'#!/bin/sh\nexec "{sys.executable}" -I -S "$@"\n', encoding="utf-8")
    bare.chmod(0o755)
    monkeypatch.setattr(geopackage, "SECOND_PROCESS_FROM", 0)
    monkeypatch.setattr(geopackage, "python_interpreter", lambda: str(bare))
    with LayerWriter(tmp_path / "out.gpkg", [Layer("findings", _points(), "Point")], scratch=tmp_path) as writer:
        assert writer._process is not None
    assert writer.written_here
    assert pyogrio.read_info(tmp_path / "out.gpkg", layer="findings")["features"] == 2


def test_a_layer_arrow_cannot_save_is_written_here(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    def cannot(*_: object, **__: object) -> None:
        raise pa.ArrowInvalid("Dictionary replacement detected when writing IPC file format")

    monkeypatch.setattr(geopackage, "SECOND_PROCESS_FROM", 0)
    monkeypatch.setattr(geopackage, "arrow_layer", cannot)
    with LayerWriter(tmp_path / "out.gpkg", [Layer("findings", _points(), "Point")], scratch=tmp_path) as writer:
        assert writer._process is None
    assert pyogrio.read_info(tmp_path / "out.gpkg", layer="findings")["features"] == 2
    assert [path.name for path in tmp_path.iterdir() if path.name.startswith("layers-")] == []


def test_a_layer_left_without_its_spatial_index_is_an_error(tmp_path: Path) -> None:
    # GDAL leaves the index out, without an error, when the disk fills while it builds it
    path = tmp_path / "out.gpkg"
    pyogrio.write_dataframe(_points(), path, layer="findings", driver="GPKG", layer_options={"SPATIAL_INDEX": "NO"})
    with pytest.raises(LayerWriteError, match="spatial index of findings"):
        geopackage.check_spatial_indexes(path, [Layer("findings", _points(), "Point")])
    geopackage.check_spatial_indexes(path, [Layer("findings", _points().iloc[:0], "Point")])  # an empty layer needs none


def test_the_second_process_starts_once_the_first_layer_is_saved(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    """The writer works on the first layer while the others are still turned into Arrow files."""
    events: list[str] = []
    save, start = geopackage._saved_layer, LayerWriter._process_for

    def saved(layer: Layer, arrow: Path) -> dict[str, object]:
        events.append(f"saved {layer.name}")
        return save(layer, arrow)

    def started(self: LayerWriter, folder: Path) -> object:
        events.append("started")
        return start(self, folder)

    monkeypatch.setattr(geopackage, "SECOND_PROCESS_FROM", 0)
    monkeypatch.setattr(geopackage, "_saved_layer", saved)
    monkeypatch.setattr(LayerWriter, "_process_for", started)
    layers = [Layer("pipes", _awkward_pipes().iloc[[0, 3]]), Layer("manholes", _points()), Layer("findings", _points(), "Point")]
    with LayerWriter(tmp_path / "out.gpkg", layers, scratch=tmp_path) as writer:
        pass
    assert events == ["saved pipes", "started", "saved manholes", "saved findings"]
    assert not writer.written_here
    assert pyogrio.list_layers(tmp_path / "out.gpkg")[:, 0].tolist() == ["pipes", "manholes", "findings"]
    assert [pyogrio.read_info(tmp_path / "out.gpkg", layer=name)["features"] for name in ("pipes", "manholes", "findings")] == [2, 2, 2]


def test_a_layer_that_cannot_be_saved_after_the_first_stops_the_writer_and_all_are_written_here(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    real = geopackage.arrow_layer

    def not_the_manholes(frame: gpd.GeoDataFrame, *, geometry_type: str | None) -> object:
        if "mh" in frame.columns:
            raise pa.ArrowInvalid("a column Arrow cannot take")
        return real(frame, geometry_type=geometry_type)

    monkeypatch.setattr(geopackage, "SECOND_PROCESS_FROM", 0)
    monkeypatch.setattr(geopackage, "arrow_layer", not_the_manholes)
    manholes = _points().assign(mh=["M1", "M2"])
    layers = [Layer("pipes", _awkward_pipes().iloc[[0, 3]]), Layer("manholes", manholes), Layer("findings", _points(), "Point")]
    with LayerWriter(tmp_path / "out.gpkg", layers, scratch=tmp_path) as writer:
        assert writer._process is None  # the one already started on the pipes was stopped
    assert writer.written_here
    assert pyogrio.list_layers(tmp_path / "out.gpkg")[:, 0].tolist() == ["pipes", "manholes", "findings"]
    assert pyogrio.read_dataframe(tmp_path / "out.gpkg", layer="manholes")["mh"].tolist() == ["M1", "M2"]


def test_the_writer_stops_as_interrupted_when_its_parent_goes_away_before_the_last_layer(tmp_path: Path) -> None:
    layers = tmp_path / "layers"
    layers.mkdir()
    table, geometry_type, crs = arrow_layer(_points(), geometry_type="Point")
    with pa.OSFile(str(layers / "0.arrow"), "wb") as sink, pa.ipc.new_file(sink, table.schema) as ipc:
        ipc.write_table(table)
    plan = layers / "plan.json"
    target = tmp_path / "out.gpkg"
    plan.write_text(json.dumps({"path": str(target), "error": str(layers / "error.json"), "parent": os.getpid()}), encoding="utf-8")
    layer = {"name": "findings", "arrow": str(layers / "0.arrow"), "geometry_name": "geometry", "geometry_type": geometry_type, "crs": crs,
             "options": {"FID": "fid", "GEOMETRY_NAME": "geom"}}  # fmt: skip
    environment = {**os.environ, "PYTHONPATH": os.pathsep.join(entry for entry in sys.path if entry)}
    command = [sys.executable, "-P", geopackage.layer_process.__file__, str(plan)]
    ended = subprocess.run(command, input=json.dumps(layer) + "\n", capture_output=True, text=True, env=environment, timeout=120, check=False)
    assert ended.returncode == geopackage.layer_process.EXIT_INTERRUPTED  # one layer, then no "null": the parent is gone
    assert pyogrio.read_info(target, layer="findings")["features"] == 2  # what it had was written; the parent never moves it into place
    finished = subprocess.run(command, input=json.dumps(layer).replace("findings", "again") + "\nnull\n", capture_output=True, text=True,
                              env=environment, timeout=120, check=False)  # fmt: skip
    assert finished.returncode == 0
    assert pyogrio.list_layers(target)[:, 0].tolist() == ["findings", "again"]


def test_layers_handed_to_a_writer_that_has_stopped_are_not_sent(tmp_path: Path) -> None:
    """A writer that stopped at one layer is handed no more, and handing them raises nothing: waiting tells why it stopped."""
    process = subprocess.Popen([sys.executable, "-c", "import sys; sys.exit(2)"], stdin=subprocess.PIPE)
    process.wait()
    for layer in ({"name": "manholes"}, {"name": "findings"}, None):
        geopackage._hand_over(process, layer)
    assert process.stdin is not None
    assert process.stdin.closed
    assert process.returncode == 2
