"""The outputs stage: the annotated GeoPackage, summary.json and candidates.csv.

``write_outputs`` writes three files into one folder:

* ``audit.gpkg``: layers ``pipes`` (every input feature with every original field, then the
  computed columns), ``manholes`` (when there are any) and ``findings`` (points);
* ``summary.json``: totals, flag counts and lengths, findings per code, the rules and settings
  used, and the caution (see ``audit._summary``);
* ``candidates.csv``: flagged pipes ranked for a closer look (see ``audit._candidates``).

Every file is written into a fresh folder beside the target, which takes the target's place only
when all of them are complete (``audit.outputs.folder``): a failed, interrupted or killed run
leaves the earlier output as it was, or nothing. A folder that already holds files is refused
unless ``overwrite`` is given; other files in it are carried over untouched. A target that is an
input file is always refused.

GeoPackage holds almost any field name unchanged: mixed case, spaces, 10-character Shapefile
names. It cannot hold two names equal but for case (SQLite column names ignore case), nor a
field named like the layer's id or geometry column. The last two are avoided by choosing an id
and a geometry column name no field uses; a case-insensitive duplicate is renamed ``<name>_2``
and the rename is written as a finding, so no name is altered silently.

Finding codes emitted: ``field_renamed`` (a field written under a new name, see above).
"""

from __future__ import annotations

import os
import sqlite3
import sys
from collections.abc import Callable, Hashable, Iterable, Mapping
from datetime import datetime
from pathlib import Path

import geopandas as gpd
import numpy as np
import pandas as pd
import pyogrio
import pyogrio.errors
import shapely
from tqdm import tqdm

from audit.errors import AuditError, OutputExistsError
from audit.outputs.candidates import rank_candidates, write_ranked_candidates
from audit.outputs.descriptions import FLAG_PREFIX, layer_texts, write_caution, write_descriptions
from audit.outputs.flag_columns import with_flag_columns
from audit.outputs.folder import problem, staged_folder
from audit.outputs.geopackage import Layer, LayerWriteError, LayerWriter
from audit.outputs.schemes import write_schemes
from audit.outputs.styles import finding_style, manhole_style, pipe_style, write_styles
from audit.outputs.summary import (
    CAUTION,
    build_summary,
    print_summary_table,
    write_summary,
)
from audit.result import COLUMN_UNITS, COMPUTED_PREFIX, MANHOLE_COLUMNS, PIPE_COLUMNS, AuditResult, output_name, written_name
from audit.rules import FLAG_CODES, MANHOLE_FLAG_CODES
from audit.units import UnitSystem

__all__ = ["CAUTION", "OUTPUT_FILES", "print_summary_table", "rank_candidates", "safe_field_names", "write_outputs"]

#: The files the outputs stage writes, by role.
OUTPUT_FILES: Mapping[str, str] = {"geopackage": "audit.gpkg", "summary": "summary.json", "candidates": "candidates.csv", "schemes": "schemes.csv"}

CANONICAL_FOR_CANDIDATES = ("pipe_id", "shape", "diameter", "height", "install_year", "material")
_WRITE_ERRORS = (OSError, sqlite3.Error, pyogrio.errors.DataSourceError, pyogrio.errors.DataLayerError,
                 pyogrio.errors.FieldError, pyogrio.errors.GeometryError, LayerWriteError)  # fmt: skip


def write_outputs(
    result: AuditResult, outdir: Path, *, overwrite: bool = False, progress: bool = False,
    include_low: bool = False, extra: Mapping[str, tuple[str, Callable[[Path], Path]]] | None = None, created: datetime | None = None,
) -> dict[str, Path]:  # fmt: skip
    """Write the GeoPackage, the summary, the candidate list and any ``extra`` files into ``outdir``, all at once.

    Every file is written into a fresh folder beside ``outdir``, which takes ``outdir``'s place
    only when all of them are complete (:mod:`audit.outputs.folder`): a failed, interrupted or
    killed run leaves the earlier output as it was, or nothing.

    Parameters
    ----------
    result : the audit to write
    outdir : the output folder; created if absent
    overwrite : replace the outputs in a folder that already holds files (other files stay)
    progress : show a progress bar over the layers and files written, on stderr
    include_low : list pipes whose worst flag is of low severity in candidates.csv too
    extra : more files, by role: the file's name and a function that writes it into the folder it
        is given and returns its path (the report, written by ``audit.report``)
    created : the run's time stamp, recorded in summary.json (give the report the same); None: now

    Returns
    -------
    the path of each file written, by role (``geopackage``, ``summary``, ``candidates`` and the
    roles of ``extra``)

    Raises
    ------
    OutputExistsError
        when ``outdir`` holds files and ``overwrite`` is not given, is not a folder, or when a
        target file is one of the inputs.
    AuditError
        when a file cannot be written (the message names it); nothing is left half written.
    """
    outdir = Path(outdir)
    targets = {role: outdir / name for role, name in OUTPUT_FILES.items()}
    _refuse_inputs([*targets.values(), outdir], inputs=(*result.inputs, *_optional(result.config_path)))  # before the work; the report is checked once written
    pipes, manholes, findings, texts = _layers_to_write(result)
    later = dict(extra or {})
    steps = 4 + (manholes is not None) + len(later)  # two or three layers, then the files
    written: dict[str, Path] = {}
    inputs = (*result.inputs, *_optional(result.config_path))
    with tqdm(total=steps, desc="writing outputs", unit="part", file=sys.stderr, disable=not progress) as bar, \
            staged_folder(outdir, overwrite=overwrite, keep=inputs, names=[*OUTPUT_FILES.values(), *(name for name, _ in later.values())]) as stage:  # fmt: skip
        try:
            layers = [Layer("pipes", pipes), *([Layer("manholes", manholes)] if manholes is not None else []), Layer("findings", findings, "Point")]
            # the GeoPackage is written by a second process while this one writes the other files
            with LayerWriter(stage / OUTPUT_FILES["geopackage"], layers, scratch=stage):
                summary = build_summary(result, pipes=result.pipe_results, findings=findings, created=created)
                write_summary(summary, stage / OUTPUT_FILES["summary"])
                bar.update()
                write_ranked_candidates(_with_canonical(result), stage / OUTPUT_FILES["candidates"], include_low=include_low, units=result.units)
                write_schemes(result.schemes if result.schemes is not None else pd.DataFrame(), stage / OUTPUT_FILES["schemes"], units=result.units)
                bar.update()
                for role, (_, write) in later.items():
                    written[role] = write(stage)
                    bar.update()
            bar.update(len(layers))
            _describe_geopackage(stage / OUTPUT_FILES["geopackage"], pipes=pipes, manholes=manholes, texts=texts, units=result.units)
        except _WRITE_ERRORS as error:
            raise AuditError(f"{outdir}: cannot write the outputs: {problem(error, stage)}") from error
    return {**targets, **{role: outdir / path.name for role, path in written.items()}}


def safe_field_names(columns: list[Hashable]) -> dict[str, str]:
    """New names for the fields a GeoPackage layer cannot hold unchanged.

    Parameters
    ----------
    columns : the non-geometry column names of a layer, in output order

    Returns
    -------
    mapping from each renamed field to its new name; empty when every name is kept. The first of
    a group of names equal but for case keeps its name; later ones get ``_2``, ``_3``, ...

    Examples
    --------
    >>> safe_field_names(["Diam", "Pipe ID", "diam", "DIAM", "diam_2"])
    {'diam': 'diam_3', 'DIAM': 'DIAM_4'}
    """
    taken = {str(name).casefold() for name in columns}
    seen: set[str] = set()
    renamed: dict[str, str] = {}
    for name in map(str, columns):
        if name.casefold() not in seen:
            seen.add(name.casefold())
            continue
        suffix = 2
        while f"{name}_{suffix}".casefold() in taken:
            suffix += 1
        renamed[name] = f"{name}_{suffix}"
        taken.add(renamed[name].casefold())
    return renamed


def _with_canonical(result: AuditResult) -> pd.DataFrame:
    """The pipes with the canonical id, shape, size, year and material in place of same-named fields."""
    if result.canonical_pipes is None:
        return result.pipe_results
    wanted = [name for name in CANONICAL_FOR_CANDIDATES if name in result.canonical_pipes.columns]
    pipes = result.pipe_results
    columns = {**{name: pipes[name].array for name in pipes.columns if name not in wanted}, **{name: result.canonical_pipes[name].array for name in wanted}}
    return pd.DataFrame(columns, copy=False)  # the columns side by side, not copied


def _optional(path: Path | None) -> tuple[Path, ...]:
    return () if path is None else (Path(path),)


def _same_file(first: Path, second: Path) -> bool:
    if first.resolve() == second.resolve():
        return True
    return first.exists() and second.exists() and os.path.samefile(first, second)


def _refuse_inputs(targets: Iterable[Path], *, inputs: tuple[Path, ...]) -> None:
    for target in targets:
        for source in inputs:
            if _same_file(target, Path(source)):
                raise OutputExistsError(
                    f"{target}: this output file would replace the input {source}; choose another output folder"
                )


def _layers_to_write(result: AuditResult) -> tuple[gpd.GeoDataFrame, gpd.GeoDataFrame | None, gpd.GeoDataFrame, dict[str, dict[str, tuple[str, str]]]]:
    """The three layers with safe field names and a yes/no column per flag, the renames added to
    the findings, and the title and description of each computed field by layer."""
    extra: list[gpd.GeoDataFrame] = []
    texts: dict[str, dict[str, tuple[str, str]]] = {}
    pipes = in_output_units(result.pipes, PIPE_COLUMNS, result.units)
    pipes, flag_names = with_flag_columns(pipes, written_name(pipes.columns, "flags"), FLAG_CODES)
    texts["pipes"] = _described(pipes, layer_texts("pipes", result.units, FLAG_CODES), flag_names)
    pipes = _renamed(pipes, layer="pipes", notes=extra, crs=result.findings.crs)
    manholes = None
    if result.manholes is not None:
        manholes = in_output_units(result.manholes, MANHOLE_COLUMNS, result.units)
        manholes, flag_names = with_flag_columns(manholes, written_name(manholes.columns, "flags"), MANHOLE_FLAG_CODES)
        texts["manholes"] = _described(manholes, layer_texts("manholes", result.units, MANHOLE_FLAG_CODES), flag_names)
        manholes = _renamed(manholes, layer="manholes", notes=extra, crs=result.findings.crs)
    findings = result.findings
    if extra:
        findings = pd.concat([findings, *extra], ignore_index=True)
    texts["findings"] = layer_texts("findings", result.units, ())
    return pipes, manholes, _point_geometry(gpd.GeoDataFrame(findings, geometry=findings.geometry.name)), texts


def _described(frame: gpd.GeoDataFrame, texts: Mapping[str, tuple[str, str]], flag_names: Mapping[str, str]) -> dict[str, tuple[str, str]]:
    """The texts of the computed block at the end of the layer's fields, by written name.

    The block is read from the last field back while each field (without ``audit_``) has a text
    and has not been seen, so an original field that happens to share a computed name is never
    described as ours.
    """
    texts = {**texts, **{written: texts[FLAG_PREFIX + code] for code, written in flag_names.items()}}
    described: dict[str, tuple[str, str]] = {}
    seen: set[str] = set()
    for field in reversed([str(column) for column in frame.columns if column != frame.geometry.name]):
        name = field if field in texts else field.removeprefix(COMPUTED_PREFIX)
        if name not in texts or name in seen:
            break
        seen.add(name)
        described[field] = texts[name]
    return described


def in_output_units(frame: gpd.GeoDataFrame, computed: Iterable[str], units: UnitSystem) -> gpd.GeoDataFrame:
    """The layer with its computed columns (its last ones, ``computed`` in order) under their output
    names and in ``units`` (``audit.result.output_name``); the original fields untouched.

    A computed column written as ``audit_<name>`` (its name was taken) keeps the prefix; so does
    one whose output name an original field holds (a field named ``height_mm``, say), ignoring case.
    """
    out = frame.copy(deep=False)
    fields = [column for column in out.columns if column != out.geometry.name]
    present = {str(field).removeprefix(COMPUTED_PREFIX) for field in fields}
    names = [name for name in computed if name in present]  # a result made without a stage lacks its columns
    columns = fields[len(fields) - len(names):]
    originals = {str(field).casefold() for field in fields[: len(fields) - len(names)]}
    renames: dict[str, str] = {}
    for column, name in zip(columns, names, strict=True):
        if str(column).removeprefix(COMPUTED_PREFIX) != name:
            continue  # not the computed block this result should end with: leave it as it is
        taken = str(column).startswith(COMPUTED_PREFIX) or output_name(name, units).casefold() in originals
        renames[column] = (COMPUTED_PREFIX if taken else "") + output_name(name, units)
        if name in COLUMN_UNITS:
            out[column] = units.convert(pd.to_numeric(out[column], errors="coerce").to_numpy(dtype=float), COLUMN_UNITS[name][1])
    return out.rename(columns=renames)


def _renamed(frame: gpd.GeoDataFrame, *, layer: str, notes: list[gpd.GeoDataFrame], crs: object) -> gpd.GeoDataFrame:
    fields = [name for name in frame.columns if name != frame.geometry.name]
    renamed = safe_field_names(fields)
    if not renamed:
        return frame
    messages = [
        f"field '{old}' is written as '{new}': GeoPackage field names ignore case and an earlier field has "
        "the same name"
        for old, new in renamed.items()
    ]
    notes.append(gpd.GeoDataFrame(
        {"layer": layer, "feature": "*", "code": "field_renamed", "message": pd.Series(messages, dtype=object)},
        geometry=gpd.GeoSeries([None] * len(messages), crs=crs),
    ))  # fmt: skip
    positions = [renamed.get(str(name), str(name)) if name != frame.geometry.name else name for name in frame.columns]
    out = frame.copy()
    out.columns = positions
    return out.set_geometry(frame.geometry.name)


def _point_geometry(findings: gpd.GeoDataFrame) -> gpd.GeoDataFrame:
    """The findings with empty or NaN-coordinate points written as no geometry."""
    geometry = findings.geometry.to_numpy()
    usable = ~(shapely.is_missing(geometry) | shapely.is_empty(geometry))
    x = np.full(len(geometry), np.nan)
    y = np.full(len(geometry), np.nan)
    x[usable] = shapely.get_x(geometry[usable])
    y[usable] = shapely.get_y(geometry[usable])
    cleaned = np.where(np.isfinite(x) & np.isfinite(y), geometry, None)
    return findings.set_geometry(gpd.GeoSeries(cleaned, index=findings.index, crs=findings.crs))


def _describe_geopackage(path: Path, *, pipes: gpd.GeoDataFrame, manholes: gpd.GeoDataFrame | None,
                         texts: Mapping[str, Mapping[str, tuple[str, str]]], units: UnitSystem) -> None:  # fmt: skip
    """The default style of each layer (``layer_styles``), what each computed field means (``gpkg_data_columns``) and the
    caution in each layer's description, in one transaction on the written file."""
    styles = [pipe_style(list(pipes.columns), units), manhole_style(list(manholes.columns)) if manholes is not None else None, finding_style()]
    with sqlite3.connect(path) as connection:
        write_styles(connection, [style for style in styles if style is not None])
        write_descriptions(connection, texts)
        write_caution(connection, CAUTION, ["pipes", "findings"] if manholes is None else ["pipes", "manholes", "findings"])
    connection.close()
