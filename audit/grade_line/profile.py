r"""Gradually varied and pressurised flow in one pipe, for many pipes at once.

* the friction slope :math:`S_f` at which a section of area ``A`` and hydraulic radius ``R``
  carries ``Q`` by the pipes' friction law (Manning and Chezy in closed form, Colebrook-White
  by Newton steps on the Colebrook equation), and at full bore;
* the water surface profile by the direct step method: step in depth, solve for the distance
  (Chow 1959, sec. 10-2). Going a distance :math:`\Delta s` upstream,

  .. math:: \Delta s = \frac{E_{k+1} - E_k}{\bar S_f - S_0}, \qquad E = y + \frac{Q^2}{2 g A^2},
      \qquad \bar S_f = \frac{S_{f,k} + S_{f,k+1}}{2}

  from a known depth at the downstream end toward the depth the profile tends to (normal depth
  for an M1 curve) or stops at (the crown, or a sequent depth). The depths are spaced
  geometrically toward that end, so the approach to an asymptote is resolved, and the depth at
  the pipe's upstream end is interpolated where the summed distance reaches its length.

A pipe running full is pressurised: its hydraulic grade line rises upstream at the full-bore
friction slope :math:`S_{f,full}` (Manning: :math:`S_0 (Q/Q_f)^2`) until it falls back inside
the pipe, where the crown, which rises at the bed slope, overtakes it.

References
----------
.. [1] Chow, V. T. (1959). Open-Channel Hydraulics. McGraw-Hill, ch. 9 (gradually varied flow)
   and sec. 10-2 (the direct step method).
.. [2] Henderson, F. M. (1966). Open Channel Flow. Macmillan, ch. 4 (flow profiles).
"""

from __future__ import annotations

import functools

import numpy as np
from numpy.typing import NDArray

from audit.grade_line.tables import SectionTables
from audit.hydraulics import GRAVITY, Friction, PipeSections

Array = NDArray[np.float64]
Index = NDArray[np.intp]

FINEST_STEP = 1e-2
"""The last depth step toward the profile's end, as a share of the first departure from it [-]."""

NEWTON_STEPS = 3
r"""Newton steps on the Colebrook equation in :math:`1/\sqrt{\lambda}` (from 8: to about 1e-10 in turbulent flow)."""

ROW_STEPS = 1
"""Newton steps for the other points of a profile, from its first point's root: one moves a depth by at
most 1.5e-6 m against two over the benchmark's 216,000 profiles at a million pipes."""


def friction_slope(area: Array, radius: Array, flow: Array, friction: Friction, index: Index | None = None) -> Array:
    r"""Friction slope [-] at which a section of ``area`` [m^2] and hydraulic ``radius`` [m]
    carries ``flow`` [m^3/s] by the friction law of the pipes ``index``; :math:`V = Q/A`.
    ``area`` and ``radius`` may hold a row of values per pipe (shape (pipes, points)).

    .. math:: \text{Manning: } S_f = \frac{V^2 n^2}{R^{4/3}}, \qquad
        \text{Chezy: } S_f = \frac{V^2}{C^2 R}, \qquad
        \text{Colebrook-White: } S_f = \frac{\lambda V^2}{2 g D}, \; D = 4R,

    with :math:`x = 1/\sqrt{\lambda}` the root of the Colebrook equation
    :math:`x = -2 \log_{10}\left(\frac{k_s}{3.7 D} + \frac{2.51\, x}{Re}\right)`,
    :math:`Re = V D / \nu`, by Newton steps: the same law as the uniform-flow velocity of
    :mod:`audit.hydraulics.friction`, solved for the slope instead of the velocity. Sources:
    Chow (1959), eq. 5-1 and 5-6; Colebrook (1939).

    >>> f = Friction.uniform("manning", 0.013, 1)
    >>> # a 1 m pipe full at 0.01 carries A R^(2/3) S^(1/2) / n = 2.3976 m3/s (Chow 1959, eq. 5-6)
    >>> round(float(friction_slope(np.array([np.pi / 4]), np.array([0.25]), np.array([2.3976]), f)[0]), 6)
    0.01
    """
    roughness = friction.roughness if index is None else friction.roughness[index]
    roughness = roughness.reshape(roughness.shape + (1,) * (np.ndim(area) - roughness.ndim))  # per pipe, over its points
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        speed = flow / area
        if friction.formula == "manning":
            return (speed * roughness) ** 2 / np.cbrt(radius) ** 4
        if friction.formula == "chezy":
            return speed**2 / (roughness**2 * radius)
        diameter = 4.0 * radius
        wall = roughness / 1000.0 / (3.7 * diameter)
        viscous = 2.51 * friction.kinematic_viscosity / (np.abs(speed) * diameter)
        if np.ndim(speed) == 2 and np.shape(speed)[1] > 1:  # rows of points: start each row from its first point
            first = _colebrook(wall[:, :1], viscous[:, :1], np.full((np.shape(speed)[0], 1), 8.0), NEWTON_STEPS)
            x = _colebrook(wall, viscous, np.broadcast_to(first, np.shape(speed)), ROW_STEPS)
        else:
            x = _colebrook(wall, viscous, np.full(np.shape(speed), 8.0), NEWTON_STEPS)
        return speed**2 / (2.0 * GRAVITY * diameter * x**2)


def _colebrook(wall: Array, viscous: Array, x: Array, steps: int) -> Array:
    r""":math:`x = 1/\sqrt{\lambda}` of the Colebrook equation by ``steps`` Newton steps from ``x``,
    with ``wall`` :math:`= k_s / (3.7 D)` and ``viscous`` :math:`= 2.51 / Re`."""
    for _ in range(steps):
        inner = wall + viscous * x
        x = x - (x + 2.0 * np.log10(inner)) / (1.0 + 2.0 * viscous / (np.log(10.0) * inner))
    return x


def full_bore_slope(sections: PipeSections, flow: Array, friction: Friction, index: Index) -> Array:
    r"""Friction slope [-] of the pipes ``index`` running full with ``flow`` [m^3/s]: the slope
    of their hydraulic grade line when pressurised. Manning: :math:`S_f = S_0 (Q/Q_f)^2`
    (:math:`Q_f` at bed slope :math:`S_0`). NaN where the flow is not positive.

    >>> circle = PipeSections.from_names(["circular"], [1.0], [1.0])
    >>> f = Friction.uniform("manning", 0.013, 1)
    >>> round(float(full_bore_slope(circle, np.array([2.3976]), f, np.array([0]))[0]), 6)  # as above
    0.01
    """
    area, perimeter = sections.full()
    with np.errstate(divide="ignore", invalid="ignore"):
        slope = friction_slope(area[index], area[index] / perimeter[index], flow, friction, index)
    return np.where(flow > 0, slope, np.nan)


def step_weights(steps: int) -> Array:
    r"""Where the depth points of a profile lie, from its start (1) to its end (0) [-].

    Point k of ``steps`` sits at :math:`\epsilon^{(k / (steps - 1))^2}` of the start's
    departure from the end (:math:`\epsilon` = ``FINEST_STEP``) and the last point at the end
    itself: geometric toward the end, which resolves the approach to normal depth, and finer
    near the start, where the friction slope changes fastest relative to itself.

    >>> step_weights(4).round(4).tolist()  # 0.01 to the powers 0, 1/9, 4/9, 1; then the end
    [1.0, 0.5995, 0.1292, 0.01, 0.0]
    """
    return _weights(steps).copy()


@functools.cache
def _weights(steps: int) -> Array:
    """:func:`step_weights`, computed once per step count (read-only)."""
    weights = np.append(FINEST_STEP ** ((np.arange(steps) / (steps - 1)) ** 2), 0.0)
    weights.flags.writeable = False
    return weights


def _profile(
    sections: PipeSections, friction: Friction, index: Index, flow: Array, slope: Array, start: Array, stop: Array, steps: int,
    tables: SectionTables | None,
) -> tuple[Array, Array]:  # fmt: skip
    """The points of each profile of :func:`direct_step`: (problems, steps + 1) depths [m] and
    (problems, steps) summed distances [m] upstream from the first to each later point."""
    depth = stop[:, None] + (start - stop)[:, None] * _weights(steps)[None, :]
    up = np.flatnonzero(stop > start)
    if up.size:
        depth[up] = start[up, None] * (stop[up] / start[up])[:, None] ** np.linspace(0.0, 1.0, steps + 1)[None, :]
    eta = depth / sections.height[index][:, None]
    if tables is None:
        points = steps + 1
        area, perimeter, _ = sections.elements(eta.ravel(), np.repeat(index, points))
        area, perimeter = area.reshape(eta.shape), perimeter.reshape(eta.shape)
    else:
        area, perimeter = tables.area_perimeter(eta, index)
    q = flow[:, None]
    with np.errstate(divide="ignore", invalid="ignore"):
        energy = depth + (q / area) ** 2 / (2.0 * GRAVITY)
        sf = friction_slope(area, area / perimeter, q, friction, index)
        mean_surplus = 0.5 * (sf[:, 1:] + sf[:, :-1]) - slope[:, None]
        rise = np.diff(energy, axis=1)
        length = np.where(rise == 0.0, 0.0, rise / mean_surplus)
    length = np.where(np.isfinite(length) & (length >= 0.0), length, np.inf)
    return depth, np.cumsum(length, axis=1)


def read_profile(depth: Array, distance: Array, run: Array, stop: Array) -> tuple[Array, Array]:
    """The depth [m] a distance ``run`` [m] upstream along each profile (``depth`` at its points,
    ``distance`` summed to each point after the first), interpolated linearly between its
    points, and the run left beyond its end.

    Returns
    -------
    depth : the depth at ``run``; ``stop`` where the profile gets there first
    left : the distance [m] of ``run`` beyond the point where the profile reaches ``stop`` (0
        where it does not): the rest of the pipe is at ``stop`` (or, at the crown, full)
    """
    beyond = distance >= run[:, None]
    reached = ~beyond[:, -1]
    step = np.argmax(beyond, axis=1)
    rows = np.arange(depth.shape[0])
    before = np.where(step > 0, distance[rows, np.maximum(step - 1, 0)], 0.0)
    after = distance[rows, step]
    with np.errstate(invalid="ignore", divide="ignore"):
        share = np.where(after > before, (run - before) / (after - before), 0.0)
    share = np.where(np.isfinite(share), np.clip(share, 0.0, 1.0), 0.0)
    low, high = depth[rows, step], depth[rows, step + 1]
    found = low + (high - low) * share
    left = np.where(reached, run - distance[:, -1], 0.0)
    return np.where(reached, stop, found), left


def direct_step(
    sections: PipeSections,
    friction: Friction,
    index: Index,
    *,
    flow: Array,
    slope: Array,
    start: Array,
    stop: Array,
    run: Array,
    steps: int,
    tables: SectionTables | None = None,
) -> tuple[Array, Array]:
    r"""The depth a distance ``run`` upstream of a known depth, by the direct step method.

    Parameters
    ----------
    sections, friction : all pipes' sections and friction law
    index : the pipes to step (one problem each)
    flow : discharge [m^3/s], one per problem
    slope : bed slope S0 [-], positive downhill; zero or negative for flat and adverse pipes
    start : the known depth [m] at the downstream point
    stop : the depth [m] the profile tends to or ends at going upstream (normal depth for an
        M1 curve; the sequent depth for an S1 curve; the crown, where a flat pipe fills)
    run : distance [m] upstream at which the depth is wanted
    steps : depth steps between ``start`` and ``stop``: toward a lower stop (M1, S1 curves)
        spaced by :func:`step_weights`; toward a higher one (the H2 and A2 curves of flat and
        adverse pipes, whose depth grows like a power of the distance from critical depth)
        evenly in the logarithm of the depth
    tables : section tables to read A and P from (:mod:`audit.grade_line.tables`); exact
        elements when None

    Returns
    -------
    depth : the depth [m] at ``run`` (interpolated linearly between the profile's points);
        ``stop`` where the profile gets there first
    left : the distance [m] of ``run`` beyond the point where the profile reaches ``stop`` (0
        where it does not): the rest of the pipe is at ``stop`` (or, at the crown, full)

    A step the profile cannot take (the energy change and the friction surplus disagree in
    sign: it would have to pass a critical point) is infinitely long: the depth stays at the
    last point reached. References: Chow (1959), sec. 10-2.

    >>> circle = PipeSections.from_names(["circular"], [0.6], [0.6])
    >>> f = Friction.uniform("manning", 0.013, 1)
    >>> # far upstream of a high outlet level an M1 curve has come down to normal depth
    >>> depth, left = direct_step(circle, f, np.array([0]), flow=np.array([0.1]), slope=np.array([0.002]),
    ...                           start=np.array([0.55]), stop=np.array([0.3]), run=np.array([1e5]), steps=16)
    >>> float(depth[0]), float(left[0]) > 0
    (0.3, True)
    """
    depth, distance = _profile(sections, friction, index, flow, slope, start, stop, steps, tables)
    return read_profile(depth, distance, run, stop)
