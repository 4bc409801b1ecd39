"""Unit factors against their exact definitions (pint is not installed in the test environment)."""

import numpy as np
import pytest

from audit.errors import ConfigError
from audit.units import FLOW_FACTORS, LENGTH_FACTORS, factor, to_si

# Source: NIST Special Publication 811 (2008), appendix B: 1 ft = 0.3048 m and 1 in = 0.0254 m
# exactly; 1 US gallon = 231 in^3 = 3.785 411 784 L exactly.
FOOT = 0.3048
INCH = 0.0254
GALLON_L = 3.785411784


@pytest.mark.parametrize(
    ("unit", "metres"),
    [("m", 1.0), ("mm", 0.001), ("ft", FOOT), ("in", INCH)],
)
def test_length_factors_match_definitions(unit: str, metres: float) -> None:
    assert LENGTH_FACTORS[unit] == pytest.approx(metres, rel=1e-15)


@pytest.mark.parametrize(
    ("unit", "cubic_metres_per_second"),
    [
        ("m3/s", 1.0),
        ("l/s", 0.001),
        # Source: NIST SP 811 (2008), appendix B.9: cubic foot per second = 2.831 685 E-02 m3/s (from memory)
        ("cfs", 2.831685e-2),
        # Source: NIST SP 811 (2008), appendix B.9: gallon (U.S.) per minute = 6.309 020 E-05 m3/s (from memory)
        ("gpm", 6.309020e-5),
        # one million US gallons per day: 3 785 411.784 L / 86 400 s, written out by hand
        ("mgd", 0.0438126364),
    ],
)
def test_flow_factors_match_definitions(unit: str, cubic_metres_per_second: float) -> None:
    assert FLOW_FACTORS[unit] == pytest.approx(cubic_metres_per_second, rel=1e-6)


def test_cubic_foot_is_the_cube_of_the_foot_exactly() -> None:
    # 0.3048^3 = 0.028316846592 exactly (hand multiplication of the NIST SP 811 definition)
    assert FLOW_FACTORS["cfs"] == pytest.approx(0.028316846592, rel=1e-14)


def test_gallon_definition_is_231_cubic_inches() -> None:
    # Source: NIST SP 811 (2008), appendix B: the US gallon is 231 in^3
    assert pytest.approx(GALLON_L, rel=1e-12) == 231 * INCH**3 * 1000
    assert FLOW_FACTORS["gpm"] * 60 * 1000 == pytest.approx(GALLON_L, rel=1e-12)


def test_to_si_converts_arrays_and_keeps_nan() -> None:
    result = to_si(np.array([150.0, np.nan, 600.0]), "mm", quantity="length")
    np.testing.assert_allclose(result, [0.15, np.nan, 0.6])


def test_unit_names_ignore_case_and_spaces() -> None:
    assert factor(" MGD", quantity="flow") == FLOW_FACTORS["mgd"]
    assert factor("L/s", quantity="flow") == 0.001


def test_unknown_unit_names_the_accepted_ones() -> None:
    with pytest.raises(ConfigError, match=r"'cm'.*m, mm, ft, in"):
        factor("cm", quantity="length")


def test_flow_unit_is_not_a_length_unit() -> None:
    with pytest.raises(ConfigError, match="unknown length unit 'cfs'"):
        to_si([1.0], "cfs", quantity="length")


def test_unknown_quantity_is_refused() -> None:
    with pytest.raises(ConfigError, match="unknown quantity 'mass'"):
        factor("kg", quantity="mass")
