"""Benchmark: the hydraulic grade line stage on synthetic random trees of 10k, 100k and 1M pipes.

Each network is a random tree on a square grid: every manhole drains to its left or lower
neighbour, so the outfall at the corner is reached in row + column pipes and the network has
about 2 sqrt(N) levels. Slopes, drops at the manholes and cover depths are random; the design
flow is the same load at every manhole (20 m3/s in all) carried down the tree, each pipe is the smallest commercial size
that carries its flow within 80 % of full bore, and a share of pipes is one size too small
(they surcharge and hold up the pipes above them). At a manhole the incoming crowns are level
with the outgoing pipe's (``--joints inverts``: the inverts are, so the manhole loss backs up
every pipe a little). Sections are 80 % circular, 10 % egg and 10 % box; friction by
Colebrook-White (ks 1.5 mm) or Manning (n 0.013). The outfall is free, or held at a tailwater.

For each size the script prints, best of ``--repeat`` runs, the seconds of:

* the floor: one ``audit.hydraulics.normal_depth`` call for the same pipes and flows (the
  uniform-flow stage the grade line runs after);
* the grade line given that uniform-flow state (as the pipeline calls it), and on its own
  (solving normal depth itself);

the ratio of each to the floor, the peak memory the stage allocates (tracemalloc, an untimed
run), and the counts of regimes and flood states. It asserts nothing.

    python scripts/bench_grade_line.py                  # 10,000, 100,000 and 1,000,000 pipes
    python scripts/bench_grade_line.py --sizes 20000 --tailwater 1.0 --repeat 1
"""

from __future__ import annotations

import argparse
import timeit
import tracemalloc
from collections.abc import Callable
from dataclasses import dataclass

import numpy as np

from audit.grade_line import BoundaryKind, FloodState, GradeLine, GradeLineSettings, PipeRegime, grade_line
from audit.hydraulics import FlowState, Friction, PipeHydraulics, PipeSections, full_bore, normal_depth

SIZES = (10_000, 100_000, 1_000_000)
SPACING_M = 40.0  # manhole spacing on the grid [m]
DIAMETERS_M = np.array([0.225, 0.3, 0.375, 0.45, 0.525, 0.6, 0.75, 0.9, 1.05, 1.2, 1.5, 1.8, 2.1, 2.4, 3.0])
TOTAL_FLOW = 20.0  # design flow at the outfall [m3/s]: what the largest size carries at a usual slope
UNDERSIZED = 0.03  # share of pipes one size too small
ROUGHNESS = {"manning": 0.013, "colebrook-white": 1.5}  # n [s/m^(1/3)], ks [mm]


@dataclass(frozen=True)
class Network:
    """Pipe i runs from node i + 1 to its parent; node 0 is the outfall."""

    pipes: PipeHydraulics
    flow: np.ndarray
    upstream: np.ndarray
    downstream: np.ndarray
    up_invert: np.ndarray
    down_invert: np.ndarray
    rim: np.ndarray
    levels: int


def drain_grid(nodes: int, rng: np.random.Generator) -> tuple[np.ndarray, np.ndarray]:
    """Each node's parent (left or lower neighbour at random; -1 at the corner) and its pipes to the corner."""
    width = int(np.ceil(np.sqrt(nodes)))
    row, col = np.divmod(np.arange(nodes), width)
    go_left = (col > 0) & ((row == 0) | (rng.random(nodes) < 0.5))
    parent = np.where(go_left, np.arange(nodes) - 1, np.arange(nodes) - width)
    parent[0] = -1
    return parent, row + col


def by_level(steps: np.ndarray) -> list[np.ndarray]:
    """Node indices grouped by their pipes to the outfall, nearest first."""
    order = np.argsort(steps, kind="stable")
    cuts = np.flatnonzero(np.diff(steps[order])) + 1
    return np.split(order, cuts)


def make_network(count: int, *, seed: int = 7, formula: str = "colebrook-white", joints: str = "crowns") -> Network:
    """A random tree of ``count`` pipes with inverts, flows, sizes and rims: 80 % circular,
    10 % egg-shaped and 10 % box sections, with the friction ``formula``. At each manhole the
    incoming pipes' crowns are level with the outgoing pipe's (``joints="crowns"``, the usual
    design rule where a sewer grows; common practice, no source) or their inverts are
    (``"inverts"``: every pipe backed up by the manhole loss below it), plus a random drop at
    30 % of the manholes."""
    rng = np.random.default_rng(seed)
    parent, steps = drain_grid(count + 1, rng)
    levels = by_level(steps)
    child = np.arange(1, count + 1)  # pipe i leaves node i + 1
    slope = 10.0 ** rng.uniform(-3.0, -1.7, count)
    load = np.full(count + 1, TOTAL_FLOW / (count + 1))  # the same at every manhole
    for group in reversed(levels[1:]):  # a loop over levels, not pipes
        np.add.at(load, parent[group], load[group])
    flow = load[child]
    friction = Friction.uniform(formula, ROUGHNESS[formula], count)  # type: ignore[arg-type]
    names = rng.choice(np.array(["circular", "egg", "rectangular"]), count, p=[0.8, 0.1, 0.1])
    size = np.full(count, DIAMETERS_M[-1])
    for diameter in DIAMETERS_M[::-1]:  # a loop over sizes
        sections = _sized(names, np.full(count, diameter))
        size = np.where(full_bore(sections, slope, friction)[0] * 0.8 >= flow, diameter, size)
    smaller = rng.random(count) < UNDERSIZED
    size = np.where(smaller, DIAMETERS_M[np.maximum(np.searchsorted(DIAMETERS_M, size) - 1, 0)], size)
    leaving = np.zeros(count + 1)  # height of the pipe leaving each node (none at the outfall)
    leaving[child] = size
    drop = np.where(rng.random(count) < 0.3, rng.uniform(0.0, 0.1, count), 0.0)
    if joints == "crowns":
        drop += np.maximum(leaving[parent[child]] - size, 0.0)
    up_invert = np.zeros(count + 1)  # per node: the invert of the pipe leaving it
    for group in levels[1:]:
        pipe = group - 1
        up_invert[group] = up_invert[parent[group]] + drop[pipe] + slope[pipe] * SPACING_M
    down_invert = up_invert[child] - slope * SPACING_M  # the parent's invert plus the drop
    cover = np.zeros(count + 1)
    np.maximum.at(cover, child, up_invert[child] + size)
    np.maximum.at(cover, parent[child], down_invert + size)
    rim = cover + rng.uniform(1.0, 3.0, count + 1)
    pipes = PipeHydraulics(_sized(names, size), slope, friction, np.full(count, SPACING_M))
    return Network(pipes, flow, child, parent[child], up_invert[child], down_invert, rim, len(levels))


def _sized(names: np.ndarray, height: np.ndarray) -> PipeSections:
    """Sections of the given shapes and heights: eggs 2/3 as wide as high, boxes 1.5 times."""
    width = np.select([names == "egg", names == "rectangular"], [height / 1.5, height * 1.5], height)
    return PipeSections.from_names(names, height, width)


def best_of(repeat: int, work: Callable[[], object]) -> float:
    """The shortest wall-clock time of ``work()`` over ``repeat`` runs [s]."""
    return min(timeit.repeat(work, number=1, repeat=repeat))


def run_size(count: int, *, repeat: int, tailwater: float | None, formula: str, joints: str) -> None:
    net = make_network(count, formula=formula, joints=joints)
    nodes = count + 1
    boundary = np.full(nodes, -1, dtype=np.int8)
    level = np.full(nodes, np.nan)
    boundary[0] = BoundaryKind.FREE if tailwater is None else BoundaryKind.FIXED
    if tailwater is not None:
        level[0] = net.down_invert[net.downstream == 0].min() + tailwater
    settings = GradeLineSettings()
    pipes = net.pipes

    def uniform() -> FlowState:
        return normal_depth(net.flow, pipes.sections, pipes.slope, pipes.friction)

    def stage(state: FlowState | None) -> GradeLine:
        return grade_line(
            pipes, flow=net.flow, upstream=net.upstream, downstream=net.downstream, node_count=nodes, up_invert=net.up_invert,
            down_invert=net.down_invert, node_rim=net.rim, boundary=boundary, boundary_level=level,
            evaluate=np.ones(count, dtype=bool), settings=settings, uniform=state,
        )  # fmt: skip

    state = uniform()
    floor = best_of(repeat, uniform)
    given = best_of(repeat, lambda: stage(state))
    alone = best_of(repeat, lambda: stage(None))
    tracemalloc.start()
    result = stage(state)
    _, peak = tracemalloc.get_traced_memory()
    tracemalloc.stop()
    regimes = {PipeRegime(code).label: int(n) for code, n in enumerate(np.bincount(result.regime)) if n}
    floods = {FloodState(code).label: int(n) for code, n in enumerate(np.bincount(result.flood_state)) if n}
    print(f"pipes: {count:>9,}  levels: {net.levels:>5}  {formula}  {joints} level at manholes  outfall: {'free' if tailwater is None else f'tailwater {tailwater} m'}")
    print(f"  floor, one normal_depth call:       {floor:8.3f} s")
    print(f"  grade line, uniform state given:    {given:8.3f} s   {given / floor:5.2f}x the floor")
    print(f"  grade line, solving normal depth:   {alone:8.3f} s   {alone / floor:5.2f}x the floor")
    print(f"  peak memory allocated by the stage: {peak / 2**20:8.1f} MiB")
    print(f"  regimes: {regimes}")
    print(f"  nodes:   {floods}")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--sizes", type=int, nargs="+", default=list(SIZES))
    parser.add_argument("--repeat", type=int, default=3)
    parser.add_argument("--tailwater", type=float, default=None, help="fixed outfall level above the outfall invert [m]")
    parser.add_argument("--formula", choices=tuple(ROUGHNESS), default="colebrook-white")
    parser.add_argument("--joints", choices=("crowns", "inverts"), default="crowns", help="what lines up at a manhole")
    args = parser.parse_args()
    for count in args.sizes:
        run_size(count, repeat=args.repeat, tailwater=args.tailwater, formula=args.formula, joints=args.joints)


if __name__ == "__main__":
    main()
