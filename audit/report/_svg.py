"""SVG building blocks for the report: numbers, elements and whole-class paths.

A map or scatter class is drawn as one ``<path>`` whose data holds every feature of the class
as a subpath. The data string is built with numpy over all points at once: coordinates are
rounded to 0.1 px, written in tenths with integer arithmetic, and joined once.
"""

from __future__ import annotations

import html

import numpy as np
from numpy.typing import ArrayLike, NDArray

Array = NDArray[np.float64]

#: Pixel resolution of every drawn coordinate [px].
RESOLUTION_PX = 0.1


def numbers(values: ArrayLike) -> NDArray[np.object_]:
    """Pixel coordinates as short strings, rounded to 0.1 px, without a trailing ``.0``.

    Examples
    --------
    >>> numbers([0.0, 12.34, 7.96, -0.26]).tolist()
    ['0', '12.3', '8', '-0.3']
    """
    tenths = np.rint(np.asarray(values, dtype=float) / RESOLUTION_PX).astype(np.int64)
    if tenths.size == 0:
        return np.empty(0, dtype=object)
    low, high = int(tenths.min()), int(tenths.max())
    if high - low < max(tenths.size, 1024):  # a drawing's range: format each value once, then look up
        return _tenths_text(np.arange(low, high + 1))[tenths - low]
    return _tenths_text(tenths)


def _tenths_text(tenths: NDArray[np.int64]) -> NDArray[np.object_]:
    sign = np.where(tenths < 0, "-", "").astype(object)
    whole = (np.abs(tenths) // 10).astype(str).astype(object)
    digit = (np.abs(tenths) % 10).astype(str).astype(object)
    return np.where(digit == "0", sign + whole, sign + whole + "." + digit)


def line_path_data(x: ArrayLike, y: ArrayLike, line: ArrayLike) -> str:
    """Path data ``M x y x y ... M x y ...`` for many polylines at once.

    Parameters
    ----------
    x, y : vertex coordinates [px], all lines one after the other
    line : line number of each vertex, non-decreasing

    Vertices that round to the same 0.1 px point as the one before them on the same line are
    dropped; a line's first and last vertex are always kept, so a line shorter than the
    resolution still draws as a dot (with round line caps).

    Examples
    --------
    >>> line_path_data([0, 10, 10.01, 20, 5, 5], [0, 0, 0, 5, 5, 5], [0, 0, 0, 0, 1, 1])
    'M0 0 10 0 20 5M5 5 5 5'
    """
    line = np.asarray(line)
    if line.size == 0:
        return ""
    xs, ys = numbers(x), numbers(y)
    first = np.r_[True, line[1:] != line[:-1]]
    last = np.r_[line[1:] != line[:-1], True]
    moved = np.r_[True, (xs[1:] != xs[:-1]) | (ys[1:] != ys[:-1])]
    keep = first | last | moved
    token = np.where(first, "M" + xs, " " + xs) + " " + ys
    return "".join(token[keep].tolist())


def dot_path_data(x: ArrayLike, y: ArrayLike) -> str:
    """Path data of one zero-length mark per point (drawn as dots with round caps).

    Points that round to the same 0.1 px are drawn once.

    Examples
    --------
    >>> dot_path_data([1, 1.01, 3], [2, 2, 4])
    'M1 2h0M3 4h0'
    """
    tenths = np.rint(np.stack([np.asarray(x, dtype=float), np.asarray(y, dtype=float)]) / RESOLUTION_PX).astype(np.int64)
    if tenths.shape[1] == 0:
        return ""
    tenths = np.unique(tenths, axis=1)
    token = "M" + numbers(tenths[0] * RESOLUTION_PX) + " " + numbers(tenths[1] * RESOLUTION_PX) + "h0"
    return "".join(token.tolist())


def attributes(**values: object) -> str:
    """Escaped ``name="value"`` pairs; ``_`` in a name becomes ``-`` (a trailing one is dropped,
    so ``class_`` gives ``class``); None is left out.

    Examples
    --------
    >>> attributes(stroke_width=2, fill="none", title=None, data_label='a"b')
    ' stroke-width="2" fill="none" data-label="a&quot;b"'
    """
    return "".join(f' {name.rstrip("_").replace("_", "-")}="{html.escape(str(value))}"' for name, value in values.items() if value is not None)


def element(tag: str, content: str = "", **values: object) -> str:
    """One SVG or HTML element; ``content`` must already be escaped markup."""
    return f"<{tag}{attributes(**values)}>{content}</{tag}>"


def label(x: float, y: float, words: str, **values: object) -> str:
    """A ``<text>`` at (x, y) [px] holding ``words`` (escaped here)."""
    return element("text", html.escape(words), x=_short(x), y=_short(y), **values)


def rect(x: float, y: float, width: float, height: float, **values: object) -> str:
    """A ``<rect>`` [px]."""
    return element("rect", x=_short(x), y=_short(y), width=_short(width), height=_short(height), **values)


def segment(x1: float, y1: float, x2: float, y2: float, **values: object) -> str:
    """A ``<line>`` [px]."""
    return element("line", x1=_short(x1), y1=_short(y1), x2=_short(x2), y2=_short(y2), **values)


def svg(content: str, *, width: float, height: float, title: str) -> str:
    """A whole inline ``<svg>`` of ``width`` x ``height`` px with an accessible title.

    Inline SVG in HTML needs no namespace attribute, so the page names no outside address.
    """
    inner = element("title", html.escape(title)) + content
    return element(
        "svg", inner, viewBox=f"0 0 {_short(width)} {_short(height)}", width=_short(width), height=_short(height), role="img"
    )


def _short(value: float) -> str:
    return str(numbers([value])[0])
