"""The audit from a config to flags and numbers, checked against an independent computation.

The small network is built here. Its expected numbers come from Manning's formula and the
circle's geometry written out in this file (Chow 1959), with scipy.optimize.brentq as the root
solver, and from the default rule values of docs/rules.md; none comes from the project's own
hydraulics.
"""

from pathlib import Path

import geopandas as gpd
import numpy as np
import pandas as pd
import pytest
import shapely
from _small_town import DESIGN_FLOW_LS, EXPECTED_FLAGS, EXPECTED_FLOOD_STATES, PIPES, N, write_town
from scipy.optimize import brentq

from audit.pipeline import run

RHO_15C = 999.10  # kg/m3 at 15 C, to 5 figures (Tanaka et al. 2001, from memory)
G = 9.80665

def independent_hydraulics(diameter: float, slope: float, q: float) -> dict[str, float]:
    """Full-bore capacity, normal depth, velocity and shear of a circular pipe, by hand."""
    full_area, full_radius = np.pi * diameter**2 / 4, diameter / 4
    q_full = full_area * full_radius ** (2 / 3) * slope**0.5 / N

    def area(theta: float) -> float:
        return diameter**2 / 8 * (theta - np.sin(theta))

    def excess(theta: float) -> float:
        return area(theta) * (area(theta) / (diameter * theta / 2)) ** (2 / 3) * slope**0.5 / N - q

    theta_peak = 2 * np.arccos(1 - 2 * 0.9382)  # y/D of peak discharge (common practice, no source)
    if excess(theta_peak) < 0:
        return {"q_full": q_full, "depth_ratio": 1.0, "v_design": q / full_area, "shear": RHO_15C * G * full_radius * slope}
    theta = brentq(excess, 1e-9, theta_peak, xtol=1e-14)
    radius = area(theta) / (diameter * theta / 2)
    return {
        "q_full": q_full,
        "depth_ratio": (1 - np.cos(theta / 2)) / 2,
        "v_design": q / area(theta),
        "shear": RHO_15C * G * radius * slope,
    }


@pytest.mark.parametrize(("driver", "suffix"), [("GPKG", ".gpkg"), ("ESRI Shapefile", ".shp")])
def test_flags_and_numbers_match_an_independent_computation(tmp_path: Path, driver: str, suffix: str) -> None:
    result = run(write_town(tmp_path, driver, suffix))
    pipes = result.pipes.set_index("REF")
    for ref, _, _, diameter_mm, up_invert, down_invert in PIPES:
        row = pipes.loc[ref]
        length = float(shapely.length(row.geometry))
        slope = (up_invert - down_invert) / length
        assert row["slope"] == pytest.approx(slope, rel=1e-12)
        assert row["q_design"] == pytest.approx(DESIGN_FLOW_LS[ref] / 1000, rel=1e-12)
        assert set(filter(None, row["flags"].split(";"))) == EXPECTED_FLAGS[ref], ref
        if slope <= 0:
            assert np.isnan(row["q_full"])
            assert np.isnan(row["v_design"])
            assert row["hydraulic_status"] == "nonpositive_slope"
            continue
        expected = independent_hydraulics(diameter_mm / 1000, slope, DESIGN_FLOW_LS[ref] / 1000)
        if row["flow_regime"] in ("pressurised", "partly_pressurised"):
            # a pipe running full: shear from the friction slope at full bore, Sf = (Q n / (A R^(2/3)))^2 (Manning)
            d, q = diameter_mm / 1000, DESIGN_FLOW_LS[ref] / 1000
            friction_slope = (q * N / (np.pi * d**2 / 4 * (d / 4) ** (2 / 3))) ** 2
            expected["shear"] = RHO_15C * G * d / 4 * friction_slope
        for name, value in expected.items():
            tolerance = 1e-5 if name == "shear" else 1e-6  # the density above has 5 figures
            assert row[name] == pytest.approx(value, rel=tolerance), (ref, name)
        assert row["load_ratio"] == pytest.approx(DESIGN_FLOW_LS[ref] / 1000 / expected["q_full"], rel=1e-6)
    regimes = dict(zip(pipes.index, pipes["flow_regime"], strict=True))
    assert {ref for ref, regime in regimes.items() if regime in ("pressurised", "partly_pressurised")} == {"P1", "P2", "P3", "P5"}
    states = dict(zip(result.manholes["MH"], result.manholes["flood_state"], strict=True))
    assert states == EXPECTED_FLOOD_STATES
    assert pipes.loc["P3", "severity"] == "high"
    assert pipes.loc["P2", "severity"] == "high"
    assert pipes.loc["P1", "severity"] == "medium"  # backwater_surcharge only
    assert result.totals["outfalls"] == 1
    assert result.totals["pipes"] == 5
    # the reasons carry the numbers: P3's load ratio by hand
    p3 = independent_hydraulics(0.15, 0.04 / 40.0, 0.0355)
    assert f"load ratio {0.0355 / p3['q_full']:.2f}" in pipes.loc["P3", "reasons"]


def test_manholes_above_a_grade_line_break_are_never_called_safe(tmp_path: Path) -> None:
    # P4 (D -> E, the only way to the outfall) loses its size: the grade line must start at D as an assumed free
    # outfall, so every level above D is a lower bound. C still floods and A, B, F are still surcharged (at least),
    # but D, which would read below its soffit, is not evaluated; E has no evaluated pipe at all.
    config = write_town(tmp_path, "GPKG", ".gpkg")
    pipes = gpd.read_file(tmp_path / "pipes.gpkg")
    pipes["DIA"] = pipes["DIA"].astype(float).where(pipes["REF"] != "P4")
    pipes.to_file(tmp_path / "pipes.gpkg", driver="GPKG")
    result = run(config)
    states = dict(zip(result.manholes["MH"], result.manholes["flood_state"], strict=True))
    assert states == {**EXPECTED_FLOOD_STATES, "D": "not_evaluated", "E": "not_evaluated"}
    breaks = result.findings[result.findings["code"] == "grade_line_break"]
    assert breaks["feature"].tolist() == ["D"]


def test_every_input_feature_and_field_comes_back_unchanged(tmp_path: Path) -> None:
    config = write_town(tmp_path, "ESRI Shapefile", ".shp")
    original = gpd.read_file(tmp_path / "pipes.shp")
    result = run(config)
    assert len(result.pipes) == len(original)
    for column in original.columns:
        if column == "geometry":
            assert result.pipes.geometry.geom_equals_exact(original.geometry, tolerance=0).all()
        else:  # the same values, and an integer field stays an integer (nullable) field
            pd.testing.assert_series_equal(result.pipes[column], original[column], check_dtype=False)
            assert result.pipes[column].dtype.kind == original[column].dtype.kind, column
    assert result.pipes.crs == original.crs


def test_a_user_field_named_like_a_result_is_kept_and_the_result_renamed(tmp_path: Path) -> None:
    config = write_town(tmp_path, "GPKG", ".gpkg")
    pipes = gpd.read_file(tmp_path / "pipes.gpkg")
    pipes["Slope"] = "as surveyed"
    pipes["flags"] = 7
    pipes.to_file(tmp_path / "pipes.gpkg", driver="GPKG")
    result = run(config)
    assert result.pipes["Slope"].eq("as surveyed").all()
    assert result.pipes["flags"].eq(7).all()
    assert "audit_slope" in result.pipes.columns
    assert "audit_flags" in result.pipes.columns
    p2 = result.pipe_results.loc[result.pipes["REF"] == "P2"].iloc[0]
    assert p2["flags"] == "backwater_surcharge;reverse_grade"  # the flags of tests/_small_town.py, in the fixed order
    assert p2["slope"] < 0
    renamed = result.findings[result.findings["code"] == "field_renamed"]
    assert len(renamed) == 2
    assert renamed["message"].str.contains("audit_slope").any()


def test_every_configured_layer_file_counts_as_an_input(tmp_path: Path) -> None:
    config = write_town(tmp_path, "GPKG", ".gpkg")
    cells = gpd.GeoDataFrame({"CELL": ["c1"], "OUT": ["A"], "PEOPLE": [100]}, geometry=[shapely.box(-20, -20, 20, 20)], crs="EPSG:32630")
    cells.to_file(tmp_path / "cells.geojson", driver="GeoJSON")
    text = config.read_text(encoding="utf-8")
    text += '[catchments]\npath = "cells.geojson"\n[catchments.fields]\nid = "CELL"\ndrains_to = "OUT"\npopulation = "PEOPLE"\n'
    config.write_text(text, encoding="utf-8")
    result = run(config)
    assert {path.name for path in result.inputs} == {"pipes.gpkg", "manholes.gpkg", "cells.geojson"}


def test_the_default_self_cleansing_criterion_judges_the_full_bore_velocity(tmp_path: Path) -> None:
    # the same town with the default criterion: velocity flowing full >= 0.6 m/s (the 2 ft/s rule)
    config = write_town(tmp_path, "GPKG", ".gpkg")
    config.write_text(config.read_text(encoding="utf-8").replace('self_cleansing = "design_velocity"', ""), encoding="utf-8")
    result = run(config)
    pipes = result.pipe_results.set_index(result.pipes["REF"])
    # Manning flowing full, by hand: V = (1/n) (D/4)^(2/3) S^(1/2)
    for ref, diameter, up, down in [(p[0], p[3] / 1000, p[4], p[5]) for p in PIPES if p[0] in ("P1", "P3", "P5")]:
        slope = (up - down) / pipes.loc[ref, "length_m"]
        v_full = (1 / N) * (diameter / 4) ** (2 / 3) * slope**0.5
        assert pipes.loc[ref, "v_cleansing"] == pytest.approx(v_full, rel=1e-9)
        assert ("silting" in pipes.loc[ref, "flags"]) == (v_full < 0.6), ref
    # the 150 mm pipe at 0.1 % never cleanses itself (about 0.27 m/s full), whatever it carries
    assert "velocity 0.27 m/s < 0.60 m/s flowing full" in pipes.loc["P3", "reasons"]
    assert "silting" not in pipes.loc["P5", "flags"]  # 0.5 l/s is slow, but flowing full the pipe cleanses itself
