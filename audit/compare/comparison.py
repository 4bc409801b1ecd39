"""Two audits in, the comparison out: matches, change tables, the settings that differ, and notes.

``compare_audits(old, new)`` takes two audits read by :func:`audit.compare.reading.read_audit`
and returns a :class:`Comparison`: for the pipes and the manholes a change table
(:mod:`audit.compare.differences`) with the geometry of each row (the later audit's, or the
earlier one's for a removed feature, in the later audit's CRS), the settings that differ
(:mod:`audit.compare.provenance`), notes on how the two were put side by side, and the totals
before and after per flag and per severity, of the pipes and of the manholes, and per flood state
(:mod:`audit.compare.totals`).

Coordinates are matched in one frame: the earlier audit's CRS when it is projected, else its
working CRS (summary.json ``settings.working_crs``) or a UTM zone that fits; the later audit's
points are projected into it. The tolerance is given in the earlier audit's length unit (m or
ft) and turned into the frame's unit.
"""

from __future__ import annotations

from dataclasses import dataclass, replace
from typing import Any

import geopandas as gpd
import numpy as np
import pandas as pd
import pyarrow as pa
import pyproj
import shapely
from numpy.typing import NDArray

from audit.compare.differences import LayerChanges, Sides, layer_changes
from audit.compare.matching import Matches, end_points, match_features, plain_text
from audit.compare.provenance import settings_differ
from audit.compare.reading import MANHOLES, PIPES, AuditLayer, AuditOutput, LayerKind
from audit.compare.totals import flag_movement, flood_states, severity_map, severity_movement
from audit.result import output_name
from audit.units import UNIT_SIZES

DEFAULT_TOLERANCE_M = 0.5  # common practice, no source: survey-grade ends agree well within half a metre


@dataclass(frozen=True, eq=False)
class LayerComparison:
    """The change table of one layer, and the geometry of each of its rows."""

    kind: LayerKind
    changes: LayerChanges
    matches: Matches
    wkb: pa.Array  # per row: the later audit's geometry, or the earlier one's (reprojected) for a removed feature
    crs: str | None  # the later audit's CRS (the earlier one's when the later has none)
    geometry_type: str | None
    id_fields: tuple[str | None, str | None]  # the id field of each audit
    id_sources: tuple[str, str]  # where each came from, or why there is none

    @property
    def table(self) -> pd.DataFrame:
        """The change table: one row per feature of either audit."""
        return self.changes.table


@dataclass(frozen=True, eq=False)
class Comparison:
    """Everything compare found."""

    old: AuditOutput  # the earlier audit: its summary, units and folder (its layers without their features)
    new: AuditOutput  # the later audit, the same way
    tolerance: float  # matching tolerance [the earlier audit's length unit]
    pipes: LayerComparison
    manholes: LayerComparison | None  # None when neither audit has manholes
    settings_differ: list[dict[str, Any]]  # {"key", "old", "new"} per setting that differs
    notes: list[str]  # how the two audits were put side by side
    flags: pd.DataFrame  # per pipe flag code, totals before and after (audit.compare.totals.flag_movement)
    severity: dict[str, dict[str, int]]  # pipes per worst severity before and after
    manhole_flags: pd.DataFrame | None  # per manhole flag code, the same; None unless both audits' manholes have flags
    flood_states: dict[str, dict[str, int]] | None  # manholes per flood state before and after; None unless both audits have them

    def layers(self) -> list[LayerComparison]:
        """The pipes, then the manholes when there are any."""
        return [self.pipes] + ([self.manholes] if self.manholes is not None else [])


def compare_audits(old: AuditOutput, new: AuditOutput, *, tolerance: float | None = None) -> Comparison:
    """Compare two audits.

    Parameters
    ----------
    old, new : the earlier and the later audit
    tolerance : largest distance between the ends of a pipe (or two manholes) matched by
        geometry [the earlier audit's length unit: m or ft]; None: 0.5 m
    """
    if tolerance is None:
        tolerance = float(old.units.convert(DEFAULT_TOLERANCE_M, "length"))
    notes = _unit_notes(old, new)
    frame, frame_note = _matching_frame(old)
    notes += [frame_note] if frame_note else []
    metres = tolerance * UNIT_SIZES["length"][old.units.unit("length")]
    per_unit = frame.axis_info[0].unit_conversion_factor if frame is not None and frame.axis_info else 1.0
    placeholders = frozenset(old.placeholder_ids() | new.placeholder_ids())
    compared = {}
    for kind in (PIPES, MANHOLES):
        layers = old.layer(kind), new.layer(kind)
        if layers == (None, None):
            continue
        before = layers[0] if layers[0] is not None else _empty(kind, layers[1])
        after = layers[1] if layers[1] is not None else _empty(kind, layers[0])
        compared[kind.name] = _compare_layer(old, new, before, after, frame=frame, tolerance=metres / per_unit, placeholders=placeholders)
        notes += [f"{audit.label} {kind.name}: no id field ({source}); matched by geometry only"
                  for audit, field, source in zip((old, new), compared[kind.name].id_fields, compared[kind.name].id_sources, strict=True)
                  if field is None and len(audit.layer(kind) or ())]  # fmt: skip
        notes += _field_notes(old, new, before, after) + _status_notes(old, new, before, after)
    flags, severity = flag_movement(old, new, compared["pipes"].table), severity_movement(old, new)
    manholes = compared.get("manholes")
    status = set(manholes.table.columns) if manholes is not None else set()
    manhole_flags = flag_movement(old, new, manholes.table, kind=MANHOLES) if manholes is not None and "flags_gained" in status else None
    states = flood_states(old, new) if manholes is not None and "flood_state_old" in status else None
    return Comparison(_provenance(old), _provenance(new), tolerance, compared["pipes"], manholes, settings_differ(old, new),
                      notes, flags, severity, manhole_flags, states)  # fmt: skip


def _field_notes(old: AuditOutput, new: AuditOutput, before: AuditLayer, after: AuditLayer) -> list[str]:
    """A note for the register fields only one audit holds (they are not compared)."""
    notes = []
    for audit, mine, other in ((old, before, after), (new, after, before)):
        only = [name for name in mine.register if name not in other.register]
        if only:
            notes.append(f"{mine.kind.name}: register fields only {audit.label} holds, not compared: {', '.join(only)}")
    return notes


def _status_notes(old: AuditOutput, new: AuditOutput, before: AuditLayer, after: AuditLayer) -> list[str]:
    """A note for each of the flags, severity and flood state that only one audit's layer has (an audit made by an earlier version)."""
    notes = []
    for name in ("flags", "severity", "flood_state"):
        if name not in before.kind.columns or (name in before.computed) == (name in after.computed):
            continue
        lacking = old if name not in before.computed else new
        notes.append(f"{lacking.label} {before.kind.name}: no {output_name(name, lacking.units)} field (an audit made by an earlier version): "
                     f"{before.kind.name.removesuffix('s')} {name.replace('_', ' ')} not compared")  # fmt: skip
    return notes


def _provenance(audit: AuditOutput) -> AuditOutput:
    """The audit without its features: what the outputs still say about it once the comparison is made.

    The comparison holds no second copy of a million features while its files are written.
    """
    return replace(audit, pipes=_without_features(audit.pipes), manholes=None if audit.manholes is None else _without_features(audit.manholes))


def _unit_notes(old: AuditOutput, new: AuditOutput) -> list[str]:
    if old.units == new.units:
        return []
    return [f"{old.label} is written in {old.units.name.upper()} units and {new.label} in {new.units.name.upper()} units: "
            f"{new.label}'s numbers are converted into {old.units.name.upper()} units before they are compared, and every "
            f"number here is in {old.units.name.upper()} units"]  # fmt: skip


def _matching_frame(old: AuditOutput) -> tuple[pyproj.CRS | None, str]:
    """The CRS in which ends are compared, and a note when it is not the earlier audit's own."""
    if old.pipes.crs is None:
        return None, f"{old.label}'s pipes have no CRS: their coordinates are taken to be in metres"
    crs = pyproj.CRS.from_user_input(old.pipes.crs)
    if crs.is_projected:
        return crs, ""
    for choose in (lambda: pyproj.CRS.from_user_input(old.working_crs()), lambda: _utm(old.pipes)):
        try:
            target = choose()
        except (pyproj.exceptions.CRSError, RuntimeError, ValueError, TypeError):
            continue
        return target, f"{old.label}'s layers are in a geographic CRS: features are matched in {target.to_string()}"
    return None, f"{old.label}'s layers are in a geographic CRS and no projection fits them: the tolerance is taken in degrees"


def _utm(layer: AuditLayer) -> pyproj.CRS:
    """A UTM zone that fits the layer (geopandas' estimate)."""
    return gpd.GeoSeries(shapely.from_wkb(layer.wkb.to_numpy(zero_copy_only=False), on_invalid="ignore"), crs=layer.crs).estimate_utm_crs()


def _ends_in(layer: AuditLayer, frame: pyproj.CRS | None) -> NDArray[np.float64]:
    """End points of every feature of ``layer`` in ``frame`` (as they are when either has no CRS)."""
    ends = end_points(layer.wkb)
    if frame is None or layer.crs is None or pyproj.CRS.from_user_input(layer.crs) == frame:
        return ends
    x, y = pyproj.Transformer.from_crs(layer.crs, frame, always_xy=True).transform(ends[..., 0], ends[..., 1])
    return np.stack([x, y], axis=-1)


def _compare_layer(old: AuditOutput, new: AuditOutput, before: AuditLayer, after: AuditLayer, *, frame: pyproj.CRS | None,
                   tolerance: float, placeholders: frozenset[str]) -> LayerComparison:  # fmt: skip
    old_ids, new_ids = (_ids(layer, placeholders) for layer in (before, after))
    old_ends, new_ends = _ends_in(before, frame), _ends_in(after, frame)
    matches = match_features(old_ids, new_ids, old_ends, new_ends, tolerance=tolerance)
    gaps = np.hypot(*(old_ends[matches.old] - new_ends[matches.new]).transpose(2, 0, 1))  # each end, in the same order
    unknown = ~np.isfinite(old_ends[matches.old]).any(axis=(1, 2)) & ~np.isfinite(new_ends[matches.new]).any(axis=(1, 2))
    moved = ~(gaps <= tolerance).all(axis=1) & ~unknown
    sides = Sides(before, after, old.units, new.units, matches, old_ids, new_ids, moved, severity_map(new))
    changes = layer_changes(sides)
    wkb, crs = _row_geometry(before, after, changes)
    return LayerComparison(before.kind, changes, matches, wkb, crs, after.geometry_type or before.geometry_type,
                           (before.id_field, after.id_field), (before.id_source, after.id_source))  # fmt: skip


def _ids(layer: AuditLayer, placeholders: frozenset[str]) -> pd.Series:
    if layer.id_field is None:
        return pd.Series(pd.NA, index=pd.RangeIndex(len(layer)), dtype="string")
    return plain_text(layer.fields[layer.id_field], placeholders=placeholders)


def _row_geometry(before: AuditLayer, after: AuditLayer, changes: LayerChanges) -> tuple[pa.Array, str | None]:
    """Per change row, the later geometry, or the earlier one for a removed feature, in the later audit's CRS (as WKB)."""
    removed = changes.new_row < 0
    crs = after.crs if after.crs is not None else before.crs
    gone = before.wkb.take(pa.array(changes.old_row[removed])).cast(pa.binary())
    if len(gone) and before.crs is not None and crs is not None and pyproj.CRS.from_user_input(before.crs) != pyproj.CRS.from_user_input(crs):
        transform = pyproj.Transformer.from_crs(before.crs, crs, always_xy=True)
        shapes = shapely.from_wkb(gone.to_numpy(zero_copy_only=False), on_invalid="ignore")
        moved = shapely.transform(shapes, lambda xy: np.column_stack(transform.transform(xy[:, 0], xy[:, 1])))
        gone = pa.array(shapely.to_wkb(moved), type=pa.binary())
    kept = after.wkb.take(pa.array(changes.new_row[~removed])).cast(pa.binary())
    return pa.concat_arrays([kept, gone]), crs  # the removed features are the last rows


def _empty(kind: LayerKind, like: AuditLayer | None) -> AuditLayer:
    """A layer of no features, standing for the audit that lacks this layer."""
    assert like is not None
    return replace(_without_features(like), id_field=None, id_source=f"the audit has no {kind.name} layer")


def _without_features(layer: AuditLayer) -> AuditLayer:
    """The layer with its fields and computed columns but no feature."""
    return replace(layer, fields=layer.fields.iloc[:0].copy(), fids=np.empty(0, dtype=np.int64), wkb=pa.array([], type=pa.binary()))
