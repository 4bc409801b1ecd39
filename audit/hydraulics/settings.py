"""``[hydraulics]``: the friction formula, its default roughness and the water temperature.

The water temperature is limited to the range of the water-property correlations in
:mod:`audit.hydraulics.friction`: the density of Tanaka et al. (2001) is stated for 0 to 40 C,
and the viscosity correlation of Kestin et al. (1978) stays within 0.1 % of IAPWS there but
drifts to about 3 % low near 100 C (tests/reference/test_water_properties.py).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

from audit.errors import ConfigProblems

FORMULAS = ("manning", "colebrook-white")

WATER_TEMPERATURE_RANGE_C = (0.0, 40.0)
"""Accepted ``water_temp_c`` [degC]: where the density and viscosity correlations hold."""


@dataclass(frozen=True)
class HydraulicsOptions:
    """``[hydraulics]``: the friction formula, its default roughness and the water temperature.

    ``manning_n`` [s/m^(1/3)] > 0; ``ks_mm`` [mm] >= 0 (0 is a hydraulically smooth wall);
    ``water_temp_c`` [degC] from 0 to 40.
    """

    formula: str = "manning"
    manning_n: float = 0.013
    ks_mm: float = 1.5
    water_temp_c: float = 15.0


def parse_hydraulics(check: ConfigProblems, data: object) -> HydraulicsOptions:
    """``[hydraulics]`` as :class:`HydraulicsOptions`; every problem goes to ``check``."""
    table = check.table(data, "hydraulics", tuple(HydraulicsOptions.__dataclass_fields__))
    defaults = HydraulicsOptions()
    low, high = WATER_TEMPERATURE_RANGE_C
    temperature = check.number(table, "water_temp_c", "hydraulics", defaults.water_temp_c)
    if not low <= temperature <= high:
        check.fail(
            "hydraulics.water_temp_c",
            f"a water temperature from {low:g} to {high:g} [degC], the range of the water density "
            "(Tanaka et al. 2001) and viscosity (Kestin et al. 1978) correlations",
            temperature,
        )
        temperature = defaults.water_temp_c
    return HydraulicsOptions(
        formula=check.choice(table, "formula", "hydraulics", FORMULAS),
        manning_n=_finite(check, table, "manning_n", defaults.manning_n, low=1e-6),
        ks_mm=_finite(check, table, "ks_mm", defaults.ks_mm, low=0.0),
        water_temp_c=temperature,
    )


def _finite(check: ConfigProblems, table: dict[str, Any], name: str, default: float, *, low: float) -> float:
    """A finite number ``>= low`` at ``[hydraulics] name``, else ``default`` after a reported problem."""
    value = check.number(table, name, "hydraulics", default, low=low)
    if not math.isfinite(value):
        check.fail(f"hydraulics.{name}", f"a finite number >= {low:g}", value)
        return default
    return value
