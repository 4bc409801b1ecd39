"""The hydraulic grade line stage: water levels through the whole network, and flood screening.

In: every pipe as the hydraulics sees it (``audit.hydraulics.PipeHydraulics``: section, bed
slope, friction, length), its design flow, the node at each end in flow direction, the invert
level at each end, the rim level of every node, a boundary (``BoundaryKind``) and fixed level
per node where the network ends, which pipes take part, and the ``[grade_line]`` settings; plain
arrays, SI. Optionally the uniform-flow state the caller already has at these flows.

Out: a ``GradeLine``: per pipe the water level and depth at both ends, critical depth, Froude
number at normal depth, the flow regime (``PipeRegime``), why it runs full (``FullCause``), a
hydraulic-jump mask and the friction slope where it runs full; per node the water level, the
freeboard below the rim, the flood depth above it, the ``FloodState`` and whether its boundary
was assumed. Nothing is raised for bad data: pipes that cannot take part are ``not_evaluated``.

Modules: ``settings`` (``[grade_line]``, boundary kinds, per-node boundary arrays),
``critical`` (critical depth, Froude number, specific force, sequent depth for any section),
``profile`` (friction slope, the direct step method), ``losses`` (the manhole loss by the
turn the flow makes), ``order`` (levels of the network from its
ends, cycles left out), ``sweep`` (the level-by-level sweep, manhole losses), ``flooding``
(flood screening at the nodes). Method and sources: docs/methods.md.
"""

from audit.grade_line.critical import critical_depth, froude_number, sequent_depth, specific_force
from audit.grade_line.flooding import FloodState, flood_screen
from audit.grade_line.losses import Turns, loss_coefficients, manhole_turns
from audit.grade_line.profile import direct_step, friction_slope, full_bore_slope
from audit.grade_line.settings import (
    BOUNDARY_NAMES,
    BoundaryKind,
    GradeLineSettings,
    Outfall,
    node_boundaries,
    parse_grade_line,
)
from audit.grade_line.sweep import FullCause, GradeLine, PipeRegime, grade_line

__all__ = [
    "BOUNDARY_NAMES",
    "BoundaryKind",
    "FloodState",
    "FullCause",
    "GradeLine",
    "GradeLineSettings",
    "Outfall",
    "PipeRegime",
    "Turns",
    "critical_depth",
    "direct_step",
    "flood_screen",
    "friction_slope",
    "froude_number",
    "full_bore_slope",
    "grade_line",
    "loss_coefficients",
    "manhole_turns",
    "node_boundaries",
    "parse_grade_line",
    "sequent_depth",
    "specific_force",
]
