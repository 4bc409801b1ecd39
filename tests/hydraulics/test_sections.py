"""Cross-section geometry: closed forms against tabulated outlines of the same shapes."""

import numpy as np
import pytest
import shapely

from audit.hydraulics.sections import (
    DEFAULT_SIDE_SLOPE,
    Circular,
    Egg,
    OpenRectangular,
    PipeSections,
    Rectangular,
    TabulatedSection,
    Trapezoidal,
    register_section,
    section_names,
)

ETA = np.linspace(0.0, 1.0, 41)


def circle_outline(vertices: int = 4000) -> shapely.Polygon:
    angle = np.linspace(0, 2 * np.pi, vertices, endpoint=False)
    return shapely.Polygon(np.c_[np.cos(angle), 1 + np.sin(angle)])


def egg_outline(levels: int = 4001) -> shapely.Polygon:
    """The egg's outline drawn from its own arcs, independently of Egg.elements."""
    radius = 1.0
    level = np.linspace(0.0, 3.0, levels)
    half = np.select(
        [level <= 0.2, level <= 2.0],
        [np.sqrt(np.maximum(0.25 - (level - 0.5) ** 2, 0)), -2 + np.sqrt(9 - (level - 2) ** 2)],
        np.sqrt(np.maximum(1 - (level - 2) ** 2, 0)),
    ) * radius
    return shapely.Polygon(np.r_[np.c_[half, level], np.c_[-half[::-1], level[::-1]]])


def compare(section: object, table: TabulatedSection, height: float, width: float, tolerance: float) -> None:
    h, w = np.full(ETA.size, height), np.full(ETA.size, width)
    for exact, tabulated in zip(section.elements(ETA, h, w), table.elements(ETA, h, w), strict=True):  # type: ignore[attr-defined]
        np.testing.assert_allclose(tabulated, exact, atol=tolerance * height)
    np.testing.assert_allclose(table.full(h, w), section.full(h, w), rtol=tolerance)  # type: ignore[attr-defined]


def test_circular_matches_its_tabulated_outline() -> None:
    compare(Circular(), TabulatedSection.from_outline("round", circle_outline()), 0.9, 0.9, 1e-5)


def test_egg_matches_an_outline_drawn_from_its_arcs() -> None:
    compare(Egg(), TabulatedSection.from_outline("ovoid", egg_outline()), 1.5, 1.0, 1e-4)


def test_rectangle_matches_a_box_outline_and_wets_the_lid_only_when_full() -> None:
    box = TabulatedSection.from_outline("box", shapely.box(0, 0, 1.8, 1.2))
    compare(Rectangular(), box, 1.2, 1.8, 1e-9)
    area, perimeter, top = Rectangular().elements(np.array([0.5, 1.0]), np.array(1.2), np.array(1.8))
    np.testing.assert_allclose(area, [1.08, 2.16])
    np.testing.assert_allclose(perimeter, [1.8 + 1.2, 1.8 + 2.4])
    np.testing.assert_allclose(top, [1.8, 1.8])
    assert Rectangular().full(np.array(1.2), np.array(1.8))[1] == pytest.approx(6.0)
    assert box.eta_capacity == 1.0


def test_horseshoe_outline_is_tabulated_and_registered() -> None:
    # A horseshoe-like arch: semicircular crown on a flat-bottomed box (invented section).
    angle = np.linspace(0, np.pi, 200)
    crown = np.c_[0.5 + 0.5 * np.cos(angle), 0.5 + 0.5 * np.sin(angle)]
    arch = shapely.Polygon(np.r_[[[0.0, 0.0], [1.0, 0.0]], crown])
    section = TabulatedSection.from_outline("arch", arch)
    register_section(section)
    assert "arch" in section_names()
    pipes = PipeSections.from_names(["arch"], np.array([2.0]), np.array([2.0]))
    area, perimeter = pipes.full()
    # full area = box 2 x 1 plus a half disc of radius 1; perimeter = 2 + 2 x 1 + pi
    assert area[0] == pytest.approx(2 + np.pi / 2, rel=1e-4)
    assert perimeter[0] == pytest.approx(4 + np.pi, rel=1e-4)
    assert 0.85 < section.eta_capacity < 1.0


def test_mixed_pipes_keep_their_order_and_unknown_shapes_give_nan() -> None:
    names = ["egg", "circular", "tunnel", "rectangular", "circular"]
    height = np.array([1.5, 0.3, 1.0, 0.6, 0.9])
    width = np.array([1.0, 0.3, 1.0, 1.2, 0.9])
    pipes = PipeSections.from_names(names, height, width)
    area, _ = pipes.full()
    expected = [Egg().full(np.array(1.5), np.array(1.0))[0], np.pi * 0.3**2 / 4, np.nan, 0.72, np.pi * 0.9**2 / 4]
    np.testing.assert_allclose(area, np.array(expected, dtype=float))
    assert pipes.kind[2] == -1
    half_area, _, _ = pipes.elements(np.full(2, 0.5), np.array([1, 4]))
    np.testing.assert_allclose(half_area, [np.pi * 0.3**2 / 8, np.pi * 0.9**2 / 8])


def test_outline_must_be_a_valid_polygon() -> None:
    with pytest.raises(ValueError, match="bowtie"):
        TabulatedSection.from_outline("bowtie", shapely.Polygon([(0, 0), (1, 1), (1, 0), (0, 1)]))


# Open channels: A = (b + z y) y, P = b + 2 y sqrt(1 + z^2), T = b + 2 z y, written out here.
# Source: Chow, Open-Channel Hydraulics (1959), table 2-1 (rectangle: z = 0).
DEPTHS = np.array([0.0, 0.1, 0.25, 0.5, 0.8, 1.0])


def trapezoid_by_hand(depth: np.ndarray, bottom: float, z: float) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    return (bottom + z * depth) * depth, bottom + 2 * depth * np.sqrt(1 + z**2), bottom + 2 * z * depth


def trapezoid_outline(bottom: float, z: float, height: float) -> shapely.Polygon:
    """The channel drawn as a polygon with its bank-full line on top."""
    return shapely.Polygon([(z * height, 0), (z * height + bottom, 0), (2 * z * height + bottom, height), (0, height)])


def test_open_rectangle_has_no_lid_in_its_perimeter() -> None:
    height, width = 1.2, 2.5
    area, perimeter, top = OpenRectangular().elements(DEPTHS, np.full(6, height), np.full(6, width))
    y = DEPTHS * height
    np.testing.assert_allclose(area, width * y, rtol=1e-14)
    np.testing.assert_allclose(perimeter, width + 2 * y, rtol=1e-14)
    np.testing.assert_allclose(top, width, rtol=1e-14)
    full_area, full_perimeter = OpenRectangular().full(np.array(height), np.array(width))
    assert float(full_area) == pytest.approx(3.0, rel=1e-14)
    assert float(full_perimeter) == pytest.approx(2.5 + 2.4, rel=1e-14)  # no lid, unlike the box's 2 (B + H)
    assert OpenRectangular().eta_capacity == 1.0


@pytest.mark.parametrize(("bottom", "z"), [(1.0, 1.5), (2.0, 0.5), (0.6, 3.0), (0.0, 2.0), (1.5, 0.0)])
def test_trapezoid_matches_the_closed_forms_at_several_depths(bottom: float, z: float) -> None:
    height = 0.9
    area, perimeter, top = Trapezoidal(side_slope=z).elements(DEPTHS, np.full(6, height), np.full(6, bottom))
    for got, expected in zip((area, perimeter, top), trapezoid_by_hand(DEPTHS * height, bottom, z), strict=True):
        np.testing.assert_allclose(got, expected, rtol=1e-14, atol=1e-15)
    full_area, full_perimeter = Trapezoidal(side_slope=z).full(np.array(height), np.array(bottom))
    expected_area, expected_perimeter, _ = trapezoid_by_hand(np.array(height), bottom, z)
    assert float(full_area) == pytest.approx(float(expected_area), rel=1e-14)
    assert float(full_perimeter) == pytest.approx(float(expected_perimeter), rel=1e-14)


def test_a_numeric_example_of_a_trapezoid() -> None:
    # b = 3 m, z = 2, y = 1.5 m: A = (3 + 3) 1.5 = 9 m2, P = 3 + 3 sqrt(5) = 9.7082 m,
    # T = 3 + 6 = 9 m (arithmetic by hand).
    area, perimeter, top = Trapezoidal(side_slope=2.0).elements(np.array(0.75), np.array(2.0), np.array(3.0))
    assert float(area) == pytest.approx(9.0, rel=1e-14)
    assert float(perimeter) == pytest.approx(9.708204, abs=1e-6)
    assert float(top) == pytest.approx(9.0, rel=1e-14)


@pytest.mark.parametrize(("bottom", "z"), [(1.0, 1.5), (2.0, 0.0), (0.8, 2.5)])
def test_open_channels_match_a_tabulated_outline_below_bank_full(bottom: float, z: float) -> None:
    # A tabulated outline has a flat top that it wets only when full; below and at bank-full
    # its part-full elements are those of the open channel, and its full perimeter adds the lid.
    height = 1.0
    table = TabulatedSection.from_outline("channel outline", trapezoid_outline(bottom, z, height))
    channel = Trapezoidal(side_slope=z) if z else OpenRectangular()
    h, b = np.full(ETA.size, height), np.full(ETA.size, bottom)
    for exact, tabulated in zip(channel.elements(ETA, h, b), table.elements(ETA, h, b), strict=True):
        np.testing.assert_allclose(tabulated, exact, atol=1e-9)
    open_area, open_perimeter = channel.full(np.array(height), np.array(bottom))
    table_area, table_perimeter = table.full(np.array(height), np.array(bottom))
    assert float(table_area) == pytest.approx(float(open_area), rel=1e-9)
    assert float(table_perimeter) == pytest.approx(float(open_perimeter) + bottom + 2 * z * height, rel=1e-9)


def test_only_the_channels_are_open() -> None:
    closed = [Circular(), Rectangular(), Egg(), TabulatedSection.from_outline("box", shapely.box(0, 0, 1, 1))]
    assert [section.is_open for section in closed] == [False, False, False, False]
    assert OpenRectangular().is_open
    assert Trapezoidal().is_open
    assert {"open_rectangular", "trapezoidal"} <= set(section_names())


def test_side_slope_per_pipe_builds_one_trapezoid_per_slope() -> None:
    names = ["trapezoidal", "circular", "trapezoidal", "open_rectangular", "trapezoidal", "trapezoidal", "culvert"]
    height = np.array([1.0, 0.6, 1.0, 1.0, 1.0, 1.0, 1.0])
    width = np.array([2.0, 0.6, 2.0, 2.0, 2.0, 2.0, 2.0])
    side_slope = np.array([2.0, 7.0, np.nan, np.nan, 2.0, 0.5, np.nan])  # 7.0 on a circle: ignored
    pipes = PipeSections.from_names(names, height, width, side_slope=side_slope)
    trapezoids = {pipes.shapes[k].side_slope for k in pipes.kind[[0, 2, 4, 5]]}  # type: ignore[attr-defined]
    assert trapezoids == {2.0, DEFAULT_SIDE_SLOPE, 0.5}
    assert pipes.kind[0] == pipes.kind[4]
    assert len(pipes.shapes) == 2 + 3  # circular, open rectangle and three trapezoids
    assert list(pipes.is_open) == [True, False, True, True, True, True, False]
    area, perimeter = pipes.full()
    # by hand: (b + z H) H and b + 2 H sqrt(1 + z^2) with b = 2, H = 1
    expected_area = [4.0, np.pi * 0.09, 3.5, 2.0, 4.0, 2.5, np.nan]
    expected_perimeter = [2 + 2 * np.sqrt(5), np.pi * 0.6, 2 + 2 * np.sqrt(3.25), 4.0, 2 + 2 * np.sqrt(5), 2 + 2 * np.sqrt(1.25), np.nan]
    np.testing.assert_allclose(area, expected_area, rtol=1e-14)
    np.testing.assert_allclose(perimeter, expected_perimeter, rtol=1e-14)
    no_slopes = PipeSections.from_names(["trapezoidal"], [1.0], [2.0])
    assert no_slopes.shapes[0].side_slope == DEFAULT_SIDE_SLOPE  # type: ignore[attr-defined]


def test_sizes_that_describe_no_section() -> None:
    names = ["circular", "circular", "circular", "trapezoidal", "trapezoidal", "trapezoidal", "open_rectangular", "trapezoidal"]
    height = np.array([0.3, np.inf, -np.inf, 1.0, 1.0, 1.0, 1.0, 1.0])
    width = np.array([0.3, 0.3, 0.3, 0.0, 0.0, 1.0, 0.0, 1.0])
    side_slope = np.array([np.nan, np.nan, np.nan, 2.0, 0.0, -1.0, np.nan, np.inf])
    pipes = PipeSections.from_names(names, height, width, side_slope=side_slope)
    # a V ditch (zero bottom, sloping sides) is a section; a zero-width rectangle, a negative or
    # infinite side slope or an infinite size is not
    assert list(pipes.size_known()) == [True, False, False, True, False, False, False, False]
    area, _ = pipes.full()
    assert area[3] == pytest.approx(2.0, rel=1e-14)  # z H^2
    assert np.isnan(area[[5, 7]]).all()


def test_many_side_slopes_are_grouped_by_one_sort_and_keep_their_pipes() -> None:
    # 45 distinct side slopes (more shapes than PipeSections compares one by one) among circles.
    rng = np.random.default_rng(3)
    count = 300
    names = np.where(rng.random(count) < 0.8, "trapezoidal", "circular")
    z = rng.choice(np.linspace(0.25, 4.0, 45), count)
    height, bottom = rng.uniform(0.5, 2.0, count), rng.uniform(0.0, 3.0, count)
    pipes = PipeSections.from_names(names, height, np.where(names == "circular", height, bottom), side_slope=z)
    assert len(pipes.shapes) > 40
    trapezoid = names == "trapezoidal"
    area, perimeter = pipes.full()
    by_hand = trapezoid_by_hand(height, bottom, z)
    np.testing.assert_allclose(area[trapezoid], by_hand[0][trapezoid], rtol=1e-13)
    np.testing.assert_allclose(perimeter[trapezoid], by_hand[1][trapezoid], rtol=1e-13)
    np.testing.assert_allclose(area[~trapezoid], np.pi * height[~trapezoid] ** 2 / 4, rtol=1e-13)
    subset = rng.permutation(count)[:100]
    part_area, _, top = pipes.elements(np.full(100, 0.4), subset)
    y = 0.4 * height[subset]
    chosen = trapezoid[subset]
    np.testing.assert_allclose(part_area[chosen], ((bottom[subset] + z[subset] * y) * y)[chosen], rtol=1e-13)
    np.testing.assert_allclose(top[chosen], (bottom[subset] + 2 * z[subset] * y)[chosen], rtol=1e-13)
