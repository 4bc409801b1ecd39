"""An invented town's sewer register shaped as real registers are, written as real files.

Orrinsford does not exist. Its register is a GeoPackage of pipes and a Shapefile of manholes in a
transverse Mercator grid of its own in US survey feet, with sizes in inches and levels in feet,
typed in by many hands:

- three mains with laterals and branches off the laterals: main A and main B run to their own
  outfalls, main C runs to a pump station whose rising main delivers to a manhole on main A;
- short end-of-line stubs at the heads of laterals whose from-node is a placeholder that names no
  manhole (two placeholders listed in the config, three not), about half of them drawn from their
  manhole out to the free end;
- a relief pipe typed in the wrong direction beside main A (a loop of two pipes) and a bypass
  closing a ring of three pipes on main B, with the mains continuing below both;
- a chamber on main A with an overflow pipe to a third outfall, two abandoned pipes, two private
  drains, a pipe whose two ids are one manhole, an unknown kind code, a manhole with no pipe and
  one never numbered (its id is "0", a placeholder);
- install dates as text in several formats (and as a Date field beside it), 0 for unknown
  diameters and inverts, end depths instead of inverts on a share of pipes, multi-part lines
  (one with a gap), a length typed wrongly, a -9999 cover level.

`write_register` writes the files and the TOML configs and returns a `Register`: what was
planted, for the acceptance test to check the audit against.
"""

from __future__ import annotations

import datetime
import itertools
from collections.abc import Mapping
from dataclasses import dataclass, field
from pathlib import Path

import geopandas as gpd
import numpy as np
import pandas as pd
import pyarrow as pa
from shapely import LineString, MultiLineString, Point

FT_M = 0.3048  # international foot [m]  # Source: NIST SP 811 (2008), appendix B (from memory)
IN_M = 0.0254  # inch [m]  # Source: NIST SP 811 (2008), appendix B (from memory)
# The town's own grid: a transverse Mercator in US survey feet (invented, no official system).
TOWN_CRS = "+proj=tmerc +lat_0=38.5 +lon_0=-96.25 +k=0.99993 +x_0=300000 +y_0=120000 +ellps=GRS80 +units=us-ft +no_defs"
ORIGIN_FT = (986_000.0, 400_000.0)

CONFIGURED_PLACEHOLDERS = ("EOL", "0")  # listed in [network] placeholder_ids
OTHER_PLACEHOLDERS = ("JCT", "CAP", "PLUG")  # not listed: they simply name no manhole
PER_CAPITA_L_DAY = 380.0  # about 100 US gallons per person per day  # common practice, no source
PERSONS_PER_KM = 120.0  # assumed persons per km of sewer for the rough screen (invented)
MANNING_N = 0.013  # common practice, no source
DROP_FT = 0.1  # fall across a manhole  # common practice, no source
STUB_HEAD = "^"  # prefix of the invented name of a stub's free end in Register.links

PIPES_FILE = "orrinsford_sewers.gpkg"
PIPES_LAYER = "sewer_lines"
MANHOLES_FILE = "orrinsford_structures.shp"


@dataclass(frozen=True)
class MultiPart:
    """A planted multi-part line: its parts in flow order and the gaps between them [ft, grid]."""

    parts_ft: tuple[float, ...]
    gaps_ft: tuple[float, ...]


@dataclass(frozen=True)
class Register:
    """What was planted in the register, for the test (levels and lengths as written, in feet)."""

    folder: Path
    config: Path
    date_config: Path
    pipe_ids: tuple[str, ...]
    manhole_ids: tuple[str, ...]
    links: Mapping[str, tuple[str, str]]  # true (upstream, downstream) node of every pipe; a stub's head is STUB_HEAD + id
    kinds: Mapping[str, str]  # canonical kind each pipe should get
    placeholders: Mapping[str, str]  # stub -> the placeholder in its from-node field
    backwards: frozenset[str]  # drawn from the downstream end
    loop_pipes: frozenset[str]  # the two pipes of the loop on main A
    ring_pipes: frozenset[str]  # the three pipes of the ring on main B
    main_outlets: Mapping[str, str]  # main -> its last pipe (into the outfall or the pump station)
    pump_station: str
    rising_main: str
    overflow: str
    abandoned: frozenset[str]
    self_loop: str
    unknown_kind: str
    length_typo: str
    orphans: tuple[str, ...]  # manholes no pipe joins (one of them numbered with a placeholder)
    rim_sentinel: str
    persons: Mapping[str, int]
    install_year: Mapping[str, float]  # from the text field and the Date field alike; NaN where empty or not a date
    not_a_date: frozenset[str]
    diameter_in: Mapping[str, float]  # as written; 0 where unknown
    zero_invert_ends: Mapping[str, tuple[bool, bool]]  # 0 written for the invert at the (first, last) vertex
    end_depths: Mapping[str, tuple[tuple[float, float], tuple[float, float]]]  # (rim, depth) at the upstream, downstream end
    length_ft: Mapping[str, float]  # the length field as written; NaN where empty or 0
    multipart: Mapping[str, MultiPart]


@dataclass
class _Pipe:
    pipe_id: str
    up: str
    down: str
    parts: list[list[tuple[float, float]]]  # in flow direction
    kind_code: str | None = "GRAV"
    diameter_in: float = 8.0
    slope: float = 0.01
    levels_ft: tuple[float, float] = (np.nan, np.nan)  # invert at the upstream, downstream end
    role: str = "lateral"
    from_code: str | None = None  # what the from-node field says where it is not the upstream node's id


@dataclass
class _Town:
    rng: np.random.Generator
    xy: dict[str, tuple[float, float]] = field(default_factory=dict)
    node_kind: dict[str, str] = field(default_factory=dict)
    pipes: list[_Pipe] = field(default_factory=list)
    invert_ft: dict[str, float] = field(default_factory=dict)  # lowest invert of each node

    def node(self, name: str, x: float, y: float, kind: str = "MH") -> str:
        self.xy[name], self.node_kind[name] = (x, y), kind
        return name

    def pipe(self, up: str, down: str, *, role: str = "lateral", kind_code: str = "GRAV", diameter_in: float = 8.0, slope: float = 0.01) -> _Pipe:
        line = _Pipe(f"SL-{len(self.pipes) + 1:04d}", up, down, [[self.xy[up], self.xy[down]]], kind_code=kind_code, diameter_in=diameter_in,
                     slope=slope, role=role)  # fmt: skip
        self.pipes.append(line)
        return line


@dataclass(frozen=True)
class _Layout:
    mains: dict[str, list[str]]  # main -> its nodes from the head to the outlet
    chamber: str  # the chamber on main A with the overflow
    into: str  # the manhole on main A the rising main delivers to
    free_heads: list[str]  # heads of laterals without a stub


def _jitter(rng: np.random.Generator, size: float) -> float:
    return float(rng.uniform(-size, size))


def _lay_main(town: _Town, *, prefix: str, start: tuple[float, float], spans: int, outlet: str, outlet_kind: str) -> list[str]:
    """Manholes from the head to the outlet, 300 ft apart eastwards, and the pipes between them."""
    rng = town.rng
    nodes = [town.node(f"MH-{prefix}{k + 1:02d}", start[0] + 300.0 * k + _jitter(rng, 25), start[1] + _jitter(rng, 40)) for k in range(spans)]
    nodes.append(town.node(outlet, start[0] + 300.0 * spans, start[1], outlet_kind))
    for k, (up, down) in enumerate(itertools.pairwise(nodes)):
        town.pipe(up, down, diameter_in=[10.0, 12.0, 15.0, 18.0, 21.0][min(4, 5 * k // spans)], slope=float(rng.uniform(0.004, 0.008)), role="main")
    return nodes


def _lay_lateral(town: _Town, *, at: str, side: float, name: str) -> list[str]:
    """A lateral of 2 to 5 manholes from a main manhole away to its head; returns near to head."""
    rng, (x0, y0) = town.rng, town.xy[at]
    count = int(rng.integers(2, 6))
    chain = [town.node(f"{name}-{j + 1}", x0 + _jitter(rng, 20), y0 + side * (280.0 * (j + 1) + _jitter(rng, 30))) for j in range(count)]
    for up, down in zip(chain, [at, *chain[:-1]], strict=True):
        town.pipe(up, down, slope=float(rng.uniform(0.005, 0.02)))
    for j, joint in enumerate(chain[:-1]):  # branches eastwards off the lateral's manholes
        if rng.random() < 0.35:
            x, y = town.xy[joint]
            branch = [town.node(f"{name}-{j + 1}E{b + 1}", x + 110.0 * (b + 1), y + _jitter(rng, 15)) for b in range(int(rng.integers(1, 3)))]
            for up, down in zip(branch, [joint, *branch[:-1]], strict=True):
                town.pipe(up, down, slope=float(rng.uniform(0.006, 0.02)), role="branch")
    return chain


def _lay_stub(town: _Town, *, head: str, side: float, placeholder: str) -> _Pipe:
    """A short end-of-line stub from a free end (named by a placeholder) into a lateral's head."""
    rng, (x, y) = town.rng, town.xy[head]
    free = (x + _jitter(rng, 6), y + side * float(rng.uniform(15.0, 40.0)))
    stub = town.pipe(head, head, role="stub", slope=float(rng.uniform(0.01, 0.02)))
    stub.up, stub.parts = STUB_HEAD + stub.pipe_id, [[free, town.xy[head]]]
    town.xy[stub.up], stub.from_code = free, placeholder
    return stub


def _lay_network(town: _Town) -> _Layout:
    """The mains, their laterals and branches, and a stub at every other lateral's head."""
    x0, y0 = ORIGIN_FT
    mains = {
        "A": _lay_main(town, prefix="1", start=(x0, y0), spans=34, outlet="OF-1", outlet_kind="OUT"),
        "B": _lay_main(town, prefix="2", start=(x0, y0 - 6000.0), spans=28, outlet="OF-2", outlet_kind="OUT"),
        "C": _lay_main(town, prefix="3", start=(x0 + 2000.0, y0 + 6000.0), spans=16, outlet="LS-4", outlet_kind="LS"),
    }
    chamber, into = mains["A"][20], mains["A"][28]
    town.node_kind[chamber] = "CH"
    placeholders = CONFIGURED_PLACEHOLDERS + OTHER_PLACEHOLDERS
    heads: list[tuple[str, float]] = []
    for nodes in mains.values():
        for k, at in enumerate(nodes[:-1]):
            if at in (chamber, into) or town.rng.random() > 0.8:
                continue
            side = 1.0 if k % 2 else -1.0  # north and south in turn
            heads.append((_lay_lateral(town, at=at, side=side, name=f"MH-{at[3:]}L")[-1], side))
    for n, (head, side) in enumerate(heads[::2]):
        _lay_stub(town, head=head, side=side, placeholder=placeholders[n % len(placeholders)])
    return _Layout(mains, chamber, into, [h for h, _ in heads[1::2]])


def _lay_specials(town: _Town, laid: _Layout) -> dict[str, str | tuple[str, ...]]:
    """The pipes real registers mix in with the gravity sewers; returns their ids by role."""
    a, b = laid.mains["A"], laid.mains["B"]
    rising = town.pipe("LS-4", laid.into, kind_code="FM", diameter_in=6.0, role="rising_main")
    x, y = town.xy["LS-4"]
    rising.parts = [[(x, y), (x + 400.0, y - 2500.0), (x + 1200.0, y - 5200.0), town.xy[laid.into]]]
    loop = town.pipe(a[9], a[8], role="loop", diameter_in=10.0)
    ring = town.pipe(b[7], b[5], role="ring", diameter_in=10.0)
    for extra, bow in ((loop, 8.0), (ring, 45.0)):
        (ux, uy), (dx, dy) = town.xy[extra.up], town.xy[extra.down]
        extra.parts = [[(ux, uy), ((ux + dx) / 2, (uy + dy) / 2 + bow), (dx, dy)]]
    cx, cy = town.xy[laid.chamber]
    town.node("OF-3", cx + 40.0, cy - 260.0, "OUT")
    overflow = town.pipe(laid.chamber, "OF-3", kind_code="OVF", diameter_in=18.0, role="overflow")
    old = town.pipe(a[12], a[13], kind_code="ABAN", diameter_in=9.0, role="abandoned")
    old.parts = [[(px + 12.0, py + 12.0) for px, py in old.parts[0]]]
    x0, y0 = ORIGIN_FT  # a pipe between two manholes taken out long ago: its ids name no manhole
    gone = _Pipe("SL-9001", "MH-0417", "MH-0418", [[(x0 + 60.0, y0 - 3000.0), (x0 + 360.0, y0 - 3010.0)]], kind_code="ABAN", diameter_in=6.0, role="abandoned")
    town.pipes.append(gone)
    knot = town.pipe(laid.free_heads[-1], laid.free_heads[-1], diameter_in=6.0, role="self_loop")
    hx, hy = town.xy[laid.free_heads[-1]]
    knot.parts = [[(hx, hy), (hx + 30.0, hy + 20.0)]]
    return {"rising": rising.pipe_id, "overflow": overflow.pipe_id, "abandoned": (old.pipe_id, gone.pipe_id), "self_loop": knot.pipe_id,
            "loop": (loop.pipe_id, _main_pipe(town, a[8], a[9])), "ring": (ring.pipe_id, _main_pipe(town, b[5], b[6]), _main_pipe(town, b[6], b[7]))}  # fmt: skip


def _main_pipe(town: _Town, up: str, down: str) -> str:
    return next(p.pipe_id for p in town.pipes if (p.up, p.down) == (up, down))


def _set_levels(town: _Town) -> None:
    """Inverts from the outlets upwards: each node's lowest invert is its outgoing pipe's."""
    town.invert_ft.update({"OF-1": 560.0, "OF-2": 548.0, "LS-4": 571.0})
    tree = [p for p in town.pipes if p.role in ("main", "lateral", "branch", "stub")]
    pending = tree
    while pending:  # one pass per level of the tree
        ready = [p for p in pending if p.down in town.invert_ft]
        assert ready, "every tree pipe drains to an outlet"
        for pipe in ready:
            down = town.invert_ft[pipe.down] + (0.0 if town.node_kind.get(pipe.down) in ("OUT", "LS") else DROP_FT)
            pipe.levels_ft = (down + pipe.slope * _length_ft(pipe), down)
            town.invert_ft[pipe.up] = pipe.levels_ft[0]
        pending = [p for p in pending if p.down not in town.invert_ft or p.up not in town.invert_ft]
    town.invert_ft["OF-3"] = town.invert_ft[next(p.up for p in town.pipes if p.role == "overflow")] - 2.0
    for pipe in town.pipes:  # the other pipes sit above the nodes' lowest inverts by these heights [ft]
        above = {"loop": (0.4, 0.4), "ring": (0.4, 0.4), "abandoned": (0.4, 0.4), "overflow": (1.8, 0.0), "self_loop": (1.0, 0.5)}.get(pipe.role)
        if above is not None and pipe.up in town.invert_ft:
            pipe.levels_ft = (town.invert_ft[pipe.up] + above[0], town.invert_ft[pipe.down] + above[1])


def _length_ft(pipe: _Pipe) -> float:
    return float(sum(LineString(part).length for part in pipe.parts))


def _rims(town: _Town, manholes: list[str]) -> dict[str, float]:
    depth = {"OUT": 4.0, "LS": 18.0}
    return {n: round(town.invert_ft[n] + depth.get(town.node_kind[n], float(town.rng.uniform(6.5, 12.0))), 2) for n in manholes}


def _dates(rng: np.random.Generator, count: int) -> tuple[list[str | None], list[datetime.date | None], list[float]]:
    """Install dates as typed: ISO, m/d/yyyy, d.m.yyyy, a bare year, empty or not a date.

    Returns the text field, the Date field beside it (1 January for a bare year; empty where the
    text is empty or not a date) and the year either should give (NaN where none).
    """
    texts: list[str | None] = []
    dates: list[datetime.date | None] = []
    years: list[float] = []
    for kind in rng.choice(["iso", "mdy", "dmy", "year", "empty", "junk"], size=count, p=[0.25, 0.25, 0.15, 0.15, 0.12, 0.08]):
        day = datetime.date(int(rng.integers(1948, 2020)), int(rng.integers(1, 13)), int(rng.integers(1, 29)))
        texts.append({"iso": day.isoformat(), "mdy": f"{day.month}/{day.day}/{day.year}", "dmy": f"{day.day:02d}.{day.month:02d}.{day.year}",
                      "year": str(day.year), "empty": None, "junk": str(rng.choice(["unknown", f"{day.year % 100:02d}"]))}[str(kind)])  # fmt: skip
        known = kind not in ("empty", "junk")
        dates.append((datetime.date(day.year, 1, 1) if kind == "year" else day) if known else None)
        years.append(float(day.year) if known else np.nan)
    return texts, dates, years


def _multipart(pipe: _Pipe, *, style: str) -> MultiPart:
    """Cut a straight pipe into parts: 'touching' in order, 'turned' (last part drawn backwards) or 'gap'."""
    (ux, uy), (dx, dy) = pipe.parts[0][0], pipe.parts[0][-1]
    along = np.array([dx - ux, dy - uy]) / np.hypot(dx - ux, dy - uy)
    bend = (ux + 0.35 * (dx - ux) - 8.0 * along[1], uy + 0.35 * (dy - uy) + 8.0 * along[0])
    gaps: tuple[float, ...]
    if style == "gap":  # three parts; the third starts 20 ft on from where the second ends
        mid = (ux + 0.6 * (dx - ux), uy + 0.6 * (dy - uy))
        resume = (mid[0] + 20.0 * along[0], mid[1] + 20.0 * along[1])
        pipe.parts, gaps = [[(ux, uy), bend], [bend, mid], [resume, (dx, dy)]], (0.0, 20.0)
    else:
        pipe.parts, gaps = [[(ux, uy), bend], [bend, (dx, dy)] if style == "touching" else [(dx, dy), bend]], (0.0,)
    return MultiPart(tuple(LineString(p).length for p in pipe.parts), gaps)


def _pick(rng: np.random.Generator, pool: list[_Pipe], count: int, taken: set[str]) -> list[_Pipe]:
    """`count` pipes of the pool not taken yet, in pool order; they are taken from now on."""
    free = [p for p in pool if p.pipe_id not in taken]
    chosen = [free[i] for i in sorted(rng.choice(len(free), size=count, replace=False))]
    taken.update(p.pipe_id for p in chosen)
    return chosen


@dataclass
class _Planted:
    """The register errors and habits planted in the attribute table (pipe ids)."""

    backwards: set[str]
    multipart: dict[str, MultiPart]
    unknown_kind: str
    rim_sentinel: str
    depth_pipes: list[str]
    zero_ends: dict[str, tuple[bool, bool]]  # 0 typed for the invert at the (first, last) vertex
    length_typo: str


def _plant(town: _Town, rng: np.random.Generator) -> _Planted:
    """Choose which pipes carry which habit; an ordinary pipe carries one at most, besides an empty kind code."""
    ordinary = [p for p in town.pipes if p.role in ("main", "lateral", "branch")]
    stubs = [p for p in town.pipes if p.role == "stub"]
    taken: set[str] = set()
    backwards = {p.pipe_id for p in stubs[1::2]} | {p.pipe_id for p in _pick(rng, ordinary, 4, taken)}
    long = [p for p in ordinary if _length_ft(p) > 250.0]
    multipart = {p.pipe_id: _multipart(p, style=s) for p, s in zip(_pick(rng, long, 3, taken), ("gap", "touching", "turned"), strict=True)}
    for private in _pick(rng, [p for p in ordinary if p.role == "branch"], 2, taken):
        private.kind_code, private.diameter_in = "PRIV", 6.0
    unknown = _pick(rng, ordinary, 1, taken)[0]
    unknown.kind_code = "SWR"
    for blank in _pick(rng, ordinary + stubs, 15, set(taken)):  # an empty kind code is gravity
        blank.kind_code = None
    rim_sentinel = str(rng.choice(sorted(n for n in town.node_kind if n.startswith("MH-1") and "L" in n)))
    depth_pipes = [p.pipe_id for p in _pick(rng, [p for p in ordinary if rim_sentinel not in (p.up, p.down)], 70, taken)]
    zero_ends = {p.pipe_id: (True, True) if k < 8 else (k % 2 == 1, k % 2 == 0) for k, p in enumerate(_pick(rng, ordinary, 12, taken))}
    zero_ends |= dict.fromkeys(depth_pipes[1::2], (True, True))  # half the end-depth pipes have 0 typed for their inverts
    for pipe in _pick(rng, ordinary, 6, taken):
        pipe.diameter_in = 0.0
    return _Planted(backwards, multipart, unknown.pipe_id, rim_sentinel, depth_pipes, zero_ends, _pick(rng, ordinary, 1, taken)[0].pipe_id)


def _levels_as_typed(town: _Town, planted: _Planted, rims: dict[str, float]) -> tuple[pd.DataFrame, dict[str, tuple[tuple[float, float], tuple[float, float]]]]:
    """Inverts and end depths per drawn end (first, last vertex) as typed [ft], and the planted end depths.

    An end-depth pipe has its depths typed and its inverts left empty or typed as 0; the rising
    main and the long-gone abandoned pipe have no levels at all.
    """
    rows, depths = [], {}
    for pipe in town.pipes:
        up, down = (round(v, 2) for v in pipe.levels_ft)
        up_depth = down_depth = np.nan
        if pipe.pipe_id in planted.depth_pipes:
            up_depth, down_depth = round(rims[pipe.up] - up, 2), round(rims[pipe.down] - down, 2)
            depths[pipe.pipe_id] = ((rims[pipe.up], up_depth), (rims[pipe.down], down_depth))
            up = down = np.nan
        row = [up, down, up_depth, down_depth]
        if pipe.pipe_id in planted.backwards:
            row = [down, up, down_depth, up_depth]
        first_zero, last_zero = planted.zero_ends.get(pipe.pipe_id, (False, False))
        rows.append([0.0 if first_zero else row[0], 0.0 if last_zero else row[1], row[2], row[3]])
    frame = pd.DataFrame(rows, columns=["UP_INV_FT", "DN_INV_FT", "UP_DEPTH_FT", "DN_DEPTH_FT"]).astype("Float64")
    return frame, depths


def _length_field(town: _Town, planted: _Planted, rng: np.random.Generator) -> tuple[list[float], dict[str, float]]:
    """The length field as typed [ft] (drawn length to 0.1 ft; some empty, three 0, one typo) and its known values."""
    typed = [np.nan if rng.random() < 0.05 else round(_length_ft(p), 1) for p in town.pipes]
    index = {p.pipe_id: i for i, p in enumerate(town.pipes)}
    typed[index[planted.length_typo]] = round(1.6 * _length_ft(town.pipes[index[planted.length_typo]]), 1)
    for pid, parts in planted.multipart.items():  # surveyed along the pipe: the parts, not the gap
        typed[index[pid]] = round(sum(parts.parts_ft), 1)
    known = dict(zip(index, typed, strict=True))
    for i in rng.choice([i for i, p in enumerate(town.pipes) if p.pipe_id not in planted.multipart and p.pipe_id != planted.length_typo], size=3, replace=False):
        typed[i], known[town.pipes[i].pipe_id] = 0.0, np.nan
    return typed, known


def _lines(pipe: _Pipe, backwards: bool) -> LineString | MultiLineString:
    parts = [list(reversed(p)) for p in reversed(pipe.parts)] if backwards else pipe.parts
    return LineString(parts[0]) if len(parts) == 1 else MultiLineString(parts)


def _write_pipes(folder: Path, town: _Town, planted: _Planted, columns: dict[str, object]) -> None:
    """The pipe layer as a GeoPackage (through Arrow, so the Date field stays a Date)."""
    pipes = town.pipes
    frame = gpd.GeoDataFrame(
        {"PIPE_NO": [p.pipe_id for p in pipes], "UP_MH": [p.from_code or p.up for p in pipes], "DN_MH": [p.down for p in pipes],
         "USE_CODE": [p.kind_code for p in pipes], "DIAM_IN": [p.diameter_in for p in pipes], **columns},
        geometry=[_lines(p, p.pipe_id in planted.backwards) for p in pipes], crs=TOWN_CRS,
    )  # fmt: skip
    frame.to_file(folder / PIPES_FILE, layer=PIPES_LAYER, driver="GPKG", engine="pyogrio", use_arrow=True)


def _write_manholes(folder: Path, town: _Town, manholes: list[str], rims: dict[str, float], persons: dict[str, int]) -> None:
    """The manhole layer as a Shapefile: 10-character names, 0 for an unknown population."""
    frame = gpd.GeoDataFrame(
        {"MH_NO": manholes, "KIND": [town.node_kind[m] for m in manholes], "RIM_FT": [rims[m] for m in manholes],
         "PERSONS": [persons[m] for m in manholes], "MAP_SHEET": [f"{town.xy[m][0] // 1000:.0f}-{town.xy[m][1] // 1000:.0f}" for m in manholes]},
        geometry=[Point(town.xy[m]) for m in manholes], crs=TOWN_CRS,
    )  # fmt: skip
    frame.to_file(folder / MANHOLES_FILE, engine="pyogrio")


def write_register(folder: Path, *, seed: int = 20_240_611) -> Register:
    """Lay out the town, write its pipes (GeoPackage), manholes (Shapefile) and two configs.

    Parameters
    ----------
    folder : an empty folder for the files
    seed : seed of the numpy random generator; the same seed gives the same town

    Returns
    -------
    what was planted, with the levels and lengths as written [ft]
    """
    rng = np.random.default_rng(seed)
    town = _Town(rng)
    laid = _lay_network(town)
    special = _lay_specials(town, laid)
    _set_levels(town)
    town.node("MH-9001", ORIGIN_FT[0] - 900.0, ORIGIN_FT[1] + 700.0)  # a manhole no pipe touches
    town.node("0", ORIGIN_FT[0] - 900.0, ORIGIN_FT[1] - 2500.0)  # a manhole never numbered: its id is a placeholder
    town.invert_ft.update({"MH-9001": 590.0, "0": 575.0})
    manholes = [n for n in town.node_kind if not n.startswith(STUB_HEAD)]
    rims = _rims(town, manholes)
    planted = _plant(town, rng)
    levels, depths = _levels_as_typed(town, planted, rims)
    rims[planted.rim_sentinel] = -9999.0
    typed_length, length_ft = _length_field(town, planted, rng)
    texts, dates, years = _dates(rng, len(town.pipes))
    laid_year = [int(y) if np.isfinite(y) else 1985 for y in years]
    _write_pipes(folder, town, planted, {
        **{name: levels[name].array for name in levels.columns},
        "LEN_FT": pd.array(typed_length, dtype="Float64"),
        "MATERIAL": ["DIP" if p.role == "rising_main" else ("VCP" if y < 1970 else "PVC") for p, y in zip(town.pipes, laid_year, strict=True)],
        "LAID": texts,
        "LAID_ON": pd.array(dates, dtype=pd.ArrowDtype(pa.date32())),
        "WORK_ORDER": pd.array([None if rng.random() < 0.3 else int(rng.integers(10_000, 99_999)) for _ in town.pipes], dtype="Int64"),
        "REMARKS": [None] * (len(town.pipes) - 3) + ["CCTV 2019: roots at joint 4", "Ø as built unknown", "relined?"],
    })  # fmt: skip
    persons = {m: int(rng.integers(8, 90)) if town.node_kind[m] == "MH" and rng.random() > 0.15 else 0 for m in manholes}
    _write_manholes(folder, town, manholes, rims, persons)
    config, date_config = _write_configs(folder)
    ids = [p.pipe_id for p in town.pipes]
    kinds = {"GRAV": "gravity", None: "gravity", "SWR": "gravity", "FM": "rising_main", "ABAN": "abandoned", "OVF": "overflow", "PRIV": "private"}
    return Register(
        folder=folder,
        config=config,
        date_config=date_config,
        pipe_ids=tuple(ids),
        manhole_ids=tuple(manholes),
        links={p.pipe_id: (p.up, p.down) for p in town.pipes},
        kinds={p.pipe_id: kinds[p.kind_code] for p in town.pipes},
        placeholders={p.pipe_id: p.from_code for p in town.pipes if p.from_code is not None},
        backwards=frozenset(planted.backwards),
        loop_pipes=frozenset(special["loop"]),
        ring_pipes=frozenset(special["ring"]),
        main_outlets={name: _main_pipe(town, nodes[-2], nodes[-1]) for name, nodes in laid.mains.items()},
        pump_station="LS-4",
        rising_main=str(special["rising"]),
        overflow=str(special["overflow"]),
        abandoned=frozenset(special["abandoned"]),
        self_loop=str(special["self_loop"]),
        unknown_kind=planted.unknown_kind,
        length_typo=planted.length_typo,
        orphans=("MH-9001", "0"),
        rim_sentinel=planted.rim_sentinel,
        persons=persons,
        install_year=dict(zip(ids, years, strict=True)),
        not_a_date=frozenset(pid for pid, text, year in zip(ids, texts, years, strict=True) if text is not None and not np.isfinite(year)),
        diameter_in={p.pipe_id: p.diameter_in for p in town.pipes},
        zero_invert_ends=planted.zero_ends,
        end_depths=depths,
        length_ft=length_ft,
        multipart=planted.multipart,
    )


CONFIG = f"""# Orrinsford (an invented town): its sewer register as the utility keeps it.
[input]
engine = "ENGINE"

[pipes]
path = "{PIPES_FILE}"
layer = "{PIPES_LAYER}"

[pipes.fields]
id = "PIPE_NO"
from_node = "UP_MH"
to_node = "DN_MH"
kind = "USE_CODE"
diameter = "DIAM_IN"
upstream_invert = "UP_INV_FT"
downstream_invert = "DN_INV_FT"
upstream_depth = "UP_DEPTH_FT"
downstream_depth = "DN_DEPTH_FT"
length = "LEN_FT"
material = "MATERIAL"
install_year = "DATE_FIELD"

[pipes.units]
diameter = "in"
upstream_invert = "ft"
downstream_invert = "ft"
upstream_depth = "ft"
downstream_depth = "ft"
length = "ft"

[pipes.kinds]
GRAV = "gravity"
FM = "rising_main"
ABAN = "abandoned"
OVF = "overflow"
PRIV = "private"

[pipes.sentinels]
upstream_invert = 0
downstream_invert = 0

[manholes]
path = "{MANHOLES_FILE}"

[manholes.fields]
id = "MH_NO"
kind = "KIND"
rim = "RIM_FT"
population = "PERSONS"

[manholes.units]
rim = "ft"

[manholes.kinds]
MH = "manhole"
LS = "pump_station"
OUT = "outfall"
CH = "chamber"

[network]
placeholder_ids = {list(CONFIGURED_PLACEHOLDERS)!r}

[hydraulics]
formula = "manning"
manning_n = {MANNING_N}

[flows]
kind = "sanitary"
per_capita_l_day = {PER_CAPITA_L_DAY}
peaking = "harmon"
persons_per_km = {PERSONS_PER_KM}
""".replace("'", '"')


def _write_configs(folder: Path) -> tuple[Path, Path]:
    """The config with the dates as text (read by pyogrio) and one with the Date field (read by fiona)."""
    config, date_config = folder / "orrinsford.toml", folder / "orrinsford_dates.toml"
    config.write_text(CONFIG.replace("ENGINE", "pyogrio").replace("DATE_FIELD", "LAID"), encoding="utf-8")
    date_config.write_text(CONFIG.replace("ENGINE", "fiona").replace("DATE_FIELD", "LAID_ON"), encoding="utf-8")
    return config, date_config
