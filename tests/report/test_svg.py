"""Path data of many lines: made a piece of whole lines at a time, the same text as at once."""

from __future__ import annotations

import numpy as np
import pytest

from audit.report import svg


def _lines(count: int, seed: int) -> tuple[np.ndarray, np.ndarray, np.ndarray, int]:
    """``count`` lines of 1 to 5 vertices in a 900 px square, every fifth one shorter than half a
    pixel, and how many of them are dots (those and the lines of one vertex)."""
    rng = np.random.default_rng(seed)
    vertices = rng.integers(1, 6, size=count)
    line = np.repeat(np.arange(count), vertices)
    x, y = rng.uniform(0, 900, line.size), rng.uniform(0, 900, line.size)
    tiny = line % 5 == 0
    starts = np.r_[0, np.cumsum(vertices)[:-1]]
    x[tiny] = x[starts][line[tiny]] + rng.uniform(0, 0.3, int(tiny.sum()))
    y[tiny] = y[starts][line[tiny]]
    return x, y, line, int(np.count_nonzero((np.arange(count) % 5 == 0) | (vertices == 1)))


@pytest.mark.parametrize("at_once", [1, 7, 64])
def test_pieces_of_lines_give_the_same_path_data_as_all_at_once(monkeypatch: pytest.MonkeyPatch, at_once: int) -> None:
    x, y, line, dots = _lines(500, seed=at_once)
    whole = svg.line_path_data(x, y, line)
    monkeypatch.setattr(svg, "LINES_AT_ONCE", at_once)
    assert svg.line_path_data(x, y, line) == whole
    subpaths = whole.split("M")[1:]
    assert len(subpaths) == 500  # every line once
    assert [path.endswith("h0") for path in subpaths] == [False] * (500 - dots) + [True] * dots  # the dots after the lines
