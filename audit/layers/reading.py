"""Read the pipe, manhole and catchment layers into canonical, SI, projected GeoDataFrames.

Each layer comes back twice: ``original``, the GeoDataFrame exactly as read (every field, input
order, source CRS), and ``canonical``, the columns of the data contract in DEVELOPERS.md with the
same index, values in SI and geometry in a projected CRS in metres. Every input feature is kept.

A geographic CRS (or a projected one not in metres) is replaced by the UTM zone of the pipes'
extent; manholes and catchments are brought to the pipes' working CRS. How a file is opened, and
what is done about damaged ones, is in :mod:`audit.layers.files`.

Findings emitted (layer ``pipes``, ``manholes`` or ``catchments``; each message names the field and raw value):

* ``no_geometry``: null or empty geometry, or one that cannot be read, has a coordinate that is
  not a finite number, or is no place on Earth once projected (the message says which); the row
  stays with no geometry;
* ``wrong_geometry_type``: not a line (pipes), point (manholes) or polygon (catchments); dropped;
* ``multipart_line``: parts that do not join into one line; they are chained in order across the gaps
  (the message gives the parts, their lengths and the gaps; the drawn length is the total of the parts);
* ``multipart_point``: a multi-point manhole; its first point is kept;
* ``not_a_number``: a value where a number is needed is not one; it becomes NaN;
* ``sentinel_value``: a value listed in ``[input] sentinels``; it becomes NaN;
* ``nonpositive_size``: zero or negative diameter, height, width, length, depth or area; NaN;
* ``missing_id``: an empty id; the feature is called ``#<row>``;
* ``duplicate_id``: an id used by more than one feature;
* ``unknown_shape``: a shape code neither mapped in ``[pipes.shapes]`` nor canonical;
* ``unknown_kind``: a pipe or node kind code neither mapped in ``[<layer>.kinds]`` nor canonical;
  the pipe is taken as gravity, the node as a manhole;
* ``not_a_date``: an install date that is neither a date, a date and time, date text (ISO,
  m/d/yyyy, d/m/yyyy, d.m.yyyy) nor a year from 1800 to 2200; no year is taken;
* ``unknown_access``: an access value read neither as yes nor as no; taken as accessible.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass
from pathlib import Path

import geopandas as gpd
import numpy as np
import pandas as pd
import pyogrio
import pyproj
import shapely

from audit.errors import InputError
from audit.findings import FindingLog
from audit.labels import as_labels
from audit.layers.fields import (
    Quoted,
    Reporter,
    as_number,
    as_text,
    as_year,
    feature_ids,
    report_ids,
    text_column,
)
from audit.layers.files import READ_ERRORS, LayerFile, check_source, quiet_measures, read_layer_file
from audit.layers.geometry import (
    GEOMETRY_MESSAGES,
    MAX_COORDINATE_M,
    CleanGeometry,
    clean_geometry,
    representative_points,
    unusable_coordinates,
)
from audit.layers.settings import (
    CATCHMENT_UNITS,
    MANHOLE_UNITS,
    NODE_KINDS,
    PIPE_KINDS,
    PIPE_UNITS,
    SHAPES,
    InputOptions,
    LayerSource,
)
from audit.units import to_si

PIPE_NUMBERS = ("diameter", "height", "width", "side_slope", "upstream_invert", "downstream_invert", "upstream_depth",
                "downstream_depth", "length", "roughness", "install_year", "flow")  # fmt: skip
MANHOLE_NUMBERS = ("rim", "invert", "depth", "inflow", "population", "point_load")
CATCHMENT_NUMBERS = ("population", "dwellings", "occupancy", "area_ha", "runoff_coefficient", "impervious_fraction")
GEOMETRY_KINDS = {"pipes": "line", "manholes": "point", "catchments": "polygon"}
ACCESS_YES = ("1", "true", "t", "yes", "y")  # common practice, no source
ACCESS_NO = ("0", "false", "f", "no", "n")  # common practice, no source
@dataclass(frozen=True)
class LayerData:
    """One layer as read (``original``) and in canonical form (``canonical``)."""

    source: Path
    layer: str
    original: gpd.GeoDataFrame
    canonical: gpd.GeoDataFrame
    missing_fields: tuple[str, ...]


@dataclass(frozen=True)
class Layers:
    """The pipes, the manholes and catchments (None when not configured) and the working CRS [m]."""

    pipes: LayerData
    manholes: LayerData | None
    crs: pyproj.CRS
    catchments: LayerData | None = None

    @property
    def missing_fields(self) -> Mapping[str, tuple[str, ...]]:
        """Canonical columns per layer that no field fills (their values stay NaN/None)."""
        found = {"pipes": self.pipes.missing_fields}
        if self.manholes is not None:
            found["manholes"] = self.manholes.missing_fields
        if self.catchments is not None:
            found["catchments"] = self.catchments.missing_fields
        return found


def _where(source: LayerSource, layer: str | None = None) -> str:
    return f"{source.path}" + (f", layer '{layer}'" if layer else "")


def _layer_name(source: LayerSource, key: str) -> str:
    """The layer to read: the configured one, or the only one in the file."""
    check_source(source.path, key)
    try:
        with quiet_measures():
            names = [str(name) for name in pyogrio.list_layers(source.path)[:, 0]]
    except READ_ERRORS as error:
        raise InputError(f"{source.path}: not a readable vector file ({error})") from None
    except Exception as error:  # a library's own failure on a damaged file
        raise InputError(f"{source.path}: not a readable vector file ({type(error).__name__} in the reading library: {error})") from None
    if not names:
        raise InputError(f"{source.path}: holds no layer")
    if source.layer is None and len(names) == 1:
        return names[0]
    if source.layer in names:
        return str(source.layer)
    listed = ", ".join(repr(name) for name in names)
    if source.layer is None:
        raise InputError(f"{source.path}: holds several layers ({listed}); set {key}.layer to one of them")
    raise InputError(f"{_where(source, source.layer)} not found ({key}.layer); the file holds: {listed}")


def _read_original(source: LayerSource, key: str, *, engine: str) -> tuple[LayerFile, str]:
    layer = _layer_name(source, key)
    read = read_layer_file(source.path, layer, engine=engine, where=_where(source, layer))
    if not isinstance(read.frame, gpd.GeoDataFrame) or read.frame.geometry.name not in read.frame:
        raise InputError(f"{_where(source, layer)}: has no geometry column")
    return read, layer


def _source_crs(frame: gpd.GeoDataFrame, source: LayerSource, key: str, layer: str) -> pyproj.CRS:
    if frame.crs is not None:
        return pyproj.CRS.from_user_input(frame.crs)
    if source.crs is None:
        raise InputError(f"{_where(source, layer)}: the layer has no CRS; give it as {key}.crs = 'EPSG:...'")
    return pyproj.CRS.from_user_input(source.crs)


def working_crs(geometry: gpd.GeoSeries, *, where: str) -> pyproj.CRS:
    """The layer's own CRS when projected in metres, else the UTM zone of its extent.

    Parameters
    ----------
    geometry : the layer's geometry with its CRS set
    where : file and layer, for the message when the layer has no geometry to place

    Returns
    -------
    a projected CRS whose axes are in metres
    """
    crs = pyproj.CRS.from_user_input(geometry.crs)
    if crs.is_projected and all(axis.unit_name in ("metre", "meter") for axis in crs.axis_info):
        return crs
    shapes = geometry.to_numpy()
    valid = geometry[~(shapely.is_missing(shapes) | shapely.is_empty(shapes) | unusable_coordinates(shapes))]
    if valid.empty:
        raise InputError(f"{where}: no feature has a geometry, so no projected CRS can be chosen")
    try:
        return pyproj.CRS.from_user_input(valid.estimate_utm_crs())
    except (RuntimeError, ValueError, pyproj.exceptions.CRSError):
        xmin, ymin, xmax, ymax = valid.total_bounds
        raise InputError(f"{where}: no UTM zone covers the layer's extent (x {xmin:.6g} to {xmax:.6g}, y {ymin:.6g} to {ymax:.6g} "
                         f"in {crs.name}), so no projected CRS in metres can be chosen: the coordinates lie outside the CRS's area "
                         "of use; check the layer's CRS, or give the layer in a projected CRS in metres") from None  # fmt: skip


def _field(frame: gpd.GeoDataFrame, wanted: str, *, key: str, where: str) -> pd.Series:
    """The user's field ``wanted`` (exact name, else the only case-insensitive match)."""
    if wanted in frame.columns and wanted != frame.geometry.name:
        return frame[wanted]
    fields = [str(name) for name in frame.columns if name != frame.geometry.name]
    close = [name for name in fields if name.lower() == wanted.lower()]
    if len(close) == 1:
        return frame[close[0]]
    raise InputError(f"{where}: {key} = '{wanted}' is not a field of the layer; its fields are: {', '.join(fields)}")


def _report_geometry(report: Reporter, cleaned: CleanGeometry, *, original: np.ndarray) -> None:
    """One finding per flagged feature; a wrong type is named from the ``original`` geometry."""
    for code, mask in cleaned.flags.items():
        messages: pd.Series | str = GEOMETRY_MESSAGES[code]
        if code in cleaned.messages:
            messages = pd.Series(cleaned.messages[code], dtype=object)
        elif code == "wrong_geometry_type" and mask.any():
            kinds = np.full(len(mask), "", dtype=object)
            kinds[mask] = gpd.GeoSeries(original[mask]).geom_type.to_numpy(dtype=object)
            messages = "the geometry is a " + pd.Series(kinds, dtype=object) + ", " + GEOMETRY_MESSAGES[code]
        report.add(mask, code, messages)


_UNREADABLE = "the geometry stored in the file cannot be read (a damaged blob); the feature is kept without it"
_NOT_FINITE = "a coordinate of the geometry is not a finite number (NaN or infinite); the feature is kept without it"
_NOT_PROJECTED = ("once projected to the working CRS a coordinate is not finite or lies farther out than any place on Earth (the "
                  "geometry lies outside its CRS's area of use); the feature is kept without it")  # fmt: skip


def _geometry(read: LayerFile, source_crs: pyproj.CRS, crs: pyproj.CRS, *, kind: str, where: str) -> tuple[gpd.GeoSeries, CleanGeometry]:
    """Geometry in the working CRS, cleaned there so that lengths and gaps are in metres.

    A geometry that cannot be read, has a coordinate that is not finite, or loses its coordinates
    in the projection is removed before the clean-up, with the reason as its ``no_geometry`` message.
    """
    frame = read.frame
    given = frame.geometry.to_numpy().copy()
    why = np.full(len(given), None, dtype=object)
    why[read.unreadable] = _UNREADABLE
    not_finite = unusable_coordinates(given)
    why[not_finite] = _NOT_FINITE
    given[not_finite] = None
    try:
        with np.errstate(all="ignore"):
            projected = gpd.GeoSeries(given, index=frame.index, crs=source_crs).to_crs(crs).to_numpy().copy()
    except (pyproj.exceptions.ProjError, pyproj.exceptions.CRSError) as error:
        raise InputError(f"{where}: cannot be projected from {source_crs.name} to the working CRS {crs.name} ({error})") from None
    lost = unusable_coordinates(projected, limit=MAX_COORDINATE_M) & ~not_finite
    why[lost] = _NOT_PROJECTED
    projected[lost] = None
    with np.errstate(all="ignore"):
        cleaned = clean_geometry(projected, kind=kind, why_missing=why)
    return gpd.GeoSeries(cleaned.geometry, index=frame.index, crs=crs), cleaned


@dataclass(frozen=True)
class _Context:
    """What the canonical builders need about one layer."""

    frame: gpd.GeoDataFrame
    source: LayerSource
    key: str
    where: str
    report: Reporter
    sentinels: tuple[float, ...]

    def sentinels_of(self, name: str) -> tuple[float, ...]:
        """The values that mean "unknown" in the field mapped to ``name``: ``[input]`` and ``[<layer>.sentinels]``."""
        return self.sentinels + tuple(self.source.sentinels.get(name, ()))


def _raw(context: _Context, name: str) -> pd.Series | None:
    wanted = context.source.fields.get(name)
    if wanted is None:
        return None
    return _field(context.frame, wanted, key=f"{context.key}.fields.{name}", where=context.where)


def _numbers(context: _Context, names: tuple[str, ...], units: Mapping[str, tuple[str, str]]) -> dict[str, np.ndarray]:
    columns: dict[str, np.ndarray] = {}
    for name in names:
        raw = _raw(context, name)
        if raw is None:
            columns[name] = np.full(len(context.frame), np.nan)
            continue
        if name == "install_year":
            columns[name] = as_year(raw, field=str(raw.name), sentinels=context.sentinels_of(name), report=context.report)
            continue
        values = as_number(raw, name=name, field=str(raw.name), sentinels=context.sentinels_of(name), report=context.report)
        columns[name] = to_si(values, context.source.units[name], quantity=units[name][0]) if name in units else values
    return columns


def _texts(context: _Context, names: tuple[str, ...]) -> dict[str, np.ndarray | pd.api.extensions.ExtensionArray]:
    columns: dict[str, np.ndarray | pd.api.extensions.ExtensionArray] = {}
    for name in names:
        raw = _raw(context, name)
        columns[name] = np.full(len(context.frame), None, dtype=object) if raw is None else text_column(raw)
    return columns


def _shapes(context: _Context, sizes: dict[str, np.ndarray]) -> np.ndarray:
    """Canonical shape per pipe, from the mapped codes, else from which sizes are given."""
    diameter, height, width = sizes["diameter"], sizes["height"], sizes["width"]
    boxed = np.isnan(diameter) & ~np.isnan(height) & ~np.isnan(width)
    inferred = pd.Series(np.where(boxed, "rectangular", "circular"), dtype=object)
    raw = _raw(context, "shape")
    if raw is None:
        return inferred.to_numpy(dtype=object)
    codes = as_text(raw)
    which, distinct = _distinct(codes)
    lower = {code.lower(): shape for code, shape in context.source.shapes.items()} | {s: s for s in SHAPES}
    named = distinct.map(dict(context.source.shapes)).fillna(distinct.str.lower().map(lower)).to_numpy(dtype=object)
    mapped = np.where(which >= 0, named[np.maximum(which, 0)] if named.size else None, None)
    unmapped = pd.isna(mapped)
    context.report.add(unmapped & (which >= 0), "unknown_shape", Quoted(raw, f"shape field '{raw.name}' = ",
                       " is neither in [pipes.shapes] nor one of " + ", ".join(SHAPES)))  # fmt: skip
    return np.where(unmapped, np.where(which >= 0, codes, inferred.to_numpy(dtype=object)), mapped)


def _kinds(context: _Context, choices: tuple[str, ...]) -> np.ndarray:
    """Canonical kind per feature from the mapped codes (``[<layer>.kinds]``, else a canonical word).

    Unmapped codes get an ``unknown_kind`` finding and the first choice (gravity, manhole); so do
    features with no kind value.
    """
    raw = _raw(context, "kind")
    if raw is None:
        return np.full(len(context.frame), choices[0], dtype=object)
    which, distinct = _distinct(as_text(raw))
    table = dict(context.source.kinds)
    lower = {code.lower(): kind for code, kind in table.items()} | {kind: kind for kind in choices}
    named = distinct.map(table).fillna(distinct.str.lower().map(lower)).to_numpy(dtype=object)
    mapped = np.where(which >= 0, named[np.maximum(which, 0)] if named.size else None, None)
    unmapped = pd.isna(mapped) & (which >= 0)
    context.report.add(unmapped, "unknown_kind", Quoted(raw, f"kind field '{raw.name}' = ",
                       f" is neither in [{context.key}.kinds] nor one of " + ", ".join(choices) + f"; taken as {choices[0]}"))  # fmt: skip
    return np.where(pd.isna(mapped), choices[0], mapped).astype(object)


def _distinct(codes: np.ndarray) -> tuple[np.ndarray, pd.Series]:
    """Each value's position among the distinct values (-1 where None), and those values.

    A code column holds a handful of distinct values: mapping them, not every row, is cheap.
    """
    which, distinct = pd.factorize(pd.Series(codes, dtype=object))
    return which, pd.Series(np.asarray(distinct, dtype=object), dtype=object)


def _access(context: _Context, kind: np.ndarray) -> np.ndarray:
    """Whether a person can open the node: the access field, else every kind but a chamber."""
    raw = _raw(context, "access")
    if raw is None:
        return np.asarray(kind != "chamber", dtype=bool)
    which, distinct = _distinct(as_text(raw))
    words = distinct.str.lower()
    known = np.r_[(words.isin(ACCESS_YES) | words.isin(ACCESS_NO)).to_numpy(dtype=bool), True][which]  # -1: no value
    context.report.add(~known, "unknown_access", Quoted(raw, f"access field '{raw.name}' = ",
                       " is read neither as yes nor as no; taken as accessible"))  # fmt: skip
    return ~np.r_[words.isin(ACCESS_NO).to_numpy(dtype=bool), False][which]


def _pipe_columns(context: _Context) -> dict[str, np.ndarray | pd.api.extensions.ExtensionArray | pd.Categorical]:
    numbers = _numbers(context, PIPE_NUMBERS, PIPE_UNITS)
    shape = _shapes(context, numbers)
    circular = shape == "circular"
    fill = np.where(np.isnan(numbers["height"]), numbers["width"], numbers["height"])
    numbers["diameter"] = np.where(circular & np.isnan(numbers["diameter"]), fill, numbers["diameter"])
    texts = _texts(context, ("from_node", "to_node", "material"))
    return {**texts, "kind": as_labels(_kinds(context, PIPE_KINDS)), "shape": as_labels(shape), **numbers}


def _manhole_columns(context: _Context) -> dict[str, np.ndarray | pd.Categorical]:
    kind = _kinds(context, NODE_KINDS)
    return {**_numbers(context, MANHOLE_NUMBERS, MANHOLE_UNITS), "kind": as_labels(kind), "access": _access(context, kind)}


def _catchment_columns(context: _Context) -> dict[str, np.ndarray | pd.api.extensions.ExtensionArray]:
    return {**_texts(context, ("drains_to",)), **_numbers(context, CATCHMENT_NUMBERS, CATCHMENT_UNITS)}


_COLUMNS = {"pipes": _pipe_columns, "manholes": _manhole_columns, "catchments": _catchment_columns}


PIPE_ORDER = ("pipe_id", "from_node", "to_node", "kind", "shape", "diameter", "height", "width", "side_slope",
              "upstream_invert", "downstream_invert", "upstream_depth", "downstream_depth", "length", "drawn_length",
              "roughness", "material", "install_year", "flow")  # fmt: skip
MANHOLE_ORDER = ("manhole_id", "kind", "rim", "invert", "depth", "inflow", "access", "population", "point_load")
CATCHMENT_ORDER = ("catchment_id", "drains_to", *CATCHMENT_NUMBERS)
_ORDER = {"pipes": ("pipe_id", PIPE_ORDER), "manholes": ("manhole_id", MANHOLE_ORDER),
          "catchments": ("catchment_id", CATCHMENT_ORDER)}  # fmt: skip


def _read_layer(source: LayerSource, key: str, *, options: InputOptions, findings: FindingLog,
                crs: pyproj.CRS | None) -> LayerData:  # fmt: skip
    """Read one layer; ``crs`` is the working CRS, or None to choose it from this layer."""
    read, layer = _read_original(source, key, engine=options.engine)
    frame = read.frame
    where = _where(source, layer)
    source_crs = _source_crs(frame, source, key, layer)
    if crs is None:
        crs = working_crs(frame.geometry.set_crs(source_crs, allow_override=True), where=where)
    kind = GEOMETRY_KINDS[key]
    id_field = source.fields.get("id")
    raw_id = None if id_field is None else _field(frame, id_field, key=f"{key}.fields.id", where=where)
    ids, missing = feature_ids(raw_id, count=len(frame))
    geometry, clean = _geometry(read, source_crs, crs, kind=kind, where=where)
    cleaned = geometry.to_numpy()
    report = Reporter(findings, key, ids, lambda rows: representative_points(cleaned[rows], kind=kind))
    _report_geometry(report, clean, original=frame.geometry.to_numpy())
    report_ids(report, missing, field=None if raw_id is None else str(raw_id.name))
    context = _Context(frame, source, key, where, report, options.sentinels)
    columns = _COLUMNS[key](context)
    id_column, order = _ORDER[key]
    columns[id_column] = ids
    columns["drawn_length"] = clean.drawn_length
    canonical = gpd.GeoDataFrame({name: columns[name] for name in order}, geometry=geometry, index=frame.index, copy=False)  # the arrays as made, not copied into blocks
    mapping = {id_column: "id"}
    derived = ("shape", "drawn_length")  # filled whether or not a field is mapped
    absent = tuple(name for name in order if mapping.get(name, name) not in source.fields and name not in derived)
    return LayerData(source.path, layer, frame, canonical, absent)


def read_layers(
    pipes: LayerSource,
    *,
    manholes: LayerSource | None = None,
    catchments: LayerSource | None = None,
    options: InputOptions = InputOptions(),
    findings: FindingLog,
) -> Layers:
    """Read the pipe layer and, where configured, the manhole and catchment layers.

    Parameters
    ----------
    pipes, manholes, catchments : ``[pipes]``, ``[manholes]``, ``[catchments]`` (None: not configured)
    options : ``[input]``: the reading engine and the sentinel values
    findings : the log that receives every data problem found while reading

    Returns
    -------
    the :class:`Layers`: original and canonical frames, working CRS [m]

    Raises
    ------
    InputError
        A file or layer is missing or unreadable, a mapped field is not in the layer, or a
        layer has no CRS and the config gives none; the message names file, layer and key.
    """
    pipe_data = _read_layer(pipes, "pipes", options=options, findings=findings, crs=None)
    crs = pyproj.CRS.from_user_input(pipe_data.canonical.crs)
    manhole_data = None
    if manholes is not None:
        manhole_data = _read_layer(manholes, "manholes", options=options, findings=findings, crs=crs)
    catchment_data = None
    if catchments is not None:
        catchment_data = _read_layer(catchments, "catchments", options=options, findings=findings, crs=crs)
    return Layers(pipes=pipe_data, manholes=manhole_data, crs=crs, catchments=catchment_data)
