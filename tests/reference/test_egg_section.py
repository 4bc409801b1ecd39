"""The standard egg-shaped section against handbook ratios."""

import numpy as np
import pytest

from audit.hydraulics.friction import Friction
from audit.hydraulics.sections import Egg, PipeSections
from audit.hydraulics.uniform import capacity_peak, full_bore


def test_full_area_perimeter_and_hydraulic_radius_match_the_handbook() -> None:
    # Source: Butler and Davies, Urban Drainage (2011), egg-shaped sewer of top radius R:
    # area 4.594 R^2, wetted perimeter 7.930 R, hydraulic radius 0.579 R (from memory).
    radius = 0.4
    height = 3 * radius
    area, perimeter = Egg().full(np.array(height), np.array(2 * radius))
    assert float(area) / radius**2 == pytest.approx(4.594, abs=0.001)
    assert float(perimeter) / radius == pytest.approx(7.930, abs=0.001)
    assert float(area / perimeter) / radius == pytest.approx(0.579, abs=0.001)


def test_widest_level_and_top_width_follow_the_arcs() -> None:
    # The standard ovoid (from memory, Butler and Davies 2011): width 2R at level 2R, i.e.
    # at two thirds of the height; the invert arc has radius R/2.
    height = 1.5
    _, _, top = Egg().elements(np.array([2 / 3, 0.2 / 3, 1.0]), np.full(3, height), np.full(3, 1.0))
    radius = height / 3
    assert top[0] == pytest.approx(2 * radius, rel=1e-12)
    # at level 0.2R the invert arc (radius R/2, centre R/2) is 0.4R from the axis
    assert top[1] == pytest.approx(0.8 * radius, rel=1e-12)
    assert top[2] == pytest.approx(0.0, abs=1e-12)


def test_egg_discharge_peaks_higher_in_the_section_than_a_circle() -> None:
    # common practice, no source: the egg's narrow soffit arc puts the peak of discharge higher
    # in the section than the circle's 0.938, and like any curved soffit above full bore.
    egg = PipeSections.from_names(["egg"], np.array([1.2]), np.array([0.8]))
    slope, friction = np.array([0.002]), Friction.uniform("manning", 0.013, 1)
    eta, q_max = capacity_peak(egg, slope, friction)
    q_full, _ = full_bore(egg, slope, friction)
    assert 0.94 < eta[0] < 0.97
    assert 1.0 < q_max[0] / q_full[0] < 1.076
