"""Stage 3, the design flows: the network and its loads in, one design flow per pipe out.

In: the :class:`~audit.network.Network`, the canonical manholes and catchments, the pipes'
hydraulic description (for storm travel times) and ``[flows]`` (:mod:`audit.flows.settings`).
Out: :class:`DesignFlows`: the flow, where it came from, and for built flows its parts
(sanitary, infiltration, storm, time of concentration, population and area served).

Modules: ``carrier`` (carrying values down the network by one sparse triangular solve),
``sanitary`` (population, peaking, infiltration, point loads), ``storm`` (the rational method
with the time of concentration iterated), ``building`` (the parts put together), ``settings``.
"""

from audit.flows.building import built_flows, flow_assumptions, flow_carrier, node_totals
from audit.flows.carrier import SOURCES, Carrier, DesignFlows, FlowParts, design_flows, split_shares
from audit.flows.settings import FLOW_KINDS, FlowOptions, Rainfall, parse_flows

__all__ = [
    "FLOW_KINDS",
    "SOURCES",
    "Carrier",
    "DesignFlows",
    "FlowOptions",
    "FlowParts",
    "Rainfall",
    "built_flows",
    "design_flows",
    "flow_assumptions",
    "flow_carrier",
    "node_totals",
    "parse_flows",
    "split_shares",
]
