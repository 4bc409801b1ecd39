r"""Cross-section geometry of sewer pipes, vectorised over arrays of pipes and depths.

Every section is described by its internal height ``H`` [m] and width ``B`` [m] and is
evaluated at a relative depth :math:`\eta = y / H` in [0, 1]. For each section this module gives
the flow area ``A`` [m^2], wetted perimeter ``P`` [m] and top width ``T`` [m] of the part-full
section, and the full-bore area and perimeter. At :math:`\eta = 1` the part-full functions give
the open-channel limit (free surface touching the soffit); the full-bore values include the lid
where it is flat (rectangular) and coincide with that limit for curved soffits.

Shapes:

* ``circular``: closed form by the central angle of the wetted segment (Chow 1959);
* ``rectangular``: closed form; the lid joins the wetted perimeter only when full;
* ``egg``: the standard ovoid of height 1.5 x width, built from three pairs of arcs (top radius
  R = B/2, invert radius R/2, side radius 3R), integrated in closed form arc by arc;
* tabulated: any closed outline polygon (arch, horseshoe, a user's own), whose A, P and T are
  tabulated once for the shape and interpolated.

References
----------
.. [1] Chow, V. T. (1959). Open-Channel Hydraulics. McGraw-Hill, ch. 2 (geometric elements).
.. [2] Butler, D. and Davies, J. W. (2011). Urban Drainage, 3rd ed. Spon, ch. 8 (egg-shaped
   sewer geometry: top radius R, invert radius R/2, side radius 3R, height 3R; from memory).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Protocol

import numpy as np
import shapely
import shapely.affinity
from numpy.typing import ArrayLike, NDArray
from scipy.optimize import minimize_scalar

Array = NDArray[np.float64]


class Section(Protocol):
    """What every section shape provides; all arrays broadcast against each other."""

    @property
    def name(self) -> str:
        """The name the section is registered under."""

    def elements(self, eta: Array, height: Array, width: Array) -> tuple[Array, Array, Array]:
        """Area [m^2], wetted perimeter [m] and top width [m] at relative depth ``eta``."""

    def full(self, height: Array, width: Array) -> tuple[Array, Array]:
        """Full-bore area [m^2] and wetted perimeter [m]."""

    @property
    def eta_capacity(self) -> float:
        """Relative depth of maximum Manning discharge, :math:`\\max A^{5/3} P^{-2/3}`."""


def _manning_argmax(section: Section, width_ratio: float) -> float:
    """Relative depth where :math:`A^{5/3} / P^{2/3}` peaks, for a unit-height section."""

    def negative_conveyance(eta: float) -> float:
        area, perimeter, _ = section.elements(np.array(eta), np.array(1.0), np.array(width_ratio))
        return float(-(area ** (5 / 3)) / perimeter ** (2 / 3))

    grid = np.linspace(0.5, 1.0, 501)
    best = grid[np.argmin([negative_conveyance(eta) for eta in grid])]
    if best >= 1.0:
        return 1.0
    found = minimize_scalar(
        negative_conveyance, bounds=(max(best - 0.002, 0.5), min(best + 0.002, 1.0)), method="bounded", options={"xatol": 1e-10}
    )
    return float(found.x)


@dataclass(frozen=True)
class Circular:
    r"""Circular pipe of diameter ``D = H``.

    .. math::
        \theta = 2 \arccos(1 - 2\eta), \quad A = \frac{D^2}{8}(\theta - \sin\theta), \quad
        P = \frac{D \theta}{2}, \quad T = D \sin\frac{\theta}{2}

    Source: Chow (1959), table 2-1.

    >>> a, p, t = Circular().elements(np.array(0.5), np.array(1.0), np.array(1.0))
    >>> round(float(a), 6), round(float(p), 6), float(t)  # half full: pi/8 and pi/2
    (0.392699, 1.570796, 1.0)
    """

    name: str = "circular"

    def elements(self, eta: Array, height: Array, width: Array) -> tuple[Array, Array, Array]:
        theta = 2.0 * np.arccos(1.0 - 2.0 * np.clip(eta, 0.0, 1.0))
        area = height**2 / 8.0 * (theta - np.sin(theta))
        return area, height * theta / 2.0, height * np.sin(theta / 2.0)

    def full(self, height: Array, width: Array) -> tuple[Array, Array]:
        return np.pi * height**2 / 4.0, np.pi * height

    @property
    def eta_capacity(self) -> float:
        return _CIRCULAR_ETA_CAPACITY


@dataclass(frozen=True)
class Rectangular:
    r"""Closed rectangular box of height ``H`` and width ``B``.

    .. math:: A = B \eta H, \quad P = B + 2 \eta H, \quad T = B;
        \qquad A_f = B H, \quad P_f = 2 (B + H)

    The lid joins the wetted perimeter only when the box runs full, so the discharge keeps
    rising up to the soffit (``eta_capacity`` = 1). Source: Chow (1959), table 2-1.
    """

    name: str = "rectangular"

    def elements(self, eta: Array, height: Array, width: Array) -> tuple[Array, Array, Array]:
        depth = np.clip(eta, 0.0, 1.0) * height
        return width * depth, width + 2.0 * depth, width + 0.0 * depth

    def full(self, height: Array, width: Array) -> tuple[Array, Array]:
        return width * height, 2.0 * (width + height)

    @property
    def eta_capacity(self) -> float:
        return 1.0


# The standard egg in units of the top radius R (height 3R, width 2R): for each arc, its radius,
# the level of its centre, the horizontal offset of its centre from the axis, and the band of
# levels it covers. The side arcs (radius 3R, centres 2R beyond the axis) are tangent to the top
# circle at its widest level (2R) and to the invert circle at level 0.2R.
_EGG_ARCS = (
    # radius, centre level, centre offset, lowest level, highest level
    (0.5, 0.5, 0.0, 0.0, 0.2),
    (3.0, 2.0, -2.0, 0.2, 2.0),
    (1.0, 2.0, 0.0, 2.0, 3.0),
)


@dataclass(frozen=True)
class Egg:
    r"""Standard egg-shaped (ovoid) sewer, height ``H = 1.5 B``, built from arcs.

    With the top radius :math:`R = H/3`, each arc of radius ``a`` centred at level ``c`` and
    offset ``o`` from the axis has half-width :math:`x(y) = o + \sqrt{a^2 - (y - c)^2}`, so arc by
    arc, with :math:`u = y - c`,

    .. math::
        A = 2 \sum \left[o\,y + \tfrac12 \left(u \sqrt{a^2 - u^2} + a^2 \arcsin\frac{u}{a}\right)\right],
        \quad P = 2 \sum a \arcsin\frac{u}{a}, \quad T = 2\,x(y)

    each term taken between the limits of the arc's band of levels. Full bore:
    :math:`A_f \approx 4.594 R^2`, :math:`P_f \approx 7.930 R` (Butler and Davies 2011, from memory).
    The width argument is ignored: the height fixes the section.
    """

    name: str = "egg"

    def elements(self, eta: Array, height: Array, width: Array) -> tuple[Array, Array, Array]:
        level = np.clip(eta, 0.0, 1.0) * 3.0  # in units of R
        area = np.zeros(np.broadcast(level, height).shape)
        perimeter = np.zeros_like(area)
        top = np.zeros_like(area)
        for radius, centre, offset, low, high in _EGG_ARCS:
            upper = np.clip(level, low, high) - centre
            lower = low - centre
            area += 2.0 * (_arc_integral(upper, radius, offset) - _arc_integral(np.full_like(upper, lower), radius, offset))
            perimeter += 2.0 * radius * (np.arcsin(upper / radius) - np.arcsin(lower / radius))
            inside = (level >= low) & (level <= high)
            top = np.where(inside, 2.0 * (offset + np.sqrt(np.maximum(radius**2 - (level - centre) ** 2, 0.0))), top)
        scale = height / 3.0
        return area * scale**2, perimeter * scale, top * scale

    def full(self, height: Array, width: Array) -> tuple[Array, Array]:
        area, perimeter, _ = self.elements(np.ones_like(height), height, width)
        return area, perimeter

    @property
    def eta_capacity(self) -> float:
        return _EGG_ETA_CAPACITY


def _arc_integral(u: Array, radius: float, offset: float) -> Array:
    """Antiderivative of the half-width ``offset + sqrt(radius^2 - u^2)`` with respect to u."""
    root = np.sqrt(np.maximum(radius**2 - u**2, 0.0))
    return offset * u + 0.5 * (u * root + radius**2 * np.arcsin(np.clip(u / radius, -1.0, 1.0)))


@dataclass(frozen=True)
class TabulatedSection:
    """Any closed section, from its outline polygon, tabulated once and interpolated.

    The outline is scaled to unit height with its invert at level 0. At ``levels`` relative
    depths the area below the level, the length of outline below it and the width at it are
    measured with shapely and stored; a pipe of height ``H`` then has
    ``A = H^2 a(eta)``, ``P = H p(eta)``, ``T = H t(eta)`` with linear interpolation between
    the tabulated depths. The width argument is ignored: the outline fixes the aspect.
    """

    name: str
    eta: Array = field(repr=False)
    unit_area: Array = field(repr=False)
    unit_perimeter: Array = field(repr=False)
    unit_top_width: Array = field(repr=False)
    width_ratio: float = 1.0
    unit_full_perimeter: float = float("nan")
    _capacity: float = field(default=float("nan"), repr=False)

    @classmethod
    def from_outline(cls, name: str, outline: shapely.Polygon, *, levels: int = 2001) -> TabulatedSection:
        """Tabulate a closed outline polygon (any units; only its shape matters)."""
        if not isinstance(outline, shapely.Polygon) or outline.is_empty or not outline.is_valid:
            raise ValueError(f"section {name!r}: the outline must be one valid, non-empty polygon")
        xmin, ymin, xmax, ymax = outline.bounds
        unit = shapely.affinity.scale(
            shapely.affinity.translate(outline, -xmin, -ymin), 1.0 / (ymax - ymin), 1.0 / (ymax - ymin), origin=(0, 0)
        )
        eta = np.linspace(0.0, 1.0, levels)
        width = (xmax - xmin) / (ymax - ymin)
        below = shapely.box(-1.0, -1.0, width + 1.0, eta)
        surface = shapely.linestrings(np.stack([np.full_like(eta, -1.0), eta, np.full_like(eta, width + 1.0), eta], axis=1).reshape(-1, 2, 2))
        area = shapely.area(shapely.intersection(unit, below))
        perimeter = shapely.length(shapely.intersection(unit.exterior, below))
        top = shapely.length(shapely.intersection(unit, surface))
        soffit = shapely.length(shapely.intersection(unit.exterior, shapely.box(-1.0, 1.0 - 1e-9, width + 1.0, 1.0 + 1e-9)))
        flat = bool(soffit > 0.01 * width)  # a real flat lid, not a polygon's short top edge
        if flat:  # the lid is wetted only when full: the part-full limit at eta = 1 excludes it
            perimeter[-1] = unit.exterior.length - soffit
        table = cls(name, eta, area, perimeter, top, width, unit.exterior.length)
        object.__setattr__(table, "_capacity", 1.0 if flat else _manning_argmax(table, width))
        return table

    def elements(self, eta: Array, height: Array, width: Array) -> tuple[Array, Array, Array]:
        eta = np.clip(eta, 0.0, 1.0)
        area = np.interp(eta, self.eta, self.unit_area) * height**2
        return area, np.interp(eta, self.eta, self.unit_perimeter) * height, np.interp(eta, self.eta, self.unit_top_width) * height

    def full(self, height: Array, width: Array) -> tuple[Array, Array]:
        return self.unit_area[-1] * height**2, self.unit_full_perimeter * height

    @property
    def eta_capacity(self) -> float:
        return self._capacity


_CIRCULAR_ETA_CAPACITY = _manning_argmax(Circular(), 1.0)
_EGG_ETA_CAPACITY = _manning_argmax(Egg(), 2.0 / 3.0)

_REGISTRY: dict[str, Section] = {"circular": Circular(), "rectangular": Rectangular(), "egg": Egg()}


def register_section(section: Section) -> None:
    """Make a section available under its name (for example a tabulated arch)."""
    _REGISTRY[section.name] = section


def section_names() -> tuple[str, ...]:
    """Names of the registered sections."""
    return tuple(_REGISTRY)


@dataclass(frozen=True)
class PipeSections:
    """The sections of many pipes: a shape per pipe (index into ``shapes``), height and width.

    Pipes whose shape name is not registered get ``kind == -1`` and NaN geometry.
    """

    kind: NDArray[np.int64]
    height: Array
    width: Array
    shapes: tuple[Section, ...]

    @classmethod
    def from_names(cls, names: ArrayLike, height: ArrayLike, width: ArrayLike) -> PipeSections:
        """Build from per-pipe shape names and sizes [m]."""
        labels, codes = np.unique(np.asarray(names, dtype=object).astype(str), return_inverse=True)
        shapes = tuple(_REGISTRY.get(label) for label in labels)
        known = np.array([shape is not None for shape in shapes] + [False])
        lookup = np.cumsum(known[:-1]) - 1
        kind = np.where(known[codes], lookup[codes], -1).astype(np.int64)
        return cls(kind, np.asarray(height, dtype=float), np.asarray(width, dtype=float), tuple(s for s in shapes if s is not None))

    def __len__(self) -> int:
        return len(self.kind)

    def _per_shape(self, index: NDArray[np.intp] | None) -> list[tuple[Section, NDArray[np.intp], NDArray[np.intp]]]:
        """For each shape present: (section, positions in the subset, pipe indices)."""
        kind = self.kind if index is None else self.kind[index]
        groups = []
        for code, shape in enumerate(self.shapes):
            where = np.flatnonzero(kind == code)
            if where.size:
                groups.append((shape, where, where if index is None else index[where]))
        return groups

    def elements(self, eta: Array, index: NDArray[np.intp] | None = None) -> tuple[Array, Array, Array]:
        """Area, wetted perimeter and top width at ``eta`` (one value per pipe, or per ``index``)."""
        eta = np.broadcast_to(np.asarray(eta, dtype=float), self.kind.shape if index is None else index.shape)
        out = np.full((3, eta.size), np.nan)
        for shape, where, pipes in self._per_shape(index):
            out[:, where] = shape.elements(eta[where], self.height[pipes], self.width[pipes])
        return out[0], out[1], out[2]

    def full(self) -> tuple[Array, Array]:
        """Full-bore area [m^2] and wetted perimeter [m] per pipe."""
        out = np.full((2, len(self)), np.nan)
        for shape, where, pipes in self._per_shape(None):
            out[:, where] = shape.full(self.height[pipes], self.width[pipes])
        return out[0], out[1]

    def eta_capacity(self) -> Array:
        """Relative depth of maximum Manning discharge per pipe."""
        out = np.full(len(self), np.nan)
        for shape, where, _ in self._per_shape(None):
            out[where] = shape.eta_capacity
        return out
