"""Benchmark: normal depth and velocity for a million pipes of mixed shapes and sizes.

Prints the time of ``audit.hydraulics.normal_depth`` and its ratio to a floor measured in the
same run on the same arrays: one Manning full-bore evaluation (``full_bore``). Target: within
30x of that floor. This is a benchmark that prints; it asserts nothing.

    python scripts/bench_hydraulics.py [--pipes N] [--formula manning|colebrook-white]
"""

from __future__ import annotations

import argparse
import time

import numpy as np

from audit.hydraulics.friction import Friction
from audit.hydraulics.sections import PipeSections
from audit.hydraulics.uniform import FlowStatus, full_bore, normal_depth

COMMERCIAL_SIZES_M = np.array([0.15, 0.225, 0.3, 0.375, 0.45, 0.6, 0.75, 0.9, 1.2, 1.5])


def synthetic_pipes(count: int, seed: int = 20261201) -> tuple[PipeSections, np.ndarray, np.ndarray]:
    """Mixed shapes (80 % circular, 10 % egg, 10 % box), sizes, slopes and load ratios."""
    rng = np.random.default_rng(seed)
    names = rng.choice(np.array(["circular", "egg", "rectangular"]), count, p=[0.8, 0.1, 0.1])
    height = rng.choice(COMMERCIAL_SIZES_M, count)
    width = np.select([names == "rectangular", names == "egg"], [height * rng.uniform(1.0, 2.0, count), height / 1.5], height)
    slope = 10.0 ** rng.uniform(-3.5, -1.5, count)
    return PipeSections.from_names(names, height, width), slope, rng.uniform(0.01, 1.2, count)


def best_of(repeats: int, work) -> float:  # type: ignore[no-untyped-def]
    """The shortest of ``repeats`` wall-clock timings of ``work()`` [s]."""
    times = []
    for _ in range(repeats):
        start = time.perf_counter()
        work()
        times.append(time.perf_counter() - start)
    return min(times)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--pipes", type=int, default=1_000_000)
    parser.add_argument("--formula", choices=("manning", "colebrook-white"), default="manning")
    args = parser.parse_args()
    sections, slope, load = synthetic_pipes(args.pipes)
    roughness = 0.013 if args.formula == "manning" else 1.5
    friction = Friction.uniform(args.formula, roughness, args.pipes)
    manning = Friction.uniform("manning", 0.013, args.pipes)
    flow = full_bore(sections, slope, friction)[0] * load
    floor = best_of(3, lambda: full_bore(sections, slope, manning))
    solve = best_of(3, lambda: normal_depth(flow, sections, slope, friction))
    state = normal_depth(flow, sections, slope, friction)
    counts = {FlowStatus(code).label: int(n) for code, n in enumerate(np.bincount(state.status)) if n}
    print(f"pipes: {args.pipes:,}  formula: {args.formula}")
    print(f"floor (one Manning full-bore evaluation): {floor:8.3f} s")
    print(f"normal depth, velocity and shear:        {solve:8.3f} s")
    print(f"ratio to floor: {solve / floor:6.1f}x   (target: within 30x)")
    print(f"status counts: {counts}")


if __name__ == "__main__":
    main()
