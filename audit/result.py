"""The result of an audit, and how it is assembled: what the pipeline hands to the outputs and to Python users.

``audit.run(config)`` returns an :class:`AuditResult`. Its GeoDataFrames hold every input
feature, in input order, with every original field unchanged and in the input's CRS, followed by
the computed columns listed here (units in the tables; SI throughout). The functions at the end
put the computed columns beside the original features and gather the network's totals.
"""

from __future__ import annotations

from collections.abc import Iterable, Mapping
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
from audit.labels import as_labels
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
    "water_level_up_m": "hydraulic grade line at the upstream end at the design flow [m]: the water level, or the pressure head where full",
    "water_level_down_m": "hydraulic grade line at the downstream end [m]",
    "depth_up_m": "water_level_up_m - upstream invert [m]; above the internal height where the pipe runs full there",
    "depth_down_m": "water_level_down_m - downstream invert [m]",
    "critical_depth_m": "critical depth at the design flow [m]",
    "froude": "Froude number at normal depth [-]: above 1 supercritical",
    "turn_deg": "the turn the flow makes into the pipe at its upstream manhole, from the main pipe in [degrees]; empty where no "
                "pipe brings water in, a direction is unknown, or the pipe is not evaluated",
    "manhole_loss_k": "k of the head loss k v^2/2g at its upstream manhole [-]: [grade_line] manhole_loss straight on, rising with "
                      "the turn to bend_loss at 90 degrees; bend_loss where the water starts from rest (head of run, a drop, turn unknown)",
    "flow_regime": "subcritical, supercritical, free_fall, partly_pressurised, pressurised, above_bank_full, dry or not_evaluated",
    "full_cause": "why the pipe runs full over some of its length: own_capacity, backwater (held up by the level below), "
                  "or none",
    "flags": "rule flag codes joined by ';' (empty when none)",
    "severity": "worst severity among the flags: high, medium, low, or none",
    "reasons": "one reason per flag with the numbers, joined by '; '",
    "findings": "data finding codes about this pipe, joined by ';' (the findings layer has their messages)",
    "from_node_id": "the node the pipe flows from (manhole id, or J<n> for an unnamed junction)",
    "to_node_id": "the node the pipe flows into",
    "upstream_length_m": "total length of this pipe and every pipe upstream of it [m]",
    "access_run_m": "length of the run between access points that holds this pipe [m]",
    "q_sanitary": "peaked sanitary flow of the design horizon's population plus point loads and manhole inflows [m3/s]; empty for given flows",
    "q_infiltration": "infiltration from the length of sewer and the area upstream [m3/s]",
    "q_storm": "rational-method storm runoff [m3/s], with the rainfall uplift and the urban creep",
    "remedy": "what to do, in words of the trade, with the numbers; every remedy that applies, joined by '; ' (docs/renewal.md)",
    "remedy_kind": "the first remedy that applies: verify, capacity, downstream, silting, inspect or other (empty for none)",
    "remedy_size_m": "the diameter the remedy proposes [m]: the new size of a capacity remedy, the smaller size of a silting one",
    "remedy_slope": "the slope the remedy proposes [m/m]",
    "scheme_id": "the scheme of work the pipe belongs to (S001, ...; schemes.csv); empty for none",
    "scheme_position": "the pipe's place in its scheme, 1 for the downstream pipe (0 for none)",
    "likelihood": "likelihood of failure, 1 to 5",
    "consequence": "consequence of failure, 1 to 5",
    "risk": "likelihood x consequence, 1 to 25",
    "likelihood_driver": "the part that gives the likelihood",
    "consequence_driver": "the part that gives the consequence",
    "risk_driver": "likelihood driver x consequence driver",
    "review": "1 where the data must be verified before any renewal (a review candidate)",
    "renewal_rank": "the pipe's place in the renewal programme (candidates.csv), 0 for none",
    "tc_min": "time of concentration at the pipe's upstream end [min]: inlet time plus the longest travel time",
    "population_served": "persons upstream of the pipe [-]",
    "area_served_ha": "catchment area upstream of the pipe [ha]",
}
"""Computed pipe columns, in output order, with their units and meaning."""

MANHOLE_COLUMNS: dict[str, str] = {
    "pipes_in": "number of pipes flowing into the manhole",
    "pipes_out": "number of pipes flowing out of the manhole",
    "flow_out": "flow leaving the manhole [m3/s]: its own inflow plus everything upstream",
    "rim_m": "cover (rim) level used [m]",
    "water_level_m": "water level in the manhole at the design flows [m], from the hydraulic grade line",
    "freeboard_m": "rim_m - water_level_m [m]; negative where the water stands above the cover",
    "flood_depth_m": "head above the cover [m]: how far the grade line stands above it (not a depth of water on the street); 0 where it stays below",
    "flood_state": "below_soffit, surcharged (above the soffit of the pipe leaving the manhole), flooding (at or above the cover less the "
                   "freeboard) or not_evaluated (no cover level or no water level)",
    "boundary": "at an outfall or another end of the grade line: free, normal or fixed, with '(assumed)' where no outfall "
                "or pump station ends it there; empty elsewhere",
    "flags": "manhole flag codes joined by ';': flooding, manhole_surcharge",
    "severity": "worst severity among the manhole's flags: high, medium, low, or none",
    "reasons": "one reason per flag with the numbers, joined by '; '",
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
        "water_level_up_m": ("water_level_up", "level"), "water_level_down_m": ("water_level_down", "level"),
        "depth_up_m": ("depth_up", "length"), "depth_down_m": ("depth_down", "length"), "critical_depth_m": ("critical_depth", "length"),
        "rim_m": ("rim", "level"), "water_level_m": ("water_level", "level"), "freeboard_m": ("freeboard", "length"),
        "flood_depth_m": ("flood_depth", "length"), "remedy_size_m": ("remedy_size", "size"),
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


def written_name(fields: Iterable[object], name: str) -> str | None:
    """The field a computed column was written under: ``audit_<name>`` where an original field took the name, else ``name``; None when absent.

    >>> written_name(["severity", "audit_severity"], "severity"), written_name(["flags"], "flags"), written_name([], "flags")
    ('audit_severity', 'flags', None)
    """
    present = {str(field) for field in fields}
    return next((field for field in (COMPUTED_PREFIX + name, name) if field in present), None)


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
    canonical_manholes: pd.DataFrame | None = None  # the canonical SI manhole columns, same order as manholes
    schemes: pd.DataFrame | None = None  # the renewal programme's schemes of work (audit.renewal.SCHEME_COLUMNS), SI
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


def finding_codes(findings: FindingLog, layer: str, ids: pd.Series) -> np.ndarray:
    """The codes of the data findings about each feature of ``layer``, joined by ';' in the order found (empty for none).

    Findings name a feature by its id, so features that share an id share their codes. Only the
    features a finding names are looked up one by one (a few thousand of a million).
    """
    frame = findings.to_frame()
    about = frame[frame["layer"] == layer].groupby("feature")["code"].agg(lambda codes: ";".join(dict.fromkeys(codes)))
    text = ids.astype(str)
    out = np.full(len(text), "", dtype=object)
    named = np.flatnonzero(text.isin(about.index).to_numpy(dtype=bool))
    out[named] = text.iloc[named].map(about.astype(object)).to_numpy(dtype=object)
    return out


def manhole_output(
    layers: Layers, network: Network, node_total: np.ndarray, findings: FindingLog, *, node_columns: Mapping[str, np.ndarray] | None = None
) -> gpd.GeoDataFrame:
    """The original manholes with pipe counts, the flow leaving each, the per-node results and their finding codes.

    ``node_columns`` holds further ``MANHOLE_COLUMNS`` as one value per network node (the grade
    line's levels, flood state and flags); each manhole takes its node's value, and a manhole
    the network left out takes NaN or an empty text.
    """
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
    per_manhole = {}
    for name, values in (node_columns or {}).items():
        numeric = np.issubdtype(np.asarray(values).dtype, np.number)
        column = np.full(count, np.nan) if numeric else np.full(count, "", dtype=object)
        column[row[is_manhole]] = np.asarray(values)[is_manhole]
        per_manhole[name] = column if numeric else as_labels(column)
    codes = as_labels(finding_codes(findings, "manholes", canonical["manhole_id"]))
    columns = {"pipes_in": pipes_in, "pipes_out": pipes_out, "flow_out": total, **per_manhole, "findings": codes}
    computed = pd.DataFrame({name: columns[name] for name in MANHOLE_COLUMNS if name in columns}, index=canonical.index, copy=False)
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


def network_totals(
    layers: Layers, network: Network, computed: pd.DataFrame, *, node_columns: Mapping[str, np.ndarray] | None = None
) -> dict[str, Any]:
    """Counts and lengths of the network, the share of each pipe attribute that is missing and,
    with the grade line's ``node_columns``, the manholes per flood state and the pipes per regime."""
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
        **({} if node_columns is None else {"grade_line": _grade_line_totals(network, computed, node_columns)}),
    }


def _grade_line_totals(network: Network, computed: pd.DataFrame, node_columns: Mapping[str, np.ndarray]) -> dict[str, Any]:
    """Manholes (nodes of the manhole layer) per flood state, pipes per flow regime and per cause of running full."""
    manhole = network.nodes["manhole_row"].to_numpy(dtype=np.int64) >= 0
    states = pd.Series(np.asarray(node_columns["flood_state"], dtype=object)[manhole]).value_counts()
    regimes = computed["flow_regime"].astype(str).value_counts() if "flow_regime" in computed else pd.Series(dtype=int)
    causes = computed["full_cause"].astype(str).value_counts() if "full_cause" in computed else pd.Series(dtype=int)
    return {
        "manholes_by_flood_state": {state: int(states.get(state, 0)) for state in ("flooding", "surcharged", "below_soffit", "not_evaluated")},
        "pipes_by_regime": {str(regime): int(count) for regime, count in regimes.items()},
        "pipes_full_by_cause": {cause: int(causes.get(cause, 0)) for cause in ("own_capacity", "backwater")},
    }
