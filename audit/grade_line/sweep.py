r"""The hydraulic grade line of a whole network at the design flows, swept from its ends upstream.

Before the sweep, for all pipes at once: normal depth (or the uniform-flow state the caller
already has), critical depth, the Froude number at normal depth, the full-bore friction slope,
and each pipe's *free state*: the level it needs at its upstream end when nothing downstream
holds it up (normal depth; critical depth and the H2/A2 curve on a flat or adverse pipe; full
from its outlet where its own capacity is exceeded). Then one Python turn per level of the
network (:mod:`audit.grade_line.order`), lowest first:

1. the nodes of the level get their water level: the highest level their outgoing pipes need,
   a manhole loss :math:`k v^2/2g` added (k by the turn the flow makes into each pipe,
   :mod:`audit.grade_line.losses`), raised to a fixed boundary level where one is given;
   the level carried further up is capped at the rim (the water spills there);
2. the pipes ending at those nodes: a pipe whose downstream depth :math:`y_d` (node level less
   its downstream invert) does not pass its *threshold* keeps its free state; the others, held
   up by the level below, are worked out together:

   * :math:`y_d` above the crown, or flow above full-bore capacity: pressurised; the grade line
     rises upstream at the full-bore friction slope until it falls back inside the pipe, and a
     free-surface profile continues from the crown;
   * a mild pipe (normal depth above critical) with :math:`y_n < y_d`: the M1 curve by the
     direct step method (:mod:`audit.grade_line.profile`); at or below normal depth the
     upstream end stays at normal depth (the M2 drawdown is not followed: exact for long pipes
     and conservative, a little high, for short ones); below critical depth the pipe falls
     freely into the node (critical depth at its outlet);
   * a steep pipe (normal depth below critical): its upstream end stays at normal depth unless
     :math:`y_d` is above the sequent depth of its normal depth (equal specific force), which
     drowns the supercritical flow: a hydraulic jump in the pipe, and the subcritical (S1)
     profile carried up from :math:`y_d` until it meets the sequent depth, or the upstream end;
   * a flat or adverse pipe: the H2/A2 curve from :math:`\max(y_d, y_c)`, full from where it
     reaches the crown;
   * a pipe without flow: the water stands level from downstream (no lower than its inverts).

Water surface profiles do not cross, so a held-up pipe's upstream level is never below its
free-state level, nor the level its node needs below what its free state needs (a floor that
also covers a drowned jump, where the subcritical level can be lower than the supercritical one
plus its velocity head): rounding never makes a rising tailwater lower a level upstream.

Boundaries at the terminal nodes (no evaluated pipe leaves them): ``FREE`` (each incoming pipe
falls freely: depth at its outlet the smaller of its critical and normal depth), ``NORMAL``
(normal depth in each incoming pipe; critical depth where a flat pipe has none), ``FIXED`` (a
water level). A terminal the caller did not mark, or marked ``FIXED`` without a level, is
taken as ``FREE`` and reported as *boundary assumed*. A ``FIXED`` level at a node that pipes
leave is a floor for its level; ``FREE`` and ``NORMAL`` there are ignored.

Open channels (sections without a lid) are swept the same way; where their level rises above
bank-full the regime is ``above_bank_full`` rather than pressurised, and the grade line is
carried up at the bank-full friction slope (the flow outside the banks is not credited).

References
----------
.. [1] Chow, V. T. (1959). Open-Channel Hydraulics. McGraw-Hill, ch. 3, 9, 10 and 15.
.. [2] Henderson, F. M. (1966). Open Channel Flow. Macmillan, ch. 2 to 4.
"""

from __future__ import annotations

from dataclasses import dataclass
from enum import IntEnum
from typing import Any

import numpy as np
from numpy.typing import NDArray

from audit.grade_line.critical import critical_depth, froude_number, sequent_depth
from audit.grade_line.flooding import flood_screen, node_soffits
from audit.grade_line.losses import Turns, loss_coefficients
from audit.grade_line.order import SweepOrder, sweep_order
from audit.grade_line.profile import direct_step, full_bore_slope
from audit.grade_line.settings import BoundaryKind, GradeLineSettings
from audit.grade_line.tables import SectionTables
from audit.hydraulics import GRAVITY, FlowState, FlowStatus, Friction, PipeHydraulics, PipeSections, normal_depth

Array = NDArray[np.float64]
Index = NDArray[np.intp]
Flags = NDArray[np.bool_]


class PipeRegime(IntEnum):
    """How the water runs in a pipe at the design flow, as the grade line sweep finds it."""

    SUBCRITICAL = 0  # free surface, subcritical at the upstream end (normal depth or backwater)
    SUPERCRITICAL = 1  # free surface, supercritical at the upstream end (steep pipe)
    FREE_FALL = 2  # free surface, critical depth at the outlet: falls freely into the node
    PARTLY_PRESSURISED = 3  # full over part of its length
    PRESSURISED = 4  # full over its whole length
    ABOVE_BANK_FULL = 5  # an open channel whose level rises above its banks
    DRY = 6  # no design flow; the levels show any water standing from downstream
    NOT_EVALUATED = 7  # left out: not asked for, unusable data, or on a directed cycle

    @property
    def label(self) -> str:
        """The lower-case name used in outputs, e.g. ``partly_pressurised``."""
        return self.name.lower()


class FullCause(IntEnum):
    """Why a pipe runs full (pressurised over all or part of its length)."""

    NONE = 0  # it does not run full
    OWN_CAPACITY = 1  # its design flow exceeds its full-bore capacity (a flat pipe: it fills by its own friction)
    BACKWATER = 2  # under its capacity, held up by the level below it

    @property
    def label(self) -> str:
        """The lower-case name used in outputs, e.g. ``own_capacity``."""
        return self.name.lower()


@dataclass(frozen=True)
class GradeLine:
    """The hydraulic grade line of a network at the design flows (SI; NaN where not evaluated).

    Per pipe (input order): water level and depth at each end in flow direction (a depth above
    the pipe's height is a pressure head), critical depth, Froude number at normal depth, the
    :class:`PipeRegime`, the :class:`FullCause`, a hydraulic-jump mask, whether its outlet is
    free of the level in its downstream node (a free fall at critical or normal depth above it,
    supercritical flow below it that the level does not drown, or a pipe over its capacity full
    at its outlet above it), the friction slope where the pipe runs full, the k of its manhole
    loss (:mod:`audit.grade_line.losses`), and whether it was
    left out for lying on a directed cycle. Per node: the water level, the freeboard below the
    rim (negative above it), the flood depth above the rim, the
    :class:`~audit.grade_line.flooding.FloodState` and whether its boundary was assumed.
    """

    level_up: Array  # water level at the upstream end [m]
    level_down: Array  # water level at the downstream end [m]
    depth_up: Array  # level_up - upstream invert [m]
    depth_down: Array  # level_down - downstream invert [m]
    critical_depth: Array  # [m]
    froude: Array  # Froude number at normal depth [-]; NaN where there is none
    regime: NDArray[np.int8]  # PipeRegime per pipe
    full_cause: NDArray[np.int8]  # FullCause per pipe
    jump: Flags  # the supercritical flow is drowned by the level below: a hydraulic jump
    free_outlet: Flags  # the outlet is not held at its node's level: the level below does not reach it
    full_friction_slope: Array  # friction slope where the pipe runs full [-]; NaN elsewhere
    loss_k: Array  # k of the manhole loss k v^2/2g at its upstream node [-]; NaN where not evaluated
    on_cycle: Flags  # left out: the pipe lies on a directed cycle of the evaluated pipes
    node_level: Array  # water level per node [m]
    freeboard: Array  # rim - node level [m]
    flood_depth: Array  # max(node level - rim, 0) [m]
    flood_state: NDArray[np.int8]  # FloodState per node
    boundary_assumed: Flags  # a terminal node taken as a free outfall without being marked


@dataclass(frozen=True)
class _Pipes:
    """The swept pipes in sweep order: inputs, pre-computed hydraulics and the free state."""

    tables: SectionTables
    pipe: Index  # input position
    up: Index  # node position (in sweep order) of the upstream end
    down: Index  # node position of the downstream end
    up_invert: Array
    down_invert: Array
    height: Array
    length: Array
    slope: Array
    flow: Array  # 0 where there is no flow
    normal: Array  # normal depth [m]; inf where there is none (flat, adverse, above capacity)
    critical: Array
    normal_speed: Array  # velocity at normal depth [m/s]
    full_slope: Array  # full-bore friction slope [-]
    full_area: Array  # [m^2]
    dry: Flags  # no flow
    own: Flags  # flow above the pipe's own full-bore capacity (positive bed slope)
    froude: Array  # Froude number at normal depth [-]; NaN where there is none
    steep: Flags  # normal depth below critical
    sequent: Array  # sequent depth of the normal depth of a steep pipe, capped at the crown [m]; inf elsewhere
    flat: Flags  # flow on a flat or adverse bed
    outlet: Array  # depth at a free outlet: min(critical, normal); normal at a NORMAL terminal
    threshold: Array  # downstream depth above which the node's level matters to the pipe
    level: Array  # free state: level needed at the upstream end [m]
    speed: Array  # free state: velocity at the upstream end [m/s]
    need: Array  # free state: level needed in the upstream node, manhole loss included [m]
    loss: Array  # k of the manhole loss k v^2/2g at the upstream node [-]
    regime: NDArray[np.int8]  # free state regime (mild pipes: settled after the sweep)
    cause: NDArray[np.int8]
    values: Array  # the ``_PACKED`` quantities, one row each (the fields above are views of it)
    group: NDArray[np.int8]  # _DRY, _OWN, _STEEP, _FLAT or _MILD


# what the sweep reads of a held-up pipe, one row per quantity and one column per pipe, so a
# level gathers its pipes in one step
_PACKED = ("up_invert", "down_invert", "height", "length", "slope", "flow", "normal", "sequent", "normal_speed", "full_slope", "full_area",
           "level", "need", "loss")  # fmt: skip
_DRY, _OWN, _STEEP, _FLAT, _MILD = range(5)


@dataclass
class _Found:
    """What the sweep finds for the pipes the level below holds up (sweep order)."""

    held: Flags
    level: Array
    regime: NDArray[np.int8]
    cause: NDArray[np.int8]
    jump: Flags

    def record(self, rows: Index, level: Array, regime: NDArray[np.int8], cause: NDArray[np.int8], jump: Flags) -> None:
        """Keep what was found for the pipes ``rows``."""
        self.held[rows] = True
        self.level[rows], self.regime[rows], self.cause[rows], self.jump[rows] = level, regime, cause, jump

    @classmethod
    def empty(cls, count: int) -> _Found:
        return cls(np.zeros(count, dtype=bool), np.full(count, np.nan), np.zeros(count, dtype=np.int8),
                   np.zeros(count, dtype=np.int8), np.zeros(count, dtype=bool))  # fmt: skip


def _usable(pipes: PipeHydraulics, state: FlowState, up_invert: Array, down_invert: Array) -> Flags:
    """Pipes whose data allow a grade line: a known section and size, a slope of either sign,
    a roughness, a positive length and both inverts."""
    shaped = ~np.isin(state.status, [FlowStatus.UNKNOWN_SHAPE, FlowStatus.MISSING_SIZE, FlowStatus.MISSING_SLOPE])
    roughness = pipes.friction.roughness
    rough = np.isfinite(roughness) & ((roughness > 0) | ((roughness == 0) & (pipes.friction.formula == "colebrook-white")))
    length = np.isfinite(pipes.length) & (pipes.length > 0)
    return np.asarray(shaped & rough & length & np.isfinite(up_invert) & np.isfinite(down_invert))


def _velocity_head(speed: Array) -> Array:
    return speed**2 / (2.0 * GRAVITY)


def _prepare(
    pipes: PipeHydraulics, state: FlowState, order: SweepOrder, *, flow: Array, rank: Index, upstream: Index, downstream: Index,
    up_invert: Array, down_invert: Array, normal_out: Flags, loss: Array, settings: GradeLineSettings,
) -> _Pipes:  # fmt: skip
    """The swept pipes' hydraulics and free state, computed once for all of them."""
    sections = pipes.sections
    p = order.pipes
    q = flow[p]
    slope, height = pipes.slope[p], sections.height[p]
    full_area, _ = sections.full()
    full_slope = np.full(p.size, np.nan)
    wet = np.flatnonzero(q > 0)
    full_slope[wet] = full_bore_slope(sections, q[wet], pipes.friction, p[wet])
    own = (slope > 0) & (q > 0) & (full_slope > slope)
    normal, speed = _normal_depths(pipes, state, q, p, where=(slope > 0) & (q > 0) & ~own)
    tables = SectionTables.build(sections)
    critical = critical_depth(sections, q, index=p)
    steep = normal < critical
    froude = np.full(p.size, np.nan)
    uniform = np.flatnonzero(np.isfinite(normal))
    froude[uniform] = froude_number(sections, q[uniform], normal[uniform], index=p[uniform], tables=tables)
    sequent = np.full(p.size, np.inf)
    fast = np.flatnonzero(steep)
    sequent[fast] = sequent_depth(sections, q[fast], normal[fast], critical[fast], index=p[fast], tables=tables)
    values = np.empty((len(_PACKED), p.size))
    packed = dict(zip(_PACKED, values, strict=True))
    packed["up_invert"][:], packed["down_invert"][:], packed["height"][:] = up_invert[p], down_invert[p], height
    packed["length"][:], packed["slope"][:], packed["flow"][:] = pipes.length[p], slope, q
    packed["normal"][:], packed["sequent"][:], packed["normal_speed"][:] = normal, sequent, speed
    packed["full_slope"][:], packed["full_area"][:], packed["loss"][:] = full_slope, full_area[p], loss[p]
    dry, flat = q == 0, (q > 0) & (slope <= 0)
    group = np.where(dry, _DRY, np.where(own, _OWN, np.where(steep, _STEEP, np.where(flat, _FLAT, _MILD)))).astype(np.int8)
    table = _Pipes(
        tables=tables, pipe=p, up=rank[upstream[p]], down=rank[downstream[p]], critical=critical, dry=dry, own=own, froude=froude,
        steep=steep, flat=flat, outlet=np.where(normal_out & np.isfinite(normal), normal, np.minimum(critical, normal)),
        threshold=np.empty(p.size), speed=np.zeros(p.size),
        regime=np.full(p.size, PipeRegime.SUBCRITICAL, dtype=np.int8), cause=np.zeros(p.size, dtype=np.int8), values=values,
        group=group, **packed,
    )  # fmt: skip
    _free_state(table, pipes, settings)
    return table


def _normal_depths(pipes: PipeHydraulics, state: FlowState, flow: Array, index: Index, *, where: Flags) -> tuple[Array, Array]:
    """Normal depth [m] and its velocity [m/s] of the pipes ``index`` (inf and NaN elsewhere),
    from ``state``; solved here for any pipe the state has none for (other flows)."""
    depth = np.where(where, state.depth[index], np.inf)
    speed = np.where(where, state.velocity[index], np.nan)
    missing = np.flatnonzero(where & ~np.isfinite(depth))
    if missing.size:
        pick = index[missing]
        sections = PipeSections(pipes.sections.kind[pick], pipes.sections.height[pick], pipes.sections.width[pick], pipes.sections.shapes)
        friction = Friction(pipes.friction.formula, pipes.friction.roughness[pick], pipes.friction.kinematic_viscosity)
        solved = normal_depth(flow[missing], sections, pipes.slope[pick], friction, temperature_c=pipes.temperature_c)
        depth[missing], speed[missing] = np.where(np.isfinite(solved.depth), solved.depth, np.inf), solved.velocity
    return depth, speed


def _free_state(t: _Pipes, pipes: PipeHydraulics, settings: GradeLineSettings) -> None:
    """Fill each pipe's free state and threshold (in place): what it needs with nothing below."""
    dry, own, steep, flat = t.dry, t.own, t.steep, t.flat
    crown_down = t.down_invert + t.height
    t.level[:] = np.where(dry, t.up_invert, np.where(own, crown_down + t.full_slope * t.length, t.up_invert + t.normal))
    t.speed[:] = np.where(dry, 0.0, np.where(own, t.flow / t.full_area, t.normal_speed))
    t.regime[:] = np.select([dry, own, steep], [PipeRegime.DRY, PipeRegime.PRESSURISED, PipeRegime.SUPERCRITICAL], PipeRegime.SUBCRITICAL)
    t.cause[:] = np.where(own, FullCause.OWN_CAPACITY, FullCause.NONE)
    t.threshold[:] = np.select([dry, own, steep, flat], [t.up_invert - t.down_invert, t.height, t.sequent, t.critical], t.normal)
    rows = np.flatnonzero(flat)
    if rows.size:  # the H2 / A2 curve up from critical depth at the outlet
        level, speed, filled = _climb(t, rows, pipes, start=t.outlet[rows], run=t.length[rows], steps=settings.profile_steps)
        t.level[rows], t.speed[rows] = level, speed
        t.regime[rows] = np.where(filled, PipeRegime.PARTLY_PRESSURISED, PipeRegime.FREE_FALL)
        t.cause[rows] = np.where(filled, FullCause.OWN_CAPACITY, FullCause.NONE)
    t.need[:] = t.level + t.loss * _velocity_head(t.speed)


def _climb(t: _Pipes, rows: Index, pipes: PipeHydraulics, *, start: Array, run: Array, steps: int) -> tuple[Array, Array, Flags]:
    """Level and velocity at the upstream end of flat or adverse pipes, whose depth rises
    upstream from ``start`` toward the crown; where it gets there the rest runs full."""
    depth, left = direct_step(
        pipes.sections, pipes.friction, t.pipe[rows], flow=t.flow[rows], slope=t.slope[rows], start=start,
        stop=t.height[rows], run=run, steps=steps, tables=t.tables,
    )  # fmt: skip
    filled = left > 0
    crown_up = t.up_invert[rows] + t.height[rows]
    level = np.where(filled, crown_up + (t.full_slope[rows] - t.slope[rows]) * left, t.up_invert[rows] + depth)
    up_depth = np.where(filled, t.height[rows], depth)
    return level, _speed_at(t.tables, t.pipe[rows], t.flow[rows], up_depth, t.height[rows], t.full_area[rows]), filled


def _speed_at(tables: SectionTables, pipe: Index, flow: Array, depth: Array, height: Array, full_area: Array) -> Array:
    """Mean velocity [m/s] at ``depth`` [m] (full bore where the depth reaches the height)."""
    area = tables.area(depth / height, pipe)
    area = np.where(depth >= height, full_area, area)
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(area > 0, flow / area, 0.0)


def _held_up(
    values: Array, group: NDArray[np.int8], pipe: Index, level_below: Array, tables: SectionTables, pipes: PipeHydraulics,
    settings: GradeLineSettings,
) -> tuple[Array, Array, NDArray[np.int8], NDArray[np.int8], Flags]:  # fmt: skip
    """Pipes whose downstream depth passes their threshold (``values``: their ``_PACKED``
    quantities, one row each): the level at their upstream end, the level each needs in its
    upstream node, the regime, why it runs full and whether the supercritical flow is drowned
    (a jump)."""
    up_invert, down_invert, height, length, slope, flow, _, _, _, full_slope, full_area, free_level, free_need, loss = values
    dry, own = group == _DRY, group == _OWN
    depth = level_below - down_invert
    full = ~dry & (own | (depth >= height))
    with np.errstate(divide="ignore", invalid="ignore"):
        fall = np.where(~own & (slope > full_slope), (depth - height) / (slope - full_slope), np.inf)
    whole = full & (fall >= length)
    level = np.where(dry, np.maximum(level_below, up_invert), level_below + full_slope * length)
    speed = np.where(dry, 0.0, flow / full_area)
    regime = np.where(dry, PipeRegime.DRY, PipeRegime.PRESSURISED).astype(np.int8)
    part = np.flatnonzero(~dry & ~whole)
    if part.size:
        level[part], speed[part], regime[part] = _free_surface(
            values[:, part], group[part], pipe[part], tables, pipes, settings.profile_steps, depth=depth[part], full=full[part], fall=fall[part]
        )
    level = np.maximum(level, free_level)  # profiles do not cross: none lies below the free one (but for rounding)
    running_full = (regime == PipeRegime.PRESSURISED) | (regime == PipeRegime.PARTLY_PRESSURISED)
    cause = np.where(own, FullCause.OWN_CAPACITY, np.where(running_full, FullCause.BACKWATER, FullCause.NONE)).astype(np.int8)
    need = np.maximum(level + loss * _velocity_head(speed), free_need)
    return level, need, regime, cause, (group == _STEEP) & ~whole


def _free_surface(
    values: Array, group: NDArray[np.int8], pipe: Index, tables: SectionTables, pipes: PipeHydraulics, steps: int, *, depth: Array,
    full: Flags, fall: Array,
) -> tuple[Array, Array, NDArray[np.int8]]:  # fmt: skip
    """Level, velocity and regime at the upstream end of pipes with a free-surface profile from
    their outlet (``depth``) or from where a pressurised outlet stretch falls back (``fall``).

    A steep pipe here is drowned: its S1 profile is stepped up toward the sequent depth, where
    the jump stands; if it gets there within the pipe the upstream end stays at normal depth.
    """
    up_invert, _, height, length, slope, flow, normal, sequent, normal_speed, full_slope, full_area, _, _, _ = values
    flat, steep = group == _FLAT, group == _STEEP
    start = np.where(full, height, depth)
    run = np.where(full, length - fall, length)
    stop = np.where(flat, height, np.where(steep, np.minimum(sequent, start), normal))
    found, left = direct_step(
        pipes.sections, pipes.friction, pipe, flow=flow, slope=slope, start=start, stop=stop, run=run, steps=steps, tables=tables
    )
    reached = (left > 0) | (stop == start)
    filled, jump_inside = flat & reached, steep & reached
    up_depth = np.where(jump_inside, normal, np.where(filled, height, found))
    level = np.where(filled, up_invert + height + (full_slope - slope) * left, up_invert + up_depth)
    speed = np.where(jump_inside, normal_speed, _speed_at(tables, pipe, flow, up_depth, height, full_area))
    regime = np.where(full | filled, PipeRegime.PARTLY_PRESSURISED, np.where(jump_inside, PipeRegime.SUPERCRITICAL, PipeRegime.SUBCRITICAL))
    return level, speed, regime.astype(np.int8)


def _sweep(t: _Pipes, order: SweepOrder, pipes: PipeHydraulics, settings: GradeLineSettings, *, floor: Array, rim: Array) -> tuple[Array, Array, _Found]:
    """Levels level by level from the terminal nodes up: the level each node needs (from its
    outgoing pipes) and the level carried from it (capped at the rim), in node sweep order."""
    need = np.full(order.nodes.size, -np.inf)
    carried = np.full(order.nodes.size, -np.inf)
    found = _Found.empty(t.pipe.size)
    values, group = t.values, t.group
    node_bounds, pipe_bounds = order.node_bounds, order.pipe_bounds
    for level in range(order.levels):  # one turn per level of the network
        first, last = node_bounds[level], node_bounds[level + 1]
        carried[first:last] = np.fmin(np.maximum(need[first:last], floor[first:last]), rim[first:last])
        start, stop = pipe_bounds[level], pipe_bounds[level + 1]
        below = carried[t.down[start:stop]]
        passed = below - t.down_invert[start:stop] > t.threshold[start:stop]
        wanted = t.need[start:stop]
        if passed.any():
            rows = start + np.flatnonzero(passed)
            upstream_level, held_need, regime, cause, jump = _held_up(
                values[:, rows], group[rows], t.pipe[rows], below[passed], t.tables, pipes, settings
            )
            found.record(rows, upstream_level, regime, cause, jump)
            wanted = np.where(passed, 0.0, wanted)
            wanted[passed] = held_need
        with np.errstate(invalid="ignore"):  # a need that is not a number stays so at its node (not evaluated)
            np.maximum.at(need, t.up[start:stop], wanted)
    return need, carried, found


def grade_line(
    pipes: PipeHydraulics,
    *,
    flow: Array,
    upstream: Index,
    downstream: Index,
    node_count: int,
    up_invert: Array,
    down_invert: Array,
    node_rim: Array,
    boundary: NDArray[np.int8],
    boundary_level: Array,
    evaluate: Flags,
    settings: GradeLineSettings,
    uniform: FlowState | None = None,
    turns: Turns | None = None,
) -> GradeLine:
    """The hydraulic grade line through the network at the design flows, and flood screening.

    Parameters
    ----------
    pipes : sections, bed slope [m/m], friction, length [m] and water temperature of every pipe
    flow : design flow per pipe [m^3/s]; NaN or <= 0: no flow
    upstream, downstream : node index per pipe in flow direction, -1 = not placed
    node_count : how many nodes the indices refer to
    up_invert, down_invert : invert level at each end, in flow direction [m]; NaN unknown
    node_rim : cover (rim) level per node [m]; NaN unknown
    boundary : int8 :class:`~audit.grade_line.settings.BoundaryKind` code per node where it is a
        boundary, -1 elsewhere
    boundary_level : fixed water level per node [m] for ``FIXED``, NaN otherwise
    evaluate : pipes that take part; False: left out (NaN, ``not_evaluated``)
    settings : ``[grade_line]``
    uniform : the uniform-flow state of these pipes at these flows (``normal_depth``), when the
        caller has it already; computed here otherwise
    turns : per pipe, the turn the flow makes into it at its upstream node and whether it starts
        from rest there (:func:`~audit.grade_line.losses.manhole_turns`), which set k of its
        manhole loss between ``manhole_loss`` and ``bend_loss``; None: ``manhole_loss`` at every
        node

    Returns
    -------
    the :class:`GradeLine`; see the module docstring for the method
    """
    count = len(pipes.sections)
    q = np.where(np.isfinite(flow) & (flow > 0), flow, 0.0)
    state = uniform if uniform is not None else normal_depth(q, pipes.sections, pipes.slope, pipes.friction, temperature_c=pipes.temperature_c)
    take = np.asarray(evaluate, dtype=bool) & _usable(pipes, state, up_invert, down_invert)
    order = sweep_order(upstream, downstream, node_count, take)
    rank = np.full(node_count, -1, dtype=np.intp)
    rank[order.nodes] = np.arange(order.nodes.size)
    terminal = np.zeros(order.nodes.size, dtype=bool)
    terminal[: order.node_bounds[1] if order.levels else 0] = True
    code = boundary[order.nodes]
    fixed = np.where((code == BoundaryKind.FIXED) & np.isfinite(boundary_level[order.nodes]), boundary_level[order.nodes], -np.inf)
    normal_out = (terminal & (code == BoundaryKind.NORMAL))[rank[downstream[order.pipes]]]
    t = _prepare(pipes, state, order, flow=q, rank=rank, upstream=upstream, downstream=downstream, up_invert=up_invert,
                 down_invert=down_invert, normal_out=normal_out, settings=settings,
                 loss=np.full(count, settings.manhole_loss) if turns is None else
                 loss_coefficients(turns, straight=settings.manhole_loss, right_angle=settings.bend_loss))  # fmt: skip
    need, carried, found = _sweep(t, order, pipes, settings, floor=fixed, rim=node_rim[order.nodes])
    return _assemble(t, order, pipes, found, count=count, node_count=node_count, need=need, carried=carried, fixed=fixed,
                     terminal=terminal, code=code, rim=node_rim, settings=settings)  # fmt: skip


def _outlet_levels(t: _Pipes, found: _Found, below: Array) -> Array:
    """Water level at each swept pipe's downstream end, given the level carried in its
    downstream node (``below``): the node's level unless the pipe falls freely into it, runs
    supercritical out of it, or is full at its outlet above that level."""
    depth = below - t.down_invert
    wet = ~t.dry
    free = wet & ~t.own & ~found.held & (t.steep | (depth < t.critical))
    level = np.where(free, t.down_invert + t.outlet, below)
    level = np.where(t.own, np.maximum(below, t.down_invert + t.height), level)
    return np.where(t.dry, np.maximum(below, t.down_invert), level)


def _assemble(
    t: _Pipes, order: SweepOrder, pipes: PipeHydraulics, found: _Found, *, count: int, node_count: int, need: Array, carried: Array,
    fixed: Array, terminal: Flags, code: NDArray[np.int8], rim: Array, settings: GradeLineSettings,
) -> GradeLine:  # fmt: skip
    """Per-pipe and per-node results in input order."""
    below = carried[t.down]
    level_down = _outlet_levels(t, found, below)
    level_up = np.where(found.held, found.level, t.level)
    mild_fall = ~found.held & (t.regime == PipeRegime.SUBCRITICAL) & ~t.steep & (below - t.down_invert < t.critical) & (t.outlet == t.critical)
    regime = np.where(found.held, found.regime, np.where(mild_fall, PipeRegime.FREE_FALL, t.regime)).astype(np.int8)
    cause = np.where(found.held, found.cause, t.cause).astype(np.int8)
    full = np.isin(regime, [PipeRegime.PRESSURISED, PipeRegime.PARTLY_PRESSURISED])
    regime = np.where(full & pipes.sections.is_open[t.pipe], PipeRegime.ABOVE_BANK_FULL, regime).astype(np.int8)
    p = order.pipes

    def per_pipe(values: NDArray[Any], fill: float = np.nan) -> NDArray[Any]:
        out = np.full(count, fill, dtype=values.dtype)
        out[p] = values
        return out

    arrival = np.full(order.nodes.size, -np.inf)
    np.maximum.at(arrival, t.down, level_down)
    node_sorted = np.where(terminal & ~np.isfinite(fixed), arrival, np.maximum(need, fixed))
    node_level = np.full(node_count, np.nan)
    node_level[order.nodes] = node_sorted
    soffit = node_soffits(node_count, up_node=order.nodes[t.up], down_node=order.nodes[t.down], up_crown=t.up_invert + t.height, down_crown=t.down_invert + t.height)
    freeboard, flood_depth, state = flood_screen(node_level, rim, soffit, freeboard_m=settings.freeboard_m)
    known = np.isin(code, [BoundaryKind.FREE, BoundaryKind.NORMAL]) | np.isfinite(fixed)
    assumed = np.zeros(node_count, dtype=bool)
    assumed[order.nodes] = terminal & ~known
    return GradeLine(
        level_up=per_pipe(level_up), level_down=per_pipe(level_down), depth_up=per_pipe(level_up - t.up_invert),
        depth_down=per_pipe(level_down - t.down_invert), critical_depth=per_pipe(t.critical), froude=per_pipe(t.froude),
        regime=per_pipe(regime, PipeRegime.NOT_EVALUATED), full_cause=per_pipe(np.where(full, cause, FullCause.NONE).astype(np.int8), FullCause.NONE),
        jump=per_pipe(found.jump, False), free_outlet=per_pipe(level_down != below, False), full_friction_slope=per_pipe(np.where(full, t.full_slope, np.nan)),
        loss_k=per_pipe(t.loss), on_cycle=order.on_cycle,
        node_level=node_level, freeboard=freeboard, flood_depth=flood_depth, flood_state=state, boundary_assumed=assumed,
    )  # fmt: skip
