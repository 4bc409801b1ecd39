"""The comparison's files, written all at once: compare.gpkg, changes.csv, compare.json, compare.html.

Every file is written into a fresh folder beside the target, which takes the target's place only
when all of them are complete (:mod:`audit.outputs.folder`, as for an audit): a failed,
interrupted or killed compare leaves the earlier output as it was, or nothing. A folder that
already holds files is refused unless ``overwrite`` is given (other files in it are carried over
untouched); an output folder that is one of the two audits' folders is always refused.

compare.gpkg holds the change tables as layers ``pipes`` and ``manholes`` (when either audit has
manholes), each row with the later audit's geometry, or the earlier one's for a removed feature,
written through Arrow as it was read (no Python object per feature). Layer styles are not written.
"""

from __future__ import annotations

from collections.abc import Mapping
from datetime import UTC, datetime
from pathlib import Path

import pandas as pd
import pyarrow as pa
import pyogrio
import pyogrio.errors

from audit.compare.comparison import Comparison, LayerComparison
from audit.compare.differences import UNCHANGED
from audit.compare.page import render_comparison_page
from audit.compare.summary import build_comparison
from audit.errors import AuditError, OutputExistsError
from audit.outputs import write_summary
from audit.outputs.folder import staged_folder

#: The files compare writes, by role.
COMPARE_FILES: Mapping[str, str] = {"geopackage": "compare.gpkg", "changes": "changes.csv", "summary": "compare.json", "page": "compare.html"}

#: The geometry column of compare.gpkg's layers (no change column uses the name).
GEOMETRY_NAME = "geom"

_WRITE_ERRORS = (OSError, pa.ArrowException, pyogrio.errors.DataSourceError, pyogrio.errors.DataLayerError,
                 pyogrio.errors.FieldError, pyogrio.errors.GeometryError)  # fmt: skip


def write_comparison(comparison: Comparison, outdir: Path, *, overwrite: bool = False, created: datetime | None = None) -> dict[str, Path]:
    """Write the four files of a comparison into ``outdir``, all at once.

    Parameters
    ----------
    comparison : what :func:`audit.compare.compare_audits` found
    outdir : the output folder; created if absent
    overwrite : replace the outputs in a folder that already holds files (other files stay)
    created : the time stamp recorded in compare.json and on the page; None: now

    Returns
    -------
    the path of each file, by role (``geopackage``, ``changes``, ``summary``, ``page``)

    Raises
    ------
    OutputExistsError
        ``outdir`` holds files and ``overwrite`` is not given, is not a folder, or is the folder
        of one of the two audits.
    AuditError
        a file cannot be written (the message names the folder); nothing is left half written.
    """
    outdir = Path(outdir)
    for audit in (comparison.old, comparison.new):
        if outdir.resolve() == audit.folder.resolve():
            raise OutputExistsError(f"{outdir}: is the folder of the audit {audit.label}; choose another output folder for the comparison")
    created = created or datetime.now(UTC)
    with staged_folder(outdir, overwrite=overwrite, names=COMPARE_FILES.values()) as stage:
        try:
            path = stage / COMPARE_FILES["geopackage"]
            for number, layer in enumerate(comparison.layers()):
                write_layer(layer, path, append=number > 0)
            changes_table(comparison).to_csv(stage / COMPARE_FILES["changes"], index=False, encoding="utf-8")
            write_summary(build_comparison(comparison, created=created), stage / COMPARE_FILES["summary"])
            (stage / COMPARE_FILES["page"]).write_text(render_comparison_page(comparison, created=created), encoding="utf-8")
        except _WRITE_ERRORS as error:
            raise AuditError(f"{outdir}: cannot write the comparison: {error}") from error
    return {role: outdir / name for role, name in COMPARE_FILES.items()}


def write_layer(layer: LayerComparison, path: Path, *, append: bool) -> None:
    """One change table as a GeoPackage layer, through Arrow; words (categoricals) and columns of nulls are written as text."""
    table = pa.Table.from_pandas(layer.table, preserve_index=False)
    for index, field in enumerate(table.schema):
        if pa.types.is_null(field.type) or pa.types.is_dictionary(field.type):
            table = table.set_column(index, field.name, table.column(index).cast(pa.string()))
    table = table.append_column(GEOMETRY_NAME, layer.wkb)
    pyogrio.write_arrow(table, path, layer=layer.kind.name, driver="GPKG", geometry_name=GEOMETRY_NAME,
                        geometry_type=layer.geometry_type or "Unknown", crs=layer.crs, append=append)  # fmt: skip


def changes_table(comparison: Comparison) -> pd.DataFrame:
    """changes.csv: every pipe, then every manhole, that is not unchanged, with the layer it belongs to."""
    parts = [layer.table[layer.table["change"] != UNCHANGED].assign(layer=layer.kind.name) for layer in comparison.layers()]
    joined = pd.concat(parts, ignore_index=True)
    return joined[["layer", *(name for name in joined.columns if name != "layer")]]
