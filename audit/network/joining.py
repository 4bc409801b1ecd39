"""Pipe ends joined to nodes: by id, else by snapping to a manhole, else a junction of meeting ends.

Pipe ends join manholes by the ``from_node`` / ``to_node`` ids where those are mapped, else by
snapping the first and last vertex of each line to the nearest manhole within a tolerance. Ends
near no manhole are clustered with each other into unnamed junction nodes ``J1``, ``J2``, ...;
an end that meets no other end is a junction of its own, the head of a run.

Real registers give many short pipes an id at one end that names no manhole (a placeholder for
an end of line, a junction or a pump; ``[network] placeholder_ids`` lists ids to read so even
where a manhole bears them), and such stubs are often drawn from their downstream manhole. So
where exactly one end is joined by id, the vertex nearest that manhole is taken as that end and
the other vertex as the unknown end, whatever the drawing order; the unknown end then snaps to
a different node or becomes a node of its own. No pipe ever joins the same node at both ends by
snapping: an end whose nearest node is the one its other end already holds takes the next
nearest within the tolerance, else a node of its own. (Both ends naming one manhole by id stays a
self-loop: that is the register's own statement, reported as such.)
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
import pyarrow.compute as pc
import shapely

from audit.network.ids import IdCodes, first_appearance, id_codes, id_text
from audit.network.snapping import (
    cluster_points,
    first_appearance_labels,
    line_ends,
    nearest_points,
)

NODE_COLUMNS = ("node_id", "kind", "role", "manhole_row", "x", "y", "rim", "invert", "depth", "inflow", "access")
"""``kind``: ``manhole`` (a feature of the manhole layer) or ``junction`` (where ends meet);
``role``: the manhole's canonical kind (manhole, chamber, pump_station, outfall) or junction."""
_LEVEL_COLUMNS = ("rim", "invert", "depth", "inflow")


@dataclass(frozen=True, eq=False)
class JoinedEnds:
    """Pipe ends joined to nodes, in digitising order (end 0 = first vertex or ``from_node``)."""

    nodes: pd.DataFrame
    end_node: np.ndarray  # int64 (n, 2)
    end_xy: np.ndarray  # float (n, 2, 2)
    end_text: pa.Array  # the from ids of all pipes, then their to ids; null where no id
    has_id: np.ndarray  # bool (n, 2): the end has an id
    unknown: np.ndarray  # bool (n, 2): an id was given and names no manhole (a placeholder included)
    placeholder: np.ndarray  # bool (n, 2): the id is one of ``[network] placeholder_ids``
    swapped: np.ndarray  # bool (n,): one end joined by id lies at the last vertex, not the first
    left_out: np.ndarray  # bool (n,): kept out of the network (an abandoned pipe)
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
        "role": manholes["kind"].to_numpy(dtype=object)[keep] if "kind" in manholes else "manhole",
        "manhole_row": rows.astype(np.int64),
        "x": shapely.get_x(geometry),
        "y": shapely.get_y(geometry),
    }
    for name in _LEVEL_COLUMNS:
        table[name] = manholes[name].to_numpy(dtype=float)[keep] if name in manholes else np.nan
    access = manholes["access"].to_numpy(dtype=object)[keep] if "access" in manholes else np.full(keep.sum(), True)
    table["access"] = np.where(pd.isna(access), True, access).astype(bool)
    nodes = pd.DataFrame(table, index=range(len(rows)), copy=False)
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
    table: dict[str, object] = {"node_id": names, "kind": "junction", "role": "junction", "manhole_row": np.full(count, -1, np.int64)}
    table.update(x=xy[:, 0], y=xy[:, 1])
    table.update({name: np.full(count, np.nan) for name in _LEVEL_COLUMNS})
    table["access"] = np.zeros(count, dtype=bool)
    return pd.DataFrame(table, index=range(count), columns=list(NODE_COLUMNS))


def join_ends(
    pipes: gpd.GeoDataFrame,
    manholes: gpd.GeoDataFrame | None,
    *,
    tolerance_m: float,
    placeholders: tuple[str, ...] = (),
    left_out: np.ndarray | None = None,
) -> JoinedEnds:
    """Every pipe end to a node: by id, else by snapping, else a junction of meeting ends.

    Parameters
    ----------
    pipes, manholes : canonical layers (manholes may be None)
    tolerance_m : largest distance from an end to the manhole it snaps to, and between ends that
        meet at a junction [m]
    placeholders : node ids that mean "no node" (``[network] placeholder_ids``)
    left_out : bool per pipe kept out of the network (abandoned pipes); None: none
    """
    count = len(pipes)
    from_ids, to_ids = (id_text(pipes.get(name), count) for name in ("from_node", "to_node"))
    manhole_ids = id_text(None if manholes is None else manholes["manhole_id"], 0 if manholes is None else len(manholes))
    codes = id_codes(manhole_ids, from_ids, to_ids)
    has_id = codes.ends >= 0
    placeholder = has_id & np.isin(codes.ends, _codes_of(codes, placeholders))
    ids_mapped = bool(has_id.any())
    manhole_nodes, repeated, node_of_code = _manhole_nodes(manholes, codes, keep_first=ids_mapped)
    out = np.zeros(count, dtype=bool) if left_out is None else np.asarray(left_out, dtype=bool)
    known = has_id & ~placeholder & (codes.ends < codes.manhole_count) & ~out[:, None]
    end_node = np.where(known, np.r_[node_of_code, -1][np.where(known, codes.ends, -1)], -1)
    node_xy = manhole_nodes[["x", "y"]].to_numpy(float)
    end_xy, swapped = _oriented_ends(line_ends(np.asarray(pipes.geometry.values, dtype=object)), end_node, node_xy)
    end_xy[out] = np.nan  # an abandoned pipe neither snaps nor meets other ends
    _snap_free_ends(end_node, end_xy, node_xy, tolerance_m=tolerance_m)
    junctions = _junctions(end_node, end_xy, codes, placeholder, start=len(manhole_nodes), tolerance_m=tolerance_m)
    nodes = pd.concat([manhole_nodes, junctions], ignore_index=True) if len(junctions) else manhole_nodes
    unplaced = np.asarray((end_node < 0).any(axis=1), dtype=bool) & ~out
    end_node[unplaced | out] = -1
    end_text = pa.concat_arrays([from_ids, to_ids])
    unknown = has_id & ~known & ~out[:, None]
    return JoinedEnds(nodes=nodes, end_node=end_node, end_xy=end_xy, end_text=end_text, has_id=has_id, unknown=unknown,
                      placeholder=placeholder, swapped=swapped, left_out=out, ids_mapped=ids_mapped, repeated=repeated,
                      unplaced=unplaced)  # fmt: skip


def _codes_of(codes: IdCodes, ids: tuple[str, ...]) -> np.ndarray:
    """The id codes of the given id texts (those that occur at all)."""
    if not ids:
        return np.zeros(0, dtype=np.int64)
    found = pc.index_in(pa.array(list(ids), pa.large_string()), value_set=codes.text)
    return found.drop_null().to_numpy().astype(np.int64)


def _oriented_ends(drawn_xy: np.ndarray, end_node: np.ndarray, node_xy: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """End coordinates in the ids' order (end 0 = from): swapped where one end is joined by id
    and the other vertex lies nearer that manhole than the vertex the drawing order gives it.

    Returns the (n, 2, 2) coordinates to use for each end and the mask of swapped pipes.
    """
    one = (end_node >= 0).sum(axis=1) == 1
    end = np.argmax(end_node >= 0, axis=1)  # the end joined by id, where there is one
    manhole = node_xy[np.maximum(end_node[np.arange(len(end)), end], 0)] if len(node_xy) else np.full((len(end), 2), np.nan)
    rows = np.arange(len(end))
    with np.errstate(invalid="ignore"):
        own = np.hypot(*(drawn_xy[rows, end] - manhole).T)
        other = np.hypot(*(drawn_xy[rows, 1 - end] - manhole).T)
        swapped = one & (other < own)
    oriented = drawn_xy.copy()
    oriented[swapped] = drawn_xy[swapped][:, ::-1]
    return oriented, swapped


def _snap_free_ends(end_node: np.ndarray, end_xy: np.ndarray, node_xy: np.ndarray, *, tolerance_m: float) -> None:
    """Snap every end without a node to the nearest manhole within the tolerance; fills ``end_node``.

    An end never takes the node its pipe's other end holds: it takes the next nearest manhole
    within the tolerance instead. Where both ends of a pipe snapped to one manhole, the end that
    lies farther from it moves on to its next nearest.
    """
    flat_node, flat_xy = end_node.reshape(-1), end_xy.reshape(-1, 2)
    seek = np.flatnonzero((flat_node < 0) & ~np.isnan(flat_xy).any(axis=1))
    hit, distance = nearest_points(flat_xy[seek], node_xy, tolerance_m=tolerance_m, count=2)
    other = end_node.reshape(-1)[seek ^ 1]  # the same pipe's other end (ends are stored in pairs)
    take_second = (hit[:, 0] == other) & (other >= 0)
    flat_node[seek] = np.where(take_second, hit[:, 1], hit[:, 0])
    chosen = np.where(take_second, distance[:, 1], distance[:, 0])
    end_distance = np.zeros(flat_node.size)
    end_distance[seek] = chosen
    second = np.full(flat_node.size, -1, dtype=np.int64)
    second[seek] = np.where(take_second, -1, hit[:, 1])
    pairs = end_node  # a view of flat_node
    same = (pairs[:, 0] == pairs[:, 1]) & (pairs[:, 0] >= 0)
    snapped = np.zeros(flat_node.size, dtype=bool)
    snapped[seek] = True
    snapped_pairs, distance_pairs, second_pairs = snapped.reshape(-1, 2), end_distance.reshape(-1, 2), second.reshape(-1, 2)
    clash = np.flatnonzero(same & snapped_pairs.any(axis=1))
    # the end that moves: the only snapped one, else the farther of the two
    moves = np.where(snapped_pairs[clash].all(axis=1), np.argmax(distance_pairs[clash], axis=1), np.argmax(snapped_pairs[clash], axis=1))
    pairs[clash, moves] = second_pairs[clash, moves]


def _junctions(
    end_pairs: np.ndarray, end_xy: np.ndarray, codes: IdCodes, placeholder: np.ndarray, *, start: int, tolerance_m: float
) -> pd.DataFrame:
    """Give every end still without a node a junction node; fills ``end_pairs`` (n, 2) in place.

    Ends with coordinates that meet within the tolerance share a junction ``J1``, ``J2``, ...
    (numbered by their first end in pipe order), except the two ends of one pipe, which never
    share one; ends without coordinates but with an id that names no manhole (not a
    placeholder) share a junction named by that id.
    """
    end_node, flat_xy = end_pairs.reshape(-1), end_xy.reshape(-1, 2)
    located = np.isfinite(flat_xy).all(axis=1)  # an end at infinity is no place to meet (and no point a k-d tree holds)
    free = np.flatnonzero((end_node < 0) & located)
    label = _apart(cluster_points(flat_xy[free], tolerance_m=tolerance_m), free)
    cluster_count = int(label.max()) + 1 if label.size else 0
    end_node[free] = start + label
    sums = np.stack([np.bincount(label, flat_xy[free, axis], cluster_count) for axis in (0, 1)], axis=1)
    means = sums / np.maximum(np.bincount(label, minlength=cluster_count), 1)[:, None]
    names = ("J" + pd.Series(np.arange(1, cluster_count + 1)).astype(str)).to_numpy(dtype=object)
    flat_codes = codes.ends.reshape(-1)
    by_id = np.flatnonzero((end_node < 0) & ~located & (flat_codes >= 0) & ~placeholder.reshape(-1))
    id_label, id_codes = pd.factorize(flat_codes[by_id])
    end_node[by_id] = start + cluster_count + first_appearance_labels(id_label)
    id_names = codes.text.take(pa.array(np.asarray(id_codes, dtype=np.int64))).to_numpy(zero_copy_only=False)
    xy = np.vstack([means, np.full((len(id_names), 2), np.nan)])
    return _junction_nodes(np.concatenate([names, np.asarray(id_names, dtype=object)]), xy)


def drawn_backwards(joined: JoinedEnds) -> np.ndarray:
    """Pipes whose drawing runs from the ``to_node`` manhole to the ``from_node`` one.

    Where both ends were joined by id, the first vertex should lie nearer the from-manhole and
    the last nearer the to-manhole; a pipe is drawn backwards when swapping the ends brings both
    vertices closer in total. Where one end was joined by id, it is drawn backwards when its
    manhole lies at the other vertex (``swapped``). The ids still set the flow direction.
    """
    by_id = joined.has_id.all(axis=1) & ~joined.unknown.any(axis=1) & (joined.end_node >= 0).all(axis=1)
    node_xy = joined.nodes[["x", "y"]].to_numpy(dtype=float)[np.maximum(joined.end_node, 0)]  # (n, 2, 2)
    as_ids = np.hypot(*(joined.end_xy - node_xy).transpose(2, 0, 1)).sum(axis=1)
    swapped = np.hypot(*(joined.end_xy - node_xy[:, ::-1]).transpose(2, 0, 1)).sum(axis=1)
    with np.errstate(invalid="ignore"):
        return (by_id & (swapped < as_ids)) | joined.swapped


def _apart(label: np.ndarray, ends: np.ndarray) -> np.ndarray:
    """Cluster labels with the second end of a pipe whose two ends fell in one cluster given a new label.

    ``ends`` are flat end positions (pipe * 2 + end); a pipe shorter than the tolerance with both
    ends free would otherwise close on itself.
    """
    if label.size == 0:
        return label
    position = np.full(int(ends.max()) + 2, -1, dtype=np.int64)
    position[ends] = np.arange(ends.size)
    partner = position[ends ^ 1]
    clash = (partner >= 0) & (ends % 2 == 1) & (label == np.where(partner >= 0, label[np.maximum(partner, 0)], -1))
    relabelled = label.copy()
    relabelled[clash] = label.max() + 1 + np.arange(int(clash.sum()))
    return first_appearance_labels(relabelled)
