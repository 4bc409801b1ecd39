r"""Sanitary design flows: population, per-capita flow, peaking, infiltration and point loads.

Each pipe carries the population of every manhole and catchment upstream of it, :math:`P`.
Its sanitary design flow is

.. math:: Q_s = PF(P)\, \frac{P\, q_{pc}}{86\,400} + \sum Q_{point} + \sum Q_{inflow}

with :math:`q_{pc}` the per-capita flow [l/person/day] (converted to m^3/s), :math:`PF` the
peaking factor of the *accumulated* population (the peak of the sum, not the sum of peaks: a
large catchment peaks less than its parts), and the point loads and manhole inflows added at
their design value, never peaked. Infiltration is a rate per km of sewer, summed over this pipe
and every pipe upstream, plus a rate per hectare of catchment served:

.. math:: Q_i = r_{km} \frac{L_{up}}{1000} + r_{ha} A_{up}

Catchments drain to the manhole their ``drains_to`` field names, else to the node nearest the
polygon's centroid (one nearest-neighbour query for all catchments).

Finding codes emitted (layer ``catchments``): ``unknown_outlet`` (drains_to names no manhole;
the nearest node is used), ``catchment_unplaced`` (no geometry and no known outlet: ignored).

References
----------
.. [1] Metcalf & Eddy (2014). Wastewater Engineering: Treatment and Resource Recovery, 5th ed.
   McGraw-Hill, ch. 3 (peaking factors of Harmon and Babbitt; from memory).
.. [2] Great Lakes - Upper Mississippi River Board (2014). Recommended Standards for Wastewater
   Facilities, sec. 11.243 (design peak flow, Harmon's ratio; from memory).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd
import shapely
from numpy.typing import ArrayLike, NDArray

from audit.findings import FindingLog
from audit.flows.carrier import Carrier
from audit.flows.settings import FlowOptions

Array = NDArray[np.float64]
Index = NDArray[np.int64]
SECONDS_PER_DAY = 86_400.0
LITRE = 1e-3  # [m^3]
SQUARE_METRES_PER_HA = 10_000.0


def harmon_peaking(population: ArrayLike) -> Array:
    r"""Harmon's peaking factor, peak over average dry-weather flow [-].

    .. math:: PF = 1 + \frac{14}{4 + \sqrt{P / 1000}}

    Parameters
    ----------
    population : persons served [-]

    References
    ----------
    Metcalf & Eddy (2014); Recommended Standards for Wastewater Facilities (2014) (from memory).

    >>> round(float(harmon_peaking(1000)), 6)
    3.8
    """
    thousands = np.asarray(population, dtype=float) / 1000.0
    return 1.0 + 14.0 / (4.0 + np.sqrt(thousands))


def babbitt_peaking(population: ArrayLike) -> Array:
    r"""Babbitt's peaking factor [-].

    .. math:: PF = \frac{5}{(P / 1000)^{0.2}}

    Parameters
    ----------
    population : persons served [-]; infinite at zero persons, so callers bound P from below

    References
    ----------
    Metcalf & Eddy (2014) (from memory).

    >>> round(float(babbitt_peaking(1000)), 6)
    5.0
    """
    thousands = np.asarray(population, dtype=float) / 1000.0
    with np.errstate(divide="ignore"):
        return 5.0 / thousands**0.2


def peaking_factor(population: ArrayLike, *, options: FlowOptions) -> Array:
    """The configured peaking factor at each accumulated population [-].

    Harmon and Babbitt are evaluated at no fewer than ``options.min_peaking_population`` persons
    (1000 by default, which caps them at 3.8 and 5.0: the formulas are stated for towns, and
    tend to 4.5 and to infinity for a single house). A table is interpolated linearly in
    population and held at its end values.
    """
    persons = np.asarray(population, dtype=float)
    floor = np.maximum(persons, options.min_peaking_population)
    if options.peaking == "harmon":
        return harmon_peaking(floor)
    if options.peaking == "babbitt":
        return babbitt_peaking(floor)
    if options.peaking == "table":
        rows = np.asarray(options.peaking_table, dtype=float)
        return np.interp(persons, rows[:, 0], rows[:, 1])
    return np.full(persons.shape, options.peaking_factor)


@dataclass(frozen=True)
class NodeLoads:
    """Loads per node of the network, from the manholes and the catchments draining to them."""

    population: Array  # persons [-]
    point_load: Array  # point loads and manhole inflows at their design value [m^3/s]
    area_ha: Array  # catchment area [ha]
    catchment_node: NDArray[np.int64]  # per catchment, the node it drains to (-1: none)


def catchment_outlets(catchments: pd.DataFrame, nodes: pd.DataFrame, *, findings: FindingLog) -> NDArray[np.int64]:
    """The node each catchment drains to: its ``drains_to`` manhole, else the nearest node.

    Parameters
    ----------
    catchments : canonical catchments (``catchment_id``, ``drains_to``, polygon ``geometry``)
    nodes : the network's nodes (``node_id``, ``x``, ``y`` [m])
    findings : receives ``unknown_outlet`` and ``catchment_unplaced``

    Returns
    -------
    node index per catchment, -1 where it can be placed nowhere
    """
    named = catchments["drains_to"].to_numpy(dtype=object)
    outlet = pd.Index(nodes["node_id"].astype(str)).get_indexer(pd.Series(named).astype(str)).astype(np.int64)
    outlet[pd.isna(named)] = -1
    ids = catchments["catchment_id"].to_numpy(dtype=object)
    centre = shapely.centroid(catchments.geometry.to_numpy())
    x, y = shapely.get_x(centre), shapely.get_y(centre)
    unknown = ~pd.isna(named) & (outlet < 0)
    if unknown.any():
        messages = "drains_to = '" + pd.Series(named[unknown]).astype(str) + "' names no manhole; the nearest node is used"
        findings.add_many("catchments", ids[unknown], "unknown_outlet", messages.to_numpy(), x=x[unknown], y=y[unknown])
    located = np.isfinite(nodes["x"].to_numpy(dtype=float)) & np.isfinite(nodes["y"].to_numpy(dtype=float))
    search = np.flatnonzero((outlet < 0) & ~shapely.is_missing(centre))
    if search.size and located.any():
        candidates = np.flatnonzero(located)
        tree = shapely.STRtree(shapely.points(nodes["x"].to_numpy(dtype=float)[candidates], nodes["y"].to_numpy(dtype=float)[candidates]))
        found = tree.query_nearest(centre[search], return_distance=False, all_matches=False)
        outlet[search[found[0]]] = candidates[found[1]]
    lost = outlet < 0
    if lost.any():
        findings.add_many("catchments", ids[lost], "catchment_unplaced", "the catchment has no geometry and no known outlet; its loads are left out")
    return outlet


def catchment_population(catchments: pd.DataFrame, *, occupancy: float) -> Array:
    """Persons per catchment: the population field, else dwellings x occupancy [-]; 0 if neither."""
    dwellers = catchments["dwellings"].to_numpy(dtype=float) * np.where(
        np.isfinite(catchments["occupancy"].to_numpy(dtype=float)), catchments["occupancy"].to_numpy(dtype=float), occupancy
    )
    population = catchments["population"].to_numpy(dtype=float)
    return np.nan_to_num(np.where(np.isfinite(population), population, dwellers))


def catchment_area_ha(catchments: pd.DataFrame) -> Array:
    """Area per catchment [ha]: the area field, else the polygon's area in the working CRS."""
    given = catchments["area_ha"].to_numpy(dtype=float)
    drawn = shapely.area(catchments.geometry.to_numpy()) / SQUARE_METRES_PER_HA
    return np.nan_to_num(np.where(np.isfinite(given), given, drawn))


def node_loads(nodes: pd.DataFrame, manholes: pd.DataFrame | None, catchments: pd.DataFrame | None, *,
               options: FlowOptions, findings: FindingLog, pipe_upstream: Index | None = None,
               pipe_length: Array | None = None) -> NodeLoads:  # fmt: skip
    """Population, point loads [m^3/s] and catchment area [ha] gathered at each node.

    Beside the mapped fields, the assumed loads of a rough screen are added where ``[flows]``
    sets them: ``persons_per_manhole`` and ``load_per_manhole_l_s`` at every manhole and
    chamber, and ``persons_per_km`` times the length of each pipe (``pipe_length`` [m]) at its
    upstream node (``pipe_upstream``, -1 where the pipe carries nothing).
    """
    count = len(nodes)
    population, point, area = np.zeros(count), np.nan_to_num(nodes["inflow"].to_numpy(dtype=float)), np.zeros(count)
    row = nodes["manhole_row"].to_numpy(dtype=np.int64)
    if manholes is not None:
        is_manhole = row >= 0
        population[is_manhole] += np.nan_to_num(manholes["population"].to_numpy(dtype=float)[row[is_manhole]])
        point[is_manhole] += np.nan_to_num(manholes["point_load"].to_numpy(dtype=float)[row[is_manhole]])
    served = np.isin(nodes["role"].to_numpy(dtype=object), ("manhole", "chamber")) if "role" in nodes else row >= 0
    population[served] += options.persons_per_manhole
    point[served] += options.load_per_manhole_l_s * LITRE
    if options.persons_per_km and pipe_upstream is not None and pipe_length is not None:
        carrying = pipe_upstream >= 0
        np.add.at(population, pipe_upstream[carrying], options.persons_per_km * np.nan_to_num(pipe_length[carrying]) / 1000.0)
    outlet = np.zeros(0, dtype=np.int64)
    if catchments is not None:
        outlet = catchment_outlets(catchments, nodes, findings=findings)
        placed = outlet >= 0
        np.add.at(population, outlet[placed], catchment_population(catchments, occupancy=options.occupancy)[placed])
        np.add.at(area, outlet[placed], catchment_area_ha(catchments)[placed])
    return NodeLoads(population, point, area, outlet)


@dataclass(frozen=True)
class SanitaryFlows:
    """Per pipe: peaked sanitary flow with point loads, infiltration [m^3/s], persons and area served."""

    q_sanitary: Array
    q_infiltration: Array
    q_sanitary_average: Array  # the same flow unpeaked: average domestic flow plus point loads [m^3/s]
    population_served: Array
    area_served_ha: Array
    q_sanitary_own: Array  # from each node's own loads alone [m^3/s] (what drains straight to it)
    q_infiltration_own: Array


def sanitary_flows(carrier: Carrier, loads: NodeLoads, *, length: Array, options: FlowOptions) -> SanitaryFlows:
    """Sanitary flow and infiltration per pipe from the node loads.

    Parameters
    ----------
    carrier : the network's accumulator (:class:`audit.flows.Carrier`)
    loads : the loads per node
    length : pipe lengths [m]; NaN counts as zero
    options : ``[flows]``; a storm sewer keeps only the point loads, with no infiltration

    Returns
    -------
    :class:`SanitaryFlows`, per pipe (NaN in pipes that carry nothing) and per node
    """
    population = carrier.carry(loads.population)
    area = carrier.carry(loads.area_ha)
    point = carrier.carry(loads.point_load)
    upstream_km = carrier.carry(np.zeros(loads.population.size), length) / 1000.0
    q_sanitary, q_average, q_infiltration = _sanitary_parts(population, point, upstream_km, area, options=options)
    own_sanitary, _, own_infiltration = _sanitary_parts(loads.population, loads.point_load, np.zeros(loads.population.size), loads.area_ha, options=options)
    return SanitaryFlows(q_sanitary, q_infiltration, q_average, population, area, own_sanitary, own_infiltration)


def _sanitary_parts(population: Array, point: Array, upstream_km: Array, area_ha: Array, *, options: FlowOptions) -> tuple[Array, Array, Array]:
    r"""Peaked and average domestic flow plus point loads, and infiltration [m^3/s], from the totals carried to a place.

    .. math:: Q_s = PF(P)\, \frac{P\, q_{pc}}{86\,400} + Q_{point}, \qquad Q_i = r_{km} L_{km} + r_{ha} A

    A storm sewer keeps only the point loads, with no infiltration.
    """
    if not options.builds_sanitary:
        return point, point, np.where(np.isnan(point), np.nan, 0.0)
    average = population * options.per_capita_l_day * LITRE / SECONDS_PER_DAY
    domestic = peaking_factor(population, options=options) * average
    infiltration = (options.infiltration_l_s_km * upstream_km + options.infiltration_l_s_ha * area_ha) * LITRE
    return domestic + point, average + point, infiltration
