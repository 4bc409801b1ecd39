"""schemes.csv: the renewal programme's schemes of work, one row per scheme, in scheme-id order.

The columns are those of ``audit.renewal.SCHEME_COLUMNS``; the ones with a unit are written in
the output's system and named with it (``length_m`` / ``length_ft``, ``q_outlet_l_s`` /
``q_outlet_cfs``). The same CSV conventions as candidates.csv: UTF-8, text quoted where needed,
numbers in their shortest form, unknown values as empty cells (docs/renewal.md).
"""

from __future__ import annotations

from pathlib import Path

import pandas as pd
import pyarrow as pa
import pyarrow.csv as pacsv

from audit.outputs.candidates import csv_column
from audit.renewal import SCHEME_COLUMNS
from audit.units import SI, UnitSystem

#: The scheme columns that carry a unit: their name without it and their quantity.
SCHEME_UNITS: dict[str, tuple[str, str]] = {"length_m": ("length", "length"), "q_outlet": ("q_outlet", "flow")}

#: Decimals kept per numeric column, by the unit it is written in (cost: whole currency units).
_DECIMALS = {"m": 1, "ft": 1, "l/s": 1, "cfs": 3, "cost": 0}


def write_schemes(schemes: pd.DataFrame, path: Path, *, units: UnitSystem = SI) -> None:
    """Write the table of schemes (SI, as ``audit.renewal.Programme.schemes`` holds it) as CSV in ``units``.

    Risk is written as a whole number, cost to whole currency units; a table without schemes
    gives a file of the header alone.
    """
    columns = {}
    for name in SCHEME_COLUMNS:
        values = schemes[name] if name in schemes.columns else pd.Series([None] * len(schemes), dtype=object)
        label = name
        if name in SCHEME_UNITS:
            base, quantity = SCHEME_UNITS[name]
            label = f"{base}_{units.suffix(quantity)}"  # length_m is length_ft in US units
            values = pd.Series(units.convert(values.to_numpy(dtype=float), quantity)).round(_DECIMALS[units.unit(quantity)])
        elif name == "cost":
            values = values.astype(float).round(_DECIMALS["cost"])
        elif name in ("max_risk", "pipes"):
            values = values.astype("Float64").round().astype("Int64")
        columns[label] = csv_column(values.reset_index(drop=True), whole=False)
    pacsv.write_csv(pa.table(columns), path, pacsv.WriteOptions(quoting_style="needed"))
