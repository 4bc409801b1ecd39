"""How the two audits were made, and which of their settings differ.

A difference between two audits may come from the register or from the audit itself: another
tool version, other rule thresholds, other hydraulic or flow settings. This module lists the
second kind, from the two summary.json files:

* ``version``: the tool version each audit was made with;
* ``rules.<key>``: every ``[rules]`` value, both read back into the rule settings
  (``audit.rules.RuleSettings.from_table``, which takes either unit system's keys) and written
  in the earlier audit's units (``audit.rules.as_table``), so that 0.6 m/s and 1.9685 ft/s are
  the same setting; numbers equal within ``SETTING_RTOL`` (the summary rounds US values to six
  decimals: a minimum shear of 1 Pa comes back 2e-5 off) are the same;
* ``settings.<group>.<key>``: the hydraulics, network and flow settings (and any group a later
  version adds), key by key; ``settings.flows.tc_iterations`` is an outcome, not a setting.

The output unit system is not a setting that moves a result (compare converts, and says so).
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from typing import Any

from audit.compare.reading import AuditOutput
from audit.errors import ConfigError
from audit.outputs import json_safe
from audit.rules import RuleSettings, as_table
from audit.units import UnitSystem

SETTING_RTOL = 1e-4  # summary.json rounds US values to 6 decimals: 1 Pa is 0.020885 psf, off by 2e-5; common practice, no source

#: Stands for a row of no limit (written null in summary.json) while the rules are read back.
NO_LIMIT = 1e300

#: Keys of summary.json ``settings`` that record what happened, not what was asked.
OUTCOMES = frozenset({"settings.flows.tc_iterations"})


def audit_record(audit: AuditOutput) -> dict[str, Any]:
    """What compare.json says about one audit: where it is, when and how it was made."""
    summary = audit.summary
    return {
        "path": str(audit.folder),
        "geopackage": str(audit.geopackage),
        "version": summary.get("version"),
        "created_utc": summary.get("created_utc"),
        "config": summary.get("config"),
        "units": audit.units.name,
        "rules": summary.get("rules"),
    }


def settings_differ(old: AuditOutput, new: AuditOutput) -> list[dict[str, Any]]:
    """Every setting that differs between the two audits: ``{"key", "old", "new"}``, rules in the earlier audit's units."""
    found = []
    if old.summary.get("version") != new.summary.get("version"):
        found.append({"key": "version", "old": old.summary.get("version"), "new": new.summary.get("version")})
    rules = (rules_in(audit.summary.get("rules"), old.units) for audit in (old, new))
    found += _differences(flatten(next(rules), "rules"), flatten(next(rules), "rules"))
    found += _differences(flatten(old.summary.get("settings"), "settings"), flatten(new.summary.get("settings"), "settings"))
    return [item for item in found if item["key"] not in OUTCOMES]


def rules_in(table: object, units: UnitSystem) -> object:
    """An audit's ``rules`` (as summary.json gives them, in its units) as ``units`` would write them.

    A table that does not read back as rule settings is returned as it is.

    Examples
    --------
    >>> from audit.units import SI
    >>> rules = rules_in({"min_velocity_ft_s": 1.968504, "max_spacing_ft": [[0.0, 400.0], [30.0, None]]}, SI)
    >>> round(rules["min_velocity_m_s"], 6), rules["max_spacing_m"]
    (0.6, [[0.0, 121.92], [762.0, None]])
    """
    if not isinstance(table, Mapping):
        return table
    cleaned = {}
    for key, value in table.items():
        if value is None:
            continue  # a check that is off: the default
        if isinstance(value, list):  # a table by size; a row of no limit is written null
            value = [[row[0], NO_LIMIT if row[1] is None else row[1]] if isinstance(row, list) and len(row) == 2 else row for row in value]
        cleaned[key] = value
    try:
        settings = RuleSettings.from_table(cleaned, source="summary.json")
    except ConfigError:
        return table
    written = json_safe(as_table(settings, units))
    return {key: [[start, None if limit >= NO_LIMIT / 10 else limit] for start, limit in value] if _is_rows(value) else value
            for key, value in written.items()}  # fmt: skip


def _is_rows(value: object) -> bool:
    return isinstance(value, list) and all(isinstance(row, list) and len(row) == 2 and isinstance(row[1], int | float) for row in value)


def flatten(value: object, prefix: str) -> dict[str, object]:
    """Nested tables as dotted keys; lists stay whole.

    Examples
    --------
    >>> flatten({"a": {"b": 1, "c": [1, 2]}, "d": None}, "x")
    {'x.a.b': 1, 'x.a.c': [1, 2], 'x.d': None}
    """
    if not isinstance(value, Mapping):
        return {prefix: value}
    out: dict[str, object] = {}
    for key, item in value.items():
        out |= flatten(item, f"{prefix}.{key}")
    return out


def same(first: object, second: object) -> bool:
    """Equal, numbers within ``SETTING_RTOL`` and lists element by element.

    Examples
    --------
    >>> same(0.6, 0.60001), same([[0, 121.92]], [[0, 121.92]]), same(1.0, 1.2), same("a", None)
    (True, True, False, False)
    """
    if isinstance(first, bool) or isinstance(second, bool):
        return first == second
    if isinstance(first, int | float) and isinstance(second, int | float):
        return math.isclose(first, second, rel_tol=SETTING_RTOL, abs_tol=1e-12)
    if isinstance(first, list) and isinstance(second, list):
        return len(first) == len(second) and all(same(a, b) for a, b in zip(first, second, strict=True))
    return first == second


def _differences(old: Mapping[str, object], new: Mapping[str, object]) -> list[dict[str, Any]]:
    keys = list(old) + [key for key in new if key not in old]
    return [{"key": key, "old": old.get(key), "new": new.get(key)} for key in keys if not same(old.get(key), new.get(key))]
