"""The outputs stage: the annotated GeoPackage, summary.json and candidates.csv.

``write_outputs`` writes three files into one folder:

* ``audit.gpkg``: layers ``pipes`` (every input feature with every original field, then the
  computed columns), ``manholes`` (when there are any) and ``findings`` (points);
* ``summary.json``: totals, flag counts and lengths, findings per code, the rules and settings
  used, and the caution (see ``audit._summary``);
* ``candidates.csv``: flagged pipes ranked for a closer look (see ``audit._candidates``).

Every file is first written to a temporary file in the folder (``.audit.gpkg.tmp-XXXX.gpkg``: GDAL wants the extension); only
when all three are complete are they renamed into place with ``os.replace``. A failed run removes
its temporary files and leaves every existing file as it was. A folder that already holds files
is refused unless ``overwrite`` is given, and then only these three files are replaced. A target
that is an input file is always refused.

GeoPackage holds almost any field name unchanged: mixed case, spaces, 10-character Shapefile
names. It cannot hold two names equal but for case (SQLite column names ignore case), nor a
field named like the layer's id or geometry column. The last two are avoided by choosing an id
and a geometry column name no field uses; a case-insensitive duplicate is renamed ``<name>_2``
and the rename is written as a finding, so no name is altered silently.

Finding codes emitted: ``field_renamed`` (a field written under a new name, see above).
"""

from __future__ import annotations

import os
import sys
import tempfile
from collections.abc import Callable, Hashable, Iterable, Iterator, Mapping
from contextlib import contextmanager
from pathlib import Path

import geopandas as gpd
import numpy as np
import pandas as pd
import pyarrow as pa
import pyogrio
import pyogrio.errors
import shapely
from tqdm import tqdm

from audit.errors import AuditError, OutputExistsError
from audit.outputs.candidates import rank_candidates, write_candidates
from audit.outputs.summary import (
    CAUTION,
    build_summary,
    print_summary_table,
    write_summary,
)
from audit.result import AuditResult

__all__ = ["CAUTION", "OUTPUT_FILES", "print_summary_table", "rank_candidates", "safe_field_names", "write_outputs"]

#: The files the outputs stage writes, by role.
OUTPUT_FILES: Mapping[str, str] = {"geopackage": "audit.gpkg", "summary": "summary.json", "candidates": "candidates.csv"}

CANONICAL_FOR_CANDIDATES = ("pipe_id", "shape", "diameter", "height", "install_year", "material")
_ID_NAMES = ("fid", "gpkg_fid", "feature_fid")
_GEOMETRY_NAMES = ("geom", "geometry", "feature_geom")
_ARROW_ERRORS = (pa.ArrowException, TypeError)
_WRITE_ERRORS = (OSError, pyogrio.errors.DataSourceError, pyogrio.errors.DataLayerError,
                 pyogrio.errors.FieldError, pyogrio.errors.GeometryError)  # fmt: skip
_GDAL_SIDECARS = ("-journal", "-wal", "-shm")


def write_outputs(
    result: AuditResult, outdir: Path, *, overwrite: bool = False, progress: bool = False,
    include_low: bool = False,
) -> dict[str, Path]:  # fmt: skip
    """Write the GeoPackage, the summary and the candidate list of an audit into ``outdir``.

    Parameters
    ----------
    result : the audit to write
    outdir : the output folder; created if absent
    overwrite : replace our three files in a folder that already holds files (others stay)
    progress : show a progress bar over the layers and files written, on stderr
    include_low : list pipes whose worst flag is of low severity in candidates.csv too

    Returns
    -------
    the path of each file written, by role (``geopackage``, ``summary``, ``candidates``)

    Raises
    ------
    OutputExistsError
        when ``outdir`` holds files and ``overwrite`` is not given, is not a folder, or when a
        target file is one of the inputs.
    AuditError
        when a file cannot be written (the message names it); no partial file is left.
    """
    outdir = Path(outdir)
    targets = {role: outdir / name for role, name in OUTPUT_FILES.items()}
    _refuse_inputs(targets.values(), inputs=(*result.inputs, *_optional(result.config_path)))
    _prepare_folder(outdir, overwrite=overwrite)
    pipes, manholes, findings = _layers_to_write(result)
    steps = 4 + (manholes is not None)  # two or three layers, then the two files
    with tqdm(total=steps, desc="writing outputs", unit="part", file=sys.stderr, disable=not progress) as bar, _staged(outdir, targets) as temp:
        _write_geopackage(temp["geopackage"], pipes=pipes, manholes=manholes, findings=findings, step=bar.update)
        summary = build_summary(result, pipes=result.pipe_results, findings=findings)
        write_summary(summary, temp["summary"])
        bar.update()
        write_candidates(rank_candidates(_with_canonical(result), include_low=include_low), temp["candidates"])
        bar.update()
    return targets


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
    canonical = result.canonical_pipes[wanted].reset_index(drop=True)
    computed = pd.DataFrame(result.pipe_results.drop(columns=wanted, errors="ignore")).reset_index(drop=True)
    return pd.concat([computed, canonical], axis=1)


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


def _prepare_folder(outdir: Path, *, overwrite: bool) -> None:
    if outdir.exists() and not outdir.is_dir():
        raise OutputExistsError(f"{outdir}: the output folder is a file; give a folder")
    if outdir.is_dir() and any(outdir.iterdir()) and not overwrite:
        raise OutputExistsError(
            f"{outdir}: the output folder already holds files; pass --overwrite to replace "
            f"{', '.join(OUTPUT_FILES.values())} (other files are left alone) or choose an empty folder"
        )
    try:
        outdir.mkdir(parents=True, exist_ok=True)
    except OSError as error:
        raise AuditError(f"{outdir}: cannot create the output folder: {error.strerror}") from error


@contextmanager
def _staged(outdir: Path, targets: Mapping[str, Path]) -> Iterator[dict[str, Path]]:
    """Temporary paths beside each target; renamed into place only if the block succeeds."""
    temp: dict[str, Path] = {}
    try:
        for role, target in targets.items():
            handle, name = tempfile.mkstemp(prefix=f".{target.name}.tmp-", suffix=target.suffix, dir=outdir)
            os.close(handle)
            temp[role] = Path(name)
        yield temp
        mode = 0o666 & ~_umask()  # mkstemp makes owner-only files; outputs are ordinary files
        for role, target in targets.items():
            os.chmod(temp[role], mode)
            os.replace(temp[role], target)
    except _WRITE_ERRORS as error:
        raise AuditError(f"{outdir}: cannot write the outputs: {error}") from error
    finally:
        _remove(temp.values())


def _umask() -> int:
    current = os.umask(0)
    os.umask(current)
    return current


def _remove(paths: Iterable[Path]) -> None:
    for path in paths:
        for leftover in (path, *(Path(f"{path}{end}") for end in _GDAL_SIDECARS)):
            leftover.unlink(missing_ok=True)


def _layers_to_write(result: AuditResult) -> tuple[gpd.GeoDataFrame, gpd.GeoDataFrame | None, gpd.GeoDataFrame]:
    """The three layers with safe field names, and the renames added to the findings."""
    extra: list[gpd.GeoDataFrame] = []
    pipes = _renamed(result.pipes, layer="pipes", notes=extra, crs=result.findings.crs)
    manholes = None
    if result.manholes is not None:
        manholes = _renamed(result.manholes, layer="manholes", notes=extra, crs=result.findings.crs)
    findings = result.findings
    if extra:
        findings = pd.concat([findings, *extra], ignore_index=True)
    return pipes, manholes, _point_geometry(gpd.GeoDataFrame(findings, geometry=findings.geometry.name))


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


def _write_geopackage(path: Path, *, pipes: gpd.GeoDataFrame, manholes: gpd.GeoDataFrame | None,
                      findings: gpd.GeoDataFrame, step: Callable[[], object]) -> None:  # fmt: skip
    path.unlink()  # GDAL creates the file itself
    layers = {"pipes": (pipes, None), "manholes": (manholes, None), "findings": (findings, "Point")}
    for layer, (frame, geometry_type) in layers.items():
        if frame is not None:
            _write_layer(frame, path, layer=layer, geometry_type=geometry_type)
            step()


def _write_layer(frame: gpd.GeoDataFrame, path: Path, *, layer: str, geometry_type: str | None) -> None:
    """Write one layer by pyogrio: through Arrow where the columns convert, else feature by feature."""
    fields = [str(name) for name in frame.columns if name != frame.geometry.name]
    options = {"FID": _free_name(_ID_NAMES, fields), "GEOMETRY_NAME": _free_name(_GEOMETRY_NAMES, fields)}
    try:
        pyogrio.write_dataframe(frame, path, layer=layer, driver="GPKG", use_arrow=True,
                                layer_options=options, geometry_type=geometry_type)  # fmt: skip
    except _ARROW_ERRORS:
        pyogrio.write_dataframe(frame, path, layer=layer, driver="GPKG", use_arrow=False,
                                layer_options={**options, "OVERWRITE": "YES"}, geometry_type=geometry_type)  # fmt: skip


def _free_name(candidates: tuple[str, ...], fields: list[str]) -> str:
    """The first candidate that no field uses, ignoring case."""
    used = {name.casefold() for name in fields}
    free = [name for name in candidates if name not in used]
    suffix = 2
    while not free:
        free = [f"{candidates[0]}_{suffix}"] if f"{candidates[0]}_{suffix}" not in used else []
        suffix += 1
    return free[0]
