"""A small hand-built sewer network written as real files, shared by the end-to-end tests.

Its expected flags and flows are worked out by hand here (see the comments); the expected
hydraulic numbers are computed independently in tests/test_end_to_end.py.
"""

from pathlib import Path

import geopandas as gpd
import shapely

N = 0.013  # Manning n set in the config

# manholes: id, x, y, rim [m], inflow [l/s]
MANHOLES = [
    ("A", 0.0, 0.0, 20.0, 10.0),
    ("B", 60.0, 0.0, 19.8, 5.0),
    ("C", 120.0, 0.0, 19.5, 20.0),
    ("D", 160.0, 0.0, 19.0, 0.0),
    ("E", 240.0, 0.0, 18.5, 0.0),
    ("F", 60.0, 40.0, 20.5, 0.5),
]
# pipes: id, from, to, diameter [mm], upstream invert, downstream invert [m]
PIPES = [
    ("P1", "A", "B", 300, 18.00, 17.52),  # 0.8 %: an ordinary pipe, no flag
    ("P2", "B", "C", 300, 17.40, 17.46),  # rises 0.06 m: reverse grade
    ("P3", "C", "D", 150, 17.30, 17.26),  # 0.1 %, 150 mm after 300 mm, overloaded
    ("P4", "D", "E", 300, 17.20, 5.20),  # 15 %: too fast
    ("P5", "F", "B", 200, 18.80, 18.60),  # 0.5 %, 0.5 l/s: silts
]
# loads add up down the tree: P5 = F; P1 = A; P2 = A + B + F; P3 = P2 + C; P4 = P3 + D
DESIGN_FLOW_LS = {"P1": 10.0, "P2": 15.5, "P3": 35.5, "P4": 35.5, "P5": 0.5}
# The grade line: P3 needs metres of head at 35.5 l/s (load ratio over 7), so C floods and the
# level carried up from it is its cover, 19.5 m. P2 (300 mm, full) carries it back to B at about
# 19.5 m, above the crowns of P1 at A (18.00 + 0.30 m) and of P5 at F (18.80 + 0.20 m): both
# are held up above their crowns at their upstream ends within their capacity, and so is P2.
EXPECTED_FLAGS = {
    "P1": {"backwater_surcharge"},
    "P2": {"reverse_grade", "backwater_surcharge"},
    "P3": {"surcharge", "below_min_diameter", "diameter_decrease"},
    "P4": {"high_velocity"},
    "P5": {"silting", "backwater_surcharge"},
}
# manholes: C floods (above); A, B and F hold water above the crowns of their pipes, below their covers
EXPECTED_FLOOD_STATES = {"A": "surcharged", "B": "surcharged", "C": "flooding", "D": "below_soffit", "E": "below_soffit", "F": "surcharged"}


def write_town(folder: Path, driver: str, suffix: str) -> Path:
    """Write the pipes and manholes with the given OGR driver, and a config that maps them."""
    xy = {name: (x, y) for name, x, y, _, _ in MANHOLES}
    manholes = gpd.GeoDataFrame(
        {"MH": [m[0] for m in MANHOLES], "COVER": [m[3] for m in MANHOLES], "LOAD_LS": [m[4] for m in MANHOLES]},
        geometry=[shapely.Point(m[1], m[2]) for m in MANHOLES],
        crs="EPSG:32630",
    )
    pipes = gpd.GeoDataFrame(
        {
            "REF": [p[0] for p in PIPES],
            "US_MH": [p[1] for p in PIPES],
            "DS_MH": [p[2] for p in PIPES],
            "DIA": [p[3] for p in PIPES],
            "IL_US": [p[4] for p in PIPES],
            "IL_DS": [p[5] for p in PIPES],
            "Remarks": ["survey 1998", None, "CCTV: roots", None, "note with spaces"],
        },
        geometry=[shapely.LineString([xy[p[1]], xy[p[2]]]) for p in PIPES],
        crs="EPSG:32630",
    )
    pipes.to_file(folder / f"pipes{suffix}", driver=driver)
    manholes.to_file(folder / f"manholes{suffix}", driver=driver)
    config = folder / "town.toml"
    config.write_text(
        f"""
[pipes]
path = "pipes{suffix}"
[pipes.fields]
id = "REF"
from_node = "US_MH"
to_node = "DS_MH"
diameter = "DIA"
upstream_invert = "IL_US"
downstream_invert = "IL_DS"
[manholes]
path = "manholes{suffix}"
[manholes.fields]
id = "MH"
rim = "COVER"
inflow = "LOAD_LS"
[hydraulics]
formula = "manning"
manning_n = {N}
[rules]
self_cleansing = "design_velocity"  # the expected flags judge silting at the design flow
""",
        encoding="utf-8",
    )
    return config
