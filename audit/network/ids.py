"""Ids of manholes and pipe ends as integer codes of one factorisation over Arrow strings.

Joining a million pipe ends to their manholes by id, and finding repeated manhole ids, are then
integer operations: no Python string is made per id.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd
import pyarrow as pa
import pyarrow.compute as pc


def id_text(values: pd.Series | None, count: int) -> pa.Array:
    """Ids as an Arrow text column, stripped; null where null or blank (all null for no column).

    Examples
    --------
    >>> id_text(pd.Series([" M1 ", "", None, 7], dtype=object), 4).to_pylist()
    ['M1', None, None, '7']
    """
    if values is None:
        return pa.nulls(count, pa.large_string())
    if isinstance(values.dtype, pd.StringDtype):  # stripped in bulk, without a Python str per id
        text = arrow_text(values)
    else:
        series = pd.Series(values.to_numpy(dtype=object))
        text = pa.array(series.where(series.isna(), series.astype(str)).to_numpy(dtype=object), type=pa.large_string(), from_pandas=True)
    text = pc.utf8_trim_whitespace(text)
    return pc.if_else(pc.equal(text, ""), pa.scalar(None, pa.large_string()), text)


def arrow_text(values: pd.Series) -> pa.Array:
    """A column of strings (None or NaN where missing) as one Arrow ``large_string`` array.

    A pandas column read in pieces is held as several Arrow chunks; they are joined here.

    Examples
    --------
    >>> pieces = pd.Series(pd.arrays.ArrowStringArray(pa.chunked_array([["a"], [None, "b"]])))
    >>> arrow_text(pieces).to_pylist()
    ['a', None, 'b']
    """
    if isinstance(values.dtype, pd.StringDtype):
        text = pa.array(values.array)
    else:
        text = pa.array(values.to_numpy(dtype=object), type=pa.large_string(), from_pandas=True)
    if isinstance(text, pa.ChunkedArray):
        text = text.combine_chunks() if text.num_chunks else pa.array([], pa.large_string())
    return text.cast(pa.large_string())


@dataclass(frozen=True, eq=False)
class IdCodes:
    """Manhole ids and pipe-end ids as integer codes of one factorisation (-1 where no id).

    The manhole ids come first, so the codes below ``manhole_count`` are exactly the distinct
    manhole ids, numbered in order of first appearance.
    """

    text: pa.Array  # every distinct id, indexed by code
    manhole: np.ndarray  # int64 per manhole row
    ends: np.ndarray  # int64 (n, 2)
    manhole_count: int


def id_codes(manhole_ids: pa.Array, from_ids: pa.Array, to_ids: pa.Array) -> IdCodes:
    """Factorise all ids at once; joins by id are then integer operations.

    Parameters
    ----------
    manhole_ids : one id per manhole row (see :func:`id_text`)
    from_ids, to_ids : one id per pipe for each end

    Returns
    -------
    IdCodes

    Examples
    --------
    >>> codes = id_codes(pa.array(["A", "B", "A"], pa.large_string()), pa.array(["B", None], pa.large_string()),
    ...                  pa.array(["C", "A"], pa.large_string()))
    >>> codes.manhole.tolist(), codes.ends.tolist(), codes.manhole_count
    ([0, 1, 0], [[1, 2], [-1, 0]], 2)
    """
    encoded = pc.dictionary_encode(pa.concat_arrays([manhole_ids, from_ids, to_ids]))
    codes = encoded.indices.fill_null(-1).to_numpy().astype(np.int64)
    manhole, count = codes[: len(manhole_ids)], len(from_ids)
    ends = np.stack([codes[len(manhole) : len(manhole) + count], codes[len(manhole) + count :]], axis=1)
    return IdCodes(encoded.dictionary, manhole, ends, int(manhole.max(initial=-1)) + 1)


def first_appearance(codes: np.ndarray) -> np.ndarray:
    """True where a code appears for the first time (codes numbered in order of first appearance).

    Examples
    --------
    >>> first_appearance(np.array([0, -1, 1, 0, 2, 1])).tolist()
    [True, False, True, False, True, False]
    """
    before = np.maximum.accumulate(np.r_[-1, codes[:-1]]) if codes.size else codes
    return codes > before


def first_places(values: pd.Series | np.ndarray, wanted: pd.Index) -> np.ndarray:
    """The position of the first of ``values`` equal to each of ``wanted``; -1 where none is.

    One hash lookup of every value among the few wanted, then the first of each among those found.

    Examples
    --------
    >>> first_places(np.array(["b", "a", "b", "c"], dtype=object), pd.Index(["b", "c", "x", "a"])).tolist()
    [0, 3, -1, 1]
    """
    values = pd.Series(values)
    hit = np.flatnonzero(values.isin(wanted).to_numpy())
    found = pd.Index(values.iloc[hit].to_numpy(dtype=object))
    first = ~found.duplicated()
    at = found[first].get_indexer(wanted)
    places = np.full(at.size, -1, dtype=np.intp)
    places[at >= 0] = hit[first][at[at >= 0]]
    return places


def pipe_labels(pipes: pd.DataFrame) -> np.ndarray:
    """The id that names each pipe in findings: ``pipe_id``, or ``#<row>`` where it is missing.

    Examples
    --------
    >>> pipe_labels(pd.DataFrame({"pipe_id": ["P1", None]})).tolist()
    ['P1', '#1']
    """
    if "pipe_id" in pipes.columns and isinstance(pipes["pipe_id"].dtype, pd.StringDtype):
        given = pipes["pipe_id"].to_numpy(dtype=object)
        missing = pd.isna(given)
        if not missing.any():  # the layers stage names every pipe: nothing to fill or convert
            return given
    rows = pd.Series(np.arange(len(pipes)).astype(str), dtype=object)
    fallback = "#" + rows
    if "pipe_id" not in pipes.columns:
        return fallback.to_numpy(dtype=object)
    given = pd.Series(pipes["pipe_id"].to_numpy(dtype=object))
    return given.where(given.notna(), fallback).astype(str).to_numpy(dtype=object)
