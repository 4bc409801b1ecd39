"""Field values of one layer: text, numbers in the user's unit, ids; problems become findings.

Findings emitted: ``not_a_number``, ``sentinel_value``, ``nonpositive_size``, ``missing_id``,
``duplicate_id`` (see audit.layers for their meaning).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from .findings import FindingLog

SIZES = frozenset({"diameter", "height", "width", "length", "depth", "area_ha"})


@dataclass(frozen=True)
class Reporter:
    """Adds findings for one layer, naming each feature by id and placing it at (x, y)."""

    findings: FindingLog
    layer: str
    ids: np.ndarray
    x: np.ndarray
    y: np.ndarray

    def add(self, mask: np.ndarray, code: str, messages: pd.Series | str) -> None:
        """One finding per True in ``mask``; ``messages`` is one per feature (all rows) or one for all."""
        if mask.any():
            if isinstance(messages, pd.Series):
                messages = messages.to_numpy(dtype=object)[mask]
            self.findings.add_many(self.layer, self.ids[mask], code, messages, x=self.x[mask], y=self.y[mask])


def as_text(raw: pd.Series) -> np.ndarray:
    """Values as stripped strings (None where null or blank); whole floats lose their '.0'."""
    if pd.api.types.is_float_dtype(raw.dtype):
        values = raw.to_numpy(dtype=float, na_value=np.nan)
        text = np.full(len(values), None, dtype=object)
        known = np.isfinite(values)
        whole = known & (values == np.round(values))
        text[whole] = values[whole].astype(np.int64).astype(str)
        text[known & ~whole] = values[known & ~whole].astype(str)
        return text
    strings = raw.astype("string").str.strip()
    strings = strings.mask((strings == "").fillna(False))
    return strings.astype(object).where(strings.notna(), None).to_numpy(dtype=object)


def quoted(raw: pd.Series) -> pd.Series:
    return "'" + raw.astype("string").fillna("") + "'"


def as_number(raw: pd.Series, *, name: str, field: str, sentinels: tuple[float, ...], report: Reporter) -> np.ndarray:
    """Numbers of one mapped field in the user's unit; bad values become NaN with a finding."""
    blank = raw.isna().to_numpy() | (raw.astype("string").str.strip() == "").fillna(True).to_numpy()
    coerced = pd.to_numeric(raw, errors="coerce")
    values = np.array(pd.Series(coerced, dtype="float64").to_numpy(dtype=float, na_value=np.nan))
    shown = quoted(raw)
    report.add(np.isnan(values) & ~blank, "not_a_number", f"{name} field '{field}' = " + shown + " is not a number")
    sentinel = np.isin(values, sentinels)
    report.add(sentinel, "sentinel_value", f"{name} field '{field}' = " + shown + " is a 'missing' sentinel")
    values[sentinel] = np.nan
    if name in SIZES:
        nonpositive = values <= 0
        report.add(nonpositive, "nonpositive_size", f"{name} field '{field}' = " + shown + " is not a positive size")
        values[nonpositive] = np.nan
    return values


def feature_ids(raw: pd.Series | None, *, count: int) -> tuple[np.ndarray, np.ndarray]:
    """Feature ids (``#<row>`` where none) and a mask of the rows whose id was missing."""
    rows = "#" + pd.RangeIndex(count).astype(str).to_numpy(dtype=object)
    if raw is None:
        return rows, np.zeros(count, dtype=bool)
    text = as_text(raw)
    missing = pd.isna(text)
    return np.where(missing, rows, text), missing


def report_ids(report: Reporter, missing: np.ndarray, *, field: str | None) -> None:
    report.add(missing, "missing_id", f"id field '{field}' is empty; the feature is called by its row")
    ids = pd.Series(report.ids, dtype=object).where(~missing)
    uses = ids.groupby(ids, dropna=True).transform("size").reindex(ids.index)
    duplicate = (uses > 1).to_numpy()
    report.add(duplicate, "duplicate_id", f"id field '{field}' = '" + ids.astype(str) + "' is used by "
               + uses.fillna(0).astype(int).astype(str) + " features")  # fmt: skip
