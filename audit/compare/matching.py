"""Which feature of the earlier audit is which of the later one: by id, else by where it lies.

1. **By id.** A feature whose id is unique in both audits is matched to the feature of the
   other audit with the same id. Ids are compared as text, stripped, whole numbers without a
   trailing ``.0`` (as the layers stage reads them); an empty id, or one of the
   ``[network] placeholder_ids`` of either audit, is no id.
2. **By geometry.** Every feature left over on either side (a duplicate, missing or placeholder
   id, an id the other audit does not hold) is matched by its end points: a pipe matches when
   both its ends lie within ``tolerance`` of the two ends of the other, in either order (a pipe
   drawn the other way round still matches); a manhole when its point lies within ``tolerance``.
   Candidates are found with a KD-tree over the ends of all leftover features at once. A feature
   with several candidates, or a candidate claimed by several features, is an *ambiguous* match:
   pairs are taken closest first (then in layer order), each feature at most once, and said as
   ``geometry_ambiguous``.
3. Whatever is left is ``removed`` (earlier audit only) or ``added`` (later audit only): never
   dropped.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd
import pyarrow as pa
import shapely
from numpy.typing import NDArray
from scipy.spatial import cKDTree

#: How a pair was matched, as written in the ``matched_by`` column.
BY_ID, BY_GEOMETRY, AMBIGUOUS = "id", "geometry", "geometry_ambiguous"

Rows = NDArray[np.int64]


@dataclass(frozen=True)
class Matches:
    """Pairs of rows (earlier, later) and the rows of each side left unmatched."""

    old: Rows  # row in the earlier layer, per pair
    new: Rows  # row in the later layer, per pair
    how: NDArray[np.object_]  # BY_ID, BY_GEOMETRY or AMBIGUOUS, per pair
    removed: Rows  # rows of the earlier layer with no partner
    added: Rows  # rows of the later layer with no partner


def plain_text(values: pd.Series, *, placeholders: frozenset[str] = frozenset()) -> pd.Series:
    """Values as compare reads text (ids, text fields): stripped Arrow strings, null where empty or a
    placeholder; a whole number written as a float loses its ``.0`` (as the layers stage reads ids).

    Examples
    --------
    >>> plain_text(pd.Series([" P1 ", "", None, "0"]), placeholders=frozenset({"0"})).tolist()
    ['P1', <NA>, <NA>, <NA>]
    >>> plain_text(pd.Series([12.0, 2.5, np.nan])).tolist()
    ['12', '2.5', <NA>]
    """
    values = values.reset_index(drop=True)
    if pd.api.types.is_float_dtype(values.dtype):
        number = values.to_numpy(dtype=float, na_value=np.nan)
        whole = np.isfinite(number) & (number == np.round(number)) & (np.abs(number) < 2.0**53)  # held exactly as an integer
        text = values.astype("string").mask(whole, pd.Series(np.where(whole, number, 0).astype(np.int64)).astype("string"))
    else:
        text = values.astype("string").str.strip()
    blank = (text == "").fillna(True)
    if placeholders:
        blank |= text.isin(list(placeholders)).fillna(False)
    return text.mask(blank)


def end_points(wkb: pa.Array) -> NDArray[np.float64]:
    """First and last coordinate of each geometry given as WKB, shape (n, 2, 2) [x, y]; NaN where it has none.

    A multi-part line runs from the first point of its first part to the last of its last; a
    point is both ends. Two-dimensional little-endian points and lines (what GDAL hands over
    for a GeoPackage) are read straight from the bytes of the whole column; any other geometry
    goes through shapely.

    Examples
    --------
    >>> geometry = [shapely.LineString([(0, 0), (1, 1), (2, 0)]), None, shapely.Point(5, 6),
    ...             shapely.MultiLineString([[(0, 0), (1, 0)], [(1, 0), (1, 3)]])]
    >>> end_points(pa.array(shapely.to_wkb(geometry), type=pa.binary())).tolist()
    [[[0.0, 0.0], [2.0, 0.0]], [[nan, nan], [nan, nan]], [[5.0, 6.0], [5.0, 6.0]], [[0.0, 0.0], [1.0, 3.0]]]
    """
    wkb = wkb.cast(pa.large_binary())
    count = len(wkb)
    ends = np.full((count, 2, 2), np.nan)
    if count == 0:
        return ends
    offsets = np.frombuffer(wkb.buffers()[1], dtype=np.int64)[wkb.offset : wkb.offset + count + 1]
    data = np.frombuffer(wkb.buffers()[2], dtype=np.uint8) if wkb.buffers()[2] is not None else np.zeros(0, np.uint8)
    start, size = offsets[:-1], np.diff(offsets)
    known = ~wkb.is_null().to_numpy(zero_copy_only=False) & (size >= 21)
    head = np.where(known, start, 0)
    little = known & (_bytes(data, head, 1)[:, 0] == 1)
    kind = _bytes(data, head + 1, 4).view("<u4").ravel()
    point = little & (kind == 1) & (size == 21)
    line = little & (kind == 2) & (size >= 41) & ((size - 9) % 16 == 0)
    ends[point] = _bytes(data, head[point] + 5, 16).view("<f8").reshape(-1, 1, 2)
    ends[line, 0] = _bytes(data, head[line] + 9, 16).view("<f8")
    ends[line, 1] = _bytes(data, head[line] + size[line] - 16, 16).view("<f8")
    other = np.flatnonzero(known & ~point & ~line)
    if other.size:
        ends[other] = _shapely_ends(shapely.from_wkb(wkb.take(pa.array(other)).to_numpy(zero_copy_only=False), on_invalid="ignore"))
    return ends


def _bytes(data: NDArray[np.uint8], at: NDArray[np.int64], width: int) -> NDArray[np.uint8]:
    """``width`` bytes from each position ``at``, one row per position (a position past the end reads the last bytes)."""
    if data.size < width:
        return np.zeros((at.size, width), dtype=np.uint8)
    windows = np.lib.stride_tricks.sliding_window_view(data, width)  # row i: bytes i .. i + width - 1, no copy
    return windows[np.minimum(at, data.size - width)]


def _shapely_ends(geometry: NDArray[np.object_]) -> NDArray[np.float64]:
    """First and last coordinate of each shapely geometry, (n, 2, 2); NaN where it has none."""
    coords, owner = shapely.get_coordinates(geometry, return_index=True)
    count = np.bincount(owner, minlength=len(geometry))
    last = np.cumsum(count) - 1
    has = count > 0
    ends = np.full((len(geometry), 2, 2), np.nan)
    ends[has, 0] = coords[(last - count + 1)[has]]
    ends[has, 1] = coords[last[has]]
    return ends


def id_codes(old_ids: pd.Series, new_ids: pd.Series) -> tuple[NDArray[np.int64], NDArray[np.int64], int]:
    """One integer per distinct id across both audits (-1 where none), and how many distinct ids there are."""
    codes, distinct = pd.factorize(pd.concat([old_ids, new_ids], ignore_index=True))
    codes = np.asarray(codes, dtype=np.int64)
    return codes[: len(old_ids)], codes[len(old_ids) :], len(distinct)


def match_features(old_ids: pd.Series, new_ids: pd.Series, old_ends: NDArray[np.float64],
                   new_ends: NDArray[np.float64], *, tolerance: float) -> Matches:  # fmt: skip
    """Match two layers' features: by unique id, then by end points within ``tolerance``.

    Parameters
    ----------
    old_ids, new_ids : ids per row (null where none), as :func:`plain_text` gives them
    old_ends, new_ends : end points per row, (n, 2, 2), in one coordinate system [CRS unit]
    tolerance : largest distance between matching ends [CRS unit]
    """
    old_code, new_code, distinct = id_codes(old_ids, new_ids)
    old_unique, new_unique = _used_once(old_code, distinct), _used_once(new_code, distinct)
    row_of = np.full(distinct + 1, -1, dtype=np.int64)  # the new row of each id unique in the new layer (last slot: none)
    row_of[new_code[new_unique]] = np.flatnonzero(new_unique)
    partner = np.where(old_unique, row_of[np.where(old_unique, old_code, distinct)], -1)
    by_id_old = np.flatnonzero(partner >= 0)
    by_id_new = partner[by_id_old]
    old_left_mask = np.ones(len(old_code), dtype=bool)
    old_left_mask[by_id_old] = False
    new_left_mask = np.ones(len(new_code), dtype=bool)
    new_left_mask[by_id_new] = False
    old_left, new_left = np.flatnonzero(old_left_mask), np.flatnonzero(new_left_mask)
    pick_old, pick_new, ambiguous = match_ends(old_ends[old_left], new_ends[new_left], tolerance=tolerance)
    old_left_mask[old_left[pick_old]] = False
    new_left_mask[new_left[pick_new]] = False
    old = np.concatenate([by_id_old, old_left[pick_old]])
    new = np.concatenate([by_id_new, new_left[pick_new]])
    how = np.concatenate([np.full(by_id_old.size, BY_ID, dtype=object), np.where(ambiguous, AMBIGUOUS, BY_GEOMETRY).astype(object)])
    order = np.argsort(new, kind="stable")
    return Matches(old[order], new[order], how[order], np.flatnonzero(old_left_mask), np.flatnonzero(new_left_mask))


def _used_once(codes: NDArray[np.int64], distinct: int) -> NDArray[np.bool_]:
    """Rows whose id is known and used by no other row of the same layer."""
    known = codes >= 0
    uses = np.bincount(codes[known], minlength=distinct + 1)  # one slot more, so that a layer with no id at all indexes safely
    return known & (uses[np.where(known, codes, 0)] == 1)


def match_ends(old: NDArray[np.float64], new: NDArray[np.float64], *, tolerance: float) -> tuple[Rows, Rows, NDArray[np.bool_]]:
    r"""One-to-one pairs of features whose two ends lie within ``tolerance`` of each other, in either order.

    Features :math:`p` (ends :math:`p_1, p_2`) and :math:`q` are candidates when

    .. math:: \max(|p_1 - q_1|, |p_2 - q_2|) \le t \quad \text{or} \quad \max(|p_1 - q_2|, |p_2 - q_1|) \le t

    found among all features at once with a KD-tree [1]_ over the four coordinates of each
    feature's ends (both orders of the later ones), searched within :math:`t \sqrt{2}`, which
    holds every such pair, then checked end by end.

    Parameters
    ----------
    old, new : end points, (n, 2, 2) and (m, 2, 2); rows with an unknown end match nothing
    tolerance : largest distance of each end from its partner [CRS unit]

    Returns
    -------
    the row of each pair in ``old`` and in ``new``, and whether the pair was ambiguous (either
    feature had another candidate). Pairs are taken closest first (sum of the two end
    distances), ties in row order, each row at most once.

    References
    ----------
    .. [1] Bentley, J. L. (1975), Multidimensional binary search trees used for associative
       searching, Communications of the ACM 18(9), 509-517 (from memory).

    Examples
    --------
    >>> a = np.array([[[0.0, 0.0], [10.0, 0.0]], [[0.0, 5.0], [10.0, 5.0]]])
    >>> b = np.array([[[10.0, 5.2], [0.1, 5.0]], [[50.0, 0.0], [60.0, 0.0]]])
    >>> match_ends(a, b, tolerance=0.5)
    (array([1]), array([0]), array([False]))
    """
    known_old = np.flatnonzero(np.isfinite(old).all(axis=(1, 2)))
    known_new = np.flatnonzero(np.isfinite(new).all(axis=(1, 2)))
    empty = np.empty(0, dtype=np.int64)
    if known_old.size == 0 or known_new.size == 0:
        return empty, empty, np.empty(0, dtype=bool)
    both_ways = np.concatenate([new[known_new], new[known_new][:, ::-1]])
    owner = np.concatenate([known_new, known_new])
    # two ends each within the tolerance are within tolerance * sqrt(2) in the four coordinates
    near = cKDTree(old[known_old].reshape(-1, 4)).sparse_distance_matrix(
        cKDTree(both_ways.reshape(-1, 4)), max_distance=tolerance * np.sqrt(2.0), output_type="ndarray"
    )
    i, j = known_old[near["i"]], owner[near["j"]]
    gaps = np.hypot(*(old[i] - both_ways[near["j"]]).transpose(2, 0, 1))  # (pairs, 2): distance of each end
    keep = (gaps <= tolerance).all(axis=1)
    i, j, distance = i[keep], j[keep], gaps[keep].sum(axis=1)
    order = np.lexsort((j, i, distance))
    i, j, distance = i[order], j[order], distance[order]
    first = ~pd.DataFrame({"i": i, "j": j}).duplicated().to_numpy()  # a pipe shorter than the tolerance matches both ways
    i, j = i[first], j[first]
    contested = (np.bincount(i, minlength=len(old))[i] > 1) | (np.bincount(j, minlength=len(new))[j] > 1)
    chosen = _closest_first(i, j)
    return i[chosen], j[chosen], contested[chosen]


def _closest_first(i: Rows, j: Rows) -> NDArray[np.bool_]:
    """Pairs, closest first, taken while neither row is taken: one round per layer of contest.

    In each round every pair that is the best remaining one for both of its rows is taken
    (the closest remaining pair always is), and every pair that shares a row with it is dropped.
    """
    chosen = np.zeros(i.size, dtype=bool)
    live = np.ones(i.size, dtype=bool)
    while live.any():
        rows = np.flatnonzero(live)
        best_i = rows[~pd.Series(i[rows]).duplicated().to_numpy()]
        best_j = rows[~pd.Series(j[rows]).duplicated().to_numpy()]
        taken = np.intersect1d(best_i, best_j)
        chosen[taken] = True
        live &= ~(np.isin(i, i[taken]) | np.isin(j, j[taken]))
    return chosen
