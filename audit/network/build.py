"""The network: pipe ends joined to nodes, flow direction, graph arrays and a topological order.

Pipe ends join manholes by the ``from_node`` / ``to_node`` ids where those are mapped, else by
snapping the first and last vertex of each line to the nearest manhole within a tolerance. Ends
near no manhole are clustered with each other into unnamed junction nodes ``J1``, ``J2``, ...
The result is held as integer arrays (upstream and downstream node per pipe); every graph answer
is computed on them in bulk (see ``audit._graph``).

Finding codes emitted (see ``audit._network_findings``): ``duplicate_id``, ``unknown_node``,
``unplaced_pipe``, ``direction_fallback``, ``reversed_by_inverts``, ``self_loop``, ``cycle``,
``separate_components``, ``outfall``, ``dangling_end``, ``orphan_manhole``, ``drawn_against_flow``.
"""

from __future__ import annotations

from dataclasses import dataclass

import geopandas as gpd
import numpy as np
import pandas as pd
import pyarrow as pa
import shapely

from audit.errors import ConfigError, InputError
from audit.findings import FindingLog
from audit.network import findings as report
from audit.network.graph import order_pipes, outfall_nodes, pipe_components
from audit.network.ids import IdCodes, first_appearance, id_codes, id_text
from audit.network.settings import DIRECTIONS
from audit.network.snapping import (
    cluster_points,
    first_appearance_labels,
    line_ends,
    snap_to_points,
)

NODE_COLUMNS = ("node_id", "kind", "manhole_row", "x", "y", "rim", "invert", "depth", "inflow", "access")
_LEVEL_COLUMNS = ("rim", "invert", "depth", "inflow")


@dataclass(frozen=True, eq=False)
class Network:
    """A sewer network as integer arrays over pipe positions (0 .. n-1, in input order).

    Attributes
    ----------
    nodes : one row per node, columns ``NODE_COLUMNS``; manholes first (in layer order), then
        junctions; ``manhole_row`` is the row in the manhole layer, -1 for a junction
    upstream, downstream : int64 node index per pipe in flow direction; -1 for a pipe that
        could not be placed (no usable geometry and no known ids)
    reversed : bool per pipe, True where flow runs from the last vertex to the first
    order : int64 pipe positions, every pipe after all pipes upstream of it; pipes on cycles
        follow, then pipes that are not placed
    in_cycle : bool per pipe, True for a pipe on a directed cycle (a self loop included)
    component : int64 connected part per pipe (0 = the part with most pipes), -1 if not placed
    outfalls : int64 node indices that pipes flow into and that no pipe leaves
    direction : the direction rule that was applied (``"ids"``, ``"digitised"``, ``"inverts"``)
    """

    nodes: pd.DataFrame
    upstream: np.ndarray
    downstream: np.ndarray
    reversed: np.ndarray
    order: np.ndarray
    in_cycle: np.ndarray
    component: np.ndarray
    outfalls: np.ndarray
    direction: str


@dataclass(frozen=True, eq=False)
class _Joined:
    """Pipe ends joined to nodes, in digitising order (end 0 = first vertex or ``from_node``)."""

    nodes: pd.DataFrame
    end_node: np.ndarray  # int64 (n, 2)
    end_xy: np.ndarray  # float (n, 2, 2)
    end_text: pa.Array  # the from ids of all pipes, then their to ids; null where no id
    has_id: np.ndarray  # bool (n, 2): the end has an id
    unknown: np.ndarray  # bool (n, 2): an id was given and names no manhole
    ids_mapped: bool

    def end_ids(self, pipe: np.ndarray, end: np.ndarray) -> np.ndarray:
        """The ids (str, None where none) of the given ends, as Python objects."""
        where = np.asarray(end, dtype=np.int64) * len(self.end_node) + np.asarray(pipe, dtype=np.int64)
        return self.end_text.take(pa.array(where)).to_numpy(zero_copy_only=False)


def build_network(
    pipes: gpd.GeoDataFrame,
    manholes: gpd.GeoDataFrame | None,
    *,
    snap_tolerance_m: float = 1.0,
    direction: str = "ids",
    findings: FindingLog,
) -> Network:
    """Join pipe ends to nodes, set the flow direction and answer the graph questions.

    Parameters
    ----------
    pipes : canonical pipe layer (LineStrings in a projected CRS [m]; None or empty allowed)
    manholes : canonical manhole layer, or None when there is none
    snap_tolerance_m : largest distance from a pipe end to the manhole it joins, and between
        pipe ends that meet at a junction [m]
    direction : ``"ids"`` (``from_node`` is upstream; falls back to ``"digitised"`` when no
        ids are mapped), ``"digitised"`` (first vertex is upstream) or ``"inverts"`` (the end
        with the higher invert level is upstream)
    findings : log that receives the problems found in the data

    Returns
    -------
    Network

    Raises
    ------
    ConfigError
        for a negative or non-finite tolerance or an unknown direction
    InputError
        when a layer lacks a canonical column that the join needs
    """
    _check_options(snap_tolerance_m=snap_tolerance_m, direction=direction)
    _check_layers(pipes, manholes)
    pipe_ids = pipe_labels(pipes)
    joined = _join(pipes, manholes, tolerance_m=snap_tolerance_m, pipe_ids=pipe_ids, findings=findings)
    applied = direction
    if direction == "ids" and not joined.ids_mapped:
        applied = "digitised"
        report.direction_fallback(findings)
    flip = np.zeros(len(pipes), dtype=bool)
    if applied == "ids":
        report.drawn_against_flow(joined, _drawn_backwards(joined), pipes=pipes, pipe_ids=pipe_ids, findings=findings)
    if applied == "inverts":
        flip = _reversed_by_inverts(pipes, joined, pipe_ids=pipe_ids, findings=findings)
    upstream = np.where(flip, joined.end_node[:, 1], joined.end_node[:, 0])
    downstream = np.where(flip, joined.end_node[:, 0], joined.end_node[:, 1])
    node_count = len(joined.nodes)
    order, in_cycle = order_pipes(upstream, downstream, node_count=node_count)
    network = Network(
        nodes=joined.nodes,
        upstream=upstream,
        downstream=downstream,
        reversed=flip,
        order=order,
        in_cycle=in_cycle,
        component=pipe_components(upstream, downstream, node_count=node_count),
        outfalls=outfall_nodes(upstream, downstream, node_count=node_count),
        direction=applied,
    )
    report.graph_findings(network, pipes=pipes, pipe_ids=pipe_ids, findings=findings)
    return network


def _drawn_backwards(joined: _Joined) -> np.ndarray:
    """Pipes whose drawing runs from the ``to_node`` manhole to the ``from_node`` one.

    Where both ends were joined by id, the first vertex should lie nearer the from-manhole and
    the last nearer the to-manhole; a pipe is drawn backwards when swapping the ends brings both
    vertices closer in total. The ids still set the flow direction.
    """
    by_id = joined.has_id.all(axis=1) & ~joined.unknown.any(axis=1) & (joined.end_node >= 0).all(axis=1)  # noqa: E711
    node_xy = joined.nodes[["x", "y"]].to_numpy(dtype=float)[np.maximum(joined.end_node, 0)]  # (n, 2, 2)
    as_ids = np.hypot(*(joined.end_xy - node_xy).transpose(2, 0, 1)).sum(axis=1)
    swapped = np.hypot(*(joined.end_xy - node_xy[:, ::-1]).transpose(2, 0, 1)).sum(axis=1)
    with np.errstate(invalid="ignore"):
        return by_id & (swapped < as_ids)


def _check_options(*, snap_tolerance_m: float, direction: str) -> None:
    if not np.isfinite(snap_tolerance_m) or snap_tolerance_m < 0:
        raise ConfigError(f"snap tolerance must be a distance of 0 m or more, got {snap_tolerance_m!r}")
    if direction not in DIRECTIONS:
        raise ConfigError(f"flow direction must be one of {', '.join(DIRECTIONS)}; got {direction!r}")


def _check_layers(pipes: gpd.GeoDataFrame, manholes: gpd.GeoDataFrame | None) -> None:
    if "geometry" not in pipes.columns:
        raise InputError("pipes layer: no geometry column")
    if manholes is None:
        return
    missing = [name for name in ("manhole_id", "geometry") if name not in manholes.columns]
    if missing:
        raise InputError(f"manholes layer: missing canonical field(s) {', '.join(missing)}")


def pipe_labels(pipes: pd.DataFrame) -> np.ndarray:
    """The id that names each pipe in findings: ``pipe_id``, or ``#<row>`` where it is missing.

    Examples
    --------
    >>> pipe_labels(pd.DataFrame({"pipe_id": ["P1", None]})).tolist()
    ['P1', '#1']
    """
    if "pipe_id" in pipes.columns and isinstance(pipes["pipe_id"].dtype, pd.StringDtype):
        given = pipes["pipe_id"].to_numpy(dtype=object)
        missing = pd.isna(given)
        if not missing.any():  # the layers stage names every pipe: nothing to fill or convert
            return given
    rows = pd.Series(np.arange(len(pipes)).astype(str), dtype=object)
    fallback = "#" + rows
    if "pipe_id" not in pipes.columns:
        return fallback.to_numpy(dtype=object)
    given = pd.Series(pipes["pipe_id"].to_numpy(dtype=object))
    return given.where(given.notna(), fallback).astype(str).to_numpy(dtype=object)


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


def _join(
    pipes: gpd.GeoDataFrame,
    manholes: gpd.GeoDataFrame | None,
    *,
    tolerance_m: float,
    pipe_ids: np.ndarray,
    findings: FindingLog,
) -> _Joined:
    """Every pipe end to a node: by id, else by snapping, else a junction of meeting ends."""
    count = len(pipes)
    from_ids, to_ids = (id_text(pipes.get(name), count) for name in ("from_node", "to_node"))
    manhole_ids = id_text(None if manholes is None else manholes["manhole_id"], 0 if manholes is None else len(manholes))
    codes = id_codes(manhole_ids, from_ids, to_ids)
    has_id = codes.ends >= 0
    ids_mapped = bool(has_id.any())
    manhole_nodes, repeated, node_of_code = _manhole_nodes(manholes, codes, keep_first=ids_mapped)
    if manholes is not None:
        report.duplicate_ids(manholes, repeated, findings=findings)
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
    end_node = end_node.reshape(-1, 2)
    unplaced = (end_node < 0).any(axis=1)
    end_node[unplaced] = -1
    end_text = pa.concat_arrays([from_ids, to_ids])
    joined = _Joined(nodes, end_node, end_xy, end_text, has_id, unknown.reshape(-1, 2), ids_mapped)
    report.join_findings(joined, pipe_ids=pipe_ids, unplaced=unplaced, findings=findings)
    return joined


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


def node_invert_levels(nodes: pd.DataFrame) -> np.ndarray:
    """Invert level of every node: its invert, else rim minus depth [m]; NaN when unknown.

    .. math:: z_{invert} = z_{rim} - d

    Examples
    --------
    >>> frame = pd.DataFrame({"invert": [10.0, np.nan], "rim": [12.0, 12.0], "depth": [1.0, 1.5]})
    >>> node_invert_levels(frame).tolist()
    [10.0, 10.5]
    """
    invert = nodes["invert"].to_numpy(dtype=float)
    return np.where(np.isnan(invert), nodes["rim"].to_numpy(float) - nodes["depth"].to_numpy(float), invert)


def digitised_end_levels(
    pipes: pd.DataFrame, end_node: np.ndarray, node_level: np.ndarray
) -> tuple[np.ndarray, np.ndarray]:
    """Invert level at each end in digitising order, and whether it came from the pipe's fields.

    The pipe's ``upstream_invert`` / ``downstream_invert`` (as digitised) win; where one is
    missing, the node at that end gives its level.

    Parameters
    ----------
    pipes : canonical pipe layer
    end_node : int64 (n, 2) node index of the first and last vertex, -1 where unknown
    node_level : invert level per node [m], NaN where unknown (see :func:`node_invert_levels`)

    Returns
    -------
    levels : float (n, 2) [m], NaN where unknown
    from_pipe : bool (n, 2)
    """
    count = len(pipes)
    given = np.stack(
        [pipes[name].to_numpy(dtype=float) if name in pipes else np.full(count, np.nan)
         for name in ("upstream_invert", "downstream_invert")],
        axis=1,
    )
    padded = np.r_[np.asarray(node_level, dtype=float), np.nan]
    at_node = padded[np.where(end_node >= 0, end_node, len(padded) - 1)]
    from_pipe = ~np.isnan(given)
    return np.where(from_pipe, given, at_node), from_pipe


def _reversed_by_inverts(
    pipes: gpd.GeoDataFrame, joined: _Joined, *, pipe_ids: np.ndarray, findings: FindingLog
) -> np.ndarray:
    """True where the last vertex lies higher than the first, so flow runs against digitising."""
    levels, _ = digitised_end_levels(pipes, joined.end_node, node_invert_levels(joined.nodes))
    flip = (levels[:, 1] > levels[:, 0]) & (joined.end_node[:, 0] >= 0)
    report.reversed_pipes(pipes, flip, levels, pipe_ids=pipe_ids, findings=findings)
    return flip
