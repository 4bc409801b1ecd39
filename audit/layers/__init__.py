"""Stage 1, the layers: the configured files in, canonical SI frames out.

In: the ``[input]``, ``[pipes]``, ``[manholes]`` and ``[catchments]`` settings
(:mod:`audit.layers.settings`). Out: :class:`Layers`, each layer twice, as read (``original``,
every field, input order, source CRS) and canonical (the columns of the data contract in
DEVELOPERS.md, SI, geometry in a projected CRS in metres), plus findings for every bad value.

Modules: ``settings`` (the config tables), ``files`` (a file read whole or refused with a
message), ``reading`` (files to frames), ``fields`` (values, units, ids), ``geometry`` (clean-up
to one 2D part).
"""

from audit.layers.geometry import MAX_COORDINATE_M
from audit.layers.reading import (
    LayerData,
    Layers,
    quiet_measures,
    read_layers,
    working_crs,
)
from audit.layers.settings import (
    CATCHMENT_FIELDS,
    MANHOLE_FIELDS,
    MANHOLE_UNITS,
    NODE_KINDS,
    OPEN_SHAPES,
    PIPE_FIELDS,
    PIPE_KINDS,
    PIPE_UNITS,
    SHAPES,
    InputOptions,
    LayerSource,
    parse_input,
    parse_layer_source,
)

__all__ = [
    "CATCHMENT_FIELDS",
    "MANHOLE_FIELDS",
    "MANHOLE_UNITS",
    "MAX_COORDINATE_M",
    "NODE_KINDS",
    "OPEN_SHAPES",
    "PIPE_FIELDS",
    "PIPE_KINDS",
    "PIPE_UNITS",
    "SHAPES",
    "InputOptions",
    "LayerData",
    "LayerSource",
    "Layers",
    "parse_input",
    "parse_layer_source",
    "quiet_measures",
    "read_layers",
    "working_crs",
]
