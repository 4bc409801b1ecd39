r"""Cross-section geometry of sewer pipes, vectorised over arrays of pipes and depths.

Every section is described by its internal height ``H`` [m] and width ``B`` [m] and is
evaluated at a relative depth :math:`\eta = y / H` in [0, 1]. For each section this module gives
the flow area ``A`` [m^2], wetted perimeter ``P`` [m] and top width ``T`` [m] of the part-full
section, and the full-bore area and perimeter. At :math:`\eta = 1` the part-full functions give
the open-channel limit (free surface touching the soffit); the full-bore values include the lid
where it is flat (rectangular) and coincide with that limit for curved soffits.

Closed shapes (``is_open`` False):

* ``circular``: closed form by the central angle of the wetted segment (Chow 1959);
* ``rectangular``: closed form; the lid joins the wetted perimeter only when full;
* ``egg``: the standard ovoid of height 1.5 x width, built from three pairs of arcs (top radius
  R = B/2, invert radius R/2, side radius 3R), integrated in closed form arc by arc;
* tabulated: any closed outline polygon (arch, horseshoe, a user's own), whose A, P and T are
  tabulated once for the shape and interpolated.

Open channels (``is_open`` True: no lid, so no cover and no pressurised flow; ``H`` is the
bank-full depth, the "full" values are bank-full and the capacity depth is bank-full):

* ``open_rectangular``: closed form, bottom width ``B``;
* ``trapezoidal``: closed form, bottom width ``B`` and side slope ``z`` (horizontal per vertical),
  one instance per distinct side slope.

References
----------
.. [1] Chow, V. T. (1959). Open-Channel Hydraulics. McGraw-Hill, ch. 2 (geometric elements).
.. [2] Butler, D. and Davies, J. W. (2011). Urban Drainage, 3rd ed. Spon, ch. 8 (egg-shaped
   sewer geometry: top radius R, invert radius R/2, side radius 3R, height 3R; from memory).
"""

from __future__ import annotations

import itertools
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

    @property
    def is_open(self) -> bool:
        """True for a channel without a lid (no cover, no pressurised flow; full means bank-full)."""


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

    @property
    def is_open(self) -> bool:
        return False


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

    @property
    def is_open(self) -> bool:
        return False


DEFAULT_SIDE_SLOPE = 1.5
"""Side slope [horizontal per vertical] of a trapezoidal channel whose register gives none.

1.5 H : 1 V, the side slope Chow (1959), table 7-1, suggests for firm clay or earth in small
ditches (from memory); common for earth drainage channels (common practice, no source).
"""


@dataclass(frozen=True)
class Trapezoidal:
    r"""Open trapezoidal channel: bank-full depth ``H``, bottom width ``B``, side slope ``z``.

    With the depth :math:`y = \eta H` and ``z`` horizontal per vertical on both banks,

    .. math:: A = (B + z y)\, y, \quad P = B + 2 y \sqrt{1 + z^2}, \quad T = B + 2 z y;
        \qquad A_f = (B + z H) H, \quad P_f = B + 2 H \sqrt{1 + z^2}

    "Full" is bank-full, without a lid. Area grows faster than perimeter, so the discharge rises
    up to the banks (``eta_capacity`` = 1). ``z`` = 0 is the open rectangle; ``B`` = 0 with
    ``z`` > 0 a triangular (V) ditch. Source: Chow (1959), table 2-1.

    Parameters
    ----------
    side_slope : z, horizontal per vertical [-]; :data:`DEFAULT_SIDE_SLOPE` when not given

    >>> a, p, t = Trapezoidal(side_slope=2.0).elements(np.array(0.5), np.array(1.0), np.array(3.0))
    >>> round(float(a), 12), round(float(p), 6), float(t)  # y = 0.5: (3 + 1) 0.5, 3 + sqrt(5), 3 + 2
    (2.0, 5.236068, 5.0)
    """

    side_slope: float = DEFAULT_SIDE_SLOPE
    name: str = "trapezoidal"

    def elements(self, eta: Array, height: Array, width: Array) -> tuple[Array, Array, Array]:
        depth = np.clip(eta, 0.0, 1.0) * height
        z = self.side_slope
        return (width + z * depth) * depth, width + 2.0 * depth * np.sqrt(1.0 + z**2), width + 2.0 * z * depth

    def full(self, height: Array, width: Array) -> tuple[Array, Array]:
        area, perimeter, _ = self.elements(np.ones_like(height), height, width)
        return area, perimeter

    @property
    def eta_capacity(self) -> float:
        return 1.0

    @property
    def is_open(self) -> bool:
        return True


@dataclass(frozen=True)
class OpenRectangular(Trapezoidal):
    r"""Open rectangular channel of bank-full depth ``H`` and width ``B``: no lid.

    .. math:: A = B y, \quad P = B + 2 y, \quad T = B, \qquad y = \eta H;
        \qquad A_f = B H, \quad P_f = B + 2 H

    The trapezoid with vertical sides (``side_slope`` fixed at 0). "Full" is bank-full: the
    wetted perimeter never includes a lid, the top width at bank-full is the surface width and
    the discharge rises up to the banks (``eta_capacity`` = 1). Source: Chow (1959), table 2-1.

    >>> a, p, t = OpenRectangular().elements(np.array(0.5), np.array(1.2), np.array(2.0))
    >>> round(float(a), 12), round(float(p), 12), float(t)
    (1.2, 3.2, 2.0)
    """

    side_slope: float = field(default=0.0, init=False)
    name: str = "open_rectangular"


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

    @property
    def is_open(self) -> bool:
        return False


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

    @property
    def is_open(self) -> bool:
        return False


_CIRCULAR_ETA_CAPACITY = _manning_argmax(Circular(), 1.0)
_EGG_ETA_CAPACITY = _manning_argmax(Egg(), 2.0 / 3.0)

_REGISTRY: dict[str, Section] = {
    "circular": Circular(),
    "rectangular": Rectangular(),
    "egg": Egg(),
    "open_rectangular": OpenRectangular(),
    "trapezoidal": Trapezoidal(),  # the default side slope; from_names makes one per side slope
}


def register_section(section: Section) -> None:
    """Make a section available under its name (for example a tabulated arch)."""
    _REGISTRY[section.name] = section


def section_names() -> tuple[str, ...]:
    """Names of the registered sections."""
    return tuple(_REGISTRY)


_FEW_SHAPES = 32  # below about 40 shapes one comparison per shape is cheaper than one stable sort (1e6 pipes)


@dataclass(frozen=True)
class PipeSections:
    """The sections of many pipes: a shape per pipe (index into ``shapes``), height and width.

    Pipes whose shape name is not registered get ``kind == -1`` and NaN geometry. Trapezoidal
    channels get one :class:`Trapezoidal` in ``shapes`` per distinct side slope.
    """

    kind: NDArray[np.int64]
    height: Array
    width: Array
    shapes: tuple[Section, ...]

    @classmethod
    def from_names(
        cls, names: ArrayLike, height: ArrayLike, width: ArrayLike, *, side_slope: ArrayLike | None = None
    ) -> PipeSections:
        """Build from per-pipe shape names and sizes [m].

        ``side_slope`` [horizontal per vertical] is read for the ``trapezoidal`` pipes only, one
        value per pipe (or one for all); NaN, or no array, means :data:`DEFAULT_SIDE_SLOPE`. A
        negative or infinite side slope gives that pipe NaN geometry, and
        :meth:`size_known` False.
        """
        labels, codes = np.unique(np.asarray(names, dtype=object).astype(str), return_inverse=True)
        codes = codes.reshape(-1)
        shapes = [_REGISTRY.get(label) for label in labels]
        listed = np.flatnonzero(labels == "trapezoidal")
        trapezoid = int(listed[0]) if listed.size and isinstance(shapes[listed[0]], Trapezoidal) else None
        if trapezoid is not None:
            shapes[trapezoid] = None  # replaced by one Trapezoidal per side slope, after the others
        known = np.array([shape is not None for shape in shapes] + [False])
        lookup = np.cumsum(known[:-1]) - 1
        kind = np.where(known[codes], lookup[codes], -1).astype(np.int64)
        found = [shape for shape in shapes if shape is not None]
        if trapezoid is not None:
            slopes, per_slope = _side_slopes(side_slope, codes == trapezoid)
            kind[codes == trapezoid] = len(found) + per_slope
            found += [Trapezoidal(side_slope=float(z), name=str(labels[trapezoid])) for z in slopes]
        return cls(kind, np.asarray(height, dtype=float), np.asarray(width, dtype=float), tuple(found))

    def __len__(self) -> int:
        return len(self.kind)

    @property
    def is_open(self) -> NDArray[np.bool_]:
        """Per pipe: True for an open channel (no lid), False for a closed or unknown shape."""
        return np.array([shape.is_open for shape in self.shapes] + [False])[self.kind]

    def size_known(self) -> NDArray[np.bool_]:
        """Per pipe: the size describes a section.

        Height and width finite and positive; a trapezoid's bottom width may be zero where its
        sides slope (a V ditch), and its side slope must be finite and not negative.
        """
        sloping = [isinstance(shape, Trapezoidal) and shape.side_slope > 0 for shape in self.shapes]
        valid = [not isinstance(shape, Trapezoidal) or shape.side_slope >= 0 for shape in self.shapes]  # NaN: invalid
        zero_width_ok, shape_ok = np.array([*sloping, False])[self.kind], np.array([*valid, True])[self.kind]
        height_ok = np.isfinite(self.height) & (self.height > 0)
        width_ok = np.isfinite(self.width) & ((self.width > 0) | (zero_width_ok & (self.width == 0)))
        return height_ok & width_ok & shape_ok

    def _per_shape(self, index: NDArray[np.intp] | None) -> list[tuple[Section, NDArray[np.intp], NDArray[np.intp]]]:
        """For each shape present: (section, positions in the subset, pipe indices).

        A few shapes are picked out by one comparison each; many (trapezoids of many side
        slopes) by one sort, so the cost does not grow with pipes x shapes.
        """
        kind = self.kind if index is None else self.kind[index]
        if len(self.shapes) <= _FEW_SHAPES:
            members = [np.flatnonzero(kind == code) for code in range(len(self.shapes))]
        else:
            order = np.argsort(kind, kind="stable")
            bounds = np.searchsorted(kind[order], np.arange(len(self.shapes) + 1))
            members = [order[start:stop] for start, stop in itertools.pairwise(bounds)]
        return [(shape, where, where if index is None else index[where]) for shape, where in zip(self.shapes, members, strict=True) if where.size]

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


def _side_slopes(side_slope: ArrayLike | None, trapezoid: NDArray[np.bool_]) -> tuple[Array, NDArray[np.intp]]:
    """The distinct side slopes of the ``trapezoid`` pipes and, for each of them, its position.

    NaN (not given) becomes :data:`DEFAULT_SIDE_SLOPE`; a negative or infinite value becomes
    NaN, whose section is NaN throughout.
    """
    given = np.full(trapezoid.shape, np.nan) if side_slope is None else np.asarray(side_slope, dtype=float)
    z = np.broadcast_to(given, trapezoid.shape)[trapezoid]
    z = np.where(np.isnan(z), DEFAULT_SIDE_SLOPE, z)
    z = np.where(np.isfinite(z) & (z >= 0), z, np.nan)
    slopes, per_slope = np.unique(z, return_inverse=True)
    return slopes, per_slope.reshape(-1)

