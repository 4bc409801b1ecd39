r"""Section tables: the elements of every section shape, tabulated once at unit height.

A section of height ``H`` and width ``B`` is geometrically similar to the same shape of unit
height and aspect :math:`r = B/H`, so :math:`A = H^2 a(\eta, r)`, :math:`P = H p(\eta, r)`,
:math:`T = H t(\eta, r)` and the first moment of the flow area about the free surface
:math:`A \bar z = \int_0^y A\, dy = H^3 m(\eta, r)` with :math:`m = \int_0^\eta a`. For the
registered shapes these are affine in the aspect: a circle, an egg or a tabulated outline
ignores the width (:math:`e(\eta, r) = e_0(\eta)`), and a box or a channel is linear in its
bottom width (:math:`e = e_0(\eta) + r\, e_1(\eta)`: :math:`A = B y + z y^2`,
:math:`P = B + 2 y \sqrt{1 + z^2}`, :math:`T = B + 2 z y`). The tables hold :math:`e_0` and
:math:`e_1` of each shape at the relative depths :math:`\eta = u^2`, u evenly spaced (fine
near the invert, where a section narrows), read by linear interpolation in u; m is integrated
from the shape's own areas by the trapezoidal rule. A reading costs a few array operations
instead of the trigonometry of the exact elements and agrees with them to about 1e-6; within
the top 5 % of a curved crown, where the wetted perimeter and the top width change like the
square root of the distance to it, to about 5e-5 and 3e-3 (tests/grade_line/test_tables.py).

A shape that is not affine in its width (none is registered today) is not tabulated: its
elements are the exact ones and its first moment is integrated by 16-point Gauss-Legendre
quadrature of the exact area (in the square root of the depth, smooth at a pointed invert).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from audit.hydraulics import PipeSections, Section

Array = NDArray[np.float64]
Index = NDArray[np.intp]

GRID = 8193
"""Relative depths in each table (0 to 1)."""

_QUANTITIES = 4  # a, p, t, m
_GAUSS_POINTS, _GAUSS_WEIGHTS = np.polynomial.legendre.leggauss(16)
_GAUSS_POINTS = 0.5 * (_GAUSS_POINTS + 1.0)  # on [0, 1]
_GAUSS_WEIGHTS = 0.5 * _GAUSS_WEIGHTS


@dataclass(frozen=True)
class SectionTables:
    """The sections of all pipes, with unit-height tables of their shapes."""

    sections: PipeSections
    unit: Array  # (tabulated shapes, 2, 4, GRID): e0 and e1 of a, p, t, m at eta = u^2
    row: Index  # per pipe: its table, -1 where its shape is not tabulated (or unknown)
    aspect: Array  # per pipe: width / height [-]; 0 where the shape ignores the width

    @classmethod
    def build(cls, sections: PipeSections, *, tabulate: bool = True) -> SectionTables:
        """Tables for the shapes of ``sections`` (none when ``tabulate`` is False: every
        reading is then exact)."""
        eta = np.linspace(0.0, 1.0, GRID) ** 2
        rows = np.full(len(sections.shapes) + 1, -1, dtype=np.intp)
        tables: list[Array] = []
        for code, shape in enumerate(sections.shapes):  # a loop over shapes, not pipes
            if not (tabulate and width_affine(shape)):
                continue
            narrow, wide = _unit_elements(shape, eta, 1.0), _unit_elements(shape, eta, 2.0)
            rows[code] = len(tables)
            tables.append(np.stack([2.0 * narrow - wide, wide - narrow]))
        unit = np.array(tables).reshape(-1, 2, _QUANTITIES, GRID)
        with np.errstate(divide="ignore", invalid="ignore"):
            aspect = sections.width / sections.height
        widthless = np.array([width_free(shape) for shape in sections.shapes] + [True])
        return cls(sections, unit, rows[sections.kind], np.where(widthless[sections.kind], 0.0, aspect))

    def _read(self, eta: Array, pipes: Index, quantities: tuple[int, ...]) -> list[Array]:
        """Unit-height ``quantities`` (0 a, 1 p, 2 t, 3 m) of the tabulated ``pipes`` at ``eta``
        (one value per pipe, or a row of values per pipe); the width terms are read only for
        the pipes whose shape has them."""
        place = np.sqrt(np.clip(eta, 0.0, 1.0)) * (GRID - 1)
        low = np.minimum(place.astype(np.intp), GRID - 2)
        share = place - low
        per_pipe = (slice(None),) + (None,) * (eta.ndim - 1)
        base = (self.row[pipes] * (2 * _QUANTITIES * GRID))[per_pipe] + low
        aspect = self.aspect[pipes]
        wide = np.flatnonzero(aspect != 0.0)
        flat = self.unit.ravel()
        out = []
        for quantity in quantities:
            at = base + quantity * GRID
            below = flat.take(at)
            value = below + (flat.take(at + 1) - below) * share
            if wide.size:
                at = at[wide] + _QUANTITIES * GRID
                below = flat.take(at)
                value[wide] += aspect[wide][per_pipe] * (below + (flat.take(at + 1) - below) * share[wide])
            out.append(value)
        return out

    def elements(self, eta: Array, pipes: Index) -> tuple[Array, Array, Array]:
        """Area [m^2], wetted perimeter [m] and top width [m] of the pipes ``pipes`` at relative
        depth ``eta``: read from the tables where the shape is tabulated, exact elsewhere."""
        tabulated = self.row[pipes] >= 0
        if not tabulated.all():
            return self._mixed(eta, pipes, tabulated)
        height = self.sections.height[pipes]
        a, p, t = self._read(eta, pipes, (0, 1, 2))
        return a * height**2, p * height, t * height

    def area(self, eta: Array, pipes: Index) -> Array:
        """Area [m^2] alone (see :meth:`elements`): one quantity read where tabulated."""
        if not (self.row[pipes] >= 0).all():
            return self.elements(eta, pipes)[0]
        return self._read(eta, pipes, (0,))[0] * self.sections.height[pipes] ** 2

    def area_perimeter(self, eta: Array, pipes: Index) -> tuple[Array, Array]:
        """Area [m^2] and wetted perimeter [m] alone (see :meth:`elements`); ``eta`` may hold a
        row of relative depths per pipe (shape (pipes, points))."""
        tabulated = self.row[pipes] >= 0
        if not tabulated.all():
            repeat = eta.size // pipes.size
            area, perimeter, _ = self._mixed(eta.ravel(), np.repeat(pipes, repeat), np.repeat(tabulated, repeat))
            return area.reshape(eta.shape), perimeter.reshape(eta.shape)
        height = self.sections.height[pipes][(slice(None),) + (None,) * (eta.ndim - 1)]
        a, p = self._read(eta, pipes, (0, 1))
        return a * height**2, p * height

    def surface_terms(self, eta: Array, pipes: Index) -> tuple[Array, Array, Array]:
        r"""Area [m^2], top width [m] and first moment of the area about the surface
        :math:`A \bar z` [m^3] of the pipes ``pipes`` at relative depth ``eta``: the terms of
        the specific force and its slope, read together (one look-up where tabulated)."""
        if not (self.row[pipes] >= 0).all():
            area, _, top = self.elements(eta, pipes)
            return area, top, self.moment(eta, pipes)
        height = self.sections.height[pipes]
        a, t, m = self._read(eta, pipes, (0, 2, 3))
        return a * height**2, t * height, m * height**3

    def _mixed(self, eta: Array, pipes: Index, tabulated: NDArray[np.bool_]) -> tuple[Array, Array, Array]:
        area, perimeter, top = self.sections.elements(eta, pipes)
        inside = np.flatnonzero(tabulated)
        if inside.size:
            height = self.sections.height[pipes[inside]]
            a, p, t = self._read(eta[inside], pipes[inside], (0, 1, 2))
            area[inside], perimeter[inside], top[inside] = a * height**2, p * height, t * height
        return area, perimeter, top

    def moment(self, eta: Array, pipes: Index) -> Array:
        r"""First moment of the flow area about the surface, :math:`A \bar z` [m^3], of the pipes
        ``pipes`` at relative depth ``eta``."""
        height = self.sections.height[pipes]
        tabulated = self.row[pipes] >= 0
        if tabulated.all():
            return self._read(eta, pipes, (3,))[0] * height**3
        out = np.empty(pipes.size)
        inside, outside = np.flatnonzero(tabulated), np.flatnonzero(~tabulated)
        out[inside] = self._read(eta[inside], pipes[inside], (3,))[0] * height[inside] ** 3
        out[outside] = self._gauss_moment(eta[outside], pipes[outside])
        return out

    def _gauss_moment(self, eta: Array, pipes: Index) -> Array:
        r""":math:`\int_0^y A\, dy'` by 16-point Gauss-Legendre quadrature of the exact area in
        :math:`u = \sqrt{y'/y}` (:math:`2 y \int_0^1 A(y u^2)\, u\, du`), smooth where a
        section narrows to a point at its invert."""
        height = self.sections.height[pipes]
        points = (eta[:, None] * _GAUSS_POINTS[None, :] ** 2).ravel()
        inner, _, _ = self.sections.elements(points, np.repeat(pipes, _GAUSS_POINTS.size))
        weighted = inner.reshape(eta.size, _GAUSS_POINTS.size) @ (2.0 * _GAUSS_POINTS * _GAUSS_WEIGHTS)
        return np.asarray(eta * height * weighted)


def _unit_elements(shape: Section, eta: Array, aspect: float) -> Array:
    """a, p, t and m of a unit-height ``shape`` of the given aspect at ``eta``, stacked."""
    area, perimeter, top = shape.elements(eta, np.ones(eta.size), np.full(eta.size, aspect))
    moment = np.concatenate([[0.0], np.cumsum(0.5 * (area[1:] + area[:-1]) * np.diff(eta))])
    return np.stack([area, perimeter, top, moment])


def width_free(shape: Section) -> bool:
    """True where a shape's outline does not depend on the width it is given."""
    eta = np.array([0.1, 0.5, 0.9])
    return bool(np.array_equal(_unit_elements(shape, eta, 1.0)[:3], _unit_elements(shape, eta, 2.0)[:3]))


def width_affine(shape: Section) -> bool:
    """True where a shape's elements are affine in the width it is given (or ignore it)."""
    eta = np.array([0.1, 0.5, 0.9])
    one, two, three = (_unit_elements(shape, eta, aspect)[:3] for aspect in (1.0, 2.0, 3.0))
    return bool(np.allclose(three - two, two - one, rtol=1e-12, atol=1e-12))
