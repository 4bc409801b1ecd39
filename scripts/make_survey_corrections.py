"""Copy the demo town and apply a few invented survey corrections, for ``sewer-audit compare`` to find.

Writes ``town.gpkg`` (the demo town's layers, pipes, manholes and catchments corrected), ``town.toml`` (the demo's config,
which maps the same fields, beside it) and ``CORRECTIONS.md`` (what was changed, by id) into the
folder given. The corrections are invented, as the town is:

* **corrected invert**: the pipe whose downstream invert lies above its upstream one (the planted
  reverse grade) is re-surveyed: its downstream invert now falls 1 % below the upstream one;
* **resized pipe**: the 225 mm lateral leaving the brewery's manhole (the manhole with a trade
  load) is found to be 450 mm;
* **deleted pipe**: the flattest pipe (the planted silting spur) is found abandoned and taken out
  of the register; its head manhole stays;
* **added branch**: a new cul-de-sac north of the northernmost head of a run: two manholes 45 m
  and 90 m up from it, two 225 mm PVC pipes at 1 % into it, and a catchment of 24 persons round
  each new manhole;
* **duplicated id**: the upper pipe of the new branch is typed with the id of an existing pipe.

Usage, from a source checkout::

    python scripts/make_survey_corrections.py corrected       # writes corrected/town.gpkg, town.toml, CORRECTIONS.md
    sewer-audit demo -o audit_before
    sewer-audit run corrected/town.toml -o audit_after
    sewer-audit compare audit_before audit_after -o changes

The folder must be empty or absent. docs/compare.md walks through the result.
"""

from __future__ import annotations

import argparse
import shutil
import sys
from collections.abc import Sequence
from dataclasses import dataclass, field
from pathlib import Path

import geopandas as gpd
import numpy as np
import pandas as pd
import pyogrio
import shapely

SAMPLE = Path(__file__).resolve().parent.parent / "sample_gis"
BRANCH_STEP_M = 45.0  # spacing of the new manholes [m]
BRANCH_FALL = 0.01  # fall of the new pipes [m/m]
BRANCH_SIZE_MM = 225.0
RESIZED_MM = 450.0
CORRECTED_FALL = 0.01  # fall given to the corrected pipe [m/m]
NEW_PERSONS = 24  # persons in each new catchment
NEW_IMPERVIOUS = 0.45  # impervious share of each new catchment
CATCHMENT_HALF_M = 20.0  # half the side of each new square catchment [m]


@dataclass
class Book:
    """The corrections made, as rows of CORRECTIONS.md."""

    rows: list[tuple[str, str, str, str]] = field(default_factory=list)

    def add(self, change: str, layer: str, ref: str, detail: str) -> None:
        """Record one correction."""
        self.rows.append((change, layer, ref, detail))

    def markdown(self) -> str:
        """The corrections as a Markdown page."""
        lines = ["# Invented survey corrections to the Brackenhollow register", "",
                 "Written by `scripts/make_survey_corrections.py`; `ref` is the asset_ref or mh_ref.", "",
                 "| change | layer | ref | detail |", "|---|---|---|---|"]  # fmt: skip
        lines += [f"| {change} | {layer} | {ref} | {detail} |" for change, layer, ref, detail in self.rows]
        return "\n".join(lines) + "\n"


def correct_invert(pipes: gpd.GeoDataFrame, book: Book) -> None:
    """The first reverse-graded pipe gets a downstream invert ``CORRECTED_FALL`` below its upstream one."""
    row = pipes.index[(pipes["il_dn_m"] > pipes["il_up_m"]).to_numpy()][0]
    before = float(pipes.at[row, "il_dn_m"])
    after = round(float(pipes.at[row, "il_up_m"]) - CORRECTED_FALL * float(pipes.at[row, "len_m"]), 2)
    pipes.at[row, "il_dn_m"] = after
    book.add("corrected invert", "pipes", str(pipes.at[row, "asset_ref"]), f"il_dn_m {before:.2f} -> {after:.2f}")


def resize_pipe(pipes: gpd.GeoDataFrame, manholes: gpd.GeoDataFrame, book: Book) -> None:
    """The pipe leaving the manhole with a trade load becomes ``RESIZED_MM``."""
    brewery = manholes.loc[manholes["trade_ls"].fillna(0.0) > 0, "mh_ref"].iloc[0]
    row = pipes.index[(pipes["mh_up"] == brewery).to_numpy()][0]
    before = float(pipes.at[row, "bore_mm"])
    pipes.at[row, "bore_mm"] = RESIZED_MM
    book.add("resized pipe", "pipes", str(pipes.at[row, "asset_ref"]), f"bore_mm {before:g} -> {RESIZED_MM:g} (leaves {brewery})")


def delete_flattest(pipes: gpd.GeoDataFrame, book: Book) -> gpd.GeoDataFrame:
    """The pipe of least positive fall per metre is taken out."""
    fall = ((pipes["il_up_m"] - pipes["il_dn_m"]) / pipes["len_m"]).to_numpy(dtype=float, na_value=np.nan)
    row = pipes.index[int(np.nanargmin(np.where(fall > 0, fall, np.nan)))]
    book.add("deleted pipe", "pipes", str(pipes.at[row, "asset_ref"]), f"found abandoned ({100 * fall[pipes.index.get_loc(row)]:.2f} % fall)")
    return pipes.drop(index=row)


def add_branch(pipes: gpd.GeoDataFrame, manholes: gpd.GeoDataFrame, catchments: gpd.GeoDataFrame,
               book: Book) -> tuple[gpd.GeoDataFrame, gpd.GeoDataFrame, gpd.GeoDataFrame]:  # fmt: skip
    """Two manholes and two pipes north of the northernmost head of a run, the upper pipe with a duplicated id."""
    heads = manholes[manholes["mh_ref"].isin(set(pipes["mh_up"]) - set(pipes["mh_down"]))]
    head = heads.loc[heads.geometry.y.idxmax()]
    x, y = float(head.geometry.x), float(head.geometry.y)
    names = ["N001", "N002"]
    steps = np.array([1.0, 2.0])
    inverts = float(head["sump_lvl"]) + BRANCH_FALL * BRANCH_STEP_M * steps
    new_manholes = gpd.GeoDataFrame(
        {"mh_ref": names, "cover_lvl": float(head["cover_lvl"]) + BRANCH_FALL * BRANCH_STEP_M * steps, "sump_lvl": inverts,
         "chamber_d": 1050.0, "dwf_ls": 0.0, "trade_ls": 0.0, "lid": "Y"},
        geometry=shapely.points(np.full(2, x), y + BRANCH_STEP_M * steps), crs=manholes.crs,
    )  # fmt: skip
    duplicated = str(pipes["asset_ref"].iloc[0])
    refs = [f"P{len(pipes) + 10:04d}", duplicated]
    ends = [(str(head["mh_ref"]), names[0]), (names[0], names[1])]
    new_pipes = gpd.GeoDataFrame(
        {"asset_ref": refs, "mh_up": [up for _, up in ends], "mh_down": [down for down, _ in ends], "profile": "C", "bore_mm": BRANCH_SIZE_MM,
         "rise_mm": np.nan, "span_mm": np.nan, "il_up_m": inverts, "il_dn_m": inverts - BRANCH_FALL * BRANCH_STEP_M,
         "len_m": BRANCH_STEP_M, "mat": "PVC", "laid": 2025, "q_des_ls": np.nan},
        geometry=[shapely.LineString([(x, y + BRANCH_STEP_M * step), (x, y + BRANCH_STEP_M * (step - 1))]) for step in steps], crs=pipes.crs,
    )  # fmt: skip
    new_catchments = gpd.GeoDataFrame(
        {"sub_ref": ["SN001", "SN002"], "outlet_mh": names, "persons": NEW_PERSONS, "imp_share": NEW_IMPERVIOUS},
        geometry=[shapely.box(x - CATCHMENT_HALF_M, cy - CATCHMENT_HALF_M, x + CATCHMENT_HALF_M, cy + CATCHMENT_HALF_M)
                  for cy in y + BRANCH_STEP_M * steps], crs=catchments.crs,
    )  # fmt: skip
    for name in names:
        book.add("added branch", "manholes", name, f"new manhole north of {head['mh_ref']}")
    book.add("added branch", "pipes", refs[0], f"{names[0]} -> {head['mh_ref']}, {BRANCH_SIZE_MM:g} mm PVC at {100 * BRANCH_FALL:g} %")
    book.add("duplicated id", "pipes", duplicated, f"{names[1]} -> {names[0]}, typed with the id of an existing pipe")
    joined = [pd.concat([old, new], ignore_index=True) for old, new in ((pipes, new_pipes), (manholes, new_manholes), (catchments, new_catchments))]
    return tuple(gpd.GeoDataFrame(frame, geometry="geometry", crs=frame.crs) for frame in joined)  # type: ignore[return-value]


def make_corrections(outdir: Path, *, sample: Path = SAMPLE) -> Book:
    """Write the corrected town, its config and CORRECTIONS.md into ``outdir`` (empty or absent)."""
    if outdir.exists() and any(outdir.iterdir()):
        raise SystemExit(f"{outdir}: the folder already holds files; give an empty or new folder")
    outdir.mkdir(parents=True, exist_ok=True)
    layers = {name: pyogrio.read_dataframe(sample / "town.gpkg", layer=name) for name in ("pipes", "manholes", "catchments")}
    book = Book()
    pipes, manholes = layers["pipes"], layers["manholes"]
    correct_invert(pipes, book)
    resize_pipe(pipes, manholes, book)
    pipes = delete_flattest(pipes, book)
    pipes, manholes, catchments = add_branch(pipes, manholes, layers["catchments"], book)
    target = outdir / "town.gpkg"
    shutil.copyfile(sample / "town.gpkg", target)  # every other layer (inspections, rail corridor) as it was
    for name, frame in (("pipes", pipes), ("manholes", manholes), ("catchments", catchments)):
        pyogrio.write_dataframe(frame, target, layer=name, driver="GPKG")  # replaces that layer only
    shutil.copyfile(sample / "town.toml", outdir / "town.toml")  # its paths are relative: town.gpkg beside it
    (outdir / "CORRECTIONS.md").write_text(book.markdown(), encoding="utf-8")
    return book


def main(argv: Sequence[str] | None = None) -> int:
    """Make the corrected copy; print what was changed."""
    parser = argparse.ArgumentParser(description=(__doc__ or "").splitlines()[0])
    parser.add_argument("outdir", type=Path, help="the folder to write (empty or absent)")
    options = parser.parse_args(argv)
    book = make_corrections(options.outdir)
    print(book.markdown(), end="")
    return 0


if __name__ == "__main__":
    sys.exit(main())
