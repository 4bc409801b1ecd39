"""The project's error types, and the collector that reports every problem of a config file at once.

Problems in the user's data are collected as findings (see ``audit.findings``) and never raised
one at a time. Exceptions are for input that cannot be used at all: a config file that does not
parse, a layer that does not exist, a field mapping that names no field. Every message names the
file, and where it applies the layer, key, field or feature, so the CLI can print it as it is.

Each stage parses its own settings table with a :class:`ConfigProblems`, which gathers every
problem of the file under its dotted key, so the user sees them all in one message.
"""

from __future__ import annotations

import difflib
from pathlib import Path
from typing import Any


class AuditError(ValueError):
    """Base of every error the tool raises on purpose; the CLI prints it without a traceback."""


class ConfigError(AuditError):
    """A configuration file is unreadable, has an unknown key, or a value of the wrong type or unit."""


class InputError(AuditError):
    """An input layer cannot be used: missing file or layer, unmapped required field, no CRS."""


class OutputExistsError(AuditError):
    """The output folder already holds files and ``--overwrite`` was not given, or a target is an input."""


class ConfigProblems:
    """Collects every problem of one config file, so the user sees them all at once.

    >>> check = ConfigProblems(Path("town.toml"))
    >>> check.number({"snap_tolerance_m": -1}, "snap_tolerance_m", "network", 1.0)
    1.0
    >>> check.problems
    ['network.snap_tolerance_m: expected a number >= 0, got -1']
    """

    def __init__(self, source: Path) -> None:
        self.source = source
        self.problems: list[str] = []

    def fail(self, key: str, expected: str, value: object = None) -> None:
        """Record that ``key`` should hold ``expected`` (and what it held, when given)."""
        got = "" if value is None else f", got {value!r}"
        self.problems.append(f"{key}: expected {expected}{got}")

    def table(self, data: object, key: str, allowed: tuple[str, ...] | None) -> dict[str, Any]:
        """The table at ``key`` (empty if it is not a table); unknown keys are reported."""
        if not isinstance(data, dict):
            self.fail(key, "a table", data)
            return {}
        if allowed is not None:
            for name in data:
                if name not in allowed:
                    self._unknown(f"{key}.{name}" if key else name, name, allowed)
        return data

    def _unknown(self, dotted: str, name: str, allowed: tuple[str, ...]) -> None:
        close = difflib.get_close_matches(name, allowed, n=1)
        hint = f"; did you mean {close[0]!r}?" if close else f"; known keys: {', '.join(allowed)}"
        self.problems.append(f"{dotted}: unknown key{hint}")

    def text(self, data: dict[str, Any], name: str, key: str, default: str | None) -> str | None:
        """A non-empty string without a null character, else ``default`` after a reported problem."""
        value = data.get(name, default)
        if value is not None and (not isinstance(value, str) or not value.strip() or "\x00" in value):
            self.fail(f"{key}.{name}", "a non-empty string without a null character", value)
            return default
        return value

    def choice(self, data: dict[str, Any], name: str, key: str, choices: tuple[str, ...]) -> str:
        """One of ``choices`` (the first is the default)."""
        value = data.get(name, choices[0])
        if value not in choices:
            self.fail(f"{key}.{name}", "one of " + ", ".join(repr(c) for c in choices), value)
            return choices[0]
        return str(value)

    def number(self, data: dict[str, Any], name: str, key: str, default: float, *, low: float = 0.0) -> float:
        """A number ``>= low``; for ``low == 0`` zero is allowed, negative values are not.

        NaN and infinite numbers never reach here from a file: ``audit.config`` refuses them for
        every key when it reads the file.
        """
        value = data.get(name, default)
        if isinstance(value, bool) or not isinstance(value, int | float) or value < low:
            self.fail(f"{key}.{name}", f"a number >= {low:g}", value)
            return default
        return float(value)

    def raise_if_any(self) -> None:
        """Raise one :class:`ConfigError` listing every problem recorded, if there is any."""
        if self.problems:
            lines = "\n  ".join(self.problems)
            raise ConfigError(f"{self.source}: the configuration has problems:\n  {lines}")
