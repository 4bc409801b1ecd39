"""What changed for each feature: its register fields, its results, its flags and its severity.

Over all matched pairs at once (a loop per field, never per feature):

* **Register fields** present in both audits: a numeric field changed when the two values differ
  by more than ``REGISTER_ATOL + REGISTER_RTOL * max(|a|, |b|)`` (floating-point noise, a value
  stored as float32 by another GIS, is no change); any other field is compared as text, stripped,
  an empty value equal to a null one. ``geometry`` is listed when an end moved by more than the
  matching tolerance (a pipe redrawn the other way round has moved both ends).
* **Results** (the computed columns both audits have): numbers in the earlier audit's unit
  system (the later audit's converted, ``audit.units``), moved beyond
  ``RESULT_ATOL + RESULT_RTOL * max(|a|, |b|)``; text exactly, except that a junction the audit
  named ``J<n>`` equals any other such junction (the numbering shifts when pipes are added).
  ``reasons`` is not compared: it restates the flags and their numbers in the audit's own units.
* **Codes** (the flags of pipes and manholes, the manholes' data findings): the codes gained and
  cleared, compared as sets. An added feature gains all its codes, a removed one clears all of
  its.
* **Severity** (pipes, and manholes where both audits rate them): before, after, ``up`` or
  ``down``, the worst severity among the flags gained (as the later audit's rules rate them),
  and the outcome: ``worse`` (severity up, or the same with flags gained and none cleared),
  ``better`` (the mirror), ``mixed`` (the same severity, flags both gained and cleared). A
  manhole's data findings take no part in its severity or outcome.

**The kind of change.** A matched feature is ``changed`` when a register field or its geometry
changed, or when its codes (flags; a manhole's data findings), its severity or its flood state
changed; else ``unchanged``. A result that moved is listed in ``results_moved`` all the same, but
a number that moved alone (a water level, a load ratio, a flow) leaves the feature unchanged: a
resized pipe moves the grade line of every pipe above it, and a comparison of two years must
not list them all.
"""

from __future__ import annotations

import re
from collections.abc import Mapping
from dataclasses import dataclass

import numpy as np
import pandas as pd
from numpy.typing import NDArray

from audit.compare.matching import AMBIGUOUS, BY_GEOMETRY, BY_ID, Matches, plain_text
from audit.compare.reading import NOT_COMPARED, AuditLayer
from audit.grade_line import FloodState
from audit.result import COLUMN_UNITS, output_name
from audit.rules import SEVERITY_NONE, SEVERITY_ORDER
from audit.units import UNIT_SIZES, UnitSystem

REGISTER_RTOL, REGISTER_ATOL = 1e-6, 1e-9  # common practice, no source: well above float noise, well below any survey's precision
RESULT_RTOL, RESULT_ATOL = 1e-6, 1e-9  # common practice, no source

#: Results shown before and after in columns of their own, where the layer and both audits have them.
BEFORE_AFTER = ("load_ratio", "flow_out", "water_level_m", "freeboard_m", "flood_state")

#: The flood state a manhole is in when the water reaches its cover (``audit.grade_line.FloodState``).
FLOODING = FloodState.FLOODING.label

#: The kinds of change, as written in the ``change`` column.
ADDED, REMOVED, CHANGED, UNCHANGED = "added", "removed", "changed", "unchanged"

#: The words of the ``matched_by`` column ("" for an added or removed feature).
MATCHED_BY = ("", BY_ID, BY_GEOMETRY, AMBIGUOUS)

_JUNCTION = re.compile(r"J\d+")
_RANK = {"": 0, SEVERITY_NONE: 0, **{word: place for place, word in enumerate(SEVERITY_ORDER, start=1)}}


@dataclass(frozen=True)
class Sides:
    """Both audits' layer of one kind, their unit systems and the matches between them."""

    old: AuditLayer
    new: AuditLayer
    old_units: UnitSystem
    new_units: UnitSystem
    matches: Matches
    old_ids: pd.Series  # ids as text, null where none
    new_ids: pd.Series
    moved: NDArray[np.bool_]  # per pair: an end moved beyond the matching tolerance
    severity: Mapping[str, str]  # the later audit's severity of each flag code


@dataclass(frozen=True)
class LayerChanges:
    """The change table of one layer, with the row of each feature in either audit (-1: none)."""

    table: pd.DataFrame
    old_row: NDArray[np.int64]
    new_row: NDArray[np.int64]


def layer_changes(sides: Sides) -> LayerChanges:
    """One row per feature of either audit: the new layer's order, then the removed features in the old layer's order.

    Columns of a few distinct words are categoricals, so that no Python string is made per feature.
    """
    m = sides.matches
    old_row = np.concatenate([m.old, np.full(m.added.size, -1), m.removed])
    new_row = np.concatenate([m.new, m.added, np.full(m.removed.size, -1)])
    pair = np.concatenate([np.arange(m.old.size), np.full(m.added.size + m.removed.size, -1)])
    order = np.lexsort((old_row, np.where(new_row < 0, 0, new_row), new_row < 0))  # the last key sorts first
    old_row, new_row, pair = old_row[order], new_row[order], pair[order]
    matched = pair >= 0
    fields = _by_pair(_changed_names(sides, register=True), pair)
    how = pd.Categorical(m.how, categories=MATCHED_BY)
    table: dict[str, object] = {
        "change": None,  # filled in below, once the codes, the severity and the flood state are compared
        "id_old": _take(sides.old_ids, old_row),
        "id_new": _take(sides.new_ids, new_row),
        "fid_old": _feature_ids(sides.old, old_row),
        "fid_new": _feature_ids(sides.new, new_row),
        "matched_by": _by_pair(how, pair),
        "fields_changed": fields,
        "results_moved": _by_pair(_changed_names(sides, register=False), pair),
    }
    status_moved = np.zeros(old_row.size, dtype=bool)
    moves = {}
    for codes in both_have(sides, sides.old.kind.codes):
        moves[codes] = code_moves(_texts(sides.old, codes, old_row).fillna(""), _texts(sides.new, codes, new_row).fillna(""))
        table |= {f"{codes}_gained": moves[codes][0], f"{codes}_cleared": moves[codes][1]}
        status_moved |= np.asarray(moves[codes][0] != "") | np.asarray(moves[codes][1] != "")
    if "flags" in moves and both_have(sides, ("severity",)):
        severity = _severity_columns(sides, old_row, new_row, matched=matched, gained=moves["flags"][0], cleared=moves["flags"][1])
        table |= severity
        status_moved |= np.asarray(severity["severity_move"] != "")
    for name in both_have(sides, ("flood_state",)):
        status_moved |= values_differ(_texts(sides.old, name, old_row), _texts(sides.new, name, new_row), rtol=RESULT_RTOL, atol=RESULT_ATOL)
    changed = matched & ((fields.codes > 0) | status_moved)
    table["change"] = pd.Categorical.from_codes(np.select([new_row < 0, old_row < 0, changed], [1, 0, 2], 3), categories=[ADDED, REMOVED, CHANGED, UNCHANGED])
    table |= _before_after(sides, old_row, new_row)
    return LayerChanges(pd.DataFrame(table), old_row, new_row)


def both_have(sides: Sides, names: tuple[str, ...]) -> list[str]:
    """Those of the computed columns ``names`` that both audits' layers have (and the layer's kind documents), in the given order."""
    return [name for name in names if name in sides.old.kind.columns and name in sides.old.computed and name in sides.new.computed]


def _by_pair(words: pd.Categorical, pair: NDArray[np.int64]) -> pd.Categorical:
    """A column of words per matched pair, per row of the table: its first word ("") where the row is no pair."""
    codes = np.zeros(pair.size, dtype=words.codes.dtype)
    codes[pair >= 0] = words.codes[pair[pair >= 0]]
    return pd.Categorical.from_codes(codes, dtype=words.dtype)


def _take(values: pd.Series, rows: NDArray[np.int64]) -> pd.api.extensions.ExtensionArray:
    """``values`` at ``rows``, null where the row is -1."""
    return values.array.take(rows, allow_fill=True)


def _feature_ids(layer: AuditLayer, rows: NDArray[np.int64]) -> pd.api.extensions.ExtensionArray:
    """The GeoPackage feature id of each row; null where the row is -1."""
    known = rows >= 0
    fids = np.zeros(rows.size, dtype=np.int64)
    fids[known] = layer.fids[rows[known]]
    return pd.arrays.IntegerArray(fids, ~known)


def _texts(layer: AuditLayer, name: str, rows: NDArray[np.int64]) -> pd.Series:
    """A computed text column at ``rows`` (Arrow strings), null where the row is -1 or the layer lacks it."""
    field = layer.computed.get(name)
    if field is None:
        return pd.Series(pd.NA, index=pd.RangeIndex(rows.size), dtype="string")
    return pd.Series(layer.fields[field].astype("string").array.take(rows, allow_fill=True))


def compared_results(sides: Sides) -> list[str]:
    """The computed columns both audits have, in ``audit.result`` order, less ``NOT_COMPARED``."""
    return [name for name in sides.old.kind.columns if name in sides.old.computed and name in sides.new.computed and name not in NOT_COMPARED]


def common_register(sides: Sides) -> list[str]:
    """The register fields both audits hold, in the earlier audit's order."""
    later = set(sides.new.register)
    return [name for name in sides.old.register if name in later]


def _changed_names(sides: Sides, *, register: bool) -> pd.Categorical:
    """Per matched pair, the register fields that changed (or the results that moved), joined by ";"."""
    m = sides.matches
    if register:
        names = common_register(sides)
        masks = [values_differ(sides.old.fields[name].iloc[m.old], sides.new.fields[name].iloc[m.new], rtol=REGISTER_RTOL, atol=REGISTER_ATOL)
                 for name in names]  # fmt: skip
        names, masks = [*names, "geometry"], [*masks, sides.moved]
    else:
        compared = compared_results(sides)
        names = [output_name(name, sides.old_units) for name in compared]
        masks = [_result_moved(sides, name) for name in compared]
    return joined(np.column_stack(masks) if masks else np.zeros((m.old.size, 0), dtype=bool), names)


def _result_moved(sides: Sides, name: str) -> NDArray[np.bool_]:
    m = sides.matches
    old = sides.old.fields[sides.old.computed[name]].iloc[m.old]
    new = sides.new.fields[sides.new.computed[name]].iloc[m.new]
    if name in COLUMN_UNITS:
        converted = in_units(pd.to_numeric(new, errors="coerce").to_numpy(dtype=float, na_value=np.nan), name, source=sides.new_units, target=sides.old_units)
        return values_differ(old, pd.Series(converted, index=old.index), rtol=RESULT_RTOL, atol=RESULT_ATOL)
    if not _is_number(old) or not _is_number(new):
        old, new = _junctions_as_one(old), _junctions_as_one(new)
    return values_differ(old, new, rtol=RESULT_RTOL, atol=RESULT_ATOL)


def in_units(values: NDArray[np.float64], name: str, *, source: UnitSystem, target: UnitSystem) -> NDArray[np.float64]:
    r"""Values of the computed column ``name`` written in ``source``'s unit, in ``target``'s.

    .. math:: x_{target} = x_{source} \, f_{source} / f_{target}

    where :math:`f` is the size of each unit in the SI base of the column's quantity
    (``audit.units.UNIT_SIZES``, exact factors of NIST SP 811 [1]_).

    Parameters
    ----------
    values : the column's values [``source``'s unit]
    name : the column's documented name in ``audit.result`` (``q_design``, ``height_m``, ...)
    source, target : the unit systems; a column without a unit is returned as it is

    Returns
    -------
    the values [``target``'s unit]

    References
    ----------
    .. [1] NIST Special Publication 811 (2008), Guide for the Use of the International System
       of Units, appendix B.

    Examples
    --------
    >>> from audit.units import SI, US
    >>> in_units(np.array([1.0]), "q_design", source=US, target=SI).round(4).tolist()  # 1 cfs in l/s
    [28.3168]
    """
    if name not in COLUMN_UNITS or source == target:
        return values
    quantity = COLUMN_UNITS[name][1]
    return target.convert(values * UNIT_SIZES[quantity][source.unit(quantity)], quantity)


def _is_number(values: pd.Series) -> bool:
    return bool(pd.api.types.is_numeric_dtype(values.dtype) and not pd.api.types.is_bool_dtype(values.dtype))


def _junctions_as_one(values: pd.Series) -> pd.Series:
    """Text with every ``J<n>`` (an unnamed junction's name) read as ``J``.

    >>> _junctions_as_one(pd.Series(["J12", "MH J12", "A7", None])).tolist()
    ['J', 'MH J12', 'A7', <NA>]
    """
    text = values.astype("string")
    return text.mask(text.str.fullmatch(_JUNCTION.pattern).fillna(False), "J")


def values_differ(old: pd.Series, new: pd.Series, *, rtol: float, atol: float) -> NDArray[np.bool_]:
    r"""Per row, whether two columns of values differ: numbers beyond the tolerance, else as stripped text.

    Two numbers :math:`a` and :math:`b` differ when

    .. math:: |a - b| > atol + rtol \, \max(|a|, |b|)

    Two unknowns (NaN, null, empty text) are equal; an unknown and a value differ.

    Parameters
    ----------
    old, new : the two columns, row by row
    rtol : relative tolerance [-]
    atol : absolute tolerance [the columns' unit]

    Examples
    --------
    >>> values_differ(pd.Series([1.0, np.nan, 2.0, 5.0]), pd.Series([1.0 + 1e-12, np.nan, np.nan, 5.1]), rtol=1e-6, atol=1e-9).tolist()
    [False, False, True, True]
    >>> values_differ(pd.Series(["VC ", None, "PVC"]), pd.Series(["VC", "", "pvc"]), rtol=1e-6, atol=1e-9).tolist()
    [False, False, True]
    """
    if _is_number(old) and _is_number(new):
        a = old.to_numpy(dtype=float, na_value=np.nan)
        b = new.to_numpy(dtype=float, na_value=np.nan)
        with np.errstate(invalid="ignore"):
            close = np.abs(a - b) <= atol + rtol * np.fmax(np.abs(a), np.abs(b))
        return ~(close | (np.isnan(a) & np.isnan(b)))
    a, b = plain_text(old), plain_text(new)
    equal = (a == b).fillna(False).to_numpy(dtype=bool)
    return ~(equal | (a.isna() & b.isna()).to_numpy(dtype=bool))


def joined(masks: NDArray[np.bool_], names: list[str]) -> pd.Categorical:
    """Per row, the names whose mask holds, joined by ";" ("" where none): one join per distinct pattern.

    Examples
    --------
    >>> joined(np.array([[True, False, True], [False, False, False], [True, False, True]]), ["a", "b", "c"]).tolist()
    ['a;c', '', 'a;c']
    """
    codes = np.zeros(masks.shape[0], dtype=np.int64)
    words = [""]
    rows = np.flatnonzero(masks.any(axis=1))
    if rows.size:
        patterns, inverse = np.unique(masks[rows], axis=0, return_inverse=True)
        words += [";".join(name for name, hit in zip(names, pattern, strict=True) if hit) for pattern in patterns]
        codes[rows] = inverse.ravel() + 1
    return pd.Categorical.from_codes(codes, categories=words)


def code_moves(old: pd.Series, new: pd.Series) -> tuple[pd.Categorical, pd.Categorical]:
    """Per row, the codes gained (in ``new``, not in ``old``) and cleared, each joined by ";".

    The work is done once per distinct pair of code lists, not once per row.

    Examples
    --------
    >>> gained, cleared = code_moves(pd.Series(["a;b", "", "b"]), pd.Series(["b;c", "a", "b"]))
    >>> gained.tolist(), cleared.tolist()
    (['c', 'a', ''], ['a', '', ''])
    """
    first, first_words = pd.factorize(old)
    second, second_words = pd.factorize(new)
    width = max(len(second_words), 1)
    keys, inverse = np.unique(first.astype(np.int64) * width + second, return_inverse=True)
    gained, cleared = [], []
    for key in keys:  # one pass per distinct pair of code lists: a few hundred at most
        before = [code for code in str(first_words[key // width]).split(";") if code]
        after = [code for code in str(second_words[key % width]).split(";") if code]
        gained.append(";".join(code for code in after if code not in before))
        cleared.append(";".join(code for code in before if code not in after))
    return _words(gained, inverse.ravel()), _words(cleared, inverse.ravel())


def _words(per_key: list[str], inverse: NDArray[np.intp]) -> pd.Categorical:
    """A categorical of the word of each row's key (words may repeat across keys); "" is always a category."""
    codes, words = pd.factorize(pd.Series(["", *per_key], dtype=object))
    return pd.Categorical.from_codes(codes[1:][inverse], categories=list(words))


def severity_rank(words: pd.Series | pd.Categorical | NDArray[np.object_]) -> NDArray[np.int64]:
    """0 for no flag (``none``, empty or no feature), then 1, 2, 3 for ``SEVERITY_ORDER`` (an unknown word counts as 0).

    Examples
    --------
    >>> severity_rank(pd.Series(["high", "none", None, "low"])).tolist()
    [3, 0, 0, 1]
    """
    codes, distinct = pd.factorize(pd.Series(words))
    ranks = np.array([_RANK.get(str(word), 0) for word in distinct] + [0], dtype=np.int64)  # one per distinct word; the last for null
    return ranks[codes]


def worst_of(codes: pd.Categorical, severity: Mapping[str, str]) -> pd.Categorical:
    """Per row, the worst severity among the codes joined by ";" (``none`` where there is none).

    Examples
    --------
    >>> worst_of(pd.Categorical(["a;b", "", "b"]), {"a": "high", "b": "low"}).tolist()
    ['high', 'none', 'low']
    """
    worst = np.array([max((_RANK.get(severity.get(code, ""), 0) for code in str(text).split(";") if code), default=0)
                      for text in codes.categories], dtype=np.int64)  # fmt: skip
    return pd.Categorical.from_codes(worst[codes.codes], categories=[SEVERITY_NONE, *SEVERITY_ORDER])


def _severity_columns(sides: Sides, old_row: NDArray[np.int64], new_row: NDArray[np.int64], *, matched: NDArray[np.bool_],
                      gained: pd.Categorical, cleared: pd.Categorical) -> dict[str, object]:  # fmt: skip
    before = _texts(sides.old, "severity", old_row)
    after = _texts(sides.new, "severity", new_row)
    rank_before, rank_after = severity_rank(before), severity_rank(after)
    some_gained, some_cleared = np.asarray(gained != ""), np.asarray(cleared != "")
    same = rank_before == rank_after
    move = np.select([matched & (rank_after > rank_before), matched & (rank_after < rank_before)], [1, 2], 0)
    worse = (rank_after > rank_before) | (same & some_gained & ~some_cleared)
    better = (rank_after < rank_before) | (same & some_cleared & ~some_gained)
    outcome = np.where(matched, np.select([worse, better, same & some_gained & some_cleared], [1, 2, 3], 0), 0)
    return {"gained_severity": worst_of(gained, sides.severity), "severity_old": before.array, "severity_new": after.array,
            "severity_move": pd.Categorical.from_codes(move, categories=["", "up", "down"]),
            "outcome": pd.Categorical.from_codes(outcome, categories=["", "worse", "better", "mixed"])}  # fmt: skip


def _before_after(sides: Sides, old_row: NDArray[np.int64], new_row: NDArray[np.int64]) -> dict[str, object]:
    """``<column>_old`` and ``<column>_new`` for each of ``BEFORE_AFTER`` that both audits have, in the earlier audit's units."""
    out: dict[str, object] = {}
    for name in BEFORE_AFTER:
        if name not in sides.old.kind.columns or name not in sides.old.computed or name not in sides.new.computed:
            continue
        stem = output_name(name, sides.old_units)
        for suffix, layer, rows, units in (("old", sides.old, old_row, sides.old_units), ("new", sides.new, new_row, sides.new_units)):
            column = layer.fields[layer.computed[name]]
            if not (_is_number(column) or name in COLUMN_UNITS):
                out[f"{stem}_{suffix}"] = _texts(layer, name, rows).array
                continue
            numbers = in_units(pd.to_numeric(column, errors="coerce").to_numpy(dtype=float, na_value=np.nan), name, source=units, target=sides.old_units)
            values = np.full(rows.size, np.nan)
            values[rows >= 0] = numbers[rows[rows >= 0]]
            out[f"{stem}_{suffix}"] = values
    return out
