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
        if not isinstance(value, str) or normalise_unit(value) not in accepted:
            check.fail(f"{key}.{name}", f"a {quantity} unit, one of {', '.join(SPELLING[u] for u in accepted)}", value)
            value = default
        units[name] = normalise_unit(value)
    return MappingProxyType(units)


def _shape_map(check: ConfigProblems, data: object, key: str) -> Mapping[str, str]:
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


def parse_layer_source(check: ConfigProblems, data: object, key: str, folder: Path) -> LayerSource:
    """``[pipes]``, ``[manholes]`` or ``[catchments]`` (``key``); a relative path resolves against ``folder``."""
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
