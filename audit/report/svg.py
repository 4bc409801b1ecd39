"""SVG building blocks for the report: numbers, elements and whole-class paths.

A map or scatter class is drawn as one ``<path>`` whose data holds every feature of the class
as a subpath. The data string is built with numpy over all points at once: coordinates are
rounded to 0.1 px, each distinct value is written once (in tenths, with integer arithmetic),
points only index those texts, and everything is joined once. Lines are simplified to the
whole pixel and scatter marks to a grid of cells, so the page stays bounded by what it draws.
"""

from __future__ import annotations

import html
import itertools

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
    table, position = _lookup(_tenths(values))
    return table[position]


def _tenths(values: ArrayLike) -> NDArray[np.int64]:
    return np.rint(np.asarray(values, dtype=float) / RESOLUTION_PX).astype(np.int64)


def _lookup(tenths: NDArray[np.int64], prefix: str = "") -> tuple[NDArray[np.object_], NDArray[np.intp]]:
    """A table of texts and each value's position in it: a drawing's range is formatted once."""
    if tenths.size == 0:
        return np.empty(0, dtype=object), np.empty(0, dtype=np.intp)
    low, high = int(tenths.min()), int(tenths.max())
    if high - low < max(tenths.size, 1024):
        return prefix + _tenths_text(np.arange(low, high + 1)), (tenths - low).astype(np.intp)
    return prefix + _tenths_text(tenths), np.arange(tenths.size)


def _tenths_text(tenths: NDArray[np.int64]) -> NDArray[np.object_]:
    sign = np.where(tenths < 0, "-", "").astype(object)
    whole = (np.abs(tenths) // 10).astype(str).astype(object)
    digit = (np.abs(tenths) % 10).astype(str).astype(object)
    return np.where(digit == "0", sign + whole, sign + whole + "." + digit)


def _pairs(x: NDArray[np.int64], y: NDArray[np.int64], start: NDArray[np.bool_], *, end: str = "") -> str:
    """``Mx y`` where ``start`` else `` x y``, then ``end``, for every point, joined once.

    Each distinct number is formatted once with its prefix; the points only index the tables.
    """
    moves, at = _lookup(x, "M")
    steps, _ = _lookup(x, " ")
    heights, at_y = _lookup(y, " ")
    tokens = np.empty((x.size, 3 if end else 2), dtype=object)
    tokens[:, 0] = np.where(start, moves[at], steps[at])
    tokens[:, 1] = heights[at_y]
    if end:
        tokens[:, 2] = end
    return "".join(tokens.ravel().tolist())


def line_path_data(x: ArrayLike, y: ArrayLike, line: ArrayLike) -> str:
    """Path data ``M x y x y ... M x y h0 ...`` for many polylines at once, simplified to the pixel.

    Parameters
    ----------
    x, y : vertex coordinates [px], all lines one after the other
    line : line number of each vertex, non-decreasing

    A line's first and last vertex are kept; a vertex between them is kept where it falls in
    another whole pixel than the vertex before it. A line whose every vertex lies within half
    a pixel of its first is drawn as a dot there (a zero-length ``h0``, with round line caps).
    Coordinates are written to 0.1 px.

    Examples
    --------
    >>> line_path_data([0, 10, 10.01, 10.3, 20, 5, 5.2], [0, 0, 0, 0, 5, 5, 5], [0, 0, 0, 0, 0, 1, 1])
    'M0 0 10 0 20 5M5 5h0'
    """
    line = np.asarray(line)
    if line.size == 0:
        return ""
    x, y = np.asarray(x, dtype=float), np.asarray(y, dtype=float)
    starts = np.flatnonzero(np.r_[True, line[1:] != line[:-1]])
    if starts.size <= LINES_AT_ONCE:
        return "".join(_line_pieces(x, y, line))
    # a piece of whole lines at a time: what one piece needs in memory is bounded, the text is the same
    bounds = [*starts[::LINES_AT_ONCE].tolist(), line.size]
    pieces = [_line_pieces(x[low:high], y[low:high], line[low:high]) for low, high in itertools.pairwise(bounds)]
    return "".join(drawn for drawn, _ in pieces) + "".join(dots for _, dots in pieces)


LINES_AT_ONCE = 65_536
"""Lines whose path data are made together (a million-pipe map takes a few hundred megabytes at once)."""


def _line_pieces(x: Array, y: Array, line: NDArray[np.intp]) -> tuple[str, str]:
    """The path data of :func:`line_path_data` in two parts: the lines drawn, then the lines drawn as dots."""
    tx, ty = _tenths(x), _tenths(y)
    first = np.r_[True, line[1:] != line[:-1]]
    last = np.r_[line[1:] != line[:-1], True]
    starts = np.flatnonzero(first)
    owner = np.cumsum(first) - 1
    dx, dy = tx - tx[starts][owner], ty - ty[starts][owner]
    apart = (np.abs(dx) >= 5) | (np.abs(dy) >= 5)  # more than half a pixel from the line's first vertex
    dot = ~np.logical_or.reduceat(apart, starts)[owner]
    px, py = np.rint(tx / 10.0), np.rint(ty / 10.0)
    moved = np.r_[True, (px[1:] != px[:-1]) | (py[1:] != py[:-1])]
    drawn, alone = ~dot & (first | last | moved), dot & first
    lines = _pairs(tx[drawn], ty[drawn], first[drawn])
    return lines, _pairs(tx[alone], ty[alone], np.ones(int(np.count_nonzero(alone)), dtype=bool), end="h0")


def dot_path_data(x: ArrayLike, y: ArrayLike, *, cell_px: float = RESOLUTION_PX) -> str:
    """Path data of one zero-length mark per occupied cell (drawn as dots with round caps).

    Points are snapped to a grid of ``cell_px`` [px] (a multiple of 0.1 px) and each occupied
    cell is drawn once, so the data is bounded by the drawing's area, not by the point count.

    Examples
    --------
    >>> dot_path_data([1, 1.01, 3], [2, 2, 4])
    'M1 2h0M3 4h0'
    >>> dot_path_data([1, 1.4, 3.2], [2, 2.3, 4], cell_px=1.0)
    'M1 2h0M3 4h0'
    """
    step = max(round(cell_px / RESOLUTION_PX), 1)
    cells = np.rint(np.stack([np.asarray(x, dtype=float), np.asarray(y, dtype=float)]) / (step * RESOLUTION_PX)).astype(np.int64)
    if cells.shape[1] == 0:
        return ""
    low = cells.min(axis=1, keepdims=True)
    rows = int(cells[1].max() - low[1, 0]) + 1
    key = np.unique((cells[0] - low[0, 0]) * rows + (cells[1] - low[1, 0]))  # x first, then y, as a sort of both
    tx, ty = (key // rows + low[0, 0]) * step, (key % rows + low[1, 0]) * step
    return _pairs(tx, ty, np.ones(key.size, dtype=bool), end="h0")


def attributes(**values: object) -> str:
    """Escaped ``name="value"`` pairs; ``_`` in a name becomes ``-`` (a trailing one is dropped,
    so ``class_`` gives ``class``); None is left out.

    Examples
    --------
    >>> attributes(stroke_width=2, fill="none", title=None, data_label='a"b')
    ' stroke-width="2" fill="none" data-label="a&quot;b"'
    """
    return "".join(f' {name.rstrip("_").replace("_", "-")}="{html.escape(str(value))}"' for name, value in values.items() if value is not None)


def element(tag: str, content: object = "", **values: object) -> str:
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
