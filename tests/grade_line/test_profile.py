"""Friction slope and the direct step method: round trips, limits and an independent integration."""

from __future__ import annotations

import numpy as np
import pytest
from scipy.integrate import solve_ivp

from audit.grade_line import direct_step, friction_slope, full_bore_slope
from audit.grade_line.profile import FINEST_STEP, read_profile, step_weights
from audit.grade_line.tables import SectionTables
from audit.hydraulics import Friction, PipeSections, full_bore, normal_depth

G = 9.80665  # [m/s2] (CGPM 1901)


def circles(diameter: np.ndarray | float, count: int = 1) -> PipeSections:
    size = np.broadcast_to(np.asarray(diameter, dtype=float), (count,))
    return PipeSections.from_names(["circular"] * count, size, size)


@pytest.mark.parametrize(("formula", "roughness"), [("manning", 0.013), ("chezy", 55.0), ("colebrook-white", 0.6), ("colebrook-white", 0.0)])
def test_the_friction_slope_is_the_slope_at_which_the_law_carries_the_flow(formula: str, roughness: float) -> None:
    rng = np.random.default_rng(4)
    radius, slope = rng.uniform(0.02, 0.6, 500), 10.0 ** rng.uniform(-5.0, -1.0, 500)
    friction = Friction.uniform(formula, roughness, 500)  # type: ignore[arg-type]
    area = np.pi * (4.0 * radius) ** 2 / 4.0
    flow = area * friction.velocity(radius, slope)
    np.testing.assert_allclose(friction_slope(area, radius, flow, friction), slope, rtol=1e-9)


def test_the_full_bore_friction_slope_by_manning_is_the_bed_slope_times_the_load_ratio_squared() -> None:
    # Source: Manning at full bore, Sf = S0 (Q / Qf)^2 (Chow 1959, eq. 5-6).
    pipes, slope = circles(np.array([0.3, 0.6, 1.2]), 3), np.array([0.004, 0.002, 0.001])
    friction = Friction.uniform("manning", 0.013, 3)
    capacity, _ = full_bore(pipes, slope, friction)
    flow = capacity * np.array([0.5, 1.0, 1.7])
    np.testing.assert_allclose(full_bore_slope(pipes, flow, friction, np.arange(3)), slope * (flow / capacity) ** 2, rtol=1e-12)
    assert np.isnan(full_bore_slope(pipes, np.zeros(3), friction, np.arange(3))).all()


def test_the_depth_steps_run_from_the_start_to_the_end() -> None:
    weights = step_weights(16)
    assert weights[0] == 1.0
    assert weights[-1] == 0.0
    assert weights[-2] == pytest.approx(FINEST_STEP)
    assert np.all(np.diff(weights) < 0)
    weights[0] = 5.0  # a copy: the cached weights are not changed
    assert step_weights(16)[0] == 1.0


def _mild(count: int = 1, share: float = 0.5) -> tuple[PipeSections, Friction, np.ndarray, np.ndarray, np.ndarray]:
    pipes, friction, slope = circles(0.6, count), Friction.uniform("manning", 0.013, count), np.full(count, 0.002)
    flow = share * full_bore(pipes, slope, friction)[0]
    return pipes, friction, slope, flow, normal_depth(flow, pipes, slope, friction).depth


def test_an_m1_curve_falls_toward_normal_depth_going_upstream() -> None:
    pipes, friction, slope, flow, normal = _mild(6)
    run = np.array([0.0, 5.0, 20.0, 80.0, 300.0, 1e5])
    depth, left = direct_step(pipes, friction, np.arange(6), flow=flow, slope=slope, start=np.full(6, 0.55), stop=normal, run=run, steps=16)
    assert depth[0] == 0.55
    assert np.all(np.diff(depth[:5]) < 0)
    assert depth[-1] == normal[-1]
    assert left[-1] > 0
    assert np.all(left[:4] == 0)


def test_tabulated_and_exact_sections_give_the_same_profile() -> None:
    pipes, friction, slope, flow, normal = _mild(4, share=0.8)
    arguments = {"flow": flow, "slope": slope, "start": np.array([0.5, 0.55, 0.59, 0.45]), "stop": normal, "run": np.array([10.0, 40.0, 90.0, 200.0]), "steps": 16}
    exact, _ = direct_step(pipes, friction, np.arange(4), **arguments)  # type: ignore[arg-type]
    read, _ = direct_step(pipes, friction, np.arange(4), tables=SectionTables.build(pipes), **arguments)  # type: ignore[arg-type]
    np.testing.assert_allclose(read, exact, rtol=1e-5)


def test_read_profile_interpolates_between_points_and_reports_the_run_beyond_the_end() -> None:
    depth = np.array([[1.0, 0.8, 0.5], [1.0, 0.8, 0.5]])
    distance = np.array([[10.0, 30.0], [10.0, 30.0]])
    found, left = read_profile(depth, distance, np.array([20.0, 45.0]), np.array([0.5, 0.5]))
    np.testing.assert_allclose(found, [0.65, 0.5])
    np.testing.assert_allclose(left, [0.0, 15.0])


def test_a_step_against_the_energy_ends_the_profile() -> None:
    # A start below critical depth on a mild pipe cannot rise to normal depth by a subcritical
    # curve: the first step is infinitely long and the depth stays where it starts.
    pipes, friction, slope, flow, normal = _mild()
    depth, left = direct_step(pipes, friction, np.arange(1), flow=flow, slope=slope, start=normal * 0.3, stop=normal, run=np.array([50.0]), steps=8)
    assert depth[0] == pytest.approx(normal[0] * 0.3)
    assert left[0] == 0.0


@pytest.mark.parametrize(("bed", "length"), [(0.0, 10.0), (0.0, 60.0), (0.0, 250.0), (-0.002, 10.0), (-0.002, 40.0)])
def test_the_h2_and_a2_curves_match_an_independent_integration(bed: float, length: float) -> None:
    # dy/dx = (S0 - Sf) / (1 - Fr^2) (Chow 1959, eq. 9-13), the circle written out here and
    # integrated upstream from just above critical depth with solve_ivp. The depth of a flat or
    # adverse pipe rises upstream; its direct-step profile is within about 1.5 %.
    diameter, flow, n = 0.45, 0.03, 0.013

    def circle(y: float) -> tuple[float, float, float]:
        theta = 2.0 * np.arccos(1.0 - 2.0 * min(y, diameter) / diameter)
        return diameter**2 / 8.0 * (theta - np.sin(theta)), diameter * theta / 2.0, diameter * np.sin(theta / 2.0)

    def upstream_slope(_: float, y: np.ndarray) -> list[float]:
        a, p, t = circle(float(y[0]))
        return [-(bed - (flow * n / (a * (a / p) ** (2.0 / 3.0))) ** 2) / (1.0 - flow**2 * t / (G * a**3))]

    start = 0.12  # above the critical depth of 0.03 m3/s in this pipe (about 0.115 m)
    a, _, t = circle(start)
    assert flow**2 * t / (G * a**3) < 1.0
    expected = solve_ivp(upstream_slope, (0.0, length), [start], rtol=1e-11, atol=1e-13).y[0, -1]
    depth, left = direct_step(
        circles(diameter), Friction.uniform("manning", n, 1), np.arange(1), flow=np.array([flow]), slope=np.array([bed]),
        start=np.array([start]), stop=np.array([diameter]), run=np.array([length]), steps=16,
    )  # fmt: skip
    assert expected < diameter
    assert left[0] == 0.0
    assert depth[0] == pytest.approx(expected, rel=0.015)
