"""candidates.csv: the renewal programme's pipes, ranked for a closer look.

A pipe is a candidate when the renewal programme gives it a remedy, whatever the severity of its
flags; row k is the pipe whose ``renewal_rank`` is k. Candidates follow the programme's rank: by
risk (a scheme's pipes together, at its gravest pipe), then worst severity, then scheme; review
candidates, whose data must be verified before any renewal, after all others (docs/renewal.md).
A pipes frame without the programme's columns (an audit result built by hand) is ranked by worst
severity ("medium" and "high", "low" too when asked), load ratio and length upstream, with
reverse and zero grades last, as levels to verify.

Identity and size columns come from the canonical columns ``pipe_id``, ``shape``, ``diameter``,
``height``, ``install_year`` and ``material`` when the pipes frame carries them; a frame without
``pipe_id`` names each pipe by its row, ``#<row>``, as the layers stage does.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd
import pyarrow as pa
import pyarrow.compute as pc
import pyarrow.csv as pacsv

from audit.rules import DEFAULT_SEVERITY, SEVERITY_ORDER
from audit.units import SI, UnitSystem

#: Columns of candidates.csv, in order.
CANDIDATE_COLUMNS: tuple[str, ...] = (
    "rank", "pipe_id", "action", "remedy", "scheme_id", "risk", "likelihood", "consequence", "risk_driver", "severity", "flags",
    "reasons", "load_ratio", "depth_ratio", "v_design", "slope", "diameter_mm", "length_m", "upstream_length_m", "install_year",
    "material",
)  # fmt: skip

#: Decimals kept per numeric column: ratios 3, velocity 2, slope 5, sizes and lengths as below.
DECIMALS: dict[str, int] = {
    "load_ratio": 3, "depth_ratio": 3, "v_design": 2, "slope": 5, "diameter_mm": 0, "length_m": 2,
    "upstream_length_m": 1, "install_year": 0, "risk": 0, "likelihood": 0, "consequence": 0,
}  # fmt: skip


_SOURCES = ("diameter", "height", "shape")  # canonical columns that diameter_mm is made from


#: Flags that most often mean the register is wrong, not the pipe: such a pipe is data to verify
#: before anything is renewed (docs/rules.md).
VERIFY_FLAGS = frozenset({"reverse_grade", "zero_grade"})
ACTIONS = ("consider renewal", "verify levels")

#: The action of a candidate by the kind of its first remedy (``audit.renewal.REMEDY_KINDS``).
ACTION_OF_REMEDY = {"capacity": "consider renewal", "silting": "consider renewal", "other": "see remedy",
                    "downstream": "relieve downstream", "inspect": "inspect", "verify": "verify data first"}  # fmt: skip


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
    rows, action = candidate_rows(pipes, include_low=include_low)
    return _candidate_table(pipes, rows, action, first_rank=1)


def _candidate_table(pipes: pd.DataFrame, rows: np.ndarray, action: np.ndarray, *, first_rank: int) -> pd.DataFrame:
    """The candidates at positions ``rows`` of ``pipes`` as rows of candidates.csv, ranked from ``first_rank``."""
    used = [name for name in (*CANDIDATE_COLUMNS, *_SOURCES) if name in pipes.columns]
    picked = pipes[list(dict.fromkeys(used))].iloc[rows].assign(action=action)  # convert the candidates only, not every pipe
    table = pd.DataFrame({name: _output_column(picked, name) for name in CANDIDATE_COLUMNS[1:]})
    if "pipe_id" not in pipes.columns:  # named by its row in the layer, as the layers stage names it
        table["pipe_id"] = ("#" + pd.Index(np.asarray(rows)).astype(str)).to_numpy(dtype=object)
    table.insert(0, "rank", np.arange(first_rank, first_rank + len(rows)))
    return table


CHUNK_ROWS = 100_000
"""Candidates made and written at a time by :func:`write_ranked_candidates` (bounds its memory)."""


def write_ranked_candidates(pipes: pd.DataFrame, path: Path, *, include_low: bool = False, units: UnitSystem = SI) -> None:
    """Rank the candidates among ``pipes`` and write them, ``CHUNK_ROWS`` at a time: the file
    ``write_candidates(rank_candidates(pipes), path)`` writes, without holding every row at once
    (a million-pipe programme is a few hundred megabytes of text)."""
    rows, action = candidate_rows(pipes, include_low=include_low)
    objects = [name for name in CANDIDATE_COLUMNS if name in pipes.columns and pipes[name].dtype == object]
    mixed = mixed_columns(pipes[objects].iloc[rows])  # judged over all the candidates, not a piece; only columns of Python objects
    with pa.OSFile(str(path), "wb") as sink:
        for start in range(0, max(len(rows), 1), CHUNK_ROWS):  # one pass even without a candidate: the header
            chunk = slice(start, start + CHUNK_ROWS)
            table = _candidate_table(pipes, rows[chunk], action[chunk], first_rank=start + 1)
            _write_rows(table, sink, units=units, header=start == 0, mixed=mixed)


def candidate_rows(pipes: pd.DataFrame, *, include_low: bool = False) -> tuple[np.ndarray, np.ndarray]:
    """Row positions of the candidates in ``pipes``, best first, and the action of each.

    The one ranking behind candidates.csv and the report's table: the renewal programme's order
    where the pipes carry it (every pipe with a ``renewal_rank``); else pipes whose worst flag is
    medium or high (low too with ``include_low``), ``consider renewal`` before ``verify levels``,
    then worst severity, load ratio and upstream length (descending, unknown last); ties keep
    the input order.
    """
    wanted = SEVERITY_ORDER if include_low else SEVERITY_ORDER[1:]
    if "renewal_rank" in pipes.columns:
        return _programme_rows(pipes)
    rank_of = {word: place for place, word in enumerate(SEVERITY_ORDER, start=1)}
    chosen = np.flatnonzero(pipes["severity"].isin(wanted).to_numpy())
    picked = pipes.iloc[chosen]
    verify = _to_verify(picked, wanted)
    order = np.lexsort((
        chosen,
        _descending(_number(picked, "upstream_length_m")),
        _descending(_number(picked, "load_ratio")),
        -picked["severity"].map(rank_of).to_numpy(dtype=float),
        verify,
    ))  # fmt: skip
    return chosen[order], np.asarray(ACTIONS, dtype=object)[verify[order].astype(int)]


def _programme_rows(pipes: pd.DataFrame) -> tuple[np.ndarray, np.ndarray]:
    """Every pipe of the renewal programme in its order (row k is ``renewal_rank`` k), and their actions (review candidates: verify data first).

    Whatever its severity: a low-severity pipe whose size is unknown still has to go back to the
    survey, and a GIS filter on ``renewal_rank`` must give the same list as this file.
    """
    rank = pd.to_numeric(pipes["renewal_rank"], errors="coerce").fillna(0).to_numpy(dtype=np.int64)
    chosen = np.flatnonzero(rank > 0)
    chosen = chosen[np.argsort(rank[chosen], kind="stable")]
    review = pd.to_numeric(pipes["review"], errors="coerce").fillna(0).to_numpy(dtype=bool)[chosen] if "review" in pipes else np.zeros(chosen.size, bool)
    kind, kinds = pd.factorize(pipes["remedy_kind"].iloc[chosen])  # the few remedy kinds mapped once each; none is -1
    actions = np.array([*(ACTION_OF_REMEDY.get(str(name), "see remedy") for name in kinds), "see remedy"], dtype=object)
    action = actions[kind]
    action[review] = ACTION_OF_REMEDY["verify"]
    return chosen, action


#: The candidate columns that carry a unit: their name without it, their quantity, and the
#: factor from the table's value to the quantity's SI base (``diameter_mm`` holds millimetres).
_UNITS = {"v_design": ("v_design", "velocity", 1.0), "diameter_mm": ("diameter", "size", 1e-3), "length_m": ("length", "length", 1.0),
          "upstream_length_m": ("upstream_length", "length", 1.0)}  # fmt: skip


def write_candidates(table: pd.DataFrame, path: Path, *, units: UnitSystem = SI) -> None:
    """Write the ranked candidates as UTF-8 CSV through Arrow; unknown numbers are empty cells.

    Text is quoted, numbers are not. Columns kept to 0 decimals (sizes, years) are written with
    one, ``225.0``, as before; other numbers in their shortest form (``1`` for 1.0). Columns with
    a unit are written in ``units`` and named with it (``v_design_m_s``, ``diameter_in``).
    """
    with pa.OSFile(str(path), "wb") as sink:
        _write_rows(table, sink, units=units, header=True, mixed=mixed_columns(table))


def mixed_columns(frame: pd.DataFrame) -> frozenset[str]:
    """The columns of Python objects that Arrow cannot hold as one type (text mixed with numbers): written as text."""
    mixed = set()
    for name in frame.columns:
        if frame[name].dtype == object:
            try:
                pa.array(frame[name], from_pandas=True)
            except (pa.ArrowInvalid, pa.ArrowTypeError):
                mixed.add(str(name))
    return frozenset(mixed)


def _write_rows(table: pd.DataFrame, sink: pa.NativeFile, *, units: UnitSystem, header: bool, mixed: frozenset[str]) -> None:
    """``table``'s rows as CSV into ``sink``; the columns ``mixed`` as text whatever a piece holds."""
    columns = {}
    for name in table.columns:
        values = table[name]
        if name in _UNITS and units is not SI:
            base, quantity, to_base = _UNITS[name]
            values = pd.Series(units.convert(values.to_numpy(dtype=float) * to_base, quantity)).round(_US_DECIMALS[quantity])
            columns[f"{base}_{units.suffix(quantity)}"] = csv_column(values, whole=False)
            continue
        label = f"{_UNITS[name][0]}_{units.suffix(_UNITS[name][1])}" if name in _UNITS else name
        columns[label] = csv_column(values.astype(str).where(values.notna(), None) if name in mixed else values, whole=DECIMALS.get(name) == 0)
    pacsv.write_csv(pa.table(columns), sink, pacsv.WriteOptions(quoting_style="needed", include_header=header))


_US_DECIMALS = {"velocity": 2, "size": 1, "length": 1}


def csv_column(values: pd.Series, *, whole: bool) -> pa.Array:
    """One column for the CSV writer; NaN and None become nulls (empty cells)."""
    if pd.api.types.is_float_dtype(values.dtype):
        numbers = values.to_numpy(dtype=float)
        column = pa.array(np.where(np.isfinite(numbers), numbers, np.nan) if whole else numbers, from_pandas=True)
        return pc.cast(column, pa.decimal128(38, 1)) if whole else column
    try:
        return pa.array(values, from_pandas=True)
    except (pa.ArrowInvalid, pa.ArrowTypeError):  # mixed objects: write their text
        return pa.array(values.astype(str).where(values.notna(), None), from_pandas=True)


def _to_verify(pipes: pd.DataFrame, wanted: tuple[str, ...]) -> np.ndarray:
    """True where every flag of a listed severity is one of ``VERIFY_FLAGS``: levels to verify, not a pipe to renew.

    A pipe is listed for its worst flag; it is data to verify when its flags at the listed
    severities are all grade flags that most often are survey or register errors.
    """
    if "flags" not in pipes.columns:
        return np.zeros(len(pipes), dtype=bool)
    flags = pipes["flags"].astype(object).where(pipes["flags"].notna(), "").astype(str).to_numpy(dtype=object)
    serious = {code for code, word in DEFAULT_SEVERITY.items() if word in wanted}
    distinct, which = np.unique(flags, return_inverse=True)  # a handful of distinct flag sets
    verdict = np.array([bool(set(text.split(";")) & serious) and set(text.split(";")) & serious <= VERIFY_FLAGS for text in distinct], dtype=bool)
    return verdict[which.ravel()]


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


def _output_column(pipes: pd.DataFrame, name: str) -> np.ndarray | pd.Series:
    """One output column; a column of strings is taken as it is (no object round trip)."""
    if name in pipes.columns and name not in DECIMALS and isinstance(pipes[name].dtype, pd.StringDtype):
        return pipes[name].reset_index(drop=True)
    return _column(pipes, name)


def _column(pipes: pd.DataFrame, name: str) -> np.ndarray:
    if name == "pipe_id":
        return _text(pipes, "pipe_id")  # without the column: filled by the caller from the rows
    if name == "diameter_mm":
        return np.round(_size_mm(pipes), DECIMALS[name])
    if name in DECIMALS:
        return np.round(_number(pipes, name), DECIMALS[name])
    return _text(pipes, name)
