"""One audit as compare reads it: the ``pipes`` and ``manholes`` layers of audit.gpkg and summary.json.

An audit is given as the folder ``sewer-audit run -o`` wrote, or as its ``audit.gpkg`` (the
summary.json beside it is read too). Each layer is read once through Arrow (no Python object
per feature): the fields as a DataFrame, the feature ids and the geometry as WKB (its end points
are read from the bytes, and it is written back as it is).

Which fields are computed results and which are the user's register fields: a computed field
is one named in ``audit.result.PIPE_COLUMNS`` / ``MANHOLE_COLUMNS`` under either unit system
(``audit.result.output_name``), or that name with the ``audit_`` prefix the audit gives it when
the register already uses the name (the register's own field of that name is then a register
field); every other field is a register field. Columns that a later version adds to
``audit.result`` are picked up from there; a column is compared only when both audits have it.

Which register field holds the feature ids: ``--pipe-id`` / ``--manhole-id`` when given, else
``[pipes.fields] id`` / ``[manholes.fields] id`` of the config the audit ran from (its path is
in summary.json), else none: features are then matched by geometry alone, and compare.json says
so.

Every problem that makes an audit unusable raises :class:`~audit.errors.InputError` with one line
naming the file, and the layer and field where one is at fault.
"""

from __future__ import annotations

import json
import tomllib
from collections.abc import Mapping
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd
import pyarrow as pa
import pyogrio
import pyogrio.errors

from audit.errors import InputError
from audit.outputs import FLAG_PREFIX
from audit.result import COMPUTED_PREFIX, MANHOLE_COLUMNS, PIPE_COLUMNS, output_name, written_name
from audit.rules import FLAG_CODES, MANHOLE_FLAG_CODES
from audit.units import SYSTEMS, UnitSystem

#: Computed columns compare does not read: ``reasons`` restates the flags and their numbers, in the audit's units.
NOT_COMPARED = frozenset({"reasons"})

GEOPACKAGE = "audit.gpkg"
SUMMARY = "summary.json"
_READ_ERRORS = (OSError, pyogrio.errors.DataSourceError, pyogrio.errors.DataLayerError, pyogrio.errors.FieldError,
                pyogrio.errors.GeometryError, pyogrio.errors.CRSError, pa.ArrowException)  # fmt: skip


@dataclass(frozen=True)
class LayerKind:
    """What compare needs to know about one audit layer."""

    name: str  # the layer in audit.gpkg, and the config table that maps it
    columns: Mapping[str, str]  # the computed columns of ``audit.result``, by documented name
    codes: tuple[str, ...]  # the computed columns of codes joined by ";", compared as sets: the flags, then any data findings
    needed: tuple[str, ...]  # the computed columns without which a layer is not an audit's output
    required: bool  # an audit always has this layer


PIPES = LayerKind("pipes", PIPE_COLUMNS, ("flags",), ("flags", "severity"), required=True)
#: A manhole layer of an audit made before the hydraulic grade line has its findings but no flags, severity or flood state.
MANHOLES = LayerKind("manholes", MANHOLE_COLUMNS, ("flags", "findings"), ("findings",), required=False)


@dataclass(frozen=True, eq=False)
class AuditLayer:
    """One layer of an audit: its fields, feature ids and geometry, in layer order."""

    kind: LayerKind
    fields: pd.DataFrame  # every field but NOT_COMPARED ones, RangeIndex
    fids: np.ndarray  # int64 feature id of each row
    wkb: pa.Array  # geometry as WKB (null where none)
    geometry_type: str | None  # as the GeoPackage declares it
    crs: str | None
    computed: Mapping[str, str]  # documented name -> the field holding it in this layer
    register: tuple[str, ...]  # the user's register fields, in layer order
    id_field: str | None  # the register field holding the ids, if known
    id_source: str  # where the id field came from, or why there is none

    def __len__(self) -> int:
        return len(self.fields)


@dataclass(frozen=True, eq=False)
class AuditOutput:
    """An audit's outputs as compare reads them."""

    label: str  # OLD or NEW, as the command line calls it
    folder: Path
    geopackage: Path
    summary: Mapping[str, Any]  # summary.json as parsed
    units: UnitSystem  # the unit system the audit's outputs are written in
    pipes: AuditLayer
    manholes: AuditLayer | None  # None when the audit had no manhole layer

    def layer(self, kind: LayerKind) -> AuditLayer | None:
        """The pipes or the manholes."""
        return self.pipes if kind is PIPES else self.manholes

    def working_crs(self) -> str | None:
        """The audit's working CRS (summary.json ``settings.working_crs``), if it names one."""
        settings = self.summary.get("settings")
        crs = settings.get("working_crs") if isinstance(settings, dict) else None
        return crs if isinstance(crs, str) else None

    def placeholder_ids(self) -> set[str]:
        """The node ids the audit read as no node (summary.json ``settings.network.placeholder_ids``)."""
        settings = self.summary.get("settings")
        network = settings.get("network") if isinstance(settings, dict) else None
        values = network.get("placeholder_ids") if isinstance(network, dict) else None
        return {str(value).strip() for value in values} if isinstance(values, list) else set()


def read_audit(path: Path, *, label: str, pipe_id: str | None = None, manhole_id: str | None = None) -> AuditOutput:
    """Read an audit's outputs.

    Parameters
    ----------
    path : the audit's output folder, or its audit.gpkg
    label : what the command line calls this audit (``OLD``, ``NEW``), for messages
    pipe_id, manhole_id : the register field holding the pipe / manhole ids; None: as the
        audit's config mapped it

    Raises
    ------
    InputError
        the path is not an audit's output, summary.json is missing or does not parse, a layer
        or a computed field is missing, or a given id field is not in the layer.
    """
    folder, geopackage = _locate(Path(path), label=label)
    summary = _summary(folder / SUMMARY, label=label)
    units = _units(summary, source=folder / SUMMARY)
    layers = _layer_names(geopackage)
    config = _config(summary)
    read = {}
    for kind, chosen in ((PIPES, pipe_id), (MANHOLES, manhole_id)):
        if kind.name not in layers:
            if kind.required:
                raise InputError(f"{geopackage}: no layer '{kind.name}'; not the GeoPackage of an audit ({label})")
            continue
        read[kind.name] = _read_layer(geopackage, kind, units=units, id_field=chosen, config=config)
    return AuditOutput(label, folder, geopackage, summary, units, read["pipes"], read.get("manholes"))


def _locate(path: Path, *, label: str) -> tuple[Path, Path]:
    """The audit folder and its GeoPackage, from either."""
    if path.is_dir():
        if not (path / GEOPACKAGE).is_file():
            raise InputError(f"{path}: not an audit's output folder ({label}): it holds no {GEOPACKAGE}; give the folder `sewer-audit run -o` wrote")
        return path, path / GEOPACKAGE
    if path.is_file():
        return path.parent, path
    raise InputError(f"{path}: no such folder or file ({label})")


def _summary(path: Path, *, label: str) -> Mapping[str, Any]:
    try:
        data = json.loads(path.read_text(encoding="utf-8"))
    except FileNotFoundError:
        raise InputError(f"{path}: missing; compare reads the summary.json an audit writes beside {GEOPACKAGE} ({label})") from None
    except (OSError, UnicodeDecodeError) as error:
        raise InputError(f"{path}: cannot be read: {error}") from None
    except json.JSONDecodeError as error:
        raise InputError(f"{path}: not valid JSON: {error}") from None
    if not isinstance(data, dict):
        raise InputError(f"{path}: expected a JSON object, got {type(data).__name__}")
    return data


def _units(summary: Mapping[str, Any], *, source: Path) -> UnitSystem:
    units = summary.get("units")
    system = units.get("system") if isinstance(units, dict) else None
    if not isinstance(system, str) or system not in SYSTEMS:
        raise InputError(f"{source}: units.system: expected one of {', '.join(SYSTEMS)}, got {system!r}")
    return SYSTEMS[system]


def _layer_names(geopackage: Path) -> set[str]:
    try:
        return {str(name) for name in pyogrio.list_layers(geopackage)[:, 0]}
    except _READ_ERRORS as error:
        raise InputError(f"{geopackage}: cannot be read as a GeoPackage: {_first_line(error)}") from None


def _first_line(error: BaseException) -> str:
    return str(error).splitlines()[0] if str(error) else type(error).__name__


def _config(summary: Mapping[str, Any]) -> tuple[Path | None, Mapping[str, Any] | None, str]:
    """The config the audit ran from, parsed, or why it cannot be read."""
    recorded = summary.get("config")
    if not isinstance(recorded, str) or not recorded:
        return None, None, "summary.json names no config file"
    path = Path(recorded)
    try:
        return path, tomllib.loads(path.read_text(encoding="utf-8")), ""
    except (OSError, UnicodeDecodeError, tomllib.TOMLDecodeError) as error:
        return path, None, f"the config {path} cannot be read ({type(error).__name__})"


def _read_layer(geopackage: Path, kind: LayerKind, *, units: UnitSystem, id_field: str | None,
                config: tuple[Path | None, Mapping[str, Any] | None, str]) -> AuditLayer:  # fmt: skip
    try:
        names = [str(name) for name in pyogrio.read_info(geopackage, layer=kind.name)["fields"]]
        unread = {field for name, field in computed_fields(names, kind.columns, units).items() if name in NOT_COMPARED}
        meta, table = pyogrio.read_arrow(geopackage, layer=kind.name, return_fids=True, columns=[name for name in names if name not in unread])
    except _READ_ERRORS as error:
        raise InputError(f"{geopackage}: layer {kind.name}: cannot be read: {_first_line(error)}") from None
    fids = table.column(0).to_numpy()
    table = table.remove_column(0)
    where = table.schema.get_all_field_indices(meta["geometry_name"] or "") if meta.get("geometry_type") else []
    if where:
        wkb = table.column(where[-1]).combine_chunks()
        table = table.remove_column(where[-1])
    else:
        wkb = pa.nulls(table.num_rows, type=pa.binary())
    fields = table.to_pandas()
    computed = computed_fields(list(fields.columns), kind.columns, units)
    for name in kind.needed:
        if name not in computed:
            raise InputError(f"{geopackage}: layer {kind.name}: no field '{output_name(name, units)}'; not the output of an audit")
    register = register_fields(list(fields.columns), kind.columns, computed)
    chosen, source = _id_field(kind, register, given=id_field, config=config, where=f"{geopackage}: layer {kind.name}")
    return AuditLayer(kind, fields, np.asarray(fids, dtype=np.int64), wkb, meta.get("geometry_type"), meta.get("crs"),
                      computed, register, chosen, source)  # fmt: skip


def computed_fields(columns: list[str], documented: Mapping[str, str], units: UnitSystem) -> dict[str, str]:
    """The field holding each computed column a layer has, by documented name.

    A computed column is written under its name in the audit's unit system, or with the
    ``audit_`` prefix when the register already used that name.

    Examples
    --------
    >>> from audit.units import SI
    >>> computed_fields(["REF", "slope", "audit_slope", "q_design_l_s"], {"slope": "", "q_design": "", "flags": ""}, SI)
    {'slope': 'audit_slope', 'q_design': 'q_design_l_s'}
    """
    present = set(columns)
    written = {name: written_name(present, output_name(name, units)) for name in documented}
    return {name: field for name, field in written.items() if field is not None}


#: The yes/no column of each flag (``audit.outputs.flag_columns``), under either name it may have.
FLAG_COLUMNS = frozenset(prefix + FLAG_PREFIX + code for code in (*FLAG_CODES, *MANHOLE_FLAG_CODES) for prefix in ("", COMPUTED_PREFIX))


def register_fields(columns: list[str], documented: Mapping[str, str], computed: Mapping[str, str]) -> tuple[str, ...]:
    """The register fields: neither a computed column's name in either unit system nor a computed field found.

    Examples
    --------
    >>> register_fields(["REF", "slope", "audit_slope", "q_design_cfs"], {"slope": "", "q_design": ""}, {"slope": "audit_slope"})
    ('REF', 'slope')
    """
    names = {output_name(name, system) for name in documented for system in SYSTEMS.values()}
    bare = {field.removeprefix(COMPUTED_PREFIX) for field in computed.values() if field.startswith(COMPUTED_PREFIX)}
    taken = (names - bare) | set(computed.values()) | FLAG_COLUMNS  # the yes/no flag columns repeat the flags: never register fields
    return tuple(column for column in columns if column not in taken)


def _id_field(kind: LayerKind, register: tuple[str, ...], *, given: str | None,
              config: tuple[Path | None, Mapping[str, Any] | None, str], where: str) -> tuple[str | None, str]:  # fmt: skip
    """The register field holding the ids, and where that came from (or why there is none)."""
    option = f"--{kind.name.removesuffix('s').replace('_', '-')}-id"
    if given is not None:
        if given not in register:
            raise InputError(f"{where}: no register field '{given}' ({option})")
        return given, option
    path, data, problem = config
    if data is None:
        return None, f"{problem}; give {option}"
    table = data.get(kind.name)
    mapped = table.get("fields", {}).get("id") if isinstance(table, dict) and isinstance(table.get("fields"), dict) else None
    if not isinstance(mapped, str):
        return None, f"the config {path} maps no {kind.name} id; give {option}"
    if mapped not in register:
        return None, f"the config {path} maps the {kind.name} id to '{mapped}', which the layer does not hold; give {option}"
    return mapped, f"the config {path}"
