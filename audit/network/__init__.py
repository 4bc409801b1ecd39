"""Stage 2, the network: canonical layers in, a directed graph of pipes and nodes with levels out.

In: the canonical pipes and manholes (:mod:`audit.layers`) and ``[network]``
(:mod:`audit.network.settings`). Out: :class:`Network`, integer arrays of the upstream and
downstream node of every pipe with the node table, a topological order, components and
outfalls; and from :func:`derive_levels`, each pipe's length, inverts in the flow direction,
slope and cover. Problems become findings.

Modules: ``build`` (joining ends to nodes, flow direction), ``ids`` (id factorisation),
``snapping`` (end points, nearest manholes, junction clusters), ``graph`` (components, cycles,
order, outfalls), ``findings`` (network findings in bulk), ``levels`` (lengths, inverts, slopes,
cover), ``settings`` (``[network]``).
"""

from audit.network.build import build_network
from audit.network.graph import Network, nodes_upstream
from audit.network.ids import arrow_text, first_places, pipe_labels
from audit.network.levels import LEVEL_COLUMNS, derive_levels
from audit.network.settings import DIRECTIONS, NetworkOptions, parse_network

__all__ = [
    "DIRECTIONS",
    "LEVEL_COLUMNS",
    "Network",
    "NetworkOptions",
    "arrow_text",
    "build_network",
    "derive_levels",
    "first_places",
    "nodes_upstream",
    "parse_network",
    "pipe_labels",
]
