"""The report's design-flow section: what each outfall receives, part by part, and the assumptions."""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

import numpy as np
import pandas as pd
import pyarrow as pa
import pyarrow.compute as pc

from audit.report.html import cell, paragraph, table
from audit.units import SI, UnitSystem

MAX_OUTFALLS = 20

# per-pipe flow parts: column, heading, quantity (None: no unit), decimals
PARTS = (
    ("q_design", "Design flow", "flow", 1),
    ("q_sanitary", "Sanitary", "flow", 1),
    ("q_infiltration", "Infiltration", "flow", 1),
    ("q_storm", "Storm", "flow", 1),
    ("tc_min", "Time of concentration", "time", 1),
    ("population_served", "Population served", None, 0),
    ("area_served_ha", "Area served", "area", 2),
)


def outfall_pipes(pipes: pd.DataFrame) -> np.ndarray:
    """Positions of the pipes that discharge into a node no pipe leaves (the outfalls).

    One Arrow hash lookup of every pipe's downstream node among the upstream nodes.
    """
    into = _labels(pipes["to_node_id"])
    leaving = pc.is_in(into, value_set=_labels(pipes["from_node_id"]).drop_null(), skip_nulls=True)
    return np.flatnonzero(pc.and_not(into.is_valid(), leaving).to_numpy(zero_copy_only=False))


def _labels(column: pd.Series) -> pa.Array:
    """Node labels as an Arrow string array (nulls kept)."""
    return pa.array(column, from_pandas=True).cast(pa.string())


def flows_section(pipes: pd.DataFrame, assumptions: Mapping[str, Any] | None, *, units: UnitSystem = SI) -> str:
    """Tables of the flow parts arriving at each outfall (in ``units``) and of the flow assumptions used."""
    parts = [part for part in PARTS if part[0] in pipes.columns]
    positions = outfall_pipes(pipes)
    flow = pd.to_numeric(pipes["q_design"], errors="coerce").to_numpy(dtype=float)[positions] if "q_design" in pipes else np.zeros(positions.size)
    shown = positions[np.argsort(-np.nan_to_num(flow, nan=-1.0), kind="stable")[:MAX_OUTFALLS]]
    rows = []
    for position in shown:
        row = pipes.iloc[position]
        values = [cell(_shown(_number(row[name]), quantity, units), digits=digits + (2 if units.name == "us" and quantity == "flow" else 0))
                  for name, _, quantity, digits in parts]  # fmt: skip
        rows.append([cell(row["to_node_id"]), *values])
    headers = ("Outfall", *(heading if quantity is None else f"{heading} [{units.unit(quantity)}]" for _, heading, quantity, _ in parts))
    outfalls = table(headers, rows, numeric=(False, *([True] * len(parts))), id="outfall-table")
    settings = [(cell(key), cell(value)) for key, value in _flat(used_flow_settings(assumptions or {}))]
    more = f" The {MAX_OUTFALLS} largest of {positions.size} outfall pipes are shown." if positions.size > MAX_OUTFALLS else ""
    note = paragraph(f"Flow arriving at each outfall, by part; the assumptions below built them (docs/methods.md).{more}", class_="note")
    return outfalls + note + table(("Assumption", "Value"), settings, id="flow-assumptions")


def _shown(value: float, quantity: str | None, units: UnitSystem) -> float | None:
    """An SI value in ``units`` (None where unknown)."""
    if not np.isfinite(value):
        return None
    return value if quantity is None else float(units.convert(value, quantity))


def used_flow_settings(settings: Mapping[str, Any]) -> dict[str, Any]:
    """The flow assumptions without those another setting made unused.

    ``peaking_factor`` only for ``peaking = "constant"``, ``peaking_table`` only for a table,
    ``min_peaking_population`` only for a formula; the rainfall's ``a``, ``b``, ``c`` or its
    ``table``, whichever was given.

    Examples
    --------
    >>> used_flow_settings({"peaking": "harmon", "peaking_factor": 3.0, "peaking_table": (), "min_peaking_population": 1000.0,
    ...                     "rainfall": {"a": 330.0, "b": 6.0, "c": 0.85, "table": ()}})
    {'peaking': 'harmon', 'min_peaking_population': 1000.0, 'rainfall': {'a': 330.0, 'b': 6.0, 'c': 0.85}}
    """
    peaking = settings.get("peaking")
    unused = {"peaking_factor"} if peaking != "constant" else {"min_peaking_population"}
    unused |= {"peaking_table"} if not settings.get("peaking_table") else {"min_peaking_population"}
    used = {key: value for key, value in settings.items() if key not in unused}
    rainfall = settings.get("rainfall")
    if isinstance(rainfall, Mapping):
        dropped = {"a", "b", "c"} if rainfall.get("table") else {"table"}
        used["rainfall"] = {key: value for key, value in rainfall.items() if key not in dropped}
    return used


def _flat(settings: Mapping[str, Any], prefix: str = "") -> list[tuple[str, Any]]:
    """Nested settings as ``group.key`` rows, e.g. ``rainfall.a``; tables stay one row."""
    rows: list[tuple[str, Any]] = []
    for key, value in settings.items():
        if isinstance(value, Mapping):
            rows.extend(_flat(value, f"{prefix}{key}."))
        else:
            rows.append((f"{prefix}{key}", value))
    return rows


def _number(value: object) -> float:
    try:
        return float(value)  # type: ignore[arg-type]
    except (TypeError, ValueError):
        return float("nan")
