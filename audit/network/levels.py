"""Levels per pipe: lengths, invert levels in flow direction, slope and cover.

The invert level at each end of a pipe comes, in this order of preference, from the pipe's own
invert field; from the pipe's depth at that end (cover to invert) below the rim of the manhole
there; from the manhole's invert; or from the manhole's rim less its depth. Everything is one
numpy expression over all pipes.

Finding codes emitted: ``length_mismatch``, ``missing_invert``, ``zero_length``.
"""

from __future__ import annotations

import geopandas as gpd
import numpy as np
import pandas as pd
import shapely

from audit.errors import ConfigError, InputError
from audit.findings import FindingLog
from audit.layers import OPEN_SHAPES
from audit.network.graph import Network
from audit.network.ids import pipe_labels
from audit.network.snapping import midpoints

LEVEL_COLUMNS = (
    "length_m", "geometry_length_m", "up_invert", "down_invert", "invert_source",
    "slope", "up_cover", "down_cover",
)


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
    pipes: pd.DataFrame, end_node: np.ndarray, node_level: np.ndarray, node_rim: np.ndarray | None = None
) -> tuple[np.ndarray, np.ndarray]:
    r"""Invert level at each end in digitising order, and whether it came from the pipe's fields.

    The pipe's ``upstream_invert`` / ``downstream_invert`` (as digitised) win; then the pipe's
    ``upstream_depth`` / ``downstream_depth`` below the rim of the node at that end,
    :math:`z = z_{rim} - d_{end}`; then the node's own invert level.

    Parameters
    ----------
    pipes : canonical pipe layer
    end_node : int64 (n, 2) node index of the first and last vertex, -1 where unknown
    node_level : invert level per node [m], NaN where unknown (see :func:`node_invert_levels`)
    node_rim : rim (cover) level per node [m], NaN where unknown; None: end depths are not used

    Returns
    -------
    levels : float (n, 2) [m], NaN where unknown
    from_pipe : bool (n, 2): the level came from the pipe's invert or its depth at that end

    Examples
    --------
    >>> pipes = pd.DataFrame({"upstream_invert": [10.0, np.nan], "downstream_depth": [2.0, 2.5]})
    >>> levels, from_pipe = digitised_end_levels(pipes, np.array([[0, 1], [1, 2]]), np.array([9.0, 8.0, 7.0]),
    ...                                          np.array([12.0, 11.0, 10.0]))
    >>> levels.tolist(), from_pipe.tolist()
    ([[10.0, 9.0], [8.0, 7.5]], [[True, True], [False, True]])
    """
    given = np.stack([_column(pipes, name) for name in ("upstream_invert", "downstream_invert")], axis=1)
    if node_rim is not None:
        depth = np.stack([_column(pipes, name) for name in ("upstream_depth", "downstream_depth")], axis=1)
        given = np.where(np.isnan(given), _at(np.asarray(node_rim, dtype=float), end_node) - depth, given)
    at_node = _at(np.asarray(node_level, dtype=float), end_node)
    from_pipe = ~np.isnan(given)
    return np.where(from_pipe, given, at_node), from_pipe


def derive_levels(
    pipes: gpd.GeoDataFrame,
    network: Network,
    manholes: gpd.GeoDataFrame | None,
    *,
    length_tolerance_ratio: float = 0.05,
    length_tolerance_m: float = 0.5,
    findings: FindingLog,
) -> pd.DataFrame:
    r"""Length, invert levels in flow direction, slope and cover of every pipe.

    .. math::

        S = \frac{z_{up} - z_{down}}{L} \qquad
        c = z_{rim} - (z_{invert} + h)

    with invert levels :math:`z` [m], length :math:`L` [m], internal height :math:`h` [m]
    (the diameter for a circular pipe) and cover :math:`c` [m] from ground to the crown.

    Parameters
    ----------
    pipes : canonical pipe layer the network was built from
    network : result of :func:`audit.network.build_network`
    manholes : canonical manhole layer the network was built from, or None; rim, invert and
        depth are read from it through ``network.nodes.manhole_row``
    length_tolerance_ratio : share of the geometry length the length attribute may differ [-]
    length_tolerance_m : difference that is always tolerated [m]
    findings : log that receives ``length_mismatch``, ``missing_invert``, ``zero_length`` and
        ``invert_below_manhole``

    Returns
    -------
    DataFrame on the pipes' index with ``LEVEL_COLUMNS``: ``length_m`` (the attribute where
    given, else the geometry) and ``geometry_length_m`` [m]; ``up_invert``, ``down_invert``
    [m]; ``invert_source`` (``"pipe"`` when both levels come from the pipe's fields,
    ``"manhole"`` when at least one comes from a manhole, ``""`` when a level is unknown);
    ``slope`` [-] (positive downhill; NaN where unknown or the length is not positive);
    ``up_cover``, ``down_cover`` [m] (NaN where the rim or the height is unknown, and for an
    open channel, which has no crown to cover)

    Raises
    ------
    ConfigError
        for a negative or non-finite tolerance
    InputError
        when the network was built from a different number of pipes
    """
    _check(pipes, network, ratio=length_tolerance_ratio, tolerance_m=length_tolerance_m)
    drawn = _drawn_length(pipes)
    attribute = _column(pipes, "length")
    length = np.where(np.isnan(attribute), drawn, attribute)
    rim, invert = _node_levels(network, manholes)
    end_node = _drawn_end_nodes(network)
    ends, from_pipe = digitised_end_levels(pipes, end_node, invert, rim)
    up, down, source = _flow_inverts(network, ends, from_pipe)
    with np.errstate(divide="ignore", invalid="ignore"):
        slope = np.where(length > 0, (up - down) / length, np.nan)
    height = _height(pipes)
    channel = np.isin(pipes["shape"].to_numpy(dtype=object), OPEN_SHAPES) if "shape" in pipes else np.zeros(len(pipes), dtype=bool)
    levels = pd.DataFrame(
        {
            "length_m": length,
            "geometry_length_m": drawn,
            "up_invert": up,
            "down_invert": down,
            "invert_source": source,
            "slope": slope,
            "up_cover": np.where(channel, np.nan, _at(rim, network.upstream) - (up + height)),
            "down_cover": np.where(channel, np.nan, _at(rim, network.downstream) - (down + height)),
        },
        index=pipes.index,
        copy=False,
    )
    _report(levels, attribute, pipes=pipes, network=network, ratio=length_tolerance_ratio,
            tolerance_m=length_tolerance_m, findings=findings)
    _report_below_manholes(pipes, network, invert, end_node, ends, from_pipe, findings=findings)
    return levels


def _check(pipes: pd.DataFrame, network: Network, *, ratio: float, tolerance_m: float) -> None:
    for name, value in (("length tolerance ratio", ratio), ("length tolerance", tolerance_m)):
        if not np.isfinite(value) or value < 0:
            raise ConfigError(f"{name} must be 0 or more, got {value!r}")
    if len(network.upstream) != len(pipes):
        raise InputError(
            f"pipes layer: {len(pipes)} features, but the network was built from {len(network.upstream)} pipes"
        )


def _drawn_length(pipes: gpd.GeoDataFrame) -> np.ndarray:
    """Drawn length [m]: the total of every part (the layers stage's ``drawn_length``), else the line's length."""
    if "drawn_length" in pipes:
        return pipes["drawn_length"].to_numpy(dtype=float)
    geometry = np.asarray(pipes.geometry.values, dtype=object)
    return np.where(shapely.is_missing(geometry) | shapely.is_empty(geometry), np.nan, shapely.length(geometry))


def _column(frame: pd.DataFrame, name: str) -> np.ndarray:
    return frame[name].to_numpy(dtype=float) if name in frame else np.full(len(frame), np.nan)


def _at(values: np.ndarray, index: np.ndarray) -> np.ndarray:
    """``values[index]``, NaN where the index is -1."""
    padded = np.r_[values, np.nan]
    return padded[np.where(index >= 0, index, len(values))]


def _node_levels(network: Network, manholes: gpd.GeoDataFrame | None) -> tuple[np.ndarray, np.ndarray]:
    """Rim and invert level per node [m], read from the manhole layer where one is given."""
    nodes = network.nodes
    if manholes is not None:
        row = nodes["manhole_row"].to_numpy(dtype=np.int64)
        nodes = pd.DataFrame({name: _at(_column(manholes, name), row) for name in ("rim", "invert", "depth")})
    return nodes["rim"].to_numpy(dtype=float), node_invert_levels(nodes)


def _flow_inverts(network: Network, levels: np.ndarray, from_pipe: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Upstream and downstream invert in flow direction and where they came from, from the levels
    at the drawn ends (:func:`digitised_end_levels`)."""
    turned = network.reversed
    up = np.where(turned, levels[:, 1], levels[:, 0])
    down = np.where(turned, levels[:, 0], levels[:, 1])
    known = ~(np.isnan(up) | np.isnan(down))
    source = np.where(from_pipe.all(axis=1), "pipe", "manhole")
    return up, down, np.where(known, source, "").astype(object)


def _drawn_end_nodes(network: Network) -> np.ndarray:
    """int64 (n, 2): the node at the first and at the last vertex of each pipe as drawn, -1 where unknown."""
    turned = network.reversed
    return np.stack(
        [np.where(turned, network.downstream, network.upstream), np.where(turned, network.upstream, network.downstream)],
        axis=1,
    )


def _height(pipes: pd.DataFrame) -> np.ndarray:
    """Internal height [m]: the diameter for a circular pipe, else the height field.

    Where the preferred field is missing the other one stands in.
    """
    diameter, height = _column(pipes, "diameter"), _column(pipes, "height")
    shape = pipes["shape"].to_numpy(dtype=object) if "shape" in pipes else np.full(len(pipes), "circular", object)
    circular = shape == "circular"
    first = np.where(circular, diameter, height)
    return np.where(np.isnan(first), np.where(circular, height, diameter), first)


def _fixed(values: np.ndarray) -> pd.Series:
    return pd.Series(np.char.mod("%.3f", np.asarray(values, dtype=float)), dtype=object)


def _report(
    levels: pd.DataFrame,
    attribute: np.ndarray,
    *,
    pipes: gpd.GeoDataFrame,
    network: Network,
    ratio: float,
    tolerance_m: float,
    findings: FindingLog,
) -> None:
    """``length_mismatch``, ``zero_length`` and ``missing_invert`` findings."""
    names = pd.Series(pipe_labels(pipes), dtype=object)
    lines = np.asarray(pipes.geometry.values, dtype=object)
    drawn = levels["geometry_length_m"].to_numpy()
    with np.errstate(invalid="ignore"):
        off = np.abs(attribute - drawn) > np.maximum(ratio * drawn, tolerance_m)
    rows = np.flatnonzero(off)
    messages = (
        "pipe " + names[rows].reset_index(drop=True) + ": length attribute " + _fixed(attribute[rows])
        + " m differs from the drawn length " + _fixed(drawn[rows]) + " m"
    )
    findings.add_many("pipes", names[rows], "length_mismatch", messages, **_placed(lines, rows))
    length = levels["length_m"].to_numpy()
    rows = np.flatnonzero(length <= 0)
    messages = "pipe " + names[rows].reset_index(drop=True) + ": length is " + _fixed(length[rows]) + " m"
    findings.add_many("pipes", names[rows], "zero_length", messages, **_placed(lines, rows))
    _report_missing(levels, names=names, network=network, lines=lines, findings=findings)


INVERT_BELOW_TOLERANCE_M = 0.05
"""How far a pipe's own invert may lie below the invert of the manhole at that end before it is a
finding [m]: levels typed to the centimetre, and benching, leave a few centimetres either way
(common practice, no source)."""


def _report_below_manholes(
    pipes: gpd.GeoDataFrame, network: Network, node_invert: np.ndarray, end_node: np.ndarray, level: np.ndarray, from_pipe: np.ndarray, *,
    findings: FindingLog,
) -> None:  # fmt: skip
    """``invert_below_manhole``: a pipe's own invert level (its field, or its depth below the rim;
    ``level`` where ``from_pipe``, at the drawn ends ``end_node``) more than
    ``INVERT_BELOW_TOLERANCE_M`` below the invert of the manhole at that end.

    No pipe can leave or enter a manhole below the manhole's lowest point, so one of the two
    levels is wrong: often the pipe's, where the same pipe also shows a reverse or flat grade.
    """
    manhole = _at(np.asarray(node_invert, dtype=float), end_node)
    with np.errstate(invalid="ignore"):
        below = from_pipe & (manhole - level > INVERT_BELOW_TOLERANCE_M)
    rows, end = np.nonzero(below)
    if not rows.size:
        return
    names = pd.Series(pipe_labels(pipes), dtype=object)
    node_names = network.nodes["node_id"].to_numpy(dtype=object)[end_node[rows, end]]
    words = np.array(["upstream", "downstream"], dtype=object)[end]  # the pipe's own fields, which follow its drawing
    messages = (
        "pipe " + names[rows].reset_index(drop=True) + ": its " + pd.Series(words, dtype=object) + " invert as recorded, "
        + _fixed(level[rows, end]) + " m, lies " + _fixed(manhole[rows, end] - level[rows, end]) + " m below the invert of manhole '"
        + pd.Series(node_names, dtype=object).astype(str) + "', " + _fixed(manhole[rows, end])
        + " m: one of the two levels is wrong"
    )
    findings.add_many("pipes", names[rows], "invert_below_manhole", messages, **_placed(np.asarray(pipes.geometry.values, dtype=object), rows))


def _placed(lines: np.ndarray, rows: np.ndarray) -> dict[str, np.ndarray]:
    """``x`` and ``y`` of the midpoints of the reported pipes only (not of every pipe)."""
    x, y = midpoints(lines[rows])
    return {"x": x, "y": y}


def _report_missing(
    levels: pd.DataFrame, *, names: pd.Series, network: Network, lines: np.ndarray, findings: FindingLog
) -> None:
    no_up = np.isnan(levels["up_invert"].to_numpy())
    no_down = np.isnan(levels["down_invert"].to_numpy())
    rows = np.flatnonzero(no_up | no_down)
    which = np.where(no_up & no_down, "upstream and downstream ends", np.where(no_up, "upstream end", "downstream end"))
    node_names = np.append(network.nodes["node_id"].to_numpy(dtype=object), "none")
    up_node = node_names[np.where(network.upstream >= 0, network.upstream, -1)][rows]
    down_node = node_names[np.where(network.downstream >= 0, network.downstream, -1)][rows]
    messages = (
        "pipe " + names[rows].reset_index(drop=True) + ": no invert level at the " + pd.Series(which[rows], dtype=object)
        + " (pipe fields empty; nodes '" + pd.Series(up_node, dtype=object).astype(str) + "' -> '"
        + pd.Series(down_node, dtype=object).astype(str) + "' give none)"
    )
    findings.add_many("pipes", names[rows], "missing_invert", messages, **_placed(lines, rows))
