"""Stage 5, the outputs: an :class:`~audit.result.AuditResult` in, files in a folder out.

``write_outputs`` writes audit.gpkg (pipes, manholes, findings), summary.json and
candidates.csv, each staged as a temporary file and renamed into place only when all are
complete (docs/outputs.md). The report (:mod:`audit.report`) is written beside them.

Modules: ``writing`` (the folder, staging, the GeoPackage), ``summary`` (summary.json and the
terminal table), ``candidates`` (candidates.csv).
"""

from audit.outputs.candidates import (
    CANDIDATE_COLUMNS,
    candidate_rows,
    rank_candidates,
    write_candidates,
)
from audit.outputs.descriptions import FLAG_PREFIX
from audit.outputs.summary import (
    build_summary,
    code_totals,
    json_safe,
    print_summary_table,
    write_summary,
)
from audit.outputs.writing import OUTPUT_FILES, safe_field_names, write_outputs

__all__ = [
    "CANDIDATE_COLUMNS",
    "FLAG_PREFIX",
    "OUTPUT_FILES",
    "build_summary",
    "candidate_rows",
    "code_totals",
    "json_safe",
    "print_summary_table",
    "rank_candidates",
    "safe_field_names",
    "write_candidates",
    "write_outputs",
    "write_summary",
]
