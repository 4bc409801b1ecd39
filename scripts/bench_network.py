"""Time the network stage on a synthetic random tree and compare it with a floor from this run.

The floor is what any network builder must at least pay: reading every line's coordinates and
building one spatial tree over the manholes. The script prints times and ratios; it asserts
nothing, so a slow machine does not fail a build.

    python scripts/bench_network.py --pipes 1000000
"""

from __future__ import annotations

import argparse
import time
from collections.abc import Callable

import geopandas as gpd
import numpy as np
import pandas as pd
import shapely

from audit.findings import FindingLog
from audit.network.build import build_network
from audit.network.levels import derive_levels


def random_tree(pipes: int, *, window: int, seed: int) -> tuple[gpd.GeoDataFrame, gpd.GeoDataFrame]:
    """Manholes scattered over a square, each draining to an earlier one (node 0 is the outfall).

    Parameters
    ----------
    pipes : number of pipes; there is one manhole more
    window : a manhole drains to one of the ``window`` manholes before it (0: any earlier one);
        a small window makes a deep network with many levels
    seed : random seed
    """
    rng = np.random.default_rng(seed)
    side = np.sqrt(pipes) * 50.0  # about 50 m between manholes
    xy = rng.uniform(0.0, side, size=(pipes + 1, 2))
    child = np.arange(1, pipes + 1)
    low = np.maximum(child - window, 0) if window > 0 else np.zeros(pipes, dtype=np.int64)
    parent = (low + rng.random(pipes) * (child - low)).astype(np.int64)
    jitter = rng.uniform(-0.2, 0.2, size=(pipes, 2, 2))  # ends drawn up to 0.28 m off the manholes
    lines = shapely.linestrings(np.stack([xy[child], xy[parent]], axis=1) + jitter)
    names = ("M" + pd.Series(np.arange(pipes + 1)).astype(str)).to_numpy(dtype=object)
    manholes = gpd.GeoDataFrame(
        {"manhole_id": names, "rim": 100.0, "invert": 98.0, "depth": np.nan, "inflow": 0.0, "access": True},
        geometry=shapely.points(xy),
    )
    pipe_layer = gpd.GeoDataFrame(
        {"pipe_id": ("P" + pd.Series(child).astype(str)).to_numpy(dtype=object),
         "from_node": names[child], "to_node": names[parent],
         "shape": "circular", "diameter": 0.3, "upstream_invert": np.nan, "downstream_invert": np.nan,
         "length": np.nan},
        geometry=lines,
    )
    return pipe_layer, manholes


def timed(task: Callable[[], object]) -> tuple[float, object]:
    start = time.perf_counter()
    result = task()
    return time.perf_counter() - start, result


def floor(pipes: gpd.GeoDataFrame, manholes: gpd.GeoDataFrame) -> float:
    """Seconds to read all line coordinates and build one tree over the manholes."""
    seconds, _ = timed(
        lambda: (shapely.get_coordinates(pipes.geometry.values), shapely.STRtree(manholes.geometry.values))
    )
    return seconds


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--pipes", type=int, default=1_000_000)
    parser.add_argument("--window", type=int, default=0, help="drain to one of the N previous manholes (0: any)")
    parser.add_argument("--seed", type=int, default=7)
    options = parser.parse_args()
    build_seconds, (pipes, manholes) = timed(lambda: random_tree(options.pipes, window=options.window, seed=options.seed))
    print(f"synthetic tree: {len(pipes):,} pipes, {len(manholes):,} manholes (made in {build_seconds:.2f} s)")
    base = floor(pipes, manholes)
    print(f"floor (coordinates + one STRtree): {base:.3f} s")
    snapped = pipes.assign(from_node=None, to_node=None)
    for label, layer in (("by snapping", snapped), ("by ids", pipes)):
        log = FindingLog()
        seconds, network = timed(lambda layer=layer, log=log: build_network(layer, manholes, snap_tolerance_m=1.0, findings=log))
        outfalls = len(network.outfalls)  # type: ignore[attr-defined]
        print(f"build_network {label}: {seconds:.2f} s, {seconds / base:.1f} x floor; "
              f"{outfalls} outfall(s), {len(log)} finding(s)")
    seconds, _ = timed(lambda: derive_levels(pipes, network, manholes, findings=FindingLog()))  # type: ignore[arg-type]
    print(f"derive_levels: {seconds:.2f} s, {seconds / base:.1f} x floor")


if __name__ == "__main__":
    main()
