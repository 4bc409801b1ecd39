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

Grade line: the outfall D discharges below a fixed water level of 20.9 m (``[grade_line] outfall =
"fixed"``), above the crown of every pipe, so every pipe runs full and every level follows in
closed form: the outfall level plus Manning's full-bore friction loss of each pipe plus k v^2/2g
at each manhole. Every manhole's water then stands in its shaft, below its cover at 22 m:
``surcharged``, flagged ``manhole_surcharge``, in every audit (test_flood_state.py works the
bounds out) but the two that test_flood_state.py makes flood, with low covers at C and D. The pipe flags of the grade line are switched off, because these tests are about
comparing, not about the grade line, and each would need more than a closed form here:
``near_critical`` the normal depth of a circle and ``hydraulic_jump`` a sequent depth (roots with
no closed form), ``backwater_surcharge`` a judgement of whether a full pipe is held up by the
level below or by its own capacity (the reverse-graded P2 has no capacity to judge it by).
"""

from collections.abc import Callable, Mapping
from pathlib import Path
from typing import Any

import geopandas as gpd
import pytest
import shapely

from audit.cli import main

N = 0.013  # Manning n set in the config [s/m^(1/3)]
RIM = 22.0  # every manhole's cover level [m], unless a register says otherwise
TAILWATER = 20.9  # the fixed water level at the outfall D [m]: above every crown, 1.1 m below the covers
MANHOLE_LOSS = 0.15  # k in k v^2 / 2g at every manhole, set in the config [-]
# the pipe flags of the grade line, off in every register here (see the module docstring)
GRADE_LINE_PIPE_FLAGS = ("backwater_surcharge", "hydraulic_jump", "near_critical")
# the register after the corrections with two low covers, audited with the outfall held at two levels (test_flood_state.py)
LOW_COVERS = {"C": 20.9, "D": 21.0}  # [m]
OUTFALL_LOW, OUTFALL_RAISED = 20.8, 21.3  # [m]: the first below both low covers, the second above them
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
                   *, extra: str = "", crs: str = "EPSG:32630", outfall_level: float = TAILWATER, rims: Mapping[str, float] | None = None) -> Path:  # fmt: skip
    """Write pipes.gpkg, manholes.gpkg and a config that maps them (plus ``extra`` TOML) into ``folder``.

    The coordinates are given in EPSG:32630; another ``crs`` writes the layers projected into it.
    The register after the corrections has a field the survey added: ``SURVEYED``, the year.
    Every cover lies at ``RIM`` but those ``rims`` gives by manhole id [m]; the outfall's water
    level is fixed at ``outfall_level`` [m].
    """
    folder.mkdir(parents=True, exist_ok=True)
    xy = {name: (x, y) for name, x, y, _ in manholes}
    gpd.GeoDataFrame(
        {"NODE": [m[0] for m in manholes], "RIM_LVL": [(rims or {}).get(m[0], RIM) for m in manholes], "INFLOW": [m[3] for m in manholes]},
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
[grade_line]
outfall = "fixed"
outfall_level = {outfall_level}
manhole_loss = {MANHOLE_LOSS}
[rules.severity]
{"".join(f'{code} = "off"{chr(10)}' for code in GRADE_LINE_PIPE_FLAGS)}
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
    ``after_32631`` / ``after_4326`` (after, its layers projected into EPSG:32631 / held in longitude and latitude), and
    ``outfall_low`` / ``outfall_raised`` (after, with ``LOW_COVERS``, the outfall held at ``OUTFALL_LOW`` / ``OUTFALL_RAISED``)."""
    root = tmp_path_factory.mktemp("compare")
    configs = {
        "before": write_register(root / "before", BEFORE_MANHOLES, BEFORE_PIPES),
        "after": write_register(root / "after", AFTER_MANHOLES, AFTER_PIPES),
        "before_us": write_register(root / "before_us", BEFORE_MANHOLES, BEFORE_PIPES, extra='[output]\nunits = "us"'),
        "before_looser": write_register(root / "before_looser", BEFORE_MANHOLES, BEFORE_PIPES, extra="[rules]\nmax_load_ratio = 1.2"),
        "after_32631": write_register(root / "after_32631", AFTER_MANHOLES, AFTER_PIPES, crs="EPSG:32631"),
        "after_4326": write_register(root / "after_4326", AFTER_MANHOLES, AFTER_PIPES, crs="EPSG:4326"),
        "outfall_low": write_register(root / "outfall_low", AFTER_MANHOLES, AFTER_PIPES, outfall_level=OUTFALL_LOW, rims=LOW_COVERS),
        "outfall_raised": write_register(root / "outfall_raised", AFTER_MANHOLES, AFTER_PIPES, outfall_level=OUTFALL_RAISED, rims=LOW_COVERS),
    }
    return {name: audit(config, root / f"audit_{name}") for name, config in configs.items()}


@pytest.fixture(scope="session")
def survey(audits: dict[str, Path], tmp_path_factory: pytest.TempPathFactory) -> Path:
    """The folder of ``sewer-audit compare`` of the audits before and after the survey corrections."""
    out = tmp_path_factory.mktemp("survey") / "changes"
    assert main(["compare", str(audits["before"]), str(audits["after"]), "-o", str(out), "-q"]) == 0
    return out


@pytest.fixture(scope="session")
def manning_n() -> float:
    """The Manning n every register's config sets [s/m^(1/3)]."""
    return N


@pytest.fixture(scope="session")
def levels() -> dict[str, Any]:
    """The levels and the loss the registers are written with: ``tailwater``, ``rim`` [m], ``manhole_loss`` [-],
    ``low_covers`` (by manhole id), ``outfall_low``, ``outfall_raised`` [m]."""
    return {"tailwater": TAILWATER, "rim": RIM, "manhole_loss": MANHOLE_LOSS, "low_covers": LOW_COVERS,
            "outfall_low": OUTFALL_LOW, "outfall_raised": OUTFALL_RAISED}  # fmt: skip


@pytest.fixture(scope="session")
def registers() -> dict[str, list[tuple[str, str, str, int, float, float]]]:
    """The pipes of the register ``before`` and ``after`` the corrections: id, from, to, diameter [mm], upstream and downstream invert [m]."""
    return {"before": BEFORE_PIPES, "after": AFTER_PIPES}


@pytest.fixture
def compare(tmp_path: Path) -> Callable[..., tuple[int, Path]]:
    """Run ``sewer-audit compare OLD NEW -o <fresh folder> -q [options]``; the exit code and the folder."""

    def run(old: Path, new: Path, *options: str) -> tuple[int, Path]:
        out = tmp_path / f"out{len(list(tmp_path.iterdir()))}"
        return main(["compare", str(old), str(new), "-o", str(out), "-q", *options]), out

    return run
