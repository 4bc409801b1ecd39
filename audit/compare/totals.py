"""Totals before and after: per flag code, per severity, per flood state, and the count of each kind of change.

Every total is taken over whole columns: a layer's flag strings are grouped first (a few hundred
distinct sets, ``audit.outputs.code_totals``), and the codes gained and cleared are counted per
distinct word list of their categorical column, so nothing here runs once per feature.
"""

from __future__ import annotations

from collections.abc import Mapping

import numpy as np
import pandas as pd

from audit.compare.differences import ADDED, CHANGED, REMOVED, UNCHANGED, in_units
from audit.compare.reading import MANHOLES, PIPES, AuditOutput, LayerKind
from audit.grade_line import FloodState
from audit.outputs import code_totals
from audit.rules import DEFAULT_SEVERITY, FLAG_CODES, MANHOLE_FLAG_CODES, MANHOLE_SEVERITY, SEVERITY_NONE, SEVERITY_OFF, SEVERITY_ORDER
from audit.units import UnitSystem

#: How a matched feature's flags moved, as the ``outcome`` column says it.
OUTCOMES = ("worse", "better", "mixed")

#: Flood states from the most to the least serious, as compare.json ``flood_states`` lists them.
FLOOD_STATES = tuple(state.label for state in (FloodState.FLOODING, FloodState.SURCHARGED, FloodState.BELOW_SOFFIT, FloodState.NOT_EVALUATED))


def severity_map(audit: AuditOutput) -> Mapping[str, str]:
    """The severity of each flag code, of pipes and manholes, in an audit's rules (the defaults where summary.json gives none)."""
    rules = audit.summary.get("rules")
    severity = rules.get("severity") if isinstance(rules, dict) else None
    return {**DEFAULT_SEVERITY, **MANHOLE_SEVERITY, **(severity if isinstance(severity, dict) else {})}


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


def _length(audit: AuditOutput, kind: LayerKind, units: UnitSystem) -> np.ndarray:
    """Each feature's length in the length unit of ``units`` (NaN where unknown; 0 where the audit wrote none, and for a manhole)."""
    layer = audit.layer(kind)
    name = layer.computed.get("length_m") if layer is not None else None
    if layer is None or name is None:
        return np.zeros(0 if layer is None else len(layer))
    values = pd.to_numeric(layer.fields[name], errors="coerce").to_numpy(dtype=float, na_value=np.nan)
    return in_units(values, "length_m", source=audit.units, target=units)


def _computed(audit: AuditOutput, kind: LayerKind, name: str) -> pd.Series:
    """A computed column of an audit's layer; empty where the audit has no such layer."""
    layer = audit.layer(kind)
    return layer.fields[layer.computed[name]] if layer is not None else pd.Series([], dtype="string")


def flag_movement(old: AuditOutput, new: AuditOutput, table: pd.DataFrame, *, kind: LayerKind = PIPES) -> pd.DataFrame:
    """Per flag code: its severity in each audit, features (and length) before and after, features that gained and cleared it.

    Every code switched on in either audit is listed, in the order of ``audit.rules.FLAG_CODES``
    (manholes: ``MANHOLE_FLAG_CODES``), then any other code found. Columns: ``severity_old``,
    ``severity_new``, ``<layer>_old``, ``<layer>_new`` (``pipes_old``, ``manholes_old``, ...),
    for pipes ``length_<unit>_old`` / ``_new`` in the earlier audit's length unit, then
    ``gained`` and ``cleared``. Both audits must have the layer's ``flags``.
    """
    units = old.units
    unit = units.suffix("length")
    severity = {"old": severity_map(old), "new": severity_map(new)}
    totals = {side: code_totals(_computed(audit, kind, "flags"), _length(audit, kind, units)) for side, audit in (("old", old), ("new", new))}
    moved = code_movement(table, "flags")
    found = set(totals["old"].index) | set(totals["new"].index) | set(moved.index)
    vocabulary = FLAG_CODES if kind is PIPES else MANHOLE_FLAG_CODES
    live = [code for code in vocabulary if SEVERITY_OFF not in (severity["old"].get(code), severity["new"].get(code)) or code in found]
    order = live + sorted(found - set(live))
    out = pd.DataFrame(index=pd.Index(order, dtype=object))
    for side in ("old", "new"):
        out[f"severity_{side}"] = [severity[side].get(code, "") for code in order]
    for side in ("old", "new"):
        out[f"{kind.name}_{side}"] = totals[side]["pipes"].reindex(order).fillna(0).astype(int).to_numpy()
    if kind is PIPES:
        for side in ("old", "new"):
            out[f"length_{unit}_{side}"] = totals[side]["length_m"].reindex(order).fillna(0.0).round(2).to_numpy()
    for side in ("gained", "cleared"):
        out[side] = moved[side].reindex(order).fillna(0).astype(int).to_numpy() if len(moved) else 0
    return out


def flood_states(old: AuditOutput, new: AuditOutput) -> dict[str, dict[str, int]]:
    """Manholes per flood state before and after, most serious first (``FLOOD_STATES``, then any other word found).

    An audit without manholes counts none.
    """
    counts = {side: _computed(audit, MANHOLES, "flood_state").astype("string").fillna("").value_counts() for side, audit in (("old", old), ("new", new))}
    words = list(FLOOD_STATES) + sorted((set(counts["old"].index) | set(counts["new"].index)) - set(FLOOD_STATES) - {""})
    return {word: {"old": int(counts["old"].get(word, 0)), "new": int(counts["new"].get(word, 0))} for word in words}


def severity_movement(old: AuditOutput, new: AuditOutput) -> dict[str, dict[str, int]]:
    """Pipes per worst severity (and ``none``) before and after, most serious first."""
    counts = {}
    for side, audit in (("old", old), ("new", new)):
        words = audit.pipes.fields[audit.pipes.computed["severity"]].astype("string").fillna("")
        counts[side] = words.mask(words == "", SEVERITY_NONE).value_counts()  # an audit older than the word "none" wrote ""
    words = [*reversed(SEVERITY_ORDER), SEVERITY_NONE]
    return {word: {"old": int(counts["old"].get(word, 0)), "new": int(counts["new"].get(word, 0))} for word in words}
