"""summary.json and the terminal table: counts, lengths, the settings and flow assumptions an audit ran with.

Flag counts and lengths are computed over all pipes at once: pipes are grouped by their flag
string, and only the few distinct flag sets are split on ";" and summed per code. Every value is made JSON-safe (NaN and infinities become
null, tables by diameter become lists of ``[from_diameter_mm, value]`` rows), and the file is
written with ``allow_nan=False`` so it is always valid JSON.
"""

from __future__ import annotations

import dataclasses
import json
import math
from collections.abc import Mapping
from datetime import UTC, datetime
from pathlib import Path
from typing import Any, TextIO

import numpy as np
import pandas as pd

from audit.about import CAUTION, __version__
from audit.result import AuditResult
from audit.rules import FLAG_CODES, MANHOLE_FLAG_CODES, SEVERITY_NONE, SEVERITY_OFF, SEVERITY_ORDER, DiameterTable, RuleSettings, as_table
from audit.units import SI, UNIT_SIZES, UnitSystem

#: Feature ids listed per finding code in summary.json.
EXAMPLES_PER_CODE = 5


def build_summary(result: AuditResult, *, pipes: pd.DataFrame, findings: pd.DataFrame, created: datetime | None = None) -> dict[str, Any]:
    """The content of summary.json (JSON-safe; keys documented in docs/outputs.md).

    Parameters
    ----------
    result : the audit
    pipes : the pipes with ``flags``, ``severity`` and ``length_m`` [m]
    findings : the findings as written (with ``layer``, ``feature`` and ``code``)
    created : the run's time stamp (UTC), the same in every output of one run; None: now
    """
    units = result.units
    length = f"length_{units.suffix('length')}"
    flags = flag_totals(pipes, rules=result.rules).rename(columns={"length_m": length})
    flags[length] = units.convert(flags[length].to_numpy(dtype=float), "length")
    totals = dict(result.totals)
    if "length_m" in totals:
        totals = {(length if key == "length_m" else key): value for key, value in totals.items()}
        totals[length] = None if totals[length] is None else round(float(units.convert(totals[length], "length")), 1)
    summary = {
        "tool": "sewer-audit",
        "version": __version__,
        "created_utc": (created or datetime.now(UTC)).astimezone(UTC).strftime("%Y-%m-%dT%H:%M:%SZ"),
        "config": None if result.config_path is None else str(result.config_path),
        "caution": CAUTION,
        "units": {"system": units.name, **units.units},
        "totals": totals,
        "flags": flags.to_dict(orient="index"),
        "severity": severity_counts(pipes),
        "manhole_flags": manhole_flag_counts(result),
        "programme": programme_totals(result),
        "findings": finding_counts(findings),
        "rules": rule_values(result.rules, units),
        "flows": result.settings.get("flows"),
        "settings": result.settings,
        "missing_fields": result.missing_fields,
    }
    return json_safe(summary)


def manhole_flag_counts(result: AuditResult) -> dict[str, dict[str, Any]]:
    """Per manhole flag code not switched off: its severity and the number of manholes that carry it."""
    flags = result.manholes["flags"] if result.manholes is not None and "flags" in result.manholes else pd.Series([], dtype=object)
    counts = code_totals(flags, np.zeros(len(flags)))["pipes"]  # split once per distinct flag set
    return {code: {"severity": result.rules.severity[code], "manholes": int(counts.get(code, 0))}
            for code in MANHOLE_FLAG_CODES if result.rules.severity[code] != SEVERITY_OFF}  # fmt: skip


def programme_totals(result: AuditResult) -> dict[str, Any] | None:
    """The renewal programme in a few numbers: pipes per remedy kind, review candidates, schemes and their cost."""
    pipes = result.pipe_results
    if "remedy_kind" not in pipes.columns:
        return None
    kinds = pipes["remedy_kind"].astype(object).where(pipes["remedy_kind"].notna(), "").astype(str)
    schemes = result.schemes if result.schemes is not None else pd.DataFrame()
    cost = pd.to_numeric(schemes["cost"], errors="coerce") if "cost" in schemes else pd.Series(dtype=float)
    return {
        "pipes_with_remedy": int((kinds != "").sum()),
        "by_remedy": {str(kind): int(count) for kind, count in kinds[kinds != ""].value_counts().items()},
        "review_candidates": int(pd.to_numeric(pipes["review"], errors="coerce").fillna(0).astype(bool).sum()) if "review" in pipes else 0,
        "schemes": len(schemes),
        "cost": None if cost.empty or cost.isna().any() else round(float(cost.sum()), 0),
        "currency": str(schemes["currency"].iloc[0]) if len(schemes) and "currency" in schemes else "",
    }


def write_summary(summary: Mapping[str, Any], path: Path) -> None:
    """Write ``summary`` as indented UTF-8 JSON; refuses NaN rather than writing invalid JSON."""
    path.write_text(json.dumps(summary, indent=2, allow_nan=False, ensure_ascii=False) + "\n", encoding="utf-8")


def flag_totals(pipes: pd.DataFrame, *, rules: RuleSettings) -> pd.DataFrame:
    """Pipes and length per flag code, with the code's severity.

    Returns
    -------
    one row per code (index), columns ``severity``, ``pipes`` and ``length_m`` [m]; every code
    of ``FLAG_CODES`` that is not switched off, in that order, then any other code found.
    A pipe of unknown length counts as a pipe and adds nothing to the length.
    """
    found = code_totals(pipes["flags"], pd.to_numeric(pipes["length_m"], errors="coerce").to_numpy(dtype=float, na_value=np.nan))
    live = [code for code in FLAG_CODES if rules.severity.get(code) != "off"]
    order = live + sorted(set(found.index) - set(live))
    table = found.reindex(order)
    table["pipes"] = table["pipes"].fillna(0).astype(int)
    table["length_m"] = table["length_m"].fillna(0.0)
    table.insert(0, "severity", [rules.severity.get(code) for code in order])
    return table


def code_totals(flags: pd.Series, length: np.ndarray) -> pd.DataFrame:
    """Pipes and length [m] per flag code found in ``flags`` (codes joined by ";").

    Pipes are first grouped by their whole flag string, so only the few distinct flag sets are
    split, not every pipe. A pipe of unknown length (NaN) counts and adds nothing to the length.

    Examples
    --------
    >>> code_totals(pd.Series(["a;b", "", "b", None]), np.array([1.0, 2.0, np.nan, 4.0])).to_dict("index")
    {'a': {'pipes': 1, 'length_m': 1.0}, 'b': {'pipes': 2, 'length_m': 1.0}}
    """
    text = flags.astype(object).where(flags.notna(), "").astype(str).to_numpy(dtype=object)
    sets = pd.DataFrame({"flags": text, "length_m": length}).groupby("flags")["length_m"].agg(["size", "sum"])
    codes = sets.index.to_series().str.split(";").explode()
    codes = codes[codes != ""]
    per_code = sets.loc[codes.index].set_axis(codes.to_numpy(), axis=0).groupby(level=0).sum()
    return pd.DataFrame({"pipes": per_code["size"].astype(int), "length_m": per_code["sum"].astype(float)}).rename_axis(None)


def severity_counts(pipes: pd.DataFrame) -> dict[str, int]:
    """Number of pipes per worst severity, most serious first, plus ``none`` for unflagged pipes."""
    worst = pipes["severity"].fillna("").astype(str)
    counts = {word: int((worst == word).sum()) for word in reversed(SEVERITY_ORDER)}
    counts[SEVERITY_NONE] = int(worst.isin([SEVERITY_NONE, ""]).sum())
    return counts


def finding_counts(findings: pd.DataFrame) -> dict[str, Any]:
    """Total findings and, per code, the count, the layers and up to five example feature ids."""
    grouped = findings.groupby("code", sort=True)
    codes = {
        str(code): {
            "count": len(group),
            "layers": sorted(group["layer"].astype(str).unique().tolist()),
            "examples": group["feature"].astype(str).drop_duplicates().head(EXAMPLES_PER_CODE).tolist(),
        }
        for code, group in grouped  # one pass per distinct code, a few dozen at most
    }
    return {"count": len(findings), "codes": codes}


def rule_values(rules: RuleSettings, units: UnitSystem = SI) -> dict[str, Any]:
    """The rule settings as the ``[rules]`` keys and values of ``units``; a table by size is a list of rows."""
    return {key: json_safe(value) for key, value in as_table(rules, units).items()}


def json_safe(value: Any) -> Any:
    """``value`` with every part made JSON-safe: NaN and infinities become None.

    Examples
    --------
    >>> json_safe({"a": float("nan"), "b": (1, np.float64(2.5)), "c": Path("x.toml")})
    {'a': None, 'b': [1, 2.5], 'c': 'x.toml'}
    """
    if isinstance(value, DiameterTable):
        return [[json_safe(start), json_safe(row)] for start, row in zip(value.from_diameter_mm, value.values, strict=True)]
    if dataclasses.is_dataclass(value) and not isinstance(value, type):
        return {item.name: json_safe(getattr(value, item.name)) for item in dataclasses.fields(value)}
    if isinstance(value, Mapping):
        return {str(key): json_safe(item) for key, item in value.items()}
    if isinstance(value, list | tuple | set | frozenset | np.ndarray | pd.Series):
        return [json_safe(item) for item in value]
    if isinstance(value, np.generic):
        value = value.item()
    if isinstance(value, float):
        return value if math.isfinite(value) else None
    if value is None or isinstance(value, bool | int | str):
        return value
    if value is pd.NA or value is pd.NaT:
        return None
    return str(value)


def print_summary_table(result: AuditResult, paths: Mapping[str, Path], *, file: TextIO) -> None:
    """Print the flags (code, severity, pipes, length [km]), the findings count, the outputs and the caution."""
    table = flag_totals(result.pipe_results, rules=result.rules)
    width = max([len("flag"), *map(len, table.index)])
    long_unit = "mi" if result.units.name == "us" else "km"
    per_long = float(UNIT_SIZES["length"][long_unit])
    lines = [f"{'flag':<{width}}  {'severity':<8}  {'pipes':>8}  {'length ' + long_unit:>10}"]
    for code, row in table.iterrows():
        lines.append(f"{code:<{width}}  {row['severity'] or '':<8}  {row['pipes']:>8d}  {row['length_m'] / per_long:>10.3f}")
    flood = (result.totals.get("grade_line") or {}).get("manholes_by_flood_state")
    if flood:
        lines.append(f"manholes flooding: {flood['flooding']}, surcharged: {flood['surcharged']}, not evaluated: {flood['not_evaluated']}")
    lines.append(f"data findings: {len(result.findings)}")
    lines.extend(f"{role}: {path}" for role, path in paths.items())
    lines.append(CAUTION)
    print("\n".join(lines), file=file)
