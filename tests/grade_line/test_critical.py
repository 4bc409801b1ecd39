"""Critical depth, Froude number, specific force and sequent depth on sections of every shape."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.integrate import quad
from scipy.optimize import brentq

from audit.grade_line import critical_depth, froude_number, sequent_depth, specific_force
from audit.grade_line.tables import SectionTables
from audit.hydraulics import PipeSections

G = 9.80665  # [m/s2] (CGPM 1901)


def sections(name: str, count: int = 1, height: float = 0.9) -> PipeSections:
    width = {"egg": height / 1.5, "rectangular": 1.4 * height}.get(name, height)
    return PipeSections.from_names([name] * count, np.full(count, height), np.full(count, width))


def circle_moment(y: float, d: float) -> float:
    """First moment of a circular segment of depth y about its chord-level surface.

    :math:`A \\bar z = \\int_0^y A(\\eta)\\, d\\eta`, integrated here by scipy's adaptive
    quadrature of the circle's area written out (Chow 1959, table 2-1).
    """

    def area(h: float) -> float:
        theta = 2.0 * np.arccos(1.0 - 2.0 * h / d)
        return d * d / 8.0 * (theta - np.sin(theta))

    return float(quad(area, 0.0, y, epsabs=1e-14, epsrel=1e-12)[0])


@pytest.mark.parametrize("name", ["circular", "egg", "rectangular"])
def test_the_froude_number_is_one_at_critical_depth(name: str) -> None:
    pipes = sections(name, 5)
    flow = np.array([0.001, 0.05, 0.3, 0.9, 1.5])
    depth = critical_depth(pipes, flow)
    capped = depth >= pipes.eta_capacity() * pipes.height * (1 - 1e-12)
    np.testing.assert_allclose(froude_number(pipes, flow, depth)[~capped], 1.0, rtol=1e-6)
    assert np.all(froude_number(pipes, flow, depth)[capped] > 1.0)


def test_critical_depth_of_no_flow_is_zero_and_of_bad_input_nan() -> None:
    pipes = PipeSections.from_names(["circular", "circular", "circular", "oval"], [0.3, 0.3, np.nan, 0.3], [0.3, 0.3, 0.3, 0.3])
    depth = critical_depth(pipes, np.array([0.0, np.nan, 0.1, 0.1]))
    assert depth[0] == 0.0
    assert np.isnan(depth[1:]).all()


def test_critical_depth_keeps_the_order_of_index() -> None:
    pipes = PipeSections.from_names(["circular", "rectangular", "egg"], [0.6, 0.5, 0.9], [0.6, 1.0, 0.6])
    flow = np.array([0.2, 0.3, 0.1])
    whole = critical_depth(pipes, flow)
    picked = critical_depth(pipes, flow[[2, 0]], index=np.array([2, 0]))
    np.testing.assert_allclose(picked, whole[[2, 0]], rtol=1e-12)


def test_critical_depth_of_a_tiny_flow_in_a_large_pipe_is_still_solved() -> None:
    # Below the inverted table's range (1e-6 of the height) the root is solved directly.
    pipes = sections("circular", height=3.0)
    depth = critical_depth(pipes, np.array([1e-12]))[0]
    assert 0.0 < depth < 3e-6
    assert froude_number(pipes, np.array([1e-12]), np.array([depth]))[0] == pytest.approx(1.0, rel=1e-5)


def test_specific_force_of_a_rectangle_is_the_closed_form() -> None:
    # Source: Chow (1959), sec. 3-7: M = Q^2 / (g B y) + B y^2 / 2 for a rectangle.
    box = PipeSections.from_names(["rectangular"] * 3, [2.0] * 3, [1.5] * 3)
    flow, depth = np.array([0.5, 1.0, 2.0]), np.array([0.2, 0.8, 1.7])
    expected = flow**2 / (G * 1.5 * depth) + 1.5 * depth**2 / 2.0
    np.testing.assert_allclose(specific_force(box, flow, depth), expected, rtol=1e-12)


@pytest.mark.parametrize("fill", [0.05, 0.3, 0.6, 0.95])
def test_specific_force_of_a_circle_against_an_independent_moment(fill: float) -> None:
    d, flow = 0.8, 0.4
    theta = 2.0 * np.arccos(1.0 - 2.0 * fill)
    area = d * d / 8.0 * (theta - np.sin(theta))
    expected = flow**2 / (G * area) + circle_moment(fill * d, d)
    exact = specific_force(sections("circular", height=d), np.array([flow]), np.array([fill * d]))[0]
    tabulated = specific_force(sections("circular", height=d), np.array([flow]), np.array([fill * d]), tables=SectionTables.build(sections("circular", height=d)))[0]
    assert exact == pytest.approx(expected, rel=1e-5)  # Gauss-Legendre, 16 points: the crown's root-type edge limits it
    assert tabulated == pytest.approx(expected, rel=1e-6)


@pytest.mark.parametrize("froude", [1.2, 2.0, 4.0, 8.0])
def test_sequent_depth_of_a_rectangle_is_belangers(froude: float) -> None:
    # Source: Chow (1959), ch. 15: y2 / y1 = (sqrt(1 + 8 Fr1^2) - 1) / 2 in a rectangle.
    width, y1 = 2.0, 0.1
    flow = froude * np.sqrt(G * y1) * y1 * width
    box = PipeSections.from_names(["rectangular"], [50.0], [width])
    y2 = sequent_depth(box, np.array([flow]), np.array([y1]), critical_depth(box, np.array([flow])))
    assert y2[0] == pytest.approx(y1 * (np.sqrt(1.0 + 8.0 * froude**2) - 1.0) / 2.0, rel=1e-8)


@settings(max_examples=60, deadline=None)
@given(share=st.floats(0.05, 0.95), fill=st.floats(0.02, 0.6), name=st.sampled_from(["circular", "egg", "rectangular"]))
def test_the_sequent_depth_has_the_specific_force_of_the_supercritical_flow(share: float, fill: float, name: str) -> None:
    pipes = sections(name)
    critical = fill * 0.9
    area, _, top = pipes.elements(np.array([fill]))
    flow = np.sqrt(G * area**3 / top)  # critical at the chosen depth
    low = share * critical
    y2 = sequent_depth(pipes, flow, np.array([low]), np.array([critical]))[0]
    tabulated = sequent_depth(pipes, flow, np.array([low]), np.array([critical]), tables=SectionTables.build(pipes))[0]
    force = specific_force(pipes, flow, np.array([low]))[0]
    if y2 < 0.9:
        assert specific_force(pipes, flow, np.array([y2]))[0] == pytest.approx(force, rel=1e-8)
        assert critical < y2
    else:  # the jump would need more than the full section: capped at the crown
        assert specific_force(pipes, flow, np.array([0.9]))[0] <= force
    assert tabulated == pytest.approx(y2, rel=1e-5)


def test_sequent_depth_of_a_circle_against_an_independent_root() -> None:
    # M(y2) = M(y1) with the circle and its first moment written out here, solved by brentq.
    d, flow, y1 = 1.0, 0.6, 0.25

    def force(y: float) -> float:
        theta = 2.0 * np.arccos(1.0 - 2.0 * y / d)
        return flow**2 / (G * d * d / 8.0 * (theta - np.sin(theta))) + circle_moment(y, d)

    yc = critical_depth(sections("circular", height=d), np.array([flow]))
    expected = brentq(lambda y: force(y) - force(y1), yc[0], 0.999 * d, xtol=1e-14)
    y2 = sequent_depth(sections("circular", height=d), np.array([flow]), np.array([y1]), yc)[0]
    assert y2 == pytest.approx(expected, rel=1e-8)


def test_no_sequent_depth_for_a_subcritical_depth() -> None:
    pipes = sections("circular")
    critical = critical_depth(pipes, np.array([0.2]))
    assert np.isnan(sequent_depth(pipes, np.array([0.2]), critical * 1.1, critical)[0])
