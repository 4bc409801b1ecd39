"""Built design flows against the published relations, on a small network written here.

The network is four manholes and an outfall in a Y: heads A and B join at C, which drains
through D to the outfall O. Each of A, B and C has a square catchment of exactly 1 ha whose
people and runoff coefficient the test sets, so every expected flow below is worked out by hand
from the published formula, not taken from the audit.
"""

from __future__ import annotations

from pathlib import Path

import geopandas as gpd
import numpy as np
import pandas as pd
import pytest
import shapely

import audit

# manholes: id, x [m], rim [m]; pipes: id, from, to, upstream invert, downstream invert [m]
MANHOLES = (("A", 0.0, 20.0), ("B", 0.0, 20.0), ("C", 200.0, 19.0), ("D", 400.0, 18.0), ("O", 600.0, 17.0))
NORTHING = {"A": 100.0, "B": -100.0}
PIPES = (("AC", "A", "C", 18.0, 17.0), ("BC", "B", "C", 18.0, 17.0), ("CD", "C", "D", 16.9, 15.9), ("DO", "D", "O", 15.8, 14.8))
DIAMETER_MM = 1200  # large enough that no flow here surcharges
SIDE_M = 100.0  # each catchment is a 100 m square: 1 ha


def _write_network(folder: Path, *, people: dict[str, float], runoff: dict[str, float], flows: str) -> Path:
    """Pipes, manholes and catchments as a GeoPackage, and a config with the given [flows] text."""
    xy = {name: (x, NORTHING.get(name, 0.0)) for name, x, _ in MANHOLES}
    manholes = gpd.GeoDataFrame({"node": [m[0] for m in MANHOLES], "rim_m": [m[2] for m in MANHOLES]},
                                geometry=[shapely.Point(xy[m[0]]) for m in MANHOLES], crs="EPSG:32630")  # fmt: skip
    pipes = gpd.GeoDataFrame(
        {"ref": [p[0] for p in PIPES], "up": [p[1] for p in PIPES], "down": [p[2] for p in PIPES],
         "dia": [DIAMETER_MM] * len(PIPES), "il_up": [p[3] for p in PIPES], "il_down": [p[4] for p in PIPES]},
        geometry=[shapely.LineString([xy[p[1]], xy[p[2]]]) for p in PIPES], crs="EPSG:32630",
    )  # fmt: skip
    names = sorted(people)
    squares = [shapely.box(xy[n][0] - SIDE_M, xy[n][1], xy[n][0], xy[n][1] + SIDE_M) for n in names]
    catchments = gpd.GeoDataFrame({"cid": names, "outlet": names, "persons": [people[n] for n in names],
                                   "c": [runoff[n] for n in names]}, geometry=squares, crs="EPSG:32630")  # fmt: skip
    data = folder / "ytown.gpkg"
    for name, layer in (("pipes", pipes), ("manholes", manholes), ("catchments", catchments)):
        layer.to_file(data, layer=name, driver="GPKG")
    config = folder / "ytown.toml"
    config.write_text(f"""
[pipes]
path = "ytown.gpkg"
layer = "pipes"
[pipes.fields]
id = "ref"
from_node = "up"
to_node = "down"
diameter = "dia"
upstream_invert = "il_up"
downstream_invert = "il_down"
[manholes]
path = "ytown.gpkg"
layer = "manholes"
[manholes.fields]
id = "node"
rim = "rim_m"
[catchments]
path = "ytown.gpkg"
layer = "catchments"
[catchments.fields]
id = "cid"
drains_to = "outlet"
population = "persons"
runoff_coefficient = "c"
[hydraulics]
formula = "manning"
manning_n = 0.013
[flows]
{flows}
""", encoding="utf-8")  # fmt: skip
    return config


def _by_pipe(config: Path) -> pd.DataFrame:
    result = audit.run(config)
    table = result.pipe_results.copy()
    table.index = result.pipes["ref"].to_numpy()
    return table


def _mean_m3s(persons: float, per_capita_l_day: float) -> float:
    return persons * per_capita_l_day / 1000 / 86_400


def test_harmon_at_published_points_and_the_peak_of_the_sum(tmp_path: Path) -> None:
    people = {"A": 1000.0, "B": 8000.0, "C": 7000.0}  # AC serves 1000, BC 8000, CD and DO 16,000
    config = _write_network(tmp_path, people=people, runoff=dict.fromkeys(people, 0.5),
                            flows='kind = "sanitary"\nper_capita_l_day = 200\npeaking = "harmon"')  # fmt: skip
    flows = _by_pipe(config)
    # Harmon PF = 1 + 14 / (4 + sqrt(P / 1000)): 3.8 at 1000 persons, 2.75 at 16,000 (sqrt = 4),
    # and at 8000: 1 + 14 / (4 + 2.828427) = 3.050253  # Source: Metcalf & Eddy, Wastewater Engineering (from memory)
    factor = {"AC": 3.8, "BC": 3.050253, "CD": 2.75, "DO": 2.75}
    served = {"AC": 1000.0, "BC": 8000.0, "CD": 16_000.0, "DO": 16_000.0}
    for pipe, pf in factor.items():
        assert flows.loc[pipe, "population_served"] == served[pipe]
        assert flows.loc[pipe, "q_sanitary"] == pytest.approx(pf * _mean_m3s(served[pipe], 200.0), rel=1e-6)
    # the peak of the sum: a larger population peaks less, so CD carries less than its parts' peaks
    parts = flows.loc["AC", "q_sanitary"] + flows.loc["BC", "q_sanitary"] + 3.8 * _mean_m3s(7000.0, 200.0)
    assert flows.loc["CD", "q_sanitary"] < parts
    assert (flows["q_storm"].fillna(0) == 0).all()
    assert (flows["q_infiltration"] == 0).all()


def test_babbitt_at_published_points(tmp_path: Path) -> None:
    people = {"A": 1000.0, "B": 31_000.0, "C": 0.0}  # AC 1000 persons, CD 32,000
    config = _write_network(tmp_path, people=people, runoff=dict.fromkeys(people, 0.5),
                            flows='kind = "sanitary"\nper_capita_l_day = 250\npeaking = "babbitt"')  # fmt: skip
    flows = _by_pipe(config)
    # Babbitt PF = 5 / (P / 1000)^0.2: 5.0 at 1000 persons, 2.5 at 32,000 (32^0.2 = 2)
    # Source: Metcalf & Eddy, Wastewater Engineering (from memory)
    assert flows.loc["AC", "q_sanitary"] == pytest.approx(5.0 * _mean_m3s(1000.0, 250.0), rel=1e-9)
    assert flows.loc["CD", "q_sanitary"] == pytest.approx(2.5 * _mean_m3s(32_000.0, 250.0), rel=1e-9)


def test_infiltration_per_km_of_sewer_upstream(tmp_path: Path) -> None:
    people = {"A": 100.0, "B": 100.0, "C": 100.0}
    config = _write_network(tmp_path, people=people, runoff=dict.fromkeys(people, 0.5),
                            flows='kind = "sanitary"\npeaking = "constant"\npeaking_factor = 2.0\ninfiltration_l_s_km = 0.5')  # fmt: skip
    flows = _by_pipe(config)
    # AC: its own 223.6 m (hypot(200, 100)); CD: AC + BC + its own 200 m; 0.5 l/s per km
    km = {"AC": np.hypot(200, 100) / 1000, "CD": (2 * np.hypot(200, 100) + 200) / 1000, "DO": (2 * np.hypot(200, 100) + 400) / 1000}
    for pipe, length_km in km.items():
        assert flows.loc[pipe, "q_infiltration"] == pytest.approx(0.5e-3 * length_km, rel=1e-6)
    assert flows.loc["CD", "q_sanitary"] == pytest.approx(2.0 * _mean_m3s(300.0, 200.0), rel=1e-9)


def test_rational_method_conversion_at_a_constant_intensity(tmp_path: Path) -> None:
    runoff = {"A": 0.8, "B": 0.4, "C": 0.6}
    flat_curve = "[flows.rainfall]\ntable = [[1, 36], [1000, 36]]\ninlet_time_min = 5"  # 36 mm/h at every duration
    config = _write_network(tmp_path, people=dict.fromkeys(runoff, 0.0), runoff=runoff, flows=f'kind = "storm"\n{flat_curve}')
    flows = _by_pipe(config)
    # Q = C i A: 36 mm/h on 1 ha is 10,000 m2 x 0.036 m / 3600 s = 0.1 m3/s (rational method, SI units by hand)
    # Source: FHWA HEC-22, Urban Drainage Design Manual (2009), ch. 3 (from memory)
    per_ha = 10_000 * 0.036 / 3600
    assert flows.loc["AC", "q_storm"] == pytest.approx(0.8 * per_ha, rel=1e-9)
    assert flows.loc["BC", "q_storm"] == pytest.approx(0.4 * per_ha, rel=1e-9)
    assert flows.loc["DO", "q_storm"] == pytest.approx((0.8 + 0.4 + 0.6) * per_ha, rel=1e-9)
    assert flows.loc["DO", "area_served_ha"] == pytest.approx(3.0, rel=1e-9)


def test_time_of_concentration_grows_by_the_travel_time(tmp_path: Path) -> None:
    runoff = {"A": 0.8, "B": 0.4, "C": 0.6}
    curve = "[flows.rainfall]\na = 1000.0\nb = 5.0\nc = 1.0\ninlet_time_min = 5"  # invented: i = 1000 / (t + 5)
    config = _write_network(tmp_path, people=dict.fromkeys(runoff, 0.0), runoff=runoff, flows=f'kind = "storm"\n{curve}')
    flows = _by_pipe(config)
    # tc = inlet time at the heads, then the longest arrival: tc(down) = tc(up) + L / (60 V)
    # Source: FHWA HEC-22, Urban Drainage Design Manual (2009), ch. 7 (from memory)
    assert flows.loc["AC", "tc_min"] == pytest.approx(5.0)
    assert flows.loc["BC", "tc_min"] == pytest.approx(5.0)
    travel = flows["length_m"] / (60 * flows["v_design"])
    arrive_c = max(5.0 + travel["AC"], 5.0 + travel["BC"])
    assert flows.loc["CD", "tc_min"] == pytest.approx(arrive_c, abs=0.02)
    assert flows.loc["DO", "tc_min"] == pytest.approx(arrive_c + travel["CD"], abs=0.02)
    # the intensity falls as tc grows: Q / sum(C A) = i / 360 with i = 1000 / (tc + 5)
    for pipe, runoff_area in (("AC", 0.8), ("CD", 1.8), ("DO", 1.8)):
        intensity = 1000.0 / (flows.loc[pipe, "tc_min"] + 5.0)
        assert flows.loc[pipe, "q_storm"] == pytest.approx(runoff_area * intensity / 360, rel=1e-9)
    assert flows.loc["DO", "q_storm"] < flows.loc["CD", "q_storm"]
