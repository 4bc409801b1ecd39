r"""Critical depth, Froude number, specific force and the sequent depth of a jump, for any section.

All functions work on whole arrays of pipes of any registered shape (through
:class:`~audit.hydraulics.PipeSections`), with the flow area ``A``, top width ``T`` and height
``H`` of each section; ``index`` picks the pipes a call is about (all when None).

* critical depth, where the Froude number is one: :math:`Q^2 T / (g A^3) = 1`;
* Froude number :math:`Fr = V / \sqrt{g A / T} = Q \sqrt{T / (g A^3)}`;
* specific force (momentum function) :math:`M = Q^2/(g A) + A \bar z`, with :math:`A \bar z`
  the first moment of the flow area about the free surface, :math:`\int_0^y A(\eta)\, d\eta`;
* sequent depth: the subcritical depth with the same specific force as a supercritical one.

A closed section's top width goes to zero at the crown, so :math:`Q^2 T/(g A^3)` always falls
to zero there and a critical depth exists for any flow, however close to the crown. Near the
crown a free surface in a closed conduit is unstable and the conduit seals, so the critical
depth is capped at the depth of maximum uniform discharge of the shape (``eta_capacity``:
about 0.94 D for a circle, the soffit for a box, bank-full for an open channel; a choice of
this tool, stated in docs/methods.md). In the same way a sequent depth above the crown is
capped at the crown: a jump that needs more fills the conduit.

References
----------
.. [1] Chow, V. T. (1959). Open-Channel Hydraulics. McGraw-Hill, ch. 3 (specific energy,
   critical flow, specific force) and ch. 15 (the hydraulic jump).
.. [2] Henderson, F. M. (1966). Open Channel Flow. Macmillan, ch. 2 and 3.
"""

from __future__ import annotations

from collections.abc import Callable

import numpy as np
from numpy.typing import NDArray

from audit.grade_line.tables import SectionTables, width_free
from audit.hydraulics import GRAVITY, PipeSections, Section
from audit.hydraulics.roots import bracketed_root

Array = NDArray[np.float64]
Index = NDArray[np.intp]

SHALLOWEST = 1e-9
"""Lower end of the critical-depth bracket, as a share of the section's height [-]."""

def _all(sections: PipeSections, index: Index | None) -> Index:
    return np.arange(len(sections)) if index is None else index


def critical_depth(sections: PipeSections, flow: Array, *, index: Index | None = None) -> Array:
    r"""Critical depth [m] of ``flow`` [m^3/s] in each pipe.

    .. math:: \frac{Q^2 T(y_c)}{g A(y_c)^3} = 1, \qquad 0 < y_c \le \eta_{cap} H

    For a shape the height alone fixes (circle, egg, tabulated outline),
    :math:`A^3/T = H^5 z(\eta)`, so :math:`\eta_c` depends only on :math:`Q^2/(g H^5)`: z is
    evaluated exactly at 8193 relative depths (spaced as :math:`u^2`, fine near the invert) and
    inverted by interpolating :math:`\ln \eta` in :math:`\ln z`, within 1e-7 of the root. For
    the other shapes (boxes, channels) the root is solved for every pipe at once with the
    Anderson-Bjoerck regula falsi (:func:`~audit.hydraulics.roots.bracketed_root`) on
    :math:`Fr^{-2/3} - 1 = (g A^3 / (Q^2 T))^{1/3} - 1` [-], which rises with depth (linearly
    for a rectangle). Where the Froude number is still above one at the cap, the cap is
    returned. A rectangle gives :math:`y_c = (q^2/g)^{1/3}` with :math:`q = Q/B` (Chow 1959,
    ch. 3).

    Parameters
    ----------
    sections : the pipes' sections (height [m], width [m], shape)
    flow : discharge per pipe of ``index`` [m^3/s]; zero gives depth 0, NaN gives NaN
    index : the pipes (all when None)

    Returns
    -------
    critical depth [m]; NaN where the shape, size or flow is unusable

    >>> box = PipeSections.from_names(["rectangular"], [3.0], [2.0])
    >>> round(float(critical_depth(box, np.array([2.0]))[0]), 6)  # q = 1 m2/s: (1/9.80665)^(1/3)
    0.46719
    """
    pipes = _all(sections, index)
    q = np.asarray(flow, dtype=float)
    height = sections.height[pipes]
    cap = sections.eta_capacity()[pipes]
    eta = np.where(q == 0.0, 0.0, np.nan)
    usable = (q > 0) & np.isfinite(q) & (height > 0) & np.isfinite(cap)
    with np.errstate(divide="ignore", invalid="ignore"):
        log_target = np.log(q**2 / (GRAVITY * height**5))
    kind = sections.kind[pipes]
    for code, shape in enumerate(sections.shapes):  # a loop over shapes, not pipes
        members = np.flatnonzero(usable & (kind == code))
        if members.size and width_free(shape):
            log_z, log_eta = _critical_curve(shape)
            inside = log_target[members] >= log_z[0]
            eta[members[inside]] = np.exp(np.interp(log_target[members[inside]], log_z, log_eta))
    solve = np.flatnonzero(usable & np.isnan(eta))
    if solve.size:
        eta[solve] = _critical_roots(sections, q[solve], pipes[solve], cap[solve])
    return np.where(usable, np.minimum(eta, cap), eta) * height


CURVE_POINTS = 8193
"""Relative depths at which :math:`A^3/T` is evaluated to invert it (critical depth)."""


def _critical_curve(shape: Section) -> tuple[Array, Array]:
    r""":math:`\ln (a^3/t)` and :math:`\ln \eta` of a unit-height ``shape`` from 1e-6 of the
    height to its cap, for inversion by interpolation (``ln z`` made non-decreasing)."""
    eta = np.linspace(1e-3, np.sqrt(shape.eta_capacity), CURVE_POINTS) ** 2
    area, _, top = shape.elements(eta, np.ones(eta.size), np.ones(eta.size))
    with np.errstate(divide="ignore"):
        log_z = np.maximum.accumulate(np.log(area**3 / top))
    return log_z, np.log(eta)


def _critical_roots(sections: PipeSections, flow: Array, pipes: Index, cap: Array) -> Array:
    """Relative critical depth of the pipes ``pipes`` by bracketed roots on :math:`(0, cap]`."""
    scale = np.cbrt(GRAVITY / flow**2)

    def residual(eta: Array, i: Index) -> Array:
        area, _, top = sections.elements(eta, pipes[i])
        with np.errstate(divide="ignore", invalid="ignore"):
            return np.where(top > 0, scale[i] * area / np.cbrt(top), np.inf) - 1.0

    low = np.full(pipes.size, SHALLOWEST)
    f_low, f_high = residual(low, np.arange(pipes.size)), residual(cap, np.arange(pipes.size))
    root = bracketed_root(residual, low, cap.copy(), f_low=f_low, f_high=f_high, xtol=1e-13, ftol=1e-12)
    return np.where(f_high <= 0.0, cap, np.where(f_low >= 0.0, low, root))


def _root_near(
    residual: Callable[[Array, Index], Array], guess: Array, low: Array, high: Array, *, widths: tuple[float, ...], xtol: float, ftol: float
) -> Array:
    """Roots of a rising ``residual`` on ``[low, high]``, searched near ``guess`` first.

    Brackets of ``widths`` (shares of the guess) about it are tried first, narrowest first, so
    a good guess converges in a step or two; the other problems search the whole bracket. Where the residual is
    already positive at ``low`` the root is ``low``, where it is still negative at ``high`` it
    is ``high``.
    """
    a, b = low.copy(), high.copy()
    f_a, f_b = np.full(guess.size, np.nan), np.full(guess.size, np.nan)
    pending = np.arange(guess.size)
    for width in widths:
        lo = np.clip(guess[pending] * (1.0 - width), low[pending], high[pending])
        hi = np.clip(guess[pending] * (1.0 + width), low[pending], high[pending])
        f_lo, f_hi = residual(lo, pending), residual(hi, pending)
        found = (f_lo < 0.0) & (f_hi >= 0.0)
        keep = pending[found]
        a[keep], b[keep], f_a[keep], f_b[keep] = lo[found], hi[found], f_lo[found], f_hi[found]
        pending = pending[~found]
    f_a[pending], f_b[pending] = residual(a[pending], pending), residual(b[pending], pending)
    root = bracketed_root(residual, a, b, f_low=f_a, f_high=f_b, xtol=xtol, ftol=ftol)
    return np.where(f_b <= 0.0, b, np.where(f_a >= 0.0, a, root))


def froude_number(
    sections: PipeSections, flow: Array, depth: Array, *, index: Index | None = None, tables: SectionTables | None = None
) -> Array:
    r"""Froude number [-] of ``flow`` [m^3/s] at ``depth`` [m]: :math:`Fr = Q \sqrt{T / (g A^3)}`.

    NaN where the depth is NaN or the area zero (Chow 1959, sec. 1-5 and ch. 3). With
    ``tables``, A and T are read from the section tables where tabulated.

    >>> box = PipeSections.from_names(["rectangular"], [3.0], [2.0])
    >>> round(float(froude_number(box, np.array([2.0]), np.array([0.5]))[0]), 6)  # V = 2, sqrt(g y)
    0.903202
    """
    pipes = _all(sections, index)
    eta = depth / sections.height[pipes]
    area, _, top = sections.elements(eta, pipes) if tables is None else tables.elements(eta, pipes)
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(area > 0, np.asarray(flow, dtype=float) * np.sqrt(top / (GRAVITY * area**3)), np.nan)


def specific_force(
    sections: PipeSections, flow: Array, depth: Array, *, index: Index | None = None, tables: SectionTables | None = None
) -> Array:
    r"""Specific force (momentum function) [m^3] of ``flow`` [m^3/s] at ``depth`` [m].

    .. math:: M = \frac{Q^2}{g A} + A \bar z, \qquad A \bar z = \int_0^y A(\eta)\, d\eta

    The first moment of the area about the surface is integrated by 16-point Gauss-Legendre
    quadrature of the section's own area, so any shape works; with ``tables`` the area and the
    moment of the shapes the height alone fixes are read from the section tables instead
    (:mod:`audit.grade_line.tables`; much faster, within about 1e-6).
    Source: Chow (1959), sec. 3-7.

    >>> box = PipeSections.from_names(["rectangular"], [3.0], [2.0])
    >>> round(float(specific_force(box, np.array([2.0]), np.array([0.5]))[0]), 6)  # 4/(g 1) + 2 0.5^2/2
    0.657886
    """
    pipes = _all(sections, index)
    eta = np.asarray(depth, dtype=float) / sections.height[pipes]
    table = tables if tables is not None else SectionTables.build(sections, tabulate=False)
    area = table.area(eta, pipes)
    moment = table.moment(eta, pipes)
    with np.errstate(divide="ignore"):
        return np.asarray(flow, dtype=float) ** 2 / (GRAVITY * area) + moment


def sequent_depth(
    sections: PipeSections, flow: Array, depth: Array, critical: Array, *, index: Index | None = None, tables: SectionTables | None = None
) -> Array:
    r"""Sequent (conjugate) depth [m] of a supercritical ``depth`` [m]: the subcritical depth of
    equal specific force, :math:`M(y_2) = M(y_1)`, :math:`y_c \le y_2 \le H`.

    ``critical`` [m] is the critical depth of each pipe (the bracket's lower end, where M is
    least). Where even the full section has less specific force than the supercritical flow the
    crown ``H`` is returned: the jump fills the conduit. Solved by Newton steps from a guess by
    Belanger's ratio on the hydraulic depth, with a bracketed root where they do not settle.
    ``tables``: as for :func:`specific_force`. A rectangle gives Belanger's
    :math:`y_2 / y_1 = (\sqrt{1 + 8 Fr_1^2} - 1)/2` (Chow 1959, sec. 3-7 and ch. 15).

    >>> box = PipeSections.from_names(["rectangular"], [3.0], [2.0])
    >>> y2 = sequent_depth(box, np.array([2.0]), np.array([0.2]), critical_depth(box, np.array([2.0])))
    >>> fr = 2.0 / 2.0 / 0.2 / np.sqrt(9.80665 * 0.2)
    >>> round(float(y2[0]), 6), round(float(0.2 * (np.sqrt(1 + 8 * fr**2) - 1) / 2), 6)
    (0.914749, 0.914749)
    """
    pipes = _all(sections, index)
    q = np.asarray(flow, dtype=float)
    depth = np.asarray(depth, dtype=float)
    height = sections.height[pipes]
    table = tables if tables is not None else SectionTables.build(sections, tabulate=False)
    out = np.full(pipes.size, np.nan)
    with np.errstate(invalid="ignore"):
        candidate = np.flatnonzero((depth < critical) & (critical <= height))
    pick, flows, high = pipes[candidate], q[candidate], height[candidate]
    area, top, moment = table.surface_terms(depth[candidate] / high, pick)  # once: the target and the first guess
    with np.errstate(divide="ignore", invalid="ignore"):
        force = flows**2 / (GRAVITY * area) + moment
    usable = np.flatnonzero(np.isfinite(force))
    if usable.size == 0:
        return out
    solve, target, pick, flows, high = candidate[usable], force[usable], pick[usable], flows[usable], high[usable]
    low = critical[solve]
    y = np.clip(_belanger_guess(flows, depth[solve], area[usable], top[usable]), low, high)
    step = np.full(y.size, np.inf)
    for _ in range(NEWTON_STEPS):  # Newton on M(y) - M1, with dM/dy = A (1 - Fr^2)
        area, top, moment = table.surface_terms(y / high, pick)
        with np.errstate(divide="ignore", invalid="ignore"):
            step = (flows**2 / (GRAVITY * area) + moment - target) / (area - flows**2 * top / (GRAVITY * area**2))
        moved = np.clip(y - np.where(np.isfinite(step), step, 0.0), low, high)
        step, y = moved - y, moved
    settled = np.abs(step) <= 1e-6 * high  # Newton converges quadratically: the next step would be ~1e-12
    out[solve] = y
    rest = np.flatnonzero(~settled)
    if rest.size:  # a bracketed root where Newton did not settle (a flow close to critical)

        def residual(x: Array, i: Index) -> Array:
            return specific_force(sections, flows[rest[i]], x, index=pick[rest[i]], tables=table) / target[rest[i]] - 1.0

        out[solve[rest]] = _root_near(residual, y[rest], low[rest], high[rest], widths=(1e-3, 0.1), xtol=1e-13, ftol=1e-10)
    return out


NEWTON_STEPS = 4
"""Newton steps toward a sequent depth from Belanger's guess (most settle to about 1e-12 of the height)."""


def _belanger_guess(flow: Array, depth: Array, area: Array, top: Array) -> Array:
    r"""A first guess of the sequent depth [m] of ``depth`` [m], whose flow ``area`` [m^2] and
    ``top`` width [m] are given: Belanger's ratio for a rectangle applied to the section's
    hydraulic depth :math:`D = A/T` (:math:`y_2 \approx y_1 + D ((\sqrt{1 + 8 Fr^2} - 1)/2 - 1)`);
    within a few per cent for circles below the crown."""
    hydraulic = area / top
    froude_sq = flow**2 / (GRAVITY * area**2 * hydraulic)
    return depth + hydraulic * ((np.sqrt(1.0 + 8.0 * froude_sq) - 1.0) / 2.0 - 1.0)
