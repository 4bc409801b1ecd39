"""The TOML configuration, read once into frozen dataclasses.

Only ``[pipes] path`` is required; every other key has a default (see docs/config.md). Every
problem in the file (unknown key, wrong type, unknown unit or choice) is collected and reported
at once in one :class:`~audit._errors.ConfigError` naming the file, the dotted key and what was
expected; an unknown key close to a known one gets a "did you mean".

>>> import tempfile, pathlib
>>> folder = pathlib.Path(tempfile.mkdtemp())
>>> _ = (folder / "town.toml").write_text('[pipes]\\npath = "town.gpkg"\\n')
>>> config = load_config(folder / "town.toml")
>>> config.pipes.path.name, config.pipes.units["diameter"], config.hydraulics.formula
('town.gpkg', 'mm', 'manning')
"""

from __future__ import annotations

import difflib
import tomllib
from collections.abc import Mapping
from dataclasses import dataclass, field, replace
from pathlib import Path
from types import MappingProxyType
from typing import Any

import pyproj

from ._errors import ConfigError
from ._flow_settings import FlowOptions, parse_flows
from .rules import RuleSettings
from .units import FACTORS, SPELLING, normalise_unit

PIPE_FIELDS = (
    "id", "from_node", "to_node", "shape", "diameter", "height", "width", "upstream_invert",
    "downstream_invert", "length", "roughness", "material", "install_year", "flow",
)  # fmt: skip
"""Canonical pipe keys of ``[pipes.fields]``."""

MANHOLE_FIELDS = ("id", "rim", "invert", "depth", "inflow", "access", "population", "point_load")
"""Canonical manhole keys of ``[manholes.fields]``."""

CATCHMENT_FIELDS = ("id", "drains_to", "population", "dwellings", "occupancy", "area_ha", "runoff_coefficient",
                    "impervious_fraction")  # fmt: skip
"""Canonical catchment keys of ``[catchments.fields]``."""

PIPE_UNITS: Mapping[str, tuple[str, str]] = MappingProxyType(
    {
        "diameter": ("length", "mm"),
        "height": ("length", "mm"),
        "width": ("length", "mm"),
        "upstream_invert": ("length", "m"),
        "downstream_invert": ("length", "m"),
        "length": ("length", "m"),
        "flow": ("flow", "l/s"),
    }
)
"""Keys of ``[pipes.units]``: (quantity, default unit)."""

MANHOLE_UNITS: Mapping[str, tuple[str, str]] = MappingProxyType(
    {"rim": ("length", "m"), "invert": ("length", "m"), "depth": ("length", "m"), "inflow": ("flow", "l/s"),
     "point_load": ("flow", "l/s")}
)
"""Keys of ``[manholes.units]``: (quantity, default unit)."""

SHAPES = ("circular", "rectangular", "egg")
ENGINES = ("pyogrio", "fiona")
DIRECTIONS = ("ids", "digitised", "inverts")
FORMULAS = ("manning", "colebrook-white")
TOP_LEVEL = ("input", "pipes", "manholes", "catchments", "network", "hydraulics", "flows", "rules")


@dataclass(frozen=True)
class InputOptions:
    """``[input]``: how files are read."""

    engine: str = "pyogrio"
    sentinels: tuple[float, ...] = (-9999.0, -999.0)


@dataclass(frozen=True)
class LayerSource:
    """``[pipes]``, ``[manholes]`` or ``[catchments]``: where a layer is and how its fields map to canonical names.

    ``fields`` maps canonical key -> the user's field name (mapped keys only); ``units`` holds
    every unit key with its default filled in; ``shapes`` maps the user's shape codes to
    canonical shapes (pipes only).
    """

    path: Path
    layer: str | None = None
    crs: str | None = None
    fields: Mapping[str, str] = field(default_factory=lambda: MappingProxyType({}))
    units: Mapping[str, str] = field(default_factory=lambda: MappingProxyType({}))
    shapes: Mapping[str, str] = field(default_factory=lambda: MappingProxyType({}))


@dataclass(frozen=True)
class NetworkOptions:
    """``[network]``: how pipe ends join manholes and which way flow runs."""

    snap_tolerance_m: float = 1.0
    direction: str = "ids"
    length_tolerance_ratio: float = 0.05
    length_tolerance_m: float = 0.5


@dataclass(frozen=True)
class HydraulicsOptions:
    """``[hydraulics]``: the friction formula and its default roughness."""

    formula: str = "manning"
    manning_n: float = 0.013
    ks_mm: float = 1.5
    water_temp_c: float = 15.0


@dataclass(frozen=True)
class Config:
    """The whole configuration; ``rules_table`` is the raw ``[rules]`` table, read-only, and
    ``rules`` the thresholds parsed from it (``audit.rules.RuleSettings``)."""

    source: Path
    pipes: LayerSource
    manholes: LayerSource | None = None
    catchments: LayerSource | None = None
    flows: FlowOptions = FlowOptions()
    input: InputOptions = InputOptions()
    network: NetworkOptions = NetworkOptions()
    hydraulics: HydraulicsOptions = HydraulicsOptions()
    rules_table: Mapping[str, Any] = field(default_factory=lambda: MappingProxyType({}))
    rules: RuleSettings = RuleSettings()


class _Checker:
    """Collects every problem of one config file, so the user sees them all at once."""

    def __init__(self, source: Path) -> None:
        self.source = source
        self.problems: list[str] = []

    def fail(self, key: str, expected: str, value: object = None) -> None:
        got = "" if value is None else f", got {value!r}"
        self.problems.append(f"{key}: expected {expected}{got}")

    def table(self, data: object, key: str, allowed: tuple[str, ...] | None) -> dict[str, Any]:
        """The table at ``key`` (empty if it is not a table); unknown keys are reported."""
        if not isinstance(data, dict):
            self.fail(key, "a table", data)
            return {}
        for name in data if allowed is not None else ():
            if name not in allowed:
                self._unknown(f"{key}.{name}" if key else name, name, allowed)
        return data

    def _unknown(self, dotted: str, name: str, allowed: tuple[str, ...]) -> None:
        close = difflib.get_close_matches(name, allowed, n=1)
        hint = f"; did you mean {close[0]!r}?" if close else f"; known keys: {', '.join(allowed)}"
        self.problems.append(f"{dotted}: unknown key{hint}")

    def text(self, data: dict[str, Any], name: str, key: str, default: str | None) -> str | None:
        value = data.get(name, default)
        if value is not None and (not isinstance(value, str) or not value.strip()):
            self.fail(f"{key}.{name}", "a non-empty string", value)
            return default
        return value

    def choice(self, data: dict[str, Any], name: str, key: str, choices: tuple[str, ...]) -> str:
        value = data.get(name, choices[0])
        if value not in choices:
            self.fail(f"{key}.{name}", "one of " + ", ".join(repr(c) for c in choices), value)
            return choices[0]
        return str(value)

    def number(self, data: dict[str, Any], name: str, key: str, default: float, *, low: float = 0.0) -> float:
        """A number ``>= low``; for ``low == 0`` zero is allowed, negative values are not."""
        value = data.get(name, default)
        if isinstance(value, bool) or not isinstance(value, int | float) or value < low:
            self.fail(f"{key}.{name}", f"a number >= {low:g}", value)
            return default
        return float(value)

    def raise_if_any(self) -> None:
        if self.problems:
            lines = "\n  ".join(self.problems)
            raise ConfigError(f"{self.source}: the configuration has problems:\n  {lines}")


def _frozen(value: object) -> object:
    """A read-only deep copy of a TOML value: tables become mappings, arrays tuples."""
    if isinstance(value, dict):
        return MappingProxyType({key: _frozen(item) for key, item in value.items()})
    if isinstance(value, list):
        return tuple(_frozen(item) for item in value)
    return value


def _input_options(check: _Checker, data: object) -> InputOptions:
    table = check.table(data, "input", ("engine", "sentinels"))
    engine = check.choice(table, "engine", "input", ENGINES)
    raw = table.get("sentinels", list(InputOptions.sentinels))
    if not isinstance(raw, list) or any(isinstance(v, bool) or not isinstance(v, int | float) for v in raw):
        check.fail("input.sentinels", "an array of numbers", raw)
        raw = list(InputOptions.sentinels)
    return InputOptions(engine=engine, sentinels=tuple(float(v) for v in raw))


def _crs(check: _Checker, table: dict[str, Any], key: str) -> str | None:
    value = check.text(table, "crs", key, None)
    if value is not None:
        try:
            pyproj.CRS.from_user_input(value)
        except pyproj.exceptions.CRSError:
            check.fail(f"{key}.crs", "a CRS pyproj understands, such as 'EPSG:27700'", value)
            return None
    return value


def _field_map(check: _Checker, data: object, key: str, names: tuple[str, ...]) -> Mapping[str, str]:
    table = check.table(data, key, names)
    return MappingProxyType(
        {name: table[name] for name in names if check.text(table, name, key, None) is not None}
    )


def _unit_map(check: _Checker, data: object, key: str, spec: Mapping[str, tuple[str, str]]) -> Mapping[str, str]:
    table = check.table(data, key, tuple(spec))
    units: dict[str, str] = {}
    for name, (quantity, default) in spec.items():
        value = table.get(name, default)
        accepted = FACTORS[quantity]
        if not isinstance(value, str) or normalise_unit(value) not in accepted:
            check.fail(f"{key}.{name}", f"a {quantity} unit, one of {', '.join(SPELLING[u] for u in accepted)}", value)
            value = default
        units[name] = normalise_unit(value)
    return MappingProxyType(units)


def _shape_map(check: _Checker, data: object, key: str) -> Mapping[str, str]:
    table = check.table(data, key, None)
    shapes: dict[str, str] = {}
    for code, shape in table.items():
        if shape not in SHAPES:
            check.fail(f"{key}.{code}", "one of " + ", ".join(repr(s) for s in SHAPES), shape)
        else:
            shapes[code] = shape
    return MappingProxyType(shapes)


_LAYER_KEYS: Mapping[str, tuple[tuple[str, ...], Mapping[str, tuple[str, str]]]] = MappingProxyType(
    {"pipes": (PIPE_FIELDS, PIPE_UNITS), "manholes": (MANHOLE_FIELDS, MANHOLE_UNITS), "catchments": (CATCHMENT_FIELDS, {})}
)


def _optional_layer(check: _Checker, data: dict[str, Any], key: str, folder: Path) -> LayerSource | None:
    return _layer_source(check, data[key], key, folder) if key in data else None


def _layer_source(check: _Checker, data: object, key: str, folder: Path) -> LayerSource:
    names, units = _LAYER_KEYS[key]
    allowed = ("path", "layer", "crs", "fields") + (("units",) if units else ()) + (("shapes",) if key == "pipes" else ())
    table = check.table(data, key, allowed)
    path = check.text(table, "path", key, None)
    if path is None and "path" not in table:
        check.fail(f"{key}.path", "the path of the layer's file (required)")
    return LayerSource(
        path=(folder / (path or "")).resolve(),
        layer=check.text(table, "layer", key, None),
        crs=_crs(check, table, key),
        fields=_field_map(check, table.get("fields", {}), f"{key}.fields", names),
        units=_unit_map(check, table.get("units", {}), f"{key}.units", units),
        shapes=_shape_map(check, table.get("shapes", {}), f"{key}.shapes"),
    )


def _network_options(check: _Checker, data: object) -> NetworkOptions:
    table = check.table(data, "network", tuple(NetworkOptions.__dataclass_fields__))
    return NetworkOptions(
        snap_tolerance_m=check.number(table, "snap_tolerance_m", "network", NetworkOptions.snap_tolerance_m),
        direction=check.choice(table, "direction", "network", DIRECTIONS),
        length_tolerance_ratio=check.number(
            table, "length_tolerance_ratio", "network", NetworkOptions.length_tolerance_ratio
        ),
        length_tolerance_m=check.number(table, "length_tolerance_m", "network", NetworkOptions.length_tolerance_m),
    )


def _hydraulics_options(check: _Checker, data: object) -> HydraulicsOptions:
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


def _read_toml(source: Path) -> dict[str, Any]:
    try:
        with source.open("rb") as handle:
            return tomllib.load(handle)
    except FileNotFoundError:
        raise ConfigError(f"{source}: configuration file not found") from None
    except OSError as error:
        raise ConfigError(f"{source}: cannot read the configuration file ({error.strerror})") from None
    except tomllib.TOMLDecodeError as error:
        raise ConfigError(f"{source}: not valid TOML: {error}") from None


def load_config(path: str | Path) -> Config:
    """Read and check a TOML configuration file.

    Parameters
    ----------
    path : the TOML file; relative layer paths inside it resolve against its folder

    Returns
    -------
    the frozen :class:`Config`

    Raises
    ------
    ConfigError
        The file is missing or not TOML, or has unknown keys, wrong types, unknown units or
        choices; the message names the file and every dotted key at fault.
    """
    source = Path(path).resolve()
    data = _read_toml(source)
    check = _Checker(source)
    check.table(data, "", TOP_LEVEL)
    config = Config(
        source=source,
        pipes=_layer_source(check, data.get("pipes", {}), "pipes", source.parent),
        manholes=_optional_layer(check, data, "manholes", source.parent),
        catchments=_optional_layer(check, data, "catchments", source.parent),
        flows=parse_flows(check, data.get("flows", {})),
        input=_input_options(check, data.get("input", {})),
        network=_network_options(check, data.get("network", {})),
        hydraulics=_hydraulics_options(check, data.get("hydraulics", {})),
        rules_table=_frozen(check.table(data.get("rules", {}), "rules", None)),  # type: ignore[arg-type]
    )
    if config.flows.needs_rainfall and config.catchments is None:
        check.fail("catchments", f"a catchment layer for flows.kind = {config.flows.kind!r} (storm runoff needs areas)")
    check.raise_if_any()
    rules = RuleSettings.from_table(dict(config.rules_table), source=str(source))
    return replace(config, rules=rules)
