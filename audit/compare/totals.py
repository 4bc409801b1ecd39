"""Totals before and after: per flag code, per severity, and the count of each kind of change.

Every total is taken over whole columns: a layer's flag strings are grouped first (a few hundred
distinct sets, ``audit.outputs.code_totals``), and the codes gained and cleared are counted per
distinct word list of their categorical column, so nothing here runs once per feature.
"""

from __future__ import annotations

from collections.abc import Mapping

import numpy as np
import pandas as pd

from audit.compare.differences import ADDED, CHANGED, REMOVED, UNCHANGED, in_units
from audit.compare.reading import AuditOutput
from audit.outputs import code_totals
from audit.rules import DEFAULT_SEVERITY, FLAG_CODES, SEVERITY_NONE, SEVERITY_OFF, SEVERITY_ORDER
from audit.units import UnitSystem

#: How a matched pipe's flags moved, as the ``outcome`` column says it.
OUTCOMES = ("worse", "better", "mixed")


def severity_map(audit: AuditOutput) -> Mapping[str, str]:
    """The severity of each flag code in an audit's rules (the defaults where summary.json gives none)."""
    rules = audit.summary.get("rules")
    severity = rules.get("severity") if isinstance(rules, dict) else None
    return severity if isinstance(severity, dict) else DEFAULT_SEVERITY


def change_counts(table: pd.DataFrame) -> dict[str, int]:
    """Features per kind of change, and (pipes) per outcome."""
    counts = table["change"].value_counts()
    out = {word: int(counts.get(word, 0)) for word in (ADDED, REMOVED, CHANGED, UNCHANGED)}
    if "outcome" in table:
        outcome = table["outcome"].value_counts()
        out |= {word: int(outcome.get(word, 0)) for word in OUTCOMES}
    return out


def code_movement(table: pd.DataFrame, codes: str) -> pd.DataFrame:
    """Per code, the features that gained it and those that cleared it (columns ``gained``, ``cleared``).

    Examples
    --------
    >>> table = pd.DataFrame({"flags_gained": pd.Categorical(["a;b", "", "b"]), "flags_cleared": pd.Categorical(["", "c", ""])})
    >>> code_movement(table, "flags").to_dict("index")
    {'a': {'gained': 1, 'cleared': 0}, 'b': {'gained': 2, 'cleared': 0}, 'c': {'gained': 0, 'cleared': 1}}
    """
    counted = {}
    for side in ("gained", "cleared"):
        lists = table[f"{codes}_{side}"].value_counts()  # one row per distinct list of codes
        split = pd.Series(lists.to_numpy(), index=lists.index.astype(str)).rename_axis("codes").reset_index(name="count")
        split["codes"] = split["codes"].str.split(";")
        exploded = split.explode("codes")
        counted[side] = exploded[exploded["codes"] != ""].groupby("codes")["count"].sum()
    return pd.DataFrame(counted).fillna(0).astype(int).rename_axis(None)


def _length(audit: AuditOutput, units: UnitSystem) -> np.ndarray:
    """Each pipe's length in the length unit of ``units`` (NaN where unknown; 0 where the audit wrote none)."""
    layer = audit.pipes
    name = layer.computed.get("length_m")
    if name is None:
        return np.zeros(len(layer))
    values = pd.to_numeric(layer.fields[name], errors="coerce").to_numpy(dtype=float, na_value=np.nan)
    return in_units(values, "length_m", source=audit.units, target=units)


def flag_movement(old: AuditOutput, new: AuditOutput, pipes: pd.DataFrame) -> pd.DataFrame:
    """Per flag code: its severity in each audit, pipes and length before and after, pipes that gained and cleared it.

    Every code switched on in either audit is listed, in the order of ``audit.rules.FLAG_CODES``,
    then any other code found. Lengths are in the earlier audit's length unit (column
    ``length_<unit>_old`` / ``_new``).
    """
    units = old.units
    unit = units.suffix("length")
    severity = {"old": severity_map(old), "new": severity_map(new)}
    totals = {side: code_totals(audit.pipes.fields[audit.pipes.computed["flags"]], _length(audit, units)) for side, audit in (("old", old), ("new", new))}
    moved = code_movement(pipes, "flags")
    found = set(totals["old"].index) | set(totals["new"].index) | set(moved.index)
    live = [code for code in FLAG_CODES if SEVERITY_OFF not in (severity["old"].get(code), severity["new"].get(code)) or code in found]
    order = live + sorted(found - set(live))
    table = pd.DataFrame(index=pd.Index(order, dtype=object))
    for side in ("old", "new"):
        table[f"severity_{side}"] = [severity[side].get(code, "") for code in order]
    for side in ("old", "new"):
        table[f"pipes_{side}"] = totals[side]["pipes"].reindex(order).fillna(0).astype(int).to_numpy()
    for side in ("old", "new"):
        table[f"length_{unit}_{side}"] = totals[side]["length_m"].reindex(order).fillna(0.0).round(2).to_numpy()
    for side in ("gained", "cleared"):
        table[side] = moved[side].reindex(order).fillna(0).astype(int).to_numpy() if len(moved) else 0
    return table


def severity_movement(old: AuditOutput, new: AuditOutput) -> dict[str, dict[str, int]]:
    """Pipes per worst severity (and ``none``) before and after, most serious first."""
    counts = {}
    for side, audit in (("old", old), ("new", new)):
        words = audit.pipes.fields[audit.pipes.computed["severity"]].astype("string").fillna("")
        counts[side] = words.mask(words == "", SEVERITY_NONE).value_counts()  # an audit older than the word "none" wrote ""
    words = [*reversed(SEVERITY_ORDER), SEVERITY_NONE]
    return {word: {"old": int(counts["old"].get(word, 0)), "new": int(counts["new"].get(word, 0))} for word in words}
