"""Text that repeats, held once per distinct value.

Most text columns of an audit say one of a few things per row (a shape, a kind, a regime, the
flags joined, a worst severity) or one of some thousands (reasons, remedies with their
numbers). Held as a million separate texts they take tens of megabytes a column; as pandas
categories they take a code per row and one copy of each distinct text.
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np
import pandas as pd
import pyarrow as pa

__all__ = ["as_labels", "labels_from"]


def as_labels(text: pa.Array | pd.Series | np.ndarray) -> pd.Categorical:
    """Text that repeats (codes, labels, flags joined, reasons, remedies) as pandas categories:
    each distinct text is held once and each row as a small code (a missing value as -1), a
    tenth or less of the memory of a million texts. Arrow text (or a column of it) is encoded
    without making Python strings of it; the categories are Python strings, so the column
    turned back into Python text (``to_numpy(dtype=object)``) shares one string per category.

    >>> labels = as_labels(np.array(["surcharge", "", None, "surcharge"], dtype=object))
    >>> labels.codes.tolist(), labels.categories.tolist()
    ([0, 1, -1, 0], ['surcharge', ''])
    """
    if isinstance(text, pd.Categorical):
        return text
    if isinstance(text, np.ndarray) and text.dtype == object:
        codes, distinct = pd.factorize(text)  # by hashing, in the order first seen
        return pd.Categorical.from_codes(codes, categories=pd.Index(distinct, dtype=object))
    array = pa.array(text)
    if isinstance(array, pa.ChunkedArray):  # a column read in batches
        array = array.combine_chunks()
    if pa.types.is_null(array.type):  # every value missing: no category
        array = array.cast(pa.string())
    encoded = array.dictionary_encode()
    codes = encoded.indices.fill_null(-1).to_numpy(zero_copy_only=False)
    return pd.Categorical.from_codes(codes, categories=pd.Index(encoded.dictionary.to_pandas(), dtype=object))


def labels_from(codes: np.ndarray, words: Sequence[str] | np.ndarray | pa.Array) -> pd.Categorical:
    """``words[codes]`` as labels (:func:`as_labels`) without a Python string per row: the rows
    keep their codes into the short table ``words`` (Python or Arrow text), whose repeated
    texts are merged (a code of -1 is a missing value).

    >>> labels = labels_from(np.array([2, 0, 1, -1]), ["", "age x depth", ""])
    >>> labels.tolist()[:3], labels.codes.tolist(), labels.categories.tolist()
    (['', '', 'age x depth'], [0, 0, 1, -1], ['', 'age x depth'])
    """
    table = as_labels(words if isinstance(words, pa.Array) else np.asarray(words, dtype=object))
    which = np.asarray(table.codes, dtype=np.intp)
    codes = np.asarray(codes)
    merged = np.where(codes >= 0, which[np.maximum(codes, 0)] if which.size else -1, -1)
    return pd.Categorical.from_codes(merged, categories=table.categories)
