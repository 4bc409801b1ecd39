"""The network: pipe ends joined to nodes, the flow direction, graph arrays and a topological order.

``build_network`` joins every pipe end to a node (``audit.network.joining``), sets which end is
upstream (by the from/to ids, the digitising order or the invert levels), and answers the graph
questions on the resulting integer arrays (``audit.network.graph``). Every problem found on the
way is a finding (``audit.network.findings``).

Finding codes emitted: ``duplicate_id``, ``unknown_node``, ``unplaced_pipe``,
``direction_fallback``, ``reversed_by_inverts``, ``self_loop``, ``cycle``,
``separate_components``, ``outfall``, ``dangling_end``, ``orphan_manhole``,
``drawn_against_flow``.
"""

from __future__ import annotations

import geopandas as gpd
import numpy as np

from audit.errors import ConfigError, InputError
from audit.findings import FindingLog
from audit.network import findings as report
from audit.network.graph import Network, order_pipes, outfall_nodes, pipe_components
from audit.network.ids import pipe_labels
from audit.network.joining import JoinedEnds, drawn_backwards, join_ends
from audit.network.levels import digitised_end_levels, node_invert_levels
from audit.network.settings import DIRECTIONS


def build_network(
    pipes: gpd.GeoDataFrame,
    manholes: gpd.GeoDataFrame | None,
    *,
    snap_tolerance_m: float = 1.0,
    direction: str = "ids",
    placeholder_ids: tuple[str, ...] = (),
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
    placeholder_ids : node ids that mean "no node" even where a manhole bears them
    findings : log that receives the problems found in the data

    Abandoned pipes (``kind == "abandoned"``) are kept out of the network: both their nodes are
    -1 and ``Network.left_out`` marks them.

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
    left_out = (pipes["kind"] == "abandoned").to_numpy(dtype=bool) if "kind" in pipes else None
    joined = join_ends(pipes, manholes, tolerance_m=snap_tolerance_m, placeholders=placeholder_ids, left_out=left_out)
    if manholes is not None:
        report.duplicate_ids(manholes, joined.repeated, findings=findings)
    report.join_findings(joined, pipe_ids=pipe_ids, findings=findings)
    applied = direction
    if direction == "ids" and not joined.ids_mapped:
        applied = "digitised"
        report.direction_fallback(findings)
    flip = np.zeros(len(pipes), dtype=bool)
    if applied == "ids":
        report.drawn_against_flow(joined, drawn_backwards(joined), pipes=pipes, pipe_ids=pipe_ids, findings=findings)
    if applied == "inverts":
        flip = _reversed_by_inverts(pipes, joined, pipe_ids=pipe_ids, findings=findings)
    upstream = np.where(flip, joined.end_node[:, 1], joined.end_node[:, 0])
    downstream = np.where(flip, joined.end_node[:, 0], joined.end_node[:, 1])
    node_count = len(joined.nodes)
    order, in_cycle, node_group = order_pipes(upstream, downstream, node_count=node_count)
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
        node_group=node_group,
        left_out=joined.left_out,
    )
    report.graph_findings(network, pipes=pipes, pipe_ids=pipe_ids, findings=findings)
    return network


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


def _reversed_by_inverts(
    pipes: gpd.GeoDataFrame, joined: JoinedEnds, *, pipe_ids: np.ndarray, findings: FindingLog
) -> np.ndarray:
    """True where the last vertex lies higher than the first, so flow runs against digitising."""
    levels, _ = digitised_end_levels(pipes, joined.end_node, node_invert_levels(joined.nodes), joined.nodes["rim"].to_numpy(dtype=float))
    flip = (levels[:, 1] > levels[:, 0]) & (joined.end_node[:, 0] >= 0)
    report.reversed_pipes(pipes, flip, levels, pipe_ids=pipe_ids, findings=findings)
    return flip
