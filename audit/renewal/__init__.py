"""Stage 6, the renewal programme: flags in, a remedy per pipe, schemes of work and risk out.

In: every pipe as the hydraulics sees it (``audit.hydraulics.PipeHydraulics``), its rule flags
and worst severity, design flow, load ratio, population served, install year, material, depths
to invert at its ends, the node at each end in flow direction and which nodes flood (the grade
line), its geometry in the working CRS and its id, the self-cleansing criterion of the rules
(:func:`cleansing_criterion`), which pipes the hydraulics judged, and ``[renewal]``
(:mod:`audit.renewal.settings`) with its optional inputs: a table of inspection grades
(:func:`read_condition`) and layers of critical areas (:func:`read_critical_areas`). Plain
arrays, SI.

Out: a :class:`Programme`: per pipe a remedy in words of the trade with its size and slope, the
scheme of work it belongs to and its place in it, likelihood and consequence of failure (1 to 5),
risk (1 to 25) and what drives each, whether its data must be verified first, its rank; and the
table of schemes with length, sizes before and after, cost and greatest risk. These are
screening estimates (docs/renewal.md). Nothing is raised for bad data.

Modules: ``settings`` (``[renewal]``), ``inputs`` (condition table and critical areas),
``remedies`` (capacity and silting sizing, the remedy words), ``risk`` (likelihood,
consequence, the spatial join of critical areas), ``schemes`` (grouping along the flow, order,
cost), ``programme`` (the whole stage), ``wording`` (text with numbers for whole columns).
"""

from audit.renewal.inputs import Condition, CriticalAreas, condition_grades, read_condition, read_critical_areas
from audit.renewal.programme import PROGRAMME_COLUMNS, Programme, renewal_programme
from audit.renewal.remedies import REMEDY_KINDS, CleansingCriterion, capacity_remedy, cleansing_criterion, silting_remedy
from audit.renewal.risk import combine
from audit.renewal.schemes import SCHEME_COLUMNS, unit_costs
from audit.renewal.settings import (
    CONSEQUENCE_PARTS,
    INCH_SIZES_IN,
    LIKELIHOOD_PARTS,
    METRIC_SIZES_MM,
    SERVICE_LIFE_YEARS,
    Bands,
    ConditionSource,
    CriticalAreaSource,
    RenewalSettings,
    parse_renewal,
)

__all__ = [
    "CONSEQUENCE_PARTS",
    "INCH_SIZES_IN",
    "LIKELIHOOD_PARTS",
    "METRIC_SIZES_MM",
    "PROGRAMME_COLUMNS",
    "REMEDY_KINDS",
    "SCHEME_COLUMNS",
    "SERVICE_LIFE_YEARS",
    "Bands",
    "CleansingCriterion",
    "Condition",
    "ConditionSource",
    "CriticalAreaSource",
    "CriticalAreas",
    "Programme",
    "RenewalSettings",
    "capacity_remedy",
    "cleansing_criterion",
    "combine",
    "condition_grades",
    "parse_renewal",
    "read_condition",
    "read_critical_areas",
    "renewal_programme",
    "silting_remedy",
    "unit_costs",
]
