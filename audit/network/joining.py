"""Pipe ends joined to nodes: by id, else by snapping to a manhole, else a junction of meeting ends.

Pipe ends join manholes by the ``from_node`` / ``to_node`` ids where those are mapped, else by
snapping the first and last vertex of each line to the nearest manhole within a tolerance. Ends
near no manhole are clustered with each other into unnamed junction nodes ``J1``, ``J2``, ...
Everything is done for all ends at once: one id factorisation, one k-d tree query, one
clustering. The ends are kept in digitising order; the flow direction is set later
(``audit.network.build``).
"""

from __future__ import annotations

from dataclasses import dataclass

import geopandas as gpd
import numpy as np
import pandas as pd
import pyarrow as pa
import shapely

from audit.network.ids import IdCodes, first_appearance, id_codes, id_text
from audit.network.snapping import (
    cluster_points,
    first_appearance_labels,
    line_ends,
    snap_to_points,
)

NODE_COLUMNS = ("node_id", "kind", "manhole_row", "x", "y", "rim", "invert", "depth", "inflow", "access")
_LEVEL_COLUMNS = ("rim", "invert", "depth", "inflow")


@dataclass(frozen=True, eq=False)
class JoinedEnds:
    """Pipe ends joined to nodes, in digitising order (end 0 = first vertex or ``from_node``)."""

    nodes: pd.DataFrame
    end_node: np.ndarray  # int64 (n, 2)
    end_xy: np.ndarray  # float (n, 2, 2)
    end_text: pa.Array  # the from ids of all pipes, then their to ids; null where no id
    has_id: np.ndarray  # bool (n, 2): the end has an id
    unknown: np.ndarray  # bool (n, 2): an id was given and names no manhole
    ids_mapped: bool
    repeated: np.ndarray  # int64 manhole rows left out because their id repeats an earlier row's
    unplaced: np.ndarray  # bool (n,): a pipe with an end that has neither a node nor coordinates

    def end_ids(self, pipe: np.ndarray, end: np.ndarray) -> np.ndarray:
        """The ids (str, None where none) of the given ends, as Python objects."""
        where = np.asarray(end, dtype=np.int64) * len(self.end_node) + np.asarray(pipe, dtype=np.int64)
        return self.end_text.take(pa.array(where)).to_numpy(zero_copy_only=False)


def _manhole_nodes(
    manholes: gpd.GeoDataFrame | None, codes: IdCodes, *, keep_first: bool
) -> tuple[pd.DataFrame, np.ndarray, np.ndarray]:
    """Node rows for the manholes, the manhole rows dropped as repeated ids, node index per id code."""
    if manholes is None:
        return _empty_nodes(), np.zeros(0, dtype=np.int64), np.zeros(0, dtype=np.int64)
    fresh = first_appearance(codes.manhole)
    repeated = (codes.manhole >= 0) & ~fresh
    keep = ~repeated if keep_first else np.ones(len(manholes), dtype=bool)
    rows = np.flatnonzero(keep)
    node_of_code = (np.cumsum(keep) - 1)[fresh]
    geometry = np.asarray(manholes.geometry.values, dtype=object)[keep]
    table = {
        "node_id": _node_names(codes, rows),
        "kind": "manhole",
        "manhole_row": rows.astype(np.int64),
        "x": shapely.get_x(geometry),
        "y": shapely.get_y(geometry),
    }
    for name in _LEVEL_COLUMNS:
        table[name] = manholes[name].to_numpy(dtype=float)[keep] if name in manholes else np.nan
    access = manholes["access"].to_numpy(dtype=object)[keep] if "access" in manholes else np.full(keep.sum(), True)
    table["access"] = np.where(pd.isna(access), True, access).astype(bool)
    nodes = pd.DataFrame(table, index=range(len(rows)))
    return nodes, np.flatnonzero(repeated & keep_first), node_of_code


def _node_names(codes: IdCodes, rows: np.ndarray) -> pd.api.extensions.ExtensionArray | np.ndarray:
    """The stripped ids of the given manhole rows: text as pandas infers it, None-only as objects."""
    picked = codes.text.take(pa.array(codes.manhole[rows], mask=codes.manhole[rows] < 0))
    if picked.null_count == len(picked):
        return np.full(len(picked), None, dtype=object)
    return pd.array(picked.cast(pa.large_string()), dtype=pd.StringDtype("pyarrow", na_value=np.nan))


def _empty_nodes() -> pd.DataFrame:
    return _junction_nodes(np.zeros(0, dtype=object), np.zeros((0, 2)))


def _junction_nodes(names: np.ndarray, xy: np.ndarray) -> pd.DataFrame:
    count = len(names)
    table: dict[str, object] = {"node_id": names, "kind": "junction", "manhole_row": np.full(count, -1, np.int64)}
    table.update(x=xy[:, 0], y=xy[:, 1])
    table.update({name: np.full(count, np.nan) for name in _LEVEL_COLUMNS})
    table["access"] = np.zeros(count, dtype=bool)
    return pd.DataFrame(table, index=range(count), columns=list(NODE_COLUMNS))


def join_ends(pipes: gpd.GeoDataFrame, manholes: gpd.GeoDataFrame | None, *, tolerance_m: float) -> JoinedEnds:
    """Every pipe end to a node: by id, else by snapping, else a junction of meeting ends."""
    count = len(pipes)
    from_ids, to_ids = (id_text(pipes.get(name), count) for name in ("from_node", "to_node"))
    manhole_ids = id_text(None if manholes is None else manholes["manhole_id"], 0 if manholes is None else len(manholes))
    codes = id_codes(manhole_ids, from_ids, to_ids)
    has_id = codes.ends >= 0
    ids_mapped = bool(has_id.any())
    manhole_nodes, repeated, node_of_code = _manhole_nodes(manholes, codes, keep_first=ids_mapped)
    end_xy = line_ends(np.asarray(pipes.geometry.values, dtype=object))
    known = has_id & (codes.ends < codes.manhole_count)
    end_node = np.where(known, np.r_[node_of_code, -1][np.where(known, codes.ends, -1)], -1).reshape(-1)
    unknown = has_id.reshape(-1) & (end_node < 0)
    flat_xy = end_xy.reshape(-1, 2)
    seek = np.flatnonzero((end_node < 0) & ~np.isnan(flat_xy).any(axis=1))
    hit, _ = snap_to_points(flat_xy[seek], manhole_nodes[["x", "y"]].to_numpy(float), tolerance_m=tolerance_m)
    end_node[seek] = hit
    junctions = _junctions(end_node, flat_xy, codes, start=len(manhole_nodes), tolerance_m=tolerance_m)
    nodes = pd.concat([manhole_nodes, junctions], ignore_index=True) if len(junctions) else manhole_nodes
    end_pairs = end_node.reshape(-1, 2)
    unplaced = np.asarray((end_pairs < 0).any(axis=1), dtype=bool)
    end_pairs[unplaced] = -1
    end_text = pa.concat_arrays([from_ids, to_ids])
    return JoinedEnds(nodes, end_pairs, end_xy, end_text, has_id, unknown.reshape(-1, 2), ids_mapped, repeated, unplaced)


def _junctions(
    end_node: np.ndarray, flat_xy: np.ndarray, codes: IdCodes, *, start: int, tolerance_m: float
) -> pd.DataFrame:
    """Give every end still without a node a junction node; fills ``end_node`` in place.

    Ends with coordinates that meet within the tolerance share a junction ``J1``, ``J2``, ...
    (numbered by their first end in pipe order); ends without coordinates but with an id that
    names no manhole share a junction named by that id.
    """
    located = ~np.isnan(flat_xy).any(axis=1)
    free = np.flatnonzero((end_node < 0) & located)
    label = cluster_points(flat_xy[free], tolerance_m=tolerance_m)
    cluster_count = int(label.max()) + 1 if label.size else 0
    end_node[free] = start + label
    sums = np.stack([np.bincount(label, flat_xy[free, axis], cluster_count) for axis in (0, 1)], axis=1)
    means = sums / np.maximum(np.bincount(label, minlength=cluster_count), 1)[:, None]
    names = ("J" + pd.Series(np.arange(1, cluster_count + 1)).astype(str)).to_numpy(dtype=object)
    flat_codes = codes.ends.reshape(-1)
    by_id = np.flatnonzero((end_node < 0) & ~located & (flat_codes >= 0))
    id_label, id_codes = pd.factorize(flat_codes[by_id])
    end_node[by_id] = start + cluster_count + first_appearance_labels(id_label)
    id_names = codes.text.take(pa.array(np.asarray(id_codes, dtype=np.int64))).to_numpy(zero_copy_only=False)
    xy = np.vstack([means, np.full((len(id_names), 2), np.nan)])
    return _junction_nodes(np.concatenate([names, np.asarray(id_names, dtype=object)]), xy)


def drawn_backwards(joined: JoinedEnds) -> np.ndarray:
    """Pipes whose drawing runs from the ``to_node`` manhole to the ``from_node`` one.

    Where both ends were joined by id, the first vertex should lie nearer the from-manhole and
    the last nearer the to-manhole; a pipe is drawn backwards when swapping the ends brings both
    vertices closer in total. The ids still set the flow direction.
    """
    by_id = joined.has_id.all(axis=1) & ~joined.unknown.any(axis=1) & (joined.end_node >= 0).all(axis=1)
    node_xy = joined.nodes[["x", "y"]].to_numpy(dtype=float)[np.maximum(joined.end_node, 0)]  # (n, 2, 2)
    as_ids = np.hypot(*(joined.end_xy - node_xy).transpose(2, 0, 1)).sum(axis=1)
    swapped = np.hypot(*(joined.end_xy - node_xy[:, ::-1]).transpose(2, 0, 1)).sum(axis=1)
    with np.errstate(invalid="ignore"):
        return by_id & (swapped < as_ids)
