"""Repeating text held as categories: the same texts back, one copy of each distinct text."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pyarrow as pa
import pytest

from audit.labels import as_labels

TEXTS = ["surcharge;silting", "", None, "surcharge;silting", "reverse_grade", ""]


@pytest.mark.parametrize(
    "given",
    [
        np.array(TEXTS, dtype=object),
        pa.array(TEXTS, type=pa.string()),
        pa.array(TEXTS, type=pa.large_string()),
        pd.Series(TEXTS, dtype="str"),
    ],
    ids=["python objects", "arrow text", "arrow large text", "pandas text column"],
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
