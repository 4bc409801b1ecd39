"""``[flows]`` and ``[flows.rainfall]``: how design flows are built, parsed once at config load.

Every bad value is reported through the config checker naming the dotted key, so a misspelt
peaking method or a rainfall curve without its coefficients fails when the file is loaded, not
half way through an audit. Defaults and their sources are in docs/config.md.
"""

from __future__ import annotations

import itertools
from dataclasses import dataclass
from typing import Any

from audit.errors import ConfigProblems

FLOW_KINDS = ("given", "sanitary", "storm", "combined")
PEAKING_METHODS = ("harmon", "babbitt", "constant")
STORM_KINDS = frozenset({"storm", "combined"})
SANITARY_KINDS = frozenset({"sanitary", "combined"})


@dataclass(frozen=True)
class Rainfall:
    """``[flows.rainfall]``: the intensity-duration curve and the inlet time.

    Either the coefficients of :math:`i = a / (t + b)^c` (i [mm/h], t [min]) or ``table``, rows
    of (duration [min], intensity [mm/h]) with durations increasing, interpolated log-log.
    """

    a: float | None = None
    b: float = 0.0
    c: float = 1.0
    table: tuple[tuple[float, float], ...] = ()
    inlet_time_min: float = 10.0  # common practice, no source (5 to 15 min is usual)
    return_period_years: float | None = None  # the design storm's, recorded in every output


@dataclass(frozen=True)
class FlowOptions:
    """``[flows]``: the kind of sewer and the loads that make its design flow."""

    kind: str = "given"
    per_capita_l_day: float = 200.0  # common practice, no source (150 to 400 l/person/day)
    peaking: str = "harmon"
    peaking_factor: float = 3.0  # for peaking = "constant"; common practice, no source
    peaking_table: tuple[tuple[float, float], ...] = ()  # rows (population, factor)
    min_peaking_population: float = 1000.0  # Harmon and Babbitt are used from 1000 persons up; from memory
    occupancy: float = 2.4  # persons per dwelling where no occupancy field is mapped; common practice, no source
    infiltration_l_s_km: float = 0.0
    infiltration_l_s_ha: float = 0.0
    population_growth: float = 1.0  # future population over today's: the sanitary flows grow with it
    rainfall_uplift: float = 1.0  # factor on every rainfall intensity (a climate-change allowance)
    urban_creep: float = 0.0  # added share of impervious area (0.1: a tenth more paving and roofs)
    c_impervious: float = 0.9  # runoff coefficient of paved and roofed area; common practice, no source
    c_pervious: float = 0.2  # runoff coefficient of grass and gardens; common practice, no source
    fallback_velocity_m_s: float = 1.0  # travel velocity where a pipe's own cannot be computed; common practice, no source
    tc_tolerance_min: float = 0.01
    tc_max_iterations: int = 50
    rainfall: Rainfall | None = None
    # assumed loads for a rough screen of a register without load fields (0: none)
    persons_per_manhole: float = 0.0  # persons at every manhole
    persons_per_km: float = 0.0  # persons per km of sewer, placed at each pipe's upstream node
    load_per_manhole_l_s: float = 0.0  # a point load at every manhole [l/s]

    @property
    def needs_rainfall(self) -> bool:
        """True for storm and combined sewers."""
        return self.kind in STORM_KINDS

    @property
    def builds_sanitary(self) -> bool:
        """True for sanitary and combined sewers."""
        return self.kind in SANITARY_KINDS


_NUMBERS = ("per_capita_l_day", "peaking_factor", "min_peaking_population", "occupancy", "infiltration_l_s_km",
            "infiltration_l_s_ha", "population_growth", "rainfall_uplift", "urban_creep", "c_impervious", "c_pervious", "fallback_velocity_m_s",
            "tc_tolerance_min", "persons_per_manhole", "persons_per_km", "load_per_manhole_l_s")  # fmt: skip
_KEYS = ("kind", "peaking", "tc_max_iterations", "rainfall", *_NUMBERS)
_POSITIVE = frozenset({"population_growth", "rainfall_uplift", "fallback_velocity_m_s", "tc_tolerance_min", "occupancy"})
# US customary spellings of the keys with a unit: (SI key, SI units per US unit). Exact factors:
# 1 US gallon = 3.785411784 l, 1 mile = 1.609344 km, 1 acre = 0.40468564224 ha, 1 ft = 0.3048 m
# (NIST SP 811, 2008, appendix B); a day is 86,400 s.
_GALLON_L, _MILE_KM, _ACRE_HA, _DAY_S = 3.785411784, 1.609344, 0.40468564224, 86_400.0
US_KEYS: dict[str, tuple[str, float]] = {
    "per_capita_gal_day": ("per_capita_l_day", _GALLON_L),
    "infiltration_gal_day_mile": ("infiltration_l_s_km", _GALLON_L / _DAY_S / _MILE_KM),
    "infiltration_gal_day_acre": ("infiltration_l_s_ha", _GALLON_L / _DAY_S / _ACRE_HA),
    "load_per_manhole_gpm": ("load_per_manhole_l_s", _GALLON_L / 60.0),
    "persons_per_mile": ("persons_per_km", 1.0 / _MILE_KM),
    "fallback_velocity_ft_s": ("fallback_velocity_m_s", 0.3048),
}
"""``[flows]`` keys in US customary units: each stands for its SI key, converted at load."""
INTENSITY_UNITS = {"mm/h": 1.0, "in/h": 25.4}
"""``[flows.rainfall] intensity_unit``: millimetres per unit of the curve's intensities."""
_REPLACED = {"growth_factor": "population_growth (sanitary), rainfall_uplift (storm intensity) and urban_creep (impervious area)"}
_FRACTIONS = frozenset({"c_impervious", "c_pervious"})


def _rows(check: ConfigProblems, value: object, key: str) -> tuple[tuple[float, float], ...]:
    """Rows of two positive numbers, the first strictly increasing; () after a reported problem."""
    ok = isinstance(value, list) and len(value) >= 2 and all(
        isinstance(row, list) and len(row) == 2 and all(isinstance(v, int | float) and not isinstance(v, bool) and v > 0 for v in row)
        for row in value
    )
    rows = tuple((float(row[0]), float(row[1])) for row in value) if ok and isinstance(value, list) else ()
    if not ok or any(later[0] <= earlier[0] for earlier, later in itertools.pairwise(rows)):
        check.fail(key, "an array of at least two [x, value] rows of positive numbers, x increasing", value)
        return ()
    return rows


def _rainfall(check: ConfigProblems, data: object) -> Rainfall:
    table = check.table(data, "flows.rainfall", ("a", "b", "c", "table", "inlet_time_min", "return_period_years", "intensity_unit"))
    scale = INTENSITY_UNITS[check.choice(table, "intensity_unit", "flows.rainfall", tuple(INTENSITY_UNITS))]
    defaults = Rainfall()
    rows = _rows(check, table["table"], "flows.rainfall.table") if "table" in table else ()
    rows = tuple((duration, intensity * scale) for duration, intensity in rows)
    has_curve = "a" in table
    if has_curve == ("table" in table):
        check.fail("flows.rainfall", "either a (with b and c) for i = a / (t + b)^c, or table, not both")
    a = check.number(table, "a", "flows.rainfall", 1.0, low=1e-9) * scale if has_curve else None
    return Rainfall(
        a=a,
        b=check.number(table, "b", "flows.rainfall", defaults.b),
        c=check.number(table, "c", "flows.rainfall", defaults.c, low=1e-9),
        table=rows,
        inlet_time_min=check.number(table, "inlet_time_min", "flows.rainfall", defaults.inlet_time_min, low=1e-9),
        return_period_years=check.number(table, "return_period_years", "flows.rainfall", 1.0, low=1e-9) if "return_period_years" in table else None,
    )


def _peaking(check: ConfigProblems, table: dict[str, Any]) -> tuple[str, tuple[tuple[float, float], ...]]:
    value = table.get("peaking", FlowOptions.peaking)
    if isinstance(value, list):
        return "table", _rows(check, value, "flows.peaking")
    if value not in PEAKING_METHODS:
        check.fail("flows.peaking", "one of " + ", ".join(repr(m) for m in PEAKING_METHODS) + " or a table of [population, factor] rows", value)
        return FlowOptions.peaking, ()
    return str(value), ()


def _number(check: ConfigProblems, table: dict[str, Any], name: str) -> float:
    default = float(getattr(FlowOptions, name))
    low = 1e-9 if name in _POSITIVE else 0.0
    value = check.number(table, name, "flows", default, low=low)
    if name in _FRACTIONS and value > 1.0:
        check.fail(f"flows.{name}", "a runoff coefficient from 0 to 1", value)
        return default
    return value


def _in_si(check: ConfigProblems, table: dict[str, Any]) -> dict[str, Any]:
    """The table with every US key replaced by its SI key and value (a key given both ways is a problem)."""
    out = dict(table)
    for us_key, (si_key, factor) in US_KEYS.items():
        if us_key not in out:
            continue
        value = out.pop(us_key)
        if si_key in table:
            check.fail(f"flows.{us_key}", f"one of flows.{si_key} and flows.{us_key}, not both")
        elif isinstance(value, bool) or not isinstance(value, int | float):
            check.fail(f"flows.{us_key}", "a number", value)
        else:
            out[si_key] = value * factor
    return out


def parse_flows(check: ConfigProblems, data: object) -> FlowOptions:
    """``[flows]`` as :class:`FlowOptions`; every problem goes to ``check`` under its dotted key."""
    table = check.table(data, "flows", _KEYS + tuple(_REPLACED) + tuple(US_KEYS))
    table = _in_si(check, table)
    for old, new in _REPLACED.items():
        if old in table:
            check.fail(f"flows.{old}", f"no longer a key: it is replaced by {new}")
    kind = check.choice(table, "kind", "flows", FLOW_KINDS)
    peaking, peaking_table = _peaking(check, table)
    iterations = table.get("tc_max_iterations", FlowOptions.tc_max_iterations)
    if isinstance(iterations, bool) or not isinstance(iterations, int) or iterations < 1:
        check.fail("flows.tc_max_iterations", "a whole number >= 1", iterations)
        iterations = FlowOptions.tc_max_iterations
    rainfall = _rainfall(check, table["rainfall"]) if "rainfall" in table else None
    if kind in STORM_KINDS and rainfall is None:
        check.fail("flows.rainfall", f"a rainfall table for kind = {kind!r} (a, b, c or table; inlet_time_min)")
    numbers = {name: _number(check, table, name) for name in _NUMBERS}
    return FlowOptions(kind=kind, peaking=peaking, peaking_table=peaking_table, tc_max_iterations=int(iterations),
                       rainfall=rainfall, **numbers)
