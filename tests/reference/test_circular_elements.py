"""Circular part-full hydraulics against published tables and reference libraries."""

import fluids
import numpy as np
import pytest

from audit.hydraulics.friction import Friction, water_kinematic_viscosity
from audit.hydraulics.sections import Circular, PipeSections
from audit.hydraulics.uniform import capacity_peak, discharge_at, full_bore, normal_depth

# Hydraulic elements of a circular section with constant Manning n:
# y/D, A/Af, R/Rf, V/Vf, Q/Qf.
# Source: ASCE and WEF, Gravity Sanitary Sewer Design and Construction (MOP FD-5 / MOP 60),
# chart of hydraulic elements for circular sections; values read to 3 decimals, from memory.
HYDRAULIC_ELEMENTS = [
    (0.1, 0.052, 0.254, 0.401, 0.021),
    (0.2, 0.142, 0.482, 0.615, 0.088),
    (0.3, 0.252, 0.684, 0.776, 0.196),
    (0.4, 0.374, 0.857, 0.902, 0.337),
    (0.5, 0.500, 1.000, 1.000, 0.500),
    (0.6, 0.626, 1.110, 1.072, 0.672),
    (0.7, 0.748, 1.185, 1.120, 0.837),
    (0.8, 0.858, 1.217, 1.140, 0.977),
    (0.9, 0.949, 1.192, 1.124, 1.066),
    (1.0, 1.000, 1.000, 1.000, 1.000),
]


def one_pipe(diameter: float = 0.6, count: int = 1) -> PipeSections:
    size = np.full(count, diameter)
    return PipeSections.from_names(["circular"] * count, size, size)


@pytest.mark.parametrize(("eta", "area", "radius", "velocity", "discharge"), HYDRAULIC_ELEMENTS)
def test_relative_elements_match_the_published_chart(eta: float, area: float, radius: float, velocity: float, discharge: float) -> None:
    pipe = one_pipe()
    slope, friction = np.array([0.003]), Friction.uniform("manning", 0.013, 1)
    a, p, _ = pipe.elements(np.array([eta]))
    full_area, full_perimeter = pipe.full()
    q_full, v_full = full_bore(pipe, slope, friction)
    q = discharge_at(pipe, np.array([eta]), slope, friction)
    assert a / full_area == pytest.approx(area, abs=0.0015)
    assert (a / p) / (full_area / full_perimeter) == pytest.approx(radius, abs=0.0015)
    assert q / q_full == pytest.approx(discharge, abs=0.0015)
    assert (q / a) / v_full == pytest.approx(velocity, abs=0.0015)


def test_discharge_and_velocity_maxima_and_the_depth_where_q_equals_qf() -> None:
    # common practice, no source: Qmax about 1.076 Qf near y/D 0.94; Vmax about 1.14 Vf near
    # y/D 0.81; Q = Qf again near y/D 0.82.
    pipe, slope, friction = one_pipe(), np.array([0.002]), Friction.uniform("manning", 0.013, 1)
    q_full, v_full = full_bore(pipe, slope, friction)
    eta_peak, q_max = capacity_peak(pipe, slope, friction)
    assert eta_peak[0] == pytest.approx(0.938, abs=0.002)
    assert q_max[0] / q_full[0] == pytest.approx(1.076, abs=0.001)
    eta = np.linspace(0.5, 1.0, 50001)
    velocity = discharge_at(one_pipe(count=eta.size), eta, np.full(eta.size, 0.002), Friction.uniform("manning", 0.013, eta.size))
    velocity /= one_pipe(count=eta.size).elements(eta)[0]
    assert eta[np.argmax(velocity)] == pytest.approx(0.813, abs=0.002)
    assert velocity.max() / v_full[0] == pytest.approx(1.140, abs=0.001)
    state = normal_depth(q_full, pipe, slope, friction)
    assert state.depth_ratio[0] == pytest.approx(0.82, abs=0.003)


def test_velocity_at_small_fractions_of_full_flow() -> None:
    # common practice, no source: at 10 % of Qf the velocity is about 64 % of Vf, at 1 % about 32 %.
    pipe, slope, friction = one_pipe(count=2), np.full(2, 0.004), Friction.uniform("manning", 0.013, 2)
    q_full, v_full = full_bore(pipe, slope, friction)
    state = normal_depth(q_full * [0.10, 0.01], pipe, slope, friction)
    assert state.velocity / v_full == pytest.approx([0.64, 0.32], abs=0.01)


@pytest.mark.parametrize("eta", [0.05, 0.25, 0.5, 0.75, 0.95])
def test_part_full_area_matches_fluids_partial_circle(eta: float) -> None:
    # Source: fluids.A_partial_circle (Caleb Bell, fluids library).
    diameter = 0.45
    area, _, _ = Circular().elements(np.array(eta), np.array(diameter), np.array(diameter))
    assert float(area) == pytest.approx(fluids.A_partial_circle(diameter, eta * diameter), rel=1e-10)


@pytest.mark.parametrize(("diameter", "slope", "n"), [(0.3, 0.005, 0.013), (1.2, 0.0004, 0.015), (0.15, 0.02, 0.010)])
def test_manning_full_bore_velocity_matches_fluids(diameter: float, slope: float, n: float) -> None:
    # Source: fluids.V_Manning(Rh, S, n).
    _, v_full = full_bore(one_pipe(diameter), np.array([slope]), Friction.uniform("manning", n, 1))
    assert v_full[0] == pytest.approx(fluids.V_Manning(diameter / 4, slope, n), rel=1e-12)


@pytest.mark.parametrize(("diameter", "slope", "ks_mm"), [(0.3, 0.005, 0.6), (0.9, 0.0008, 1.5), (0.15, 0.03, 0.03), (1.5, 0.0003, 6.0)])
def test_colebrook_white_full_bore_satisfies_darcy_weisbach_with_fluids_colebrook(diameter: float, slope: float, ks_mm: float) -> None:
    # Source: fluids.Colebrook(Re, eD) solves the Colebrook equation for the Darcy friction
    # factor; Darcy-Weisbach S = f V^2 / (2 g D) must then give back the pipe's slope.
    nu = float(water_kinematic_viscosity(15.0))
    _, v_full = full_bore(one_pipe(diameter), np.array([slope]), Friction.uniform("colebrook-white", ks_mm, 1))
    velocity = float(v_full[0])
    darcy = fluids.Colebrook(velocity * diameter / nu, ks_mm / 1000 / diameter)
    assert darcy * velocity**2 / (2 * 9.80665 * diameter) == pytest.approx(slope, rel=1e-9)


# Minimum slopes of the Recommended Standards for Wastewater Facilities (Great Lakes - Upper
# Mississippi River Board, 2014, sec. 33.41; values from memory): diameter [in] -> slope [%].
MINIMUM_SLOPES_PERCENT = {8: 0.40, 10: 0.28, 12: 0.22, 15: 0.15, 18: 0.12, 21: 0.10, 24: 0.08, 27: 0.067, 30: 0.058, 36: 0.046}


def test_recommended_standards_minimum_slopes_give_about_two_feet_per_second_full() -> None:
    # Source: Recommended Standards for Wastewater Facilities, sec. 33.41 (from memory): the
    # minimum slopes are set so that n = 0.013 gives about 2 ft/s flowing full.
    inches = np.array(list(MINIMUM_SLOPES_PERCENT), dtype=float)
    slopes = np.array(list(MINIMUM_SLOPES_PERCENT.values())) / 100
    diameter = inches * 0.0254
    pipes = PipeSections.from_names(["circular"] * inches.size, diameter, diameter)
    _, v_full = full_bore(pipes, slopes, Friction.uniform("manning", 0.013, inches.size))
    feet_per_second = v_full / 0.3048
    assert np.all(feet_per_second > 1.95)
    assert np.all(feet_per_second < 2.25)
