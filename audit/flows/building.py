"""Design flows built from the catchment: sanitary, infiltration and storm parts, then given flows.

``[flows] kind = "given"`` keeps ``audit.flows.design_flows`` as it was. Any other kind builds
every pipe's flow from its parts (audit.flows.sanitary, audit.flows.storm) for the design horizon
(the population grown by ``population_growth`` before peaking, every rainfall intensity raised by
``rainfall_uplift``, the impervious area by ``urban_creep``), and lets a given pipe flow replace
the built one in that pipe only: a given total cannot be split into the parts that the peaking
and the time of concentration need, so the pipes below keep their built flows.
"""

from __future__ import annotations

from dataclasses import asdict, replace

import numpy as np
import pandas as pd
from numpy.typing import NDArray

from audit.findings import FindingLog
from audit.flows.carrier import Carrier, DesignFlows, FlowParts, design_flows
from audit.flows.sanitary import catchment_area_ha, node_loads, sanitary_flows
from audit.flows.settings import FlowOptions
from audit.flows.storm import runoff_coefficients, storm_flows
from audit.hydraulics import PipeHydraulics
from audit.network import Network

Array = NDArray[np.float64]


def node_totals(network: Network, q_design: Array, *, own: Array | None = None) -> Array:
    """Flow leaving each node [m^3/s]: the sum over its outgoing pipes; where no pipe leaves (an
    outfall), the sum over its incoming pipes plus ``own``, the flow of what drains straight to it."""
    count = len(network.nodes)
    flow = np.nan_to_num(q_design)
    out = network.upstream >= 0
    leaving = np.bincount(network.upstream[out], weights=flow[out], minlength=count)
    into = network.downstream >= 0
    arriving = np.bincount(network.downstream[into], weights=flow[into], minlength=count)
    has_out = np.bincount(network.upstream[out], minlength=count) > 0
    return np.where(has_out, leaving, arriving + (0.0 if own is None else np.nan_to_num(own)))


def _storm(carrier: Carrier, catchments: pd.DataFrame | None, outlet: NDArray[np.int64], pipes: PipeHydraulics, *,
           base: Array, given: Array, options: FlowOptions, findings: FindingLog) -> tuple[Array, Array, int, Array]:  # fmt: skip
    """Storm runoff [m^3/s], tc [min], passes taken, and the runoff draining straight to each node; zero for a sanitary sewer."""
    zero = np.where(carrier.usable, 0.0, np.nan)
    if not options.needs_rainfall or catchments is None:
        return zero, np.full(zero.size, np.nan), 0, np.zeros(carrier.node_group.size)
    runoff_area = runoff_coefficients(catchments, options=options, findings=findings) * catchment_area_ha(catchments)
    node_runoff = np.zeros(carrier.node_group.size)
    placed = outlet >= 0
    np.add.at(node_runoff, outlet[placed], runoff_area[placed])
    storm = storm_flows(carrier, node_runoff, pipes, base_flow=base, given_flow=given, options=options, findings=findings)
    return storm.q_storm, storm.tc_min, storm.iterations, storm.q_storm_own


def flow_carrier(network: Network, *, capacity: Array | None = None, carries: NDArray[np.bool_] | None = None) -> Carrier:
    """The network's :class:`Carrier`: loops as single nodes, splits by full-bore capacity."""
    return Carrier.build(upstream=network.upstream, downstream=network.downstream, order=network.order,
                         node_group=network.node_group, node_count=len(network.nodes), capacity=capacity, carries=carries)  # fmt: skip


def built_flows(network: Network, *, manholes: pd.DataFrame | None, catchments: pd.DataFrame | None, given_flow: Array,
                pipes: PipeHydraulics, pipe_labels: NDArray[np.object_], options: FlowOptions, findings: FindingLog,
                capacity: Array | None = None, carries: NDArray[np.bool_] | None = None,
                collects: NDArray[np.bool_] | None = None) -> DesignFlows:  # fmt: skip
    """Design flow per pipe as ``[flows]`` says, with its parts when built from the catchment.

    Parameters
    ----------
    network : the graph (``audit.network.Network``)
    manholes, catchments : canonical layers, or None where not configured
    given_flow : given design flow per pipe [m^3/s], NaN where none
    pipes : sections, slopes, friction and lengths, for the storm travel times
    pipe_labels : pipe ids for findings
    options : ``[flows]``
    findings : the log of data problems
    capacity : full-bore capacity per pipe [m^3/s], for the shares at a split (None: equal shares)
    carries : pipes that may carry flow (False for overflow pipes); None: every placed pipe
    collects : pipes that take in sewage and groundwater along their length (gravity and private
        sewers; not rising mains or siphons, which run sealed under pressure): only their
        length counts for ``persons_per_km`` and for infiltration per km. None: every pipe

    Returns
    -------
    :class:`audit.flows.DesignFlows`, with ``parts`` unless ``kind = "given"``
    """
    nodes = network.nodes
    carrier = flow_carrier(network, capacity=capacity, carries=carries)
    node_labels = nodes["node_id"].to_numpy(dtype=object)
    built = options.kind != "given"  # built flows take their shape (sources, lengths) from a run without loads
    shape = design_flows(carrier, node_inflow=np.zeros(len(nodes)) if built else nodes["inflow"].to_numpy(dtype=float),
                         given_flow=np.full(given_flow.size, np.nan) if built else given_flow, length=pipes.length,
                         left_out=network.left_out, pipe_labels=pipe_labels, node_labels=node_labels, findings=findings)  # fmt: skip
    if not built:
        return shape
    collecting_length = pipes.length if collects is None else np.where(collects, pipes.length, 0.0)
    loads = node_loads(nodes, manholes, catchments, options=options, findings=findings,
                       pipe_upstream=np.where(carrier.usable, network.upstream, -1), pipe_length=collecting_length)  # fmt: skip
    _report_outfall_catchments(network, loads.catchment_node, catchments, findings=findings)
    loads = replace(loads, population=options.population_growth * loads.population)  # the design horizon's population
    sanitary = sanitary_flows(carrier, loads, length=collecting_length, options=options)
    given = np.isfinite(given_flow) & (given_flow >= 0) & carrier.usable
    q_storm, tc, passes, storm_own = _storm(carrier, catchments, loads.catchment_node, pipes, base=sanitary.q_sanitary + sanitary.q_infiltration,
                                             given=np.where(given, given_flow, np.nan), options=options, findings=findings)  # fmt: skip
    parts = FlowParts(sanitary.q_sanitary, sanitary.q_infiltration, q_storm, tc, sanitary.population_served, sanitary.area_served_ha, passes,
                      q_sanitary_average=sanitary.q_sanitary_average)  # fmt: skip
    source = shape.source.copy()
    source[given] = "given"
    q_design = np.where(given, given_flow, parts.total)
    q_design[source == "overflow"] = 0.0
    own = sanitary.q_sanitary_own + sanitary.q_infiltration_own + storm_own
    return replace(shape, q_design=q_design, source=source, node_total=node_totals(network, q_design, own=own), parts=parts)


def _report_outfall_catchments(network: Network, outlet: NDArray[np.int64], catchments: pd.DataFrame | None, *, findings: FindingLog) -> None:
    """``catchment_at_outfall`` per catchment that drains straight to a node no pipe leaves."""
    if catchments is None or outlet.size == 0:
        return
    leaves = np.zeros(len(network.nodes), dtype=bool)
    leaves[network.upstream[network.upstream >= 0]] = True
    straight = (outlet >= 0) & ~leaves[np.maximum(outlet, 0)]
    if straight.any():
        names = network.nodes["node_id"].to_numpy(dtype=object)[outlet[straight]]
        messages = "drains straight to '" + pd.Series(names, dtype=object).astype(str) + "', which no pipe leaves; its flow is counted there"
        findings.add_many("catchments", catchments["catchment_id"].to_numpy(dtype=object)[straight], "catchment_at_outfall", messages.to_numpy())


def flow_assumptions(options: FlowOptions, flows: DesignFlows) -> dict[str, object]:
    """What the design flows assumed, for summary.json: the ``[flows]`` values used and the passes taken."""
    if options.kind == "given":
        return {"kind": "given", "note": "given pipe flows and manhole inflows only"}
    assumed = asdict(options)
    assumed["tc_iterations"] = 0 if flows.parts is None else flows.parts.iterations
    if not options.needs_rainfall:
        assumed.pop("rainfall")
    return assumed
