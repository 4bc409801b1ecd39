"""``[renewal]``: sizes, costs, service lives, scoring bands and weights, and the optional inputs.

Parsed once at config load through :class:`~audit.errors.ConfigProblems`, so every bad value of
the table is reported at once under its dotted key. Every key with a unit names it at its end
and may be given in SI or in US customary units (one key of a pair; both is a problem): sizes in
mm or in, lengths in m or ft, costs per m or per ft. Values are held in SI inside (1 in =
25.4 mm, 1 ft = 0.3048 m; NIST SP 811, 2008, appendix B). docs/renewal.md lists every key.

    [renewal]
    sizes_mm = [225, 300, 375, 450, 525, 600]   # or sizes_in = [8, 10, 12, ...]
    design_depth_ratio = 0.8
    grade_limit = 4
    currency = "EUR"
    costs_per_m = [[225, 310.0], [300, 360.0]]  # rows [size mm, cost per m]; or costs_per_ft
    buffer_m = 5.0                               # or buffer_ft

    [renewal.service_life_years]
    brick = 100
    other = 80

    [renewal.condition]
    path = "cctv.csv"
    fields = { pipe_id = "ASSET", structural = "SRM", service = "OPS" }

    [[renewal.critical_areas]]
    name = "railway"
    path = "constraints.gpkg"
    layer = "rail"
    consequence = 5
"""

from __future__ import annotations

import itertools
import math
from collections.abc import Mapping
from dataclasses import dataclass, field
from pathlib import Path
from types import MappingProxyType
from typing import Any

import numpy as np
import pandas as pd
from numpy.typing import ArrayLike, NDArray

from audit.errors import ConfigProblems
from audit.labels import as_labels
from audit.units import FOOT_M, INCH_M, SI, US, UnitSystem

Array = NDArray[np.float64]

# from memory: internal diameters in which concrete and vitrified clay sewer pipes are commonly
# made in metric sizes (150 to 2400 mm).
METRIC_SIZES_MM: tuple[float, ...] = (150, 225, 300, 375, 450, 525, 600, 675, 750, 825, 900, 1050, 1200, 1350, 1500, 1650, 1800,
                                      2100, 2400)  # fmt: skip
# from memory: nominal inside diameters of North American sewer pipe (plastic from 8 in,
# concrete up to 108 in).
INCH_SIZES_IN: tuple[float, ...] = (8, 10, 12, 15, 18, 21, 24, 27, 30, 33, 36, 42, 48, 54, 60, 66, 72, 78, 84, 90, 96, 102, 108)

# from memory: service lives used in asset-management screening, in years, by material as
# registers write it (matched ignoring case and spaces at the ends); "other" for every other or
# unknown material. Local experience should replace them.
SERVICE_LIFE_YEARS: Mapping[str, float] = MappingProxyType({
    "vitrified clay": 100, "clay": 100, "vc": 100, "brick": 100, "concrete": 80, "conc": 80, "reinforced concrete": 80,
    "rc": 80, "pvc": 80, "upvc": 80, "pe": 80, "hdpe": 80, "grp": 80, "ductile iron": 80, "di": 80, "cast iron": 100,
    "ci": 100, "asbestos cement": 60, "ac": 60, "steel": 50, "pitch fibre": 40, "other": 80,
})  # fmt: skip

#: The parts that make up the likelihood and the consequence of failure (docs/renewal.md).
LIKELIHOOD_PARTS: tuple[str, ...] = ("hydraulic", "structural", "service", "age")
CONSEQUENCE_PARTS: tuple[str, ...] = ("critical_area", "population", "size", "depth", "flooding")

SCORE_RANGE = (1, 5)
"""Every score, every grade of the condition table and every layer's consequence lies on 1 to 5."""


@dataclass(frozen=True)
class Bands:
    """Four ascending edges that split a quantity into the scores 1 to 5.

    A value below the first edge scores 1; a value at or above edge ``k`` (counted from 1)
    scores ``k + 1``. NaN scores NaN.

    >>> Bands((0.5, 0.8, 1.0, 1.5)).score(np.array([0.2, 0.8, 1.2, 9.0, np.nan])).tolist()
    [1.0, 3.0, 4.0, 5.0, nan]
    """

    edges: tuple[float, ...]

    def score(self, values: ArrayLike) -> Array:
        """The score 1 to 5 of each value [the edges' unit]; NaN where the value is unknown."""
        values = np.asarray(values, dtype=float)
        score = 1.0 + np.searchsorted(np.asarray(self.edges, dtype=float), values, side="right")
        return np.where(np.isnan(values), np.nan, score)


@dataclass(frozen=True)
class ConditionSource:
    """``[renewal.condition]``: a table of inspection grades, joined to the pipes by pipe id.

    ``fields`` maps ``pipe_id`` (required), ``structural`` and ``service`` (at least one) to the
    table's field names. Grades are on the 1 (good) to 5 (worst) scale; the user's own grading
    convention decides what each grade means.
    """

    path: Path
    layer: str | None = None
    fields: Mapping[str, str] = field(default_factory=lambda: MappingProxyType({}))


@dataclass(frozen=True)
class CriticalAreaSource:
    """``[[renewal.critical_areas]]``: a named layer of areas where a failure costs more.

    A pipe that crosses a feature of the layer, or lies within ``buffer_m`` [m] of one, has at
    least ``consequence`` (1 to 5). ``buffer_m`` None: the table's ``buffer_m``.
    """

    name: str
    path: Path
    consequence: int
    layer: str | None = None
    crs: str | None = None
    buffer_m: float | None = None


#: Default weights below 1: age alone is a weaker sign of failure than a hydraulic deficiency or an
#: inspection grade, so a pipe past its service life with nothing else against it scores a
#: likelihood of 4 at most, ceil(0.8 x 5) (common practice, no source).
DEFAULT_WEIGHTS: Mapping[str, float] = MappingProxyType({"age": 0.8})


def _weights(parts: tuple[str, ...]) -> Mapping[str, float]:
    return MappingProxyType({part: DEFAULT_WEIGHTS.get(part, 1.0) for part in parts})


@dataclass(frozen=True)
class RenewalSettings:
    """``[renewal]`` in SI: how remedies are sized and costed and how risk is scored.

    Attributes
    ----------
    sizes_m : commercial internal diameters a remedy may choose from [m], ascending
    design_depth_ratio : the largest depth / diameter a new size may run at the design flow [-]
    service_life_years : years of service by material (lower case); ``other`` for the rest [years]
    assessment_year : the year ages are counted to; None: the year of the run
    grade_limit : a structural or service grade at or above it calls for inspection [1-5]
    costs : rows (diameter [m], cost per metre [currency/m]), ascending; () means no costs
    currency : a free label for the costs
    buffer_m : distance from a critical area within which a pipe counts as in it [m]
    load_ratio_bands : edges of the hydraulic likelihood score, design flow / full-bore capacity [-]
    age_bands : edges of the age score, age / service life [-]
    population_bands : edges of the population score, persons served upstream [-]
    size_bands : edges of the size score, internal height [m]
    depth_bands : edges of the depth score, the greater depth from cover to invert [m]
    likelihood_weights, consequence_weights : weight of each part, 0 to 1 (0 leaves it out)
    condition : the inspection table, or None
    critical_areas : the named critical-area layers
    units : the unit system the remedy text is written in
    """

    sizes_m: tuple[float, ...] = tuple(size / 1000.0 for size in METRIC_SIZES_MM)
    design_depth_ratio: float = 0.8  # a common design limit for the depth at the design flow, from memory
    service_life_years: Mapping[str, float] = field(default_factory=lambda: SERVICE_LIFE_YEARS)
    assessment_year: int | None = None
    grade_limit: float = 4.0  # common practice, no source: grades 4 and 5 are the ones that call for works
    costs: tuple[tuple[float, float], ...] = ()
    currency: str = ""
    buffer_m: float = 5.0  # common practice, no source: about a lane's width plus a trench
    load_ratio_bands: Bands = Bands((0.5, 0.8, 1.0, 1.5))  # 0.8 near capacity and 1.0 surcharge as in the rules; common practice, no source
    age_bands: Bands = Bands((0.25, 0.5, 0.75, 1.0))  # quarters of the service life; common practice, no source
    population_bands: Bands = Bands((100.0, 1000.0, 10000.0, 50000.0))  # common practice, no source
    size_bands: Bands = Bands((0.3, 0.6, 0.9, 1.5))  # [m]; common practice, no source
    depth_bands: Bands = Bands((1.5, 3.0, 5.0, 8.0))  # [m]; common practice, no source
    likelihood_weights: Mapping[str, float] = field(default_factory=lambda: _weights(LIKELIHOOD_PARTS))
    consequence_weights: Mapping[str, float] = field(default_factory=lambda: _weights(CONSEQUENCE_PARTS))
    condition: ConditionSource | None = None
    critical_areas: tuple[CriticalAreaSource, ...] = ()
    units: UnitSystem = SI

    def service_life(self, material: ArrayLike | pd.Categorical | pd.Series) -> Array:
        """Service life [years] of each pipe by its material as typed (text, or labels); ``other`` where unlisted."""
        labels = as_labels(material if isinstance(material, pd.Categorical | pd.Series) else np.asarray(material, dtype=object))
        other = float(self.service_life_years.get("other", math.nan))
        lives = np.array([float(self.service_life_years.get(str(name).strip().lower(), other)) for name in labels.categories] + [other])
        return lives[labels.codes]  # code -1 (missing) takes the last entry, "other"


KEYS = ("sizes_mm", "sizes_in", "design_depth_ratio", "service_life_years", "assessment_year", "grade_limit", "costs_per_m",
        "costs_per_ft", "currency", "buffer_m", "buffer_ft", "load_ratio_bands", "age_bands", "population_bands", "size_bands_mm",
        "size_bands_in", "depth_bands_m", "depth_bands_ft", "likelihood_weights", "consequence_weights", "condition",
        "critical_areas")  # fmt: skip
YEARS = (1800, 2200)


def _is_number(value: object) -> bool:
    return isinstance(value, int | float) and not isinstance(value, bool) and math.isfinite(value)


def _one_of(check: ConfigProblems, table: dict[str, Any], si_key: str, us_key: str, prefix: str = "renewal") -> tuple[object, float] | None:
    """The value of whichever of the pair is given, and its scale to SI (1 for the SI key); None when neither."""
    if si_key in table and us_key in table:
        check.fail(f"{prefix}.{us_key}", f"one of {prefix}.{si_key} and {prefix}.{us_key}, not both")
    if us_key in table:
        return table[us_key], (INCH_M if us_key.endswith("_in") else FOOT_M)
    if si_key in table:
        return table[si_key], (1e-3 if si_key.endswith("_mm") else 1.0)
    return None


def _ascending(check: ConfigProblems, value: object, key: str, *, count: int | None = None, low: float = 0.0) -> tuple[float, ...] | None:
    """Numbers > ``low``, strictly ascending (``count`` of them when given); None after a reported problem."""
    how_many = f"{count} " if count else ""
    ok = isinstance(value, list) and len(value) > 0 and all(_is_number(v) and v > low for v in value)
    numbers = tuple(float(v) for v in value) if ok and isinstance(value, list) else ()
    if not ok or (count is not None and len(numbers) != count) or any(b <= a for a, b in itertools.pairwise(numbers)):
        check.fail(key, f"an array of {how_many}numbers > {low:g} in ascending order", value)
        return None
    return numbers


def _sizes(check: ConfigProblems, table: dict[str, Any], units: UnitSystem) -> tuple[float, ...]:
    given = _one_of(check, table, "sizes_mm", "sizes_in")
    default = tuple(size * INCH_M for size in INCH_SIZES_IN) if units is US else RenewalSettings.sizes_m
    if given is None:
        return default
    value, scale = given
    key = "renewal.sizes_in" if "sizes_in" in table else "renewal.sizes_mm"
    sizes = _ascending(check, value, key)
    return default if sizes is None else tuple(size * scale for size in sizes)


def _costs(check: ConfigProblems, table: dict[str, Any]) -> tuple[tuple[float, float], ...]:
    given = _one_of(check, table, "costs_per_m", "costs_per_ft")
    if given is None:
        return ()
    value, length_scale = given
    per_ft = "costs_per_ft" in table
    key = "renewal.costs_per_ft" if per_ft else "renewal.costs_per_m"
    size_scale = INCH_M if per_ft else 1e-3
    rows = value if isinstance(value, list) else None
    if not rows or not all(isinstance(row, list) and len(row) == 2 and all(_is_number(v) and v >= 0 for v in row) for row in rows):
        check.fail(key, f"an array of [size {'in' if per_ft else 'mm'}, cost per {'ft' if per_ft else 'm'}] rows of numbers >= 0", value)
        return ()
    sizes = _ascending(check, [row[0] for row in rows], f"{key} (the sizes of its rows)")
    if sizes is None:
        return ()
    # a cost per ft is a cost per 0.3048 m: divide by the metres in a foot
    return tuple((size * size_scale, float(row[1]) / length_scale) for size, row in zip(sizes, rows, strict=True))


def _bands(check: ConfigProblems, table: dict[str, Any], key: str, default: Bands, *, us_key: str | None = None) -> Bands:
    if us_key is None:
        if key not in table:
            return default
        edges = _ascending(check, table[key], f"renewal.{key}", count=4)
        return default if edges is None else Bands(edges)
    given = _one_of(check, table, key, us_key)
    if given is None:
        return default
    value, scale = given
    edges = _ascending(check, value, f"renewal.{us_key if us_key in table else key}", count=4)
    return default if edges is None else Bands(tuple(edge * scale for edge in edges))


def _score_weights(check: ConfigProblems, data: object, key: str, parts: tuple[str, ...]) -> Mapping[str, float]:
    table = check.table(data, key, parts)
    weights = dict(_weights(parts))
    for name in parts:
        if name not in table:
            continue
        value = table[name]
        if not _is_number(value) or not 0.0 <= value <= 1.0:
            check.fail(f"{key}.{name}", "a weight from 0 to 1 (0 leaves the part out)", value)
            continue
        weights[name] = float(value)
    return MappingProxyType(weights)


def _service_lives(check: ConfigProblems, data: object) -> Mapping[str, float]:
    table = check.table(data, "renewal.service_life_years", None)
    lives = dict(SERVICE_LIFE_YEARS)
    for name, value in table.items():
        if not _is_number(value) or value <= 0:
            check.fail(f"renewal.service_life_years.{name}", "a number of years > 0", value)
            continue
        lives[str(name).strip().lower()] = float(value)
    return MappingProxyType(lives)


def _year(check: ConfigProblems, table: dict[str, Any]) -> int | None:
    value = table.get("assessment_year")
    if value is None:
        return None
    if isinstance(value, bool) or not isinstance(value, int) or not YEARS[0] <= value <= YEARS[1]:
        check.fail("renewal.assessment_year", f"a whole year from {YEARS[0]} to {YEARS[1]}", value)
        return None
    return value


def _path(check: ConfigProblems, table: dict[str, Any], key: str) -> Path:
    path = check.text(table, "path", key, None)
    if path is None and "path" not in table:
        check.fail(f"{key}.path", "the path of the file (required)")
    return (check.source.parent / (path or "")).resolve()


def _condition(check: ConfigProblems, data: object) -> ConditionSource:
    key = "renewal.condition"
    table = check.table(data, key, ("path", "layer", "fields"))
    fields = check.table(table.get("fields", {}), f"{key}.fields", ("pipe_id", "structural", "service"))
    names = {name: fields[name] for name in ("pipe_id", "structural", "service") if check.text(fields, name, f"{key}.fields", None) is not None}
    if "pipe_id" not in names:
        check.fail(f"{key}.fields.pipe_id", "the field that holds the pipe id (required)")
    if "structural" not in names and "service" not in names:
        check.fail(f"{key}.fields", "a structural or a service grade field (or both)")
    return ConditionSource(path=_path(check, table, key), layer=check.text(table, "layer", key, None), fields=MappingProxyType(names))


def _critical_area(check: ConfigProblems, data: object, key: str) -> CriticalAreaSource | None:
    table = check.table(data, key, ("name", "path", "layer", "crs", "consequence", "buffer_m", "buffer_ft"))
    name = check.text(table, "name", key, None)
    if name is None and "name" not in table:
        check.fail(f"{key}.name", "a name for the layer (required; the risk driver says it)")
    consequence = table.get("consequence")
    low, high = SCORE_RANGE
    if isinstance(consequence, bool) or not isinstance(consequence, int) or not low <= consequence <= high:
        check.fail(f"{key}.consequence", f"a whole number from {low} to {high} (required)", consequence)
        consequence = None
    buffer = _buffer(check, table, key)
    path = _path(check, table, key)
    crs = check.text(table, "crs", key, None)  # checked when the layer is read
    if name is None or consequence is None:
        return None
    return CriticalAreaSource(name=name, path=path, consequence=consequence, layer=check.text(table, "layer", key, None), crs=crs, buffer_m=buffer)


def _buffer(check: ConfigProblems, table: dict[str, Any], key: str) -> float | None:
    given = _one_of(check, table, "buffer_m", "buffer_ft", prefix=key)
    if given is None:
        return None
    value, scale = given
    if not _is_number(value) or float(value) < 0:  # type: ignore[arg-type]
        check.fail(f"{key}.{'buffer_ft' if 'buffer_ft' in table else 'buffer_m'}", "a distance >= 0", value)
        return None
    return float(value) * scale  # type: ignore[arg-type]


def _critical_areas(check: ConfigProblems, data: object) -> tuple[CriticalAreaSource, ...]:
    if not isinstance(data, list):
        check.fail("renewal.critical_areas", "an array of tables ([[renewal.critical_areas]])", data)
        return ()
    areas = [_critical_area(check, item, f"renewal.critical_areas[{place}]") for place, item in enumerate(data)]
    names = [str(item["name"]) for item in data if isinstance(item, dict) and isinstance(item.get("name"), str)]
    for name in sorted({name for name in names if names.count(name) > 1}):
        check.fail("renewal.critical_areas", f"a different name for each layer; {name!r} is used more than once")
    return tuple(area for area in areas if area is not None)


def parse_renewal(check: ConfigProblems, data: object, units: UnitSystem = SI) -> RenewalSettings:
    """``[renewal]`` as :class:`RenewalSettings`; every problem goes to ``check``.

    Parameters
    ----------
    check : the config file's problem collector (relative paths resolve against its folder)
    data : the parsed ``[renewal]`` table (``{}`` when the file has none)
    units : the output unit system (``[output] units``): the remedy text is written in it, and
        without ``sizes_mm`` or ``sizes_in`` a US output takes the inch series of sizes
    """
    table = check.table(data, "renewal", KEYS)
    defaults = RenewalSettings()
    ratio = check.number(table, "design_depth_ratio", "renewal", defaults.design_depth_ratio, low=1e-9)
    if ratio > 1.0:
        check.fail("renewal.design_depth_ratio", "a depth / diameter ratio above 0 and at most 1", ratio)
        ratio = defaults.design_depth_ratio
    grade = check.number(table, "grade_limit", "renewal", defaults.grade_limit, low=SCORE_RANGE[0])
    if grade > SCORE_RANGE[1]:
        check.fail("renewal.grade_limit", f"a grade from {SCORE_RANGE[0]} to {SCORE_RANGE[1]}", grade)
        grade = defaults.grade_limit
    currency = table.get("currency", "")
    if not isinstance(currency, str):
        check.fail("renewal.currency", "a label such as 'EUR' or 'USD'", currency)
        currency = ""
    buffer = _buffer(check, table, "renewal")
    return RenewalSettings(
        sizes_m=_sizes(check, table, units),
        design_depth_ratio=ratio,
        service_life_years=_service_lives(check, table["service_life_years"]) if "service_life_years" in table else SERVICE_LIFE_YEARS,
        assessment_year=_year(check, table),
        grade_limit=grade,
        costs=_costs(check, table),
        currency=currency.strip(),
        buffer_m=defaults.buffer_m if buffer is None else buffer,
        load_ratio_bands=_bands(check, table, "load_ratio_bands", defaults.load_ratio_bands),
        age_bands=_bands(check, table, "age_bands", defaults.age_bands),
        population_bands=_bands(check, table, "population_bands", defaults.population_bands),
        size_bands=_bands(check, table, "size_bands_mm", defaults.size_bands, us_key="size_bands_in"),
        depth_bands=_bands(check, table, "depth_bands_m", defaults.depth_bands, us_key="depth_bands_ft"),
        likelihood_weights=_score_weights(check, table.get("likelihood_weights", {}), "renewal.likelihood_weights", LIKELIHOOD_PARTS),
        consequence_weights=_score_weights(check, table.get("consequence_weights", {}), "renewal.consequence_weights", CONSEQUENCE_PARTS),
        condition=_condition(check, table["condition"]) if "condition" in table else None,
        critical_areas=_critical_areas(check, table["critical_areas"]) if "critical_areas" in table else (),
        units=units,
    )
