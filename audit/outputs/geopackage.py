"""The GeoPackage's layers, written by a second process while this one writes the other files.

GDAL's write of a million features holds Python's interpreter lock from start to end (about
10 s for the pipes of a million-pipe audit), so no thread can work beside it; a second process
can, on the machine's second core. :class:`LayerWriter` turns each layer into an Arrow table
here, as ``pyogrio.write_dataframe`` does (geometry as WKB; the layer's geometry type and CRS;
text for a column Arrow cannot hold, marked as a date and time where it holds them), saves it as
an Arrow IPC file in a scratch folder, and starts :mod:`audit.outputs.layer_process` once the
first layer is saved, handing it each further layer as soon as that one is saved; it hands the
files to ``pyogrio.write_arrow``. The block inside the writer writes the other files
meanwhile; leaving it waits for the GeoPackage (tests/outputs/test_geopackage.py checks that the
file is the one ``write_dataframe`` writes).

Small layers (fewer than ``SECOND_PROCESS_FROM`` features in all) are written in this process,
one after the other, before the block runs: starting a second Python costs more than their
write. So are layers with columns Arrow cannot take, and any where the second process cannot
start; and so is everything where this process is not a plain Python interpreter (the audit
called from inside a GIS or a frozen application, whose ``sys.executable`` would start the
application again, not Python).
"""

from __future__ import annotations

import contextlib
import errno
import json
import os
import shutil
import sqlite3
import subprocess
import sys
import tempfile
from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path
from types import TracebackType
from typing import Any

import geopandas as gpd
import numpy as np
import pandas as pd
import pyarrow as pa
import pyogrio
import shapely

from audit.outputs import layer_process
from audit.outputs.folder import disk_full

_ID_NAMES = ("fid", "gpkg_fid", "feature_fid")
_GEOMETRY_NAMES = ("geom", "geometry", "feature_geom")
_ARROW_ERRORS = (pa.ArrowException, TypeError)
_BATCH_ROWS = 16_384  # rows per record batch of the IPC files: the writer holds one batch at a time (65,536 held 60 MB more)
SECOND_PROCESS_FROM = 100_000
"""Features, all layers together, from which a second process writes the GeoPackage (about 1 s of GDAL's work)."""
_MULTI = {"Point": shapely.multipoints, "LineString": shapely.multilinestrings, "Polygon": shapely.multipolygons}
_DATETIME = {b"GDAL:OGR:type": b"DateTime"}


@dataclass(frozen=True)
class Layer:
    """One layer of the GeoPackage: its name, features and geometry type (None: as the features have)."""

    name: str
    frame: gpd.GeoDataFrame
    geometry_type: str | None = None


class LayerWriteError(Exception):
    """The second process could not write the GeoPackage; the message says why."""


def _layer_options(frame: gpd.GeoDataFrame) -> dict[str, str]:
    """The layer's id and geometry column names: the first of each that no field uses, ignoring case."""
    fields = [str(name) for name in frame.columns if name != frame.geometry.name]
    return {"FID": _free_name(_ID_NAMES, fields), "GEOMETRY_NAME": _free_name(_GEOMETRY_NAMES, fields)}


def _free_name(candidates: tuple[str, ...], fields: list[str]) -> str:
    """The first candidate that no field uses, ignoring case; else the first with ``_2``, ``_3``, ..."""
    used = {name.casefold() for name in fields}
    free = [name for name in candidates if name not in used]
    suffix = 2
    while not free:
        free = [f"{candidates[0]}_{suffix}"] if f"{candidates[0]}_{suffix}" not in used else []
        suffix += 1
    return free[0]


def write_layer(frame: gpd.GeoDataFrame, path: Path, *, layer: str, geometry_type: str | None) -> None:
    """Write one layer in this process by pyogrio: through Arrow where the columns convert, else feature by feature."""
    options = _layer_options(frame)
    try:
        pyogrio.write_dataframe(frame, path, layer=layer, driver="GPKG", use_arrow=True, layer_options=options, geometry_type=geometry_type)
    except _ARROW_ERRORS:
        pyogrio.write_dataframe(frame, path, layer=layer, driver="GPKG", use_arrow=False,
                                layer_options={**options, "OVERWRITE": "YES"}, geometry_type=geometry_type)  # fmt: skip


def arrow_layer(frame: gpd.GeoDataFrame, *, geometry_type: str | None) -> tuple[pa.Table, str, str | None]:
    """The layer as the Arrow table ``pyogrio.write_dataframe`` would hand to GDAL, its geometry
    type and its CRS (an EPSG code, else WKT1 as GDAL reads it).

    As pyogrio 0.13 does for a GeoPackage: single geometries mixed with their multi kind are
    promoted to multi; the type is the one kind present (``Unknown`` for several or none), with
    `` Z`` where any geometry has heights; object columns of date and time values, and date and
    time columns in a zone other than UTC, become text marked ``GDAL:OGR:type = DateTime``; other
    object columns Arrow cannot hold become text; a column of nulls becomes text.

    Raises ``pyarrow.ArrowException`` or ``TypeError`` where a column cannot be converted.
    """
    name = frame.geometry.name
    geometry = frame.geometry
    inferred, promote = _geometry_type(geometry)
    values = np.asarray(geometry.values, dtype=object)
    if promote:
        kinds = geometry.geom_type.to_numpy(dtype=object)
        values = values.copy()
        for single, make in _MULTI.items():
            chosen = kinds == single
            if chosen.any():
                values[chosen] = make(np.atleast_2d(values[chosen]), axis=0)
    data = pd.DataFrame(frame, copy=False)
    data[name] = shapely.to_wkb(values)
    marked = []
    for column, dtype in data.dtypes.items():
        if column == name:
            continue
        if dtype == "object":
            kind = pd.api.types.infer_dtype(data[column])
            if kind == "datetime":
                data[column] = data[column].astype("string")
                marked.append(column)
            elif kind != "string":
                try:
                    pa.Schema.from_pandas(data[[column]])
                except pa.ArrowInvalid:
                    data[column] = data[column].astype("string")
        elif isinstance(dtype, pd.DatetimeTZDtype) and str(dtype.tz) != "UTC":
            data[column] = data[column].astype("string")
            marked.append(column)
    table = pa.Table.from_pandas(data, preserve_index=False)
    for place, field in enumerate(table.schema):
        if field.name in marked:
            table = table.set_column(place, field.with_metadata({**(field.metadata or {}), **_DATETIME}), table[place])
        elif pa.types.is_null(field.type):
            table = table.set_column(place, field.with_type(pa.string()), table[place].cast(pa.string()))
        elif pa.types.is_dictionary(field.type) and pa.types.is_null(field.type.value_type):
            text = pa.dictionary(field.type.index_type, pa.string())
            table = table.set_column(place, field.with_type(text), table[place].cast(text))
    where = table.schema.get_field_index(name)
    if not pa.types.is_binary(table.schema.field(where).type):
        table = table.set_column(where, table.schema.field(where).with_type(pa.binary()), table[where].cast(pa.binary()))
    return table, geometry_type or inferred, _crs(geometry)


def _geometry_type(geometry: gpd.GeoSeries) -> tuple[str, bool]:
    """The layer's geometry type as pyogrio infers it for a GeoPackage, and whether singles are promoted to multi."""
    if not len(geometry):
        return "Unknown", False
    present = geometry.notna().to_numpy() & ~geometry.is_empty.to_numpy()
    has_z = bool(shapely.has_z(np.asarray(geometry.values, dtype=object)[present]).any())
    kinds = pd.Series(geometry.geom_type.unique()).dropna().tolist()
    kind, promote = "Unknown", False
    if len(kinds) == 1:
        kind = str(kinds[0])
    elif len(kinds) == 2:
        for single in _MULTI:
            if single in kinds and f"Multi{single}" in kinds:
                kind, promote = f"Multi{single}", True
    return (f"{kind} Z" if has_z and kind != "Unknown" else kind), promote


def _crs(geometry: gpd.GeoSeries) -> str | None:
    if not geometry.crs:
        return None
    code = geometry.crs.to_epsg()
    return f"EPSG:{code}" if code else str(geometry.crs.to_wkt("WKT1_GDAL"))


def python_interpreter() -> str | None:
    """The Python that runs this process, to start the writer with; None where ``sys.executable``
    is not a Python interpreter (empty, a frozen application, a GIS that embeds Python).

    >>> python_interpreter() is not None  # the tests run in plain Python
    True
    """
    executable = sys.executable
    if not executable or getattr(sys, "frozen", False):
        return None
    return executable if Path(executable).name.lower().startswith("python") else None


class LayerWriter:
    """Write ``layers`` into the GeoPackage ``path`` beside the ``with`` block (see the module docstring).

    ``scratch`` is a folder for the Arrow files (removed when the block ends). Leaving the block
    normally waits for the GeoPackage and raises :class:`LayerWriteError` (or ``OSError`` with the
    system's error number, ``ENOSPC`` where the disk filled) when it could not be written;
    leaving it by an exception, an interrupt among them, or interrupted while it waits, stops
    the second process first. Where the second process cannot even start its work (it finds no
    pyarrow or pyogrio), the layers are written in this process when the block ends. Either way
    the GeoPackage is checked for each layer's spatial index, which GDAL leaves out without a
    word when the disk fills while it builds it.
    """

    def __init__(self, path: Path, layers: Sequence[Layer], *, scratch: Path) -> None:
        self.path, self.layers, self.scratch = Path(path), list(layers), Path(scratch)
        self._process: subprocess.Popen[bytes] | None = None
        self._folder: Path | None = None
        self.written_here = False  # True once the layers were written in this process (small layers, or a fallback)

    def __enter__(self) -> LayerWriter:
        self.path.unlink(missing_ok=True)  # GDAL creates the file itself
        if sum(len(layer.frame) for layer in self.layers) >= SECOND_PROCESS_FROM and python_interpreter() is not None:
            try:
                self._process = self._start()
            except (OSError, *_ARROW_ERRORS):  # a column Arrow cannot take or save, or no process: written here instead
                self._tidy()
            except BaseException:
                self._stop()
                raise
        if self._process is None:
            self._write_here()
        return self

    def _write_here(self) -> None:
        self.written_here = True
        self.path.unlink(missing_ok=True)
        for layer in self.layers:
            write_layer(layer.frame, self.path, layer=layer.name, geometry_type=layer.geometry_type)
        check_spatial_indexes(self.path, self.layers)

    def _start(self) -> subprocess.Popen[bytes]:
        """Save each layer as an Arrow file in a scratch folder; start the second process once the
        first is saved, and hand it each further layer as soon as that one is saved too."""
        self._folder = folder = Path(tempfile.mkdtemp(prefix="layers-", dir=self.scratch))
        process: subprocess.Popen[bytes] | None = None
        try:
            for place, layer in enumerate(self.layers):
                planned = _saved_layer(layer, folder / f"{place}.arrow")
                if process is None:
                    process = self._process_for(folder)
                _hand_over(process, planned)
            assert process is not None  # there is a layer: the writer is not started for none
            _hand_over(process, None)  # no more layers
        except BaseException:
            if process is not None:
                _kill(process)
            raise
        return process

    def _process_for(self, folder: Path) -> subprocess.Popen[bytes]:
        """The second process, waiting for its layers on its standard input (:mod:`audit.outputs.layer_process`)."""
        plan = folder / "plan.json"
        plan.write_text(json.dumps({"path": str(self.path), "error": str(folder / "error.json"), "parent": os.getpid()}), encoding="utf-8")
        # the same import path as this process, whatever put pyarrow and pyogrio on it
        environment = {**os.environ, "PYTHONPATH": os.pathsep.join(entry for entry in sys.path if entry)}
        # -P: the writer's own folder (audit/outputs, whose module names are common words) is not put on its import path
        return subprocess.Popen([str(python_interpreter()), "-P", layer_process.__file__, str(plan)], stdin=subprocess.PIPE,
                                stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, env=environment)  # fmt: skip

    def finish(self) -> None:
        """Wait for the second process; raise what stopped it from writing the GeoPackage."""
        if self._process is None:
            return
        code = self._process.wait()
        self._process = None
        said = self._said()
        # whether the disk is full is judged before the Arrow files are removed, which frees space
        full = code != 0 and disk_full(LayerWriteError(said.get("message", "")), self.path.parent)
        self._tidy()
        if code == layer_process.EXIT_CANNOT_START:
            self._write_here()
            return
        if code == 0:
            check_spatial_indexes(self.path, self.layers)
            return
        if full:
            raise OSError(errno.ENOSPC, said.get("strerror") or "No space left on device", str(self.path))
        if said.get("errno"):
            raise OSError(said["errno"], said.get("strerror") or said["message"], str(self.path))
        if "message" in said:
            raise LayerWriteError(said["message"])
        stopped = f"was stopped by signal {-code}" if code < 0 else f"stopped (exit status {code})"
        raise LayerWriteError(f"the process writing {self.path.name} {stopped}")

    def _said(self) -> dict[str, Any]:
        """What the second process wrote about its failure; empty where it wrote nothing readable."""
        error = self._folder / "error.json" if self._folder is not None else None
        try:
            said = json.loads(error.read_text(encoding="utf-8")) if error is not None and error.exists() else {}
        except (OSError, ValueError):
            return {}
        return said if isinstance(said, dict) else {}

    def _stop(self) -> None:
        if self._process is not None:
            _kill(self._process)
            self._process = None
        self._tidy()

    def _tidy(self) -> None:
        if self._folder is not None:
            shutil.rmtree(self._folder, ignore_errors=True)
            self._folder = None

    def __exit__(self, kind: type[BaseException] | None, error: BaseException | None, trace: TracebackType | None) -> None:
        if kind is not None:
            self._stop()
            return
        try:
            self.finish()
        except BaseException:  # interrupted while waiting, or failed: no writer left behind
            self._stop()
            raise


def _saved_layer(layer: Layer, arrow: Path) -> dict[str, Any]:
    """Save ``layer`` as the Arrow IPC file ``arrow`` (batches of ``_BATCH_ROWS``); what the second process needs to write it."""
    table, geometry_type, crs = arrow_layer(layer.frame, geometry_type=layer.geometry_type)
    with pa.OSFile(str(arrow), "wb") as sink, pa.ipc.new_file(sink, table.schema) as writer:
        writer.write_table(table, max_chunksize=_BATCH_ROWS)
    return {"name": layer.name, "arrow": str(arrow), "geometry_name": layer.frame.geometry.name, "geometry_type": geometry_type,
            "crs": crs, "options": _layer_options(layer.frame)}  # fmt: skip


def _hand_over(process: subprocess.Popen[bytes], layer: dict[str, Any] | None) -> None:
    """Give the second process one more layer to write (None: there are no more), as a line of JSON.

    Where it has already stopped, nothing more is sent: waiting for it tells why it stopped.
    """
    assert process.stdin is not None
    if process.stdin.closed:  # it stopped at an earlier layer
        return
    try:
        process.stdin.write(json.dumps(layer).encode("utf-8") + b"\n")
        process.stdin.flush()
        if layer is None:
            process.stdin.close()
    except BrokenPipeError:
        with contextlib.suppress(OSError):
            process.stdin.close()


def _kill(process: subprocess.Popen[bytes]) -> None:
    """Stop the second process and wait for it; its standard input is closed."""
    process.kill()
    process.wait()
    if process.stdin is not None:
        with contextlib.suppress(OSError):
            process.stdin.close()


def check_spatial_indexes(path: Path, layers: Sequence[Layer]) -> None:
    """Raise where a layer of the GeoPackage has no spatial index, or GDAL left its scratch file of
    one beside it: GDAL builds the index after the features and, when the disk fills meanwhile,
    leaves it out without an error. ``ENOSPC`` where the disk is full, else :class:`LayerWriteError`."""
    with contextlib.closing(sqlite3.connect(path)) as connection:
        columns = dict(connection.execute("SELECT table_name, column_name FROM gpkg_geometry_columns").fetchall())
        tables = {str(name) for (name,) in connection.execute("SELECT name FROM sqlite_master WHERE type = 'table'")}
    missing = [layer.name for layer in layers if len(layer.frame) and f"rtree_{layer.name}_{columns.get(layer.name)}" not in tables]
    leftovers = sorted(path.parent.glob(f"{path.name}.tmp_rtree_*"))
    if not missing and not leftovers:
        return
    for leftover in leftovers:
        leftover.unlink(missing_ok=True)
    problem = LayerWriteError(f"{path.name}: the spatial index of {', '.join(missing) or 'a layer'} was not written")
    if disk_full(problem, path.parent):
        raise OSError(errno.ENOSPC, "No space left on device", str(path))
    raise problem
