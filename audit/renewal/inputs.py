"""The renewal stage's own inputs: a table of inspection grades and layers of critical areas.

Both are optional (``[renewal.condition]``, ``[[renewal.critical_areas]]``). A file, layer or
field that cannot be used at all raises :class:`~audit.errors.InputError` naming the file, the
layer, the config key and the field; a bad value in a row is a finding and the row's value
becomes unknown.

Findings emitted (layer ``condition`` or ``critical_areas``):

* ``missing_id``: a condition row without a pipe id; the row is left out;
* ``not_a_number``: a grade that is not a number from 1 to 5; it becomes unknown;
* ``duplicate_id``: a pipe id on several condition rows; the worst grade of each kind is kept;
* ``no_geometry``: a critical-area feature without a geometry; it is left out.

Rows of the condition table that name no pipe of the register are reported when the table is
joined to the pipes (:func:`condition_grades`), as one ``unusual_setting`` finding about the
key ``renewal.condition``: most often the id field or the id format does not match the register's.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import geopandas as gpd
import numpy as np
import pandas as pd
import pyogrio
import pyproj
import shapely
from numpy.typing import NDArray

from audit.errors import InputError
from audit.findings import FindingLog
from audit.layers import quiet_measures
from audit.renewal.settings import SCORE_RANGE, ConditionSource, CriticalAreaSource

Array = NDArray[np.float64]

_READ_ERRORS = (OSError, RuntimeError, ValueError, pyogrio.errors.DataSourceError, pyogrio.errors.DataLayerError)
GRADES = ("structural", "service")


@dataclass(frozen=True)
class Condition:
    """Inspection grades by pipe id, one row per id (the worst of repeated rows); NaN where not graded."""

    pipe_id: NDArray[np.object_]
    structural: Array
    service: Array
    where: str  # file and layer, for messages


@dataclass(frozen=True)
class CriticalAreas:
    """Every feature of the critical-area layers in the working CRS, and each layer's name,
    consequence (1 to 5) and buffer [m] (None: ``[renewal] buffer_m``)."""

    names: tuple[str, ...]
    consequence: tuple[int, ...]
    buffer_m: tuple[float | None, ...]
    layer: NDArray[np.intp]  # per feature, the position of its layer in ``names``
    geometry: NDArray[np.object_]  # per feature, a shapely geometry [m]


def _layer(path: Path, layer: str | None, key: str) -> str | None:
    """The layer to read: the configured one, or the only one in the file."""
    if not path.exists():
        raise InputError(f"{path}: file not found (from {key}.path)")
    try:
        with quiet_measures():
            names = [str(name) for name in pyogrio.list_layers(path)[:, 0]]
    except _READ_ERRORS as error:
        raise InputError(f"{path}: not a readable table or vector file ({error})") from None
    if layer is None and len(names) == 1:
        return names[0]
    if layer in names:
        return layer
    listed = ", ".join(repr(name) for name in names)
    if layer is None:
        raise InputError(f"{path}: holds several layers ({listed}); set {key}.layer to one of them")
    raise InputError(f"{path}, layer '{layer}' not found ({key}.layer); the file holds: {listed}")


def _field(frame: pd.DataFrame, wanted: str, *, key: str, where: str) -> pd.Series:
    """The field ``wanted`` (exact name, else the only case-insensitive match)."""
    fields = [str(name) for name in frame.columns if name != "geometry"]
    if wanted in fields:
        return frame[wanted]
    close = [name for name in fields if name.lower() == wanted.lower()]
    if len(close) == 1:
        return frame[close[0]]
    raise InputError(f"{where}: {key} = '{wanted}' is not a field of the layer; its fields are: {', '.join(fields)}")


def id_text(raw: pd.Series) -> NDArray[np.object_]:
    """Ids as stripped text, whole numbers without a ``.0`` (as the layers stage writes them); None where null or blank.

    >>> id_text(pd.Series([12.0, 7.5, None])).tolist(), id_text(pd.Series([" P1 ", "", None])).tolist()
    (['12', '7.5', None], ['P1', None, None])
    """
    if pd.api.types.is_float_dtype(raw.dtype):
        numbers = raw.to_numpy(dtype=float, na_value=np.nan)
        whole = np.isfinite(numbers) & (numbers == np.round(numbers))
        text = np.where(whole, pd.Series(np.where(whole, numbers, 0.0).astype(np.int64)).astype(str), pd.Series(numbers).astype(str)).astype(object)
        known = np.isfinite(numbers)
    else:
        text = raw.astype(object).where(raw.notna(), "").astype(str).str.strip().to_numpy(dtype=object)
        known = raw.notna().to_numpy() & (text != "")
    return np.asarray(np.where(known, text, None), dtype=object)


def _grade(raw: pd.Series, ids: NDArray[np.object_], *, name: str, field: str, where: str, findings: FindingLog) -> Array:
    """Grades 1 to 5 from a field; anything else becomes NaN with a ``not_a_number`` finding."""
    numbers = pd.to_numeric(raw, errors="coerce").to_numpy(dtype=float)
    blank = raw.isna().to_numpy() | (raw.astype(str).str.strip() == "").to_numpy()
    low, high = SCORE_RANGE
    bad = ~blank & ~((numbers >= low) & (numbers <= high))
    if bad.any():
        shown = raw.astype(str).to_numpy(dtype=object)[bad]
        messages = [f"{name} grade '{value}' in field '{field}' ({where}) is not a grade from {low} to {high}; it is taken as unknown" for value in shown]
        findings.add_many("condition", ids[bad], "not_a_number", messages)
    return np.where(bad | blank, np.nan, numbers)


def read_condition(source: ConditionSource, *, findings: FindingLog) -> Condition:
    """The inspection table of ``[renewal.condition]``, one row per pipe id.

    Any table pyogrio reads will do (CSV, a GeoPackage table or layer, a Shapefile's dbf).
    Grades are numbers from 1 (good) to 5 (worst) in the user's own grading convention.

    Raises
    ------
    InputError
        the file or layer is missing or unreadable, or a mapped field is not in it
    """
    key = "renewal.condition"
    layer = _layer(source.path, source.layer, key)
    where = f"{source.path}" + (f", layer '{layer}'" if layer else "")
    try:
        with quiet_measures():
            frame = pyogrio.read_dataframe(source.path, layer=layer, read_geometry=False)
    except _READ_ERRORS as error:
        raise InputError(f"{where}: cannot be read ({error})") from None
    ids = id_text(_field(frame, source.fields["pipe_id"], key=f"{key}.fields.pipe_id", where=where))
    labels = np.where(pd.isna(ids), "#" + pd.RangeIndex(len(frame)).astype(str).to_numpy(dtype=object), ids).astype(object)
    missing = pd.isna(ids)
    if missing.any():
        findings.add_many("condition", labels[missing], "missing_id", f"a row without a pipe id in field '{source.fields['pipe_id']}' ({where}); the row is left out")
    grades = {}
    for name in GRADES:
        if name in source.fields:
            raw = _field(frame, source.fields[name], key=f"{key}.fields.{name}", where=where)
            grades[name] = _grade(raw, labels, name=name, field=source.fields[name], where=where, findings=findings)
        else:
            grades[name] = np.full(len(frame), np.nan)
    table = pd.DataFrame({"pipe_id": ids, **grades})[~missing]
    counts = table.groupby("pipe_id", sort=False).size()
    repeated = counts[counts > 1]
    if len(repeated):
        messages = [f"pipe '{pipe}' has {count} rows in the condition table ({where}); the worst grade of each kind is kept" for pipe, count in repeated.items()]
        findings.add_many("condition", repeated.index.to_numpy(dtype=object), "duplicate_id", messages)
    worst = table.groupby("pipe_id", sort=False)[list(GRADES)].max()  # max skips unknown grades
    return Condition(worst.index.to_numpy(dtype=object), worst["structural"].to_numpy(dtype=float), worst["service"].to_numpy(dtype=float), where)


def condition_grades(condition: Condition | None, pipe_ids: NDArray[np.object_], *, findings: FindingLog) -> tuple[Array, Array]:
    """The structural and service grade of every pipe, joined by id; NaN where the table has none.

    Rows that name no pipe are said in one ``unusual_setting`` finding (layer ``config``,
    feature ``renewal.condition``) with their count and up to five of their ids.
    """
    count = len(pipe_ids)
    if condition is None or condition.pipe_id.size == 0:
        return np.full(count, np.nan), np.full(count, np.nan)
    ids = pd.Index(np.asarray(pipe_ids, dtype=object), dtype=object)  # kept as objects: no conversion to Arrow text
    table = pd.Index(condition.pipe_id, dtype=object)
    row = table.get_indexer(ids)
    found = row >= 0
    unmatched = ~table.isin(ids)
    if unmatched.any():
        examples = ", ".join(repr(str(pipe)) for pipe in condition.pipe_id[unmatched][:5])
        findings.add("config", "renewal.condition", "unusual_setting",
                     f"{int(unmatched.sum())} of {len(condition.pipe_id)} pipe ids of the condition table ({condition.where}) name no pipe "
                     f"of the register (e.g. {examples}); check renewal.condition.fields.pipe_id and the form of the ids")  # fmt: skip
    structural, service = (np.where(found, grades[np.maximum(row, 0)], np.nan) for grades in (condition.structural, condition.service))
    return structural, service


def _areas(source: CriticalAreaSource, *, key: str, crs: pyproj.CRS, findings: FindingLog) -> NDArray[np.object_]:
    """The features of one critical-area layer in ``crs``; those without a geometry are reported and left out."""
    layer = _layer(source.path, source.layer, key)
    where = f"{source.path}" + (f", layer '{layer}'" if layer else "")
    try:
        with quiet_measures():
            frame = gpd.read_file(source.path, layer=layer, engine="pyogrio")
    except _READ_ERRORS as error:
        raise InputError(f"{where}: cannot be read ({error})") from None
    if not isinstance(frame, gpd.GeoDataFrame):
        raise InputError(f"{where}: has no geometry column (from {key})")
    own = frame.crs if frame.crs is not None else source.crs
    if own is None:
        raise InputError(f"{where}: the layer has no CRS; give it as {key}.crs = 'EPSG:...'")
    try:
        geometry = frame.geometry.set_crs(own, allow_override=True).to_crs(crs).to_numpy()
    except pyproj.exceptions.CRSError as error:
        raise InputError(f"{where}: {key}.crs = {own!r} is not a CRS pyproj understands ({error})") from None
    empty = shapely.is_missing(geometry) | shapely.is_empty(geometry)
    if empty.any():
        rows = np.flatnonzero(empty)
        findings.add_many("critical_areas", [f"{source.name} #{row}" for row in rows], "no_geometry",
                          f"a feature of critical area '{source.name}' ({where}) has no geometry; it is left out")  # fmt: skip
    return geometry[~empty]


def read_critical_areas(sources: tuple[CriticalAreaSource, ...], *, crs: pyproj.CRS, findings: FindingLog) -> CriticalAreas | None:
    """Every ``[[renewal.critical_areas]]`` layer, brought to the working CRS ``crs`` [m]; None when none is configured.

    Polygons, lines (a railway, a watercourse) and points (a hospital) are all accepted: a pipe
    counts as in an area when it is within the buffer of any part of a feature.

    Raises
    ------
    InputError
        a file or layer is missing or unreadable, or a layer has no CRS and the config gives none
    """
    if not sources:
        return None
    parts = [_areas(source, key=f"renewal.critical_areas[{place}]", crs=crs, findings=findings) for place, source in enumerate(sources)]
    return CriticalAreas(
        names=tuple(source.name for source in sources),
        consequence=tuple(source.consequence for source in sources),
        buffer_m=tuple(source.buffer_m for source in sources),
        layer=np.repeat(np.arange(len(sources)), [part.size for part in parts]),
        geometry=np.concatenate(parts) if parts else np.empty(0, dtype=object),
    )
