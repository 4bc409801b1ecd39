"""Design flows built from the catchment: sanitary, infiltration and storm parts, then given flows.

``[flows] kind = "given"`` keeps ``audit.flows.design_flows`` as it was. Any other kind builds
every pipe's flow from its parts (audit.loads, audit.storm), scales them by the growth factor,
and lets a given pipe flow replace the built one in that pipe only: a given total cannot be split
into the parts that the peaking and the time of concentration need, so the pipes below keep
their built flows.
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


def node_totals(network: Network, q_design: Array) -> Array:
    """Flow leaving each node [m^3/s]: the sum over its outgoing pipes, at an outfall over its incoming."""
    count = len(network.nodes)
    flow = np.nan_to_num(q_design)
    out = network.upstream >= 0
    leaving = np.bincount(network.upstream[out], weights=flow[out], minlength=count)
    into = network.downstream >= 0
    arriving = np.bincount(network.downstream[into], weights=flow[into], minlength=count)
    has_out = np.bincount(network.upstream[out], minlength=count) > 0
    return np.where(has_out, leaving, arriving)


def _storm(carrier: Carrier, catchments: pd.DataFrame | None, outlet: NDArray[np.int64], pipes: PipeHydraulics, *,
           base: Array, given: Array, options: FlowOptions, findings: FindingLog) -> tuple[Array, Array, int]:  # fmt: skip
    """Storm runoff [m^3/s], tc [min] and passes taken; zero runoff for a sanitary sewer."""
    zero = np.where(carrier.usable, 0.0, np.nan)
    if not options.needs_rainfall or catchments is None:
        return zero, np.full(zero.size, np.nan), 0
    runoff_area = runoff_coefficients(catchments, options=options, findings=findings) * catchment_area_ha(catchments)
    node_runoff = np.zeros(carrier.rank.size)
    placed = outlet >= 0
    np.add.at(node_runoff, outlet[placed], runoff_area[placed])
    storm = storm_flows(carrier, node_runoff, pipes, base_flow=base, given_flow=given, options=options, findings=findings)
    return storm.q_storm, storm.tc_min, storm.iterations


def built_flows(network: Network, *, manholes: pd.DataFrame | None, catchments: pd.DataFrame | None, given_flow: Array,
                pipes: PipeHydraulics, pipe_labels: NDArray[np.object_], options: FlowOptions,
                findings: FindingLog) -> DesignFlows:  # fmt: skip
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

    Returns
    -------
    :class:`audit.flows.DesignFlows`, with ``parts`` unless ``kind = "given"``
    """
    nodes = network.nodes
    inflow = nodes["inflow"].to_numpy(dtype=float)
    up, down, order, in_cycle = network.upstream, network.downstream, network.order, network.in_cycle
    if options.kind == "given":
        return design_flows(upstream=up, downstream=down, order=order, in_cycle=in_cycle, node_inflow=inflow, given_flow=given_flow, length=pipes.length, pipe_labels=pipe_labels,
                            node_labels=nodes["node_id"].to_numpy(dtype=object), findings=findings)  # fmt: skip
    carrier = Carrier.build(upstream=up, downstream=down, order=order, in_cycle=in_cycle, node_count=len(nodes))
    shape = design_flows(upstream=up, downstream=down, order=order, in_cycle=in_cycle, node_inflow=np.zeros(inflow.size), given_flow=np.full(given_flow.size, np.nan), length=pipes.length,
                         pipe_labels=pipe_labels, node_labels=nodes["node_id"].to_numpy(dtype=object), findings=findings,
                         carrier=carrier)  # fmt: skip
    loads = node_loads(nodes, manholes, catchments, options=options, findings=findings)
    sanitary = sanitary_flows(carrier, loads, length=pipes.length, options=options)
    given = np.isfinite(given_flow) & (given_flow >= 0) & ~network.in_cycle
    q_storm, tc, passes = _storm(carrier, catchments, loads.catchment_node, pipes, base=sanitary.q_sanitary + sanitary.q_infiltration,
                                 given=np.where(given, given_flow, np.nan), options=options, findings=findings)  # fmt: skip
    growth = options.growth_factor
    parts = FlowParts(growth * sanitary.q_sanitary, growth * sanitary.q_infiltration, growth * q_storm, tc,
                      sanitary.population_served, sanitary.area_served_ha, passes)  # fmt: skip
    source = shape.source.copy()
    source[given] = "given"
    q_design = np.where(given, given_flow, parts.total)
    q_design[(source == "cycle") | (source == "missing")] = np.nan
    return replace(shape, q_design=q_design, source=source, node_total=node_totals(network, q_design), parts=parts)


def flow_assumptions(options: FlowOptions, flows: DesignFlows) -> dict[str, object]:
    """What the design flows assumed, for summary.json: the ``[flows]`` values used and the passes taken."""
    if options.kind == "given":
        return {"kind": "given", "note": "given pipe flows and manhole inflows only"}
    assumed = asdict(options)
    assumed["tc_iterations"] = 0 if flows.parts is None else flows.parts.iterations
    if not options.needs_rainfall:
        assumed.pop("rainfall")
    return assumed
