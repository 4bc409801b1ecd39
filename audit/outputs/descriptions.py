"""What each computed field of audit.gpkg means, stored in the GeoPackage itself (``gpkg_data_columns``).

The GeoPackage schema extension (OGC 12-128r18, GeoPackage 1.3, section F.9 "Schema") gives
every column a title and a description; a desktop GIS shows them beside the field. Each computed
column gets a short title with its unit (``Design flow [l/s]``) and the description of
docs/outputs.md, with the unit of the system it is written in; each ``flag_<code>`` column says
which flag it marks. The user's own fields are left undescribed: their meaning is theirs. Each
layer's description in ``gpkg_contents`` is the caution: the results are a screening aid.
"""

from __future__ import annotations

import re
import sqlite3
from collections.abc import Mapping, Sequence

from audit.result import COLUMN_UNITS, FINDING_COLUMNS, MANHOLE_COLUMNS, PIPE_COLUMNS, output_name
from audit.units import UnitSystem

#: The prefix of the yes/no column of each flag (``flag_surcharge``).
FLAG_PREFIX = "flag_"

_SCHEMA = (
    """CREATE TABLE IF NOT EXISTS gpkg_data_columns (table_name TEXT NOT NULL, column_name TEXT NOT NULL, name TEXT, title TEXT,
       description TEXT, mime_type TEXT, constraint_name TEXT, CONSTRAINT pk_gdc PRIMARY KEY (table_name, column_name),
       CONSTRAINT gdc_tn UNIQUE (table_name, name))""",
    """CREATE TABLE IF NOT EXISTS gpkg_data_column_constraints (constraint_name TEXT NOT NULL, constraint_type TEXT NOT NULL,
       value TEXT, min NUMERIC, min_is_inclusive BOOLEAN, max NUMERIC, max_is_inclusive BOOLEAN, description TEXT,
       CONSTRAINT gdcc_ntv UNIQUE (constraint_name, constraint_type, value))""",
    """CREATE TABLE IF NOT EXISTS gpkg_extensions (table_name TEXT, column_name TEXT, extension_name TEXT NOT NULL,
       definition TEXT NOT NULL, scope TEXT NOT NULL, CONSTRAINT ge_tce UNIQUE (table_name, column_name, extension_name))""",
)
_EXTENSION = "http://www.geopackage.org/spec/#extension_schema"
_UNIT = re.compile(r"\[[^\]]*\]")


def column_texts(meanings: Mapping[str, str], units: UnitSystem) -> dict[str, tuple[str, str]]:
    """Title and description of each computed column, by its output name in ``units``.

    A column with a unit has it in its title and in place of the SI unit of its description:

    >>> from audit.units import US
    >>> column_texts({"q_full": "full-bore capacity [m3/s]"}, US)
    {'q_full_cfs': ('Full-bore capacity [cfs]', 'full-bore capacity [cfs]')}
    """
    texts = {}
    for name, meaning in meanings.items():
        unit = f"[{units.unit(COLUMN_UNITS[name][1])}]" if name in COLUMN_UNITS else None
        description = _UNIT.sub(unit, meaning, count=1) if unit and _UNIT.search(meaning) else meaning
        head = re.split(r" \[|: |; | \(", meaning, maxsplit=1)[0].strip()
        title = head[:1].upper() + head[1:] + (f" {unit}" if unit else "")
        texts[output_name(name, units)] = (title, description)
    return texts


def flag_texts(codes: Sequence[str], feature: str) -> dict[str, tuple[str, str]]:
    """Title and description of each ``flag_<code>`` column."""
    return {f"{FLAG_PREFIX}{code}": (f"Flag: {code.replace('_', ' ')}", f"true where the {feature} carries the {code} flag, else false (docs/rules.md)")
            for code in codes}  # fmt: skip


def layer_texts(layer: str, units: UnitSystem, flag_codes: Sequence[str]) -> dict[str, tuple[str, str]]:
    """Every described column of one layer of audit.gpkg (``pipes``, ``manholes`` or ``findings``)."""
    if layer == "findings":
        return {name: (name.capitalize(), meaning) for name, meaning in FINDING_COLUMNS.items()}
    meanings, feature = (PIPE_COLUMNS, "pipe") if layer == "pipes" else (MANHOLE_COLUMNS, "manhole")
    return {**column_texts(meanings, units), **flag_texts(flag_codes, feature)}


def write_descriptions(connection: sqlite3.Connection, layers: Mapping[str, Mapping[str, tuple[str, str]]]) -> None:
    """Describe columns in ``gpkg_data_columns``: ``layers`` maps a layer to the title and description of each field, by its written name."""
    for statement in _SCHEMA:
        connection.execute(statement)
    for table in ("gpkg_data_columns", "gpkg_data_column_constraints"):
        connection.execute("DELETE FROM gpkg_extensions WHERE table_name = ? AND extension_name = 'gpkg_schema'", (table,))
        connection.execute("INSERT INTO gpkg_extensions VALUES (?, NULL, 'gpkg_schema', ?, 'read-write')", (table, _EXTENSION))
    rows = [(layer, field, field, title, description) for layer, texts in layers.items() for field, (title, description) in texts.items()]
    connection.executemany("INSERT OR REPLACE INTO gpkg_data_columns (table_name, column_name, name, title, description) VALUES (?, ?, ?, ?, ?)", rows)


def write_caution(connection: sqlite3.Connection, caution: str, layers: Sequence[str]) -> None:
    """Put the caution in each layer's ``gpkg_contents.description``, which a GIS shows with the layer's properties."""
    connection.executemany("UPDATE gpkg_contents SET description = ? WHERE table_name = ?", [(caution, layer) for layer in layers])
