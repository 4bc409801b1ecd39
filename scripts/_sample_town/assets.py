"""The demo town's renewal inputs: invented CCTV grades and one invented critical area.

An inspection table (one row per surveyed pipe: structural and service grades on a 1 to 5 scale,
5 the worst, in the town's own convention) and a rail corridor, a strip of land that a railway
crosses the western district in. Both are invented for the demo and listed in ERRORS.md.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import shapely

from _sample_town.plan import ORIGIN_E

#: Where the invented railway crosses the town, east of the western outfall, and its width [m].
RAIL_EASTING_M, RAIL_WIDTH_M = ORIGIN_E + 900.0, 30.0
SURVEYED_SHARE = 0.08  # share of pipes with a CCTV survey on record


def inspection_table(table: pd.DataFrame, pipes: pd.DataFrame, rng: np.random.Generator) -> tuple[pd.DataFrame, list[tuple[str, str]]]:
    """Grades for a sample of pipes, with two planted findings: a brick trunk pipe cracked and
    deformed (structural 5), and a lateral choked with roots (service 5). Returns the table and
    the notes for ERRORS.md (reference, detail)."""
    refs = table["asset_ref"].to_numpy(dtype=object)
    surveyed = np.sort(rng.choice(len(refs), size=max(int(SURVEYED_SHARE * len(refs)), 4), replace=False))
    structural = rng.choice([1, 1, 2, 2, 3], size=surveyed.size)
    service = rng.choice([1, 2, 2, 3], size=surveyed.size)
    brick = np.flatnonzero(pipes["egg"].to_numpy())
    lateral = np.setdiff1d(np.arange(len(refs)), brick)
    cracked, choked = int(brick[len(brick) // 2]), int(lateral[rng.integers(len(lateral))])
    rows = pd.DataFrame({"ASSET": refs[surveyed], "SRM_GRADE": structural, "OPS_GRADE": service, "SURVEYED": "2019-06-14"})
    planted = pd.DataFrame({"ASSET": refs[[cracked, choked]], "SRM_GRADE": [5, 2], "OPS_GRADE": [2, 5], "SURVEYED": ["2021-03-02", "2022-10-19"]})
    notes = [(str(refs[cracked]), "brick trunk cracked and deformed: structural grade 5 (inspections)"),
             (str(refs[choked]), "lateral choked with roots: service grade 5 (inspections)")]  # fmt: skip
    merged = pd.concat([rows[~rows["ASSET"].isin(planted["ASSET"])], planted], ignore_index=True)
    return merged.sort_values("ASSET", ignore_index=True), notes


def rail_corridor(nodes: pd.DataFrame) -> shapely.Polygon:
    """A strip of land across the whole town from south to north, where a railway runs."""
    south, north = float(nodes["y"].min()) - 50.0, float(nodes["y"].max()) + 50.0
    return shapely.box(RAIL_EASTING_M - RAIL_WIDTH_M / 2, south, RAIL_EASTING_M + RAIL_WIDTH_M / 2, north)
