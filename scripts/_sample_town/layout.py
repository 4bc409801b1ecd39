"""The clean register of the town: manholes in two comb-shaped trees, pipes, levels, years."""

from __future__ import annotations

import numpy as np
import pandas as pd
import shapely

from .loads import catchment_cells, design_flows, settle_people
from .plan import (
    BANK_HEIGHT_M,
    BANK_WIDTH_M,
    BANK_X,
    BEND_OFFSET_M,
    BEND_SHARE,
    CATCHMENTS,
    DEPTH_MIN_M,
    DEPTH_SPREAD_M,
    DEPTH_TRUNK_EXTRA_M,
    GRADE_CROSS,
    GRADE_TRUNK,
    JITTER_M,
    LATERAL_NODES,
    LATERAL_STEP_M,
    MIN_GRADE,
    ORIGIN_E,
    ORIGIN_N,
    PER_CAPITA_L_DAY,
    RIDGE_SOFT_M,
    RIVER_LEVEL_M,
    SPUR_SHARE,
    SPUR_STEP_M,
    TOWN_SPAN_M,
    TRUNK_STEP_M,
    UNDULATION_M,
    UNDULATION_WAVE_M,
    VALLEY_AMP_M,
    VALLEY_SOFT_M,
    VALLEY_WAVE_M,
    Catchment,
)
from .sizing import size_pipes
from .tree import accumulate, levels, sweep


def terrain(x: np.ndarray, y: np.ndarray) -> np.ndarray:
    """Ground level [m] of the invented valley: two brooks, a ridge between, a terrace bank east."""
    x_mid = ORIGIN_E + TOWN_SPAN_M / 2
    half = TOWN_SPAN_M / 2
    z = RIVER_LEVEL_M + GRADE_TRUNK * (half + RIDGE_SOFT_M - np.hypot(x - x_mid, RIDGE_SOFT_M))
    z += GRADE_CROSS * (np.hypot(y - valley(x), VALLEY_SOFT_M) - VALLEY_SOFT_M)
    z += UNDULATION_M[0] * np.sin(2 * np.pi * x / UNDULATION_WAVE_M[0])
    z += UNDULATION_M[1] * np.cos(2 * np.pi * y / UNDULATION_WAVE_M[1])
    east = 0.5 * (1 + np.tanh((x - x_mid) / RIDGE_SOFT_M))
    return z + BANK_HEIGHT_M * east * 0.5 * (1 + np.tanh((BANK_X - x) / BANK_WIDTH_M))


def valley(x: np.ndarray) -> np.ndarray:
    """Northing [m] of the valley floor, where the trunks run."""
    return ORIGIN_N + VALLEY_AMP_M * np.sin(2 * np.pi * (x - ORIGIN_E) / VALLEY_WAVE_M)


def column_x(c: Catchment, column: np.ndarray) -> np.ndarray:
    """Easting [m] of a catchment's trunk column (column 0 is next to the outfall)."""
    return c.outfall_x + c.direction * (column + 1) * TRUNK_STEP_M


def tree_layout(c: Catchment, rng: np.random.Generator) -> pd.DataFrame:
    """Manholes of one comb-shaped catchment: outfall, trunk, laterals both sides, spurs.

    Returns one row per manhole with ``x``, ``y``, ``kind``, ``column``, ``row`` and ``down``
    (row label of the downstream manhole, -1 at the outfall).
    """
    rmax = LATERAL_NODES[1]
    sides = rng.integers(LATERAL_NODES[0], rmax + 1, size=(c.columns, 2))
    sides[c.long_run_column] *= c.long_run_column < 0  # no laterals at the buried junction
    col, row = np.meshgrid(np.arange(c.columns), np.arange(-rmax, rmax + 1), indexing="ij")
    keep = (row == 0) | ((row > 0) & (row <= sides[:, [0]])) | ((row < 0) & (-row <= sides[:, [1]]))
    label = np.full(col.shape, -1)
    label[keep] = np.arange(1, keep.sum() + 1)
    cc, rr = col[keep], row[keep]
    cdn = np.where(rr == 0, cc - 1, cc)
    down = np.where(cdn < 0, 0, label[np.maximum(cdn, 0), rr - np.sign(rr) + rmax])
    x = column_x(c, cc.astype(float))
    y = valley(x) + rr * LATERAL_STEP_M
    spur = (rr != 0) & (rng.random(rr.size) < SPUR_SHARE)
    spur &= np.abs(cc - c.bank_column + 0.5) > 1 if c.bank_column >= 0 else True
    frame = pd.DataFrame({
        "x": np.r_[c.outfall_x, x, x[spur] + c.direction * SPUR_STEP_M],
        "y": np.r_[valley(np.array(c.outfall_x)), y, y[spur]],
        "kind": np.r_[["outfall"], np.where(rr == 0, "trunk", "lateral"), np.full(spur.sum(), "spur")],
        "column": np.r_[-1, cc, cc[spur]],
        "row": np.r_[0, rr, rr[spur]],
        "down": np.r_[-1, down, np.flatnonzero(spur) + 1],
    })
    shift = rng.uniform(-JITTER_M, JITTER_M, size=(len(frame), 2))
    shift[0] = 0.0
    frame[["x", "y"]] += shift
    frame["zone"] = c.zone
    return frame


def build_town(rng: np.random.Generator) -> tuple[pd.DataFrame, pd.DataFrame]:
    """The clean register: manholes and pipes with levels, loads, sizes, materials and years."""
    parts = [tree_layout(c, rng) for c in CATCHMENTS]
    offset = np.cumsum([0] + [len(p) for p in parts[:-1]])
    for part, off in zip(parts, offset, strict=True):
        part["down"] = np.where(part["down"] >= 0, part["down"] + off, -1)
        part["ref"] = part["zone"] + part.index.astype(str).str.zfill(3)
    nodes = pd.concat(parts, ignore_index=True)
    nodes["ground"] = terrain(nodes["x"].to_numpy(), nodes["y"].to_numpy())
    up = np.flatnonzero(nodes["down"].to_numpy() >= 0)
    pipes = pd.DataFrame({"up": up, "dn": nodes["down"].to_numpy()[up]})
    pipes["geometry"] = _pipe_lines(nodes, pipes, rng)
    pipes["length"] = shapely.length(pipes["geometry"].to_numpy())
    level = levels(nodes["down"].to_numpy())
    nodes["cell"] = catchment_cells(nodes, pipes)
    settle_people(nodes, nodes["cell"].to_numpy(), rng)
    nodes["load"] = np.round(nodes["people"] * PER_CAPITA_L_DAY / 86_400, 2)  # mean dry-weather flow [l/s]
    nodes["trade"] = 0.0
    _set_history(nodes, pipes, rng)
    area = accumulate(nodes["area_ha"].to_numpy(), up, pipes["dn"].to_numpy(), level)
    depth = DEPTH_MIN_M + rng.uniform(0, DEPTH_SPREAD_M, len(nodes))
    depth += DEPTH_TRUNK_EXTRA_M * np.sqrt(area / area.max())
    nodes["invert"] = _inverts(nodes["ground"].to_numpy() - depth, pipes, level)
    pipes["slope"] = (nodes["invert"].to_numpy()[up] - nodes["invert"].to_numpy()[pipes["dn"]]) / pipes["length"]
    pipes["flow"] = design_flows(nodes, pipes, level)
    pipes["span"] = size_pipes(pipes, pipes["flow"].to_numpy(), level, len(nodes))
    nodes["level"] = level
    return nodes, pipes


def _pipe_lines(nodes: pd.DataFrame, pipes: pd.DataFrame, rng: np.random.Generator) -> np.ndarray:
    """Straight lines, upstream to downstream, some with one bend vertex part way along."""
    a = nodes[["x", "y"]].to_numpy()[pipes["up"]]
    b = nodes[["x", "y"]].to_numpy()[pipes["dn"]]
    normal = (b - a)[:, ::-1] * [1, -1] / np.hypot(*(b - a).T)[:, None]
    bend = rng.random(len(a)) < BEND_SHARE
    mid = a + (b - a) * rng.uniform(0.35, 0.65, (len(a), 1))
    mid += normal * rng.uniform(*BEND_OFFSET_M, (len(a), 1)) * rng.choice([-1, 1], (len(a), 1))
    coords = np.stack([a, mid, b], axis=1)
    keep = np.ones(coords.shape[:2], dtype=bool)
    keep[:, 1] = bend
    index = np.repeat(np.arange(len(a)), keep.sum(axis=1))
    return shapely.linestrings(coords[keep], indices=index)


def _set_history(nodes: pd.DataFrame, pipes: pd.DataFrame, rng: np.random.Generator) -> None:
    """Install year and section type: old town near the West outfall, estates further out."""
    up = nodes.iloc[pipes["up"]]
    info = pd.DataFrame([vars(c) for c in CATCHMENTS]).set_index("zone").loc[up["zone"]]
    first, eggs = info["first_year"].to_numpy(), info["egg_columns"].to_numpy()
    growth = 0.7 * up["column"].to_numpy() / info["columns"].to_numpy()
    growth += 0.3 * np.abs(up["row"].to_numpy()) / LATERAL_NODES[1]
    year = first + (info["last_year"].to_numpy() - first) * growth + rng.uniform(0, 10, len(up))
    pipes["egg"] = (up["kind"].to_numpy() == "trunk") & (up["column"].to_numpy() < eggs)
    year = np.where(pipes["egg"], first + rng.uniform(0, 15, len(up)), year)
    pipes["laid"] = np.clip(np.round(year), 1890, 2015).astype(int)


def _inverts(target: np.ndarray, pipes: pd.DataFrame, level: np.ndarray) -> np.ndarray:
    """Node inverts [m]: the target depth below ground, lowered so every pipe falls MIN_GRADE."""
    inv = target.copy()
    up, dn, length = pipes["up"].to_numpy(), pipes["dn"].to_numpy(), pipes["length"].to_numpy()
    for p in sweep(level, up):
        np.minimum.at(inv, dn[p], inv[up[p]] - MIN_GRADE * length[p])
    return np.round(inv, 2)
