"""What the report tabulates, computed over all pipes at once: classes, flag totals, candidates.

Map class of a pipe (``MAP_CLASSES``, from the most to the least urgent):

* ``high`` or ``medium``: its worst flag has that severity;
* ``not_evaluated``: the hydraulics could not run (unknown size, slope or flow) and no flag of
  medium or high severity was raised;
* ``low``: its worst flag is of low severity;
* ``none``: no flag.
"""

from __future__ import annotations

from collections.abc import Mapping

import numpy as np
import pandas as pd
from numpy.typing import NDArray

from audit.errors import InputError
from audit.outputs import candidate_rows, code_totals
from audit.rules import FLAG_CODES

#: Map classes from the most urgent to the least, with the words the legend uses.
MAP_CLASSES: dict[str, str] = {
    "high": "High severity",
    "medium": "Medium severity",
    "not_evaluated": "Not evaluated",
    "low": "Low severity",
    "none": "No flag",
}

#: Hydraulic statuses for which a depth and velocity were computed.
EVALUATED_STATUSES = ("ok", "above_full_bore", "surcharged")

#: Pipe columns the report reads (``audit.result.PIPE_COLUMNS``).
REPORT_COLUMNS = (
    "flags", "severity", "reasons", "hydraulic_status", "load_ratio", "depth_ratio", "v_design",
    "length_m", "height_m", "upstream_length_m", "from_node_id", "to_node_id",
)  # fmt: skip


def check_columns(pipes: pd.DataFrame) -> None:
    """Raise ``InputError`` naming every report column the pipes frame lacks."""
    missing = [name for name in REPORT_COLUMNS if name not in pipes.columns]
    if missing:
        raise InputError(f"report: the audit result's pipes lack the computed field(s) {', '.join(missing)}")


def numeric(pipes: pd.DataFrame, name: str) -> np.ndarray:
    """A pipe column as floats, NaN where empty or not a number."""
    return pd.to_numeric(pipes[name], errors="coerce").to_numpy(dtype=float, na_value=np.nan)


def texts(pipes: pd.DataFrame, name: str) -> pd.Series:
    """A pipe column as strings, "" where empty; a column of strings is only filled."""
    column = pipes[name]
    if isinstance(column.dtype, pd.StringDtype):
        return column.fillna("")
    return column.astype(object).where(column.notna(), "").astype(str)


def text_array(pipes: pd.DataFrame, name: str) -> NDArray[np.object_]:
    """A column as an object array of strings, "" where empty; each distinct text made into a
    Python string once (a million rows of a few words cost one hash, not a million strings)."""
    codes, distinct = pd.factorize(texts(pipes, name))
    return np.asarray(distinct, dtype=object)[codes] if len(distinct) else np.full(len(codes), "", dtype=object)


def evaluated(pipes: pd.DataFrame) -> np.ndarray:
    """True where the pipe's hydraulics ran (its status is one of ``EVALUATED_STATUSES``)."""
    return texts(pipes, "hydraulic_status").isin(EVALUATED_STATUSES).to_numpy()


def map_classes(pipes: pd.DataFrame) -> np.ndarray:
    """The map class of every pipe (see the module docstring), as strings."""
    severity = text_array(pipes, "severity")
    urgent = np.isin(severity, ("high", "medium"))
    return np.select(
        [urgent, ~evaluated(pipes), severity == "low"], [severity, "not_evaluated", "low"], "none"
    ).astype(object)


def pipes_flags(pipes: pd.DataFrame) -> np.ndarray:
    """The set of flag codes of every pipe (an object array of frozensets), from the ``flags`` text."""
    which, distinct = pd.factorize(texts(pipes, "flags"))  # a handful of distinct flag sets, by one hash
    sets = np.empty(distinct.size, dtype=object)
    sets[:] = [frozenset(code for code in str(words).split(";") if code) for words in distinct]
    return sets[which]


def class_counts(classes: np.ndarray) -> dict[str, int]:
    """Number of pipes in each map class, every class listed."""
    return {name: int(np.count_nonzero(classes == name)) for name in MAP_CLASSES}


def flag_totals(pipes: pd.DataFrame, *, severity: Mapping[str, str]) -> pd.DataFrame:
    """Pipes and length [m] per flag code raised, in the order of ``FLAG_CODES``.

    A pipe with several flags counts once under each. Columns: ``flag``, ``severity`` (from the
    rules used), ``pipes``, ``length_m``.
    """
    grouped = code_totals(pipes["flags"], numeric(pipes, "length_m")).rename_axis("flag")
    order = [code for code in FLAG_CODES if code in grouped.index] + sorted(set(grouped.index) - set(FLAG_CODES))
    table = grouped.reindex(order).reset_index()
    table.insert(1, "severity", [severity.get(code, "") for code in table["flag"]])
    return table.astype({"pipes": int})


def pipe_labels(pipes: pd.DataFrame, rows: np.ndarray, *, id_field: str | None) -> np.ndarray:
    """The id of the pipes at positions ``rows``: the ``id_field`` column, else ``pipe_id``, else ``#<row>``."""
    for name in (id_field, "pipe_id"):
        if name is not None and name in pipes.columns:
            return texts(pipes.iloc[rows], name).to_numpy(dtype=object)
    return ("#" + pd.Index(rows).astype(str)).to_numpy(dtype=object)


def renewal_candidates(pipes: pd.DataFrame, *, id_field: str | None, limit: int = 20,
                       ranking: tuple[np.ndarray, np.ndarray] | None = None) -> pd.DataFrame:  # fmt: skip
    """The first ``limit`` rows of candidates.csv: the same pipes in the same order, with the action.

    ``ranking``: ``candidate_rows(pipes)`` when the caller has it already (ranked once per page).
    """
    rows, action = candidate_rows(pipes) if ranking is None else ranking
    rows, action = rows[:limit], action[:limit]
    severity = texts(pipes, "severity")
    chosen = pipes.iloc[rows]
    return pd.DataFrame(
        {
            "pipe": pipe_labels(pipes, rows, id_field=id_field),
            "from_to": (texts(chosen, "from_node_id") + " \u2192 " + texts(chosen, "to_node_id")).to_numpy(dtype=object),
            "action": action,
            "severity": severity.to_numpy(dtype=object)[rows],
            "load_ratio": numeric(chosen, "load_ratio"),
            "height_mm": numeric(chosen, "height_m") * 1000.0,
            "length_m": numeric(chosen, "length_m"),
            "upstream_length_m": numeric(chosen, "upstream_length_m"),
            "reasons": texts(chosen, "reasons").to_numpy(dtype=object),
            "remedy": texts(chosen, "remedy").to_numpy(dtype=object) if "remedy" in chosen.columns else np.full(len(rows), "", dtype=object),
        }
    )


def finding_digest(findings: pd.DataFrame, *, examples: int = 3) -> pd.DataFrame:
    """Findings per code: layers, count and up to ``examples`` feature ids, most frequent first."""
    if findings.empty:
        return pd.DataFrame({"code": [], "layers": [], "count": [], "examples": []})
    frame = pd.DataFrame({name: findings[name].astype(str) for name in ("layer", "feature", "code")})
    counts = frame.groupby("code").size().rename("count")
    layers = frame.drop_duplicates(["code", "layer"]).groupby("code")["layer"].agg(", ".join).rename("layers")
    firsts = frame.drop_duplicates(["code", "feature"]).groupby("code").head(examples)
    listed = firsts.groupby("code")["feature"].agg(list).rename("examples")
    digest = pd.concat([layers, counts, listed], axis=1).rename_axis("code").reset_index()
    return digest.sort_values(["count", "code"], ascending=[False, True], kind="stable").reset_index(drop=True)
