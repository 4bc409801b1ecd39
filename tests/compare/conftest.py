"""A small register audited before and after known survey corrections, shared by the compare tests.

Before (manhole loads in l/s at A, B, C, E; D is the outfall; every pipe 60 m long):

    A(10) --P1 300 mm--> B(5) --P2 300 mm--> C(12) --P3 225 mm--> D
                          ^
    E(8) --P5 200 mm------'   (E lies 60 m north of B)

After the corrections:

* P2's downstream invert was typed 0.05 m above its upstream one (a reverse grade); corrected to
  fall 0.30 m (0.5 %);
* P3 was found to be 375 mm, not 225 mm;
* P5 and its manhole E were removed (found abandoned);
* a branch was added: manholes G (1 l/s) and F (1 l/s) 120 m and 60 m north of C, pipes
  G -> F (P6) and F -> C, both 150 mm at 1 %;
* the pipe F -> C was typed with the id P1, which P1 already has (a duplicated id).

Hydraulics: Manning, n = 0.013; flows are the manhole loads carried downstream.
"""

from collections.abc import Callable
from pathlib import Path

import geopandas as gpd
import pytest
import shapely

from audit.cli import main

N = 0.013  # Manning n set in the config [s/m^(1/3)]
RIM = 22.0  # every manhole's cover level [m]
# manholes: id, x, y, load [l/s]
BEFORE_MANHOLES = [("A", 0.0, 0.0, 10.0), ("B", 60.0, 0.0, 5.0), ("C", 120.0, 0.0, 12.0), ("D", 180.0, 0.0, 0.0), ("E", 60.0, 60.0, 8.0)]
AFTER_MANHOLES = [m for m in BEFORE_MANHOLES if m[0] != "E"] + [("F", 120.0, 60.0, 1.0), ("G", 120.0, 120.0, 1.0)]
# pipes: id, from, to, diameter [mm], upstream invert, downstream invert [m]
BEFORE_PIPES = [
    ("P1", "A", "B", 300, 20.00, 19.70),
    ("P2", "B", "C", 300, 19.70, 19.75),  # rises 0.05 m: reverse grade
    ("P3", "C", "D", 225, 19.40, 19.10),  # 225 mm below a 300 mm pipe, overloaded
    ("P5", "E", "B", 200, 20.00, 19.70),
]
AFTER_PIPES = [
    ("P1", "A", "B", 300, 20.00, 19.70),
    ("P2", "B", "C", 300, 19.70, 19.40),  # corrected invert
    ("P3", "C", "D", 375, 19.40, 19.10),  # resized
    ("P6", "G", "F", 150, 20.60, 20.00),  # added branch
    ("P1", "F", "C", 150, 20.00, 19.40),  # added branch, duplicated id
]


def write_register(folder: Path, manholes: list[tuple[str, float, float, float]], pipes: list[tuple[str, str, str, int, float, float]],
                   *, extra: str = "", crs: str = "EPSG:32630") -> Path:  # fmt: skip
    """Write pipes.gpkg, manholes.gpkg and a config that maps them (plus ``extra`` TOML) into ``folder``.

    The coordinates are given in EPSG:32630; another ``crs`` writes the layers projected into it.
    The register after the corrections has a field the survey added: ``SURVEYED``, the year.
    """
    folder.mkdir(parents=True, exist_ok=True)
    xy = {name: (x, y) for name, x, y, _ in manholes}
    gpd.GeoDataFrame(
        {"NODE": [m[0] for m in manholes], "RIM_LVL": RIM, "INFLOW": [m[3] for m in manholes]},
        geometry=[shapely.Point(m[1], m[2]) for m in manholes], crs="EPSG:32630",
    ).to_crs(crs).to_file(folder / "manholes.gpkg", driver="GPKG")  # fmt: skip
    gpd.GeoDataFrame(
        {"REF": [p[0] for p in pipes], "US_MH": [p[1] for p in pipes], "DS_MH": [p[2] for p in pipes], "DIA": [p[3] for p in pipes],
         "US_IL": [p[4] for p in pipes], "DS_IL": [p[5] for p in pipes], "MATERIAL": "VC",
         **({"SURVEYED": 2025} if pipes is AFTER_PIPES else {})},
        geometry=[shapely.LineString([xy[p[1]], xy[p[2]]]) for p in pipes], crs="EPSG:32630",
    ).to_crs(crs).to_file(folder / "pipes.gpkg", driver="GPKG")  # fmt: skip
    config = folder / "register.toml"
    config.write_text(
        f"""
[pipes]
path = "pipes.gpkg"
[pipes.fields]
id = "REF"
from_node = "US_MH"
to_node = "DS_MH"
diameter = "DIA"
upstream_invert = "US_IL"
downstream_invert = "DS_IL"
material = "MATERIAL"
[manholes]
path = "manholes.gpkg"
[manholes.fields]
id = "NODE"
rim = "RIM_LVL"
inflow = "INFLOW"
[manholes.units]
inflow = "l/s"
[hydraulics]
formula = "manning"
manning_n = {N}
{extra}
""",
        encoding="utf-8",
    )
    return config


def audit(config: Path, outdir: Path) -> Path:
    """Audit through the command line; the output folder."""
    assert main(["run", str(config), "-o", str(outdir), "-q"]) in (0, 3)
    return outdir


@pytest.fixture(scope="session")
def audits(tmp_path_factory: pytest.TempPathFactory) -> dict[str, Path]:
    """The audit folders the compare tests read, made once: ``before`` and ``after`` the corrections (SI),
    ``before_us`` (before, written in US units), ``before_looser`` (before, audited with max_load_ratio = 1.2)
    and ``after_32631`` / ``after_4326`` (after, its layers projected into EPSG:32631 / held in longitude and latitude)."""
    root = tmp_path_factory.mktemp("compare")
    configs = {
        "before": write_register(root / "before", BEFORE_MANHOLES, BEFORE_PIPES),
        "after": write_register(root / "after", AFTER_MANHOLES, AFTER_PIPES),
        "before_us": write_register(root / "before_us", BEFORE_MANHOLES, BEFORE_PIPES, extra='[output]\nunits = "us"'),
        "before_looser": write_register(root / "before_looser", BEFORE_MANHOLES, BEFORE_PIPES, extra="[rules]\nmax_load_ratio = 1.2"),
        "after_32631": write_register(root / "after_32631", AFTER_MANHOLES, AFTER_PIPES, crs="EPSG:32631"),
        "after_4326": write_register(root / "after_4326", AFTER_MANHOLES, AFTER_PIPES, crs="EPSG:4326"),
    }
    return {name: audit(config, root / f"audit_{name}") for name, config in configs.items()}


@pytest.fixture(scope="session")
def manning_n() -> float:
    """The Manning n every register's config sets [s/m^(1/3)]."""
    return N


@pytest.fixture
def compare(tmp_path: Path) -> Callable[..., tuple[int, Path]]:
    """Run ``sewer-audit compare OLD NEW -o <fresh folder> -q [options]``; the exit code and the folder."""

    def run(old: Path, new: Path, *options: str) -> tuple[int, Path]:
        out = tmp_path / f"out{len(list(tmp_path.iterdir()))}"
        return main(["compare", str(old), str(new), "-o", str(out), "-q", *options]), out

    return run
