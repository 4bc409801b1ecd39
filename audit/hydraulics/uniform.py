r"""Uniform-flow hydraulics of part-full and full pipes, for whole arrays of pipes at once.

For each pipe, from its section, bed slope and friction:

* full-bore capacity :math:`Q_f = A_f V(R_f)` and velocity :math:`V_f`;
* the discharge at any depth, :math:`Q(y) = A(y)\, V(R(y))`;
* the depth of maximum discharge and :math:`Q_{max}` (about 1.076 Qf at y/D = 0.938 for a
  circular pipe by Manning: common practice, no source);
* the normal depth for a design discharge: the lower root of :math:`Q(y) = Q` on
  :math:`0 < y \le y(Q_{max})`, also where :math:`Q_f < Q \le Q_{max}` (status
  ``above_full_bore``); where :math:`Q > Q_{max}` there is no free-surface solution and the pipe
  is ``surcharged`` (depth ratio 1, velocity Q / A_f);
* open channels (no lid): :math:`Q_f` and :math:`V_f` are bank-full, which is also their
  :math:`Q_{max}`; a flow above it has no in-bank solution (status ``above_bank_full``, depth
  ratio 1, velocity Q / A at bank-full);
* velocity and boundary shear stress :math:`\tau = \rho g R S` at that depth;
* design helpers: the smallest commercial diameter that carries Q within a depth ratio, and
  the slope a given size needs.

Missing, infinite, zero or negative inputs never raise: the outputs are NaN and ``status`` says
why. Flows and slopes may be plain numbers, broadcast against the pipes.

References
----------
.. [1] Chow, V. T. (1959). Open-Channel Hydraulics. McGraw-Hill, ch. 5 and 6 (uniform flow,
   normal depth, conduits flowing partly full).
.. [2] Butler, D. and Davies, J. W. (2011). Urban Drainage, 3rd ed. Spon, ch. 8 (part-full
   pipe flow; boundary shear stress).
"""

from __future__ import annotations

from dataclasses import dataclass
from enum import IntEnum

import numpy as np
from numpy.typing import ArrayLike, NDArray

from audit.hydraulics.friction import GRAVITY, Friction, water_density
from audit.hydraulics.roots import bracketed_root, golden_maximum
from audit.hydraulics.sections import PipeSections

Array = NDArray[np.float64]
Index = NDArray[np.intp]


class FlowStatus(IntEnum):
    """Why a pipe's normal-depth result is what it is; ordered by which input is checked first."""

    OK = 0
    ABOVE_FULL_BORE = 1  # closed section, Qf < Q <= Qmax: lower root returned; unstable in practice
    SURCHARGED = 2  # closed section, Q > Qmax: no free-surface solution
    UNKNOWN_SHAPE = 3
    MISSING_SIZE = 4  # size NaN, infinite, zero or negative; a trapezoid's side slope negative or infinite
    MISSING_SLOPE = 5  # slope NaN or infinite (either sign)
    NONPOSITIVE_SLOPE = 6  # slope <= 0: no normal depth exists
    MISSING_ROUGHNESS = 7  # roughness NaN, infinite, zero or negative (ks = 0 is a smooth wall)
    MISSING_FLOW = 8  # design flow NaN, infinite or negative
    ZERO_FLOW = 9  # design flow exactly zero: no depth or velocity to check
    ABOVE_BANK_FULL = 10  # open channel, Q > bank-full capacity: no in-bank solution

    @property
    def label(self) -> str:
        """The lower-case name used in outputs, e.g. ``nonpositive_slope``."""
        return self.name.lower()


def input_status(sections: PipeSections, slope: Array, friction: Friction, flow: Array | None = None) -> NDArray[np.int8]:
    """The first problem with each pipe's inputs (``FlowStatus.OK`` when there is none)."""
    checks = [
        (sections.kind < 0, FlowStatus.UNKNOWN_SHAPE),
        (~sections.size_known(), FlowStatus.MISSING_SIZE),
        (~np.isfinite(slope), FlowStatus.MISSING_SLOPE),
        (~(slope > 0), FlowStatus.NONPOSITIVE_SLOPE),
        (~friction.roughness_known(), FlowStatus.MISSING_ROUGHNESS),
    ]
    if flow is not None:
        checks += [(~(np.isfinite(flow) & (flow >= 0)), FlowStatus.MISSING_FLOW), (flow == 0, FlowStatus.ZERO_FLOW)]
    status = np.zeros(len(sections), dtype=np.int8)
    for failed, code in reversed(checks):
        status[failed] = code
    return status


def per_pipe(values: ArrayLike, count: int) -> Array:
    """``values`` [any unit] as one float per pipe: a plain number is broadcast to ``count`` pipes."""
    return np.broadcast_to(np.asarray(values, dtype=float), (count,))


def discharge_at(
    sections: PipeSections, eta: ArrayLike, slope: ArrayLike, friction: Friction, index: Index | None = None
) -> Array:
    r"""Uniform-flow discharge [m^3/s] at relative depth ``eta``: :math:`Q = A\,V(A/P, S)`.

    Negative velocities (Colebrook-White's explicit form below its turbulent range: millimetre
    pipes at tiny slopes) are taken as zero.
    """
    area, perimeter, _ = sections.elements(np.asarray(eta, dtype=float), index)
    with np.errstate(invalid="ignore", divide="ignore"):
        radius = np.where(perimeter > 0, area / perimeter, 0.0)
    slope = per_pipe(slope, len(sections))
    s = slope if index is None else slope[index]
    velocity = friction.velocity(radius, s, index)
    return np.where(area > 0, area * np.maximum(velocity, 0.0), 0.0)


def full_bore(sections: PipeSections, slope: ArrayLike, friction: Friction) -> tuple[Array, Array]:
    r"""Full-bore capacity :math:`Q_f` [m^3/s] and velocity :math:`V_f` [m/s].

    .. math:: Q_f = A_f\, V(R_f, S), \qquad R_f = A_f / P_f

    For an open channel, bank-full capacity and velocity (no lid in :math:`P_f`). ``slope`` [-]
    is one value per pipe or a plain number. NaN where an input is missing or the slope is not
    positive (see :func:`input_status`); zero, not negative, where Colebrook-White gives no flow.
    """
    slope = per_pipe(slope, len(sections))
    _, _, q_full, v_full = _full_bore(sections, slope, friction, bad=_unusable(sections, slope, friction))
    return q_full, v_full


def _unusable(sections: PipeSections, slope: Array, friction: Friction) -> NDArray[np.bool_]:
    """Pipes whose section, slope or roughness rules out uniform flow (the flow aside)."""
    return input_status(sections, slope, friction) != FlowStatus.OK


def _full_bore(sections: PipeSections, slope: Array, friction: Friction, *, bad: NDArray[np.bool_]) -> tuple[Array, Array, Array, Array]:
    """Full-bore area, perimeter, capacity and velocity; capacity and velocity NaN where ``bad``."""
    area, perimeter = sections.full()
    good = np.flatnonzero(~bad)
    velocity = np.full(len(sections), np.nan)
    velocity[good] = np.maximum(friction.velocity(area[good] / perimeter[good], slope[good], good), 0.0)
    return area, perimeter, area * velocity, velocity


def capacity_peak(
    sections: PipeSections, slope: ArrayLike, friction: Friction, *, refine: NDArray[np.bool_] | None = None
) -> tuple[Array, Array]:
    """Relative depth of maximum discharge and :math:`Q_{max}` [m^3/s] per pipe.

    By Manning the peak depends on the shape alone (``Section.eta_capacity``). Colebrook-White
    and Chezy move it slightly with size and roughness, so there it is refined per pipe by a
    golden-section search within 0.05 of the Manning peak: for every pipe, or only where
    ``refine`` is True (elsewhere the Manning peak depth is kept; its discharge is within 0.1 %
    of the true peak, which is flat). Open channels peak at bank-full. ``slope`` [-] is one
    value per pipe or a plain number.
    """
    slope = per_pipe(slope, len(sections))
    return _capacity_peak(sections, slope, friction, bad=_unusable(sections, slope, friction), refine=refine)


def _capacity_peak(
    sections: PipeSections,
    slope: Array,
    friction: Friction,
    *,
    bad: NDArray[np.bool_],
    refine: NDArray[np.bool_] | None = None,
    flow: Array | None = None,
) -> tuple[Array, Array]:
    """:func:`capacity_peak` for pipes already checked (``bad``); with ``flow``, the peak is
    refined only where the flow exceeds 99 % of the discharge at the Manning peak depth."""
    eta = sections.eta_capacity()
    good = np.flatnonzero(~bad)
    q_max = np.full(len(sections), np.nan)
    q_max[good] = discharge_at(sections, eta[good], slope, friction, good)
    if friction.formula != "manning":
        chosen = ~bad & np.isfinite(eta) & (eta < 1.0)  # a peak at the soffit (flat lid, bank-full) needs no search
        if refine is not None:
            chosen &= refine
        if flow is not None:
            chosen &= flow > 0.99 * q_max
        index = np.flatnonzero(chosen)
        if index.size:
            low, high = np.clip(eta[index] - 0.05, 0.0, 1.0), np.clip(eta[index] + 0.05, 0.0, 1.0)
            eta[index], _ = golden_maximum(lambda x, i: discharge_at(sections, x, slope, friction, index[i]), low, high)
            q_max[index] = discharge_at(sections, eta[index], slope, friction, index)
    return np.where(bad, np.nan, eta), np.where(bad, np.nan, q_max)


@dataclass(frozen=True)
class PipeHydraulics:
    """Every pipe as the hydraulics sees it: sections, bed slope [m/m], friction, length [m], water temperature [degC]."""

    sections: PipeSections
    slope: Array
    friction: Friction
    length: Array
    temperature_c: float = 15.0


@dataclass(frozen=True)
class FlowState:
    """Uniform flow of the design discharge in each pipe (SI; NaN where not computable)."""

    q_full: Array  # full-bore capacity [m^3/s]; bank-full for an open channel
    v_full: Array  # full-bore velocity [m/s]; bank-full for an open channel
    q_max: Array  # maximum free-surface discharge [m^3/s]
    depth: Array  # normal depth [m]; the full height when surcharged or above bank-full
    depth_ratio: Array  # normal depth / height [-]; 1.0 when surcharged or above bank-full
    area: Array  # flow area [m^2]
    velocity: Array  # mean velocity [m/s]
    shear: Array  # boundary shear stress rho g R S [Pa]
    status: NDArray[np.int8]  # FlowStatus per pipe

    @property
    def load_ratio(self) -> Array:
        """Design discharge over full-bore (bank-full) capacity, Q / Qf [-]; inf where Qf is 0."""
        with np.errstate(divide="ignore"):
            return self.area * self.velocity / self.q_full


def normal_depth(
    flow: ArrayLike, sections: PipeSections, slope: ArrayLike, friction: Friction, *, temperature_c: float = 15.0
) -> FlowState:
    r"""Normal depth, velocity and shear for the design discharge ``flow`` [m^3/s] in every pipe.

    Solves :math:`Q(y) = Q` on :math:`0 < y/H \le \eta(Q_{max})` with the vectorised
    Anderson-Bjoerck regula falsi (``audit._roots``), in the variable
    :math:`(Q(y)/Q)^{1/2} - 1`, which is nearly linear in y and so converges in a few steps.
    Then :math:`V = Q / A(y_n)` and :math:`\tau = \rho g R(y_n) S` with the water density at
    ``temperature_c``. Surcharged pipes (:math:`Q > Q_{max}`) get depth ratio 1, velocity
    :math:`Q / A_f` and the full-bore shear; so do open channels above bank-full (status
    ``above_bank_full``). ``flow`` and ``slope`` [-] are one value per pipe or plain numbers.

    References: Chow (1959), sec. 6-2 (normal depth); Butler and Davies (2011), sec. 8.4.
    """
    q = per_pipe(flow, len(sections))
    s = per_pipe(slope, len(sections))
    status = input_status(sections, s, friction, q)
    # the flow is checked last, so a flow problem alone leaves capacity computable
    bad = (status != FlowStatus.OK) & (status < FlowStatus.MISSING_FLOW)
    full_area, full_perimeter, q_full, v_full = _full_bore(sections, s, friction, bad=bad)
    usable = status == FlowStatus.OK
    eta_peak, q_max = _capacity_peak(sections, s, friction, bad=bad, flow=np.where(usable, q, np.nan))
    surcharged = usable & (q > q_max)
    solve = np.flatnonzero(usable & ~surcharged)
    eta = np.full(q.shape, np.nan)
    eta[surcharged] = 1.0
    if solve.size:
        eta[solve] = _solve_depth(q, sections, s, friction, solve, eta_peak[solve], q[solve] / q_max[solve])
    is_open = sections.is_open
    status[usable & (q > q_full) & ~surcharged & ~is_open] = FlowStatus.ABOVE_FULL_BORE
    status[surcharged & ~is_open] = FlowStatus.SURCHARGED
    status[surcharged & is_open] = FlowStatus.ABOVE_BANK_FULL
    area, perimeter, _ = sections.elements(eta)
    area = np.where(surcharged, full_area, area)
    perimeter = np.where(surcharged, full_perimeter, perimeter)
    with np.errstate(over="ignore", invalid="ignore", divide="ignore"):  # extreme or missing inputs give inf or NaN, as their status says
        velocity = q / area
        shear = water_density(temperature_c) * GRAVITY * area / perimeter * s
    return FlowState(q_full, v_full, q_max, eta * sections.height, eta, area, velocity, shear, status)


def _solve_depth(
    q: Array, sections: PipeSections, slope: Array, friction: Friction, solve: Index, peak: Array, ratio: Array
) -> Array:
    """Relative normal depth of the pipes ``solve``, whose roots lie on ``[0, peak]``.

    A first guess from the shape's Manning curve narrows each bracket to a few 1e-4 around it
    (Manning: the guess is exact to the table's resolution; other formulas: a few 1e-3), wider
    where that bracket holds no sign change (unusual aspects), then the whole ``[0, peak]``.
    """

    def residual(x: Array, index: Index) -> Array:
        pick = solve[index]
        return np.sqrt(discharge_at(sections, x, slope, friction, pick) / q[pick]) - 1.0

    guess = _manning_depth_guess(sections, solve, ratio)
    low, high = np.zeros(solve.size), peak.copy()
    f_low, f_high = np.full(solve.size, -1.0), np.full(solve.size, np.nan)
    pending = np.arange(solve.size)
    for half_width in (3e-4, 1e-2) if friction.formula == "manning" else (3e-3, 2e-2):
        lo, hi = np.clip(guess[pending] - half_width, 0.0, peak[pending]), np.clip(guess[pending] + half_width, 0.0, peak[pending])
        f_lo, f_hi = residual(lo, pending), residual(hi, pending)
        found = f_lo * f_hi <= 0.0
        keep = pending[found]
        low[keep], high[keep], f_low[keep], f_high[keep] = lo[found], hi[found], f_lo[found], f_hi[found]
        pending = pending[~found]
    f_high[pending] = residual(high[pending], pending)
    return bracketed_root(residual, low, high, f_low=f_low, f_high=f_high, ftol=1e-12)


def _manning_depth_guess(sections: PipeSections, solve: Index, ratio: Array) -> Array:
    """Relative depth where :math:`Q/Q_{max} =` ``ratio`` on each shape's Manning curve.

    The curve :math:`A^{5/3} P^{-2/3}` is tabulated once per shape present (at the median
    aspect of its pipes) and inverted by interpolation: exact for Manning up to the table's
    resolution, a close start for the other formulas.
    """
    guess = np.full(solve.size, 0.5)
    kind = sections.kind[solve]
    for code, shape in enumerate(sections.shapes):
        members = np.flatnonzero(kind == code)
        if members.size == 0:
            continue
        aspect = float(np.median(sections.width[solve[members]] / sections.height[solve[members]]))
        eta = np.linspace(0.0, shape.eta_capacity, 4097)
        area, perimeter, _ = shape.elements(eta, np.ones_like(eta), np.full_like(eta, aspect))
        with np.errstate(invalid="ignore", divide="ignore"):
            conveyance = np.where(perimeter > 0, area ** (5 / 3) / perimeter ** (2 / 3), 0.0)
        guess[members] = np.interp(ratio[members], conveyance / conveyance[-1], eta)
    return guess


def smallest_diameter(
    flow: ArrayLike, slope: ArrayLike, friction: Friction, *, diameters: ArrayLike, max_depth_ratio: float = 1.0
) -> Array:
    """The smallest circular diameter [m] from ``diameters`` that carries ``flow`` [m^3/s].

    A diameter carries the flow when the uniform-flow discharge at ``max_depth_ratio`` (capped
    at the depth of maximum discharge) is at least the flow. NaN where none of the sizes does,
    or an input is missing. ``friction.roughness`` holds one value per pipe; ``flow`` and
    ``slope`` [-] are one value per pipe or plain numbers.
    """
    q = per_pipe(flow, friction.roughness.size)
    s = per_pipe(slope, friction.roughness.size)
    usable = np.isfinite(q) & (q >= 0) & np.isfinite(s) & (s > 0) & friction.roughness_known()
    chosen = np.full(q.shape, np.nan)
    for size in np.sort(np.asarray(diameters, dtype=float))[::-1]:  # a loop over sizes, not pipes
        sections = PipeSections.from_names(np.full(q.shape, "circular"), np.full(q.shape, size), np.full(q.shape, size))
        eta = np.minimum(max_depth_ratio, sections.eta_capacity())
        carries = discharge_at(sections, eta, s, friction) >= q
        chosen = np.where(carries & usable, size, chosen)
    return chosen


def required_slope(
    flow: ArrayLike, sections: PipeSections, friction: Friction, *, depth_ratio: float = 1.0, max_slope: float = 1.0
) -> Array:
    r"""The bed slope [-] at which each pipe carries ``flow`` [m^3/s] at ``depth_ratio``.

    ``depth_ratio`` = 1 means running just full (full-bore area and perimeter; bank-full for an
    open channel). Manning and Chezy give :math:`Q \propto S^{1/2}` exactly, Colebrook-White
    nearly so, so the root is found in :math:`\sqrt{S}` on :math:`(0, \sqrt{S_{max}}]`. NaN
    where the flow needs more than ``max_slope`` or an input is missing. ``flow`` is one value
    per pipe or a plain number.
    """
    q = per_pipe(flow, len(sections))
    if depth_ratio >= 1.0:
        area, perimeter = sections.full()
    else:
        area, perimeter, _ = sections.elements(np.full(q.shape, depth_ratio))
    with np.errstate(invalid="ignore", divide="ignore"):  # sizes that describe no section: left out below
        radius = area / perimeter

    def residual(root_slope: Array, index: Index) -> Array:
        return area[index] * friction.velocity(radius[index], root_slope**2, index) / q[index] - 1.0

    valid = np.flatnonzero(np.isfinite(q) & (q > 0) & sections.size_known() & (area > 0) & friction.roughness_known())
    out = np.full(q.shape, np.nan)
    if valid.size:
        low = np.full(valid.size, 1e-9)
        roots = bracketed_root(lambda x, i: residual(x, valid[i]), low, np.full(valid.size, np.sqrt(max_slope)), ftol=1e-13)
        out[valid] = roots**2
    return out
