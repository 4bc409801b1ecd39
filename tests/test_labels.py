"""Repeating text held as categories: the same texts back, one copy of each distinct text."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pyarrow as pa
import pytest

from audit.labels import as_labels, labels_from

TEXTS = ["surcharge;silting", "", None, "surcharge;silting", "reverse_grade", ""]


@pytest.mark.parametrize(
    "given",
    [
        np.array(TEXTS, dtype=object),
        pa.array(TEXTS, type=pa.string()),
        pa.array(TEXTS, type=pa.large_string()),
        pd.Series(TEXTS, dtype="str"),
        pd.Series(pd.arrays.ArrowExtensionArray(pa.chunked_array([TEXTS[:2], TEXTS[2:]], type=pa.string()))),
    ],
    ids=["python objects", "arrow text", "arrow large text", "pandas text column", "pandas column in chunks"],
)
def test_the_same_texts_come_back_with_one_category_each(given: object) -> None:
    labels = as_labels(given)  # type: ignore[arg-type]
    back = pd.Series(labels).to_numpy(dtype=object)
    assert [None if pd.isna(value) else value for value in back] == TEXTS
    assert sorted(labels.categories) == ["", "reverse_grade", "surcharge;silting"]
    assert labels.codes.tolist().count(-1) == 1


def test_python_text_of_the_labels_shares_one_string_per_category() -> None:
    labels = as_labels(pa.array(["flooding"] * 1000 + ["none"] * 1000))
    back = pd.Series(labels).to_numpy(dtype=object)
    assert len({id(value) for value in back}) == 2
    assert (back[0], back[-1]) == ("flooding", "none")


def test_all_missing_text_gives_no_category() -> None:
    labels = as_labels(pa.array([None, None], type=pa.string()))
    assert labels.categories.size == 0
    assert labels.codes.tolist() == [-1, -1]


@pytest.mark.parametrize("given", [pd.Series([None, None], dtype=object), pa.nulls(2)], ids=["pandas", "arrow"])
def test_a_column_with_every_value_missing_has_no_category(given: object) -> None:
    labels = as_labels(given)  # type: ignore[arg-type]
    assert labels.codes.tolist() == [-1, -1]
    assert labels.categories.tolist() == []


def test_labels_from_a_short_table_merge_repeated_words() -> None:
    labels = labels_from(np.array([3, 0, 2, 1, -1]), pa.array(["x", "", "x", "y"]))
    assert pd.Series(labels).tolist()[:4] == ["y", "x", "x", ""]
    assert labels.codes.tolist()[4] == -1
    assert sorted(labels.categories) == ["", "x", "y"]
