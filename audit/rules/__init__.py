"""Stage 4, the rules: per-pipe numbers in, flags, a worst severity and reasons out.

In: the metrics frame the pipeline builds from the hydraulics (``METRIC_COLUMNS``), the
network's graph arrays and ``[rules]`` (:mod:`audit.rules.settings`). Out: per pipe the flag
codes (a fixed vocabulary, ``FLAG_CODES``), the worst severity and one reason per flag with its
numbers. docs/rules.md gives every rule's threshold and source.

Modules: ``checks`` (one vectorised mask per rule), ``manholes`` (flooding and surcharge at the
nodes, from the grade line), ``settings`` (thresholds and tables by
diameter), ``access`` (runs between access points, for spacing), ``text`` (reasons as Arrow
strings).
"""

from audit.rules.checks import (
    CLEANSING_WORDS,
    HYDRAULIC_STATUSES,
    JUDGED_KINDS,
    METRIC_COLUMNS,
    check_pipes,
    worst_severity_at_least,
)
from audit.rules.cleansing import Cleansing, cleansing_state
from audit.rules.manholes import check_manholes
from audit.rules.settings import (
    DEFAULT_SEVERITY,
    FLAG_CODES,
    MANHOLE_FLAG_CODES,
    MANHOLE_SEVERITY,
    RSWF_MAX_SPACING,
    RSWF_MIN_SLOPE,
    SEVERITY_NONE,
    SEVERITY_OFF,
    SEVERITY_ORDER,
    DiameterTable,
    RuleSettings,
    as_table,
    unusual_values,
)

__all__ = [
    "CLEANSING_WORDS",
    "DEFAULT_SEVERITY",
    "FLAG_CODES",
    "HYDRAULIC_STATUSES",
    "JUDGED_KINDS",
    "MANHOLE_FLAG_CODES",
    "MANHOLE_SEVERITY",
    "METRIC_COLUMNS",
    "RSWF_MAX_SPACING",
    "RSWF_MIN_SLOPE",
    "SEVERITY_NONE",
    "SEVERITY_OFF",
    "SEVERITY_ORDER",
    "Cleansing",
    "DiameterTable",
    "RuleSettings",
    "as_table",
    "check_manholes",
    "check_pipes",
    "cleansing_state",
    "unusual_values",
    "worst_severity_at_least",
]
