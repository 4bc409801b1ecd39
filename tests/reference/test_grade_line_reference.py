"""The hydraulic grade line against references outside the package.

* the direct-step profile of a circular pipe against an independent integration of the
  gradually varied flow equation with scipy's ``solve_ivp``, the circle written out here;
* critical depth against the closed form for rectangles and an independent ``brentq`` root
  for circles;
* a surcharged chain of four pipes worked out by hand: Manning at full bore and manhole losses;
* properties of the sweep on random small trees (hypothesis).

No published backwater worked example is reproduced: none could be cited exactly (source and
page) when this was written, so none is invented here.
"""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.integrate import solve_ivp
from scipy.optimize import brentq

from audit.grade_line import BoundaryKind, GradeLine, GradeLineSettings, PipeRegime, critical_depth, direct_step, grade_line
from audit.hydraulics import Friction, PipeHydraulics, PipeSections

G = 9.80665  # standard gravity [m/s2] (CGPM 1901)
N = 0.013  # Manning n of a concrete sewer [s/m^(1/3)]; common practice, no source


def circle(y: float, d: float) -> tuple[float, float, float]:
    """Area, wetted perimeter and top width of a circle of diameter d filled to depth y.

    Source: Chow, Open-Channel Hydraulics (1959), table 2-1.
    """
    theta = 2.0 * np.arccos(1.0 - 2.0 * min(max(y, 0.0), d) / d)
    return d * d / 8.0 * (theta - np.sin(theta)), d * theta / 2.0, d * np.sin(theta / 2.0)


def manning_discharge(y: float, d: float, slope: float) -> float:
    """Q = A R^(2/3) S^(1/2) / n. Source: Chow (1959), eq. 5-6."""
    area, perimeter, _ = circle(y, d)
    return area * (area / perimeter) ** (2.0 / 3.0) * np.sqrt(slope) / N


def circles(count: int, d: float) -> PipeSections:
    return PipeSections.from_names(["circular"] * count, np.full(count, d), np.full(count, d))


# --- the direct step method against an independent integration -------------------------------

PROFILE_CASES = [
    (diameter, slope, share, outlet, length)
    for diameter, slope in ((0.6, 0.001), (0.45, 0.004), (1.2, 0.0015))
    for share in (0.3, 0.8)
    for outlet in ("near_normal", "half_way", "near_crown")
    for length in (15.0, 60.0, 150.0)
]


@pytest.mark.parametrize(("diameter", "slope", "share", "outlet", "length"), PROFILE_CASES)
def test_direct_step_matches_an_integration_of_the_gradually_varied_flow_equation(
    diameter: float, slope: float, share: float, outlet: str, length: float
) -> None:
    # Source: Chow (1959), eq. 9-13: dy/dx = (S0 - Sf) / (1 - Fr^2), Sf by Manning (eq. 5-6),
    # Fr^2 = Q^2 T / (g A^3); integrated upstream (x up the pipe) by scipy.integrate.solve_ivp.
    flow = share * (np.pi * diameter**2 / 4.0) * (diameter / 4.0) ** (2.0 / 3.0) * np.sqrt(slope) / N
    normal = brentq(lambda y: manning_discharge(y, diameter, slope) - flow, 1e-6, 0.938 * diameter, xtol=1e-14)
    area, _, top = circle(normal, diameter)
    assert flow**2 * top / (G * area**3) < 1.0  # a mild pipe: the M1 curve applies
    start = {"near_normal": 1.05 * normal, "half_way": (normal + diameter) / 2.0, "near_crown": 0.98 * diameter}[outlet]

    def upstream_slope(_: float, y: np.ndarray) -> list[float]:
        a, p, t = circle(float(y[0]), diameter)
        friction = (flow * N / (a * (a / p) ** (2.0 / 3.0))) ** 2
        return [-(slope - friction) / (1.0 - flow**2 * t / (G * a**3))]

    expected = solve_ivp(upstream_slope, (0.0, length), [start], rtol=1e-11, atol=1e-13).y[0, -1]
    depth, _ = direct_step(
        circles(1, diameter), Friction.uniform("manning", N, 1), np.array([0]), flow=np.array([flow]), slope=np.array([slope]),
        start=np.array([start]), stop=np.array([normal]), run=np.array([length]), steps=16,
    )  # fmt: skip
    assert depth[0] == pytest.approx(expected, rel=0.005)


# --- critical depth ----------------------------------------------------------------------------


@pytest.mark.parametrize("flow", [0.01, 0.2, 1.5, 6.0])
@pytest.mark.parametrize("width", [0.5, 1.2, 3.0])
def test_critical_depth_of_a_rectangle_is_the_closed_form(flow: float, width: float) -> None:
    # Source: Chow (1959), ch. 3: a rectangular channel is critical at yc = (q^2 / g)^(1/3), q = Q/B.
    box = PipeSections.from_names(["rectangular"], [10.0], [width])  # tall enough for no cap
    assert critical_depth(box, np.array([flow]))[0] == pytest.approx(((flow / width) ** 2 / G) ** (1.0 / 3.0), rel=1e-9)


@pytest.mark.parametrize("diameter", [0.15, 0.6, 2.4])
@pytest.mark.parametrize("fill", [0.02, 0.2, 0.5, 0.8, 0.93])
def test_critical_depth_of_a_circle_matches_an_independent_root(diameter: float, fill: float) -> None:
    # Q^2 T / (g A^3) = 1 (Chow 1959, ch. 3) with the circle written out here, solved by brentq;
    # the flow is chosen so that the root lies at the given share of the diameter.
    area, _, top = circle(fill * diameter, diameter)
    flow = np.sqrt(G * area**3 / top)
    expected = brentq(lambda y: flow**2 * circle(y, diameter)[2] / (G * circle(y, diameter)[0] ** 3) - 1.0, 1e-9, 0.999 * diameter, xtol=1e-15)
    assert expected == pytest.approx(fill * diameter, rel=1e-9)  # the independent root recovers the set depth
    assert critical_depth(circles(1, diameter), np.array([flow]))[0] == pytest.approx(expected, rel=1e-6)


def test_critical_depth_of_a_circle_is_capped_near_the_crown() -> None:
    # A flow whose critical depth would lie at 0.97 D is capped at the depth of maximum Manning
    # discharge, about 0.938 D (common practice, no source: see tests/reference/test_circular_elements.py).
    area, _, top = circle(0.97, 1.0)
    capped = critical_depth(circles(1, 1.0), np.array([np.sqrt(G * area**3 / top)]))[0]
    assert capped == pytest.approx(0.938, abs=0.002)


# --- a surcharged chain worked out by hand -----------------------------------------------------

CHAIN = (  # from the outfall up: diameter [m], length [m], bed slope [-], flow [m3/s]
    (0.45, 60.0, 0.002, 0.12),
    (0.375, 45.0, 0.003, 0.09),
    (0.375, 80.0, 0.0025, 0.07),
    (0.3, 50.0, 0.004, 0.04),
)
TAILWATER_ABOVE_INVERT = 2.5  # [m]: high enough that every pipe of the chain runs full
LOSS = 0.5  # manhole loss coefficient k


def test_a_surcharged_chain_rises_by_the_full_bore_friction_and_the_manhole_losses() -> None:
    # Expected by hand: each pipe full, HGL up by Sf L with Sf = (Q n / (A R^(2/3)))^2 at full
    # bore (Manning, Chow 1959 eq. 5-6), and each manhole by k v^2 / 2g with v = Q / A.
    diameter, length, slope, flow = (np.array(column) for column in zip(*CHAIN, strict=True))
    invert = np.concatenate([[10.0], 10.0 + np.cumsum(slope * length)])  # per node, from the outfall up
    levels = [invert[0] + TAILWATER_ABOVE_INVERT]
    for d, run, q in zip(diameter, length, flow, strict=True):
        area = np.pi * d * d / 4.0
        friction = (q * N / (area * (d / 4.0) ** (2.0 / 3.0))) ** 2
        levels.append(levels[-1] + friction * run + LOSS * (q / area) ** 2 / (2.0 * G))
    result = _chain(diameter, length, slope, flow, invert, levels[0])
    np.testing.assert_allclose(result.node_level, levels, rtol=1e-12)
    assert set(result.regime.tolist()) == {PipeRegime.PRESSURISED}
    full_friction = (flow * N / (np.pi * diameter**2 / 4.0 * (diameter / 4.0) ** (2.0 / 3.0))) ** 2
    np.testing.assert_allclose(result.full_friction_slope, full_friction, rtol=1e-12)


def _chain(diameter: np.ndarray, length: np.ndarray, slope: np.ndarray, flow: np.ndarray, invert: np.ndarray, tailwater: float) -> GradeLine:
    """Pipe i runs from node i + 1 down to node i; node 0 is held at ``tailwater``."""
    count = diameter.size
    pipes = PipeHydraulics(PipeSections.from_names(["circular"] * count, diameter, diameter), slope, Friction.uniform("manning", N, count), length)
    boundary = np.full(count + 1, -1, dtype=np.int8)
    boundary[0] = BoundaryKind.FIXED
    level = np.full(count + 1, np.nan)
    level[0] = tailwater
    return grade_line(
        pipes, flow=flow, upstream=np.arange(1, count + 1), downstream=np.arange(count), node_count=count + 1,
        up_invert=invert[1:], down_invert=invert[:-1], node_rim=np.full(count + 1, np.nan), boundary=boundary,
        boundary_level=level, evaluate=np.ones(count, dtype=bool), settings=GradeLineSettings(manhole_loss=LOSS),
    )  # fmt: skip


# --- properties on random small trees ----------------------------------------------------------


class Tree:
    """A random tree: node 0 is the outfall, pipe i runs from node i + 1 to a lower node."""

    def __init__(self, seed: int, size: int, *, long_and_mild: bool = False) -> None:
        rng = np.random.default_rng(seed)
        self.size = size
        self.parent = np.array([int(rng.integers(0, i)) for i in range(1, size + 1)])
        self.diameter = rng.choice([0.15, 0.225, 0.3, 0.45, 0.6, 0.9], size)
        if long_and_mild:
            self.slope = 10.0 ** rng.uniform(-3.0, -2.3, size)
            self.length = rng.uniform(3000.0, 6000.0, size)
        else:
            self.slope = np.where(rng.random(size) < 0.15, 0.0, 10.0 ** rng.uniform(-3.3, -1.3, size))
            self.length = rng.uniform(5.0, 150.0, size)
        full = np.pi * self.diameter**2 / 4.0 * (self.diameter / 4.0) ** (2.0 / 3.0) * np.sqrt(np.maximum(self.slope, 1e-4)) / N
        share = rng.uniform(0.05, 0.75, size) if long_and_mild else rng.uniform(0.0, 1.3, size)
        self.flow = np.where(rng.random(size) < (0.0 if long_and_mild else 0.1), 0.0, share * full)
        drop = np.where(rng.random(size) < 0.5, rng.uniform(0.0, 0.3, size), 0.0)
        invert = np.zeros(size + 1)
        for pipe in range(size):  # a loop over the test's few pipes
            invert[pipe + 1] = invert[self.parent[pipe]] + drop[pipe] + self.slope[pipe] * self.length[pipe]
        self.up_invert = invert[1:]
        self.down_invert = self.up_invert - self.slope * self.length
        self.rim = invert + rng.uniform(0.5, 4.0, size + 1)

    def sweep(self, tailwater: float, *, loss: float = 0.5, rims: bool = True, flow: np.ndarray | None = None) -> GradeLine:
        sections = PipeSections.from_names(["circular"] * self.size, self.diameter, self.diameter)
        pipes = PipeHydraulics(sections, self.slope, Friction.uniform("manning", N, self.size), self.length)
        boundary = np.full(self.size + 1, -1, dtype=np.int8)
        boundary[0] = BoundaryKind.FIXED
        level = np.full(self.size + 1, np.nan)
        level[0] = tailwater
        return grade_line(
            pipes, flow=self.flow if flow is None else flow, upstream=np.arange(1, self.size + 1), downstream=self.parent,
            node_count=self.size + 1, up_invert=self.up_invert, down_invert=self.down_invert,
            node_rim=self.rim if rims else np.full(self.size + 1, np.nan), boundary=boundary, boundary_level=level,
            evaluate=np.ones(self.size, dtype=bool), settings=GradeLineSettings(manhole_loss=loss),
        )  # fmt: skip


SEEDS = st.integers(0, 2**32 - 1)
SIZES = st.integers(1, 12)
LOW_TAILWATER = -10.0  # [m], below every invert of a tree (the outfall invert is 0)


@settings(max_examples=60, deadline=None)
@given(seed=SEEDS, size=SIZES)
def test_with_a_low_tailwater_long_mild_pipes_run_at_normal_depth(seed: int, size: int) -> None:
    # Source: Chow (1959), sec. 10-1: an M1 (or M2) curve tends to normal depth upstream, so at
    # the upstream end of a long mild pipe the depth is normal depth (solved here by brentq).
    tree = Tree(seed, size, long_and_mild=True)
    result = tree.sweep(LOW_TAILWATER, rims=False)
    for pipe in range(size):  # a loop over the test's few pipes
        d, s, q = tree.diameter[pipe], tree.slope[pipe], tree.flow[pipe]
        normal = brentq(lambda y, d=d, s=s, q=q: manning_discharge(y, d, s) - q, 1e-9, 0.938 * d, xtol=1e-14)
        assert result.depth_up[pipe] == pytest.approx(normal, rel=1e-6, abs=1e-9)


@settings(max_examples=150, deadline=None)
@given(seed=SEEDS, size=SIZES, low=st.floats(-2.0, 3.0), rise=st.floats(0.0, 3.0), loss=st.floats(0.25, 1.0))
def test_raising_the_tailwater_never_lowers_a_level_upstream(seed: int, size: int, low: float, rise: float, loss: float) -> None:
    tree = Tree(seed, size)
    lower, higher = tree.sweep(low, loss=loss), tree.sweep(low + rise, loss=loss)
    assert np.all(higher.node_level >= lower.node_level - 1e-9)
    assert np.all(higher.level_up >= lower.level_up - 1e-9)


@settings(max_examples=40, deadline=None)
@given(tailwater=st.floats(0.05, 5.0), diameter=st.sampled_from([0.15, 0.3, 0.9]), length=st.floats(1.0, 500.0), size=st.integers(1, 4))
def test_a_flat_pipe_without_flow_stands_at_the_tailwater_level(tailwater: float, diameter: float, length: float, size: int) -> None:
    # common practice, no source: still water is level.
    tree = Tree(0, size)
    tree.parent = np.arange(size)  # a chain
    tree.diameter, tree.slope, tree.length = np.full(size, diameter), np.zeros(size), np.full(size, length)
    tree.up_invert = tree.down_invert = np.zeros(size)
    result = tree.sweep(tailwater, flow=np.zeros(size), rims=False)
    np.testing.assert_allclose(result.node_level, tailwater, rtol=0.0, atol=1e-12)
    assert set(result.regime.tolist()) == {PipeRegime.DRY}


@settings(max_examples=150, deadline=None)
@given(seed=SEEDS, size=SIZES, tailwater=st.floats(-2.0, 4.0), loss=st.floats(0.25, 1.0))
def test_levels_do_not_fall_going_upstream_except_where_a_pipe_falls_freely(seed: int, size: int, tailwater: float, loss: float) -> None:
    # A pipe whose outlet is free of its node's level (a free fall, supercritical flow the level
    # does not drown, a full outlet over its capacity) or with a hydraulic jump may end above or
    # below the node level; any other pipe's upstream node is at least as high as its
    # downstream node.
    tree = Tree(seed, size)
    result = tree.sweep(tailwater, loss=loss, rims=False)  # no spilling at a rim
    controlled = ~result.free_outlet & ~result.jump
    rise = result.node_level[np.arange(1, size + 1)] - result.node_level[tree.parent]
    assert np.all(rise[controlled] >= -1e-9)


@settings(max_examples=150, deadline=None)
@given(seed=SEEDS, size=SIZES, tailwater=st.floats(-2.0, 4.0))
def test_a_node_is_never_below_the_level_its_incoming_pipes_end_at(seed: int, size: int, tailwater: float) -> None:
    tree = Tree(seed, size)
    result = tree.sweep(tailwater, rims=False)  # no spilling at a rim
    controlled = ~result.free_outlet
    assert np.all(result.node_level[tree.parent][controlled] >= result.level_down[controlled] - 1e-9)
    assert np.all(result.level_down[~controlled] != result.node_level[tree.parent][~controlled])
