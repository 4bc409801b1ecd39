"""The flow at which self-cleansing is judged, and the velocity and shear it gives.

Practice judges whether a sewer keeps itself clean at different flows (docs/rules.md,
``self_cleansing``): flowing full, at the design flow, at a share of the design flow, or at the
dry-weather flow (the sanitary part with infiltration, at its daily peak or its average). The
design flow of a combined sewer is the storm peak, so judging silting there misses the pipes that
silt in dry weather; judging every pipe at its dry-weather flow flags the heads of runs that carry
a few houses. The criterion is the user's choice; this module computes its velocity and shear for
every pipe, with one more normal-depth solve where the criterion's flow is not the design flow.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from audit.flows import DesignFlows
from audit.hydraulics import GRAVITY, FlowState, PipeHydraulics, normal_depth, water_density
from audit.rules.settings import RuleSettings

Array = NDArray[np.float64]


@dataclass(frozen=True)
class Cleansing:
    """Per pipe, the velocity [m/s] and boundary shear [Pa] at the self-cleansing criterion's flow."""

    velocity: Array
    shear: Array


def cleansing_state(settings: RuleSettings, *, state: FlowState, flows: DesignFlows, pipes: PipeHydraulics) -> Cleansing:
    r"""The velocity and shear at the flow the criterion ``settings.self_cleansing`` judges.

    ``full_velocity``: :math:`V_f` and :math:`\tau_f = \rho g R_f S` flowing full;
    ``design_velocity``: at the design flow (``state``); ``fraction_velocity``: at
    ``cleansing_fraction`` x the design flow; ``dry_weather_*``: at the dry-weather flow of the
    built flows (NaN where the flows were given, so no dry-weather flow is known).

    Parameters
    ----------
    settings : the rules, with the criterion
    state : uniform flow at the design flow (``audit.hydraulics.normal_depth``)
    flows : the design flows, with their parts where built from the catchment
    pipes : sections, slopes and friction of every pipe
    """
    criterion = settings.self_cleansing
    if criterion == "design_velocity":
        return Cleansing(state.velocity, state.shear)
    if criterion == "full_velocity":
        area, perimeter = pipes.sections.full()
        shear = float(water_density(pipes.temperature_c)) * GRAVITY * area / perimeter * pipes.slope
        return Cleansing(state.v_full, np.where(np.isfinite(state.v_full), shear, np.nan))
    if criterion == "fraction_velocity":
        flow = settings.cleansing_fraction * flows.q_design
    elif flows.parts is None:
        nothing = np.full(flows.q_design.size, np.nan)
        return Cleansing(nothing, nothing)
    else:
        flow = flows.parts.dry_weather(settings.dry_weather)
    at = normal_depth(np.nan_to_num(flow, nan=-1.0), pipes.sections, pipes.slope, pipes.friction, temperature_c=pipes.temperature_c)
    judged = np.isfinite(state.q_full)  # pipes the hydraulics judged at all (gravity pipes with usable data)
    return Cleansing(np.where(judged, at.velocity, np.nan), np.where(judged, at.shear, np.nan))
