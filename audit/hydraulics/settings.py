"""``[hydraulics]``: the friction formula, its default roughness and the water temperature."""

from __future__ import annotations

from dataclasses import dataclass

from audit.errors import ConfigProblems

FORMULAS = ("manning", "colebrook-white")


@dataclass(frozen=True)
class HydraulicsOptions:
    """``[hydraulics]``: the friction formula and its default roughness."""

    formula: str = "manning"
    manning_n: float = 0.013
    ks_mm: float = 1.5
    water_temp_c: float = 15.0


def parse_hydraulics(check: ConfigProblems, data: object) -> HydraulicsOptions:
    """``[hydraulics]`` as :class:`HydraulicsOptions`; every problem goes to ``check``."""
    table = check.table(data, "hydraulics", tuple(HydraulicsOptions.__dataclass_fields__))
    defaults = HydraulicsOptions()
    temperature = check.number(table, "water_temp_c", "hydraulics", defaults.water_temp_c)
    if temperature >= 100.0:
        check.fail("hydraulics.water_temp_c", "a water temperature from 0 to below 100 [degC]", temperature)
        temperature = defaults.water_temp_c
    return HydraulicsOptions(
        formula=check.choice(table, "formula", "hydraulics", FORMULAS),
        manning_n=check.number(table, "manning_n", "hydraulics", defaults.manning_n, low=1e-6),
        ks_mm=check.number(table, "ks_mm", "hydraulics", defaults.ks_mm),
        water_temp_c=temperature,
    )
