"""Section tables against the exact section elements and an independent first moment."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pytest
import shapely

from audit.grade_line.tables import SectionTables, width_affine, width_free
from audit.hydraulics import Circular, Egg, PipeSections, Rectangular, TabulatedSection, Trapezoidal

Array = np.ndarray


@dataclass(frozen=True)
class Lens:
    """A shape whose area grows with the square of its width: not affine, so not tabulated."""

    name: str = "test_lens"

    def elements(self, eta: Array, height: Array, width: Array) -> tuple[Array, Array, Array]:
        y = np.clip(eta, 0.0, 1.0) * height
        return width**2 * y, width**2 + 2.0 * y, width**2 + 0.0 * y

    def full(self, height: Array, width: Array) -> tuple[Array, Array]:
        return width**2 * height, 2.0 * (width**2 + height)

    @property
    def eta_capacity(self) -> float:
        return 1.0


ARCH = TabulatedSection.from_outline("test_arch", shapely.Polygon([(0, 0), (2, 0), (2, 1), (1.7, 1.6), (1, 1.9), (0.3, 1.6), (0, 1)]))
SHAPES = (Circular(), Egg(), Rectangular(), Trapezoidal(side_slope=2.0), ARCH)


def mixed(count: int, seed: int = 0) -> PipeSections:
    """Pipes of every shape of ``SHAPES`` with random sizes and aspects."""
    rng = np.random.default_rng(seed)
    kind = rng.integers(0, len(SHAPES), count)
    height = rng.uniform(0.2, 2.0, count)
    width = height * rng.uniform(0.4, 3.0, count)
    return PipeSections(kind.astype(np.int64), height, width, SHAPES)


def test_readings_agree_with_the_exact_elements() -> None:
    pipes = mixed(4000)
    tables = SectionTables.build(pipes)
    eta = np.random.default_rng(1).uniform(0.01, 1.0, len(pipes))
    every = np.arange(len(pipes))
    (area, perimeter, top), (exact_area, exact_perimeter, exact_top) = tables.elements(eta, every), pipes.elements(eta)
    below = eta <= 0.95
    np.testing.assert_allclose(area, exact_area, rtol=1e-6)
    np.testing.assert_allclose(perimeter[below], exact_perimeter[below], rtol=1e-6)
    np.testing.assert_allclose(top[below], exact_top[below], rtol=1e-6)
    # near a curved crown the perimeter and the top width change like the square root of the
    # distance to it, which linear interpolation follows less closely
    np.testing.assert_allclose(perimeter, exact_perimeter, rtol=5e-5)
    np.testing.assert_allclose(top, exact_top, rtol=3e-3)
    np.testing.assert_array_equal(tables.area_perimeter(eta, every)[0], area)
    np.testing.assert_array_equal(tables.area_perimeter(eta, every)[1], perimeter)


def test_a_row_of_depths_per_pipe_reads_like_one_at_a_time() -> None:
    pipes = mixed(50)
    tables = SectionTables.build(pipes)
    eta = np.random.default_rng(2).uniform(0.0, 1.0, (50, 7))
    every = np.arange(50)
    area, perimeter = tables.area_perimeter(eta, every)
    flat_area, flat_perimeter = tables.area_perimeter(eta.ravel(), np.repeat(every, 7))
    np.testing.assert_array_equal(area.ravel(), flat_area)
    np.testing.assert_array_equal(perimeter.ravel(), flat_perimeter)


@pytest.mark.parametrize("code", range(len(SHAPES)))
def test_the_first_moment_is_the_integral_of_the_area(code: int) -> None:
    # A zbar = integral of A(y') dy' from 0 to y (Chow 1959, sec. 3-7), summed here on a grid
    # 200 times finer than the tables'.
    height, width = 1.3, 1.1
    pipes = PipeSections(np.array([code] * 5, dtype=np.int64), np.full(5, height), np.full(5, width), SHAPES)
    eta = np.array([0.05, 0.3, 0.5, 0.8, 1.0])
    levels = np.linspace(0.0, height, 400_001)
    area = SHAPES[code].elements(levels / height, np.full(levels.size, height), np.full(levels.size, width))[0]
    below = np.concatenate([[0.0], np.cumsum(0.5 * (area[1:] + area[:-1]) * np.diff(levels))])  # a fine trapezoidal sum
    expected = np.interp(eta * height, levels, below)
    np.testing.assert_allclose(SectionTables.build(pipes).moment(eta, np.arange(5)), expected, rtol=1e-6)
    # Gauss-Legendre on the exact area: the kinks of a tabulated outline and a curved crown limit it
    np.testing.assert_allclose(SectionTables.build(pipes, tabulate=False).moment(eta, np.arange(5)), expected, rtol=1e-4)


def test_which_shapes_depend_on_the_width() -> None:
    assert [width_free(shape) for shape in SHAPES] == [True, True, False, False, True]
    assert all(width_affine(shape) for shape in SHAPES)
    assert not width_affine(Lens())


def test_a_shape_that_is_not_affine_in_its_width_is_read_exactly() -> None:
    pipes = PipeSections(np.array([0, 1, 0], dtype=np.int64), np.array([1.0, 0.6, 2.0]), np.array([1.5, 0.6, 0.7]), (Lens(), Circular()))
    tables = SectionTables.build(pipes)
    assert tables.row.tolist() == [-1, 0, -1]
    eta = np.array([0.4, 0.5, 0.9])
    area, perimeter, top = tables.elements(eta, np.arange(3))
    exact = pipes.elements(eta)
    np.testing.assert_array_equal(area[[0, 2]], exact[0][[0, 2]])
    np.testing.assert_allclose(area, exact[0], rtol=2e-6)
    np.testing.assert_allclose(top, exact[2], rtol=2e-6)
    np.testing.assert_allclose(perimeter, exact[1], rtol=2e-6)
    assert tables.moment(eta, np.arange(3))[0] == pytest.approx(1.5**2 * 0.4**2 / 2.0, rel=1e-12)  # B^2 y^2 / 2


def test_without_tabulation_every_reading_is_exact() -> None:
    pipes = mixed(200)
    tables = SectionTables.build(pipes, tabulate=False)
    eta = np.random.default_rng(3).uniform(0.0, 1.0, 200)
    for read, exact in zip(tables.elements(eta, np.arange(200)), pipes.elements(eta), strict=True):
        np.testing.assert_array_equal(read, exact)


@pytest.mark.parametrize("tabulate", [True, False], ids=["tabulated", "exact"])
def test_the_surface_terms_read_together_are_the_area_top_width_and_moment(tabulate: bool) -> None:
    some = mixed(300)  # every registered shape, and one lens last
    pipes = PipeSections(np.r_[some.kind, len(SHAPES)], np.r_[some.height, 1.0], np.r_[some.width, 1.5], (*SHAPES, Lens()))
    tables = SectionTables.build(pipes, tabulate=tabulate)
    eta = np.random.default_rng(4).uniform(0.0, 1.0, len(pipes))
    every = np.arange(len(pipes))
    area, top, moment = tables.surface_terms(eta, every)
    expected_area, _, expected_top = tables.elements(eta, every)
    np.testing.assert_array_equal(area, expected_area)
    np.testing.assert_array_equal(top, expected_top)
    np.testing.assert_array_equal(moment, tables.moment(eta, every))
    assert moment[-1] == pytest.approx(1.5**2 * eta[-1] ** 2 / 2.0, rel=1e-12)  # the lens, never tabulated: B^2 y^2 / 2
    tabulated = every[:-1]
    area, top, moment = tables.surface_terms(eta[:-1], tabulated)  # every pipe tabulated: one look-up
    np.testing.assert_array_equal(area, tables.elements(eta[:-1], tabulated)[0])
    np.testing.assert_array_equal(moment, tables.moment(eta[:-1], tabulated))
