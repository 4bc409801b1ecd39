"""Units guessed from the CRS's axes, from the range of the sizes and from the flows against the pipe areas.

Each test writes a small invented layer (FlatGeobuf or GeoPackage) and inspects it.
"""

from pathlib import Path

import geopandas as gpd
import numpy as np
import pytest
from shapely.geometry import LineString

from audit.inspect.inspection import inspect_layers
from audit.inspect.listing import describe


def _units(tmp_path: Path, columns: dict[str, object], crs: str, *, suffix: str = ".fgb") -> dict[str, tuple[str, str]]:
    """Write one pipe layer, inspect it, and return its unit guesses as key -> (unit, reason)."""
    count = len(next(iter(columns.values())))  # type: ignore[arg-type]
    lines = [LineString([(1000 + 10 * i, 2000), (1010 + 10 * i, 2000)]) for i in range(count)]
    path = tmp_path / f"mains{suffix}"
    gpd.GeoDataFrame(columns, geometry=lines, crs=crs).to_file(path)
    found = inspect_layers(describe(path))
    assert found is not None
    return {key: (guess.value, guess.reason) for key, guess in found.pipes.guess.units.items()}


LEVELS = {"US_INVERT": [12.0, 11.5, 11.0], "DS_INVERT": [11.6, 11.1, 10.6], "PIPE_LENGTH": [40.0, 40.0, 40.0]}


@pytest.mark.parametrize(
    ("crs", "unit", "reason"),
    [
        ("EPSG:2249", "ft", "CRS unit is US survey foot (taken as ft: the two feet differ by 2 parts per million)"),
        ("EPSG:6494", "ft", "CRS unit is foot"),  # NAD83(2011) / Michigan Central, international feet
        ("EPSG:27700", "m", "CRS unit is metre"),
    ],
)
def test_levels_and_lengths_take_the_crs_linear_unit(tmp_path: Path, crs: str, unit: str, reason: str) -> None:
    units = _units(tmp_path, LEVELS, crs)
    assert units == {"upstream_invert": (unit, reason), "downstream_invert": (unit, reason), "length": (unit, reason)}


def test_a_vertical_axis_gives_the_levels_its_own_unit(tmp_path: Path) -> None:
    # NAD83 / Massachusetts Mainland (metres) + NAVD88 height (US survey feet)
    units = _units(tmp_path, LEVELS, "EPSG:26986+6360", suffix=".gpkg")
    assert units["upstream_invert"] == ("ft", "vertical CRS unit is US survey foot (taken as ft: the two feet differ by 2 parts per million)")
    assert units["length"] == ("m", "CRS unit is metre")


@pytest.mark.parametrize(
    ("sizes", "crs", "unit", "rule"),
    [
        ([0.225, 0.3, 0.45], "EPSG:27700", "m", "below 4, so metres or feet; metres, as the CRS is not in feet"),
        ([0.67, 1.0, 1.5], "EPSG:2249", "ft", "below 4, so metres or feet; feet, as the CRS is in feet"),
        ([8.0, 10.0, 15.0], "EPSG:2249", "in", "inches (about 4 to 120)"),
        ([4.0, 4.0, 6.0], "EPSG:27700", "in", "inches (about 4 to 120)"),
        ([100.0, 110.0, 150.0], "EPSG:27700", "mm",
         "inches (4 to 120) and millimetres (100 to 3,000) both fit; millimetres, as inches would make the median pipe over 8 ft"),
        ([150.0, 225.0, 3000.0], "EPSG:2249", "mm", "millimetres (about 100 to 3,000)"),
    ],
)  # fmt: skip
def test_sizes_by_their_median(tmp_path: Path, sizes: list[float], crs: str, unit: str, rule: str) -> None:
    median = float(np.median(sizes))
    units = _units(tmp_path, {"BORE": sizes}, crs)
    assert units["diameter"] == (unit, f"median of BORE is {median:g}: {rule}")


def test_a_unit_in_the_name_wins_but_a_disagreeing_median_is_shown(tmp_path: Path) -> None:
    units = _units(tmp_path, {"DIA_MM": [8.0, 12.0, 12.0]}, "EPSG:2249")
    assert units["diameter"] == ("mm", "unit in the field name DIA_MM; but the values say otherwise: median of DIA_MM is 12: inches (about 4 to 120)")


def test_sizes_beyond_any_rule_keep_the_default_and_say_so(tmp_path: Path) -> None:
    units = _units(tmp_path, {"SIZE": [4500.0, 5000.0, 6000.0]}, "EPSG:27700")
    assert units["diameter"] == ("mm", "median of SIZE is 5000: above 3,000, no rule fits; the default applies")


def test_flows_in_gallons_per_minute_among_us_units(tmp_path: Path) -> None:
    inches = np.array([8.0, 12.0, 24.0])
    gpm = np.array([150.0, 600.0, 2500.0])
    units = _units(tmp_path, {"DIAMETER": inches, "PEAK_FLOW": gpm}, "EPSG:2249")
    area = np.pi * (inches * 0.0254) ** 2 / 4  # m2, 1 in = 0.0254 m (NIST SP 811)
    as_cfs = np.median(gpm * 0.3048**3 / area)  # 1 ft3/s = 0.3048^3 m3/s (NIST SP 811)
    as_gpm = np.median(gpm * 3.785411784e-3 / 60 / area)  # 1 US gal = 3.785411784 L (NIST SP 811)
    assert as_gpm < 3 < as_cfs
    assert units["flow"] == ("gpm", f"median of PEAK_FLOW over the full-bore area is {as_cfs:.3g} m/s as cfs, {as_gpm:.3g} m/s as gpm: gpm keeps it below 3 m/s")


def test_flows_without_sizes_take_the_usual_unit_of_the_system(tmp_path: Path) -> None:
    assert _units(tmp_path, {"FLOW": [1.0, 2.0, 3.0]}, "EPSG:27700")["flow"] == ("l/s", "no pipe has both FLOW and a size to compare; the usual metric unit")


def test_a_unit_in_the_flow_name_wins(tmp_path: Path) -> None:
    assert _units(tmp_path, {"ADWF_MGD": [0.1, 0.2, 0.4]}, "EPSG:2249")["flow"] == ("MGD", "unit in the field name ADWF_MGD")
