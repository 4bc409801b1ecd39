"""``[input]``, ``[pipes]``, ``[manholes]`` and ``[catchments]``: where the layers are and how their fields map.

Parsed once at config load through :class:`audit.errors.ConfigProblems`, so every bad key, field
name, unit or shape code of the file is reported at once under its dotted key. The canonical
names and default units here are the data contract of DEVELOPERS.md.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field
from pathlib import Path
from types import MappingProxyType
from typing import Any

import pyproj

from audit.errors import ConfigProblems
from audit.units import FACTORS, SPELLING, normalise_unit

PIPE_FIELDS = (
    "id", "from_node", "to_node", "kind", "shape", "diameter", "height", "width", "side_slope",
    "upstream_invert", "downstream_invert", "upstream_depth", "downstream_depth", "length",
    "roughness", "material", "install_year", "flow",
)  # fmt: skip
"""Canonical pipe keys of ``[pipes.fields]``."""

MANHOLE_FIELDS = ("id", "kind", "rim", "invert", "depth", "inflow", "access", "population", "point_load")
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
        "upstream_depth": ("length", "m"),
        "downstream_depth": ("length", "m"),
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

CATCHMENT_UNITS: Mapping[str, tuple[str, str]] = MappingProxyType({"area_ha": ("area", "ha")})
"""Keys of ``[catchments.units]``: the area field may be in ha, ac or m2 (held in hectares)."""

SHAPES = ("circular", "rectangular", "egg", "open_rectangular", "trapezoidal")
"""Canonical section shapes; ``[pipes.shapes]`` maps the user's codes to them."""

OPEN_SHAPES = ("open_rectangular", "trapezoidal")
"""Open channels: no lid, so no cover and no pressurised flow; their capacity is bank-full."""

PIPE_KINDS = ("gravity", "private", "rising_main", "siphon", "overflow", "abandoned")
"""Canonical pipe kinds; ``[pipes.kinds]`` maps the user's codes to them (docs/config.md).

gravity and private pipes are judged by the gravity rules; rising mains and siphons run under
pressure and carry flow through the network unjudged; overflow pipes join the network but carry
no design flow; abandoned pipes are kept in the output and left out of the network."""

NODE_KINDS = ("manhole", "chamber", "pump_station", "outfall")
"""Canonical node kinds; ``[manholes.kinds]`` maps the user's codes to them (docs/config.md)."""

ENGINES = ("pyogrio", "fiona")


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
    canonical shapes (pipes only); ``kinds`` the user's kind codes to canonical kinds (pipes
    and manholes); ``sentinels`` canonical key -> values that mean "unknown" in that field
    only, beside ``[input] sentinels``.
    """

    path: Path
    layer: str | None = None
    crs: str | None = None
    fields: Mapping[str, str] = field(default_factory=lambda: MappingProxyType({}))
    units: Mapping[str, str] = field(default_factory=lambda: MappingProxyType({}))
    shapes: Mapping[str, str] = field(default_factory=lambda: MappingProxyType({}))
    kinds: Mapping[str, str] = field(default_factory=lambda: MappingProxyType({}))
    sentinels: Mapping[str, tuple[float, ...]] = field(default_factory=lambda: MappingProxyType({}))


def parse_input(check: ConfigProblems, data: object) -> InputOptions:
    """``[input]`` as :class:`InputOptions`; every problem goes to ``check``."""
    table = check.table(data, "input", ("engine", "sentinels"))
    engine = check.choice(table, "engine", "input", ENGINES)
    raw = table.get("sentinels", list(InputOptions.sentinels))
    if not isinstance(raw, list) or any(isinstance(v, bool) or not isinstance(v, int | float) for v in raw):
        check.fail("input.sentinels", "an array of numbers", raw)
        raw = list(InputOptions.sentinels)
    return InputOptions(engine=engine, sentinels=tuple(float(v) for v in raw))


def _crs(check: ConfigProblems, table: dict[str, Any], key: str) -> str | None:
    value = check.text(table, "crs", key, None)
    if value is not None:
        try:
            pyproj.CRS.from_user_input(value)
        except pyproj.exceptions.CRSError:
            check.fail(f"{key}.crs", "a CRS pyproj understands, such as 'EPSG:27700'", value)
            return None
    return value


def _field_map(check: ConfigProblems, data: object, key: str, names: tuple[str, ...]) -> Mapping[str, str]:
    table = check.table(data, key, names)
    return MappingProxyType(
        {name: table[name] for name in names if check.text(table, name, key, None) is not None}
    )


def _unit_map(check: ConfigProblems, data: object, key: str, spec: Mapping[str, tuple[str, str]]) -> Mapping[str, str]:
    table = check.table(data, key, tuple(spec))
    units: dict[str, str] = {}
    for name, (quantity, default) in spec.items():
        value = table.get(name, default)
        accepted = FACTORS[quantity]
        # a unit with a stray space is refused, not trimmed: the file should say what it means
        if not isinstance(value, str) or value != value.strip() or normalise_unit(value) not in accepted:
            stray = " (without the stray space)" if isinstance(value, str) and value != value.strip() else ""
            check.fail(f"{key}.{name}", f"{'an' if quantity[0] in 'aeiou' else 'a'} {quantity} unit{stray}, one of {', '.join(SPELLING[u] for u in accepted)}", value)
            value = default
        units[name] = normalise_unit(value)
    return MappingProxyType(units)


def _code_map(check: ConfigProblems, data: object, key: str, choices: tuple[str, ...]) -> Mapping[str, str]:
    """A table of the user's codes to one of ``choices`` (``[pipes.shapes]``, ``[pipes.kinds]``, ...)."""
    table = check.table(data, key, None)
    codes: dict[str, str] = {}
    for code, value in table.items():
        if value not in choices:
            check.fail(f"{key}.{code}", "one of " + ", ".join(repr(c) for c in choices), value)
        else:
            codes[code] = value
    return MappingProxyType(codes)


def _is_number(value: object) -> bool:
    return isinstance(value, int | float) and not isinstance(value, bool)


def _sentinel_map(check: ConfigProblems, data: object, key: str, names: tuple[str, ...]) -> Mapping[str, tuple[float, ...]]:
    """``[<layer>.sentinels]``: canonical key -> a number or an array of numbers meaning "unknown"."""
    table = check.table(data, key, names)
    sentinels: dict[str, tuple[float, ...]] = {}
    for name, value in table.items():
        values = value if isinstance(value, list) else [value]
        if name not in names:
            continue
        if not values or not all(_is_number(v) for v in values):
            check.fail(f"{key}.{name}", "a number or an array of numbers", value)
            continue
        sentinels[name] = tuple(float(v) for v in values)
    return MappingProxyType(sentinels)


def _resolved(check: ConfigProblems, path: Path, key: str) -> Path:
    """The absolute path; where it cannot be resolved (a link that loops, too long), the path as given after a reported problem."""
    try:
        return path.resolve()
    except (OSError, RuntimeError) as error:  # RuntimeError: pathlib's own word for a symbolic link that loops
        why = "a symbolic link that loops" if isinstance(error, RuntimeError) else error.strerror or str(error)
        check.fail(key, f"a path that can be opened ({why})", str(path))
        return path


_LAYER_KEYS: Mapping[str, tuple[tuple[str, ...], Mapping[str, tuple[str, str]]]] = MappingProxyType(
    {"pipes": (PIPE_FIELDS, PIPE_UNITS), "manholes": (MANHOLE_FIELDS, MANHOLE_UNITS), "catchments": (CATCHMENT_FIELDS, CATCHMENT_UNITS)}
)


def parse_layer_source(check: ConfigProblems, data: object, key: str, folder: Path) -> LayerSource:
    """``[pipes]``, ``[manholes]`` or ``[catchments]`` (``key``); a relative path resolves against ``folder``."""
    names, units = _LAYER_KEYS[key]
    kinds = {"pipes": PIPE_KINDS, "manholes": NODE_KINDS}.get(key)
    allowed = ("path", "layer", "crs", "fields", "sentinels") + (("units",) if units else ()) + (("shapes",) if key == "pipes" else ())
    allowed += ("kinds",) if kinds else ()
    table = check.table(data, key, allowed)
    path = check.text(table, "path", key, None)
    if path is None and "path" not in table:
        check.fail(f"{key}.path", "the path of the layer's file (required)")
    return LayerSource(
        path=_resolved(check, folder / (path or ""), f"{key}.path"),
        layer=check.text(table, "layer", key, None),
        crs=_crs(check, table, key),
        fields=_field_map(check, table.get("fields", {}), f"{key}.fields", names),
        units=_unit_map(check, table.get("units", {}), f"{key}.units", units),
        shapes=_code_map(check, table.get("shapes", {}), f"{key}.shapes", SHAPES),
        kinds=_code_map(check, table.get("kinds", {}), f"{key}.kinds", kinds) if kinds else MappingProxyType({}),
        sentinels=_sentinel_map(check, table.get("sentinels", {}), f"{key}.sentinels", tuple(n for n in names if n != "id")),
    )
