"""The layers in the town's own field names: pipes, manholes and catchments."""

from __future__ import annotations

import geopandas as gpd
import numpy as np
import pandas as pd
import shapely

from .plan import (
    CHAMBER_MM,
    CONCRETE_FROM_MM,
    CRS,
    EGG_RISE_RATIO,
    PVC_FROM_YEAR,
    SURVEY_COLUMN,
    SURVEY_MARGIN,
)


def register_tables(nodes: pd.DataFrame, pipes: pd.DataFrame) -> tuple[pd.DataFrame, pd.DataFrame]:
    """The two attribute tables in the town's own field names, in internal order."""
    up, dn, egg, span = pipes["up"], pipes["dn"], pipes["egg"].to_numpy(), pipes["span"].to_numpy()
    refs = nodes["ref"].to_numpy()
    mat = np.select([egg, span >= CONCRETE_FROM_MM, pipes["laid"] < PVC_FROM_YEAR], ["BRICK", "CONC", "VC"], "PVC")
    given = np.flatnonzero(nodes["kind"].to_numpy()[dn] == "outfall")
    survey = (nodes["kind"].to_numpy()[up] == "trunk") & (nodes["column"].to_numpy()[up] == SURVEY_COLUMN)
    given = np.r_[given, np.flatnonzero(survey)]
    flow = np.full(len(pipes), np.nan)
    flow[given] = np.round(pipes["flow"].to_numpy()[given] * SURVEY_MARGIN, 1)
    table = pd.DataFrame({
        "asset_ref": np.char.add("P", np.char.zfill(np.arange(1, len(pipes) + 1).astype(str), 4)), "mh_up": refs[up], "mh_down": refs[dn],
        "profile": np.where(egg, "OV", "C"),
        "bore_mm": np.where(egg, np.nan, span), "rise_mm": np.where(egg, span * EGG_RISE_RATIO, np.nan),
        "span_mm": np.where(egg, span, np.nan),
        "il_up_m": nodes["invert"].to_numpy()[up], "il_dn_m": nodes["invert"].to_numpy()[dn],
        "len_m": np.round(pipes["length"].to_numpy(), 2), "mat": mat, "laid": pipes["laid"].to_numpy(),
        "q_des_ls": flow, "geometry": pipes["geometry"].to_numpy(),
    })
    widest = np.zeros(len(nodes))
    np.maximum.at(widest, np.r_[up, dn], np.r_[span, span])
    chamber = CHAMBER_MM[1][np.searchsorted(CHAMBER_MM[0], widest)]
    open_chamber = (nodes["lid"] == "Y") & (nodes["kind"] != "outfall")
    holes = pd.DataFrame({
        "mh_ref": refs, "cover_lvl": np.round(nodes["ground"].to_numpy(), 2), "sump_lvl": nodes["invert"].to_numpy(),
        "chamber_d": pd.array(chamber, dtype="Int32"),
        "dwf_ls": nodes["load"].to_numpy(), "trade_ls": nodes["trade"].to_numpy(), "lid": nodes["lid"].to_numpy(),
        "geometry": shapely.points(nodes[["x", "y"]].to_numpy()),
    })
    holes.loc[~open_chamber.to_numpy(), "chamber_d"] = pd.NA
    return table, holes


def catchment_layer(nodes: pd.DataFrame) -> gpd.GeoDataFrame:
    """The area drained by each manhole that is not an outfall, with its people and paved share."""
    served = nodes[nodes["kind"] != "outfall"]
    return gpd.GeoDataFrame({
        "sub_ref": "S" + served["ref"].to_numpy(dtype=str).astype(object), "outlet_mh": served["ref"].to_numpy(),
        "persons": served["people"].to_numpy(dtype=int), "imp_share": served["imp_share"].to_numpy(),
        "geometry": served["cell"].to_numpy(),
    }, geometry="geometry", crs=CRS)
