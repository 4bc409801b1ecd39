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


def clean_geometry(geometry: np.ndarray, *, lines: bool) -> tuple[np.ndarray, dict[str, np.ndarray]]:
    """2D LineStrings (pipes) or Points (manholes; a multi-point keeps its first point).

    Parameters
    ----------
    geometry : shapely geometries of one layer (modified in place and returned)
    lines : True for a line layer, False for a point layer

    Returns
    -------
    the cleaned geometries (None where unusable) and one boolean mask per finding code
    """
    kinds = shapely.GeometryType
    single, several = (kinds.LINESTRING, kinds.MULTILINESTRING) if lines else (kinds.POINT, kinds.MULTIPOINT)
    geometry = shapely.force_2d(geometry)
    kind = shapely.get_type_id(geometry)
    empty = (kind < 0) | shapely.is_empty(geometry)
    multi = (kind == several) & ~empty
    flags = {"no_geometry": empty, "wrong_geometry_type": ~empty & ~np.isin(kind, [single, several])}
    if lines:
        flags["multipart_line"] = _merge_lines(geometry, multi)
    else:
        flags["multipart_point"] = multi & (shapely.get_num_geometries(geometry) > 1)
        geometry[multi] = shapely.get_geometry(geometry[multi], 0)
    geometry[empty | flags["wrong_geometry_type"]] = None
    return geometry, flags


GEOMETRY_MESSAGES = {
    "no_geometry": "the feature has no geometry",
    "wrong_geometry_type": "not of the layer's kind (lines for pipes, points for manholes); it is left out",
    "multipart_line": "the parts of the line do not join into one line; the longest part is kept",
    "multipart_point": "the manhole has several points; the first is kept",
}
