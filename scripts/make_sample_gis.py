"""Generate the invented demo town of Brackenhollow: ``town.gpkg`` and ``ERRORS.md``.

``town.gpkg`` holds three layers: ``pipes``, ``manholes`` (with the trade load) and
``catchments`` (a square of houses around each manhole, with its population and impervious
share), so that ``town.toml`` builds the design flows from population and catchments.

Brackenhollow does not exist. Its coordinates (EPSG:32630, UTM zone 30N) are invented and fall
in open water, so no real place or utility is implied. The register holds two gravity
catchments, West (the old town, with a brick egg-shaped trunk) and East (post-war estates), each
a dendritic tree draining to its own outfall, plus a handful of deliberate register errors that
``ERRORS.md`` lists by feature id for the audit to find. ``town.toml`` beside them is kept by
hand; this script never touches it.

Usage::

    python scripts/make_sample_gis.py [OUTDIR]      # default: sample_gis/ beside scripts/

A fixed seed and a pinned GeoPackage timestamp give the same bytes on every run.
"""

from __future__ import annotations

import os
import sys
from collections.abc import Iterator
from dataclasses import dataclass
from pathlib import Path

import geopandas as gpd
import numpy as np
import pandas as pd
import pyogrio
import shapely

SEED = 18_900_417
CRS = "EPSG:32630"
ORIGIN_E, ORIGIN_N = 487_350.0, 4_983_120.0  # invented; open water, no real place
TOWN_SPAN_M = 2_600.0  # west outfall to east outfall
TIMESTAMP = "2020-01-01T00:00:00Z"  # pinned so that the GeoPackage bytes repeat

TRUNK_STEP_M, LATERAL_STEP_M, SPUR_STEP_M = 85.0, 50.0, 40.0
JITTER_M, BEND_SHARE, BEND_OFFSET_M = 2.5, 0.3, (1.5, 5.0)
LATERAL_NODES = (3, 8)  # manholes per lateral side, inclusive range
SPUR_SHARE = 0.12  # share of lateral manholes with a short cul-de-sac spur

RIVER_LEVEL_M, GRADE_TRUNK, GRADE_CROSS = 12.0, 0.0045, 0.021
RIDGE_SOFT_M, VALLEY_SOFT_M = 60.0, 20.0
VALLEY_AMP_M, VALLEY_WAVE_M = 35.0, 1_400.0
UNDULATION_M, UNDULATION_WAVE_M = (0.25, 0.2), (900.0, 520.0)
BANK_HEIGHT_M, BANK_WIDTH_M = 6.0, 10.0  # a river terrace crossed by the East trunk

MIN_GRADE = 0.0025  # inverts fall at least this much along every pipe
DEPTH_MIN_M, DEPTH_SPREAD_M, DEPTH_TRUNK_EXTRA_M = 1.6, 0.3, 1.2
CIRCULAR_MM = np.array([150, 225, 300, 375, 450, 525, 600, 675, 750, 825, 900])
EGG_SPAN_MM = np.array([500, 600, 700, 800])  # rise = 1.5 x span
EGG_RISE_RATIO = 1.5
EGG_AREA_COEF, EGG_RADIUS_COEF = 1.1486, 0.2897  # full egg: A = c B^2, R = c B  # from memory
MANNING_N, TARGET_LOAD_RATIO = 0.013, 0.6
OLD_LATERAL_YEAR, OLD_MIN_MM, MODERN_MIN_MM = 1935, 150, 225

PER_CAPITA_L_DAY, PEAK_FACTOR = 220.0, 3.0
POPULATION = {"W": (150, 550), "E": (60, 250)}  # persons served per manhole
BREWERY_LOAD_LS, OLD_LATERAL_MM = 100.0, 225  # trade load on an old lateral: overloaded
SUBCATCHMENT_SIDE_M, IMPERVIOUS_SHARE = 40.0, (0.3, 0.7)  # a square of houses and gardens per manhole
SILT_GRADE, SILT_MM = 0.00025, 900  # East outfall culvert: large and too flat
SHALLOW_DEPTH_M, LENGTH_TYPO_RATIO, REVERSE_RISE_M = 1.0, 1.4, 0.12
CONCRETE_FROM_MM, PVC_FROM_YEAR = 375, 1975  # material by size and age
SURVEY_COLUMN, SURVEY_MARGIN = 5, 1.05  # flow survey: given flows on a few trunk pipes
CHAMBER_MM = np.array([[300, 525, 750, 10_000], [1050, 1200, 1500, 1800]])  # widest pipe -> chamber


@dataclass(frozen=True)
class Catchment:
    """One catchment: its outfall, trunk direction and development history."""

    zone: str
    outfall_x: float
    direction: float  # +1: trunk runs east from the outfall, -1: west
    columns: int
    first_year: int
    last_year: int
    egg_columns: int = 0
    long_run_column: int = -1
    bank_column: int = -1


CATCHMENTS = (
    Catchment("W", ORIGIN_E, 1.0, 15, 1890, 1965, egg_columns=6, long_run_column=8),
    Catchment("E", ORIGIN_E + TOWN_SPAN_M, -1.0, 12, 1955, 2015, bank_column=2),
)
BANK_X = ORIGIN_E + TOWN_SPAN_M - (CATCHMENTS[1].bank_column + 0.5) * TRUNK_STEP_M  # between two trunk manholes


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


def levels(down: np.ndarray) -> np.ndarray:
    """Number of pipes between each node and its outfall (pointer jumping; one pass per level)."""
    level = np.zeros(down.size, dtype=int)
    cur = down.copy()
    while (cur >= 0).any():
        level += cur >= 0
        cur = np.where(cur >= 0, down[cur], -1)
    return level


def sweep(level: np.ndarray, up: np.ndarray) -> Iterator[np.ndarray]:
    """Pipe indices level by level from the heads of runs down (few levels, not one per pipe)."""
    return (np.flatnonzero(level[up] == lvl) for lvl in range(level.max(), 0, -1))


def accumulate(load: np.ndarray, up: np.ndarray, dn: np.ndarray, level: np.ndarray) -> np.ndarray:
    """Load [l/s] arriving at each node from itself and everything upstream of it."""
    acc = load.astype(float).copy()
    for p in sweep(level, up):
        np.add.at(acc, dn[p], acc[up[p]])
    return acc


def full_bore_capacity(span_m: np.ndarray, slope: np.ndarray, egg: np.ndarray) -> np.ndarray:
    r"""Pipe-full discharge [m^3/s] by Manning, circular or standard egg (rise 1.5 x span).

    .. math:: Q_f = \frac{1}{n} A R^{2/3} S^{1/2}

    Source: Chow, Open-Channel Hydraulics (1959); egg coefficients from memory.
    """
    area = np.where(egg, EGG_AREA_COEF * span_m**2, np.pi * span_m**2 / 4)
    radius = np.where(egg, EGG_RADIUS_COEF * span_m, span_m / 4)
    return area * radius ** (2 / 3) * np.sqrt(np.maximum(slope, 0)) / MANNING_N


def size_pipes(pipes: pd.DataFrame, flow_ls: np.ndarray, level: np.ndarray, n_nodes: int) -> np.ndarray:
    """Commercial span [mm] per pipe: capacity at the target load ratio, never shrinking downstream."""
    egg = pipes["egg"].to_numpy()
    sizes = np.r_[CIRCULAR_MM, EGG_SPAN_MM]
    ok = full_bore_capacity(sizes[None, :] / 1000, pipes["slope"].to_numpy()[:, None], egg[:, None])
    ok = ok * 1000 * TARGET_LOAD_RATIO >= flow_ls[:, None]
    ok &= (sizes >= np.where(pipes["laid"] < OLD_LATERAL_YEAR, OLD_MIN_MM, MODERN_MIN_MM)[:, None])
    need = np.where(ok.any(axis=1), np.where(ok, sizes, np.inf).min(axis=1), sizes.max())
    width, node_w = need.copy(), np.zeros(n_nodes)
    up, dn = pipes["up"].to_numpy(), pipes["dn"].to_numpy()
    for p in sweep(level, up):
        width[p] = np.maximum(width[p], node_w[up[p]])
        np.maximum.at(node_w, dn[p], width[p])
    return _round_up(width, np.where(egg, 1, 0))


def _round_up(width: np.ndarray, table: np.ndarray) -> np.ndarray:
    """Smallest size of the pipe's own list (0 circular, 1 egg) that is at least ``width``."""
    out = np.empty_like(width)
    for code, sizes in enumerate((CIRCULAR_MM, EGG_SPAN_MM)):
        sel = table == code
        out[sel] = sizes[np.minimum(np.searchsorted(sizes, width[sel]), sizes.size - 1)]
    return out


def build_town(rng: np.random.Generator) -> tuple[pd.DataFrame, pd.DataFrame]:
    """The clean register: manholes and pipes with levels, loads, sizes, materials and years."""
    parts = [tree_layout(c, rng) for c in CATCHMENTS]
    offset = np.cumsum([0] + [len(p) for p in parts[:-1]])
    for part, off in zip(parts, offset):
        part["down"] = np.where(part["down"] >= 0, part["down"] + off, -1)
        part["ref"] = part["zone"] + part.index.astype(str).str.zfill(3)
    nodes = pd.concat(parts, ignore_index=True)
    nodes["ground"] = terrain(nodes["x"].to_numpy(), nodes["y"].to_numpy())
    up = np.flatnonzero(nodes["down"].to_numpy() >= 0)
    pipes = pd.DataFrame({"up": up, "dn": nodes["down"].to_numpy()[up]})
    pipes["geometry"] = _pipe_lines(nodes, pipes, rng)
    pipes["length"] = shapely.length(pipes["geometry"].to_numpy())
    level = levels(nodes["down"].to_numpy())
    low, high = (nodes["zone"].map({z: span[i] for z, span in POPULATION.items()}).to_numpy() for i in (0, 1))
    people = rng.integers(low, high + 1)
    nodes["people"] = np.where(nodes["kind"] == "outfall", 0, people)
    nodes["load"] = np.where(nodes["kind"] == "outfall", 0.0,
                             np.round(people * PER_CAPITA_L_DAY / 86_400 * PEAK_FACTOR, 2))
    _set_history(nodes, pipes, rng)
    acc = accumulate(nodes["load"].to_numpy(), up, pipes["dn"].to_numpy(), level)
    depth = DEPTH_MIN_M + rng.uniform(0, DEPTH_SPREAD_M, len(nodes))
    depth += DEPTH_TRUNK_EXTRA_M * np.sqrt(acc / acc.max())
    nodes["invert"] = _inverts(nodes["ground"].to_numpy() - depth, pipes, level)
    pipes["slope"] = (nodes["invert"].to_numpy()[up] - nodes["invert"].to_numpy()[pipes["dn"]]) / pipes["length"]
    pipes["span"] = size_pipes(pipes, acc[up], level, len(nodes))
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


class ErrorBook:
    """Picks distinct features for the deliberate errors and remembers what was done to each."""

    def __init__(self, rng: np.random.Generator, n_pipes: int, n_nodes: int) -> None:
        self.rng, self.rows = rng, []
        self.taken = {"pipes": np.zeros(n_pipes, bool), "manholes": np.zeros(n_nodes, bool)}

    def pick(self, layer: str, candidates: np.ndarray) -> int:
        """One untaken feature (internal index) among the candidate mask, chosen by the seed."""
        index = int(self.rng.choice(np.flatnonzero(candidates & ~self.taken[layer])))
        self.taken[layer][index] = True
        return index

    def note(self, code: str, layer: str, index: int, detail: str) -> None:
        """Record one error row (feature ids are given once the layers are shuffled)."""
        self.taken[layer][index] = True
        self.rows.append((code, layer, index, detail))


def network_errors(nodes: pd.DataFrame, pipes: pd.DataFrame, book: ErrorBook) -> None:
    """Errors of design rather than typing: access, overload, steep, flat, shrinking, shallow."""
    up, dn = pipes["up"].to_numpy(), pipes["dn"].to_numpy()
    kind, zone = nodes["kind"].to_numpy(), nodes["zone"].to_numpy()
    col, row = nodes["column"].to_numpy(), nodes["row"].to_numpy()
    fed_by_lateral = np.bincount(dn[kind[up] == "lateral"], minlength=len(nodes)) > 0
    nodes["lid"] = "Y"
    west, east = CATCHMENTS
    hub = np.flatnonzero((zone == "W") & (kind == "trunk") & (col == west.long_run_column))[0]
    nodes.loc[hub, "lid"] = "N"
    for p in np.flatnonzero((up == hub) | (dn == hub)):
        book.note("long_access_run", "pipes", p, f"runs through buried junction {nodes.ref[hub]} (lid N)")
    for _ in range(3):
        nodes.loc[book.pick("manholes", (kind == "lateral") & (np.abs(row) == 2) & fed_by_lateral), "lid"] = "N"
    head = book.pick("manholes", (zone == "W") & (kind == "lateral") & ~fed_by_lateral & np.isin(np.abs(row), (3, 4)))
    nodes.loc[head, "load"] += BREWERY_LOAD_LS
    nodes["trade"] = np.where(np.arange(len(nodes)) == head, BREWERY_LOAD_LS, 0.0)
    chain = (zone[up] == "W") & (col[up] == col[head]) & (kind[up] == "lateral")
    chain &= (np.sign(row[up]) == np.sign(row[head])) & (np.abs(row[up]) <= abs(row[head]))
    level = nodes["level"].to_numpy()
    acc = accumulate(nodes["load"].to_numpy(), up, dn, level)
    pipes["span"] = size_pipes(pipes, acc[up], level, len(nodes))
    pipes.loc[chain, "span"] = OLD_LATERAL_MM
    for p in np.flatnonzero(chain):
        book.note("overloaded", "pipes", p, f"{OLD_LATERAL_MM} mm lateral takes a {BREWERY_LOAD_LS:g} l/s trade load")
    _silting_outfall(nodes, pipes, book)
    steep = np.flatnonzero((zone[up] == "E") & (kind[up] == "trunk") & (col[up] == east.bank_column))[0]
    book.note("too_steep", "pipes", steep, f"drops {pipes.slope[steep]:.1%} down the terrace bank")
    _shrink_one(nodes, pipes, book)
    shallow = book.pick("manholes", (kind == "lateral") & ~fed_by_lateral & (zone == "E"))
    nodes.loc[shallow, "invert"] = round(nodes.ground[shallow] - SHALLOW_DEPTH_M, 2)
    book.note("shallow_cover", "pipes", int(np.flatnonzero(up == shallow)[0]),
              f"invert only {SHALLOW_DEPTH_M} m below cover")
    nodes["acc"] = accumulate(nodes["load"].to_numpy(), up, dn, level)


def _silting_outfall(nodes: pd.DataFrame, pipes: pd.DataFrame, book: ErrorBook) -> None:
    """The East outfall culvert: oversized and laid almost level, so it silts."""
    p = int(np.flatnonzero(nodes["kind"].to_numpy()[pipes["dn"]] == "outfall")[-1])
    upper, outfall = pipes.up[p], pipes.dn[p]
    nodes.loc[outfall, "invert"] = round(nodes.invert[upper] - SILT_GRADE * pipes.length[p], 2)
    pipes.loc[p, ["span", "slope"]] = SILT_MM, (nodes.invert[upper] - nodes.invert[outfall]) / pipes.length[p]
    book.note("silting", "pipes", p, f"{SILT_MM} mm culvert at {SILT_GRADE:.3%}")


def _shrink_one(nodes: pd.DataFrame, pipes: pd.DataFrame, book: ErrorBook) -> None:
    """One circular trunk pipe a size smaller than the pipe above it, where it still has room."""
    kind = nodes["kind"].to_numpy()
    up, dn = pipes["up"].to_numpy(), pipes["dn"].to_numpy()
    above = pd.Series(np.arange(len(pipes)), index=dn)[kind[up] == "trunk"]
    feeder = above.reindex(up).to_numpy()
    ok = (kind[up] == "trunk") & ~pipes["egg"].to_numpy() & ~np.isnan(feeder)
    ok &= ~book.taken["pipes"] & (pipes["span"].to_numpy() >= 300)
    smaller = CIRCULAR_MM[np.maximum(np.searchsorted(CIRCULAR_MM, pipes["span"].to_numpy()) - 1, 0)]
    ratio = accumulate(nodes["load"].to_numpy(), up, dn, nodes["level"].to_numpy())[up] / 1000
    ratio = ratio / full_bore_capacity(smaller / 1000, pipes["slope"].to_numpy(), np.zeros(len(pipes), bool))
    p = int(np.flatnonzero(ok)[np.argmin(ratio[ok])])
    was = pipes.span[p]
    pipes.loc[p, "span"] = smaller[p]
    book.note("diameter_decrease", "pipes", p, f"{smaller[p]} mm below a {was:g} mm pipe")


def register_tables(nodes: pd.DataFrame, pipes: pd.DataFrame) -> tuple[pd.DataFrame, pd.DataFrame]:
    """The two attribute tables in the town's own field names, in internal order."""
    up, dn, egg, span = pipes["up"], pipes["dn"], pipes["egg"].to_numpy(), pipes["span"].to_numpy()
    refs = nodes["ref"].to_numpy()
    mat = np.select([egg, span >= CONCRETE_FROM_MM, pipes["laid"] < PVC_FROM_YEAR], ["BRICK", "CONC", "VC"], "PVC")
    given = np.flatnonzero(nodes["kind"].to_numpy()[dn] == "outfall")
    survey = (nodes["kind"].to_numpy()[up] == "trunk") & (nodes["column"].to_numpy()[up] == SURVEY_COLUMN)
    given = np.r_[given, np.flatnonzero(survey)]
    flow = np.full(len(pipes), np.nan)
    flow[given] = np.round(nodes["acc"].to_numpy()[up.to_numpy()[given]] * SURVEY_MARGIN, 1)
    table = pd.DataFrame({
        "asset_ref": np.char.add(refs[up].astype(str), ".1"), "mh_up": refs[up], "mh_down": refs[dn],
        "profile": np.where(egg, "OV", "C"),
        "bore_mm": np.where(egg, np.nan, span), "rise_mm": np.where(egg, span * EGG_RISE_RATIO, np.nan),
        "span_mm": np.where(egg, span, np.nan),
        "il_up_m": nodes["invert"].to_numpy()[up], "il_dn_m": nodes["invert"].to_numpy()[dn],
        "len_m": np.round(pipes["length"].to_numpy(), 2), "mat": mat, "laid": pipes["laid"].to_numpy(),
        "q_des_ls": flow, "geometry": pipes["geometry"].to_numpy(),
    })
    widest = np.zeros(len(nodes))
    np.maximum.at(widest, np.r_[up, dn], np.r_[span, span])
    chamber = CHAMBER_MM[1][np.searchsorted(CHAMBER_MM[0], widest)]
    open_chamber = (nodes["lid"] == "Y") & (nodes["kind"] != "outfall")
    holes = pd.DataFrame({
        "mh_ref": refs, "cover_lvl": np.round(nodes["ground"].to_numpy(), 2), "sump_lvl": nodes["invert"].to_numpy(),
        "chamber_d": pd.array(chamber, dtype="Int32"),
        "dwf_ls": nodes["load"].to_numpy(), "trade_ls": nodes["trade"].to_numpy(), "lid": nodes["lid"].to_numpy(),
        "geometry": shapely.points(nodes[["x", "y"]].to_numpy()),
    })
    holes.loc[~open_chamber.to_numpy(), "chamber_d"] = pd.NA
    return table, holes



def typing_errors(table: pd.DataFrame, holes: pd.DataFrame, lateral: np.ndarray, book: ErrorBook) -> pd.DataFrame:
    """Errors of the keyboard and the digitiser on lateral pipes; returns manholes plus an orphan."""
    def edit(code: str, column: str, value: object, detail: str, *, among: np.ndarray = lateral) -> int:
        p = book.pick("pipes", among)
        table.loc[p, column] = value(p) if callable(value) else value
        book.note(code, "pipes", p, detail)
        return p

    edit("reverse_grade", "il_up_m", lambda p: round(table.il_dn_m[p] - REVERSE_RISE_M, 2), "il_dn_m above il_up_m")
    edit("flat_grade", "il_up_m", lambda p: table.il_dn_m[p], "il_dn_m equals il_up_m")
    edit("sentinel_diameter", "bore_mm", -9999.0, "bore_mm is the -9999 no-data sentinel")
    edit("null_diameter", "bore_mm", np.nan, "bore_mm is empty")
    edit("zero_diameter", "bore_mm", 0.0, "bore_mm is 0")
    edit("length_mismatch", "len_m", lambda p: round(table.len_m[p] * LENGTH_TYPO_RATIO, 2),
         f"len_m is {LENGTH_TYPO_RATIO:g} x the drawn length")
    first = book.pick("pipes", lateral)
    book.note("duplicate_id", "pipes", first, "asset_ref used twice")
    edit("duplicate_id", "asset_ref", table.asset_ref[first], "asset_ref used twice")
    edit("unknown_node", "mh_down", lambda p: table.mh_down[p].replace("0", "O", 1), "mh_down names no manhole",
         among=lateral & table["mh_down"].str.contains("0").to_numpy())
    for _ in range(3):
        edit("digitised_backwards", "geometry", lambda p: shapely.reverse(table.geometry[p]),
             "drawn from mh_down to mh_up")
    x_mid = ORIGIN_E + TOWN_SPAN_M / 2
    y = float(valley(np.array(x_mid))) + LATERAL_STEP_M
    ground = round(float(terrain(np.array(x_mid), np.array(y))), 2)
    orphan = pd.DataFrame({"mh_ref": ["X001"], "cover_lvl": [ground], "sump_lvl": [round(ground - DEPTH_MIN_M, 2)],
                           "chamber_d": pd.array([CHAMBER_MM[1, 0]], dtype="Int32"), "dwf_ls": [0.0], "trade_ls": [0.0], "lid": ["Y"],
                           "geometry": [shapely.Point(x_mid, y)]})
    holes = pd.concat([holes, orphan], ignore_index=True)
    book.taken["manholes"] = np.r_[book.taken["manholes"], False]
    book.note("orphan_manhole", "manholes", len(holes) - 1, "no pipe starts or ends here")
    return holes


def error_report(book: ErrorBook, order: dict[str, np.ndarray], refs: dict[str, pd.Series]) -> str:
    """ERRORS.md: one row per deliberate error, by GeoPackage feature id (fid, 1-based)."""
    lines = ["# Deliberate errors in the Brackenhollow register", "",
             "Written by `scripts/make_sample_gis.py`; do not edit by hand. `fid` is the GeoPackage",
             "feature id (1-based) in the layer named; `ref` is the asset_ref or mh_ref there.", "",
             "| code | layer | fid | ref | detail |", "|---|---|---|---|---|"]
    rows = [(code, layer, int(order[layer][i]) + 1, refs[layer][i], detail) for code, layer, i, detail in book.rows]
    lines += [f"| {c} | {lay} | {fid} | {ref} | {d} |" for c, lay, fid, ref, d in rows]
    return "\n".join(lines) + "\n"


def catchment_layer(nodes: pd.DataFrame, rng: np.random.Generator) -> gpd.GeoDataFrame:
    """One square sub-catchment around each manhole that serves people, draining to it.

    Drawn after everything else so that the pipes, manholes and ERRORS.md do not depend on it.
    """
    served = nodes[nodes["people"] > 0]
    half = SUBCATCHMENT_SIDE_M / 2
    x, y = served["x"].to_numpy(), served["y"].to_numpy()
    squares = shapely.box(x - half, y - half, x + half, y + half)
    return gpd.GeoDataFrame({
        "sub_ref": "S" + served["ref"].to_numpy(dtype=str).astype(object), "outlet_mh": served["ref"].to_numpy(),
        "persons": served["people"].to_numpy(dtype=int),
        "imp_share": np.round(rng.uniform(*IMPERVIOUS_SHARE, len(served)), 2), "geometry": squares,
    }, geometry="geometry", crs=CRS)


def write_town(outdir: Path, *, seed: int = SEED) -> None:
    """Build the town and write ``town.gpkg`` and ``ERRORS.md`` into ``outdir``."""
    rng = np.random.default_rng(seed)
    nodes, pipes = build_town(rng)
    book = ErrorBook(rng, len(pipes), len(nodes))
    network_errors(nodes, pipes, book)
    table, holes = register_tables(nodes, pipes)
    lateral = (nodes["kind"].to_numpy()[pipes["up"]] == "lateral") & ~pipes["egg"].to_numpy()
    holes = typing_errors(table, holes, lateral, book)
    order, layers = {}, {}
    for name, frame in (("pipes", table), ("manholes", holes)):
        perm = rng.permutation(len(frame))
        order[name] = np.argsort(perm)
        layers[name] = gpd.GeoDataFrame(frame.iloc[perm].reset_index(drop=True), geometry="geometry", crs=CRS)
    refs = {"pipes": table["asset_ref"], "manholes": holes["mh_ref"]}
    layers["catchments"] = catchment_layer(nodes, rng)
    outdir.mkdir(parents=True, exist_ok=True)
    scratch = outdir / "town.partial.gpkg"
    scratch.unlink(missing_ok=True)
    pyogrio.set_gdal_config_options({"OGR_CURRENT_DATE": TIMESTAMP})
    for name, layer in layers.items():
        pyogrio.write_dataframe(layer, scratch, layer=name, driver="GPKG")
    os.replace(scratch, outdir / "town.gpkg")
    (outdir / "ERRORS.md").write_text(error_report(book, order, refs), encoding="utf-8")


def main(argv: list[str] | None = None) -> int:
    """Command line: ``make_sample_gis.py [OUTDIR]``."""
    args = sys.argv[1:] if argv is None else argv
    write_town(Path(args[0]) if args else Path(__file__).resolve().parent.parent / "sample_gis")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
