"""The geometric side of the network: pipe end points, snapping them to manholes, clustering.

Everything here works on all pipes at once: one coordinate extraction for every line, one
spatial-tree query for every end, one sparse-graph labelling for the ends that meet each other.
Ends and manholes are points, so the trees are k-d trees over coordinates (scipy.spatial).
"""

from __future__ import annotations

import numpy as np
import shapely
from scipy.sparse import coo_matrix
from scipy.sparse.csgraph import connected_components
from scipy.spatial import cKDTree


def line_ends(geometry: np.ndarray) -> np.ndarray:
    """First and last vertex of every line, in digitising order.

    Parameters
    ----------
    geometry : array of shapely geometries (LineString or MultiLineString; None or empty allowed)

    Returns
    -------
    float array of shape (n, 2, 2): ``[pipe, end, axis]`` with end 0 the first vertex and end 1
    the last vertex [m]; NaN for a geometry without coordinates. A multi-part line gives the
    first vertex of its first part and the last vertex of its last part.

    Examples
    --------
    >>> ends = line_ends(np.array([shapely.LineString([(0, 0), (1, 0), (1, 2)]), None]))
    >>> ends[0].tolist(), bool(np.isnan(ends[1]).all())
    ([[0.0, 0.0], [1.0, 2.0]], True)
    """
    geometry = np.asarray(geometry, dtype=object)
    ends = np.full((len(geometry), 2, 2), np.nan)
    coords, owner = shapely.get_coordinates(geometry, return_index=True)
    if owner.size == 0:
        return ends
    first = np.flatnonzero(np.r_[True, owner[1:] != owner[:-1]])
    last = np.r_[first[1:] - 1, owner.size - 1]
    ends[owner[first], 0] = coords[first]
    ends[owner[last], 1] = coords[last]
    return ends


def midpoints(geometry: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Point half-way along every line, to place a finding about a pipe.

    Parameters
    ----------
    geometry : array of shapely geometries (None or empty allowed)

    Returns
    -------
    x, y of the point at half the line's length [m]; NaN where there is no geometry

    Examples
    --------
    >>> x, y = midpoints(np.array([shapely.LineString([(0, 0), (4, 0)]), None]))
    >>> x.tolist()[0], y.tolist()[0], bool(np.isnan(x[1]))
    (2.0, 0.0, True)
    """
    geometry = np.asarray(geometry, dtype=object)
    usable = ~(shapely.is_missing(geometry) | shapely.is_empty(geometry))
    x = np.full(len(geometry), np.nan)
    y = np.full(len(geometry), np.nan)
    points = shapely.line_interpolate_point(geometry[usable], 0.5, normalized=True)
    x[usable] = shapely.get_x(points)
    y[usable] = shapely.get_y(points)
    return x, y


def nearest_points(
    ends_xy: np.ndarray, points_xy: np.ndarray, *, tolerance_m: float, count: int = 1
) -> tuple[np.ndarray, np.ndarray]:
    """The ``count`` nearest points within the tolerance of every end, by one spatial-tree query.

    The tree is a k-d tree over the target points (``scipy.spatial.cKDTree``): for points it
    answers a bounded nearest-neighbour query for millions of ends several times faster than an
    R-tree of geometries, with the same result.

    Parameters
    ----------
    ends_xy : float array (m, 2) of end coordinates [m]; rows with NaN or infinity never snap
    points_xy : float array (k, 2) of target coordinates [m]; rows with NaN or infinity are never targets
    tolerance_m : largest distance at which an end still snaps (inclusive) [m]
    count : how many of the nearest points to return per end, nearest first

    Returns
    -------
    int64 (m, count) index into ``points_xy`` (-1 where no further point lies within the
    tolerance), and float (m, count) distances to them [m] (NaN where none)

    Examples
    --------
    >>> hit, dist = nearest_points(np.array([[0.3, 0.0], [5.0, 5.0]]),
    ...                            np.array([[0.0, 0.0], [9.0, 9.0], [0.0, 0.4]]), tolerance_m=0.5, count=2)
    >>> hit.tolist(), round(float(dist[0, 0]), 6)
    ([[0, 2], [-1, -1]], 0.3)
    >>> nearest_points(np.array([[0.5, 0.0]]), np.array([[0.0, 0.0]]), tolerance_m=0.5)[0].tolist()
    [[0]]
    """
    hit = np.full((len(ends_xy), count), -1, dtype=np.int64)
    distance = np.full((len(ends_xy), count), np.nan)
    end_ok = np.flatnonzero(np.isfinite(ends_xy).all(axis=1))  # the tree holds finite points only
    target_ok = np.flatnonzero(np.isfinite(points_xy).all(axis=1))
    if end_ok.size == 0 or target_ok.size == 0:
        return hit, distance
    bound = np.nextafter(tolerance_m, np.inf)  # the tree's bound is strict; the tolerance is not
    found, nearest = cKDTree(points_xy[target_ok]).query(ends_xy[end_ok], k=[*range(1, count + 1)], distance_upper_bound=bound)
    within = nearest < target_ok.size  # a miss comes back as index == size, distance inf
    rows, columns = np.nonzero(within)
    hit[end_ok[rows], columns] = target_ok[nearest[rows, columns]]
    distance[end_ok[rows], columns] = found[rows, columns]
    return hit, distance


def cluster_points(xy: np.ndarray, *, tolerance_m: float) -> np.ndarray:
    """Group points that lie within the tolerance of each other (chains join into one group).

    Parameters
    ----------
    xy : float array (m, 2) of coordinates [m], no NaN
    tolerance_m : distance at or below which two points belong to the same group [m]

    Returns
    -------
    int64 group label per point, numbered 0, 1, ... in order of each group's first point

    Examples
    --------
    >>> cluster_points(np.array([[5.0, 0.0], [0.0, 0.0], [5.2, 0.0], [0.1, 0.0]]),
    ...                tolerance_m=0.5).tolist()
    [0, 1, 0, 1]
    """
    count = len(xy)
    if count == 0:
        return np.zeros(0, dtype=np.int64)
    pairs = cKDTree(xy).query_pairs(tolerance_m, output_type="ndarray")
    graph = coo_matrix((np.ones(len(pairs), dtype=np.int8), (pairs[:, 0], pairs[:, 1])), shape=(count, count))
    _, raw = connected_components(graph, directed=False)
    return first_appearance_labels(raw)


def first_appearance_labels(raw: np.ndarray) -> np.ndarray:
    """Renumber labels 0, 1, ... in the order in which each label first appears.

    Examples
    --------
    >>> first_appearance_labels(np.array([7, 3, 7, 9])).tolist()
    [0, 1, 0, 2]
    """
    if raw.size == 0:
        return np.zeros(0, dtype=np.int64)
    values, first, inverse = np.unique(raw, return_index=True, return_inverse=True)
    rank = np.empty(values.size, dtype=np.int64)
    rank[np.argsort(first, kind="stable")] = np.arange(values.size)
    return rank[inverse.ravel()]
