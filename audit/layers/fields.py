"""Field values of one layer: text, numbers in the user's unit, ids; problems become findings.

Findings emitted: ``not_a_number``, ``sentinel_value``, ``nonpositive_size``, ``not_a_date``,
``missing_id``, ``duplicate_id`` (see audit.layers.reading for their meaning).

Messages are built only for the rows that get a finding, so a clean column of a million values
costs a few array operations and no text.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

import numpy as np
import pandas as pd

from audit.findings import FindingLog

SIZES = frozenset({"diameter", "height", "width", "length", "depth", "upstream_depth", "downstream_depth", "area_ha"})
"""Fields whose zero or negative values are no size at all: they become NaN with a finding."""

YEARS = (1800, 2200)
"""Install years outside this range are not taken as years (an epoch count, a typo)."""

# Date text a register may hold: ISO (yyyy-mm-dd, optionally with a time), month or day first
# with slashes, dashes or dots (m/d/yyyy, d/m/yyyy, d.m.yyyy), or a bare year. Only the year is
# needed, so the order of day and month never matters; both must still be a day and a month.
_ISO_DATE = r"(?P<iso_year>\d{4})[-/.](?P<iso_month>\d{1,2})[-/.](?P<iso_day>\d{1,2})(?:[ T].*)?"
_DAY_FIRST = r"(?P<first>\d{1,2})[-/.](?P<second>\d{1,2})[-/.](?P<year>\d{4})(?:[ T].*)?"
_BARE_YEAR = r"(?P<bare_year>\d{4})(?:\.0+)?"
DATE_PATTERN = rf"^(?:{_ISO_DATE}|{_DAY_FIRST}|{_BARE_YEAR})$"

Located = Callable[[np.ndarray], tuple[np.ndarray, np.ndarray]]


@dataclass(frozen=True)
class Quoted:
    """The message ``before + "'<raw value>'" + after``, built for the reported rows only."""

    raw: pd.Series
    before: str
    after: str

    def for_rows(self, rows: np.ndarray) -> np.ndarray:
        """Messages of the rows at the integer positions ``rows``."""
        return (self.before + quoted(self.raw.iloc[rows]) + self.after).to_numpy(dtype=object)


@dataclass(frozen=True)
class Reporter:
    """Adds findings for one layer, naming each feature by id and placing it where ``locate`` says.

    ``locate`` takes integer row positions and returns their x and y [m]; it is called for the
    reported rows only.
    """

    findings: FindingLog
    layer: str
    ids: np.ndarray
    locate: Located

    def add(self, mask: np.ndarray, code: str, messages: pd.Series | Quoted | str) -> None:
        """One finding per True in ``mask``; ``messages`` is one per feature, a :class:`Quoted` or one for all."""
        rows = np.flatnonzero(mask)
        if rows.size == 0:
            return
        if isinstance(messages, Quoted):
            messages = messages.for_rows(rows)
        elif isinstance(messages, pd.Series):
            messages = messages.to_numpy(dtype=object)[rows]
        x, y = self.locate(rows)
        self.findings.add_many(self.layer, self.ids[rows], code, messages, x=x, y=y)


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
    return strings.to_numpy(dtype=object, na_value=None)


def text_column(raw: pd.Series) -> pd.api.extensions.ExtensionArray | np.ndarray:
    """:func:`as_text` as pandas would store it: Arrow strings (NaN where missing), objects when none is set.

    A column of text stays in Arrow, without a Python string per value.

    Examples
    --------
    >>> text_column(pd.Series([" a", "", None], dtype="str")).tolist()
    ['a', nan, nan]
    >>> text_column(pd.Series([None, None], dtype=object)).tolist()
    [None, None]
    """
    if pd.api.types.is_float_dtype(raw.dtype) or not len(raw):
        return as_text(raw)
    strings = raw.astype("string").str.strip()
    strings = strings.mask((strings == "").fillna(False))
    if not strings.notna().any():
        return np.full(len(raw), None, dtype=object)
    return strings.astype(pd.StringDtype("pyarrow", na_value=np.nan)).array


def quoted(raw: pd.Series) -> pd.Series:
    """Each value as typed, in single quotes (``''`` where null)."""
    return "'" + raw.astype("string").fillna("") + "'"


def _numeric(raw: pd.Series) -> tuple[np.ndarray, np.ndarray]:
    """Numbers [user's unit] and the mask of blank values (null, or only spaces in a text field)."""
    if pd.api.types.is_numeric_dtype(raw.dtype) and not pd.api.types.is_bool_dtype(raw.dtype):
        return raw.to_numpy(dtype=float, na_value=np.nan).copy(), raw.isna().to_numpy()
    blank = raw.isna().to_numpy() | (raw.astype("string").str.strip() == "").fillna(True).to_numpy()
    coerced = pd.to_numeric(raw, errors="coerce")
    return np.array(pd.Series(coerced, dtype="float64").to_numpy(dtype=float, na_value=np.nan)), blank


def as_number(raw: pd.Series, *, name: str, field: str, sentinels: tuple[float, ...], report: Reporter) -> np.ndarray:
    """Numbers of one mapped field in the user's unit; bad values become NaN with a finding."""
    values, blank = _numeric(raw)
    before = f"{name} field '{field}' = "
    report.add(np.isnan(values) & ~blank, "not_a_number", Quoted(raw, before, " is not a number"))
    sentinel = np.isin(values, sentinels)
    report.add(sentinel, "sentinel_value", Quoted(raw, before, " is a 'missing' sentinel"))
    values[sentinel] = np.nan
    if name in SIZES:
        nonpositive = values <= 0
        report.add(nonpositive, "nonpositive_size", Quoted(raw, before, " is not a positive size"))
        values[nonpositive] = np.nan
    return values


def as_year(raw: pd.Series, *, field: str, sentinels: tuple[float, ...], report: Reporter) -> np.ndarray:
    """Install year per feature from a year number, a Date or DateTime field, or date text.

    A Date or DateTime field gives its year (an empty one gives none, silently); a number is a
    year when it is whole and within ``YEARS``; text is read as in ``DATE_PATTERN``. Anything
    else gives a ``not_a_date`` finding and no year, never a wrong number.

    Examples
    --------
    >>> log = FindingLog()
    >>> report = Reporter(log, "pipes", np.array(["A", "B", "C", "D", "E"], dtype=object), lambda rows: (rows * 0.0, rows * 0.0))
    >>> text = pd.Series(["1987-10-31", "10/31/1987", "31.10.1987", "1987", "13/13/1987"])
    >>> as_year(text, field="LAID", sentinels=(), report=report).tolist()
    [1987.0, 1987.0, 1987.0, 1987.0, nan]
    >>> log.to_frame()["feature"].tolist()
    ['E']
    """
    if pd.api.types.is_datetime64_any_dtype(raw.dtype):
        return raw.dt.year.to_numpy(dtype=float, na_value=np.nan)
    if pd.api.types.is_numeric_dtype(raw.dtype) and not pd.api.types.is_bool_dtype(raw.dtype):
        years = raw.to_numpy(dtype=float, na_value=np.nan).copy()
        blank = np.isnan(years) | np.isin(years, sentinels)
    else:
        years, blank = _text_years(raw, sentinels)
    plausible = (years == np.round(years)) & (years >= YEARS[0]) & (years <= YEARS[1])
    bad = ~blank & ~plausible
    report.add(bad, "not_a_date", Quoted(raw, f"install date field '{field}' = ", " is neither a date nor a year; no year is taken"))
    return np.where(plausible & ~blank, years, np.nan)


def _text_years(raw: pd.Series, sentinels: tuple[float, ...]) -> tuple[np.ndarray, np.ndarray]:
    """Years [-] read from date text (NaN where it is not one) and the mask of blank or sentinel values.

    Python ``date`` objects (a Date field read without Arrow) are taken as their ISO text.
    """
    text = raw.astype("string").str.strip()
    blank = (text.isna() | (text == "")).to_numpy(dtype=bool, na_value=True)
    number = pd.to_numeric(text, errors="coerce").to_numpy(dtype=float, na_value=np.nan)
    blank |= np.isin(number, sentinels)
    parts = text.str.extract(DATE_PATTERN)
    value = {name: pd.to_numeric(parts[name], errors="coerce").to_numpy(dtype=float, na_value=np.nan) for name in parts.columns}
    iso_ok = _is_day_month(value["iso_day"], value["iso_month"])
    swapped_ok = _is_day_month(value["first"], value["second"]) | _is_day_month(value["second"], value["first"])
    years = np.where(iso_ok, value["iso_year"], np.where(swapped_ok, value["year"], value["bare_year"]))
    return years, blank


def _is_day_month(day: np.ndarray, month: np.ndarray) -> np.ndarray:
    """True where ``day`` and ``month`` can be a day of a month (1-31 and 1-12)."""
    with np.errstate(invalid="ignore"):
        return (day >= 1) & (day <= 31) & (month >= 1) & (month <= 12)


def feature_ids(raw: pd.Series | None, *, count: int) -> tuple[np.ndarray, np.ndarray]:
    """Feature ids (``#<row>`` where none) and a mask of the rows whose id was missing."""
    if raw is None:
        return "#" + pd.RangeIndex(count).astype(str).to_numpy(dtype=object), np.zeros(count, dtype=bool)
    ids = as_text(raw)
    missing = pd.isna(ids)
    rows = np.flatnonzero(missing)
    ids[rows] = "#" + pd.Index(rows).astype(str).to_numpy(dtype=object)
    return ids, missing


def report_ids(report: Reporter, missing: np.ndarray, *, field: str | None) -> None:
    """``missing_id`` for every empty id, ``duplicate_id`` for every id used by several features."""
    report.add(missing, "missing_id", f"id field '{field}' is empty; the feature is called by its row")
    ids = pd.Series(report.ids, dtype=object).where(~missing)
    duplicate = (ids.duplicated(keep=False) & ids.notna()).to_numpy()
    if duplicate.any():
        shared = ids[duplicate]
        uses = shared.map(shared.value_counts())
        report.add(duplicate, "duplicate_id", (f"id field '{field}' = '" + shared.astype(str) + "' is used by "
                   + uses.astype(int).astype(str) + " features").reindex(ids.index))  # fmt: skip
