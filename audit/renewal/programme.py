"""The renewal programme of a network: every pipe's remedy and risk, and the schemes of work.

:func:`renewal_programme` takes plain SI arrays, one value per pipe, and returns a
:class:`Programme`; docs/renewal.md says how each part is made. Nothing is raised for bad data:
a pipe that cannot be sized or scored gets NaN and its remedy says why.
"""

from __future__ import annotations

from collections.abc import Iterable
from dataclasses import dataclass, fields
from datetime import UTC, datetime

import numpy as np
import pandas as pd
from numpy.typing import NDArray

from audit.findings import FindingLog
from audit.hydraulics import PipeHydraulics
from audit.renewal.inputs import Condition, CriticalAreas, condition_grades
from audit.renewal.remedies import VERIFY_FINDINGS, CleansingCriterion, FlagSets, PipeFacts, plan_remedies
from audit.renewal.risk import FLOODING_CONSEQUENCE, UNSCORED_WORDS, Scores, hydraulic_part, near_areas, risk_scores
from audit.renewal.schemes import Schemes, build_schemes
from audit.renewal.settings import RenewalSettings
from audit.rules import SEVERITY_ORDER

Array = NDArray[np.float64]
Mask = NDArray[np.bool_]

#: Per-pipe columns of a programme (SI), with their meaning.
PROGRAMME_COLUMNS: dict[str, str] = {
    "remedy": "what to do, in words of the trade, with the numbers; every remedy that applies, joined by '; '",
    "remedy_kind": "the first remedy that applies: verify, capacity, downstream, silting, inspect or other (empty for none)",
    "remedy_size_m": "the diameter the remedy proposes [m]: the new size of a capacity remedy, the smaller size of a silting one",
    "remedy_slope": "the slope the remedy proposes [m/m]: at which the present section would carry its flow, or self-cleanse",
    "scheme_id": "the scheme of work the pipe belongs to (S001, ...); empty for none",
    "scheme_position": "the pipe's place in its scheme, 1 for the downstream pipe (0 for none)",
    "likelihood": "likelihood of failure, 1 to 5; empty where it cannot be scored",
    "consequence": "consequence of failure, 1 to 5; empty where it cannot be scored",
    "risk": "likelihood x consequence, 1 to 25",
    "likelihood_driver": "the part that gives the likelihood: load ratio, flooding downstream, backwater, structural grade, service grade or age",
    "consequence_driver": "the part that gives the consequence: critical area: <name>, population, size or depth",
    "risk_driver": "likelihood driver x consequence driver",
    "review": "True where the data must be verified before any renewal (a review candidate)",
    "rank": "the pipe's place among the pipes with a remedy: by risk (highest first, unknown last), then worst severity, then scheme "
            "and place in it; review candidates after all others; 0 for a pipe with no remedy",
}

@dataclass(frozen=True)
class Programme(Scores):
    """Per pipe, the columns of ``PROGRAMME_COLUMNS`` (SI): the risk scores of :class:`Scores`
    and the remedies, schemes and rank; ``schemes``, the table of schemes
    (``audit.renewal.schemes.SCHEME_COLUMNS``), by scheme id."""

    remedy: NDArray[np.object_]
    remedy_kind: NDArray[np.object_]
    remedy_size_m: Array
    remedy_slope: Array
    scheme_id: NDArray[np.object_]
    scheme_position: NDArray[np.intp]
    review: Mask
    rank: NDArray[np.intp]
    schemes: pd.DataFrame


def finding_masks(findings: FindingLog, pipe_ids: NDArray[np.object_], codes: Iterable[str]) -> dict[str, Mask]:
    """Per finding code, the pipes with a finding of that code (matched by the finding's feature id).

    One look-up of every pipe id among all the features named, then one per code among the few
    pipes found.
    """
    frame = findings.to_frame()
    about = frame[(frame["layer"] == "pipes") & frame["code"].isin(list(codes))]
    if about.empty:
        return {}
    ids = np.asarray(pipe_ids, dtype=object)
    named = np.flatnonzero(pd.Index(ids, dtype=object).isin(about["feature"].unique()))
    masks = {}
    for code, features in about.groupby("code")["feature"]:  # a loop per finding code
        mask = np.zeros(ids.size, dtype=bool)
        mask[named[pd.Index(ids[named], dtype=object).isin(features.unique())]] = True
        masks[str(code)] = mask
    return masks


def renewal_programme(
    *, pipes: PipeHydraulics, flags: NDArray[np.object_] | pd.Categorical, severity: NDArray[np.object_], q_design: Array, load_ratio: Array,
    population_served: Array, install_year: Array, material: NDArray[np.object_] | pd.Series, up_depth_m: Array, down_depth_m: Array,
    upstream: NDArray[np.intp], downstream: NDArray[np.intp], node_flooding: Mask, geometry: NDArray[np.object_],
    pipe_ids: NDArray[np.object_], cleansing: CleansingCriterion, evaluated: Mask, settings: RenewalSettings,
    condition: Condition | None, critical_areas: CriticalAreas | None, findings: FindingLog, max_velocity: float = np.inf,
) -> Programme:  # fmt: skip
    """Remedies, risk and schemes for every pipe.

    Parameters
    ----------
    pipes : sections, slopes [m/m], friction and lengths [m] of every pipe
    flags : the rule flag codes of each pipe joined by ';' ("" for none), as text or labels; severity : its worst severity
    q_design : design flow [m^3/s]; load_ratio : design flow / full-bore capacity [-]
    population_served : persons upstream [-]; install_year : year laid (NaN unknown)
    material : material as typed (text or a text column); up_depth_m, down_depth_m : rim minus invert at each end [m]
    upstream, downstream : node index at each end in the flow direction (-1 none)
    node_flooding : per node, True where the grade line floods it
    geometry : shapely lines in the working CRS [m]; pipe_ids : the pipes' ids (as findings name them)
    cleansing : the self-cleansing criterion the silting remedy must meet (:func:`cleansing_criterion`)
    evaluated : the hydraulics ran for the pipe
    settings : ``[renewal]``; condition, critical_areas : the parsed optional inputs, or None
    findings : the log; rows of the condition table that name no pipe are added to it
    max_velocity : [m/s] the rules' scour limit: a steeper re-lay that would run faster is not offered

    Returns
    -------
    the :class:`Programme`
    """
    count = q_design.size
    flag_sets = FlagSets.of(flags)
    below = np.asarray(downstream)
    floods_below, floods_above = np.zeros(count, dtype=bool), np.zeros(count, dtype=bool)
    if np.asarray(node_flooding).size:
        flooding, above = np.asarray(node_flooding, dtype=bool), np.asarray(upstream)
        floods_below = (below >= 0) & flooding[np.maximum(below, 0)]
        floods_above = (above >= 0) & flooding[np.maximum(above, 0)]
    structural, service = condition_grades(condition, pipe_ids, findings=findings)
    year = settings.assessment_year or datetime.now(UTC).year
    age = np.where(np.isfinite(install_year), np.maximum(year - np.asarray(install_year, dtype=float), 0.0), np.nan)
    life = np.where(np.isfinite(age), settings.service_life(material), np.nan)  # one look-up per distinct material; needed where the age is known
    facts = PipeFacts(flag_sets, finding_masks(findings, pipe_ids, VERIFY_FINDINGS), np.asarray(q_design, dtype=float), np.asarray(evaluated, dtype=bool), floods_below, floods_above, age, life, structural, service)
    scores = _scores(facts, load_ratio=load_ratio, population=population_served, height=pipes.sections.height, depth=np.fmax(up_depth_m, down_depth_m),
                     geometry=geometry, areas=critical_areas, settings=settings)  # fmt: skip
    remedies = plan_remedies(pipes, facts, cleansing=cleansing, settings=settings, note=scores.unscored, note_words=UNSCORED_WORDS,
                             max_velocity=max_velocity)  # fmt: skip
    schemes: Schemes = build_schemes(
        remedies.short, upstream=np.asarray(upstream), downstream=below, pipe_ids=np.asarray(pipe_ids, dtype=object), length=np.asarray(pipes.length, dtype=float),
        height=pipes.sections.height, q_design=facts.q_design, new_size=remedies.size_m, new_slope=remedies.slope, risk=scores.risk,
        risk_driver=scores.risk_driver, settings=settings,
    )  # fmt: skip
    return Programme(
        remedy=remedies.text, remedy_kind=remedies.kind, remedy_size_m=remedies.size_m, remedy_slope=remedies.slope,
        scheme_id=schemes.ids, scheme_position=schemes.position, **{field.name: getattr(scores, field.name) for field in fields(Scores)},
        review=remedies.review, schemes=schemes.table,
        rank=_rank(remedies.kind != "", review=remedies.review, risk=scores.risk, severity=severity, flags=flag_sets, scheme=schemes.number,
                   position=schemes.position),
    )  # fmt: skip


def _rank(listed: Mask, *, review: Mask, risk: Array, severity: NDArray[np.object_], flags: FlagSets, scheme: NDArray[np.intp],
          position: NDArray[np.intp]) -> NDArray[np.intp]:  # fmt: skip
    """1, 2, ... for the pipes with a remedy in programme order; 0 for the others.

    One sort of one integer per pipe: review last, then risk (highest first, unknown last), worst
    severity, scheme number (none last) and place in the scheme; ties keep the input order. A
    scheme is built as one piece of work, so its pipes rank together, at the risk and the worst
    severity of its gravest pipe, downstream pipe first.
    """
    rows = np.flatnonzero(listed)
    words = np.asarray(severity, dtype=object)[flags.first_pipes()]  # the worst severity follows from the flags: one look per flag set
    worst = np.array([SEVERITY_ORDER.index(word) + 1 if word in SEVERITY_ORDER else 0 for word in words] + [0], dtype=np.int64)[flags.which[rows]]
    risk_rank = np.where(np.isnan(risk[rows]), 0, np.clip(np.round(risk[rows]), 0, 63)).astype(np.int64)
    member = scheme[rows] >= 0
    if member.any():  # each scheme's pipes take its greatest risk and worst severity
        count = int(scheme[rows][member].max()) + 1
        scheme_risk, scheme_worst = np.zeros(count, np.int64), np.zeros(count, np.int64)
        np.maximum.at(scheme_risk, scheme[rows][member], risk_rank[member])
        np.maximum.at(scheme_worst, scheme[rows][member], worst[member])
        risk_rank[member], worst[member] = scheme_risk[scheme[rows][member]], scheme_worst[scheme[rows][member]]
    in_scheme = np.where(scheme[rows] < 0, 2**24 - 1, np.minimum(scheme[rows], 2**24 - 2)).astype(np.int64)
    key = ((review[rows].astype(np.int64) * 64 + (63 - risk_rank)) * 4 + (3 - worst)) * 2**24 + in_scheme
    key = key * 2**20 + np.minimum(position[rows], 2**20 - 1)
    rank = np.zeros(listed.size, dtype=np.intp)
    rank[rows[np.argsort(key, kind="stable")]] = np.arange(1, rows.size + 1)
    return rank


def _scores(facts: PipeFacts, *, load_ratio: Array, population: Array, height: Array, depth: Array, geometry: NDArray[np.object_],
            areas: CriticalAreas | None, settings: RenewalSettings) -> Scores:  # fmt: skip
    backwater = facts.flags.has("backwater_surcharge")
    hydraulic, cause = hydraulic_part(np.asarray(load_ratio, dtype=float), evaluated=facts.evaluated, floods_below=facts.floods_below, backwater=backwater, settings=settings)
    critical, layer = near_areas(areas, np.asarray(geometry, dtype=object), buffer_m=settings.buffer_m)
    likelihood = {"hydraulic": hydraulic, "structural": np.ceil(facts.structural), "service": np.ceil(facts.service),
                  "age": settings.age_bands.score(facts.age_years / facts.service_life)}  # fmt: skip
    consequence = {"critical_area": critical, "population": settings.population_bands.score(population), "size": settings.size_bands.score(height),
                   "depth": settings.depth_bands.score(depth), "flooding": np.where(facts.floods_above, FLOODING_CONSEQUENCE, np.nan)}  # fmt: skip
    names = () if areas is None else areas.names
    return risk_scores(likelihood_parts=likelihood, consequence_parts=consequence, hydraulic_cause=cause, critical_layer=layer, area_names=names, settings=settings)
