"""Cross-section geometry: closed forms against tabulated outlines of the same shapes."""

import numpy as np
import pytest
import shapely

from audit.hydraulics.sections import Circular, Egg, PipeSections, Rectangular, TabulatedSection, register_section, section_names

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
