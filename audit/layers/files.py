"""One layer's file read whole or refused with a message: never a crash, a hang or a feature lost.

What a register's file can hold, and what is done about it:

* a path that is no file to read (a FIFO or a device, which would block or never end; a
  symbolic link that loops; a path too long for the file system): refused by name before any
  library opens it;
* text that is not valid UTF-8: read through Arrow, which keeps the bytes, and decoded with the
  replacement character (U+FFFD) where a byte sequence is not UTF-8, so the rest of the value
  and of the layer stays; the fields repaired are named in :attr:`LayerFile.repaired`;
* a geometry blob that does not parse: the feature is kept with no geometry and marked in
  :attr:`LayerFile.unreadable`;
* a file the driver reads short (a Shapefile whose .dbf was cut, a FlatGeobuf whose header
  counts more features than it holds, a GeoJSON member the driver passes over): the feature
  count the driver declares (for GeoJSON, the members of the features list) is compared with
  the rows read, and a difference stops the run with a message, so no feature is lost without
  a word;
* a FlatGeobuf layer with a null geometry among others: GDAL's Arrow reader of FlatGeobuf ends
  the process with a segmentation fault (GDAL 3.12, found by scripts/fuzz.py), so its
  attributes are read through Arrow without the geometry and its geometry without Arrow.
"""

from __future__ import annotations

import errno
import json
import logging
import os
import stat
import warnings
from collections.abc import Iterator
from contextlib import contextmanager
from dataclasses import dataclass
from pathlib import Path

import fiona.errors
import geopandas as gpd
import numpy as np
import pandas as pd
import pyarrow as pa
import pyarrow.compute as pc
import pyogrio
import shapely
import shapely.errors

from audit.errors import InputError

READ_ERRORS = (OSError, RuntimeError, ValueError, MemoryError, fiona.errors.FionaError, shapely.errors.ShapelyError, pa.ArrowException)
"""What the libraries raise on a file they cannot read (a MemoryError: a damaged count or size)."""

# Integer fields read through Arrow keep an integer type (nullable where a value is missing)
# instead of becoming floats, so that the output writes them back as integers.
_INTEGER_DTYPES = {
    pa.int8(): pd.Int8Dtype(), pa.int16(): pd.Int16Dtype(), pa.int32(): pd.Int32Dtype(), pa.int64(): pd.Int64Dtype(),
    pa.uint8(): pd.UInt8Dtype(), pa.uint16(): pd.UInt16Dtype(), pa.uint32(): pd.UInt32Dtype(), pa.uint64(): pd.UInt64Dtype(),
}  # fmt: skip


@dataclass(frozen=True)
class LayerFile:
    """A layer as read: every feature and field in input order, and what had to be repaired.

    ``unreadable`` is True where the file stores a geometry that does not parse (the feature is
    kept with no geometry); ``repaired`` names the text fields that held bytes that are not UTF-8.
    """

    frame: gpd.GeoDataFrame
    unreadable: np.ndarray
    repaired: tuple[str, ...]


@contextmanager
def quiet_measures() -> Iterator[None]:
    """Silence the reader's notice that M values are not supported: they are dropped anyway."""
    with warnings.catch_warnings():
        warnings.filterwarnings("ignore", message=r"Measured \(M\) geometry types", category=UserWarning)
        yield


def check_source(path: Path, key: str) -> None:
    """Refuse a path that is no file or folder to read, naming why, before any library opens it.

    Raises
    ------
    InputError
        the path does not exist, is a link that loops or leads nowhere, is too long, or is a
        FIFO, a device or a socket (reading one would block or never end).
    """
    try:
        mode = path.stat().st_mode
    except FileNotFoundError:
        dangling = " (a symbolic link to nothing)" if path.is_symlink() else ""
        raise InputError(f"{path}: file not found{dangling} (from {key}.path)") from None
    except OSError as error:
        why = {errno.ELOOP: "a symbolic link that loops", errno.ENAMETOOLONG: "a path too long for the file system"}
        raise InputError(f"{path}: cannot be opened: {why.get(error.errno or 0, error.strerror)} (from {key}.path)") from None
    if not (stat.S_ISREG(mode) or stat.S_ISDIR(mode)):
        raise InputError(f"{path}: is not a file but a FIFO, a device or a socket (from {key}.path); give the path of a vector file")
    if not os.access(path, os.R_OK):
        raise InputError(f"{path}: cannot be opened: permission denied (from {key}.path)")


def read_layer_file(path: Path, layer: str, *, engine: str, where: str) -> LayerFile:
    """Read every feature of ``layer`` in ``path`` with ``engine`` (``"pyogrio"`` or ``"fiona"``).

    Parameters
    ----------
    path : the file (or folder of Shapefiles), checked by :func:`check_source`
    layer : the layer's name inside it
    engine : ``"pyogrio"`` reads through Arrow (FlatGeobuf geometry without it), ``"fiona"`` feature by feature
    where : file and layer, for messages

    Raises
    ------
    InputError
        the file cannot be read, or the driver declares more or fewer features than were read.
    """
    try:
        with quiet_measures():
            info = pyogrio.read_info(path, layer=layer, force_feature_count=True)
            if engine == "fiona":
                read = _read_fiona(path, layer, info)
            elif Path(path).suffix.lower() == ".fgb":
                read = _read_flatgeobuf(path, layer)
            else:
                read = _read_arrow(path, layer)
    except READ_ERRORS as error:
        raise InputError(f"{where}: cannot be read ({_short(error)})") from None
    except Exception as error:  # a library's own failure on a damaged file (an UnboundLocalError on a broken .prj, ...)
        raise InputError(f"{where}: cannot be read ({type(error).__name__} in the reading library: {_short(error)})") from None
    declared = int(info["features"])
    if declared >= 0 and declared != len(read.frame):
        raise InputError(f"{where}: the file declares {declared} features but {len(read.frame)} could be read; it is damaged "
                         "(a Shapefile's .dbf cut short, a file cut or with a wrong count): repair it or export the layer again")  # fmt: skip
    _check_geojson_members(path, len(read.frame), where=where)
    return read


GEOJSON_CHECKED_BYTES = 32_000_000
"""GeoJSON files up to this size [bytes] have their features list counted by Python's own JSON reader."""


def _check_geojson_members(path: Path, count: int, *, where: str) -> None:
    """Refuse a GeoJSON FeatureCollection whose features list holds members GDAL skipped without a word.

    GDAL's GeoJSON driver passes over a member that is not a Feature object (a damaged ``"type"``,
    say) and counts only the others, so its own count cannot tell. A file that Python's JSON
    reader cannot read, or larger than :data:`GEOJSON_CHECKED_BYTES`, is left to GDAL alone.
    """
    if Path(path).suffix.lower() not in (".geojson", ".json") or not Path(path).is_file() or Path(path).stat().st_size > GEOJSON_CHECKED_BYTES:
        return
    try:
        document = json.loads(Path(path).read_bytes())
    except (ValueError, RecursionError, OSError):
        return
    members = document.get("features") if isinstance(document, dict) and document.get("type") == "FeatureCollection" else None
    if not isinstance(members, list) or len(members) == count:
        return
    odd = [index for index, member in enumerate(members) if not (isinstance(member, dict) and member.get("type") == "Feature")]
    raise InputError(f"{where}: its features list holds {len(members)} members but {count} features could be read; members "
                     f"{', '.join(str(index) for index in odd[:10])} (from 0) are not Feature objects: repair the file")  # fmt: skip


def _short(error: BaseException) -> str:
    """The library's message on one line, at most 300 characters."""
    text = " ".join(str(error).split()) or type(error).__name__
    return text if len(text) <= 300 else text[:297] + "..."


def _read_arrow(path: Path, layer: str) -> LayerFile:
    """Fields and geometry through Arrow; text repaired, unparsable geometry blobs found."""
    meta, table = pyogrio.read_arrow(path, layer=layer)
    geometry_name = meta["geometry_name"] or "wkb_geometry"
    wkb = table.column(geometry_name) if geometry_name in table.column_names else None
    if wkb is not None:
        table = table.drop_columns([geometry_name])
    table, repaired = repaired_text(table)
    frame = table.to_pandas(types_mapper=_INTEGER_DTYPES.get)
    geometry, unreadable = _parse_wkb(wkb, len(frame))
    return LayerFile(_with_geometry(frame, geometry, meta["crs"]), unreadable, repaired)


def _read_flatgeobuf(path: Path, layer: str) -> LayerFile:
    """Fields through Arrow without the geometry, geometry without Arrow (see the module docstring)."""
    meta, table = pyogrio.read_arrow(path, layer=layer, read_geometry=False)
    table, repaired = repaired_text(table)
    frame = table.to_pandas(types_mapper=_INTEGER_DTYPES.get)
    shapes = pyogrio.read_dataframe(path, layer=layer, columns=[], use_arrow=False, on_invalid="ignore")
    if len(shapes) != len(frame):
        raise ValueError(f"{len(frame)} rows of fields but {len(shapes)} geometries")
    geometry = shapes.geometry.to_numpy() if isinstance(shapes, gpd.GeoDataFrame) else np.full(len(frame), None, dtype=object)
    return LayerFile(_with_geometry(frame, geometry, meta["crs"]), np.zeros(len(frame), dtype=bool), repaired)


class _DecodeFailures(logging.Handler):
    """Counts fiona's notices that a text value could not be decoded (fiona then reads it as null)."""

    def __init__(self) -> None:
        super().__init__(logging.DEBUG)
        self.count = 0

    def emit(self, record: logging.LogRecord) -> None:
        if "Failed to decode" in str(record.msg):
            self.count += 1


def _read_fiona(path: Path, layer: str, info: dict[str, object]) -> LayerFile:
    """Features read one by one by fiona; text fiona could not decode is read again through Arrow."""
    handler = _DecodeFailures()
    logger = logging.getLogger("fiona")
    level = logger.level
    logger.addHandler(handler)
    logger.setLevel(logging.DEBUG)
    try:
        frame = gpd.read_file(path, layer=layer, engine="fiona")
    finally:
        logger.removeHandler(handler)
        logger.setLevel(level)
    if not isinstance(frame, gpd.GeoDataFrame):
        frame = gpd.GeoDataFrame(frame, geometry=gpd.GeoSeries([None] * len(frame)))
    frame = declared_types(frame, info)
    repaired: tuple[str, ...] = ()
    if handler.count:
        _, table = pyogrio.read_arrow(path, layer=layer, read_geometry=False)
        table, repaired = repaired_text(table)
        for name in repaired:
            frame[name] = table.column(name).to_pandas()
    return LayerFile(frame, np.zeros(len(frame), dtype=bool), repaired)


def declared_types(frame: gpd.GeoDataFrame, info: dict[str, object]) -> gpd.GeoDataFrame:
    """The fields read as floats or text back in the type the file declares (``info``: pyogrio's ``read_info``).

    Integer fields with a missing value come back as floats, narrow integers as 64-bit ones and
    Date fields as text; all are restored (nullable integers of the declared width, dates) so the
    output writes them as the input had them.
    """
    for name, declared in zip(info["fields"], info["dtypes"], strict=True):  # type: ignore[call-overload]
        if name not in frame.columns:
            continue
        column = frame[name]
        numeric = pd.api.types.is_float_dtype(column.dtype) or pd.api.types.is_integer_dtype(column.dtype)
        if str(declared).startswith(("int", "uint")) and numeric and not pd.api.types.is_bool_dtype(column.dtype):
            frame[name] = column.astype(str(declared).capitalize().replace("Uint", "UInt"))
        elif str(declared) == "datetime64[D]" and not pd.api.types.is_datetime64_any_dtype(column.dtype):
            frame[name] = pd.to_datetime(column, errors="coerce").dt.date.astype(pd.ArrowDtype(pa.date32()))
    return frame


def repaired_text(table: pa.Table) -> tuple[pa.Table, tuple[str, ...]]:
    """The table with every text column valid UTF-8, and the names of the columns that were not.

    A byte sequence that is not UTF-8 becomes the replacement character U+FFFD; the rest of the
    value is kept. Valid columns are left as they are (one validation pass each).

    Examples
    --------
    >>> table = pa.table({"MAT": pa.array([b"VC", b"caf\\xe9"], pa.binary()).view(pa.string())})
    >>> fixed, names = repaired_text(table)
    >>> fixed.column("MAT").to_pylist(), names
    (['VC', 'caf\\ufffd'], ('MAT',))
    """
    repaired = []
    for index, name in enumerate(table.column_names):
        column = table.column(index)
        if not (pa.types.is_string(column.type) or pa.types.is_large_string(column.type)):
            continue
        try:
            column.validate(full=True)
        except pa.ArrowInvalid:
            raw = pd.Series(column.cast(pa.large_binary()).to_numpy(zero_copy_only=False), dtype=object)
            text = raw.str.decode("utf-8", errors="replace")
            table = table.set_column(index, name, pa.array(text, type=column.type, from_pandas=True))
            repaired.append(str(name))
    return table, tuple(repaired)


def _parse_wkb(wkb: pa.ChunkedArray | None, count: int) -> tuple[np.ndarray, np.ndarray]:
    """Shapely geometries from WKB, None where absent or unparsable; the mask of the unparsable ones."""
    if wkb is None:
        return np.full(count, None, dtype=object), np.zeros(count, dtype=bool)
    stored = pc.binary_length(wkb.cast(pa.large_binary())).fill_null(0).to_numpy(zero_copy_only=False) > 0
    values = wkb.to_numpy(zero_copy_only=False)
    with np.errstate(all="ignore"):
        geometry = shapely.from_wkb(np.where(stored, values, None), on_invalid="ignore")
    return geometry, stored & shapely.is_missing(geometry)


def _with_geometry(frame: pd.DataFrame, geometry: np.ndarray, crs: object) -> gpd.GeoDataFrame:
    """The fields with the geometry as a last column named ``geometry`` (``geometry_1``, ... if a field is so named)."""
    name, suffix = "geometry", 1
    while name in frame.columns:
        name, suffix = f"geometry_{suffix}", suffix + 1
    frame[name] = gpd.GeoSeries(geometry, index=frame.index, crs=crs)
    return gpd.GeoDataFrame(frame, geometry=name, crs=crs)
