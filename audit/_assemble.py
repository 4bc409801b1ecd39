"""Put the computed results beside the original features, and gather network totals."""

from __future__ import annotations

from typing import Any

import geopandas as gpd
import numpy as np
import pandas as pd
import pyproj
import shapely

from .findings import FindingLog
from .layers import Layers
from .network import Network

COMPUTED_PREFIX = "audit_"


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
    computed = pd.DataFrame({"pipes_in": pipes_in, "pipes_out": pipes_out, "total_inflow": total, "findings": codes}, index=canonical.index)
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
        "pipes": int(len(canonical)),
        "length_m": round(float(np.nansum(computed["length_m"].to_numpy(dtype=float))), 1),
        "manholes": int(len(layers.manholes.canonical)) if layers.manholes is not None else 0,
        "junctions": int((network.nodes["kind"] == "junction").sum()),
        "outfalls": int(len(network.outfalls)),
        "components": int(np.unique(network.component[placed]).size),
        "pipes_on_loops": int(np.sum(network.in_cycle)),
        "pipes_evaluated": int(np.sum(evaluated)),
        "pipes_not_evaluated": int(np.sum(~evaluated)),
        "missing_share": missing_share,
    }
