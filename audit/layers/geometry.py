"""Geometry clean-up of one layer: 2D, one part per feature, of the layer's kind.

Vectorised over all features with shapely; the caller turns the returned masks into findings
(codes ``no_geometry``, ``wrong_geometry_type``, ``multipart_line``, ``multipart_point``).
"""

from __future__ import annotations

import numpy as np
import shapely


def _longest_parts(multi: np.ndarray) -> np.ndarray:
    """The longest part of each multi-line, vectorised over all of them."""
    parts, owner = shapely.get_parts(multi, return_index=True)
    order = np.lexsort((-shapely.length(parts), owner))
    _, first = np.unique(owner[order], return_index=True)
    return parts[order][first]


def _merge_lines(geometry: np.ndarray, multi: np.ndarray) -> np.ndarray:
    """Merge multi-lines in place (directed) where they join; else keep their longest part.

    Returns the mask of the multi-lines that did not join.
    """
    index = np.flatnonzero(multi)
    merged = shapely.line_merge(geometry[index], directed=True)
    joined = shapely.get_type_id(merged) == shapely.GeometryType.LINESTRING
    geometry[index[joined]] = merged[joined]
    geometry[index[~joined]] = _longest_parts(geometry[index[~joined]])
    return np.isin(np.arange(len(geometry)), index[~joined])


_KINDS = {
    "line": (shapely.GeometryType.LINESTRING, shapely.GeometryType.MULTILINESTRING),
    "point": (shapely.GeometryType.POINT, shapely.GeometryType.MULTIPOINT),
    "polygon": (shapely.GeometryType.POLYGON, shapely.GeometryType.MULTIPOLYGON),
}


def clean_geometry(geometry: np.ndarray, *, kind: str) -> tuple[np.ndarray, dict[str, np.ndarray]]:
    """2D geometries of one kind: LineStrings, Points or (multi-)Polygons.

    A multi-line keeps its merged line, else its longest part; a multi-point keeps its first
    point; a multi-polygon stays whole (its area is the sum of its parts).

    Parameters
    ----------
    geometry : shapely geometries of one layer (modified in place and returned)
    kind : ``"line"`` (pipes), ``"point"`` (manholes) or ``"polygon"`` (catchments)

    Returns
    -------
    the cleaned geometries (None where unusable) and one boolean mask per finding code
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
    if kind == "line":
        flags["multipart_line"] = _merge_lines(geometry, multi)
    elif kind == "point":
        flags["multipart_point"] = multi & (shapely.get_num_geometries(geometry) > 1)
        geometry[multi] = shapely.get_geometry(geometry[multi], 0)
    geometry[empty | flags["wrong_geometry_type"]] = None
    return geometry, flags


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
    "multipart_line": "the parts of the line do not join into one line; the longest part is kept",
    "multipart_point": "the manhole has several points; the first is kept",
}
