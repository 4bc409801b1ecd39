r"""Storm runoff by the rational method, with the time of concentration iterated to settle.

Each pipe carries the runoff of every catchment upstream of it:

.. math:: Q = \frac{i(t_c) \sum C A}{360}

with Q [m^3/s], the rainfall intensity i [mm/h] from the intensity-duration curve at the pipe's
time of concentration :math:`t_c` [min], and :math:`\sum C A` [ha] the runoff coefficient times
area summed over the catchments upstream (one accumulation). The time of concentration at a
pipe is the time at its upstream node: the inlet time, or the longest arrival along any path
from upstream, whichever is larger,

.. math:: t_n = \max\left(t_{inlet},\ \max_{p \to n} \left(t_{u(p)} + \frac{L_p}{60\, V_p}\right)\right)

Pipe velocities depend on the flows and the flows on :math:`t_c`, so the two are iterated:
travel times start from the full-bore velocities; each pass takes one max-plus sweep over the
network level by level (a few hundred levels, not one step per pipe), one intensity per pipe
and one normal-depth solve for all pipes (``audit.hydraulics.normal_depth``), until no pipe's
:math:`t_c` moves by more than ``[flows] tc_tolerance_min``. A pipe whose velocity cannot be
computed (no size, no slope, no flow) uses its full-bore velocity, else
``[flows] fallback_velocity_m_s``. The whole area upstream is taken to contribute at the
longest time (no partial-area check).

The runoff coefficient of a catchment is its ``runoff_coefficient`` field, else the area-weighted
composite of its impervious fraction I: :math:`C = I\, C_{imp} + (1 - I)\, C_{perv}` (HEC-22,
composite C, from memory; the two coefficients are common practice, see docs/config.md).

Finding codes emitted: ``no_runoff_coefficient`` and ``runoff_out_of_range`` (layer
``catchments``; such a catchment adds no runoff), ``tc_not_settled`` (layer ``network``).

References
----------
.. [1] Brown, S. A., Schall, J. D., Morris, J. L., Doherty, C. L., Stein, S. M. and Warner, J. C.
   (2009, rev. 2013). Urban Drainage Design Manual, HEC-22, 3rd ed. FHWA-NHI-10-009, ch. 3
   (rational method) and ch. 7 (storm drain design: inlet time plus travel time).
.. [2] ASCE and WEF (1992). Design and Construction of Urban Stormwater Management Systems,
   MOP 77, ch. 5 (rational method; from memory).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd
from numpy.typing import ArrayLike, NDArray

from audit.findings import FindingLog
from audit.flows.carrier import Carrier
from audit.flows.settings import FlowOptions, Rainfall
from audit.hydraulics import PipeHydraulics, normal_depth

Array = NDArray[np.float64]
Index = NDArray[np.int64]
RATIONAL_DIVISOR = 360.0  # Q [m^3/s] = C i [mm/h] A [ha] / 360: 1e4 m^2 x 1e-3 m / 3600 s


def rainfall_intensity(duration_min: ArrayLike, rainfall: Rainfall) -> Array:
    r"""Rainfall intensity [mm/h] for storms of ``duration_min`` [min].

    .. math:: i = \frac{a}{(t + b)^c}

    or, for a table, linear interpolation of log(i) on log(t), held at the end values.

    >>> rainfall_intensity([5.0, 20.0], Rainfall(a=1000.0, b=5.0, c=1.0)).tolist()
    [100.0, 40.0]
    """
    t = np.asarray(duration_min, dtype=float)
    if rainfall.a is not None:
        return rainfall.a / (t + rainfall.b) ** rainfall.c
    rows = np.log(np.asarray(rainfall.table, dtype=float))
    return np.exp(np.interp(np.log(np.maximum(t, 1e-9)), rows[:, 0], rows[:, 1]))


def rational_discharge(runoff_area_ha: ArrayLike, intensity_mm_h: ArrayLike) -> Array:
    r"""Peak runoff [m^3/s] of the rational method, :math:`Q = C i A / 360`.

    Parameters
    ----------
    runoff_area_ha : :math:`\sum C A`, runoff coefficient times area [ha]
    intensity_mm_h : rainfall intensity [mm/h]
    """
    with np.errstate(over="ignore", invalid="ignore"):  # an area or intensity at the edge of floating point gives inf, judged later
        return np.asarray(runoff_area_ha, dtype=float) * np.asarray(intensity_mm_h, dtype=float) / RATIONAL_DIVISOR


def runoff_coefficients(catchments: pd.DataFrame, *, options: FlowOptions, findings: FindingLog) -> Array:
    r"""Runoff coefficient C [-] per catchment; 0 with a finding where it is unknown or not in [0, 1].

    Urban creep (``[flows] urban_creep`` = u, the added share of impervious area) raises the
    impervious fraction to :math:`I' = \min(1, I (1 + u))` and C with it; where only C is given,
    its impervious fraction is read back from the composite,
    :math:`I = (C - C_{perv}) / (C_{imp} - C_{perv})` clipped to [0, 1], and C rises by the same
    :math:`(I' - I)(C_{imp} - C_{perv})`.

    >>> frame = pd.DataFrame({"catchment_id": ["a", "b"], "runoff_coefficient": [np.nan, 0.55], "impervious_fraction": [0.5, np.nan]})
    >>> runoff_coefficients(frame, options=FlowOptions(urban_creep=0.1), findings=FindingLog()).round(4).tolist()
    [0.585, 0.585]
    """
    given = catchments["runoff_coefficient"].to_numpy(dtype=float)
    impervious = catchments["impervious_fraction"].to_numpy(dtype=float)
    spread = options.c_impervious - options.c_pervious
    with np.errstate(invalid="ignore", divide="ignore"):
        implied = np.clip((given - options.c_pervious) / spread, 0.0, 1.0) if spread > 0 else np.zeros(given.size)
    share = np.where(np.isfinite(given), implied, impervious)
    crept = np.minimum(share * (1.0 + options.urban_creep), 1.0)
    added = np.where(np.isfinite(share), (crept - share) * spread, 0.0)
    composite = impervious * options.c_impervious + (1.0 - impervious) * options.c_pervious
    coefficient = np.where(np.isfinite(given), given, composite)
    ids = catchments["catchment_id"].to_numpy(dtype=object)
    wrong = (given < 0) | (given > 1) | (~np.isfinite(given) & ((impervious < 0) | (impervious > 1)))
    unknown = ~np.isfinite(coefficient)
    findings.add_many("catchments", ids[wrong], "runoff_out_of_range", "the runoff coefficient or impervious fraction is not from 0 to 1; no runoff is taken")
    findings.add_many("catchments", ids[unknown], "no_runoff_coefficient", "neither a runoff coefficient nor an impervious fraction; no runoff is taken")
    return np.where(wrong | unknown, 0.0, np.minimum(coefficient + added, 1.0))


def pipe_levels(carrier: Carrier, *, node_count: int) -> list[Index]:
    """The pipes between loop groups in waves: every pipe after all pipes into its upstream group.

    One round per wave (the longest path, in pipes), each touching only that wave's pipes.
    """
    pipes = np.flatnonzero(carrier.between)
    up, down = carrier.group_up[pipes], carrier.group_down[pipes]
    waiting = np.bincount(down, minlength=node_count)
    by_node = np.argsort(up, kind="stable")
    starts = np.searchsorted(up[by_node], np.arange(node_count + 1))
    ready = np.flatnonzero((waiting == 0) & (starts[1:] > starts[:-1]))
    levels: list[Index] = []
    while ready.size:
        counts = starts[ready + 1] - starts[ready]
        first = np.repeat(starts[ready], counts)
        offset = np.arange(counts.sum()) - np.repeat(np.cumsum(counts) - counts, counts)
        wave = by_node[first + offset]
        levels.append(pipes[wave])
        np.subtract.at(waiting, down[wave], 1)
        reached = np.unique(down[wave])
        ready = reached[(waiting[reached] == 0) & (starts[reached + 1] > starts[reached])]
    return levels


def node_times(carrier: Carrier, levels: list[Index], *, travel_min: Array, inlet_min: float, node_count: int) -> Array:
    """Time of concentration [min] at every node, by a max-plus sweep over the waves of pipes.

    A loop is one node: its nodes share one time, and the travel time around it is not counted.
    """
    at_group = np.full(node_count, inlet_min)
    for wave in levels:  # one step per level of the network, not per pipe
        np.maximum.at(at_group, carrier.group_down[wave], at_group[carrier.group_up[wave]] + travel_min[wave])
    return at_group[carrier.node_group]


def times_of_concentration(carrier: Carrier, levels: list[Index], *, travel_min: Array, inlet_min: float, node_count: int) -> Array:
    """Time of concentration [min] at each pipe's upstream node (:func:`node_times`); NaN where not usable."""
    at_node = node_times(carrier, levels, travel_min=travel_min, inlet_min=inlet_min, node_count=node_count)
    return np.where(carrier.usable, at_node[np.maximum(carrier.upstream, 0)], np.nan)


@dataclass(frozen=True)
class StormFlows:
    """Per pipe: storm runoff [m^3/s] and time of concentration [min]; passes taken to settle."""

    q_storm: Array
    tc_min: Array
    runoff_area_ha: Array  # sum of C x A upstream [ha]
    iterations: int
    settled: bool
    q_storm_own: Array  # runoff of the catchments draining straight to each node, at the inlet time [m^3/s]


def _travel_min(pipes: PipeHydraulics, flow: Array | None, *, fallback: float) -> Array:
    """Travel time [min] through each pipe at ``flow`` (None: at full bore)."""
    state = normal_depth(np.zeros(pipes.length.size) if flow is None else flow, pipes.sections, pipes.slope, pipes.friction,
                         temperature_c=pipes.temperature_c)  # fmt: skip
    velocity = np.where(np.isfinite(state.velocity) & (state.velocity > 0), state.velocity, state.v_full)
    velocity = np.where(np.isfinite(velocity) & (velocity > 0), velocity, fallback)
    return np.nan_to_num(pipes.length) / velocity / 60.0


def storm_flows(carrier: Carrier, runoff_area_node: Array, pipes: PipeHydraulics, *, base_flow: Array, given_flow: Array,
                options: FlowOptions, findings: FindingLog) -> StormFlows:  # fmt: skip
    """Rational-method runoff per pipe with the time of concentration iterated to settle.

    Parameters
    ----------
    carrier : the network's accumulator (:class:`audit.flows.Carrier`)
    runoff_area_node : C x A [ha] of the catchments draining to each node
    pipes : sections, slopes, friction and lengths of every pipe
    base_flow : the other computed flow in each pipe (sanitary, infiltration) [m^3/s]
    given_flow : a given design flow per pipe [m^3/s], NaN where none; it sets that pipe's velocity
    options : ``[flows]``, with its rainfall
    findings : receives ``tc_not_settled`` when ``tc_max_iterations`` is reached

    Returns
    -------
    :class:`StormFlows`; every intensity is raised by ``[flows] rainfall_uplift``
    """
    assert options.rainfall is not None
    rainfall, node_count = options.rainfall, runoff_area_node.size
    runoff_area = carrier.carry(runoff_area_node)
    levels = pipe_levels(carrier, node_count=node_count)
    travel = _travel_min(pipes, None, fallback=options.fallback_velocity_m_s)
    tc = times_of_concentration(carrier, levels, travel_min=travel, inlet_min=rainfall.inlet_time_min, node_count=node_count)
    settled, iterations = False, 0
    while not settled and iterations < options.tc_max_iterations:
        iterations += 1
        q_storm = rational_discharge(runoff_area, options.rainfall_uplift * rainfall_intensity(tc, rainfall))
        flow = np.where(np.isfinite(given_flow), given_flow, np.nan_to_num(base_flow) + q_storm)
        travel = _travel_min(pipes, np.nan_to_num(flow), fallback=options.fallback_velocity_m_s)
        updated = times_of_concentration(carrier, levels, travel_min=travel, inlet_min=rainfall.inlet_time_min, node_count=node_count)
        settled = bool(np.all(np.abs(updated - tc)[carrier.usable] <= options.tc_tolerance_min))
        tc = updated
    if not settled:
        findings.add("network", "*", "tc_not_settled", f"the times of concentration still moved by more than {options.tc_tolerance_min:g} min after {iterations} passes")
    uplift = options.rainfall_uplift
    q_storm = rational_discharge(runoff_area, uplift * rainfall_intensity(tc, rainfall))
    q_own = rational_discharge(runoff_area_node, uplift * rainfall_intensity(np.full(node_count, rainfall.inlet_time_min), rainfall))
    return StormFlows(q_storm, tc, runoff_area, iterations, settled, q_own)
