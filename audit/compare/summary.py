"""compare.json and the terminal table: what moved between two audits, in totals.

compare.json opens with ``warning`` (null when both audits were made with the same settings and
tool version) and ``settings_differ``, because a changed rule rather than a changed network may
explain what follows. Then: the tool, the caution, the unit system of every number (the earlier
audit's), notes on how the two audits were put side by side, both audits' provenance, the
matching, the counts of each kind of change, per flag code (of the pipes, then of the manholes)
and per severity the totals before and after with the features that gained and cleared it, and
the manholes per flood state. Keys: docs/compare.md.
"""

from __future__ import annotations

from collections.abc import Mapping
from datetime import UTC, datetime
from pathlib import Path
from typing import Any, TextIO

import pandas as pd

from audit.about import CAUTION, TOOL, __version__
from audit.compare.comparison import Comparison, LayerComparison
from audit.compare.differences import ADDED, CHANGED, REMOVED, UNCHANGED
from audit.compare.matching import AMBIGUOUS, BY_GEOMETRY, BY_ID
from audit.compare.provenance import audit_record
from audit.compare.totals import OUTCOMES, change_counts, code_movement
from audit.outputs import json_safe


def warning(comparison: Comparison) -> str | None:
    """The words that open compare.json, the page and the terminal when the audits' settings differ."""
    if not comparison.settings_differ:
        return None
    keys = ", ".join(item["key"] for item in comparison.settings_differ)
    return (f"The two audits were made with different settings or tool versions ({keys}): a changed rule, not a changed "
            "network, may explain some of the differences.")  # fmt: skip


def build_comparison(comparison: Comparison, *, created: datetime | None = None) -> dict[str, Any]:
    """The content of compare.json (JSON-safe; keys in docs/compare.md)."""
    units = comparison.old.units
    stamp = (created or datetime.now(UTC)).astimezone(UTC).strftime("%Y-%m-%dT%H:%M:%SZ")
    layers = {layer.kind.name: layer for layer in comparison.layers()}
    content = {
        "warning": warning(comparison),
        "settings_differ": comparison.settings_differ,
        "tool": TOOL,
        "version": __version__,
        "created_utc": stamp,
        "caution": CAUTION,
        "units": {"system": units.name, **units.units},
        "notes": comparison.notes,
        "audits": {"old": audit_record(comparison.old), "new": audit_record(comparison.new)},
        "matching": {f"tolerance_{units.suffix('length')}": comparison.tolerance, **{name: matching(layer) for name, layer in layers.items()}},
        "changes": {name: change_counts(layer.table) for name, layer in layers.items()},
        "flags": comparison.flags.to_dict(orient="index"),
        "severity": comparison.severity,
    }
    if comparison.manhole_flags is not None:
        content["manhole_flags"] = comparison.manhole_flags.to_dict(orient="index")
    if comparison.flood_states is not None:
        content["flood_states"] = comparison.flood_states
    if comparison.manholes is not None:
        content["manhole_findings"] = code_movement(comparison.manholes.table, "findings").to_dict(orient="index")
    return json_safe(content)


def matching(layer: LayerComparison) -> dict[str, Any]:
    """How one layer was matched: the id field of each audit and the pairs found each way."""
    how = pd.Series(layer.matches.how, dtype=object).value_counts()
    return {
        "id_field_old": layer.id_fields[0], "id_field_new": layer.id_fields[1],
        "id_source_old": layer.id_sources[0], "id_source_new": layer.id_sources[1],
        "by_id": int(how.get(BY_ID, 0)), "by_geometry": int(how.get(BY_GEOMETRY, 0)), "ambiguous": int(how.get(AMBIGUOUS, 0)),
    }  # fmt: skip


def print_comparison(comparison: Comparison, paths: Mapping[str, Path], *, file: TextIO) -> None:
    """Print the warning (when settings differ), the counts of change, the flags that moved, the notes, the outputs and the caution."""
    lines = [f"WARNING: {words}" for words in [warning(comparison)] if words]
    for layer in comparison.layers():
        counts = change_counts(layer.table)
        text = ", ".join(f"{counts[word]:,} {word}" for word in (ADDED, REMOVED, CHANGED, UNCHANGED))
        extra = f" ({', '.join(f'{counts[word]:,} {word}' for word in OUTCOMES)})" if "worse" in counts else ""
        lines.append(f"{layer.kind.name}: {text}{extra}")
    lines += _flag_lines(comparison.flags, "flag", "pipes")
    if comparison.manhole_flags is not None:
        lines += _flag_lines(comparison.manhole_flags, "manhole flag", "manholes")
    lines += [f"note: {note}" for note in comparison.notes]
    lines += [f"{role}: {path}" for role, path in paths.items()]
    lines.append(CAUTION)
    print("\n".join(lines), file=file)


def _flag_lines(flags: pd.DataFrame, heading: str, layer: str) -> list[str]:
    """The terminal table of the flags that moved: severity, features before and after, gained, cleared; or one line saying none moved."""
    flags = flags[(flags[f"{layer}_old"] != flags[f"{layer}_new"]) | (flags["gained"] > 0) | (flags["cleared"] > 0)]
    if not len(flags):
        return [f"no {heading} moved"]
    width = max(len(heading), *map(len, flags.index))
    lines = [f"{heading:<{width}}  {'severity':<8}  {'before':>8}  {'after':>8}  {'gained':>8}  {'cleared':>8}"]
    for code, row in flags.iterrows():  # one line per flag code that moved
        severity = row["severity_new"] or row["severity_old"]
        lines.append(f"{code:<{width}}  {severity:<8}  {row[f'{layer}_old']:>8,}  {row[f'{layer}_new']:>8,}  {row['gained']:>8,}  {row['cleared']:>8,}")
    return lines
