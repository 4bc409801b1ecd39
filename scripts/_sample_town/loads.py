"""Catchments, people and the combined design flow the town's pipes were sized for.

Each manhole that is not an outfall drains the Voronoi cell around it, clipped to a strip of
houses either side of the streets (the pipes buffered by ``STREET_BLOCK_M``), so the area served
grows downstream with the streets. People live in the cells at a density per zone; the design
flow per pipe is the one ``town.toml`` asks the audit for: Harmon-peaked sanitary flow,
infiltration per km and rational-method runoff, with the time of concentration taken at an
assumed travel velocity (the audit iterates it with the real velocities).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import shapely

from .plan import (
    ASSUMED_VELOCITY_M_S,
    C_IMPERVIOUS,
    C_PERVIOUS,
    CATCHMENTS,
    DENSITY_PER_HA,
    IDF_A,
    IDF_B,
    IDF_C,
    IMPERVIOUS_SHARE,
    INFILTRATION_L_S_KM,
    INLET_TIME_MIN,
    PER_CAPITA_L_DAY,
    STREET_BLOCK_M,
)
from .tree import accumulate, sweep


def catchment_cells(nodes: pd.DataFrame, pipes: pd.DataFrame) -> np.ndarray:
    """Polygon drained by each manhole [m]: its Voronoi cell within the strip along the streets.

    Outfalls drain nothing (``None``). One Voronoi diagram for the whole town, so the cells of
    the two trees meet on the ridge without overlapping.
    """
    served = (nodes["kind"] != "outfall").to_numpy()
    sites = shapely.multipoints(nodes.loc[served, ["x", "y"]].to_numpy())
    town = shapely.union_all(shapely.buffer(pipes["geometry"].to_numpy(), STREET_BLOCK_M))
    cells = shapely.get_parts(shapely.voronoi_polygons(sites, extend_to=town, ordered=True))
    out = np.full(len(nodes), None, dtype=object)
    out[served] = shapely.intersection(cells, town)
    return out


def settle_people(nodes: pd.DataFrame, cells: np.ndarray, rng: np.random.Generator) -> None:
    """Area [ha], persons and impervious share per manhole, denser in the old town near West."""
    area = np.where(cells == None, 0.0, shapely.area(np.where(cells == None, shapely.Point(), cells))) / 1e4  # noqa: E711
    zone = nodes["zone"].to_numpy()
    low, high = _by_zone(zone, DENSITY_PER_HA)
    columns = pd.Series({c.zone: c.columns for c in CATCHMENTS}).reindex(zone).to_numpy()
    outward = np.clip(nodes["column"].to_numpy() / columns, 0, 1)  # 0 at the outfall, 1 at the far end
    density = high - (high - low) * outward + rng.uniform(-0.1, 0.1, len(nodes)) * (high - low)
    share_low, share_high = _by_zone(zone, IMPERVIOUS_SHARE)
    nodes["area_ha"] = np.round(area, 4)
    nodes["people"] = np.round(density * area).astype(int)
    nodes["imp_share"] = np.round(rng.uniform(share_low, share_high), 2)


def _by_zone(zone: np.ndarray, table: dict[str, tuple[float, float]]) -> tuple[np.ndarray, np.ndarray]:
    """The low and high ends of a per-zone range, per node."""
    frame = pd.DataFrame(table, index=["low", "high"]).T.reindex(zone)
    return frame["low"].to_numpy(dtype=float), frame["high"].to_numpy(dtype=float)


def harmon(population: np.ndarray) -> np.ndarray:
    r"""Harmon peaking factor [-] of a population, evaluated at no fewer than 1000 persons.

    .. math:: PF = 1 + \frac{14}{4 + \sqrt{P / 1000}}

    Source: Metcalf & Eddy, Wastewater Engineering (from memory); the floor of 1000 persons is
    the audit's default ``min_peaking_population``.
    """
    return 1.0 + 14.0 / (4.0 + np.sqrt(np.maximum(population, 1000.0) / 1000.0))


def idf_intensity(duration_min: np.ndarray) -> np.ndarray:
    """Rainfall intensity [mm/h] of the town's invented design storm, i = a / (t + b)^c, t [min]."""
    return IDF_A / (duration_min + IDF_B) ** IDF_C


def design_flows(nodes: pd.DataFrame, pipes: pd.DataFrame, level: np.ndarray) -> np.ndarray:
    r"""Combined design flow [l/s] per pipe, as the town's config builds it.

    .. math:: Q = PF(P) \frac{P q}{86\,400} + Q_{trade} + q_{inf} L + \frac{C i(t_c) A}{0.36}

    with P the persons upstream, q [l/person/day], L [km] of sewer upstream, C A [ha] and i
    [mm/h] (the rational method, Q [l/s] = C i A / 0.36; HEC-22 ch. 3, from memory).
    """
    up, dn = pipes["up"].to_numpy(), pipes["dn"].to_numpy()
    people = accumulate(nodes["people"].to_numpy(), up, dn, level)[up]
    trade = accumulate(nodes["trade"].to_numpy(), up, dn, level)[up]
    sewer_km = _upstream_km(pipes, level, len(nodes))
    share = nodes["imp_share"].to_numpy()
    runoff_area = nodes["area_ha"].to_numpy() * (share * C_IMPERVIOUS + (1 - share) * C_PERVIOUS)
    storm = accumulate(runoff_area, up, dn, level)[up] * idf_intensity(_tc_min(pipes, level, len(nodes))) / 0.36
    sanitary = harmon(people) * people * PER_CAPITA_L_DAY / 86_400
    return sanitary + trade + INFILTRATION_L_S_KM * sewer_km + storm


def _upstream_km(pipes: pd.DataFrame, level: np.ndarray, n_nodes: int) -> np.ndarray:
    """Length [km] of each pipe plus every pipe upstream of it."""
    up, dn = pipes["up"].to_numpy(), pipes["dn"].to_numpy()
    into = np.bincount(up, weights=pipes["length"].to_numpy(), minlength=n_nodes)
    return accumulate(into, up, dn, level)[up] / 1000


def _tc_min(pipes: pd.DataFrame, level: np.ndarray, n_nodes: int) -> np.ndarray:
    """Time of concentration [min] at each pipe's upstream end: inlet time plus the longest travel."""
    up, dn = pipes["up"].to_numpy(), pipes["dn"].to_numpy()
    travel = pipes["length"].to_numpy() / ASSUMED_VELOCITY_M_S / 60
    arrive = np.full(n_nodes, INLET_TIME_MIN)
    for p in sweep(level, up):
        np.maximum.at(arrive, dn[p], arrive[up[p]] + travel[p])
    return arrive[up]
