"""Thresholds of the design-rule checks and the ``[rules]`` table that sets them.

Every value is SI (metres, m/s, Pa, m/m) except the sizes that key a table by diameter, which
are in millimetres because that is how the trade writes them. ``RuleSettings.from_table`` is the
only way from a TOML table to settings; it refuses unknown keys, wrong types and badly formed
tables with a ``ConfigError`` that names the file and the dotted key.
"""

from __future__ import annotations

import difflib
from collections.abc import Mapping
from dataclasses import dataclass, field, fields
from types import MappingProxyType

import numpy as np

from audit.errors import ConfigError
from audit.units import SI, UNIT_SIZES, US, UnitSystem, to_si

#: Severity words from the least to the most serious.
SEVERITY_ORDER: tuple[str, ...] = ("low", "medium", "high")

#: The severity word of a pipe without a flag, the same in every output.
SEVERITY_NONE = "none"

#: A severity override of "off" switches a flag off entirely.
SEVERITY_OFF = "off"

#: Flag codes in the fixed order in which they appear in the ``flags`` column, with the
#: severity each carries by default (reasons in docs/rules.md).
DEFAULT_SEVERITY: Mapping[str, str] = MappingProxyType(
    {
        "surcharge": "high",
        "backwater_surcharge": "medium",
        "near_capacity": "low",
        "silting": "medium",
        "high_velocity": "medium",
        "hydraulic_jump": "low",
        "near_critical": "low",
        "reverse_grade": "high",
        "zero_grade": "medium",
        "flat_grade": "medium",
        "long_spacing": "low",
        "below_min_diameter": "low",
        "diameter_decrease": "medium",
        "shallow_cover": "low",
        "missing_data": "low",
    }
)

FLAG_CODES: tuple[str, ...] = tuple(DEFAULT_SEVERITY)

#: Manhole flag codes, from the hydraulic grade line, with their default severity: ``flooding``
#: where the water level reaches the cover less the freeboard, ``manhole_surcharge`` where it
#: stands above the soffit of the pipe leaving the manhole but below flooding. ``[rules.severity]`` sets
#: them as it sets the pipe flags.
MANHOLE_SEVERITY: Mapping[str, str] = MappingProxyType({"flooding": "high", "manhole_surcharge": "low"})

MANHOLE_FLAG_CODES: tuple[str, ...] = tuple(MANHOLE_SEVERITY)


@dataclass(frozen=True)
class DiameterTable:
    """A value that depends on pipe size, as rows ``(from_diameter_mm, value)`` in ascending order.

    A pipe takes the value of the last row whose ``from_diameter_mm`` is at most its internal
    size in millimetres; a pipe smaller than the first row takes the first row. A plain number
    is a table of one row.

    Examples
    --------
    >>> table = DiameterTable(from_diameter_mm=(0.0, 457.0), values=(121.92, 152.4))
    >>> table.lookup(np.array([0.3, 0.457, 0.6, np.nan])).tolist()
    [121.92, 152.4, 152.4, nan]
    """

    from_diameter_mm: tuple[float, ...]
    values: tuple[float, ...]

    def lookup(self, size_m: np.ndarray) -> np.ndarray:
        """Value per pipe for internal sizes ``size_m`` [m]; NaN where the size is unknown."""
        size_mm = np.round(np.asarray(size_m, dtype=float) * 1000.0, 6)
        row = np.searchsorted(np.asarray(self.from_diameter_mm), size_mm, side="right") - 1
        value = np.asarray(self.values, dtype=float)[np.clip(row, 0, None)]
        return np.where(np.isnan(size_mm), np.nan, value)

    @property
    def strictest(self) -> float:
        """The smallest value of the table."""
        return min(self.values)

    @classmethod
    def constant(cls, value: float) -> DiameterTable:
        """A table of one row: the same value for every size."""
        return cls(from_diameter_mm=(0.0,), values=(float(value),))


#: Nominal pipe sizes: inches and the metric size that stands for each (8 in is sold as 200 mm,
#: 18 in as 450 mm, ...). Tables by size start their rows at these metric sizes, so a 450 mm
#: pipe and a 457.2 mm (18 in) pipe fall in the same class. Common practice, no source.
NOMINAL_SIZES_MM: Mapping[int, float] = MappingProxyType(
    {8: 200.0, 10: 250.0, 12: 300.0, 15: 375.0, 18: 450.0, 21: 525.0, 24: 600.0, 27: 675.0, 30: 750.0, 33: 825.0, 36: 900.0}
)

# Source: Recommended Standards for Wastewater Facilities (Great Lakes - Upper Mississippi River
# Board, 2014), sec. 33.41, minimum slopes for n = 0.013, in percent: 8 in 0.40, 10 in 0.28,
# 12 in 0.22, 15 in 0.15, 18 in 0.12, 21 in 0.10, 24 in 0.08, 27 in 0.067, 30 in 0.058,
# 36 in 0.046 (from memory). Rows start at the metric nominal size of each inch size, so both a
# 300 mm and a 304.8 mm (12 in) pipe take the 12 in slope; a size between two rows takes the
# steeper slope of the smaller one. Slopes are m/m.
RSWF_MIN_SLOPE = DiameterTable(
    from_diameter_mm=tuple(NOMINAL_SIZES_MM[inch] for inch in (8, 10, 12, 15, 18, 21, 24, 27, 30, 36)),
    values=(0.0040, 0.0028, 0.0022, 0.0015, 0.0012, 0.0010, 0.0008, 0.00067, 0.00058, 0.00046),
)

# Source: Recommended Standards for Wastewater Facilities (Great Lakes - Upper Mississippi River
# Board, 2014), manhole spacing: 400 ft for 15 in and smaller, 500 ft for 18 to 30 in; greater
# spacing may be permitted in larger sewers (from memory). 400 ft = 121.92 m, 500 ft = 152.4 m.
# The classes start at the nominal sizes (18 in at 450 mm); from 33 in (825 mm) the source sets
# no limit, so the table gives none (an infinite spacing): set your own for large sewers.
RSWF_MAX_SPACING = DiameterTable(
    from_diameter_mm=(0.0, NOMINAL_SIZES_MM[18], NOMINAL_SIZES_MM[33]), values=(121.92, 152.4, float("inf"))
)


#: How self-cleansing (the ``silting`` flag) is judged; docs/rules.md gives each one's source.
#: ``full_velocity``: velocity flowing full >= ``min_velocity`` (the basis of the 2 ft/s rule);
#: ``design_velocity``: at the design flow; ``fraction_velocity``: at ``cleansing_fraction`` of
#: the design flow; ``dry_weather_velocity`` and ``dry_weather_shear``: velocity, or boundary
#: shear >= ``min_shear``, at the dry-weather flow (the sanitary part with infiltration, its
#: daily peak or its average as ``dry_weather`` says).
SELF_CLEANSING: tuple[str, ...] = ("full_velocity", "design_velocity", "fraction_velocity", "dry_weather_velocity", "dry_weather_shear")
DRY_WEATHER: tuple[str, ...] = ("peak", "average")


def _default_severity() -> Mapping[str, str]:
    return MappingProxyType({**DEFAULT_SEVERITY, **MANHOLE_SEVERITY})


@dataclass(frozen=True)
class RuleSettings:
    """Thresholds of the design-rule checks (SI units).

    Attributes
    ----------
    max_load_ratio : design flow over full-bore capacity above which a pipe surcharges [-]
    near_capacity_ratio : load ratio above which a pipe is near capacity [-]
    self_cleansing : the criterion of the ``silting`` flag (``SELF_CLEANSING``)
    min_velocity : least velocity against silting, at the criterion's flow [m/s]
    min_shear : least boundary shear at the dry-weather flow, for ``dry_weather_shear`` [Pa]
    cleansing_fraction : the share of the design flow ``fraction_velocity`` judges at [-]
    dry_weather : ``peak`` (the daily peak) or ``average`` dry-weather flow
    exempt_population : pipes serving fewer persons are not judged for silting [-]
    max_velocity : greatest velocity at design flow against scour [m/s], judged where the flow
        has a free surface (a pipe running full is judged by the grade line)
    near_critical_band : a free-surface pipe whose Froude number at normal depth lies within this
        of 1 is flagged ``near_critical`` [-]
    min_slope : least slope by diameter [m/m]; None: only a zero slope is flagged
    min_diameter_mm : least internal size of a public gravity sewer [mm]
    min_cover_m : least cover over the pipe at either end [m]
    max_spacing_m : greatest length of pipe between access points, by diameter [m]
    severity : severity of each flag code, or "off" to switch the flag off
    """

    max_load_ratio: float = 1.0  # common practice, no source
    near_capacity_ratio: float = 0.8  # common practice, no source
    self_cleansing: str = "full_velocity"  # flow-independent and widely used; see docs/rules.md
    min_velocity: float = 0.6  # 2 ft/s, common North American figure, from memory
    min_shear: float = 1.0  # 1 to 2 Pa at the daily peak, ASCE/WEF MOP FD-5, from memory
    cleansing_fraction: float = 1.0 / 3.0  # some UK guidance judges foul sewers at a third of the design flow, from memory
    dry_weather: str = "peak"
    exempt_population: float = 0.0
    max_velocity: float = 3.0  # common practice, no source
    near_critical_band: float = 0.2  # |Fr - 1| below which the surface is unstable: Fr 0.8 to 1.2, common practice, no source
    min_slope: DiameterTable | None = None
    min_diameter_mm: float = 200.0  # 8 in in many codes, from memory
    min_cover_m: float = 0.9  # common practice, no source
    max_spacing_m: DiameterTable = RSWF_MAX_SPACING
    severity: Mapping[str, str] = field(default_factory=_default_severity)

    @classmethod
    def from_table(cls, table: Mapping[str, object], *, source: str) -> RuleSettings:
        """Settings from the ``[rules]`` table of a config file.

        Parameters
        ----------
        table : the parsed ``[rules]`` table; absent keys keep their defaults
        source : the config file's name, for error messages

        Raises
        ------
        ConfigError
            for an unknown key, a value of the wrong type or a badly formed table, naming
            ``source``, the dotted key ``rules.<key>`` and what was expected.
        """
        if not isinstance(table, Mapping):
            raise ConfigError(f"{source}: rules: expected a table of settings, got {_kind(table)}")
        names = list(_KEYS)
        for key in table:
            if key in _RENAMED:
                raise ConfigError(f"{source}: rules.{key}: renamed to {_RENAMED[key]}, so that every key names its unit")
            if key not in _KEYS:
                raise ConfigError(f"{source}: rules.{key}: unknown key{_did_you_mean(str(key), names)}")
        values: dict[str, object] = {}
        given: dict[str, str] = {}
        for key, raw in table.items():
            setting, system, quantity = _KEYS[key]
            if setting in given:
                raise ConfigError(f"{source}: rules.{key}: give one of rules.{given[setting]} and rules.{key}, not both")
            given[setting] = key
            parsed = _PARSERS[setting](raw, source=source, key=f"rules.{key}")
            values[setting] = _to_si(parsed, system=system, quantity=quantity, setting=setting)
        settings = cls(**values)  # type: ignore[arg-type]
        _check_consistent(settings, source=source)
        return settings


def _kind(value: object) -> str:
    return f"{type(value).__name__} {value!r}"


def _did_you_mean(word: str, choices: list[str] | tuple[str, ...]) -> str:
    close = difflib.get_close_matches(word, choices, n=1)
    return f" (did you mean {close[0]!r}?)" if close else f"; expected one of {', '.join(choices)}"


def _number(raw: object, *, source: str, key: str) -> float:
    if isinstance(raw, bool) or not isinstance(raw, int | float) or not np.isfinite(raw):
        raise ConfigError(f"{source}: {key}: expected a finite number, got {_kind(raw)}")
    return float(raw)


def _non_negative(raw: object, *, source: str, key: str) -> float:
    value = _number(raw, source=source, key=key)
    if value < 0:
        raise ConfigError(f"{source}: {key}: expected a number >= 0, got {value!r}")
    return value


def _positive(raw: object, *, source: str, key: str) -> float:
    value = _number(raw, source=source, key=key)
    if value <= 0:
        raise ConfigError(f"{source}: {key}: expected a number > 0, got {value!r}")
    return value


def _choice(raw: object, choices: tuple[str, ...], *, source: str, key: str) -> str:
    if raw not in choices:
        raise ConfigError(f"{source}: {key}: expected one of {', '.join(choices)}, got {_kind(raw)}")
    return str(raw)


def _by_diameter(raw: object, *, source: str, key: str) -> DiameterTable:
    if not isinstance(raw, bool) and isinstance(raw, int | float):
        return DiameterTable.constant(_positive(raw, source=source, key=key))
    expected = "a number or a list of [from_diameter_mm, value] rows in ascending order"
    if not isinstance(raw, list | tuple) or not raw:
        raise ConfigError(f"{source}: {key}: expected {expected}, got {_kind(raw)}")
    starts: list[float] = []
    values: list[float] = []
    for index, row in enumerate(raw):
        where = f"{key}[{index}]"
        if not isinstance(row, list | tuple) or len(row) != 2:
            raise ConfigError(f"{source}: {where}: expected a row [from_diameter_mm, value], got {_kind(row)}")
        starts.append(_non_negative(row[0], source=source, key=f"{where}[0]"))
        values.append(_positive(row[1], source=source, key=f"{where}[1]"))
        if index and starts[-1] <= starts[-2]:
            raise ConfigError(
                f"{source}: {where}: from_diameter_mm must ascend, got {starts[-1]:g} after {starts[-2]:g}"
            )
    return DiameterTable(from_diameter_mm=tuple(starts), values=tuple(values))


def _severity(raw: object, *, source: str, key: str) -> Mapping[str, str]:
    if not isinstance(raw, Mapping):
        raise ConfigError(f"{source}: {key}: expected a table of flag = severity, got {_kind(raw)}")
    words = (*SEVERITY_ORDER, SEVERITY_OFF)
    merged = dict(_default_severity())
    for flag, word in raw.items():
        if flag not in merged:
            raise ConfigError(f"{source}: {key}.{flag}: unknown flag{_did_you_mean(str(flag), FLAG_CODES + MANHOLE_FLAG_CODES)}")
        if word not in words:
            raise ConfigError(f"{source}: {key}.{flag}: expected one of {', '.join(words)}, got {_kind(word)}")
        merged[flag] = str(word)
    return MappingProxyType(merged)


_PARSERS = {
    "max_load_ratio": _positive,
    "near_capacity_ratio": _positive,
    "self_cleansing": lambda raw, *, source, key: _choice(raw, SELF_CLEANSING, source=source, key=key),
    "min_velocity": _non_negative,
    "min_shear": _non_negative,
    "cleansing_fraction": _positive,
    "dry_weather": lambda raw, *, source, key: _choice(raw, DRY_WEATHER, source=source, key=key),
    "exempt_population": _non_negative,
    "max_velocity": _positive,
    "near_critical_band": _non_negative,
    "min_slope": _by_diameter,
    "min_diameter_mm": _non_negative,
    "min_cover_m": _non_negative,
    "max_spacing_m": _by_diameter,
    "severity": _severity,
}

#: The ``[rules]`` keys of each setting with a unit, by unit system: every key names its unit, and
#: a setting is given in either system (one key of a pair). Values are kept in SI inside.
#: (setting, quantity of ``audit.units``, SI key, US key); a table by size has its rows'
#: sizes in millimetres (SI key) or inches (US key).
UNIT_KEYS: tuple[tuple[str, str, str, str], ...] = (
    ("min_velocity", "velocity", "min_velocity_m_s", "min_velocity_ft_s"),
    ("max_velocity", "velocity", "max_velocity_m_s", "max_velocity_ft_s"),
    ("min_shear", "stress", "min_shear_pa", "min_shear_psf"),
    ("min_diameter_mm", "size", "min_diameter_mm", "min_diameter_in"),
    ("min_cover_m", "length", "min_cover_m", "min_cover_ft"),
    ("max_spacing_m", "length", "max_spacing_m", "max_spacing_ft"),
    ("min_slope", "ratio", "min_slope", "min_slope_by_in"),
)
_RENAMED = {"min_velocity": "min_velocity_m_s (or min_velocity_ft_s)", "max_velocity": "max_velocity_m_s (or max_velocity_ft_s)",
            "min_shear": "min_shear_pa (or min_shear_psf)"}  # fmt: skip


def _key_table() -> dict[str, tuple[str, UnitSystem, str]]:
    """Every ``[rules]`` key: the setting it sets, its unit system, and the quantity of its value."""
    keys = {name: (name, SI, "ratio") for name in _PARSERS}
    for setting, quantity, si_key, us_key in UNIT_KEYS:
        keys.pop(setting, None)
        keys[si_key] = (setting, SI, quantity)
        keys[us_key] = (setting, US, quantity)
    return keys


_KEYS = _key_table()


def _to_si(value: object, *, system: UnitSystem, quantity: str, setting: str) -> object:
    """A parsed value given in ``system`` in the SI units the rules use (sizes of tables in mm)."""
    if system is SI or (quantity == "ratio" and not isinstance(value, DiameterTable)):
        return value
    size = float(to_si(1.0, system.unit("size"), quantity="length")) * 1000.0  # mm per size unit
    scale = 1.0 if quantity == "ratio" else float(UNIT_SIZES[quantity][system.unit(quantity)])
    if setting == "min_diameter_mm":
        return float(value) * size  # type: ignore[arg-type]
    if isinstance(value, DiameterTable):
        return DiameterTable(tuple(start * size for start in value.from_diameter_mm), tuple(row * scale for row in value.values))
    return float(value) * scale  # type: ignore[arg-type]


def as_table(settings: RuleSettings, units: UnitSystem) -> dict[str, object]:
    """The settings as ``[rules]`` keys and values in ``units``: what a config in that system would say.

    >>> table = as_table(RuleSettings(), US)
    >>> round(table["min_velocity_ft_s"], 3), table["min_cover_ft"] == round(0.9 / 0.3048, 6)
    (1.969, True)
    """
    out: dict[str, object] = {}
    by_setting = {setting: (quantity, si_key, us_key) for setting, quantity, si_key, us_key in UNIT_KEYS}
    for item in fields(settings):
        value = getattr(settings, item.name)
        if item.name not in by_setting:
            out[item.name] = value
            continue
        quantity, si_key, us_key = by_setting[item.name]
        out[us_key if units is US else si_key] = _from_si(value, units=units, quantity=quantity, setting=item.name)
    return out


def _from_si(value: object, *, units: UnitSystem, quantity: str, setting: str) -> object:
    if units is SI or value is None:
        return value
    size = 1.0 / (float(to_si(1.0, units.unit("size"), quantity="length")) * 1000.0)  # size units per mm
    scale = 1.0 if quantity == "ratio" else 1.0 / float(UNIT_SIZES[quantity][units.unit(quantity)])
    if setting == "min_diameter_mm":
        return round(float(value) * size, 6)  # type: ignore[arg-type]
    if isinstance(value, DiameterTable):
        return DiameterTable(tuple(round(start * size, 6) for start in value.from_diameter_mm), tuple(row * scale for row in value.values))
    return round(float(value) * scale, 6)  # type: ignore[arg-type]


def _check_consistent(settings: RuleSettings, *, source: str) -> None:
    if settings.near_capacity_ratio > settings.max_load_ratio:
        raise ConfigError(
            f"{source}: rules.near_capacity_ratio: expected at most rules.max_load_ratio "
            f"({settings.max_load_ratio:g}), got {settings.near_capacity_ratio:g}"
        )
    if settings.min_velocity >= settings.max_velocity:
        raise ConfigError(
            f"{source}: rules.min_velocity: expected less than rules.max_velocity "
            f"({settings.max_velocity:g}), got {settings.min_velocity:g}"
        )


# The range in which each threshold usually lies, in the units the rules use, and what a value
# far outside it probably means. A value outside is not refused (local codes differ) but said,
# because a minimum slope of 0.4 (meant as 0.4 %) or a minimum cover of 3 (meant as feet) flags
# almost every pipe. Ranges: common practice, no source.
USUAL_RANGES: Mapping[str, tuple[float, float, str]] = MappingProxyType(
    {
        "max_load_ratio": (0.5, 1.5, "a ratio of design flow to full-bore capacity, 1.0 for just full"),
        "near_capacity_ratio": (0.5, 1.0, "a ratio of design flow to full-bore capacity, such as 0.8"),
        "min_velocity": (0.2, 1.5, "m/s (2 ft/s is 0.61 m/s)"),
        "max_velocity": (1.5, 10.0, "m/s (10 ft/s is 3.05 m/s)"),
        "near_critical_band": (0.05, 0.5, "a band of Froude numbers around 1, such as 0.2 for 0.8 to 1.2"),
        "min_shear": (0.2, 8.0, "Pa"),
        "min_slope": (0.0001, 0.05, "m/m (0.4 % is 0.004)"),
        "min_diameter_mm": (50.0, 600.0, "mm (8 in is 200 mm)"),
        "min_cover_m": (0.2, 3.0, "m (3 ft is 0.91 m)"),
        "max_spacing_m": (20.0, 400.0, "m (400 ft is 121.92 m)"),
    }
)


def unusual_values(settings: RuleSettings) -> list[tuple[str, str]]:
    """``(key, message)`` for every threshold far outside its usual range (``USUAL_RANGES``).

    Examples
    --------
    >>> unusual_values(RuleSettings(min_slope=DiameterTable.constant(0.4), min_cover_m=3.5))  # the values as SI
    [('rules.min_slope', 'rules.min_slope = 0.4 lies outside the usual 0.0001 to 0.05; expected m/m (0.4 % is 0.004)'), ('rules.min_cover_m', 'rules.min_cover_m = 3.5 lies outside the usual 0.2 to 3; expected m (3 ft is 0.91 m)')]
    """
    found = []
    si_keys = {setting: si_key for setting, _, si_key, _ in UNIT_KEYS}
    for name, (low, high, unit) in USUAL_RANGES.items():
        value = getattr(settings, name)
        values = value.values if isinstance(value, DiameterTable) else () if value is None else (value,)
        odd = [v for v in values if np.isfinite(v) and not low <= v <= high]
        key = f"rules.{si_keys.get(name, name)}"
        if odd:
            found.append((key, f"{key} = {odd[0]:g} lies outside the usual {low:g} to {high:g}; expected {unit}"))
    return found
