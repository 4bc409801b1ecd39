"""What the values of a layer look like, for ``sewer-audit inspect``: counts read through Arrow.

Per field: how many values are null, zero or a sentinel-like number, the median of the positive
values (it tells a size's unit), whether text holds numbers or dates, and the distinct codes
with their counts. Only the columns asked for are read, without geometry, as Arrow arrays; every
count is one vectorised pass of ``pyarrow.compute`` over the column, so a layer of a million
features costs a few array operations per field and never a Python object per feature.

Values are compared as the reader compares them (:func:`audit.layers.fields.as_text`): text
without surrounding spaces, blank text as null, whole numbers without a decimal point.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from pathlib import Path
from types import MappingProxyType

import numpy as np
import pyarrow as pa
import pyarrow.compute as pc
import pyogrio

from audit.layers import quiet_measures

SENTINEL_LIKE = (-9999.0, -999.0, 9999.0)  # common practice, no source: "no value" stand-ins of registers
YEARS = (1800.0, 2100.0)  # common practice, no source: years a sewer in service can have been laid
NUMBER_TEXT = r"^[-+]?(\d+\.?\d*|\.\d+)([eE][-+]?\d+)?$"
# Date text of registers: ISO (yyyy-mm-dd, yyyy/mm/dd, optionally a time), month or day first
# (m/d/yyyy, d/m/yyyy, d.m.yyyy, d-m-yyyy), or a bare year; whether a day or a month comes first
# does not matter for a year. A rule of this project.
DATE_TEXT = r"^(\d{4}[-/.]\d{1,2}[-/.]\d{1,2}|\d{1,2}[-/.]\d{1,2}[-/.]\d{4})([ T].*)?$|^(18|19|20)\d\d(\.0+)?$"
MOSTLY = 0.9
"""Share of the values a field must meet to be called numbers or dates (a rule of this project)."""
SAMPLE = 20_000
"""Features drawn to judge what text holds (numbers, dates) and to compare node fields (a rule of this project)."""


@dataclass(frozen=True)
class FieldValues:
    """Counts over the values of one field.

    ``kind`` is ``number``, ``text``, ``date`` or ``other`` (booleans, binary). For text that holds
    numbers (``numeric``), the numeric counts are of the numbers it holds. ``median`` is that of
    the positive values other than the sentinel-like ones [the field's unit]; ``near_zero``
    counts the values with 0 < |v| <= 1. ``date_share`` is the share of the values other than
    0 and the sentinel-like ones that read as a date or a year from 1800 to 2100; for text, it
    and ``number_share`` are judged on a :func:`sample`.
    """

    name: str
    kind: str
    count: int
    nulls: int
    zeros: int
    near_zero: int
    sentinels: Mapping[float, int]
    median: float
    distinct: int
    number_share: float
    date_share: float

    @property
    def numeric(self) -> bool:
        """A number field, or text whose values are nearly all numbers."""
        return self.kind == "number" or (self.kind == "text" and self.number_share >= MOSTLY)

    @property
    def filled(self) -> int:
        """Features with a value."""
        return self.count - self.nulls


def _kind(kind: pa.DataType) -> str:
    if pa.types.is_integer(kind) or pa.types.is_floating(kind) or pa.types.is_decimal(kind):
        return "number"
    if pa.types.is_string(kind) or pa.types.is_large_string(kind) or pa.types.is_string_view(kind):
        return "text"
    if pa.types.is_date(kind) or pa.types.is_timestamp(kind):
        return "date"
    return "other"


def keys(column: pa.ChunkedArray) -> pa.ChunkedArray:
    """Values as the text the reader compares: trimmed, blank as null, ``12.0`` as ``12``.

    >>> keys(pa.chunked_array([[" A1 ", "", None]])).to_pylist(), keys(pa.chunked_array([[12.0, 2.5]])).to_pylist()
    (['A1', None, None], ['12', '2.5'])
    """
    if _kind(column.type) == "number" and pa.types.is_floating(column.type):
        column = pc.if_else(pc.is_nan(column), None, column)
    text = pc.utf8_trim_whitespace(pc.cast(column, pa.string()))
    return pc.if_else(pc.equal(text, ""), None, text)


def numbers(column: pa.ChunkedArray) -> np.ndarray:
    """The numbers of a field [its unit], NaN where null, blank or not a number.

    >>> numbers(pa.chunked_array([["12", " 4.5", "x", None]])).tolist()
    [12.0, 4.5, nan, nan]
    """
    kind = _kind(column.type)
    if kind == "text":
        text = keys(column)
        column = pc.if_else(pc.match_substring_regex(text, NUMBER_TEXT), text, None)
    elif kind != "number":
        return np.full(len(column), np.nan)
    values = pc.cast(column, pa.float64()).fill_null(np.nan)
    return np.asarray(values.to_numpy(), dtype=float)


def _year_share(values: np.ndarray) -> float:
    """Share of the numbers other than 0 and the sentinel-like ones that are whole years from 1800 to 2100."""
    real = values[np.isfinite(values) & (values != 0) & ~np.isin(values, SENTINEL_LIKE)]
    years = (real == np.round(real)) & (real >= YEARS[0]) & (real <= YEARS[1])
    return float(years.mean()) if real.size else 0.0


def _date_text_share(text: pa.ChunkedArray) -> float:
    """Share of the text values other than 0 and the sentinel-like ones that read as a date or a year."""
    real = pc.and_(pc.is_valid(text), pc.invert(pc.is_in(text, value_set=pa.array(["0", *(f"{v:g}" for v in SENTINEL_LIKE)]))))
    total = pc.sum(real).as_py() or 0
    dated = pc.sum(pc.and_(real, pc.match_substring_regex(text, DATE_TEXT))).as_py() or 0
    return dated / total if total else 0.0


def sample(column: pa.ChunkedArray) -> pa.ChunkedArray:
    """At most ``SAMPLE`` values drawn at random (a fixed seed: the same file gives the same guess).

    Random rather than every k-th row, as registers are often sorted and typed in runs
    (a placeholder on every 50th pipe must not fill an every-50th sample).
    """
    if len(column) <= SAMPLE:
        return column
    rows = np.sort(np.random.default_rng(0).choice(len(column), size=SAMPLE, replace=False))
    return column.take(pa.array(rows))


def field_values(name: str, column: pa.ChunkedArray) -> FieldValues:
    """Count the values of one field (see :class:`FieldValues`); each pass is one vectorised operation.

    Counts are over every feature; what text holds (its share of numbers and of dates) is judged
    on a :func:`sample`, and text that is not mostly numbers is not parsed as numbers at all.
    """
    kind = _kind(column.type)
    text = keys(column) if kind == "text" else column
    nulls = int(text.null_count) + (int(pc.sum(pc.is_nan(column)).as_py() or 0) if pa.types.is_floating(column.type) else 0)
    drawn = sample(text)
    drawn_filled = len(drawn) - drawn.null_count
    number_share = float(np.isfinite(numbers(drawn)).sum() / drawn_filled) if kind == "text" and drawn_filled else float(kind == "number")
    values = numbers(text) if kind == "number" or number_share >= MOSTLY else np.full(len(column), np.nan)
    finite = values[np.isfinite(values)]
    sentinels = {value: int(np.count_nonzero(finite == value)) for value in SENTINEL_LIKE}
    positive = finite[(finite > 0) & ~np.isin(finite, SENTINEL_LIKE)]
    dates = {"date": 1.0, "number": _year_share(values), "text": _date_text_share(drawn) if kind == "text" else 0.0}
    return FieldValues(
        name=name,
        kind=kind,
        count=len(column),
        nulls=nulls,
        zeros=int(np.count_nonzero(finite == 0)),
        near_zero=int(np.count_nonzero((finite != 0) & (np.abs(finite) <= 1))),
        sentinels=MappingProxyType({value: used for value, used in sentinels.items() if used}),
        median=float(np.median(positive)) if positive.size else float("nan"),
        distinct=int(pc.count_distinct(text, mode="only_valid").as_py() or 0) if kind != "other" else 0,
        number_share=number_share,
        date_share=dates.get(kind, 0.0),
    )


def code_counts(column: pa.ChunkedArray) -> list[tuple[str, int]]:
    """The distinct values of a field (as :func:`keys`) with how many features hold each, most used first.

    >>> code_counts(pa.chunked_array([["FM", "GRAV", " GRAV", None]]))
    [('GRAV', 2), ('FM', 1)]
    """
    counted = pc.value_counts(keys(column))
    codes, counts = counted.field("values").to_pylist(), counted.field("counts").to_pylist()
    pairs = [(str(code), int(count)) for code, count in zip(codes, counts, strict=True) if code is not None]
    return sorted(pairs, key=lambda pair: (-pair[1], pair[0]))


@dataclass(frozen=True)
class LayerValues:
    """The columns read from one layer, and the counts of each (``fields``)."""

    path: Path
    layer: str
    count: int
    table: pa.Table
    fields: Mapping[str, FieldValues]

    def column(self, name: str) -> pa.ChunkedArray:
        """One column as read."""
        return self.table.column(name)

    def keys(self, name: str) -> pa.ChunkedArray:
        """One column as the text the reader compares (:func:`keys`)."""
        return keys(self.table.column(name))


def read_values(path: Path, layer: str, columns: Sequence[str], *, count: int) -> LayerValues:
    """Read ``columns`` of one layer through Arrow, without geometry, and count their values.

    Parameters
    ----------
    path, layer : the file and the layer in it
    columns : field names to read (others are never read)
    count : features in the layer, for a layer read with no column
    """
    wanted = list(dict.fromkeys(columns))
    if wanted:
        with quiet_measures():
            _, table = pyogrio.read_arrow(path, layer=layer, columns=wanted, read_geometry=False)
    else:
        table = pa.table({})
    fields = {name: field_values(name, table.column(name)) for name in table.column_names}
    return LayerValues(path, layer, table.num_rows if wanted else count, table, MappingProxyType(fields))
