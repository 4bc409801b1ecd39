"""The long section: invert, crown, ground and water level along a path to its outfall.

Engineers draw the hydraulic grade line as a long section: distance along the sewer from a
manhole down to the outfall on the horizontal, levels on the vertical; the pipe as its invert and
crown, the ground as the cover levels of the manholes, and the water level over them. Where the
water line reaches the ground line the manhole floods.

``downstream_path`` follows the pipes from a manhole to the node no pipe leaves (taking at a
split the pipe that carries most flow); ``long_section`` draws the section of such a path.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd
from numpy.typing import NDArray

from audit.report.charts import Plot
from audit.report.svg import Array, element, label, line_path_data, svg

#: Colours of the lines of a long section (chosen for print and colour-blind readers).
LINE_COLOURS = {"ground": "#6b4f2a", "crown": "#555555", "invert": "#222222", "water": "#0072b2"}
FLOOD_COLOUR = "#d55e00"
#: A path stops after this many pipes, so a page never holds an endless drawing (and a loop in
#: the data cannot make the walk go round forever).
MAX_PATH_PIPES = 2000


@dataclass(frozen=True)
class SectionData:
    """One long section, pipe by pipe from upstream: levels [m] at each pipe end, and per node
    (one more than the pipes) its id, chainage [m], rim and water level [m]."""

    node_ids: list[str]
    chainage: Array
    invert_up: Array
    invert_down: Array
    crown_up: Array
    crown_down: Array
    level_up: Array
    level_down: Array
    rim: Array
    node_level: Array


@dataclass(frozen=True)
class Steps:
    """Where a walk downstream goes from each node (by its place in ``names``): the pipe it takes
    (-1 for none) and the node that pipe flows into (-1 where unknown)."""

    names: pd.Index
    pipe: NDArray[np.intp]
    below: NDArray[np.intp]


def next_pipes(pipes: pd.DataFrame) -> Steps:
    """For each node, the pipe a walk downstream takes from it (the one with the largest design
    flow) and the node that pipe flows into.

    ``pipes`` needs ``from_node_id``, ``to_node_id`` and ``q_design``. Both ends are hashed to
    integers once and sorted with the flows, as arrays (no dictionary of a million nodes); build
    it once for many walks.
    """
    count = len(pipes)
    codes, names = pd.factorize(pd.concat([pipes["from_node_id"], pipes["to_node_id"]], ignore_index=True), use_na_sentinel=True)
    up, down = codes[:count], codes[count:]
    flow = np.nan_to_num(pipes["q_design"].to_numpy(dtype=float), nan=-1.0)
    order = np.lexsort((-flow, up))  # by node, largest flow first
    order = order[up[order] >= 0]  # a pipe with no upstream node starts no walk
    first = np.ones(order.size, dtype=bool)  # the first pipe of each node (none for no pipe)
    first[1:] = up[order][1:] != up[order][:-1]
    keep = order[first]
    pipe = np.full(len(names), -1, dtype=np.intp)
    below = np.full(len(names), -1, dtype=np.intp)
    pipe[up[keep]], below[up[keep]] = keep, down[keep]
    return Steps(pd.Index(names).astype(str), pipe, below)


def downstream_walk(start: str, steps: Steps) -> list[tuple[int, str | None]]:
    """The pipes from node ``start`` down to a node no pipe leaves, each with the node it flows into,
    by the ``steps`` of :func:`next_pipes` (at a node with several outgoing pipes, the largest flow).
    Stops at a node already passed (a loop) and after ``MAX_PATH_PIPES`` pipes.
    """
    walk: list[tuple[int, str | None]] = []
    node = int(steps.names.get_indexer([start])[0])
    seen = {node}
    while node >= 0 and steps.pipe[node] >= 0 and len(walk) < MAX_PATH_PIPES:  # one step per pipe of one path
        pipe, node = int(steps.pipe[node]), int(steps.below[node])
        walk.append((pipe, None if node < 0 else str(steps.names[node])))
        if node < 0 or node in seen:
            break
        seen.add(node)
    return walk


def downstream_path(start: str, steps: Steps) -> list[int]:
    """Row positions of the pipes of :func:`downstream_walk` from ``start``."""
    return [pipe for pipe, _ in downstream_walk(start, steps)]


def section_data(pipes: pd.DataFrame, path: list[int], node_rim: pd.Series, node_level: pd.Series) -> SectionData:
    """The levels along ``path`` from the pipes' computed columns and the nodes' rim and water level by id."""
    chosen = pipes.iloc[path]
    length = chosen["length_m"].to_numpy(dtype=float)
    height = chosen["height_m"].to_numpy(dtype=float)
    up, down = chosen["up_invert_m"].to_numpy(dtype=float), chosen["down_invert_m"].to_numpy(dtype=float)
    nodes = [str(chosen["from_node_id"].iloc[0]), *chosen["to_node_id"].astype(str).tolist()] if path else []
    return SectionData(
        node_ids=nodes,
        chainage=np.r_[0.0, np.cumsum(np.nan_to_num(length))],
        invert_up=up,
        invert_down=down,
        crown_up=up + height,
        crown_down=down + height,
        level_up=chosen["water_level_up_m"].to_numpy(dtype=float),
        level_down=chosen["water_level_down_m"].to_numpy(dtype=float),
        rim=node_rim.reindex(nodes).to_numpy(dtype=float),
        node_level=node_level.reindex(nodes).to_numpy(dtype=float),
    )


def long_section(data: SectionData, *, title: str, unit: str = "m") -> str:
    """The long section as an inline SVG: ground, crown, invert and water level against chainage.

    Each pipe is drawn from its upstream to its downstream end, so a drop at a manhole shows as a
    step; a manhole whose water level reaches its rim is marked and labelled. ``unit`` names the
    unit the data are in (chainage and levels alike).
    """
    x_node = data.chainage
    x0, x1 = x_node[:-1], x_node[1:]
    levels = np.concatenate([data.invert_up, data.invert_down, data.crown_up, data.crown_down, data.rim, data.level_up, data.level_down])
    known = levels[np.isfinite(levels)]
    low, high = (float(known.min()), float(known.max())) if known.size else (0.0, 1.0)
    margin = max(0.05 * (high - low), 0.25)
    span = max(float(x_node[-1]), 1.0)
    plot = Plot(left=64, top=24, width=760, height=300, x_range=(0.0, span), y_range=(low - margin, high + margin))
    parts = [plot.axes(x_ticks=_ticks(0.0, span), y_ticks=_ticks(low - margin, high + margin), x_title=f"distance from the first manhole [{unit}]",
                       y_title=f"level [{unit}]")]  # fmt: skip
    pairs = {"crown": (data.crown_up, data.crown_down), "invert": (data.invert_up, data.invert_down),
             "water": (data.level_up, data.level_down)}  # fmt: skip
    for name, (up, down) in pairs.items():
        parts.append(_pipe_lines(plot, x0, x1, up, down, colour=LINE_COLOURS[name], width=2.5 if name == "water" else 1.5, name=name))
    ground = np.isfinite(data.rim)
    gx, gy = plot.px(x_node[ground], data.rim[ground])
    parts.append(element("path", d=line_path_data(gx, gy, np.zeros(gx.size)), fill="none", stroke=LINE_COLOURS["ground"],
                         stroke_width=1.5, stroke_dasharray="6 3", data_line="ground"))  # fmt: skip
    flooding = np.isfinite(data.rim) & np.isfinite(data.node_level) & (data.node_level >= data.rim)
    fx, fy = plot.px(x_node[flooding], data.rim[flooding])
    for x, y, node in zip(fx, fy, np.asarray(data.node_ids, dtype=object)[flooding], strict=True):  # a handful of marks
        parts.append(element("circle", cx=f"{x:.1f}", cy=f"{y:.1f}", r=5, fill=FLOOD_COLOUR, data_flooding=str(node)))
        parts.append(label(x + 7, y - 7, str(node), font_size=11, fill=FLOOD_COLOUR))
    parts.append(_key(x=plot.left + plot.width + 16, y=plot.top + 12))
    ends = f"{data.node_ids[0]} to {data.node_ids[-1]}" if data.node_ids else ""
    parts.append(label(plot.left, plot.top - 8, ends, font_size=12, fill="#333"))
    return svg("".join(parts), width=plot.left + plot.width + 180, height=plot.top + plot.height + 48, title=title)


def _pipe_lines(plot: Plot, x0: Array, x1: Array, up: Array, down: Array, *, colour: str, width: float, name: str) -> str:
    """One path of every pipe's line from (x0, up) to (x1, down); pipes with an unknown end are left out."""
    drawn = np.isfinite(up) & np.isfinite(down)
    count = int(drawn.sum())
    x = np.column_stack([x0[drawn], x1[drawn]]).ravel()
    y = np.column_stack([up[drawn], down[drawn]]).ravel()
    px, py = plot.px(x, y)
    data = line_path_data(px, py, np.repeat(np.arange(count), 2))
    return element("path", d=data, fill="none", stroke=colour, stroke_width=width, data_line=name)


def _key(*, x: float, y: float) -> str:
    rows = []
    words = {"ground": "ground (cover)", "crown": "pipe crown", "invert": "pipe invert", "water": "water level"}
    for place, (name, text) in enumerate(words.items()):
        yy = y + place * 20
        dash = "6 3" if name == "ground" else None
        rows.append(element("line", x1=x, y1=yy - 4, x2=x + 26, y2=yy - 4, stroke=LINE_COLOURS[name], stroke_width=2, stroke_dasharray=dash))
        rows.append(label(x + 32, yy, text))
    rows.append(element("circle", cx=x + 13, cy=y + 4 * 20 - 4, r=5, fill=FLOOD_COLOUR))
    rows.append(label(x + 32, y + 4 * 20, "flooding manhole"))
    return element("g", "".join(rows), font_size=12, fill="#333")


def _ticks(low: float, high: float, *, count: int = 6) -> Array:
    """About ``count`` round tick values covering ``low`` to ``high`` (none when a bound is not finite)."""
    with np.errstate(over="ignore", invalid="ignore"):
        raw = (high - low) / count
    if not np.isfinite(raw):
        return np.array([], dtype=float)
    step = 10 ** np.floor(np.log10(raw)) if raw > 0 else 1.0
    step *= min((m for m in (1, 2, 5, 10) if m * step >= raw), default=10)
    start = np.ceil(low / step) * step
    with np.errstate(over="ignore", invalid="ignore"):  # at the edge of floating point (1.8e308) the span itself overflows
        steps = np.floor((high - start) / step + 1e-9)
    if not np.isfinite(steps) or steps < 0:
        return np.array([], dtype=float)
    return start + step * np.arange(min(int(steps), 4 * count) + 1)
