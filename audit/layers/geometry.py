"""Geometry clean-up of one layer: 2D, one part per feature, of the layer's kind.

Vectorised over all features with shapely; the caller turns the returned masks and messages into
findings (codes ``no_geometry``, ``wrong_geometry_type``, ``multipart_line``,
``multipart_point``).

A geometry with a coordinate that is not a finite number, or that lies farther from the CRS's
origin than any place on Earth can (:data:`MAX_COORDINATE_M`), is no position at all: the
caller removes it (:func:`unusable_coordinates`) and the feature stays without a geometry, with
a ``no_geometry`` finding that says why.

A multi-line whose parts join end to start is merged into one line. One whose parts do not join
(a gap, or parts drawn in different directions) is chained: its parts are taken in the order
they are stored, each turned where that brings its start nearer the end of the one before, and
joined across the gaps into one line, so the pipe keeps both of its real ends. Its drawn length
is the total of its parts, without the gaps; the finding gives the parts, their lengths and the
gaps.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

import numpy as np
import pandas as pd
import shapely

MAX_COORDINATE_M = 4.0e9
"""Largest coordinate magnitude taken as a position [m]: a hundred times the Earth's circumference
(about 4.0e7 m; common practice, no source); false eastings and northings stay far below it."""


def unusable_coordinates(geometry: np.ndarray, *, limit: float = np.inf) -> np.ndarray:
    """True for every geometry with an x or y that is NaN, infinite or larger in magnitude than ``limit``.

    Examples
    --------
    >>> lines = np.array([shapely.LineString([(0, 0), (1, 1)]), shapely.LineString([(0, 0), (np.inf, 1)]), None])
    >>> unusable_coordinates(lines).tolist()
    [False, True, False]
    >>> unusable_coordinates(np.array([shapely.Point(5e9, 0.0)]), limit=MAX_COORDINATE_M).tolist()
    [True]
    """
    coordinates, owner = shapely.get_coordinates(geometry, return_index=True)
    with np.errstate(invalid="ignore"):
        bad = ~(np.isfinite(coordinates) & (np.abs(coordinates) <= limit)).all(axis=1)
    unusable = np.zeros(len(geometry), dtype=bool)
    unusable[owner[bad]] = True
    return unusable


@dataclass(frozen=True)
class CleanGeometry:
    """A layer's geometries after clean-up, with what was found on the way.

    ``drawn_length`` is the total length of every part of a line [layer units] (NaN for points
    and polygons and where there is no geometry); ``flags`` one mask per finding code;
    ``messages`` per code one message per feature where the generic wording is not enough.
    """

    geometry: np.ndarray
    drawn_length: np.ndarray
    flags: dict[str, np.ndarray]
    messages: dict[str, np.ndarray]


def _chain(multi: shapely.MultiLineString) -> tuple[shapely.LineString, str]:
    """The parts of a multi-line joined in stored order across their gaps, and a message with the numbers."""
    parts = [part for part in shapely.get_parts(multi) if not part.is_empty and part.length > 0]
    coordinates: list[np.ndarray] = []
    gaps: list[float] = []
    turned = 0
    for part in parts:
        xy = np.asarray(part.coords)[:, :2]
        if coordinates:
            end = coordinates[-1][-1]
            if np.hypot(*(xy[-1] - end)) < np.hypot(*(xy[0] - end)):
                xy, turned = xy[::-1], turned + 1
            gaps.append(float(np.hypot(*(xy[0] - end))))
            if gaps[-1] == 0.0:
                xy = xy[1:]  # the shared vertex once, not twice
        coordinates.append(xy)
    line = shapely.linestrings(np.concatenate(coordinates)) if coordinates else None
    lengths = ", ".join(f"{part.length:.2f}" for part in parts)
    total = f"lengths {lengths} m, {sum(p.length for p in parts):.2f} m in all"
    if max(gaps, default=0.0) < 0.005:  # touching once turned: only the drawing direction of a part differs
        message = (f"the line has {len(parts)} parts drawn in different directions ({total}); {turned} "
                   f"{'part was' if turned == 1 else 'parts were'} turned to follow the first and they are joined into one line")
    else:
        message = (f"the line has {len(parts)} parts that do not join ({total}; gaps {', '.join(f'{gap:.2f}' for gap in gaps)} m); "
                   "the parts are joined in order across the gaps")
    return line, message


def _merge_lines(geometry: np.ndarray, multi: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Merge multi-lines in place (directed) where they join; else chain their parts.

    Empty parts are dropped first (they carry no vertex to join). Returns the mask of the
    multi-lines that did not join, and a message per feature for them.
    """
    index = np.flatnonzero(multi)
    geometry[index] = _without_empty_parts(geometry[index], shapely.multilinestrings)
    merged = shapely.line_merge(geometry[index], directed=True)
    joined = shapely.get_type_id(merged) == shapely.GeometryType.LINESTRING
    geometry[index[joined]] = merged[joined]
    messages = np.full(len(geometry), None, dtype=object)
    for row in index[~joined]:  # rare: a loop over the lines whose parts do not join, not over every pipe
        geometry[row], messages[row] = _chain(geometry[row])
    return np.isin(np.arange(len(geometry)), index[~joined]), messages


def _without_empty_parts(multi: np.ndarray, build: Callable[..., np.ndarray]) -> np.ndarray:
    """Multi-part geometries without their empty parts, rebuilt by ``build`` (``shapely.multilinestrings``, ...).

    Each is itself not empty, so it keeps at least one part.
    """
    parts, owner = shapely.get_parts(multi, return_index=True)
    empty = shapely.is_empty(parts)
    if not empty.any():
        return multi
    kept = np.unique(owner[~empty])
    rebuilt = np.full(len(multi), None, dtype=object)
    rebuilt[kept] = build(parts[~empty], indices=np.searchsorted(kept, owner[~empty]))
    return rebuilt


_KINDS = {
    "line": (shapely.GeometryType.LINESTRING, shapely.GeometryType.MULTILINESTRING),
    "point": (shapely.GeometryType.POINT, shapely.GeometryType.MULTIPOINT),
    "polygon": (shapely.GeometryType.POLYGON, shapely.GeometryType.MULTIPOLYGON),
}


def clean_geometry(geometry: np.ndarray, *, kind: str, why_missing: np.ndarray | None = None) -> CleanGeometry:
    """2D geometries of one kind: LineStrings, Points or (multi-)Polygons.

    A multi-line keeps its merged line, else its parts chained across the gaps; a multi-point
    keeps its first point; a multi-polygon stays whole (its area is the sum of its parts).

    Parameters
    ----------
    geometry : shapely geometries of one layer (modified in place and returned)
    kind : ``"line"`` (pipes), ``"point"`` (manholes) or ``"polygon"`` (catchments)
    why_missing : per feature, why the caller removed its geometry (None where it did not);
        the ``no_geometry`` message of those features

    Returns
    -------
    :class:`CleanGeometry`: the cleaned geometries (None where unusable), the drawn length of
    lines (all parts), one boolean mask per finding code and the messages that carry numbers
    """
    single, several = _KINDS[kind]
    measured = shapely.has_z(geometry)
    if hasattr(shapely, "has_m"):  # shapely >= 2.1 keeps M values
        measured |= shapely.has_m(geometry)
    if measured.any():  # force_2d copies every geometry; only those with Z or M need it
        geometry[measured] = shapely.force_2d(geometry[measured])
    type_id = shapely.get_type_id(geometry)
    empty = (type_id < 0) | shapely.is_empty(geometry)
    multi = (type_id == several) & ~empty
    flags = {"no_geometry": empty, "wrong_geometry_type": ~empty & ~np.isin(type_id, [single, several])}
    messages: dict[str, np.ndarray] = {}
    drawn_length = np.full(len(geometry), np.nan)
    if kind == "line":
        usable = ~empty & ~flags["wrong_geometry_type"]
        drawn_length[usable] = shapely.length(geometry[usable])  # a multi-line's length is the total of its parts
        flags["multipart_line"], messages["multipart_line"] = _merge_lines(geometry, multi)
    elif kind == "point":
        flags["multipart_point"] = multi & (shapely.get_num_geometries(geometry) > 1)
        geometry[multi] = shapely.get_geometry(_without_empty_parts(geometry[multi], shapely.multipoints), 0)
    geometry[empty | flags["wrong_geometry_type"]] = None
    if why_missing is not None and not pd.isna(why_missing).all():
        messages["no_geometry"] = np.where(pd.isna(why_missing), GEOMETRY_MESSAGES["no_geometry"], why_missing)
    return CleanGeometry(geometry, drawn_length, flags, messages)


def representative_points(geometry: np.ndarray, *, kind: str) -> tuple[np.ndarray, np.ndarray]:
    """x and y [m] where a feature's findings are placed: a line's midpoint, a polygon's centroid."""
    points = geometry
    if kind == "line":
        points = shapely.line_interpolate_point(points, 0.5, normalized=True)
    elif kind == "polygon":
        points = shapely.centroid(points)
    return shapely.get_x(points), shapely.get_y(points)


GEOMETRY_MESSAGES = {
    "no_geometry": "the feature has no geometry",
    "wrong_geometry_type": "not of the layer's kind (lines for pipes, points for manholes, polygons for catchments); it is left out",
    "multipart_line": "the parts of the line do not join into one line; they are joined in order across the gaps",
    "multipart_point": "the manhole has several points; the first is kept",
}
