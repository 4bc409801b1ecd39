"""report.html: one self-contained page a manager can read, written beside the other outputs.

``render_report(result)`` returns the page as a string; ``write_report(result, path)`` writes it
to a temporary file beside the target and renames it into place, so a failed write never leaves
half a page. The page needs no network to view: inline CSS and SVG, no script, no font, no
outside address. See docs/report.md for its sections.
"""

from __future__ import annotations

import os
import secrets
from datetime import UTC, datetime
from pathlib import Path

from audit.errors import AuditError, OutputExistsError
from audit.report.curves import part_full_curve, report_curves
from audit.report.page import CAUTION_WORDS, STYLE_SHEET, render_page
from audit.report.tables import (
    MAP_CLASSES,
    check_columns,
    flag_totals,
    map_classes,
    renewal_candidates,
)
from audit.result import AuditResult

__all__ = [
    "CAUTION_WORDS",
    "MAP_CLASSES",
    "REPORT_NAME",
    "STYLE_SHEET",
    "flag_totals",
    "map_classes",
    "part_full_curve",
    "render_report",
    "renewal_candidates",
    "report_curves",
    "write_report",
]

#: File name used when ``write_report`` is given a folder.
REPORT_NAME = "report.html"


def render_report(result: AuditResult, *, id_field: str | None = None, created: datetime | None = None) -> str:
    """The report of an audit as one HTML document.

    Parameters
    ----------
    result : the audit (``audit.pipeline.run``)
    id_field : the original pipe field that holds the pipe ids (the config's ``[pipes.fields] id``);
        None: the canonical pipe id the audit read, else ``#<row>``
    created : time stamp printed as the run time; None: now (UTC)

    Raises
    ------
    InputError
        when the result's pipes lack a computed column the report needs
    """
    check_columns(result.pipe_results)
    return render_page(result, id_field=id_field, created=created or datetime.now(UTC))


def write_report(result: AuditResult, path: Path | str, *, id_field: str | None = None, created: datetime | None = None) -> Path:
    """Write the report of an audit; return the path written.

    Parameters
    ----------
    result : the audit
    path : the file to write, or a folder to write ``report.html`` into (created if absent)
    id_field, created : as for :func:`render_report`

    Raises
    ------
    OutputExistsError
        when the target is one of the audit's input files
    InputError
        when the result cannot be drawn, or the folder cannot be written
    """
    target = _target(Path(path))
    if any(_same_file(target, source) for source in (*result.inputs, result.config_path) if source is not None):
        raise OutputExistsError(f"{target}: is an input of this audit; the report is never written over an input")
    page = render_report(result, id_field=id_field, created=created)
    temporary = target.parent / f".{target.name}.{secrets.token_hex(4)}.tmp"
    try:
        target.parent.mkdir(parents=True, exist_ok=True)
        temporary.write_text(page, encoding="utf-8")  # an ordinary file, readable as the other outputs are
        os.replace(temporary, target)
    except OSError as error:
        raise AuditError(f"{target}: cannot write the report: {error.strerror or error}") from None
    finally:
        temporary.unlink(missing_ok=True)
    return target


def _target(path: Path) -> Path:
    return path / REPORT_NAME if path.is_dir() or path.suffix == "" else path


def _same_file(target: Path, source: Path) -> bool:
    return target.resolve() == Path(source).resolve()
