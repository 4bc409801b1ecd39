"""The TOML configuration, read once into frozen dataclasses.

Only ``[pipes] path`` is required; every other key has a default (see docs/config.md). Each
stage owns its settings and how they are parsed (``audit.layers.settings``,
``audit.network.settings``, ``audit.flows.settings``, ``audit.hydraulics.settings``,
``audit.rules.settings``); this module reads the file and assembles them. Every problem in the
file (unknown key, wrong type, unknown unit or choice) is collected and reported at once in one
:class:`~audit.errors.ConfigError` naming the file, the dotted key and what was expected; an
unknown key close to a known one gets a "did you mean".

>>> import tempfile, pathlib
>>> folder = pathlib.Path(tempfile.mkdtemp())
>>> _ = (folder / "town.toml").write_text('[pipes]\\npath = "town.gpkg"\\n')
>>> config = load_config(folder / "town.toml")
>>> config.pipes.path.name, config.pipes.units["diameter"], config.hydraulics.formula
('town.gpkg', 'mm', 'manning')
"""

from __future__ import annotations

import tomllib
from collections.abc import Mapping
from dataclasses import dataclass, field, replace
from pathlib import Path
from types import MappingProxyType
from typing import Any

from audit.errors import ConfigError, ConfigProblems
from audit.flows.settings import FlowOptions, parse_flows
from audit.hydraulics.settings import HydraulicsOptions, parse_hydraulics
from audit.layers.settings import (
    InputOptions,
    LayerSource,
    parse_input,
    parse_layer_source,
)
from audit.network.settings import NetworkOptions, parse_network
from audit.rules.settings import RuleSettings
from audit.units import SI, UnitSystem, parse_output

TOP_LEVEL = ("input", "pipes", "manholes", "catchments", "network", "hydraulics", "flows", "rules", "output")


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
    output_units: UnitSystem = SI  # [output] units: the system every output is written in


def _frozen(value: object) -> object:
    """A read-only deep copy of a TOML value: tables become mappings, arrays tuples."""
    if isinstance(value, dict):
        return MappingProxyType({key: _frozen(item) for key, item in value.items()})
    if isinstance(value, list):
        return tuple(_frozen(item) for item in value)
    return value


def _optional_layer(check: ConfigProblems, data: dict[str, Any], key: str, folder: Path) -> LayerSource | None:
    return parse_layer_source(check, data[key], key, folder) if key in data else None


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
    check = ConfigProblems(source)
    check.table(data, "", TOP_LEVEL)
    config = Config(
        source=source,
        pipes=parse_layer_source(check, data.get("pipes", {}), "pipes", source.parent),
        manholes=_optional_layer(check, data, "manholes", source.parent),
        catchments=_optional_layer(check, data, "catchments", source.parent),
        flows=parse_flows(check, data.get("flows", {})),
        input=parse_input(check, data.get("input", {})),
        network=parse_network(check, data.get("network", {})),
        hydraulics=parse_hydraulics(check, data.get("hydraulics", {})),
        rules_table=_frozen(check.table(data.get("rules", {}), "rules", None)),  # type: ignore[arg-type]
        output_units=parse_output(check, data.get("output", {})),
    )
    if config.flows.needs_rainfall and config.catchments is None:
        check.fail("catchments", f"a catchment layer for flows.kind = {config.flows.kind!r} (storm runoff needs areas)")
    check.raise_if_any()
    rules = RuleSettings.from_table(dict(config.rules_table), source=str(source))
    return replace(config, rules=rules)
