"""``sewer-audit compare OLD NEW -o OUT``: what moved between two audits; not a pipeline stage.

In: two audits' outputs (the folders ``sewer-audit run -o`` wrote, or their audit.gpkg with
summary.json beside it). Out: per pipe and per manhole whether it was added, removed, changed or
unchanged, which register fields changed, which results moved, the flags gained and cleared, the
severity and (manholes) the flood state before and after; totals before and after per flag,
severity and flood state; the settings that differ between the two audits. Written as
compare.gpkg, changes.csv, compare.json and compare.html, all at once (docs/compare.md).

A matched feature is *changed* when a register field or its geometry changed, or its flags (a
manhole's data findings too), its severity or its flood state changed. Results that moved are
listed all the same, but a number that moved alone (a water level, a load ratio) leaves the
feature unchanged: a resized pipe moves the grade line of every pipe above it, and a comparison
of two years must not list them all.

Modules, in the order they work: ``reading`` (an audit's layers and summary, which fields are
computed), ``matching`` (by id, else by end points), ``differences`` (per feature),
``provenance`` (versions and settings), ``totals`` (per flag and severity, before and after),
``comparison`` (the whole comparison), ``summary`` (compare.json and the terminal table),
``page`` (compare.html), ``writing`` (the folder).
"""

from audit.compare.comparison import DEFAULT_TOLERANCE_M, Comparison, LayerComparison, compare_audits
from audit.compare.reading import AuditOutput, read_audit
from audit.compare.summary import build_comparison, print_comparison
from audit.compare.writing import COMPARE_FILES, write_comparison

__all__ = [
    "COMPARE_FILES",
    "DEFAULT_TOLERANCE_M",
    "AuditOutput",
    "Comparison",
    "LayerComparison",
    "build_comparison",
    "compare_audits",
    "print_comparison",
    "read_audit",
    "write_comparison",
]
