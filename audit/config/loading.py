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

import errno
import math
import re
import stat
import tomllib
from collections.abc import Mapping
from dataclasses import dataclass, field, replace
from pathlib import Path
from types import MappingProxyType
from typing import Any

from audit.errors import ConfigError, ConfigProblems
from audit.flows.settings import FlowOptions, parse_flows
from audit.grade_line.settings import GradeLineSettings, parse_grade_line
from audit.hydraulics.settings import HydraulicsOptions, parse_hydraulics
from audit.layers.settings import (
    InputOptions,
    LayerSource,
    parse_input,
    parse_layer_source,
)
from audit.network.settings import NetworkOptions, parse_network
from audit.renewal.settings import RenewalSettings, parse_renewal
from audit.rules.settings import RuleSettings
from audit.units import SI, UnitSystem, parse_output, parse_title

TOP_LEVEL = ("input", "pipes", "manholes", "catchments", "network", "hydraulics", "flows", "grade_line", "rules", "renewal", "output")


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
    grade_line: GradeLineSettings = field(default_factory=GradeLineSettings)
    renewal: RenewalSettings = field(default_factory=RenewalSettings)
    title: str = ""  # [output] title: the network's name in the report and the comparison; "" for the config file's name


def _frozen(value: object) -> object:
    """A read-only deep copy of a TOML value: tables become mappings, arrays tuples."""
    if isinstance(value, dict):
        return MappingProxyType({key: _frozen(item) for key, item in value.items()})
    if isinstance(value, list):
        return tuple(_frozen(item) for item in value)
    return value


def _optional_layer(check: ConfigProblems, data: dict[str, Any], key: str, folder: Path) -> LayerSource | None:
    return parse_layer_source(check, data[key], key, folder) if key in data else None


MAX_CONFIG_BYTES = 256_000
"""A configuration file is a few kilobytes (the demo town's, commented throughout, 8 kB);
a file larger than this is not one [bytes]. It also bounds the time TOML takes over a table
header nested thousands of levels deep."""

MAX_NESTING = 16
"""Most levels of tables and arrays in a configuration ([flows.rainfall] table rows are four deep)."""

_UTF8_BOM = b"\xef\xbb\xbf"


def _resolved(path: str | Path) -> Path:
    """The absolute path of the config file, or a :class:`ConfigError` that says why there is none."""
    try:
        return Path(path).resolve()
    except ValueError:
        raise ConfigError(f"{str(path)!r}: the configuration path holds a null character") from None
    except (OSError, RuntimeError) as error:  # RuntimeError: pathlib's own word for a symbolic link that loops
        raise ConfigError(f"{path}: the configuration path cannot be used ({_why(error)})") from None


def _why(error: BaseException) -> str:
    if isinstance(error, RuntimeError) or (isinstance(error, OSError) and error.errno == errno.ELOOP):
        return "a symbolic link that loops"
    if isinstance(error, OSError) and error.errno == errno.ENAMETOOLONG:
        return "a path too long for the file system"
    return getattr(error, "strerror", None) or str(error)


def _config_text(source: Path) -> str:
    """The file's text, read only from a regular file of sensible size, decoded as UTF-8 (a BOM is allowed)."""
    try:
        info = source.stat()
    except FileNotFoundError:
        raise ConfigError(f"{source}: configuration file not found") from None
    except OSError as error:
        raise ConfigError(f"{source}: cannot read the configuration file ({_why(error)})") from None
    if stat.S_ISDIR(info.st_mode):
        raise ConfigError(f"{source}: is a folder; give the path of the TOML configuration file")
    if not stat.S_ISREG(info.st_mode):
        raise ConfigError(f"{source}: is not a file but a FIFO, a device or a socket; give the path of the TOML configuration file")
    if info.st_size > MAX_CONFIG_BYTES:
        raise ConfigError(f"{source}: is {info.st_size:,} bytes, too large for a configuration file (at most {MAX_CONFIG_BYTES:,})")
    try:
        data = source.read_bytes()
    except OSError as error:
        raise ConfigError(f"{source}: cannot read the configuration file ({_why(error)})") from None
    data = data.removeprefix(_UTF8_BOM)
    try:
        return data.decode("utf-8")
    except UnicodeDecodeError as error:
        line = data[: error.start].count(b"\n") + 1
        utf16 = " (it is UTF-16)" if data[:2] in (b"\xff\xfe", b"\xfe\xff") else ""
        raise ConfigError(f"{source}: is not UTF-8 text{utf16}: byte 0x{data[error.start]:02x} on line {line}; save the file as UTF-8") from None


# a key of MAX_NESTING or more dotted parts (bare or quoted); TOML's reader takes time that grows
# with the square of a key's parts, so such a key is refused before it is read
_DEEP_KEY = re.compile(r"""(?:(?:[A-Za-z0-9_-]+|"[^"\n]*"|'[^'\n]*')[ \t]*\.[ \t]*){""" + str(MAX_NESTING) + ",}")


def _read_toml(source: Path) -> dict[str, Any]:
    text = _config_text(source)
    deep = _DEEP_KEY.search(text)
    if deep is not None:
        line = text.count("\n", 0, deep.start()) + 1
        raise ConfigError(f"{source}: line {line}: a key of more than {MAX_NESTING} dotted parts; tables nest at most {MAX_NESTING} levels")
    try:
        return tomllib.loads(text)
    except tomllib.TOMLDecodeError as error:
        raise ConfigError(f"{source}: not valid TOML: {error}") from None
    except RecursionError:
        raise ConfigError(f"{source}: tables or arrays nest too deeply to read (at most {MAX_NESTING} levels)") from None


def _check_values(check: ConfigProblems, data: dict[str, Any]) -> None:
    """Every number finite, and tables and arrays nested at most :data:`MAX_NESTING` deep.

    TOML has ``nan`` and ``inf``, which no setting means; each is refused under its dotted key. The
    walk keeps its own stack, so no nesting can exhaust Python's.
    """
    stack: list[tuple[str, object, int]] = [(str(key), value, 1) for key, value in data.items()]
    while stack:
        key, value, depth = stack.pop()
        if isinstance(value, float) and not math.isfinite(value):
            check.fail(key, "a finite number", value)
        elif isinstance(value, dict | list) and depth >= MAX_NESTING:
            check.fail(key, f"tables and arrays nested at most {MAX_NESTING} levels deep")
        elif isinstance(value, dict):
            stack.extend((f"{key}.{name}", item, depth + 1) for name, item in value.items())
        elif isinstance(value, list):
            stack.extend((f"{key}[{index}]", item, depth + 1) for index, item in enumerate(value))


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
        The file is missing, not a regular file, not UTF-8 or not TOML, or has unknown keys,
        wrong types, numbers that are not finite, unknown units or choices; the message names
        the file and every dotted key at fault.
    """
    source = _resolved(path)
    data = _read_toml(source)
    check = ConfigProblems(source)
    _check_values(check, data)
    check.raise_if_any()  # the parsers below read only finite numbers and shallow tables
    check.table(data, "", TOP_LEVEL)
    units = parse_output(check, data.get("output", {}))
    config = Config(
        source=source,
        pipes=parse_layer_source(check, data.get("pipes", {}), "pipes", source.parent),
        manholes=_optional_layer(check, data, "manholes", source.parent),
        catchments=_optional_layer(check, data, "catchments", source.parent),
        flows=parse_flows(check, data.get("flows", {})),
        input=parse_input(check, data.get("input", {})),
        network=parse_network(check, data.get("network", {})),
        hydraulics=parse_hydraulics(check, data.get("hydraulics", {})),
        grade_line=parse_grade_line(check, data.get("grade_line", {})),
        title=parse_title(check, data.get("output", {})),
        rules_table=_frozen(check.table(data.get("rules", {}), "rules", None)),  # type: ignore[arg-type]
        output_units=units,
        renewal=parse_renewal(check, data.get("renewal", {}), units),
    )
    if config.flows.needs_rainfall and config.catchments is None:
        check.fail("catchments", f"a catchment layer for flows.kind = {config.flows.kind!r} (storm runoff needs areas)")
    check.raise_if_any()
    rules = RuleSettings.from_table(dict(config.rules_table), source=str(source))
    return replace(config, rules=rules)
