"""Small HTML helpers for the report: escaped cells, tables, sections and number formats."""

from __future__ import annotations

import html
import math
from collections.abc import Iterable, Mapping, Sequence

from audit.report.svg import element


def cell(value: object, *, digits: int | None = None) -> str:
    """A table cell's text, escaped; floats rounded to ``digits``; NaN and None shown as a dash.

    Examples
    --------
    Floats without ``digits`` keep six significant digits and a rounding residue such as
    -3.55e-15 is shown as 0; a list or tuple is shown as its items, ``none`` when empty.

    >>> cell("<W1>"), cell(float("nan")), cell(1234.5678, digits=1), cell(12), cell(-3.55e-15), cell(1 / 3), cell(-0.001, digits=2)
    ('&lt;W1&gt;', '\u2013', '1,234.6', '12', '0', '0.333333', '0.00')
    >>> cell(()), cell(((1000, 2.5), (5000, 2.0)))
    ('none', '1000: 2.5; 5000: 2')
    """
    if value is None or (isinstance(value, float) and math.isnan(value)):
        return "\u2013"
    if isinstance(value, float):
        shown = round(value, digits) if digits is not None else value
        value = 0.0 if abs(shown) < 1e-9 else value  # no "-0.00" and no rounding residue
        return f"{value:,.{digits}f}" if digits is not None else f"{value:.6g}"
    if isinstance(value, Mapping):
        value = tuple(value.items())
    if isinstance(value, tuple | list):
        rows = (row if isinstance(row, tuple | list) else (row,) for row in value)
        return html.escape("; ".join(": ".join(f"{part:g}" if isinstance(part, float) else str(part) for part in row) for row in rows)) or "none"
    return html.escape(str(value))


def table(headers: Sequence[str], rows: Iterable[Sequence[str]], *, numeric: Sequence[bool] | None = None, **values: object) -> str:
    """A ``<table>`` of already escaped cells; numeric columns are right-aligned."""
    right = list(numeric) if numeric is not None else [False] * len(headers)
    head = "".join(element("th", html.escape(name), class_="num" if flag else None) for name, flag in zip(headers, right, strict=True))
    body = "".join(
        element("tr", "".join(element("td", text, class_="num" if flag else None) for text, flag in zip(row, right, strict=True)))
        for row in rows
    )
    return element("table", element("thead", element("tr", head)) + element("tbody", body), **values)


def section(identifier: str, title: str, content: str, *, long: bool = False) -> str:
    """A ``<section>`` with an ``id`` and an ``<h2>`` title (escaped).

    A ``long`` section (a long table) may run over printed pages; the others keep to one page.
    """
    return element("section", element("h2", html.escape(title)) + content, id=identifier, class_="long" if long else None)


def paragraph(words: str, **values: object) -> str:
    """A ``<p>`` of plain words (escaped here)."""
    return element("p", html.escape(words), **values)


def plural(count: int, noun: str) -> str:
    """``count`` and the noun, with an s unless the count is one.

    >>> plural(1, "pipe"), plural(1200, "pipe")
    ('1 pipe', '1,200 pipes')
    """
    return f"{count:,} {noun}" + ("" if count == 1 else "s")


def percent(share: float) -> str:
    """A share in [0, 1] as a percentage with one decimal.

    Examples
    --------
    >>> percent(0.25), percent(0.0)
    ('25.0 %', '0.0 %')
    """
    return f"{100.0 * share:.1f} %"
