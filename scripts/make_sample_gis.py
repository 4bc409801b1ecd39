"""Generate the invented demo town of Brackenhollow: ``town.gpkg`` and ``ERRORS.md``.

``town.gpkg`` holds three layers: ``pipes``, ``manholes`` (with the trade load) and
``catchments`` (the Voronoi cell of each manhole within 40 m of the streets, with its population
and impervious share), so that ``town.toml`` builds combined design flows from population and
catchments: about 8,500 people at 44 to 76 persons/ha, sewers sized for the invented storm.

Brackenhollow does not exist. Its coordinates (EPSG:32630, UTM zone 30N) are invented and fall
in open water, so no real place or utility is implied. The register holds two gravity
catchments, West (the old town, with a brick egg-shaped trunk) and East (post-war estates), each
a dendritic tree draining to its own outfall, plus a handful of deliberate register errors that
``ERRORS.md`` lists by feature id for the audit to find. ``town.toml`` beside them is kept by
hand; this script never touches it.

Usage::

    python scripts/make_sample_gis.py [OUTDIR]      # default: sample_gis/ beside scripts/

A fixed seed and a pinned GeoPackage timestamp give the same bytes on every run. The parts live
in ``scripts/_sample_town/``: ``plan`` (the numbers of the town), ``layout`` (manholes, pipes,
levels), ``loads`` (catchments, people, design flows), ``tree`` (walks down the trees),
``sizing``, ``planted`` (the errors and ERRORS.md) and
``register`` (the layers in the town's field names).
"""

from __future__ import annotations

import os
import sys
from pathlib import Path

import geopandas as gpd
import numpy as np
import pyogrio

sys.path.insert(0, str(Path(__file__).resolve().parent))  # the _sample_town parts beside this script

from _sample_town.assets import inspection_table, rail_corridor
from _sample_town.layout import build_town
from _sample_town.plan import CRS, SEED, TIMESTAMP
from _sample_town.planted import ErrorBook, error_report, network_errors, typing_errors
from _sample_town.register import catchment_layer, register_tables


def write_town(outdir: Path, *, seed: int = SEED) -> None:
    """Build the town and write ``town.gpkg`` (pipes, manholes, catchments, inspections, rail_corridor) and ``ERRORS.md`` into ``outdir``."""
    rng = np.random.default_rng(seed)
    nodes, pipes = build_town(rng)
    book = ErrorBook(rng, len(pipes), len(nodes))
    network_errors(nodes, pipes, book)
    table, holes = register_tables(nodes, pipes)
    lateral = (nodes["kind"].to_numpy()[pipes["up"]] == "lateral") & ~pipes["egg"].to_numpy()
    holes = typing_errors(table, holes, lateral, book)
    order, layers = {}, {}
    for name, frame in (("pipes", table), ("manholes", holes)):
        perm = rng.permutation(len(frame))
        order[name] = np.argsort(perm)
        layers[name] = gpd.GeoDataFrame(frame.iloc[perm].reset_index(drop=True), geometry="geometry", crs=CRS)
    refs = {"pipes": table["asset_ref"], "manholes": holes["mh_ref"]}
    layers["catchments"] = catchment_layer(nodes)
    inspections, notes = inspection_table(table, pipes, rng)
    layers["rail_corridor"] = gpd.GeoDataFrame({"name": ["Brackenhollow branch line"]}, geometry=[rail_corridor(nodes)], crs=CRS)
    outdir.mkdir(parents=True, exist_ok=True)
    scratch = outdir / "town.partial.gpkg"
    scratch.unlink(missing_ok=True)
    pyogrio.set_gdal_config_options({"OGR_CURRENT_DATE": TIMESTAMP})
    for name, layer in layers.items():
        pyogrio.write_dataframe(layer, scratch, layer=name, driver="GPKG")
    pyogrio.write_dataframe(inspections, scratch, layer="inspections", driver="GPKG")  # a table without geometry
    os.replace(scratch, outdir / "town.gpkg")
    renewal = ["", "## Renewal inputs (invented)", "",
               f"Layer `inspections` (a table): CCTV grades of {len(inspections)} pipes, structural and service, 1 (good) to 5",
               "(worst). Layer `rail_corridor`: one polygon, a railway's strip of land across the town; pipes in it",
               "or within the buffer take the consequence `town.toml` gives it. Planted:", "",
               "| ref | detail |", "|---|---|", *(f"| {ref} | {detail} |" for ref, detail in notes)]  # fmt: skip
    (outdir / "ERRORS.md").write_text(error_report(book, order, refs) + "\n".join(renewal) + "\n", encoding="utf-8")


def main(argv: list[str] | None = None) -> int:
    """Command line: ``make_sample_gis.py [OUTDIR]``."""
    args = sys.argv[1:] if argv is None else argv
    write_town(Path(args[0]) if args else Path(__file__).resolve().parent.parent / "sample_gis")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())

