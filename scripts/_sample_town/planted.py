"""The deliberate register errors and ERRORS.md, the list of them by feature id."""

from __future__ import annotations

import numpy as np
import pandas as pd
import shapely

from .layout import terrain, valley
from .loads import design_flows
from .plan import (
    BREWERY_LOAD_LS,
    CATCHMENTS,
    CHAMBER_MM,
    CIRCULAR_MM,
    DEPTH_MIN_M,
    LATERAL_STEP_M,
    LENGTH_TYPO_RATIO,
    OLD_LATERAL_MM,
    ORIGIN_E,
    REVERSE_RISE_M,
    SHALLOW_DEPTH_M,
    SILT_GRADE,
    SILT_LOAD_RATIO,
    SILT_MAX_DEPTH_M,
    TOWN_SPAN_M,
)
from .sizing import full_bore_capacity, size_pipes


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
    fed_once = np.bincount(dn, minlength=len(nodes)) == 1  # a buried junction on a plain run, no spur
    nodes["lid"] = "Y"
    west, east = CATCHMENTS
    hub = np.flatnonzero((zone == "W") & (kind == "trunk") & (col == west.long_run_column))[0]
    nodes.loc[hub, "lid"] = "N"
    for p in np.flatnonzero((up == hub) | (dn == hub)):
        book.note("long_access_run", "pipes", p, f"runs through buried junction {nodes.ref[hub]} (lid N)")
    for _ in range(3):
        nodes.loc[book.pick("manholes", (kind == "lateral") & (np.abs(row) == 2) & fed_by_lateral & fed_once), "lid"] = "N"
    head = book.pick("manholes", (zone == "W") & (kind == "lateral") & ~fed_by_lateral & np.isin(np.abs(row), (3, 4)))
    nodes.loc[head, "load"] += BREWERY_LOAD_LS
    nodes["trade"] = np.where(np.arange(len(nodes)) == head, BREWERY_LOAD_LS, 0.0)
    chain = (zone[up] == "W") & (col[up] == col[head]) & (kind[up] == "lateral")
    chain &= (np.sign(row[up]) == np.sign(row[head])) & (np.abs(row[up]) <= abs(row[head]))
    level = nodes["level"].to_numpy()
    pipes["flow"] = design_flows(nodes, pipes, level)
    pipes["span"] = size_pipes(pipes, pipes["flow"].to_numpy(), level, len(nodes))
    pipes.loc[chain, "span"] = OLD_LATERAL_MM
    for p in np.flatnonzero(chain):
        book.note("overloaded", "pipes", p, f"{OLD_LATERAL_MM} mm lateral takes a {BREWERY_LOAD_LS:g} l/s trade load")
    _silting_spur(nodes, pipes, book)
    steep = np.flatnonzero((zone[up] == "E") & (kind[up] == "trunk") & (col[up] == east.bank_column))[0]
    book.note("too_steep", "pipes", steep, f"drops {pipes.slope[steep]:.1%} down the terrace bank")
    _shrink_one(nodes, pipes, book)
    shallow = book.pick("manholes", (kind == "lateral") & ~fed_by_lateral & (zone == "E"))
    nodes.loc[shallow, "invert"] = round(nodes.ground[shallow] - SHALLOW_DEPTH_M, 2)
    book.note("shallow_cover", "pipes", int(np.flatnonzero(up == shallow)[0]),
              f"invert only {SHALLOW_DEPTH_M} m below cover")


def _silting_spur(nodes: pd.DataFrame, pipes: pd.DataFrame, book: ErrorBook) -> None:
    """One cul-de-sac spur laid almost level and sized up to carry its flow there: it silts.

    Its head manhole is lowered to the grade, so the spur stays within the manhole depths; the
    spur is a leaf, so no other pipe changes, and the pipe below is at least as wide as the new
    size, so no size shrinks downstream.
    """
    up, dn = pipes["up"].to_numpy(), pipes["dn"].to_numpy()
    length, invert = pipes["length"].to_numpy(), nodes["invert"].to_numpy()
    head_invert = np.round(invert[dn] + SILT_GRADE * length, 2)
    slope = (head_invert - invert[dn]) / length
    full = full_bore_capacity(CIRCULAR_MM[None, :] / 1000, slope[:, None], np.zeros((len(pipes), 1), bool))
    fits = full * 1000 * SILT_LOAD_RATIO >= pipes["flow"].to_numpy()[:, None]
    size = CIRCULAR_MM[np.argmax(fits, axis=1)]
    below = np.zeros(len(nodes))
    np.maximum.at(below, up, pipes["span"].to_numpy())
    depth = nodes["ground"].to_numpy()[up] - head_invert
    ok = (nodes["kind"].to_numpy()[up] == "spur") & fits.any(axis=1) & (below[dn] >= size)
    ok &= ~pipes["egg"].to_numpy() & (depth < SILT_MAX_DEPTH_M)
    p = book.pick("pipes", ok)
    nodes.loc[up[p], "invert"] = head_invert[p]
    pipes.loc[p, ["span", "slope"]] = size[p], slope[p]
    book.note("silting", "pipes", p, f"{size[p]} mm spur at {slope[p]:.2%}")


def _shrink_one(nodes: pd.DataFrame, pipes: pd.DataFrame, book: ErrorBook) -> None:
    """One circular trunk pipe a size smaller than the widest pipe entering it, where it has most room.

    Only a pipe as wide as the widest pipe entering its upstream node qualifies, so the smaller
    size is a real step down (the audit flags a pipe smaller than the largest entering pipe).
    """
    kind = nodes["kind"].to_numpy()
    up, dn = pipes["up"].to_numpy(), pipes["dn"].to_numpy()
    above = pd.Series(np.arange(len(pipes)), index=dn)[kind[up] == "trunk"]
    feeder = above.reindex(up).to_numpy()
    ok = (kind[up] == "trunk") & ~pipes["egg"].to_numpy() & ~np.isnan(feeder)
    smaller = CIRCULAR_MM[np.maximum(np.searchsorted(CIRCULAR_MM, pipes["span"].to_numpy()) - 1, 0)]
    widest_in = np.zeros(len(nodes))
    np.maximum.at(widest_in, dn, pipes["span"].to_numpy())
    ok &= ~book.taken["pipes"] & (pipes["span"].to_numpy() >= 300) & (smaller < widest_in[up])
    ratio = pipes["flow"].to_numpy() / 1000 / full_bore_capacity(smaller / 1000, pipes["slope"].to_numpy(), np.zeros(len(pipes), bool))
    p = int(np.flatnonzero(ok)[np.argmin(ratio[ok])])
    was = pipes.span[p]
    pipes.loc[p, "span"] = smaller[p]
    book.note("diameter_decrease", "pipes", p, f"{smaller[p]} mm below a {was:g} mm pipe")


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
