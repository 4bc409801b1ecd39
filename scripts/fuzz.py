"""Feed the audit malformed registers and configs, and check that it never fails badly.

Each case starts from a small valid register written for it (a random tree of pipes and manholes
in a projected CRS, sometimes catchments, with a valid config that maps every field), mutates one
thing and runs ``sewer-audit run`` on it. The mutations come in categories:

* ``field values``: wrong types, empty, huge, non-finite, 1e308, decimal commas, invalid UTF-8;
* ``fields``: missing and renamed fields, odd field names, one field mapped twice;
* ``geometry``: null, empty, zero-length, non-finite, wrong type, Z and M, multi-part lines
  with empty or non-finite parts, a single-point extent, an empty layer;
* ``ids``: duplicates, unicode, whitespace, very long, numbers, ids that name nothing;
* ``topology``: loops, self-loops, disconnected parts, parallel and reversed pipes;
* ``crs``: none, geographic, far outside its area of use, mismatched between layers, in feet;
* ``config``: every key mutated (wrong types, NaN and inf, negative, huge), units with stray
  spaces, bad text encodings, deep nesting, bad paths (symlink loop, null byte, too long, a FIFO,
  a device, an input named like an output);
* ``corrupt files``: truncated, random bytes, missing sidecar files, a truncated .dbf that a
  driver reads short, corrupt geometry blobs in a GeoPackage, wrong feature counts.

Layers are written as GeoPackage, Shapefile, GeoJSON or FlatGeobuf (a format that cannot hold a
mutation falls back to GeoPackage) and read by both engines of ``[input] engine``. Most cases
run in process, in long-lived worker processes that call ``audit.cli.main``; a share runs
through the command line in a fresh interpreter. A worker that dies (a segmentation fault in a
library) is a crash of its case, and the harness goes on with a new worker.

What each case records, and what counts as a failure:

* ``traceback``: a Python traceback reached stderr;
* ``warning``: a Python warning reached stderr;
* ``crash``: the process died by a signal or exited with a code the CLI does not document;
* ``hang``: no answer within the timeout;
* ``modified input``: an input file changed (SHA-256 before and after), vanished, or a new file
  appeared beside the inputs;
* ``lost features``: the run exited 0 but the output audit.gpkg does not hold one row per input
  feature, counted by a plain reader of the input (sqlite3, json, the Shapefile and FlatGeobuf
  headers read with ``struct``: no GDAL);
* ``partial output``: a failed run left output files, or a finished one left some out;
* ``unclear message``: exit 1 or 2 without a short message that starts ``sewer-audit:`` and
  names the file.

    python scripts/fuzz.py                        # 10,000 cases, seed 16, one worker per CPU
    python scripts/fuzz.py --cases 300 --seed 3   # the subset the tests run
    python scripts/fuzz.py --case 1234 --keep /tmp/case-1234   # one case, its files kept
    python scripts/fuzz.py --first 2000 --cases 2000 --json run.jsonl   # a chunk of a long run
    python scripts/fuzz.py --table run.jsonl      # the table of the chunks saved

It prints a table per category and exits 1 if any case failed.
"""

from __future__ import annotations

import argparse
import contextlib
import datetime
import hashlib
import json
import os
import queue
import re
import selectors
import shutil
import sqlite3
import stat
import struct
import subprocess
import sys
import tempfile
import threading
import time
import traceback
import warnings
from collections import Counter
from collections.abc import Callable, Iterator, Sequence
from dataclasses import asdict, dataclass, field
from pathlib import Path
from typing import Any

SCRIPT = Path(__file__).resolve()
CATEGORIES = ("field values", "fields", "geometry", "ids", "topology", "crs", "config", "corrupt files")
FORMATS = ("gpkg", "shp", "geojson", "fgb")
DRIVERS = {"gpkg": "GPKG", "shp": "ESRI Shapefile", "geojson": "GeoJSON", "fgb": "FlatGeobuf"}
ENGINES = ("pyogrio", "fiona")
OUTPUTS = ("audit.gpkg", "summary.json", "candidates.csv", "report.html")
FAILURES = ("traceback", "warning", "crash", "hang", "modified input", "lost features", "partial output", "unclear message", "harness error")
DOCUMENTED_EXITS = (0, 1, 2)  # audit.cli: finished, unusable input, usage error (an output that would replace an input)
UTM = "EPSG:32630"  # an invented town on an invented grid: UTM zone 30N numbers, no real place
X0, Y0 = 500_000.0, 5_700_000.0
MARK_X = 512_345.125  # a coordinate no register here holds: its bytes are found and replaced in the written file
MARK_TEXT = "QQNOTUTF8QQ"  # a text no register holds, replaced by as many bytes that are not UTF-8
NOT_UTF8 = b"\xff\xfe\xc3\x28\xa0\xa1\xe2\x28\xa1\xf0\x28"
MESSAGE_LIMIT = 4000  # [characters] a message longer than this is a dump, not a message
CASE_TIMEOUT_S = 60.0
CASES_PER_WORKER = 400  # a worker is replaced after this many cases, so no state builds up


# ---------------------------------------------------------------------------------------------
# The valid register each case starts from


@dataclass
class Draft:
    """One case while it is made: the layers, the config and what to do to the written files."""

    rng: Any  # numpy Generator
    folder: Path  # the case's folder: inputs in ``in``, the output folder ``out``
    frames: dict[str, Any]  # layer -> GeoDataFrame
    config: dict[str, Any]
    formats: dict[str, str]  # layer -> file extension
    shared: bool = False  # pipes and manholes in one GeoPackage, as two layers
    edits: list[Callable[[Draft], None]] = field(default_factory=list)  # applied to the written files
    options: dict[str, dict[str, str]] = field(default_factory=dict)  # layer creation options per layer
    config_bytes: bytes | None = None  # the config file as raw bytes, instead of the TOML of ``config``
    config_arg: str | None = None  # the config path on the command line, where not the file written
    output_arg: str | None = None  # the output folder on the command line, where not ``out``
    overwrite: bool = False
    cli_only: bool = False  # the argument cannot pass through a command line (an in-process run only)
    in_process_only: bool = False

    @property
    def inputs(self) -> Path:
        return self.folder / "in"

    def path_of(self, layer: str) -> Path:
        """The file a layer is written to."""
        if self.shared and layer in ("pipes", "manholes"):
            return self.inputs / "network.gpkg"
        return self.inputs / f"{layer}.{self.formats[layer]}"

    def layer_name(self, layer: str) -> str:
        return layer

    def pick(self, options: Sequence[Any]) -> Any:
        return options[int(self.rng.integers(len(options)))]

    def rows(self, layer: str, *, most: int | None = None) -> list[int]:
        """Some rows of a layer: one, a few or all."""
        count = len(self.frames[layer])
        if count == 0:
            return []
        how = self.rng.random()
        size = 1 if how < 0.5 else count if how > 0.85 else int(self.rng.integers(1, count + 1))
        size = min(size, most or count)
        return sorted(int(row) for row in self.rng.choice(count, size=size, replace=False))


@dataclass(frozen=True)
class PathOf:
    """A config value: the relative path of a layer's file, known once the file is written."""

    layer: str


@dataclass(frozen=True)
class Raw:
    """A config value written into the TOML as it is."""

    text: str


def base_register(rng: Any) -> tuple[dict[str, Any], dict[str, Any]]:
    """A valid random register: a tree of pipes draining to one outfall, and the config that maps it."""
    import geopandas as gpd
    import numpy as np
    import shapely

    count = int(rng.integers(4, 14))  # manholes
    xy = [(X0, Y0)]
    parent, hops = [-1], [0]
    for node in range(1, count):
        up = int(rng.integers(0, node))
        angle, reach = rng.uniform(0.0, 2 * np.pi), rng.uniform(25.0, 90.0)
        xy.append((xy[up][0] + reach * np.cos(angle), xy[up][1] + reach * np.sin(angle)))
        parent.append(up)
        hops.append(hops[up] + 1)
    invert = [10.0 + 0.6 * h + rng.uniform(0.0, 0.2) for h in hops]
    names = [f"MH{node:03d}" for node in range(count)]
    manholes = gpd.GeoDataFrame(
        {
            "MH_REF": names,
            "COVER": [level + rng.uniform(1.5, 3.0) for level in invert],
            "INV": invert,
            "LOAD_LS": rng.uniform(0.0, 4.0, count).round(2),
            "POP": rng.integers(0, 300, count).astype("int32"),
            "LID": [str(rng.choice(["Y", "N", "yes"])) for _ in range(count)],
            "NODE_TYPE": ["OF" if node == 0 else "MH" for node in range(count)],
        },
        geometry=shapely.points(np.asarray(xy)),
        crs=UTM,
    )
    pipe_nodes = list(range(1, count))
    length = [float(np.hypot(xy[n][0] - xy[parent[n]][0], xy[n][1] - xy[parent[n]][1])) for n in pipe_nodes]
    pipes = gpd.GeoDataFrame(
        {
            "PIPE_REF": [f"P{n:03d}" for n in pipe_nodes],
            "US_MH": [names[n] for n in pipe_nodes],
            "DS_MH": [names[parent[n]] for n in pipe_nodes],
            "DIA_MM": rng.choice([150, 225, 300, 375, 450], len(pipe_nodes)).astype("int32"),
            "US_IL": [invert[n] - 0.05 for n in pipe_nodes],
            "DS_IL": [invert[parent[n]] + 0.02 for n in pipe_nodes],
            "LEN_M": [round(value * rng.uniform(0.97, 1.03), 2) for value in length],
            "MAT": [str(rng.choice(["VC", "PVC", "CONC", "BRICK"])) for _ in pipe_nodes],
            "LAID": [f"{int(rng.integers(1890, 2020))}-0{int(rng.integers(1, 10))}-1{int(rng.integers(0, 10))}" for _ in pipe_nodes],
            "FORM": ["C"] * len(pipe_nodes),
            "KIND": [str(rng.choice(["GRAV", "GRAV", "PRIV"])) for _ in pipe_nodes],
            "Q_LS": rng.uniform(1.0, 40.0, len(pipe_nodes)).round(2),
        },
        geometry=[shapely.LineString([xy[n], xy[parent[n]]]) for n in pipe_nodes],
        crs=UTM,
    )
    frames: dict[str, Any] = {"pipes": pipes, "manholes": manholes}
    config = _base_config(rng)
    if rng.random() < 0.3:
        frames["catchments"] = _catchments(rng, xy, names)
        config["catchments"] = {"path": PathOf("catchments"),
                                "fields": {"id": "CA_REF", "drains_to": "DRAINS", "population": "POP", "runoff_coefficient": "C"}}  # fmt: skip
        config["flows"] = {"kind": str(rng.choice(["storm", "combined"])), "rainfall": {"a": 1500.0, "b": 10.0, "c": 0.8}}
    return frames, config


def _catchments(rng: Any, xy: list[tuple[float, float]], names: list[str]) -> Any:
    import geopandas as gpd
    import shapely

    chosen = sorted({int(node) for node in rng.integers(0, len(xy), 3)})
    return gpd.GeoDataFrame(
        {
            "CA_REF": [f"C{node}" for node in chosen],
            "DRAINS": [names[node] for node in chosen],
            "POP": [int(rng.integers(10, 500)) for _ in chosen],
            "C": [round(float(rng.uniform(0.3, 0.9)), 2) for _ in chosen],
        },
        geometry=[shapely.box(xy[n][0] - 40.0, xy[n][1] - 40.0, xy[n][0] + 40.0, xy[n][1] + 40.0) for n in chosen],
        crs=UTM,
    )


def _base_config(rng: Any) -> dict[str, Any]:
    config: dict[str, Any] = {
        "input": {"engine": "pyogrio", "sentinels": [-9999]},
        "pipes": {
            "path": PathOf("pipes"),
            "fields": {"id": "PIPE_REF", "from_node": "US_MH", "to_node": "DS_MH", "diameter": "DIA_MM", "upstream_invert": "US_IL",
                       "downstream_invert": "DS_IL", "length": "LEN_M", "material": "MAT", "install_year": "LAID", "shape": "FORM",
                       "kind": "KIND"},
            "units": {"diameter": "mm", "upstream_invert": "m", "downstream_invert": "m", "length": "m"},
            "shapes": {"C": "circular"},
            "kinds": {"GRAV": "gravity", "PRIV": "private"},
        },
        "manholes": {
            "path": PathOf("manholes"),
            "fields": {"id": "MH_REF", "rim": "COVER", "invert": "INV", "inflow": "LOAD_LS", "population": "POP", "access": "LID",
                       "kind": "NODE_TYPE"},
            "kinds": {"MH": "manhole", "OF": "outfall"},
        },
        "network": {"direction": str(rng.choice(["ids", "digitised", "inverts"])), "snap_tolerance_m": 1.0},
        "hydraulics": {"formula": str(rng.choice(["manning", "colebrook-white"]))},
        "flows": {"kind": str(rng.choice(["given", "sanitary"]))},
        "output": {"units": str(rng.choice(["si", "us"]))},
    }
    if config["flows"]["kind"] == "given":
        config["pipes"]["fields"]["flow"] = "Q_LS"
    if rng.random() < 0.3:
        config["rules"] = {"min_velocity_m_s": 0.6, "min_cover_m": 0.9}
    return config


# ---------------------------------------------------------------------------------------------
# TOML text (tomllib reads, nothing in the standard library writes)

_BARE_KEY = re.compile(r"^[A-Za-z0-9_-]+$")


def toml_text(config: dict[str, Any], *, paths: Callable[[str], str]) -> str:
    """The config as TOML: scalars and arrays of each table, then its sub-tables under headers."""
    lines: list[str] = []
    _toml_table(config, (), lines, paths)
    return "\n".join(lines) + "\n"


def _toml_table(table: dict[str, Any], prefix: tuple[str, ...], lines: list[str], paths: Callable[[str], str]) -> None:
    scalars = {key: value for key, value in table.items() if not isinstance(value, dict)}
    if prefix and (scalars or not any(isinstance(v, dict) for v in table.values())):
        lines.append("[" + ".".join(_toml_key(part) for part in prefix) + "]")
    lines.extend(f"{_toml_key(key)} = {toml_value(value, paths=paths)}" for key, value in scalars.items())
    for key, value in table.items():
        if isinstance(value, dict):
            _toml_table(value, (*prefix, key), lines, paths)


def _toml_key(key: str) -> str:
    return key if _BARE_KEY.match(key) else _toml_string(key)


def _toml_string(text: str) -> str:
    escaped = text.replace("\\", "\\\\").replace('"', '\\"')
    escaped = "".join(f"\\u{ord(char):04X}" if ord(char) < 0x20 or ord(char) == 0x7F else char for char in escaped)
    return f'"{escaped}"'


def toml_value(value: Any, *, paths: Callable[[str], str]) -> str:
    """One value as TOML: strings escaped, NaN and inf as TOML writes them, arrays and inline tables."""
    if isinstance(value, Raw):
        return value.text
    if isinstance(value, PathOf):
        return _toml_string(paths(value.layer))
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, int):
        return str(value)
    if isinstance(value, float):
        return "nan" if value != value else "inf" if value == float("inf") else "-inf" if value == float("-inf") else repr(value)
    if isinstance(value, str):
        return _toml_string(value)
    if isinstance(value, datetime.date | datetime.datetime | datetime.time):
        return value.isoformat()
    if isinstance(value, list | tuple):
        return "[" + ", ".join(toml_value(item, paths=paths) for item in value) + "]"
    if isinstance(value, dict):
        return "{" + ", ".join(f"{_toml_key(k)} = {toml_value(v, paths=paths)}" for k, v in value.items()) + "}"
    raise TypeError(f"no TOML for {value!r}")


# ---------------------------------------------------------------------------------------------
# Writing the files


def write_case(draft: Draft) -> None:
    """Write every layer (GeoPackage where the format cannot hold the mutation), the edits, the config."""
    draft.inputs.mkdir(parents=True, exist_ok=True)
    if draft.shared:
        draft.path_of("pipes").unlink(missing_ok=True)
    for layer, frame in draft.frames.items():
        for fallback in ("geojson", "gpkg", None):
            try:
                _write_layer(draft, layer, frame)
                break
            except Exception:  # the library refused this mutation in this format: the next one
                if fallback is None or draft.shared:
                    raise
                for stale in draft.inputs.glob(f"{layer}.*"):
                    stale.unlink()
                draft.formats[layer] = fallback
                draft.options.pop(layer, None)
    for edit in draft.edits:
        edit(draft)
    config = draft.inputs / "audit.toml"
    if draft.config_bytes is not None:
        config.write_bytes(draft.config_bytes)
    else:
        config.write_text(toml_text(draft.config, paths=lambda layer: draft.path_of(layer).name), encoding="utf-8")


def _write_layer(draft: Draft, layer: str, frame: Any) -> None:
    import pyogrio

    ext = "gpkg" if draft.shared and layer in ("pipes", "manholes") else draft.formats[layer]
    options = {"SPATIAL_INDEX": "NO"} if ext == "fgb" else {}
    options |= draft.options.get(layer, {})
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        pyogrio.write_dataframe(frame, draft.path_of(layer), layer=draft.layer_name(layer), driver=DRIVERS[ext],
                                layer_options=options or None, append=draft.shared and layer == "manholes")  # fmt: skip


def replace_bytes(path: Path, old: bytes, new: bytes) -> int:
    """Replace every ``old`` by ``new`` (of the same length) in a file; how many were replaced."""
    assert len(old) == len(new)
    data = path.read_bytes()
    path.write_bytes(data.replace(old, new))
    return data.count(old)


def layer_files(draft: Draft, layer: str) -> list[Path]:
    """The files of a layer (a Shapefile's sidecars too)."""
    path = draft.path_of(layer)
    if path.suffix == ".shp":
        return sorted(path.parent.glob(path.stem + ".*"))
    return [path]


def _mark_text_everywhere(draft: Draft) -> None:
    """Put bytes that are not UTF-8 wherever the text marker was written."""
    for layer in draft.frames:
        for path in layer_files(draft, layer):
            replace_bytes(path, MARK_TEXT.encode(), NOT_UTF8)


def _mark_number_everywhere(draft: Draft, value: float) -> None:
    """Replace the marker coordinate by ``value`` in every layer file (binary doubles and GeoJSON text)."""
    for layer in draft.frames:
        for path in layer_files(draft, layer):
            if path.suffix == ".geojson":
                text = {float("nan"): "NaN", float("inf"): "Infinity", float("-inf"): "-Infinity"}.get(value, repr(value))
                data = path.read_text(encoding="utf-8", errors="surrogateescape").replace(repr(MARK_X), text)
                path.write_text(data, encoding="utf-8", errors="surrogateescape")
            elif path.suffix in (".gpkg", ".shp", ".fgb"):
                replace_bytes(path, struct.pack("<d", MARK_X), struct.pack("<d", value))


def gpkg_sql(path: Path, statements: Sequence[tuple[str, tuple[Any, ...]]]) -> None:
    """Run SQL on a written GeoPackage (to store what GDAL would not write)."""
    with contextlib.closing(sqlite3.connect(path)) as connection:
        for name in ("ST_IsEmpty", "ST_MinX", "ST_MaxX", "ST_MinY", "ST_MaxY"):  # GDAL's functions, called by the R-tree triggers
            connection.create_function(name, 1, lambda blob: 0)
        for statement, parameters in statements:
            connection.execute(statement, parameters)
        connection.commit()


def gpkg_geometry_column(path: Path, table: str) -> str:
    with contextlib.closing(sqlite3.connect(f"file:{path}?mode=ro", uri=True)) as connection:
        row = connection.execute("SELECT column_name FROM gpkg_geometry_columns WHERE table_name = ?", (table,)).fetchone()
    return str(row[0]) if row else "geom"


def gpkg_blob(wkb: bytes, *, srs_id: int = 32630) -> bytes:
    """A GeoPackage geometry: the ``GP`` header (version 0, little endian, no envelope) and the WKB."""
    return b"GP" + bytes([0, 0b00000001]) + struct.pack("<i", srs_id) + wkb


def set_gpkg_geometry(draft: Draft, layer: str, rows: Sequence[int], blobs: Sequence[bytes | None]) -> None:
    """Store raw geometry blobs in some rows of a layer written as GeoPackage (fid = row + 1)."""
    path = draft.path_of(layer)
    column = gpkg_geometry_column(path, draft.layer_name(layer))
    table = draft.layer_name(layer)
    gpkg_sql(path, [(f'UPDATE "{table}" SET "{column}" = ? WHERE fid = ?', (blob, row + 1)) for row, blob in zip(rows, blobs, strict=True)])


# ---------------------------------------------------------------------------------------------
# Mutations: each takes the draft, changes it, and says what it did

Mutation = Callable[[Draft], str]
MUTATIONS: dict[str, list[Mutation]] = {category: [] for category in CATEGORIES}


def mutation(category: str) -> Callable[[Mutation], Mutation]:
    def register(function: Mutation) -> Mutation:
        MUTATIONS[category].append(function)
        return function

    return register


def _mapped(draft: Draft, *, numeric: bool | None = None) -> tuple[str, str, str]:
    """A (layer, canonical key, field) that the config maps and the layer holds."""
    import pandas as pd

    choices = []
    for layer, frame in draft.frames.items():
        for key, name in draft.config.get(layer, {}).get("fields", {}).items():
            if name in frame.columns:
                is_number = pd.api.types.is_numeric_dtype(frame[name].dtype)
                if numeric is None or numeric == is_number:
                    choices.append((layer, key, name))
    return draft.pick(choices)


def _as_text_column(frame: Any, name: str) -> None:
    """A numeric field rewritten as a text field holding the same numbers (as a CSV import leaves it)."""
    frame[name] = [None if value != value else str(value) for value in frame[name].astype(object)]


BAD_NUMBER_TEXT = ("abc", "", " ", "0,225", "1.234,5", "12 mm", "1e400", "-1e400", "NaN", "inf", "-Infinity", "0x1F", "1_000",
                   "½", "١٢٣", "3.5.1", "+-2", "—", "None", "TRUE", "1e-400", "9" * 400, " 225 ", "225\n", "\t", "∞",
                   "1e308", "-1e308", "-9999", "1,5e3", "12\x01")  # fmt: skip
SPECIAL_NUMBERS = (float("nan"), float("inf"), float("-inf"), 1e308, -1e308, 1.7976931348623157e308, 5e-324, -0.0, 0.0, -1.0,
                   9.2e18, -9.2e18, 2.0**53 + 1, 1e-300, -9999.0)  # fmt: skip
ODD_TEXT = ("\x00", "\x1b[31mred", "<script>alert(1)</script>", "a\r\nb", "\u202eevil", "'; DROP TABLE pipes; --", '"', "\\",
            "=1+2", "é" * 300, "💩", "\u200b", " ", "", "a" * 100_000)  # fmt: skip


def _fill(draft: Draft, *, numeric: bool | None, prepare: Callable[[Any, str], None] | None, pool: Sequence[Any]) -> tuple[str, str]:
    """A mapped field (``prepare``d first), some of its rows given one value drawn from ``pool``; the layer and what was done."""
    layer, key, name = _mapped(draft, numeric=numeric)
    frame = draft.frames[layer]
    if prepare is not None:
        prepare(frame, name)
    rows = draft.rows(layer)
    value = draft.pick(pool) if pool else None
    frame.loc[frame.index[rows], name] = value
    shown = repr(value)
    return layer, f"{layer}.{name} ({key}, {frame[name].dtype}) rows {rows} = {shown[:40]}{'...' if len(shown) > 40 else ''}"


def _as_float(frame: Any, name: str) -> None:
    frame[name] = frame[name].astype("float64")


def _as_float_if_integer(frame: Any, name: str) -> None:
    if frame[name].dtype.kind in "iu":
        _as_float(frame, name)


@mutation("field values")
def number_as_bad_text(draft: Draft) -> str:
    return _fill(draft, numeric=True, prepare=_as_text_column, pool=BAD_NUMBER_TEXT)[1]


@mutation("field values")
def special_number(draft: Draft) -> str:
    return _fill(draft, numeric=True, prepare=_as_float, pool=SPECIAL_NUMBERS)[1]


@mutation("field values")
def integer_extremes(draft: Draft) -> str:
    layer, key, name = _mapped(draft, numeric=True)
    frame = draft.frames[layer]
    value = draft.pick((2**63 - 1, -(2**63), 2**31 - 1, -(2**31), 0))
    frame[name] = frame[name].astype("float64").fillna(0).round().astype("int64")
    rows = draft.rows(layer)
    frame.loc[frame.index[rows], name] = value
    return f"{layer}.{name} ({key}) int64, rows {rows} = {value}"


@mutation("field values")
def empty_values(draft: Draft) -> str:
    return _fill(draft, numeric=None, prepare=_as_float_if_integer, pool=())[1]


@mutation("field values")
def text_not_utf8(draft: Draft) -> str:
    layer, detail = _fill(draft, numeric=False, prepare=None, pool=(MARK_TEXT,))
    draft.edits.append(_mark_text_everywhere)
    if draft.formats[layer] == "shp" and draft.rng.random() < 0.5:
        draft.options[layer] = {"ENCODING": "UTF-8"}
    return f"{detail}, replaced by bytes that are not UTF-8"


@mutation("field values")
def odd_text(draft: Draft) -> str:
    return _fill(draft, numeric=False, prepare=None, pool=ODD_TEXT)[1]


@mutation("field values")
def decimal_commas(draft: Draft) -> str:
    layer, key, name = _mapped(draft, numeric=True)
    frame = draft.frames[layer]
    frame[name] = [None if value != value else str(value).replace(".", ",") for value in frame[name].astype(object)]
    return f"{layer}.{name} ({key}) every value with a decimal comma"


@mutation("field values")
def wrong_field_type(draft: Draft) -> str:
    import pandas as pd

    layer, key, name = _mapped(draft)
    frame = draft.frames[layer]
    kind = draft.pick(("bool", "date", "datetime", "float ids", "int text"))
    if kind == "bool":
        frame[name] = [bool(i % 2) for i in range(len(frame))]
    elif kind == "date":
        frame[name] = pd.to_datetime(["1987-10-31"] * len(frame)).date
    elif kind == "datetime":
        frame[name] = pd.to_datetime(["2001-02-03 04:05:06"] * len(frame))
    elif kind == "float ids":
        frame[name] = [float(i) + 0.5 for i in range(len(frame))]
    else:
        frame[name] = [str(i) for i in range(len(frame))]
    return f"{layer}.{name} ({key}) is a {kind} field"


@mutation("field values")
def install_dates(draft: Draft) -> str:
    frame = draft.frames["pipes"]
    rows = draft.rows("pipes")
    value = draft.pick(("31/02/1987", "0000-00-00", "99999-01-01", "1987-13-45", "2001-02-03T04:05:06+05:00", "87", "1e308", "-1",
                        "1987.5", "١٩٨٧", "13/13/1987", "1800", "2200", "2201", " ", "1987-10-31 junk"))  # fmt: skip
    frame.loc[frame.index[rows], "LAID"] = value
    return f"pipes.LAID rows {rows} = {value!r}"


@mutation("fields")
def field_not_in_layer(draft: Draft) -> str:
    layer, key, _ = _mapped(draft)
    name = draft.pick(("NO_SUCH", "dia mm", "", " ", "PIPE_REF ", "Ø", "x" * 300))
    draft.config[layer]["fields"][key] = name
    return f"{layer}.fields.{key} = {name[:40]!r}, not a field of the layer"


@mutation("fields")
def field_renamed(draft: Draft) -> str:
    layer, _, name = _mapped(draft)
    frame = draft.frames[layer]
    new = draft.pick((name.lower(), name.title(), f"{name} ", f" {name}", name.replace("_", " "), f"{name}_RENAMED_LONG"))
    frame.rename(columns={name: new}, inplace=True)
    return f"{layer} field {name!r} renamed {new!r}; the config still says {name!r}"


@mutation("fields")
def odd_field_name(draft: Draft) -> str:
    layer, key, name = _mapped(draft)
    frame = draft.frames[layer]
    new = draft.pick(("fid", "FID", "geom", "geometry", "OGC_FID", "id", "ДИАМЕТР", "DIÄ", "a b c", "123", "x" * 63, "select",
                      "audit_q_design", "q_design_l_s", "flags", "severity", "height_mm"))  # fmt: skip
    if new.lower() in {str(c).lower() for c in frame.columns}:
        new = new + "_1"
    frame.rename(columns={name: new}, inplace=True)
    draft.config[layer]["fields"][key] = new
    draft.shared = False  # a GeoPackage refuses some of these names: the layer may fall back to GeoJSON
    return f"{layer} field {name!r} renamed {new!r} and mapped so"


@mutation("fields")
def fields_equal_but_for_case(draft: Draft) -> str:
    layer, _, name = _mapped(draft)
    frame = draft.frames[layer]
    frame[name.lower() if name.lower() != name else name.upper()] = frame[name]
    draft.shared = False  # a GeoPackage cannot hold both names: the layer falls back to GeoJSON
    return f"{layer} holds {name!r} and the same name in other case"


@mutation("fields")
def field_dropped(draft: Draft) -> str:
    layer, key, name = _mapped(draft)
    draft.frames[layer] = draft.frames[layer].drop(columns=[name])
    return f"{layer} field {name!r} ({key}) dropped; still mapped"


@mutation("fields")
def no_fields(draft: Draft) -> str:
    layer = draft.pick([name for name in draft.frames if name != "catchments"])
    frame = draft.frames[layer]
    draft.frames[layer] = frame[[frame.geometry.name]]
    keep = draft.rng.random() < 0.5
    if not keep:
        draft.config[layer]["fields"] = {}
    return f"{layer} has no fields but its geometry; mappings {'kept' if keep else 'removed'}"


@mutation("fields")
def one_field_twice(draft: Draft) -> str:
    layer, key, name = _mapped(draft)
    other = draft.pick([k for k in draft.config[layer]["fields"] if k != key] or [key])
    draft.config[layer]["fields"][other] = name
    return f"{layer}.fields.{other} = {name!r}, the field of {key} too"


@mutation("fields")
def mapped_to_geometry(draft: Draft) -> str:
    layer, key, _ = _mapped(draft)
    name = draft.pick(("geometry", "geom", "fid", "SHAPE", "wkb_geometry"))
    draft.config[layer]["fields"][key] = name
    return f"{layer}.fields.{key} = {name!r}"


def _line(draft: Draft, row: int) -> Any:
    return draft.frames["pipes"].geometry.iloc[row]


def _set_geometry(draft: Draft, layer: str, rows: Sequence[int], values: Sequence[Any]) -> None:
    import geopandas as gpd

    frame = draft.frames[layer]
    geometry = frame.geometry.to_numpy().copy()
    for row, value in zip(rows, values, strict=True):
        geometry[row] = value
    draft.frames[layer] = frame.set_geometry(gpd.GeoSeries(geometry, index=frame.index, crs=frame.crs))


@mutation("geometry")
def null_or_empty(draft: Draft) -> str:
    import shapely

    layer = draft.pick(("pipes", "pipes", "manholes"))
    rows = draft.rows(layer)
    kind = draft.pick(("null", "LINESTRING EMPTY", "MULTILINESTRING EMPTY", "POINT EMPTY", "GEOMETRYCOLLECTION EMPTY", "POLYGON EMPTY"))
    value = None if kind == "null" else shapely.from_wkt(kind)
    _set_geometry(draft, layer, rows, [value] * len(rows))
    return f"{layer} rows {rows} geometry {kind}"


@mutation("geometry")
def zero_length(draft: Draft) -> str:
    import shapely

    rows = draft.rows("pipes")
    values = [shapely.LineString([_line(draft, r).coords[0]] * 2) for r in rows]
    _set_geometry(draft, "pipes", rows, values)
    return f"pipes rows {rows} of zero length"


@mutation("geometry")
def non_finite_coordinate(draft: Draft) -> str:
    import shapely

    layer = draft.pick(("pipes", "pipes", "manholes"))
    rows = draft.rows(layer, most=3)
    value = draft.pick((float("nan"), float("inf"), float("-inf"), 1e308, -1e308))
    if layer == "pipes":
        values = [shapely.LineString([(MARK_X, _line(draft, r).coords[0][1]), _line(draft, r).coords[-1]]) for r in rows]
    else:
        values = [shapely.Point(MARK_X, draft.frames["manholes"].geometry.iloc[r].y) for r in rows]
    _set_geometry(draft, layer, rows, values)
    draft.edits.append(lambda d: _mark_number_everywhere(d, value))
    return f"{layer} rows {rows}: an x coordinate is {value!r}"


@mutation("geometry")
def wrong_type(draft: Draft) -> str:
    import shapely

    layer = draft.pick(("pipes", "manholes"))
    rows = draft.rows(layer)
    frame = draft.frames[layer]
    x, y = frame.geometry.iloc[0].centroid.x, frame.geometry.iloc[0].centroid.y
    kind = draft.pick(("POINT", "POLYGON", "MULTIPOINT", "COLLECTION", "LINE", "MULTIPOLYGON"))
    value = {
        "POINT": shapely.Point(x, y),
        "POLYGON": shapely.box(x, y, x + 5, y + 5),
        "MULTIPOINT": shapely.MultiPoint([(x, y), (x + 3, y)]),
        "COLLECTION": shapely.GeometryCollection([shapely.LineString([(x, y), (x + 9, y)]), shapely.Point(x, y)]),
        "LINE": shapely.LineString([(x, y), (x + 9, y)]),
        "MULTIPOLYGON": shapely.MultiPolygon([shapely.box(x, y, x + 5, y + 5)]),
    }[kind]
    _set_geometry(draft, layer, rows, [value] * len(rows))
    return f"{layer} rows {rows} are {kind}"


@mutation("geometry")
def z_and_m(draft: Draft) -> str:
    import numpy as np
    import shapely

    layer = draft.pick(("pipes", "manholes"))
    kind = draft.pick(("Z", "Z nan", "M", "ZM"))
    frame = draft.frames[layer]
    if kind.startswith("Z") and kind != "ZM":
        z = float("nan") if kind == "Z nan" else 12.5
        values = [shapely.linestrings(np.c_[shapely.get_coordinates(g), np.full(len(shapely.get_coordinates(g)), z)])
                  if g.geom_type == "LineString" else shapely.points(np.r_[shapely.get_coordinates(g)[0], z]) for g in frame.geometry]  # fmt: skip
        _set_geometry(draft, layer, list(range(len(frame))), values)
        return f"{layer} geometry with {kind}"
    draft.formats[layer] = "gpkg" if not draft.shared else draft.formats[layer]
    rows = list(range(len(frame)))
    wkts = [_measured_wkt(g, kind) for g in frame.geometry]
    draft.edits.append(lambda d: set_gpkg_geometry(d, layer, rows, [shapely.to_wkb(shapely.from_wkt(w), flavor="iso") for w in wkts]))
    return f"{layer} geometry with {kind} (GeoPackage blobs)"


def _measured_wkt(geometry: Any, kind: str) -> str:
    import numpy as np

    coords = np.asarray(geometry.coords) if geometry.geom_type in ("LineString", "Point") else np.zeros((0, 2))
    extra = " 1.5" if kind == "M" else " 2.0 1.5"
    body = ", ".join(f"{float(x)!r} {float(y)!r}{extra}" for x, y in coords[:, :2])
    return f"{geometry.geom_type.upper()} {kind} ({body})"


@mutation("geometry")
def multipart_lines(draft: Draft) -> str:
    import shapely

    rows = draft.rows("pipes")
    kind = draft.pick(("joined", "gap", "reversed part", "empty part", "non-finite part", "one part", "many parts", "zero-length part"))
    values = [_multipart(_line(draft, r), kind) for r in rows]
    _set_geometry(draft, "pipes", rows, values)
    if kind == "non-finite part":
        value = draft.pick((float("nan"), float("inf")))
        draft.edits.append(lambda d: _mark_number_everywhere(d, value))
    elif kind == "empty part" and draft.formats["pipes"] != "geojson":
        draft.formats["pipes"] = "gpkg" if not draft.shared else draft.formats["pipes"]
        wkbs = [shapely.to_wkb(v) for v in values]
        draft.edits.append(lambda d: set_gpkg_geometry(d, "pipes", rows, [_with_empty_part(w) for w in wkbs]))
    return f"pipes rows {rows}: multi-part lines, {kind}"


def _multipart(line: Any, kind: str) -> Any:
    import numpy as np
    import shapely

    (x0, y0), (x1, y1) = line.coords[0], line.coords[-1]
    xm, ym = (x0 + x1) / 2, (y0 + y1) / 2
    first, second = [(x0, y0), (xm, ym)], [(xm, ym), (x1, y1)]
    parts = {
        "joined": [first, second],
        "gap": [first, [(xm + 3, ym + 3), (x1, y1)]],
        "reversed part": [first, second[::-1]],
        "empty part": [first, second],
        "non-finite part": [first, [(MARK_X, ym), (x1, y1)]],
        "one part": [[(x0, y0), (x1, y1)]],
        "many parts": [[(x0 + (x1 - x0) * t, y0 + (y1 - y0) * t), (x0 + (x1 - x0) * (t + 0.02), y0 + (y1 - y0) * (t + 0.02))]
                       for t in np.linspace(0, 0.98, 50)],
        "zero-length part": [first, [(xm, ym), (xm, ym)], second],
    }[kind]
    return shapely.MultiLineString(parts)


def _with_empty_part(wkb: bytes) -> bytes:
    """A multi-line's WKB with one more part, an empty line (shapely will not build one: written by hand).

    WKB: byte order, type (5, MultiLineString), the number of parts, then each part's own WKB; an
    empty LineString is its byte order, type 2 and zero points. Source: OGC Simple Features, part 1
    (OGC 06-103r4), sec. 8.2.
    """
    import shapely

    parts = [shapely.to_wkb(part, byte_order=1) for part in shapely.get_parts(shapely.from_wkb(wkb))]
    empty = b"\x01" + struct.pack("<II", 2, 0)
    return b"\x01" + struct.pack("<II", 5, len(parts) + 1) + b"".join(parts) + empty


@mutation("geometry")
def single_point_extent(draft: Draft) -> str:
    import shapely

    x, y = X0 + 7.0, Y0 + 7.0
    pipes, manholes = draft.frames["pipes"], draft.frames["manholes"]
    _set_geometry(draft, "pipes", list(range(len(pipes))), [shapely.LineString([(x, y), (x, y)])] * len(pipes))
    which = draft.pick(("all manholes there", "manholes elsewhere"))
    if which == "all manholes there":
        _set_geometry(draft, "manholes", list(range(len(manholes))), [shapely.Point(x, y)] * len(manholes))
    return f"every pipe a zero-length line at one point; {which}"


@mutation("geometry")
def empty_layer(draft: Draft) -> str:
    layer = draft.pick(("pipes", "manholes", "catchments" if "catchments" in draft.frames else "pipes"))
    draft.frames[layer] = draft.frames[layer].iloc[0:0]
    return f"{layer} has no features"


@mutation("geometry")
def every_geometry_null(draft: Draft) -> str:
    layer = draft.pick(("pipes", "manholes"))
    rows = list(range(len(draft.frames[layer])))
    _set_geometry(draft, layer, rows, [None] * len(rows))
    return f"{layer}: no feature has a geometry"


@mutation("geometry")
def odd_lines(draft: Draft) -> str:
    import shapely

    rows = draft.rows("pipes", most=3)
    kind = draft.pick(("closed ring", "figure eight", "repeated vertices", "20000 vertices", "huge coordinates", "tiny extent", "spike"))
    values = [shapely.LineString(_odd_vertices(kind, *_line(draft, row).coords[0], *_line(draft, row).coords[-1])) for row in rows]
    _set_geometry(draft, "pipes", rows, values)
    return f"pipes rows {rows}: {kind}"


def _odd_vertices(kind: str, x0: float, y0: float, x1: float, y1: float) -> Any:
    """The vertices of a line of the given oddity between (x0, y0) and (x1, y1)."""
    import numpy as np

    if kind == "20000 vertices":
        return np.c_[np.linspace(x0, x1, 20000), np.linspace(y0, y1, 20000)]
    return {
        "closed ring": [(x0, y0), (x1, y1), (x1, y0), (x0, y0)],
        "figure eight": [(x0, y0), (x1, y1), (x1, y0), (x0, y1)],
        "repeated vertices": [(x0, y0)] * 5 + [(x1, y1)] * 5,
        "huge coordinates": [(1e300, 1e300), (-1e300, 1e300)],
        "tiny extent": [(x0, y0), (x0 + 1e-9, y0)],
        "spike": [(x0, y0), (x0 + 1e7, y0), (x1, y1)],
    }[kind]


@mutation("geometry")
def corrupt_catchments(draft: Draft) -> str:
    import shapely

    if "catchments" not in draft.frames:
        return null_or_empty(draft)
    rows = draft.rows("catchments")
    kind = draft.pick(("bowtie", "empty", "null", "line", "huge"))
    frame = draft.frames["catchments"]
    x, y = frame.geometry.iloc[0].centroid.x, frame.geometry.iloc[0].centroid.y
    value = {"bowtie": shapely.Polygon([(x, y), (x + 10, y + 10), (x + 10, y), (x, y + 10)]), "empty": shapely.Polygon(), "null": None,
             "line": shapely.LineString([(x, y), (x + 1, y)]), "huge": shapely.box(-1e300, -1e300, 1e300, 1e300)}[kind]  # fmt: skip
    _set_geometry(draft, "catchments", rows, [value] * len(rows))
    return f"catchments rows {rows}: {kind}"


def _id_fields(draft: Draft) -> tuple[str, str]:
    layer = draft.pick(("pipes", "manholes"))
    return layer, draft.config[layer]["fields"]["id"]


@mutation("ids")
def duplicate_ids(draft: Draft) -> str:
    layer, name = _id_fields(draft)
    frame = draft.frames[layer]
    rows = draft.rows(layer)
    how = draft.pick(("same", "case", "spaces"))
    source = str(frame[name].iloc[0])
    value = {"same": source, "case": source.lower(), "spaces": f" {source} "}[how]
    frame.loc[frame.index[rows], name] = value
    return f"{layer}.{name} rows {rows} = {value!r} ({how} as row 0)"


UNICODE_IDS = ("Ø-12", "管道", "💩", "é", "e\u0301", "\u202eRTL", "a\u200bb", "１２", "Ωmega", "\ud7ff", "ﬁ", "İ")


@mutation("ids")
def unicode_ids(draft: Draft) -> str:
    prefix = draft.pick(UNICODE_IDS)
    manholes, pipes = draft.frames["manholes"], draft.frames["pipes"]
    renamed = {old: f"{prefix}{i}" for i, old in enumerate(manholes["MH_REF"])}
    manholes["MH_REF"] = manholes["MH_REF"].map(renamed)
    pipes["US_MH"] = pipes["US_MH"].map(renamed)
    pipes["DS_MH"] = pipes["DS_MH"].map(renamed)
    pipes["PIPE_REF"] = [f"{prefix}-P{i}" for i in range(len(pipes))]
    return f"every id starts with {prefix!r}"


@mutation("ids")
def whitespace_ids(draft: Draft) -> str:
    how = draft.pick((" {} ", "\t{}", "{}\u00a0", "{}\n", "   ", "", "{} {}"))
    layer, name = draft.pick((("manholes", "MH_REF"), ("pipes", "US_MH"), ("pipes", "DS_MH"), ("pipes", "PIPE_REF")))
    frame = draft.frames[layer]
    rows = draft.rows(layer)
    for row in rows:
        frame.loc[frame.index[row], name] = how.format(frame[name].iloc[row], "x")
    return f"{layer}.{name} rows {rows} as {how!r}"


@mutation("ids")
def long_ids(draft: Draft) -> str:
    size = draft.pick((254, 255, 300, 5000, 100_000))
    layer, name = draft.pick((("manholes", "MH_REF"), ("pipes", "PIPE_REF"), ("pipes", "DS_MH")))
    frame = draft.frames[layer]
    rows = draft.rows(layer)
    for row in rows:
        frame.loc[frame.index[row], name] = (str(frame[name].iloc[row]) + "X" * size)[:size]
    return f"{layer}.{name} rows {rows} are {size} characters long"


@mutation("ids")
def number_ids(draft: Draft) -> str:
    manholes, pipes = draft.frames["manholes"], draft.frames["pipes"]
    renamed = {old: i + 1 for i, old in enumerate(manholes["MH_REF"])}
    kind = draft.pick(("int both", "int manholes, float pipes", "int manholes, text pipes", "text '1.0' pipes"))
    manholes["MH_REF"] = manholes["MH_REF"].map(renamed).astype("int64")
    for column in ("US_MH", "DS_MH"):
        numbers = pipes[column].map(renamed)
        pipes[column] = {"int both": numbers.astype("int64"), "int manholes, float pipes": numbers.astype(float),
                         "int manholes, text pipes": numbers.astype(str), "text '1.0' pipes": numbers.astype(float).astype(str)}[kind]  # fmt: skip
    pipes["PIPE_REF"] = range(1000, 1000 + len(pipes))
    return f"numeric ids: {kind}"


@mutation("ids")
def ids_that_name_nothing(draft: Draft) -> str:
    pipes = draft.frames["pipes"]
    rows = draft.rows("pipes")
    column = draft.pick(("US_MH", "DS_MH"))
    value = draft.pick(("NOWHERE", "0", "-", "EOL", None, "MH999"))
    pipes.loc[pipes.index[rows], column] = value
    if value in ("0", "-", "EOL") and draft.rng.random() < 0.5:
        draft.config.setdefault("network", {})["placeholder_ids"] = ["0", "-", "EOL"]
    return f"pipes.{column} rows {rows} = {value!r}"


@mutation("ids")
def markup_ids(draft: Draft) -> str:
    layer, name = _id_fields(draft)
    frame = draft.frames[layer]
    rows = draft.rows(layer)
    value = draft.pick(("<b>x</b>", "a;b", 'a"b', "a,b", "a\nb", "=cmd|' /C calc'!A0", "&amp;", "{{x}}", "%s%n", "../../etc"))
    for row in rows:
        frame.loc[frame.index[row], name] = f"{value}{row}"
    return f"{layer}.{name} rows {rows} hold {value!r}"


@mutation("ids")
def all_ids_equal(draft: Draft) -> str:
    layer, name = _id_fields(draft)
    draft.frames[layer][name] = "SAME"
    return f"every {layer} id is 'SAME'"


def _add_pipe(draft: Draft, *, up: int, down: int, ref: str, geometry: Any = None) -> None:
    import geopandas as gpd
    import pandas as pd
    import shapely

    pipes, manholes = draft.frames["pipes"], draft.frames["manholes"]
    row = pipes.iloc[[0]].copy()
    row["PIPE_REF"], row["US_MH"], row["DS_MH"] = ref, manholes["MH_REF"].iloc[up], manholes["MH_REF"].iloc[down]
    a, b = manholes.geometry.iloc[up], manholes.geometry.iloc[down]
    row = row.set_geometry(gpd.GeoSeries([geometry or shapely.LineString([(a.x, a.y), (b.x, b.y)])], index=row.index, crs=pipes.crs))
    draft.frames["pipes"] = gpd.GeoDataFrame(pd.concat([pipes, row], ignore_index=True), geometry=pipes.geometry.name, crs=pipes.crs)


@mutation("topology")
def loop(draft: Draft) -> str:
    count = len(draft.frames["manholes"])
    up, down = 0, count - 1
    _add_pipe(draft, up=up, down=down, ref="LOOP1")
    return f"a pipe from the outfall back up to manhole {down}: a loop"


@mutation("topology")
def self_loop(draft: Draft) -> str:
    import shapely

    node = int(draft.rng.integers(len(draft.frames["manholes"])))
    point = draft.frames["manholes"].geometry.iloc[node]
    shape = draft.pick(("ring", "zero"))
    geometry = (shapely.LineString([(point.x, point.y), (point.x + 5, point.y), (point.x + 5, point.y + 5), (point.x, point.y)])
                if shape == "ring" else shapely.LineString([(point.x, point.y)] * 2))  # fmt: skip
    _add_pipe(draft, up=node, down=node, ref="SELF1", geometry=geometry)
    return f"a self-loop ({shape}) at manhole {node}"


@mutation("topology")
def disconnected(draft: Draft) -> str:
    import geopandas as gpd
    import pandas as pd

    shift = draft.pick((2_000.0, 300_000.0, 1_500_000.0))
    for layer, columns in (("pipes", ("PIPE_REF", "US_MH", "DS_MH")), ("manholes", ("MH_REF",))):
        frame = draft.frames[layer]
        copy = frame.copy()
        for column in columns:
            copy[column] = copy[column].astype(str) + "_B"
        copy = copy.set_geometry(copy.geometry.translate(xoff=shift))
        draft.frames[layer] = gpd.GeoDataFrame(pd.concat([frame, copy], ignore_index=True), geometry=frame.geometry.name, crs=frame.crs)
    return f"a second network {shift:g} m east, not joined"


@mutation("topology")
def parallel_and_reversed(draft: Draft) -> str:
    import shapely

    pipes = draft.frames["pipes"]
    kind = draft.pick(("parallel", "reversed drawing", "reversed ids", "ring without outfall"))
    rows = draft.rows("pipes")
    if kind == "parallel":
        _add_pipe(draft, up=1, down=0, ref="TWIN")
    elif kind == "reversed drawing":
        _set_geometry(draft, "pipes", rows, [shapely.reverse(_line(draft, r)) for r in rows])
    elif kind == "reversed ids":
        pipes.loc[pipes.index[rows], ["US_MH", "DS_MH"]] = pipes.loc[pipes.index[rows], ["DS_MH", "US_MH"]].to_numpy()
    else:
        count = len(draft.frames["manholes"])
        for node in range(count):
            _add_pipe(draft, up=node, down=(node + 1) % count, ref=f"RING{node}")
    return f"{kind} (rows {rows})"


@mutation("topology")
def without_manholes(draft: Draft) -> str:
    draft.frames.pop("manholes")
    draft.config.pop("manholes")
    draft.config.get("pipes", {}).get("fields", {}).pop("from_node", None)
    return "no manhole layer: the network from the pipes alone"


@mutation("topology")
def star(draft: Draft) -> str:
    for number in range(30):
        _add_pipe(draft, up=1 + number % max(len(draft.frames["manholes"]) - 1, 1), down=0, ref=f"STAR{number}")
    return "thirty pipes into the outfall"


@mutation("topology")
def lonely_manholes(draft: Draft) -> str:
    import geopandas as gpd
    import pandas as pd
    import shapely

    manholes = draft.frames["manholes"]
    extra = manholes.iloc[[0] * 5].copy()
    extra["MH_REF"] = [f"LONE{i}" for i in range(5)]
    extra = extra.set_geometry(gpd.GeoSeries([shapely.Point(X0 + 5000 + i, Y0) for i in range(5)], index=extra.index, crs=manholes.crs))
    draft.frames["manholes"] = gpd.GeoDataFrame(pd.concat([manholes, extra], ignore_index=True), geometry=manholes.geometry.name, crs=manholes.crs)
    return "five manholes no pipe reaches"


def _to_crs(draft: Draft, layer: str, crs: Any) -> None:
    draft.frames[layer] = draft.frames[layer].to_crs(crs)


def _set_crs(draft: Draft, layer: str, crs: Any) -> None:
    draft.frames[layer] = draft.frames[layer].set_crs(crs, allow_override=True)


@mutation("crs")
def no_crs(draft: Draft) -> str:
    layers = [layer for layer in draft.frames if draft.rng.random() < 0.7] or ["pipes"]
    for layer in layers:
        draft.frames[layer] = draft.frames[layer].set_crs(None, allow_override=True)
    given = draft.pick((None, UTM, "EPSG:4326", "EPSG:27700", "not a crs", "EPSG:999999", "+proj=longlat +datum=WGS84"))
    if given is not None:
        for layer in layers:
            draft.config[layer]["crs"] = given
    return f"{layers} without a CRS; config crs = {given!r}"


@mutation("crs")
def geographic(draft: Draft) -> str:
    where = draft.pick(("as is", "pole", "antimeridian", "equator", "lat 90"))
    for layer in draft.frames:
        _to_crs(draft, layer, "EPSG:4326")
        if where != "as is":
            frame = draft.frames[layer]
            dx, dy = {"pole": (0.0, 89.99 - 51.4), "antimeridian": (180.0 + 3.0 - 0.0005, 0.0), "equator": (0.0, -51.4),
                      "lat 90": (0.0, 90.0 - 51.44)}[where]  # fmt: skip
            draft.frames[layer] = frame.set_geometry(frame.geometry.translate(xoff=dx, yoff=dy))
    return f"every layer in EPSG:4326, {where}"


@mutation("crs")
def far_outside_area(draft: Draft) -> str:
    kind = draft.pick(("utm far", "british grid elsewhere", "degrees as metres", "huge"))
    for layer in draft.frames:
        frame = draft.frames[layer]
        if kind == "utm far":
            draft.frames[layer] = frame.set_geometry(frame.geometry.translate(xoff=5e7, yoff=9e8))
        elif kind == "british grid elsewhere":
            draft.frames[layer] = frame.set_geometry(frame.geometry.translate(xoff=-X0 + 9e6, yoff=-Y0 - 4e6)).set_crs("EPSG:27700", allow_override=True)
        elif kind == "degrees as metres":
            draft.frames[layer] = frame.to_crs("EPSG:4326").set_crs(UTM, allow_override=True)
        else:
            draft.frames[layer] = frame.set_geometry(frame.geometry.scale(1e290, 1e290, origin=(0, 0)))
    return f"coordinates far outside the CRS's area of use: {kind}"


@mutation("crs")
def mismatched(draft: Draft) -> str:
    layer = draft.pick([name for name in draft.frames if name != "pipes"] or ["pipes"])
    crs = draft.pick(("EPSG:4326", "EPSG:3857", "EPSG:32631", "EPSG:27700", "EPSG:2263"))
    kind = draft.pick(("reprojected", "labelled only"))
    if kind == "reprojected":
        _to_crs(draft, layer, crs)
    else:
        _set_crs(draft, layer, crs)
    return f"{layer} in {crs} ({kind}), pipes in {UTM}"


@mutation("crs")
def odd_crs(draft: Draft) -> str:
    crs = draft.pick(("EPSG:2263", "+proj=tmerc +lat_0=0 +lon_0=-3 +k=0.9996 +x_0=500000 +y_0=0 +ellps=GRS80 +units=m +no_defs",
                      'LOCAL_CS["local grid",UNIT["metre",1]]', "EPSG:4978", "EPSG:32630+5773", "ESRI:102008",
                      "+proj=utm +zone=30 +ellps=WGS84 +units=us-ft"))  # fmt: skip
    for layer in draft.frames:
        try:
            _to_crs(draft, layer, crs)
        except Exception:  # pyproj cannot transform to it: the CRS is only set
            _set_crs(draft, layer, crs)
    return f"every layer in {crs[:50]!r}"


@mutation("crs")
def garbage_crs_in_file(draft: Draft) -> str:
    fmt = draft.pick(("shp", "geojson", "gpkg"))
    draft.formats["pipes"] = fmt
    draft.shared = False

    def edit(d: Draft) -> None:
        path = d.path_of("pipes")
        if path.suffix == ".shp":
            path.with_suffix(".prj").write_text('PROJCS["nonsense",GEOGCS[garbage', encoding="utf-8")
        elif path.suffix == ".geojson":
            text = path.read_text(encoding="utf-8").replace("urn:ogc:def:crs:EPSG::32630", "urn:ogc:def:crs:EPSG::999999")
            path.write_text(text, encoding="utf-8")
        else:
            gpkg_sql(path, [("UPDATE gpkg_geometry_columns SET srs_id = 999999", ()), ("UPDATE gpkg_contents SET srs_id = 999999", ())])

    draft.edits.append(edit)
    return f"pipes as {fmt} with a CRS that names nothing"


CONFIG_KEYS = {
    "input": ("engine", "sentinels"),
    "pipes": ("path", "layer", "crs", "fields", "units", "shapes", "kinds", "sentinels"),
    "pipes.fields": ("id", "from_node", "to_node", "kind", "shape", "diameter", "height", "width", "side_slope", "upstream_invert",
                     "downstream_invert", "upstream_depth", "downstream_depth", "length", "roughness", "material", "install_year", "flow"),
    "pipes.units": ("diameter", "height", "width", "upstream_invert", "downstream_invert", "upstream_depth", "downstream_depth", "length", "flow"),
    "pipes.sentinels": ("diameter", "upstream_invert"),
    "manholes": ("path", "layer", "crs", "fields", "units", "kinds", "sentinels"),
    "manholes.fields": ("id", "kind", "rim", "invert", "depth", "inflow", "access", "population", "point_load"),
    "manholes.units": ("rim", "invert", "depth", "inflow", "point_load"),
    "network": ("snap_tolerance_m", "direction", "length_tolerance_ratio", "length_tolerance_m", "placeholder_ids"),
    "hydraulics": ("formula", "manning_n", "ks_mm", "water_temp_c"),
    "flows": ("kind", "peaking", "tc_max_iterations", "rainfall", "per_capita_l_day", "peaking_factor", "min_peaking_population",
              "occupancy", "infiltration_l_s_km", "infiltration_l_s_ha", "population_growth", "rainfall_uplift", "urban_creep",
              "c_impervious", "c_pervious", "fallback_velocity_m_s", "tc_tolerance_min", "persons_per_manhole", "persons_per_km",
              "load_per_manhole_l_s", "per_capita_gal_day", "infiltration_gal_day_mile", "infiltration_gal_day_acre",
              "load_per_manhole_gpm", "persons_per_mile", "fallback_velocity_ft_s"),
    "flows.rainfall": ("a", "b", "c", "table", "inlet_time_min", "return_period_years", "intensity_unit"),
    "rules": ("max_load_ratio", "near_capacity_ratio", "self_cleansing", "cleansing_fraction", "dry_weather", "exempt_population",
              "severity", "min_velocity_m_s", "min_velocity_ft_s", "max_velocity_m_s", "max_velocity_ft_s", "min_shear_pa", "min_shear_psf",
              "min_diameter_mm", "min_diameter_in", "min_cover_m", "min_cover_ft", "max_spacing_m", "max_spacing_ft", "min_slope",
              "min_slope_by_in"),
    "output": ("units",),
    "": ("input", "pipes", "manholes", "catchments", "network", "hydraulics", "flows", "rules", "output"),
}  # fmt: skip
"""Every key of the config (docs/config.md, docs/rules.md), by table; ``""`` is the top level."""

CONFIG_VALUES = (float("nan"), float("inf"), float("-inf"), -1, 0, -0.0, 1e308, -1e308, 5e-324, 2**63 - 1, True, "abc", "", " ",
                 "NaN", "1.5", [], [1, 2], [[1, 2], [3, float("nan")]], [[1, float("inf")], [2, 3]], {}, {"a": 1},
                 datetime.date(1979, 5, 27), datetime.time(7, 32), "é" * 1000, "\u202e", 3, 0.5, 1e-9, 40.5, "x" * 10_000)  # fmt: skip


def _subtable(config: dict[str, Any], dotted: str) -> dict[str, Any]:
    table = config
    for part in [p for p in dotted.split(".") if p]:
        if not isinstance(table.get(part), dict):
            table[part] = {}
        table = table[part]
    return table


@mutation("config")
def key_mutated(draft: Draft) -> str:
    table_name = draft.pick(list(CONFIG_KEYS))
    key = draft.pick(CONFIG_KEYS[table_name])
    value = draft.pick(CONFIG_VALUES)
    _subtable(draft.config, table_name)[key] = value
    shown = repr(value) if len(repr(value)) < 40 else repr(value)[:40] + "..."
    return f"{table_name + '.' if table_name else ''}{key} = {shown}"


@mutation("config")
def key_removed_or_unknown(draft: Draft) -> str:
    kind = draft.pick(("remove pipes.path", "remove pipes", "unknown key", "unknown table", "table as a value", "empty config"))
    if kind == "remove pipes.path":
        draft.config["pipes"].pop("path")
    elif kind == "remove pipes":
        draft.config.pop("pipes")
    elif kind == "unknown key":
        _subtable(draft.config, draft.pick(("network", "hydraulics", "pipes", "flows", "rules", "output")))["snap_tolerence"] = 1
    elif kind == "unknown table":
        draft.config["extras"] = {"a": 1}
    elif kind == "table as a value":
        draft.config[draft.pick(("network", "hydraulics", "flows", "rules", "output", "input"))] = draft.pick((3, "x", [1], True))
    else:
        draft.config_bytes = b""
    return kind


@mutation("config")
def units_with_spaces(draft: Draft) -> str:
    key = draft.pick(("diameter", "upstream_invert", "length", "flow"))
    unit = {"diameter": "mm", "upstream_invert": "m", "length": "m", "flow": "l/s"}[key]
    value = draft.pick((f" {unit}", f"{unit} ", f"\t{unit}", f"{unit}\u00a0", unit.upper(), " ".join(unit), f"{unit}\n", f"{unit}.", "MM²"))
    draft.config["pipes"].setdefault("units", {})[key] = value
    return f"pipes.units.{key} = {value!r}"


@mutation("config")
def bad_encoding(draft: Draft) -> str:
    text = toml_text(draft.config, paths=lambda layer: draft.path_of(layer).name).replace("MAT", "MAT")
    kind = draft.pick(("latin-1", "utf-16", "utf-8 bom", "bad bytes", "null byte", "crlf", "random bytes", "a geopackage"))
    if kind == "latin-1":
        draft.config_bytes = (text + '# café\n[pipes.shapes]\n"CAFÉ" = "circular"\n').encode("latin-1") if False else text.replace(
            "[pipes.fields]", '[pipes.fields]\n# Ø café\n').encode("latin-1")  # fmt: skip
    elif kind == "utf-16":
        draft.config_bytes = text.encode("utf-16")
    elif kind == "utf-8 bom":
        draft.config_bytes = b"\xef\xbb\xbf" + text.encode("utf-8")
    elif kind == "bad bytes":
        draft.config_bytes = text.replace('"PIPE_REF"', '"PIPE_REF\udcff"').encode("utf-8", errors="surrogateescape")
    elif kind == "null byte":
        draft.config_bytes = text.encode("utf-8").replace(b"[network]", b"[network]\x00", 1)
    elif kind == "crlf":
        draft.config_bytes = text.replace("\n", "\r\n").encode("utf-8")
    elif kind == "random bytes":
        draft.config_bytes = bytes(draft.rng.integers(0, 256, 2000, dtype="uint8"))
    else:
        draft.config_arg = "pipes"  # the pipes' own file given as the config
        draft.formats["pipes"] = "gpkg"
        draft.shared = False
    return f"the config file is {kind}"


@mutation("config")
def deep_nesting(draft: Draft) -> str:
    depth = draft.pick((100, 1000, 100_000))
    kind = draft.pick(("arrays", "inline tables", "dotted keys in rules", "table header"))
    text = toml_text(draft.config, paths=lambda layer: draft.path_of(layer).name)
    if kind == "arrays":
        extra = "[input]\nsentinels = " + "[" * depth + "]" * depth + "\n"
        text = text.replace("[input]\n", "").replace('engine = "pyogrio"\nsentinels = [-9999]\n', "") + extra
    elif kind == "inline tables":
        extra = "[hydraulics.x]\ny = " + "{a = " * depth + "1" + "}" * depth + "\n"
        text += extra
    elif kind == "dotted keys in rules":
        text += "[rules.x]\n" + ".".join(["a"] * depth) + " = 1\n"
    else:
        text += "[" + ".".join(["severity"] * depth) + "]\nx = 1\n"
    draft.config_bytes = text.encode("utf-8")
    return f"{kind} nested {depth} deep"


def _odd_path(draft: Draft, kind: str) -> str:
    """Make a path of the given kind in the inputs folder; its text as it goes into the config."""
    inputs = draft.inputs
    inputs.mkdir(parents=True, exist_ok=True)
    if kind == "symlink loop":
        (inputs / "loop_a.gpkg").symlink_to(inputs / "loop_b.gpkg")
        (inputs / "loop_b.gpkg").symlink_to(inputs / "loop_a.gpkg")
        return "loop_a.gpkg"
    if kind == "fifo":
        os.mkfifo(inputs / "pipe_fifo.gpkg")
        return "pipe_fifo.gpkg"
    if kind == "directory":
        (inputs / "a_folder.gpkg").mkdir()
        return "a_folder.gpkg"
    return {"null byte": "pipes\x00.gpkg", "too long": "p" * 300 + ".gpkg", "too long path": "/".join(["d" * 200] * 30) + ".gpkg",
            "device": "/dev/zero", "null device": "/dev/null", "empty": "", "missing": "nowhere/pipes.gpkg", "tilde": "~/pipes.gpkg",
            "vsi": "/vsistdin/", "root": "/", "dot": "."}[kind]  # fmt: skip


PATH_KINDS = ("symlink loop", "fifo", "directory", "null byte", "too long", "too long path", "device", "null device", "empty", "missing",
              "tilde", "vsi", "root", "dot")  # fmt: skip


@mutation("config")
def bad_layer_path(draft: Draft) -> str:
    kind = draft.pick(PATH_KINDS)
    layer = draft.pick([name for name in draft.frames if name in draft.config])
    draft.config[layer]["path"] = _odd_path(draft, kind)
    return f"{layer}.path is {kind}"


@mutation("config")
def bad_config_argument(draft: Draft) -> str:
    kind = draft.pick(PATH_KINDS)
    text = _odd_path(draft, kind)
    draft.config_arg = text if text.startswith("/") or not text else str(draft.inputs / text)
    if "\x00" in draft.config_arg:
        draft.in_process_only = True  # no command line can hold a null byte
    return f"the config argument is {kind}"


@mutation("config")
def input_named_like_output(draft: Draft) -> str:
    name = draft.pick(OUTPUTS)
    layer = draft.pick(("pipes", "manholes"))
    kind = draft.pick(("inside the output folder", "output folder is the inputs folder", "output is the layer file", "output inside a file"))
    draft.shared = False
    if kind == "inside the output folder":
        draft.overwrite = draft.rng.random() < 0.8
        draft.formats[layer] = "gpkg" if name == "audit.gpkg" else "geojson"

        def move(d: Draft) -> None:
            target = d.folder / "out" / name
            target.parent.mkdir(exist_ok=True)
            d.path_of(layer).rename(target)
            d.config[layer]["path"] = str(Path("..") / "out" / name)

        draft.edits.insert(0, move)
        return f"{layer} is out/{name} and out is the output folder"
    if kind == "output folder is the inputs folder":
        draft.overwrite = True
        draft.output_arg = "in"
        return "the output folder is the inputs' folder (--overwrite)"
    if kind == "output is the layer file":
        draft.output_arg = f"in/{{{layer}}}"
        return f"the output folder is the {layer} file"
    draft.output_arg = f"in/{{{layer}}}/sub"
    return f"the output folder is inside the {layer} file"


def _shapefile(draft: Draft, layer: str = "pipes") -> None:
    draft.formats[layer] = "shp"
    draft.shared = False


@mutation("corrupt files")
def truncated(draft: Draft) -> str:
    layer = draft.pick(("pipes", "manholes"))
    fraction = draft.pick((0.0, 0.1, 0.5, 0.9, 0.99, float(draft.rng.uniform(0.05, 0.999))))

    def edit(d: Draft) -> None:
        for path in layer_files(d, layer):
            if path.suffix in (".gpkg", ".shp", ".geojson", ".fgb", ".dbf") and (path.suffix != ".dbf" or d.rng.random() < 0.5):
                with path.open("r+b") as handle:
                    handle.truncate(int(path.stat().st_size * fraction))

    draft.edits.append(edit)
    return f"{layer} files cut to {fraction:.3f} of their size"


@mutation("corrupt files")
def random_bytes(draft: Draft) -> str:
    layer = draft.pick(("pipes", "manholes"))
    flips = draft.pick((1, 3, 10, 100, -1))
    seed = int(draft.rng.integers(2**31))

    def edit(d: Draft) -> None:
        import numpy as np

        rng = np.random.default_rng(seed)
        for path in layer_files(d, layer):
            data = bytearray(path.read_bytes())
            if not data:
                continue
            if flips < 0:
                data = bytearray(rng.integers(0, 256, len(data), dtype="uint8").tobytes())
            else:
                for at in rng.integers(0, len(data), flips):
                    data[int(at)] = int(rng.integers(0, 256))
            path.write_bytes(bytes(data))

    draft.edits.append(edit)
    return f"{layer}: {'every byte random' if flips < 0 else f'{flips} random bytes'}"


@mutation("corrupt files")
def shapefile_sidecars(draft: Draft) -> str:
    layer = draft.pick(("pipes", "manholes"))
    _shapefile(draft, layer)
    kind = draft.pick(("no .dbf", "no .shx", "no .prj", "no .cpg", "wrong .cpg", "garbage .cpg", "no .shp"))

    def edit(d: Draft) -> None:
        path = d.path_of(layer)
        if kind.startswith("no ."):
            path.with_suffix(kind[3:]).unlink(missing_ok=True)
        else:
            path.with_suffix(".cpg").write_text("LATIN1" if kind == "wrong .cpg" else "\x00\xff garbage", encoding="latin-1")

    draft.edits.append(edit)
    return f"{layer} Shapefile: {kind}"


@mutation("corrupt files")
def dbf_read_short(draft: Draft) -> str:
    layer = draft.pick(("pipes", "manholes"))
    _shapefile(draft, layer)
    kind = draft.pick(("records cut", "count too high", "count too low", "records cut mid-record", "header only"))
    keep = float(draft.rng.uniform(0.1, 0.9))

    def edit(d: Draft) -> None:
        dbf = d.path_of(layer).with_suffix(".dbf")
        data = bytearray(dbf.read_bytes())
        count, header, record = struct.unpack("<IHH", data[4:12])
        if kind == "count too high":
            data[4:8] = struct.pack("<I", count + 7)
        elif kind == "count too low":
            data[4:8] = struct.pack("<I", max(count // 2, 0))
        elif kind == "header only":
            data = data[:header]
        else:
            cut = header + record * int(count * keep) + (record // 2 if kind.endswith("mid-record") else 0)
            data = data[:cut]
        dbf.write_bytes(bytes(data))

    draft.edits.append(edit)
    return f"{layer}.dbf: {kind}"


@mutation("corrupt files")
def gpkg_blobs(draft: Draft) -> str:
    layer = draft.pick(("pipes", "manholes"))
    draft.formats[layer] = "gpkg"
    rows = draft.rows(layer)
    kind = draft.pick(("random blob", "cut blob", "bad magic", "header only", "wkb of a billion points", "empty blob", "text"))
    seed = int(draft.rng.integers(2**31))

    def blob(geometry: Any) -> bytes:
        import numpy as np
        import shapely

        wkb = shapely.to_wkb(geometry) if geometry is not None else b""
        return {
            "random blob": bytes(np.random.default_rng(seed).integers(0, 256, 60, dtype="uint8")),
            "cut blob": gpkg_blob(wkb)[: max(len(wkb) // 2, 9)],
            "bad magic": b"XX" + gpkg_blob(wkb)[2:],
            "header only": gpkg_blob(b""),
            "wkb of a billion points": gpkg_blob(b"\x01\x02\x00\x00\x00" + struct.pack("<I", 1_000_000_000) + b"\x00" * 32),
            "empty blob": b"",
            "text": b"LINESTRING (0 0, 1 1)",
        }[kind]

    geometries = [draft.frames[layer].geometry.iloc[r] for r in rows]
    draft.edits.append(lambda d: set_gpkg_geometry(d, layer, rows, [blob(g) for g in geometries]))
    return f"{layer} GeoPackage rows {rows}: {kind}"


@mutation("corrupt files")
def gpkg_tables(draft: Draft) -> str:
    layer = draft.pick(("pipes", "manholes"))
    draft.formats[layer] = "gpkg"
    kind = draft.pick(("no contents row", "geometry type says point", "text in a real column", "blob in a text column",
                       "rtree dropped", "no geometry columns row"))  # fmt: skip

    def edit(d: Draft) -> None:
        path, table = d.path_of(layer), d.layer_name(layer)
        statement = {
            "no contents row": ("DELETE FROM gpkg_contents WHERE table_name = ?", (table,)),
            "geometry type says point": ("UPDATE gpkg_geometry_columns SET geometry_type_name = 'POINT' WHERE table_name = ?", (table,)),
            "text in a real column": (f'UPDATE "{table}" SET "{d.config.get(layer, {}).get("fields", {}).get("rim" if layer == "manholes" else "diameter", "fid")}" = \'abc\' WHERE fid = 1', ()),
            "blob in a text column": (f'UPDATE "{table}" SET "{d.config.get(layer, {}).get("fields", {}).get("id", "fid")}" = X\'00FF00\' WHERE fid = 1', ()),
            "rtree dropped": (f'DROP TABLE IF EXISTS "rtree_{table}_geom"', ()),
            "no geometry columns row": ("DELETE FROM gpkg_geometry_columns WHERE table_name = ?", (table,)),
        }[kind]  # fmt: skip
        with contextlib.suppress(sqlite3.Error):
            gpkg_sql(path, [statement])

    draft.edits.append(edit)
    return f"{layer} GeoPackage: {kind}"


@mutation("corrupt files")
def geojson_text(draft: Draft) -> str:
    layer = draft.pick(("pipes", "manholes"))
    draft.formats[layer] = "geojson"
    draft.shared = False
    kind = draft.pick(("features not a list", "geometry a string", "coordinates as text", "properties null", "number 1e999",
                       "duplicate keys", "single feature", "no type"))  # fmt: skip

    def edit(d: Draft) -> None:
        path = d.path_of(layer)
        text = path.read_text(encoding="utf-8")
        if kind == "features not a list":
            text = text.replace('"features": [', '"features": {"x": [', 1)[::-1].replace("]", "]}", 1)[::-1]
        elif kind == "geometry a string":
            text = re.sub(r'"geometry": \{[^{}]*\}', '"geometry": "bogus"', text, count=1)
        elif kind == "coordinates as text":
            text = re.sub(r"\[ (\d+\.?\d*), ", r'[ "\1", ', text, count=2)
        elif kind == "properties null":
            text = re.sub(r'"properties": \{[^{}]*\}', '"properties": null', text, count=1)
        elif kind == "number 1e999":
            text = re.sub(r'("[A-Z_]+": )(\d+\.\d+)', r"\g<1>1e999", text, count=1)
        elif kind == "duplicate keys":
            text = text.replace('"properties": { ', '"properties": { "X": 1, "X": "two", ', 1)
        elif kind == "single feature":
            start = text.index('{ "type": "Feature"')
            text = text[start: text.index("\n", start)].rstrip(",")
        else:
            text = text.replace('"type": "FeatureCollection",', "", 1)
        path.write_text(text, encoding="utf-8")

    draft.edits.append(edit)
    return f"{layer} GeoJSON: {kind}"


@mutation("corrupt files")
def flatgeobuf_header(draft: Draft) -> str:
    layer = draft.pick(("pipes", "manholes"))
    draft.formats[layer] = "fgb"
    draft.shared = False
    kind = draft.pick(("count too high", "count too low", "count zero", "cut in the features", "with an index, cut"))
    if kind == "with an index, cut":
        draft.options[layer] = {"SPATIAL_INDEX": "YES"}

    def edit(d: Draft) -> None:
        path = d.path_of(layer)
        data = bytearray(path.read_bytes())
        at = flatgeobuf_count_offset(bytes(data))
        if kind.startswith("count") and at is not None:
            count = struct.unpack_from("<Q", data, at)[0]
            data[at: at + 8] = struct.pack("<Q", {"count too high": count + 5, "count too low": max(count - 2, 1), "count zero": 0}[kind])
        elif not kind.startswith("count"):
            data = data[: len(data) - max(len(data) // 7, 10)]
        path.write_bytes(bytes(data))

    draft.edits.append(edit)
    return f"{layer} FlatGeobuf: {kind}"


# ---------------------------------------------------------------------------------------------
# Counting features without GDAL, and what the files are before and after


def flatgeobuf_count_offset(data: bytes) -> int | None:
    """Where the header's ``features_count`` (field 8 of the Header table, a uint64) lies, if stored.

    The file is magic (8 bytes), the header's size (uint32) and the header, a FlatBuffers table:
    its root offset (uint32), then at the table a signed offset back to its vtable, whose uint16
    entries give each field's offset inside the table (0: not stored). Source: the FlatGeobuf
    specification, header.fbs (flatgeobuf.org), and the FlatBuffers binary format (flatbuffers.dev).
    """
    if len(data) < 16 or data[:3] != b"fgb":
        return None
    start = 12
    table = start + struct.unpack_from("<I", data, start)[0]
    vtable = table - struct.unpack_from("<i", data, table)[0]
    size = struct.unpack_from("<H", data, vtable)[0]
    slot = 4 + 2 * 8
    if slot + 2 > size:
        return None
    offset = struct.unpack_from("<H", data, vtable + slot)[0]
    return table + offset if offset else None


def count_features(path: Path, layer: str | None) -> int | None:
    """Features of a layer counted by a plain reader of its format; None where it cannot tell."""
    try:
        reader = {".gpkg": _count_gpkg, ".shp": _count_shapefile, ".geojson": _count_geojson, ".fgb": _count_flatgeobuf}.get(path.suffix.lower())
        return None if reader is None or not path.is_file() else reader(path, layer)
    except (OSError, ValueError, struct.error, sqlite3.Error, KeyError, TypeError, IndexError, RecursionError):
        return None


def _count_gpkg(path: Path, layer: str | None) -> int | None:
    with contextlib.closing(sqlite3.connect(f"file:{path}?immutable=1", uri=True)) as connection:
        tables = [row[0] for row in connection.execute("SELECT table_name FROM gpkg_contents WHERE data_type = 'features'")]
        if layer is None:
            if len(tables) != 1:
                return None
            layer = tables[0]
        return int(connection.execute(f'SELECT COUNT(*) FROM "{layer}"').fetchone()[0])


def _count_shapefile(path: Path, layer: str | None) -> int | None:
    """The most of: records in the .shp (walked), entries in the .shx, and the .dbf's records (as many
    as its header declares and its size holds). Source: ESRI Shapefile Technical Description (1998);
    dBASE file header layout, from memory."""
    counts = []
    data = path.read_bytes()
    at, records = 100, 0
    while at + 8 <= len(data):
        length = struct.unpack_from(">i", data, at + 4)[0] * 2
        if length < 0 or at + 8 + length > len(data):
            break
        at, records = at + 8 + length, records + 1
    counts.append(records)
    shx = path.with_suffix(".shx")
    if shx.is_file():
        counts.append(max((shx.stat().st_size - 100) // 8, 0))
    dbf = path.with_suffix(".dbf")
    if dbf.is_file() and dbf.stat().st_size >= 12:
        declared, header, record = struct.unpack_from("<IHH", dbf.read_bytes()[:12], 4)
        counts.append(min(declared, (dbf.stat().st_size - header) // max(record, 1)))
    return max(counts)


def _count_geojson(path: Path, layer: str | None) -> int | None:
    document = json.loads(path.read_bytes())
    if document.get("type") == "Feature":
        return 1
    features = document["features"]
    return len(features) if isinstance(features, list) else None


def _count_flatgeobuf(path: Path, layer: str | None) -> int | None:
    """The header's count, or the features walked (each prefixed by its size) where the header gives none."""
    data = path.read_bytes()
    at = flatgeobuf_count_offset(data)
    declared = struct.unpack_from("<Q", data, at)[0] if at is not None else 0
    position = 12 + struct.unpack_from("<I", data, 8)[0]
    walked = 0
    while declared == 0 and position + 4 <= len(data):
        size = struct.unpack_from("<I", data, position)[0]
        if size == 0 or position + 4 + size > len(data):
            break
        position, walked = position + 4 + size, walked + 1
    return int(declared or walked)


def output_count(gpkg: Path, layer: str) -> int | None:
    """Rows of a layer in the output GeoPackage (None: no such layer)."""
    try:
        with contextlib.closing(sqlite3.connect(f"file:{gpkg}?immutable=1", uri=True)) as connection:
            return int(connection.execute(f'SELECT COUNT(*) FROM "{layer}"').fetchone()[0])
    except sqlite3.Error:
        return None


def snapshot(folder: Path) -> dict[str, str]:
    """SHA-256 of every regular file under ``folder`` (links, FIFOs and devices are never opened), by relative path."""
    found: dict[str, str] = {}
    for root, directories, files in os.walk(folder):
        for name in files + [d for d in directories if os.path.islink(os.path.join(root, d))]:
            path = Path(root, name)
            relative = str(path.relative_to(folder))
            info = path.lstat()
            if stat.S_ISREG(info.st_mode):
                found[relative] = hashlib.sha256(path.read_bytes()).hexdigest()
            else:
                found[relative] = f"special {stat.S_IFMT(info.st_mode)} {os.readlink(path) if path.is_symlink() else ''}"
    return found


# ---------------------------------------------------------------------------------------------
# Cases


@dataclass
class Case:
    """A case as written: what was done, where the files are, how to run it, what should come back."""

    index: int
    seed: int
    category: str
    mutation: str
    detail: str
    formats: dict[str, str]
    engine: str
    mode: str  # "in process" or "cli"
    folder: str
    argv: list[str]
    before: dict[str, str]  # snapshot of the case folder
    expected: dict[str, int | None]  # features per layer counted in the inputs the config names
    names: list[str]  # file names a message may name


def make_case(seed: int, index: int, workdir: Path, *, cli_share: float) -> Case:
    """Write case ``index`` of a run with ``seed`` into ``workdir``; the same numbers make the same case.

    The libraries' warnings on the odd values written are silenced: they are the point of the case.
    """
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return _make_case(seed, index, workdir, cli_share=cli_share)


def _make_case(seed: int, index: int, workdir: Path, *, cli_share: float) -> Case:
    import numpy as np

    rng = np.random.default_rng([seed, index])
    category = CATEGORIES[index % len(CATEGORIES)]
    fmt = FORMATS[(index // len(CATEGORIES)) % len(FORMATS)]
    engine = ENGINES[(index // (len(CATEGORIES) * len(FORMATS))) % len(ENGINES)]
    folder = workdir / f"case-{index:05d}"
    shutil.rmtree(folder, ignore_errors=True)
    folder.mkdir(parents=True)
    frames, config = base_register(rng)
    config["input"]["engine"] = engine
    draft = Draft(rng=rng, folder=folder, frames=frames, config=config, formats=dict.fromkeys(frames, fmt))
    draft.shared = fmt == "gpkg" and rng.random() < 0.3
    if draft.shared:
        for layer in ("pipes", "manholes"):
            config[layer]["layer"] = layer
    function = draft.pick(MUTATIONS[category])
    detail = function(draft)
    write_case(draft)
    mode = "in process" if draft.in_process_only or rng.random() >= cli_share else "cli"
    config_arg = draft.config_arg or str(draft.inputs / "audit.toml")
    if draft.config_arg in draft.frames:
        config_arg = str(draft.path_of(draft.config_arg))
    output = str(folder / (draft.output_arg or "out").format(**{layer: draft.path_of(layer).name for layer in draft.frames}))
    argv = ["run", config_arg, "-o", output, "-q", *(["--overwrite"] if draft.overwrite else [])]
    return Case(index=index, seed=seed, category=category, mutation=function.__name__, detail=detail, formats=dict(draft.formats),
                engine=engine, mode=mode, folder=str(folder), argv=argv, before=snapshot(folder), expected=_expected(draft),
                names=_names(draft, config_arg, output))  # fmt: skip


def _expected(draft: Draft) -> dict[str, int | None]:
    """Features per output layer, counted in the files the config as written names."""
    expected: dict[str, int | None] = {}
    for layer in ("pipes", "manholes"):
        table = draft.config.get(layer)
        if not isinstance(table, dict):
            continue
        path = table.get("path")
        path = draft.path_of(layer) if isinstance(path, PathOf) else draft.inputs / path if isinstance(path, str) and "\x00" not in path else None
        name = table.get("layer") if isinstance(table.get("layer"), str) else None
        with contextlib.suppress(OSError, ValueError):
            expected[layer] = count_features(path, name) if path is not None else None
    return expected


def _names(draft: Draft, config_arg: str, output: str) -> list[str]:
    names = {config_arg, output, Path(config_arg).name, Path(output).name, "audit.toml", *(draft.path_of(layer).name for layer in draft.frames)}
    for layer in draft.frames:
        table = draft.config.get(layer)
        if isinstance(table, dict) and isinstance(table.get("path"), str) and table["path"]:
            names.add(Path(table["path"]).name or table["path"])
    return sorted(name for name in names if name)


# ---------------------------------------------------------------------------------------------
# Running a case and judging what it did


@dataclass
class Outcome:
    """What a run did: its exit code (None: no answer in time), stderr, and whether the process died."""

    code: int | None
    stderr: str
    died: bool = False
    seconds: float = 0.0


@dataclass
class Verdict:
    """The judgement of one case: its failures (empty: passed) and the facts behind them."""

    index: int
    category: str
    mutation: str
    detail: str
    mode: str
    engine: str
    formats: dict[str, str]
    code: int | None
    failures: list[str]
    notes: list[str]
    stderr: str
    seconds: float


@contextlib.contextmanager
def captured_descriptors(stdout: Path, stderr: Path) -> Iterator[None]:
    """Send file descriptors 1 and 2 (Python's and the C libraries' output) to files while the block runs."""
    sys.stdout.flush()
    sys.stderr.flush()
    saved = os.dup(1), os.dup(2)
    with stdout.open("wb") as out, stderr.open("wb") as err:
        os.dup2(out.fileno(), 1)
        os.dup2(err.fileno(), 2)
        try:
            yield
        finally:
            with contextlib.suppress(Exception):
                sys.stdout.flush()
                sys.stderr.flush()
            os.dup2(saved[0], 1)
            os.dup2(saved[1], 2)
            os.close(saved[0])
            os.close(saved[1])


def run_in_process(case: Case) -> Outcome:
    """``audit.cli.main`` in this interpreter, with Python's default warning filters and both outputs captured."""
    import audit.cli

    folder = Path(case.folder)
    stdout, stderr = folder / "stdout.txt", folder / "stderr.txt"
    start = time.perf_counter()
    with captured_descriptors(stdout, stderr), warnings.catch_warnings():
        warnings.resetwarnings()  # as a fresh interpreter starts: DeprecationWarning and the like hidden, the rest shown once
        for category in (DeprecationWarning, PendingDeprecationWarning, ImportWarning, ResourceWarning):
            warnings.simplefilter("ignore", category)
        try:
            code = audit.cli.main(case.argv)
        except SystemExit as stop:
            code = stop.code if isinstance(stop.code, int) else 1
        except BaseException:  # what escapes main is printed as the interpreter would print it
            traceback.print_exc()
            code = 1
    seconds = time.perf_counter() - start
    text = stderr.read_text(encoding="utf-8", errors="replace")
    stdout.unlink()
    stderr.unlink()
    return Outcome(int(code), text, seconds=seconds)


def cli_command(argv: Sequence[str]) -> list[str]:
    """The command line of ``sewer-audit`` in a fresh interpreter (the installed entry point's own code)."""
    return [sys.executable, "-c", "import sys, audit.cli; sys.exit(audit.cli.main(sys.argv[1:]))", *argv]


def run_command(command: Sequence[str], *, timeout_s: float, cwd: str | None = None) -> Outcome:
    """A command in a fresh process: its exit code, stderr, and whether it was killed by a signal."""
    start = time.perf_counter()
    environment = {key: value for key, value in os.environ.items() if not key.startswith("PYTHONWARNINGS")}
    with subprocess.Popen(command, stdin=subprocess.DEVNULL, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, cwd=cwd, env=environment,
                          start_new_session=True) as process:  # fmt: skip
        try:
            _, stderr = process.communicate(timeout=timeout_s)
        except subprocess.TimeoutExpired:
            os.killpg(process.pid, 9)
            _, stderr = process.communicate()
            return Outcome(None, stderr.decode("utf-8", "replace"), seconds=time.perf_counter() - start)
    code = process.returncode
    return Outcome(code, stderr.decode("utf-8", "replace"), died=code < 0, seconds=time.perf_counter() - start)


_WARNING = re.compile(r"^.*:\d+: \w*Warning: |^\w*Warning: ", re.MULTILINE)


def judge(case: Case, outcome: Outcome) -> Verdict:
    """Every failure of a finished (or dead, or hung) case, from its outcome and its folder."""
    folder = Path(case.folder)
    failures: list[str] = []
    notes: list[str] = []
    output = Path(case.argv[case.argv.index("-o") + 1])
    if outcome.code is None:
        failures.append("hang")
    elif outcome.died or outcome.code not in DOCUMENTED_EXITS:
        failures.append("crash")
    if "Traceback (most recent call last)" in outcome.stderr:
        failures.append("traceback")
    if _WARNING.search(outcome.stderr):
        failures.append("warning")
    failures += _inputs_changed(case, folder, output, notes)
    failures += _outputs_wrong(case, outcome, output, notes)
    if outcome.code in (1, 2) and not outcome.died and "traceback" not in failures and not _clear(outcome.stderr, case.names):
        failures.append("unclear message")
    return Verdict(index=case.index, category=case.category, mutation=case.mutation, detail=case.detail, mode=case.mode, engine=case.engine,
                   formats=case.formats, code=outcome.code, failures=sorted(set(failures)), notes=notes, stderr=outcome.stderr[:3000],
                   seconds=round(outcome.seconds, 3))  # fmt: skip


def _inputs_changed(case: Case, folder: Path, output: Path, notes: list[str]) -> list[str]:
    after = snapshot(folder)
    changed = [name for name, digest in case.before.items() if after.get(name) != digest]
    produced = {str(output.relative_to(folder))} if output.is_relative_to(folder) else set()
    ours = tuple(f"{p}/" for p in produced)
    beside = [name for name in after if name not in case.before and not name.startswith(ours) and name not in produced
              and not Path(name).name.startswith(f".{output.name}.")]  # fmt: skip
    if changed:
        notes.append(f"changed or gone: {changed[:5]}")
    if beside:
        notes.append(f"new beside the inputs: {beside[:5]}")
    return ["modified input"] if changed or beside else []


def _outputs_wrong(case: Case, outcome: Outcome, output: Path, notes: list[str]) -> list[str]:
    leftovers = [p.name for p in output.parent.glob(f".{output.name}.*")] if output.parent.is_dir() else []
    existed = any(name == output.name or name.startswith(f"{output.name}/") for name in case.before) if output.is_relative_to(case.folder) else True
    if leftovers:
        notes.append(f"left beside the output: {leftovers}")
    if outcome.code != 0:
        written = output.is_dir() and not existed and any(output.iterdir())
        return ["partial output"] if written or leftovers else []
    missing = [name for name in OUTPUTS if not (output / name).is_file()]
    if missing:
        notes.append(f"outputs missing: {missing}")
        return ["partial output"]
    failures = ["partial output"] if leftovers else []
    for layer, expected in case.expected.items():
        got = output_count(output / "audit.gpkg", layer)
        if expected is None:
            notes.append(f"{layer}: the input could not be counted without GDAL; {got} rows out")
        elif got != expected:
            notes.append(f"{layer}: {expected} features in, {got} rows out")
            failures.append("lost features")
    return failures


def _clear(stderr: str, names: Sequence[str]) -> bool:
    """A short message that starts ``sewer-audit:`` and names one of the case's files or folders (as typed, or quoted by repr)."""
    text = stderr.strip()
    named = any(name in text or repr(name)[1:-1] in text for name in names)
    return bool(text) and text.startswith("sewer-audit: ") and len(text) <= MESSAGE_LIMIT and named


# ---------------------------------------------------------------------------------------------
# Workers: long-lived processes that make and run cases; a dead or silent one is replaced


def worker_loop() -> None:
    """Read requests (one JSON line each) on stdin, answer on the stdout this process started with."""
    answers = os.fdopen(os.dup(1), "w", buffering=1, encoding="utf-8")
    null = os.open(os.devnull, os.O_WRONLY)
    os.dup2(null, 1)
    os.close(null)
    for line in sys.stdin:
        request = json.loads(line)
        workdir = Path(request["workdir"])
        scratch = workdir / f"make-{os.getpid()}"
        scratch.mkdir(parents=True, exist_ok=True)
        try:
            with captured_descriptors(scratch / "out.txt", scratch / "err.txt"):
                case = make_case(request["seed"], request["index"], workdir, cli_share=request["cli_share"])
        except Exception:  # the harness's own failure: said, and the next case comes
            answers.write(json.dumps({"error": traceback.format_exc()}) + "\n")
            continue
        answers.write(json.dumps({"case": asdict(case)}) + "\n")
        outcome = run_command(cli_command(case.argv), timeout_s=request["timeout"]) if case.mode == "cli" else run_in_process(case)
        verdict = judge(case, outcome)
        if not request["keep"]:
            shutil.rmtree(case.folder, ignore_errors=True)
        answers.write(json.dumps({"verdict": asdict(verdict)}) + "\n")


class Worker:
    """One worker process and the pipe to it."""

    def __init__(self) -> None:
        self.process = subprocess.Popen([sys.executable, str(SCRIPT), "--worker"], stdin=subprocess.PIPE, stdout=subprocess.PIPE,
                                        stderr=subprocess.DEVNULL, text=True, bufsize=1, start_new_session=True)  # fmt: skip
        self.selector = selectors.DefaultSelector()
        assert self.process.stdout is not None
        self.selector.register(self.process.stdout, selectors.EVENT_READ)
        self.done = 0

    def ask(self, request: dict[str, Any]) -> None:
        assert self.process.stdin is not None
        self.process.stdin.write(json.dumps(request) + "\n")
        self.process.stdin.flush()

    def answer(self, timeout_s: float) -> dict[str, Any] | None:
        """The next answer; ``{}`` when the worker died, None when it said nothing in time."""
        assert self.process.stdout is not None
        if not self.selector.select(timeout_s):
            return None
        line = self.process.stdout.readline()
        return json.loads(line) if line else {}

    def stop(self) -> int | None:
        """End the worker (its process group: any command it started too); its exit status."""
        with contextlib.suppress(ProcessLookupError, PermissionError):
            os.killpg(self.process.pid, 9)
        self.selector.close()
        try:
            return self.process.wait(timeout=30)
        finally:
            for stream in (self.process.stdin, self.process.stdout):
                with contextlib.suppress(OSError):
                    stream and stream.close()  # type: ignore[func-returns-value]


def _serve(indices: queue.SimpleQueue[int | None], verdicts: list[Verdict], settings: dict[str, Any], lock: threading.Lock) -> None:
    """One worker slot: take case numbers until none is left; replace the worker when it dies, hangs or has run enough."""
    worker = Worker()
    while (index := indices.get()) is not None:
        request = {**settings, "index": index}
        worker.ask(request)
        made = worker.answer(timeout_s=300.0)
        if not made:
            verdict = _lost_worker(index, worker)
            worker = Worker()
        elif "case" not in made:
            verdict = _harness_error(index, made.get("error", ""))
        else:
            case = Case(**made["case"])
            timeout = settings["timeout"] * (2.0 if case.mode == "cli" else 1.0)
            answer = worker.answer(timeout_s=timeout + 30.0)
            if not answer:
                hung = answer is None
                status = worker.stop()
                verdict = judge(case, Outcome(None, "", seconds=timeout) if hung else Outcome(status if status is not None else -1, "", died=True))
                if not settings["keep"]:
                    shutil.rmtree(case.folder, ignore_errors=True)
                worker = Worker()
            else:
                verdict = Verdict(**answer["verdict"])
        with lock:
            verdicts.append(verdict)
        worker.done += 1
        if worker.done >= CASES_PER_WORKER:
            worker.stop()
            worker = Worker()
    worker.stop()


def _lost_worker(index: int, worker: Worker) -> Verdict:
    """A worker that died or hung while making a case (writing its files with the libraries): a crash."""
    status = worker.stop()
    return Verdict(index=index, category=CATEGORIES[index % len(CATEGORIES)], mutation="(making the case)", detail="the worker died",
                   mode="in process", engine="", formats={}, code=status, failures=["crash"], notes=["died while writing the case"],
                   stderr="", seconds=0.0)  # fmt: skip


def _harness_error(index: int, text: str) -> Verdict:
    """A case the harness could not make: its own failure, counted apart from the audit's."""
    return Verdict(index=index, category=CATEGORIES[index % len(CATEGORIES)], mutation="(making the case)", detail="the case could not be made",
                   mode="in process", engine="", formats={}, code=None, failures=["harness error"], notes=[], stderr=text[-3000:], seconds=0.0)  # fmt: skip


def run_cases(*, cases: Sequence[int], seed: int, workers: int, cli_share: float, workdir: Path, timeout_s: float = CASE_TIMEOUT_S,
              keep: bool = False, progress: Callable[[int], None] | None = None) -> list[Verdict]:  # fmt: skip
    """Make and run the numbered cases in ``workers`` worker processes; every verdict, by case number."""
    indices: queue.SimpleQueue[int | None] = queue.SimpleQueue()
    for index in cases:
        indices.put(index)
    for _ in range(workers):
        indices.put(None)
    verdicts: list[Verdict] = []
    lock = threading.Lock()
    settings = {"seed": seed, "workdir": str(workdir), "cli_share": cli_share, "timeout": timeout_s, "keep": keep}
    threads = [threading.Thread(target=_serve, args=(indices, verdicts, settings, lock), daemon=True) for _ in range(workers)]
    for thread in threads:
        thread.start()
    while any(thread.is_alive() for thread in threads):
        time.sleep(0.5)
        if progress is not None:
            progress(len(verdicts))
    return sorted(verdicts, key=lambda verdict: verdict.index)


# ---------------------------------------------------------------------------------------------
# The table


def tally(verdicts: Sequence[Verdict]) -> dict[str, Counter[str]]:
    """Per category (and ``all``): cases, exits 0, 1 and 2, and the cases with each failure."""
    counts: dict[str, Counter[str]] = {category: Counter() for category in (*CATEGORIES, "all")}
    for verdict in verdicts:
        for row in (verdict.category, "all"):
            counts[row]["cases"] += 1
            counts[row][f"exit {verdict.code}" if verdict.code in DOCUMENTED_EXITS else "exit other"] += 1
            counts[row]["cli"] += verdict.mode == "cli"
            for failure in verdict.failures:
                counts[row][failure] += 1
    return counts


def table(verdicts: Sequence[Verdict]) -> str:
    """The counts per category as a Markdown table."""
    columns = ("cases", "cli", "exit 0", "exit 1", "exit 2", *FAILURES)
    counts = tally(verdicts)
    lines = ["| category | " + " | ".join(columns) + " |", "|---|" + "---:|" * len(columns)]
    for row, counter in counts.items():
        label = f"**{row}**" if row == "all" else row
        lines.append(f"| {label} | " + " | ".join(f"{counter[column]:,}" for column in columns) + " |")
    return "\n".join(lines)


def coverage(verdicts: Sequence[Verdict]) -> str:
    """How many cases ran per format, engine and way of running."""
    formats = Counter(fmt for verdict in verdicts for fmt in set(verdict.formats.values()))
    engines = Counter(verdict.engine for verdict in verdicts)
    modes = Counter(verdict.mode for verdict in verdicts)
    mutations = Counter(verdict.mutation for verdict in verdicts)
    return (f"formats (cases with a layer in each): {dict(sorted(formats.items()))}; engines: {dict(sorted(engines.items()))}; "
            f"run: {dict(sorted(modes.items()))}; mutations: {len(mutations)} kinds")  # fmt: skip


def main(argv: Sequence[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=(__doc__ or "").splitlines()[0])
    parser.add_argument("--cases", type=int, default=10_000, help="how many cases (default 10,000)")
    parser.add_argument("--first", type=int, default=0, help="number of the first case (to run a long campaign in chunks)")
    parser.add_argument("--case", type=int, action="append", help="run only this case (repeatable)")
    parser.add_argument("--seed", type=int, default=16)
    parser.add_argument("--workers", type=int, default=os.cpu_count() or 1)
    parser.add_argument("--cli-share", type=float, default=0.1, help="share of the cases run through the command line (default 0.1)")
    parser.add_argument("--timeout", type=float, default=CASE_TIMEOUT_S, help="seconds a case may take before it is a hang")
    parser.add_argument("--keep", type=Path, help="write the cases here and keep their files")
    parser.add_argument("--json", type=Path, help="write every verdict to this file (JSON lines)")
    parser.add_argument("--table", type=Path, nargs="+", metavar="JSONL", help="only print the table of verdicts saved by --json (chunks of one run)")
    parser.add_argument("--worker", action="store_true", help=argparse.SUPPRESS)
    args = parser.parse_args(argv)
    if args.worker:
        worker_loop()
        return 0
    if args.table:
        saved = [Verdict(**json.loads(line)) for path in args.table for line in path.read_text(encoding="utf-8").splitlines() if line.strip()]
        print(table(saved))
        print(coverage(saved))
        return 1 if any(verdict.failures for verdict in saved) else 0
    numbers = args.case or list(range(args.first, args.first + args.cases))
    started = time.perf_counter()
    with contextlib.ExitStack() as stack:
        workdir = args.keep or Path(stack.enter_context(tempfile.TemporaryDirectory(prefix="fuzz-")))
        workdir.mkdir(parents=True, exist_ok=True)
        verdicts = run_cases(cases=numbers, seed=args.seed, workers=args.workers, cli_share=args.cli_share, workdir=workdir,
                             timeout_s=args.timeout, keep=args.keep is not None, progress=_progress(len(numbers)))  # fmt: skip
    minutes = (time.perf_counter() - started) / 60.0
    if args.json:
        with args.json.open("a", encoding="utf-8") as handle:
            handle.writelines(json.dumps(asdict(verdict)) + "\n" for verdict in verdicts)
    failed = [verdict for verdict in verdicts if verdict.failures]
    print(f"\n{len(verdicts):,} cases, seed {args.seed}, cases {numbers[0]} to {numbers[-1]}, {minutes:.1f} min, "
          f"{datetime.date.today().isoformat()}")  # fmt: skip
    print(table(verdicts))
    print(coverage(verdicts))
    for verdict in failed[:50]:
        print(f"\ncase {verdict.index} [{verdict.category} / {verdict.mutation}] {verdict.detail}: {', '.join(verdict.failures)} "
              f"(exit {verdict.code}, {verdict.mode}, {verdict.engine}, {verdict.formats}) {'; '.join(verdict.notes)}\n  "
              + verdict.stderr.strip()[-800:].replace("\n", "\n  "))  # fmt: skip
    return 1 if failed else 0


def _progress(total: int) -> Callable[[int], None]:
    state = {"shown": -1}

    def show(done: int) -> None:
        step = max(total // 20, 1)
        if done // step != state["shown"] and sys.stderr.isatty():
            state["shown"] = done // step
            print(f"{done}/{total} cases", file=sys.stderr)

    return show


if __name__ == "__main__":
    sys.exit(main())
