"""Vectorised text for the rules stage: fixed-decimal numbers and joins over Arrow string arrays.

Reasons are built for a million pipes at a time, so every step here is one Arrow compute call
over a whole column; no Python string is made per pipe. A text column is a ``pyarrow`` string
array that is null where a rule does not apply.
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np
import pyarrow as pa
import pyarrow.compute as pc


def fixed(values: np.ndarray, decimals: int) -> pa.Array:
    """Numbers as text with ``decimals`` digits after the point (half-way cases to even).

    Examples
    --------
    >>> fixed(np.array([1.344, -0.5, 7.0, np.inf, 1e308]), 2).to_pylist()
    ['1.34', '-0.50', '7.00', 'inf', '1e+308']
    """
    values = np.asarray(values, dtype=float)
    # beyond 1e15 the fixed digits would overflow an int64: such a value is written as Arrow prints it (1e+308)
    finite = np.isfinite(values) & (np.abs(values) < 1e15)
    scaled = np.round(np.where(finite, values, 0.0) * 10**decimals).astype(np.int64)
    magnitude = np.abs(scaled)
    text = pc.cast(pa.array(magnitude // 10**decimals), pa.string())
    if decimals > 0:
        fraction = pc.utf8_lpad(pc.cast(pa.array(magnitude % 10**decimals), pa.string()), decimals, "0")
        text = concat(text, ".", fraction)
    text = concat(pc.if_else(pa.array(scaled < 0), "-", ""), text)
    if finite.all():
        return text
    return pc.if_else(pa.array(finite), text, pc.cast(pa.array(values), pa.string()))


def concat(*parts: pa.Array | str) -> pa.Array:
    """Join text columns and literal strings row by row, with nothing between them."""
    return pc.binary_join_element_wise(*parts, "")


def pick(choices: Sequence[str], index: np.ndarray) -> pa.Array:
    """``choices[index]`` per row."""
    return pa.array(list(choices), type=pa.string()).take(pa.array(np.asarray(index, dtype=np.int64)))


def strings(values: np.ndarray) -> pa.Array:
    """An array of Python strings as a text column."""
    return pa.array(np.asarray(values, dtype=object), type=pa.string())


def join(hits: Sequence[tuple[np.ndarray, pa.Array | str]], *, sep: str, count: int) -> pa.Array:
    """Per row, the texts of the hits whose mask holds, in the hits' order, joined with ``sep``.

    Each hit is a mask over ``count`` rows and its text: one row per True in the mask, or one
    string for all of them. Rows that no hit covers get "". The texts are gathered into one list
    per row (a stable sort by row keeps the hits' order) and joined in a single call.

    Examples
    --------
    >>> join([(np.array([True, False, True]), "a"), (np.array([True, True, False]), pa.array(["b", "c"]))],
    ...      sep="; ", count=3).to_pylist()
    ['a; b', 'c', 'a']
    """
    where = [np.flatnonzero(mask) for mask, _ in hits]
    texts = [pa.repeat(text, len(rows_)) if isinstance(text, str) else text for (_, text), rows_ in zip(hits, where, strict=True)]
    if not texts:
        return pa.repeat("", count)
    row = np.concatenate(where)
    order = np.argsort(row, kind="stable")
    values = pa.concat_arrays([text.cast(pa.string()) for text in texts]).take(pa.array(order))
    offsets = np.concatenate([[0], np.cumsum(np.bincount(row, minlength=count))]).astype(np.int32)
    return pc.binary_join(pa.ListArray.from_arrays(pa.array(offsets), values), sep)


def rows(text: pa.Array, mask: np.ndarray) -> pa.Array:
    """The rows of ``text`` where ``mask`` holds."""
    return text.filter(pa.array(mask))
