"""The result of an audit, and how it is assembled: what the pipeline hands to the outputs and to Python users.

``audit.run(config)`` returns an :class:`AuditResult`. Its GeoDataFrames hold every input
feature, in input order, with every original field unchanged and in the input's CRS, followed by
the computed columns listed here (units in the tables; SI throughout). The functions at the end
put the computed columns beside the original features and gather the network's totals.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass
from pathlib import Path
from types import MappingProxyType
from typing import Any

import geopandas as gpd
import numpy as np
import pandas as pd
import pyproj
import shapely

from audit.findings import FindingLog
from audit.layers import Layers
from audit.network import Network
from audit.rules import RuleSettings
from audit.units import SI, UnitSystem

COMPUTED_PREFIX = "audit_"


PIPE_COLUMNS: dict[str, str] = {
    "height_m": "internal height used [m]: the diameter of a circular pipe",
    "length_m": "pipe length used [m]: the length attribute, else the drawn length",
    "slope": "bed slope in the flow direction [m/m]: (upstream invert - downstream invert) / length",
    "up_invert_m": "invert level at the upstream end [m]",
    "down_invert_m": "invert level at the downstream end [m]",
    "up_cover_m": "cover over the crown at the upstream end [m]: rim - (invert + height)",
    "down_cover_m": "cover over the crown at the downstream end [m]",
    "q_full": "full-bore capacity [m3/s]",
    "v_full": "full-bore velocity [m/s]",
    "q_design": "design flow [m3/s]: given, else accumulated from manhole inflows or built from the catchment ([flows] kind)",
    "flow_source": "where q_design comes from: given, accumulated, loop (the whole flow through a loop, an upper bound), "
                   "self_loop or overflow (no flow), missing (not placed) or left_out (abandoned)",
    "load_ratio": "q_design / q_full [-]",
    "depth_ratio": "normal depth / internal height [-]; 1.0 when surcharged",
    "v_design": "mean velocity at the design flow [m/s]",
    "shear": "boundary shear stress at the design flow, rho g R S [Pa]",
    "v_cleansing": "velocity at the flow the self-cleansing criterion judges ([rules] self_cleansing) [m/s]",
    "shear_cleansing": "boundary shear at the flow the self-cleansing criterion judges [Pa]",
    "hydraulic_status": "ok, above_full_bore, surcharged, or why the hydraulics could not run; pressure_pipe, overflow or "
                        "left_out for a pipe the gravity rules do not judge",
    "pipe_kind": "gravity, private, rising_main, siphon, overflow or abandoned ([pipes.kinds]; gravity where unmapped)",
    "flags": "rule flag codes joined by ';' (empty when none)",
    "severity": "worst severity among the flags: high, medium, low (empty when none)",
    "reasons": "one reason per flag with the numbers, joined by '; '",
    "from_node_id": "the node the pipe flows from (manhole id, or J<n> for an unnamed junction)",
    "to_node_id": "the node the pipe flows into",
    "upstream_length_m": "total length of this pipe and every pipe upstream of it [m]",
    "access_run_m": "length of the run between access points that holds this pipe [m]",
    "q_sanitary": "peaked sanitary flow of the design horizon's population plus point loads and manhole inflows [m3/s]; empty for given flows",
    "q_infiltration": "infiltration from the length of sewer and the area upstream [m3/s]",
    "q_storm": "rational-method storm runoff [m3/s], with the rainfall uplift and the urban creep",
    "tc_min": "time of concentration at the pipe's upstream end [min]: inlet time plus the longest travel time",
    "population_served": "persons upstream of the pipe [-]",
    "area_served_ha": "catchment area upstream of the pipe [ha]",
}
"""Computed pipe columns, in output order, with their units and meaning."""

MANHOLE_COLUMNS: dict[str, str] = {
    "pipes_in": "number of pipes flowing into the manhole",
    "pipes_out": "number of pipes flowing out of the manhole",
    "flow_out": "flow leaving the manhole [m3/s]: its own inflow plus everything upstream",
    "findings": "data finding codes about this manhole, joined by ';'",
}
"""Computed manhole columns, in output order."""

FINDING_COLUMNS: dict[str, str] = {
    "layer": "the layer the finding is about: pipes, manholes or network",
    "feature": "the feature's id in that layer (or * for the whole layer)",
    "code": "short finding code, e.g. duplicate_id, length_mismatch",
    "message": "what is wrong, with the numbers",
}
"""Columns of the findings point layer (geometry: where the problem is)."""


COLUMN_UNITS: Mapping[str, tuple[str, str]] = MappingProxyType(
    {
        "height_m": ("height", "size"), "length_m": ("length", "length"), "up_invert_m": ("up_invert", "level"),
        "down_invert_m": ("down_invert", "level"), "up_cover_m": ("up_cover", "length"), "down_cover_m": ("down_cover", "length"),
        "q_full": ("q_full", "flow"), "v_full": ("v_full", "velocity"), "q_design": ("q_design", "flow"),
        "v_design": ("v_design", "velocity"), "shear": ("shear", "stress"), "v_cleansing": ("v_cleansing", "velocity"),
        "shear_cleansing": ("shear_cleansing", "stress"), "upstream_length_m": ("upstream_length", "length"),
        "access_run_m": ("access_run", "length"), "q_sanitary": ("q_sanitary", "flow"), "q_infiltration": ("q_infiltration", "flow"),
        "q_storm": ("q_storm", "flow"), "tc_min": ("tc", "time"), "area_served_ha": ("area_served", "area"),
        "flow_out": ("flow_out", "flow"),
    }
)  # fmt: skip
"""The computed columns that carry a unit: their name without it, and their quantity
(``audit.units.SI_BASE``). Outputs name them with the unit of the system they are written in:
``q_design`` is ``q_design_l_s`` in SI outputs and ``q_design_cfs`` in US ones."""


def output_name(name: str, units: UnitSystem) -> str:
    """The name a computed column has in outputs written in ``units``; columns without a unit keep theirs.

    >>> from audit.units import US
    >>> output_name("q_design", SI), output_name("height_m", US), output_name("load_ratio", US)
    ('q_design_l_s', 'height_in', 'load_ratio')
    """
    if name not in COLUMN_UNITS:
        return name
    base, quantity = COLUMN_UNITS[name]
    return f"{base}_{units.suffix(quantity)}"


@dataclass(frozen=True)
class AuditResult:
    """Everything an audit produced, ready to write or to use in Python."""

    pipes: gpd.GeoDataFrame  # original fields + PIPE_COLUMNS, input order, input CRS
    manholes: gpd.GeoDataFrame | None  # original fields + MANHOLE_COLUMNS
    findings: gpd.GeoDataFrame  # FINDING_COLUMNS + Point geometry, in the pipes' output CRS
    rules: RuleSettings  # the rule values used
    settings: Mapping[str, Any]  # hydraulics and network settings used (JSON-safe)
    totals: Mapping[str, Any]  # network totals: pipes, length_m, manholes, outfalls, components, ...
    missing_fields: Mapping[str, tuple[str, ...]]  # per layer, canonical fields with no mapping
    inputs: tuple[Path, ...]  # the input files (never written)
    config_path: Path | None  # the config file the audit ran from
    canonical_pipes: pd.DataFrame | None = None  # the canonical SI pipe columns (DEVELOPERS.md), same order
    computed: pd.DataFrame | None = None  # PIPE_COLUMNS under their documented names, same order
    units: UnitSystem = SI  # the system the outputs are written in ([output] units); values here are SI

    @property
    def pipe_results(self) -> pd.DataFrame:
        """The computed pipe columns under their documented names.

        In ``pipes`` a computed column whose name the user's layer already uses is written as
        ``audit_<name>``; read results from here to be sure of getting the computed value.
        """
        return self.pipes if self.computed is None else self.computed


def with_columns(original: gpd.GeoDataFrame, computed: pd.DataFrame, findings: FindingLog, *, layer: str) -> pd.DataFrame:
    """The original features unchanged, followed by the computed columns.

    A computed column whose name the user's layer already uses (ignoring case, as GeoPackage
    does) is written as ``audit_<name>`` so that no original field is ever overwritten; a
    finding says so. ``AuditResult.computed`` keeps the documented names.
    """
    taken = {str(name).casefold() for name in original.columns}
    clashes = [name for name in computed.columns if name.casefold() in taken]
    if clashes:
        computed = computed.rename(columns={name: COMPUTED_PREFIX + name for name in clashes})
        findings.add_many(layer, ["*"] * len(clashes), "field_renamed", [f"the layer already has a field {name!r}; the computed one is written as {COMPUTED_PREFIX + name!r}" for name in clashes])
    computed = computed.set_axis(original.index)
    return pd.concat([original, computed], axis=1)


def manhole_output(layers: Layers, network: Network, node_total: np.ndarray, findings: FindingLog) -> gpd.GeoDataFrame:
    """The original manholes with pipe counts, the flow leaving each, and their finding codes."""
    assert layers.manholes is not None
    original, canonical = layers.manholes.original, layers.manholes.canonical
    count = len(original)
    row = network.nodes["manhole_row"].to_numpy(dtype=np.int64)
    is_manhole = row >= 0
    node_in = np.bincount(network.downstream[network.downstream >= 0], minlength=len(row))
    node_out = np.bincount(network.upstream[network.upstream >= 0], minlength=len(row))
    pipes_in, pipes_out, total = np.zeros(count, np.int64), np.zeros(count, np.int64), np.full(count, np.nan)
    pipes_in[row[is_manhole]] = node_in[is_manhole]
    pipes_out[row[is_manhole]] = node_out[is_manhole]
    total[row[is_manhole]] = node_total[is_manhole]
    frame = findings.to_frame()
    about = frame[frame["layer"] == "manholes"].groupby("feature")["code"].agg(lambda codes: ";".join(dict.fromkeys(codes)))
    ids = canonical["manhole_id"].astype(str)
    codes = ids.map(about).fillna("").to_numpy(dtype=object)
    computed = pd.DataFrame({"pipes_in": pipes_in, "pipes_out": pipes_out, "flow_out": total, "findings": codes}, index=canonical.index)
    joined = with_columns(original, computed, findings, layer="manholes")
    return gpd.GeoDataFrame(joined, geometry=original.geometry.name, crs=original.crs)


def finding_points(findings: FindingLog, *, source_crs: pyproj.CRS, target_crs: Any) -> gpd.GeoDataFrame:
    """Every finding as a point at its location (no geometry where it has none)."""
    frame = findings.to_frame()
    x, y = frame["x"].to_numpy(dtype=float), frame["y"].to_numpy(dtype=float)
    located = np.isfinite(x) & np.isfinite(y)
    points = np.full(len(frame), None, dtype=object)
    points[located] = shapely.points(x[located], y[located])
    geometry = gpd.GeoSeries(points, crs=source_crs)
    if target_crs is not None:
        geometry = geometry.to_crs(target_crs)
    return gpd.GeoDataFrame(frame[["layer", "feature", "code", "message"]].reset_index(drop=True), geometry=geometry.values, crs=geometry.crs)


def network_totals(layers: Layers, network: Network, computed: pd.DataFrame) -> dict[str, Any]:
    """Counts and lengths of the network, and the share of each pipe attribute that is missing."""
    canonical = layers.pipes.canonical
    evaluated = computed["hydraulic_status"].isin(("ok", "above_full_bore", "surcharged")).to_numpy(dtype=bool)
    missing_share = {
        name: round(float(np.mean(~np.isfinite(computed[column].to_numpy(dtype=float)))), 4)
        for name, column in (("size", "height_m"), ("upstream_invert", "up_invert_m"), ("downstream_invert", "down_invert_m"), ("length", "length_m"), ("slope", "slope"))
        if column in computed
    }
    placed = network.component >= 0
    return {
        "pipes": len(canonical),
        "length_m": round(float(np.nansum(computed["length_m"].to_numpy(dtype=float))), 1),
        "manholes": len(layers.manholes.canonical) if layers.manholes is not None else 0,
        "junctions": int((network.nodes["kind"] == "junction").sum()),
        "outfalls": len(network.outfalls),
        "components": int(np.unique(network.component[placed]).size),
        "pipes_on_loops": int(np.sum(network.in_cycle)),
        "pipes_evaluated": int(np.sum(evaluated)),
        "pipes_not_evaluated": int(np.sum(~evaluated)),
        "missing_share": missing_share,
    }
