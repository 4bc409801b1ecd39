"""Shared ground, the hydraulics: sections, friction laws and uniform flow for whole arrays of pipes.

In: each pipe's section, bed slope, friction and a discharge. Out: full-bore capacity and
velocity (bank-full for open channels), normal depth, velocity and shear at a flow, with a status
per pipe instead of an exception. Used by the pipeline and by the storm flows (travel times);
imports no other stage.

Modules: ``sections`` (circular, rectangular, egg, tabulated outlines; open rectangular and
trapezoidal channels), ``friction`` (Manning,
Colebrook-White, Chezy, water properties), ``uniform`` (full bore, peak discharge, normal depth,
design helpers), ``roots`` (vectorised bracketed root and maximum), ``settings``
(``[hydraulics]``).
"""

from audit.hydraulics.friction import (
    GRAVITY,
    Friction,
    water_density,
    water_kinematic_viscosity,
)
from audit.hydraulics.sections import (
    DEFAULT_SIDE_SLOPE,
    Circular,
    Egg,
    OpenRectangular,
    PipeSections,
    Rectangular,
    Section,
    TabulatedSection,
    Trapezoidal,
    register_section,
    section_names,
)
from audit.hydraulics.settings import FORMULAS, WATER_TEMPERATURE_RANGE_C, HydraulicsOptions, parse_hydraulics
from audit.hydraulics.uniform import (
    FlowState,
    FlowStatus,
    PipeHydraulics,
    capacity_peak,
    discharge_at,
    full_bore,
    normal_depth,
    required_slope,
    smallest_diameter,
)

__all__ = [
    "DEFAULT_SIDE_SLOPE",
    "FORMULAS",
    "GRAVITY",
    "WATER_TEMPERATURE_RANGE_C",
    "Circular",
    "Egg",
    "FlowState",
    "FlowStatus",
    "Friction",
    "HydraulicsOptions",
    "OpenRectangular",
    "PipeHydraulics",
    "PipeSections",
    "Rectangular",
    "Section",
    "TabulatedSection",
    "Trapezoidal",
    "capacity_peak",
    "discharge_at",
    "full_bore",
    "normal_depth",
    "parse_hydraulics",
    "register_section",
    "required_slope",
    "section_names",
    "smallest_diameter",
    "water_density",
    "water_kinematic_viscosity",
]
