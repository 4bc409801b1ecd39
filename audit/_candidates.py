"""candidates.csv: flagged pipes ranked for a closer look.

A pipe is a candidate when its worst flag is of severity "medium" or "high" ("low" too when
asked). Candidates are ranked by worst severity (high first), then load ratio (descending,
unknown last), then the length of network upstream (descending, unknown last); ties keep the
input order. The ranking is one ``numpy.lexsort`` over all candidates.

Identity and size columns come from the canonical columns ``pipe_id``, ``shape``, ``diameter``,
``height``, ``install_year`` and ``material`` when the pipes frame carries them; a frame without
``pipe_id`` names each pipe by its row, ``#<row>``, as the layers stage does.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd

from audit.rules import SEVERITY_ORDER

#: Columns of candidates.csv, in order.
CANDIDATE_COLUMNS: tuple[str, ...] = (
    "rank", "pipe_id", "severity", "flags", "reasons", "load_ratio", "depth_ratio", "v_design", "slope",
    "diameter_mm", "length_m", "upstream_length_m", "install_year", "material",
)  # fmt: skip

#: Decimals kept per numeric column: ratios 3, velocity 2, slope 5, sizes and lengths as below.
DECIMALS: dict[str, int] = {
    "load_ratio": 3, "depth_ratio": 3, "v_design": 2, "slope": 5, "diameter_mm": 0, "length_m": 2,
    "upstream_length_m": 1, "install_year": 0,
}  # fmt: skip


def rank_candidates(pipes: pd.DataFrame, *, include_low: bool = False) -> pd.DataFrame:
    """The renewal candidates among ``pipes``, ranked, with the columns of ``CANDIDATE_COLUMNS``.

    Parameters
    ----------
    pipes : pipes with at least ``severity``; other columns of ``CANDIDATE_COLUMNS`` are used
        when present (SI: ``diameter`` and ``height`` in [m], lengths in [m], velocity [m/s])
    include_low : also list pipes whose worst flag is of low severity

    Returns
    -------
    one row per candidate, best first; ``rank`` counts from 1; numbers rounded per ``DECIMALS``
    """
    wanted = SEVERITY_ORDER if include_low else SEVERITY_ORDER[1:]
    rank_of = {word: place for place, word in enumerate(SEVERITY_ORDER, start=1)}
    severity = pipes["severity"].fillna("").astype(str)
    chosen = np.flatnonzero(severity.isin(wanted).to_numpy())
    order = np.lexsort((
        chosen,
        _descending(_number(pipes, "upstream_length_m")[chosen]),
        _descending(_number(pipes, "load_ratio")[chosen]),
        -severity.map(rank_of).to_numpy(dtype=float)[chosen],
    ))  # fmt: skip
    rows = chosen[order]
    table = pd.DataFrame({name: _column(pipes, name)[rows] for name in CANDIDATE_COLUMNS[1:]})
    table.insert(0, "rank", np.arange(1, len(rows) + 1))
    return table.round({name: places for name, places in DECIMALS.items()})


def write_candidates(table: pd.DataFrame, path: Path) -> None:
    """Write the ranked candidates as UTF-8 CSV; unknown numbers are empty cells."""
    table.to_csv(path, index=False, encoding="utf-8", lineterminator="\n")


def _descending(values: np.ndarray) -> np.ndarray:
    """A sort key that puts large values first and NaN last."""
    return np.where(np.isnan(values), np.inf, -values)


def _number(pipes: pd.DataFrame, name: str) -> np.ndarray:
    if name not in pipes.columns:
        return np.full(len(pipes), np.nan)
    return pd.to_numeric(pipes[name], errors="coerce").to_numpy(dtype=float, na_value=np.nan)


def _text(pipes: pd.DataFrame, name: str) -> np.ndarray:
    if name not in pipes.columns:
        return np.full(len(pipes), None, dtype=object)
    return pipes[name].astype(object).where(pipes[name].notna(), None).to_numpy(dtype=object)


def _size_mm(pipes: pd.DataFrame) -> np.ndarray:
    """Internal diameter [mm]; the height for a shape other than circular, or when no diameter."""
    diameter, height = _number(pipes, "diameter"), _number(pipes, "height")
    circular = _text(pipes, "shape") == "circular" if "shape" in pipes.columns else ~np.isnan(diameter)
    return np.where(circular, diameter, height) * 1000.0


def _pipe_ids(pipes: pd.DataFrame) -> np.ndarray:
    if "pipe_id" in pipes.columns:
        return _text(pipes, "pipe_id")
    return ("#" + pd.RangeIndex(len(pipes)).astype(str)).to_numpy(dtype=object)


def _column(pipes: pd.DataFrame, name: str) -> np.ndarray:
    if name == "pipe_id":
        return _pipe_ids(pipes)
    if name == "diameter_mm":
        return _size_mm(pipes)
    if name in DECIMALS:
        return _number(pipes, name)
    return _text(pipes, name)
