"""``[hydraulics]``: what is accepted, and what is refused naming the key."""

from pathlib import Path

import pytest

from audit.errors import ConfigProblems
from audit.hydraulics.settings import HydraulicsOptions, parse_hydraulics


def parsed(table: dict[str, object]) -> tuple[HydraulicsOptions, list[str]]:
    check = ConfigProblems(Path("town.toml"))
    return parse_hydraulics(check, table), check.problems


@pytest.mark.parametrize("temperature", [0, 4.5, 40])
def test_water_temperatures_of_the_correlations_range_are_accepted(temperature: float) -> None:
    options, problems = parsed({"water_temp_c": temperature})
    assert problems == []
    assert options.water_temp_c == temperature


@pytest.mark.parametrize("temperature", [40.5, 60, 120, float("nan"), float("inf")])
def test_water_temperatures_beyond_the_correlations_are_refused_naming_key_and_range(temperature: float) -> None:
    # The density (Tanaka et al. 2001) and viscosity (Kestin et al. 1978) correlations hold for
    # 0 to 40 C: tests/reference/test_water_properties.py.
    options, problems = parsed({"water_temp_c": temperature})
    assert len(problems) == 1
    assert problems[0].startswith("hydraulics.water_temp_c: expected a water temperature from 0 to 40 [degC]")
    assert "Kestin" in problems[0]
    assert options.water_temp_c == 15.0


def test_a_smooth_wall_is_accepted_for_colebrook_white() -> None:
    options, problems = parsed({"formula": "colebrook-white", "ks_mm": 0})
    assert problems == []
    assert options.ks_mm == 0.0


@pytest.mark.parametrize(("key", "value", "expected"), [
    ("manning_n", 0.0, "hydraulics.manning_n: expected a number >= 1e-06, got 0.0"),
    ("manning_n", float("inf"), "hydraulics.manning_n: expected a finite number >= 1e-06, got inf"),
    ("ks_mm", float("nan"), "hydraulics.ks_mm: expected a finite number >= 0, got nan"),
    ("ks_mm", -0.1, "hydraulics.ks_mm: expected a number >= 0, got -0.1"),
])  # fmt: skip
def test_roughness_must_be_a_finite_number(key: str, value: float, expected: str) -> None:
    options, problems = parsed({key: value})
    assert problems == [expected]
    assert getattr(options, key) == getattr(HydraulicsOptions(), key)
