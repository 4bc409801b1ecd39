"""Findings about the network, built in bulk from its arrays.

Codes: ``duplicate_id``, ``unknown_node``, ``unplaced_pipe``, ``direction_fallback``,
``reversed_by_inverts``, ``self_loop``, ``cycle``, ``separate_components``, ``outfall``,
``dangling_end``, ``orphan_manhole``. A finding about a manhole goes to layer ``manholes`` under
its id; one about a junction (which is no feature of any layer) goes to layer ``pipes`` under
the first pipe that touches it.
"""

from __future__ import annotations

import geopandas as gpd
import numpy as np
import pandas as pd
import shapely

from audit.findings import FindingLog
from audit.network.graph import Network
from audit.network.joining import JoinedEnds
from audit.network.snapping import midpoints

_END_NAMES = np.array(["from", "to"], dtype=object)
_FLOW_END_NAMES = np.array(["upstream", "downstream"], dtype=object)


def _text(values: np.ndarray) -> pd.Series:
    return pd.Series(np.asarray(values, dtype=object)).astype(str)


def _fixed(values: np.ndarray, digits: int = 3) -> pd.Series:
    return pd.Series(np.char.mod(f"%.{digits}f", np.asarray(values, dtype=float)), dtype=object)


def direction_fallback(findings: FindingLog) -> None:
    """Say once that flow direction follows digitising because no ids are mapped."""
    message = "flow direction 'ids' asked, but no pipe has from/to node ids; the first vertex is taken as upstream"
    findings.add("pipes", "*", "direction_fallback", message)


def duplicate_ids(manholes: gpd.GeoDataFrame, repeated: np.ndarray, *, findings: FindingLog) -> None:
    """One finding per manhole row whose id repeats an earlier row's id."""
    if repeated.size == 0:
        return
    ids = _text(manholes["manhole_id"].to_numpy(dtype=object)[repeated])
    first = pd.Series(manholes["manhole_id"].to_numpy(dtype=object)).drop_duplicates(keep="first")
    first_row = pd.Series(first.index, index=first.to_numpy()).reindex(ids.to_numpy()).to_numpy()
    messages = (
        "manhole id '" + ids + "' repeats (row " + _text(repeated) + "); pipes join the first one (row "
        + _text(first_row) + ") and this row is left out of the network"
    )
    geometry = np.asarray(manholes.geometry.values, dtype=object)[repeated]
    findings.add_many("manholes", ids, "duplicate_id", messages, x=shapely.get_x(geometry), y=shapely.get_y(geometry))


def join_findings(joined: JoinedEnds, *, pipe_ids: np.ndarray, findings: FindingLog) -> None:
    """``unknown_node`` per end whose id names no manhole, ``unplaced_pipe`` per unplaced pipe."""
    pipe, end = np.nonzero(joined.unknown)
    node = joined.end_node[pipe, end]
    names, kinds = _node_values(joined.nodes, "node_id", node), _node_values(joined.nodes, "kind", node)
    ends_at_node = np.bincount(joined.end_node[joined.end_node >= 0], minlength=len(joined.nodes))
    alone = (node >= 0) & (ends_at_node[np.maximum(node, 0)] == 1)
    fate = np.where(kinds == "manhole", "joined by snapping to manhole '", np.where(alone, "left as a head of run, node '", "left as junction '"))
    fate = pd.Series(fate, dtype=object) + _text(names) + "'"
    fate[node < 0] = "left unplaced"
    named = np.where(joined.placeholder[pipe, end], "' is a placeholder id", "' names no manhole")
    messages = (
        "pipe " + _text(pipe_ids[pipe]) + ": " + _text(_END_NAMES[end]) + "_node '"
        + _text(joined.end_ids(pipe, end)) + _text(named) + "; end " + fate
    )
    xy = joined.end_xy[pipe, end]
    findings.add_many("pipes", pipe_ids[pipe], "unknown_node", messages, x=xy[:, 0], y=xy[:, 1])
    lost = np.flatnonzero(joined.unplaced)
    messages = "pipe " + _text(pipe_ids[lost]) + ": an end has no usable geometry and no known node id; left out of the network"
    findings.add_many("pipes", pipe_ids[lost], "unplaced_pipe", messages)


def reversed_pipes(
    pipes: gpd.GeoDataFrame, flip: np.ndarray, levels: np.ndarray, *, pipe_ids: np.ndarray, findings: FindingLog
) -> None:
    """``reversed_by_inverts`` per pipe whose last vertex has the higher invert."""
    rows = np.flatnonzero(flip)
    messages = (
        "pipe " + _text(pipe_ids[rows]) + ": invert at the first vertex " + _fixed(levels[rows, 0])
        + " m is below the last vertex " + _fixed(levels[rows, 1]) + " m; flow taken from last to first vertex"
    )
    x, y = midpoints(np.asarray(pipes.geometry.values, dtype=object)[rows])
    findings.add_many("pipes", pipe_ids[rows], "reversed_by_inverts", messages, x=x, y=y)


def drawn_against_flow(joined: JoinedEnds, backwards: np.ndarray, *, pipes: gpd.GeoDataFrame, pipe_ids: np.ndarray, findings: FindingLog) -> None:
    """``drawn_against_flow`` per pipe drawn from its to-manhole to its from-manhole."""
    rows = np.flatnonzero(backwards)
    if rows.size == 0:
        return
    from_id, to_id = joined.end_ids(rows, np.zeros_like(rows)), joined.end_ids(rows, np.ones_like(rows))
    messages = (
        "drawn from " + _text(to_id) + " to " + _text(from_id) + ", against the flow its ids give ("
        + _text(from_id) + " to " + _text(to_id) + "); the ids set the direction"
    )
    x, y = midpoints(np.asarray(pipes.geometry.values, dtype=object)[rows])
    findings.add_many("pipes", pipe_ids[rows], "drawn_against_flow", messages, x=x, y=y)


def graph_findings(network: Network, *, pipes: gpd.GeoDataFrame, pipe_ids: np.ndarray, findings: FindingLog) -> None:
    """Every finding about the shape of the graph, in one pass over its arrays."""
    _loops(network, pipes=pipes, pipe_ids=pipe_ids, findings=findings)
    _components(network, pipe_ids=pipe_ids, findings=findings)
    first_pipe = _first_pipe_at_node(network)
    _outfalls(network, first_pipe=first_pipe, pipe_ids=pipe_ids, findings=findings)
    _loose_ends(network, first_pipe=first_pipe, pipe_ids=pipe_ids, findings=findings)


def _loops(network: Network, *, pipes: gpd.GeoDataFrame, pipe_ids: np.ndarray, findings: FindingLog) -> None:
    names = network.nodes["node_id"].to_numpy(dtype=object)
    xy = network.nodes[["x", "y"]].to_numpy(dtype=float)
    selfish = np.flatnonzero((network.upstream == network.downstream) & (network.upstream >= 0))
    node = network.upstream[selfish]
    messages = "pipe " + _text(pipe_ids[selfish]) + ": both ends join node '" + _text(names[node]) + "'"
    findings.add_many("pipes", pipe_ids[selfish], "self_loop", messages, x=xy[node, 0], y=xy[node, 1])
    looped = np.flatnonzero(network.in_cycle & (network.upstream != network.downstream))
    messages = "pipe " + _text(pipe_ids[looped]) + ": lies on a closed loop of flow (directed cycle); placed after the ordered pipes"
    x, y = midpoints(np.asarray(pipes.geometry.values, dtype=object)[looped])
    findings.add_many("pipes", pipe_ids[looped], "cycle", messages, x=x, y=y)


def _components(network: Network, *, pipe_ids: np.ndarray, findings: FindingLog) -> None:
    placed = np.flatnonzero(network.component >= 0)
    part = network.component[placed]
    count = int(part.max()) + 1 if part.size else 0
    if count < 2:
        return
    sizes = np.bincount(part, minlength=count)
    first = np.full(count, len(pipe_ids), dtype=np.int64)
    np.minimum.at(first, part, placed)
    xy = network.nodes[["x", "y"]].to_numpy(dtype=float)[network.upstream[placed]]
    known = ~np.isnan(xy).any(axis=1)
    weight = np.maximum(np.bincount(part[known], minlength=count), 1)
    centre = [np.bincount(part[known], xy[known, axis], count) / weight for axis in (0, 1)]
    listing = ", ".join(str(size) for size in sizes[:10]) + (", ..." if count > 10 else "")
    messages = (
        "the network falls into " + str(count) + " separate parts; this is part " + _text(np.arange(1, count + 1))
        + " with " + _text(sizes) + " pipes (pipes per part: " + listing + ")"
    )
    findings.add_many("pipes", pipe_ids[first], "separate_components", messages, x=centre[0], y=centre[1])


def _first_pipe_at_node(network: Network) -> np.ndarray:
    """Lowest pipe position touching each node, -1 for a node no pipe touches."""
    count = len(network.nodes)
    pipes = np.arange(len(network.upstream))
    first = np.full(count + 1, len(pipes), dtype=np.int64)
    for ends in (network.upstream, network.downstream):
        np.minimum.at(first, np.where(ends >= 0, ends, count), pipes)
    return np.where(first[:count] < len(pipes), first[:count], -1)


def _is_kind(network: Network, kind: str) -> np.ndarray:
    """True for each node of that kind, compared in the column's own storage."""
    return (network.nodes["kind"] == kind).to_numpy(dtype=bool, na_value=False)


def _node_values(nodes: pd.DataFrame, name: str, node: np.ndarray) -> np.ndarray:
    """A node column at the given nodes only, as Python objects; None where ``node`` is -1."""
    values = np.full(len(node), None, dtype=object)
    known = node >= 0
    values[known] = nodes[name].iloc[node[known]].to_numpy(dtype=object)
    return values


def _add_node_findings(
    findings: FindingLog, network: Network, code: str, node: np.ndarray, messages: pd.Series, *, feature_pipe: np.ndarray,
    pipe_ids: np.ndarray,
) -> None:
    """Findings at nodes: manholes under their own id, junctions under a pipe that touches them."""
    is_manhole = _is_kind(network, "manhole")[node]
    xy = network.nodes[["x", "y"]].to_numpy(dtype=float)[node]
    names = _node_values(network.nodes, "node_id", node)
    for layer, pick, features in (
        ("manholes", is_manhole, names),
        ("pipes", ~is_manhole, pipe_ids[np.maximum(feature_pipe, 0)] if len(pipe_ids) else names),
    ):
        findings.add_many(layer, features[pick], code, messages[pick].to_numpy(dtype=object), x=xy[pick, 0], y=xy[pick, 1])


def _outfalls(network: Network, *, first_pipe: np.ndarray, pipe_ids: np.ndarray, findings: FindingLog) -> None:
    node = network.outfalls
    placed = network.downstream >= 0
    arriving = np.bincount(network.downstream[placed], minlength=len(network.nodes))[node]
    kind = _node_values(network.nodes, "kind", node)
    names = _node_values(network.nodes, "node_id", node)
    messages = (
        "outfall at " + _text(kind) + " '" + _text(names) + "': " + _text(arriving) + " pipe(s) flow in and none flows out"
    )
    _add_node_findings(findings, network, "outfall", node, messages, feature_pipe=first_pipe[node], pipe_ids=pipe_ids)


def _loose_ends(network: Network, *, first_pipe: np.ndarray, pipe_ids: np.ndarray, findings: FindingLog) -> None:
    count = len(network.nodes)
    ends = np.concatenate([network.upstream, network.downstream])
    degree = np.bincount(ends[ends >= 0], minlength=count)
    alone = np.flatnonzero(_is_kind(network, "junction") & (degree == 1))
    side = (network.downstream[first_pipe[alone]] == alone).astype(int)
    pipe = first_pipe[alone]
    messages = (
        "pipe " + _text(pipe_ids[pipe]) + ": " + _text(_FLOW_END_NAMES[side])
        + " end touches no manhole and no other pipe"
    )
    xy = network.nodes[["x", "y"]].to_numpy(dtype=float)[alone]
    findings.add_many("pipes", pipe_ids[pipe], "dangling_end", messages.to_numpy(dtype=object), x=xy[:, 0], y=xy[:, 1])
    orphan = np.flatnonzero(_is_kind(network, "manhole") & (degree == 0))
    names = _node_values(network.nodes, "node_id", orphan)
    messages = "manhole '" + _text(names) + "' has no pipe"
    xy = network.nodes[["x", "y"]].to_numpy(dtype=float)[orphan]
    findings.add_many("manholes", names, "orphan_manhole", messages.to_numpy(dtype=object), x=xy[:, 0], y=xy[:, 1])
