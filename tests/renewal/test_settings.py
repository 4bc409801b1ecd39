"""``[renewal]``: defaults, US customary keys, and every problem of the table reported at once."""

from pathlib import Path

import numpy as np
import pytest

from audit.errors import ConfigError, ConfigProblems
from audit.renewal import Bands, RenewalSettings, parse_renewal
from audit.units import SI, US, UnitSystem

INCH, FOOT = 0.0254, 0.3048  # exact (NIST SP 811, 2008, appendix B)


def parsed(table: object, units: UnitSystem = SI) -> RenewalSettings:
    check = ConfigProblems(Path("/data/town.toml"))
    settings = parse_renewal(check, table, units)
    check.raise_if_any()
    return settings


def test_an_absent_table_gives_the_defaults_and_a_us_output_the_inch_series() -> None:
    assert parsed({}) == RenewalSettings()
    assert parsed({}).sizes_m[:3] == (0.15, 0.225, 0.3)
    us = parsed({}, US)
    np.testing.assert_allclose(us.sizes_m[:4], [8 * INCH, 10 * INCH, 12 * INCH, 15 * INCH], rtol=1e-12)
    assert us.units is US
    assert us.costs == ()
    assert us.currency == ""


def test_us_customary_keys_are_held_in_si() -> None:
    settings = parsed({"sizes_in": [8, 12], "costs_per_ft": [[8, 100.0], [12, 150.0]], "buffer_ft": 10, "size_bands_in": [12, 24, 36, 60],
                       "depth_bands_ft": [5, 10, 16, 26], "currency": "USD"})  # fmt: skip
    np.testing.assert_allclose(settings.sizes_m, [0.2032, 0.3048], rtol=1e-12)
    # a cost per ft over the 0.3048 m of a foot: 100 USD/ft is 328.08 USD/m
    np.testing.assert_allclose(np.array(settings.costs), [[0.2032, 100 / FOOT], [0.3048, 150 / FOOT]], rtol=1e-12)
    assert settings.buffer_m == pytest.approx(3.048, rel=1e-12)
    np.testing.assert_allclose(settings.size_bands.edges, [0.3048, 0.6096, 0.9144, 1.524], rtol=1e-12)
    np.testing.assert_allclose(settings.depth_bands.edges, [1.524, 3.048, 4.8768, 7.9248], rtol=1e-12)
    assert settings.currency == "USD"


def test_the_optional_inputs_resolve_against_the_config_folder() -> None:
    settings = parsed({
        "condition": {"path": "cctv.csv", "fields": {"pipe_id": "ASSET", "structural": "SRM"}},
        "critical_areas": [{"name": "railway", "path": "areas.gpkg", "layer": "rail", "consequence": 5, "buffer_m": 12.5},
                           {"name": "school", "path": "areas.gpkg", "layer": "schools", "consequence": 3}],
    })  # fmt: skip
    assert settings.condition is not None
    assert settings.condition.path == Path("/data/cctv.csv")
    assert dict(settings.condition.fields) == {"pipe_id": "ASSET", "structural": "SRM"}
    assert [(area.name, area.consequence, area.buffer_m, area.layer) for area in settings.critical_areas] == [
        ("railway", 5, 12.5, "rail"), ("school", 3, None, "schools")]  # fmt: skip


def test_every_problem_of_the_table_is_reported_at_once() -> None:
    table = {
        "sizes_mm": [300, 225],
        "sizes_in": [8],
        "design_depth_ratio": 1.5,
        "grade_limit": 7,
        "likelihood_weights": {"age": 2.0, "colour": 1},
        "load_ratio_bands": [0.5, 0.8, 1.0],
        "costs_per_m": [[300, -1]],
        "service_life_years": {"brick": 0},
        "assessment_year": 1492,
        "condition": {"path": "c.csv", "fields": {"service": "OPS"}},
        "critical_areas": [{"name": "rail", "path": "a.gpkg", "consequence": 6}, {"path": "a.gpkg", "consequence": 2},
                           {"name": "rail", "path": "b.gpkg", "consequence": 4}],
        "budget": 1e6,
    }  # fmt: skip
    with pytest.raises(ConfigError) as raised:
        parsed(table)
    message = str(raised.value)
    for expected in (
        "renewal.budget: unknown key",
        "renewal.sizes_in: expected one of renewal.sizes_mm and renewal.sizes_in, not both",
        "renewal.design_depth_ratio: expected a depth / diameter ratio above 0 and at most 1, got 1.5",
        "renewal.grade_limit: expected a grade from 1 to 5, got 7",
        "renewal.likelihood_weights.age: expected a weight from 0 to 1",
        "renewal.likelihood_weights.colour: unknown key",
        "renewal.load_ratio_bands: expected an array of 4 numbers > 0 in ascending order",
        "renewal.costs_per_m: expected an array of [size mm, cost per m] rows of numbers >= 0",
        "renewal.service_life_years.brick: expected a number of years > 0, got 0",
        "renewal.assessment_year: expected a whole year from 1800 to 2200, got 1492",
        "renewal.condition.fields.pipe_id: expected the field that holds the pipe id (required)",
        "renewal.critical_areas[0].consequence: expected a whole number from 1 to 5 (required), got 6",
        "renewal.critical_areas[1].name: expected a name for the layer",
        "renewal.critical_areas: expected a different name for each layer; 'rail' is used more than once",
    ):
        assert expected in message, expected


def test_sizes_given_in_one_key_must_ascend() -> None:
    with pytest.raises(ConfigError, match=r"renewal.sizes_mm: expected an array of numbers > 0 in ascending order, got \[300, 225\]"):
        parsed({"sizes_mm": [300, 225]})


def test_bands_put_a_value_on_an_edge_in_the_band_above() -> None:
    bands = Bands((0.5, 0.8, 1.0, 1.5))
    assert bands.score(np.array([0.0, 0.4999, 0.5, 0.8, 0.99, 1.0, 1.5, 40.0])).tolist() == [1, 1, 2, 3, 3, 4, 5, 5]


def test_service_life_by_material_ignores_case_and_takes_other_for_the_rest() -> None:
    settings = parsed({"service_life_years": {"Pitch Fibre": 35, "other": 70}})
    lives = settings.service_life(np.array(["BRICK ", "pitch fibre", "bamboo", None, "PVC"], dtype=object))
    # defaults (from memory): brick 100 years, PVC 80; the table's own values otherwise
    assert lives.tolist() == [100.0, 35.0, 70.0, 70.0, 80.0]
