r"""A remedy for every flagged pipe, in words of the trade, with its numbers.

In the order in which they are tried (the first that applies is the pipe's ``remedy_kind``; the
text lists every one that applies, joined by ``; ``):

* ``verify``: a reverse or zero grade, missing data, or a finding that the register's length or
  levels are doubtful: verify the survey before any renewal; nothing is sized;
* ``capacity``: surcharged at the design flow, or full from backwater, or its downstream node
  floods, and the pipe itself cannot carry its design flow within ``design_depth_ratio``: the
  smallest listed diameter that can at the present slope, and the slope at which the present
  section could (:func:`capacity_remedy`);
* ``downstream``: its downstream node floods or backwater fills it, but it carries its own flow:
  relieve the pipes below;
* ``silting``: the slope at which the present section self-cleanses by the configured criterion,
  or the largest smaller listed size that would at the present slope (:func:`silting_remedy`);
* ``inspect``: older than the service life of its material, a structural or service grade at
  or above ``grade_limit``, a high velocity or a hydraulic jump (scour): inspect (CCTV), then
  rehabilitate or replace;
* ``other``: the remaining flags (near capacity, near critical flow, a flat grade, a step down
  in size, a long run between access points, a small size, shallow cover), each with its own
  words; a flag code the remedies do not know is named ("see the ... flag"), so every flagged
  pipe has a remedy.

References
----------
.. [1] Chow, V. T. (1959). Open-Channel Hydraulics. McGraw-Hill, ch. 5 and 6 (uniform flow).
.. [2] Butler, D. and Davies, J. W. (2011). Urban Drainage, 3rd ed. Spon, ch. 8 (design of
   sewers: sizes, depth ratio, self-cleansing).
"""

from __future__ import annotations

from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass

import numpy as np
import pandas as pd
import pyarrow as pa
import pyarrow.compute as pc
from numpy.typing import NDArray

from audit.flows import DesignFlows
from audit.hydraulics import (
    GRAVITY,
    Circular,
    Friction,
    PipeHydraulics,
    PipeSections,
    discharge_at,
    normal_depth,
    required_slope,
    water_density,
)
from audit.labels import as_labels, labels_from
from audit.renewal.settings import RenewalSettings
from audit.renewal.wording import amount, few, join, percent, scatter
from audit.rules import CLEANSING_WORDS, RuleSettings
from audit.units import UnitSystem

Array = NDArray[np.float64]
Mask = NDArray[np.bool_]
Index = NDArray[np.intp]

#: What ``remedy_kind`` says, in the order the kinds are tried.
REMEDY_KINDS: tuple[str, ...] = ("verify", "capacity", "downstream", "silting", "inspect", "other")

#: Flags and findings that mean the data, not the pipe, may be at fault, with their words.
VERIFY_FLAGS: Mapping[str, str] = {"reverse_grade": "reverse grade", "zero_grade": "zero grade", "missing_data": "missing data",
                                   "diameter_decrease": "smaller than the pipe upstream"}  # fmt: skip
VERIFY_FINDINGS: Mapping[str, str] = {"length_mismatch": "length mismatch", "zero_length": "zero length", "missing_invert": "missing invert",
                                      "duplicate_id": "id shared with another pipe", "invert_below_manhole": "invert below the manhole's"}  # fmt: skip

#: Flags that call for capacity works when the pipe cannot carry its own flow.
CAPACITY_FLAGS: tuple[str, ...] = ("surcharge", "backwater_surcharge")

#: The remaining flags and what to do about each (common practice, no source).
OTHER_WORDS: Mapping[str, str] = {
    "high_velocity": "inspect (CCTV) for scour and abrasion: high velocity at the design flow",
    "hydraulic_jump": "check the connection level first (a drop or a soffit-to-soffit connection avoids the jump), then inspect (CCTV) the pipe "
                      "and the manhole below for scour: supercritical flow drowned by the level below forms a hydraulic jump in it",
    "near_critical": "watch: the flow is near critical depth, so its surface is unstable; check the levels",
    "near_capacity": "watch: near capacity; check again when the flows grow",
    "flat_grade": "watch for silting: the fall is below the least for its size",
    "long_spacing": "add an access point: the run between access points is long",
    "below_min_diameter": "no works for its size alone; renew at no less than the least size",
    "shallow_cover": "check loading and frost protection; protect or lower the pipe when it is renewed",
}

#: Every flag code the remedies know; a pipe with any other (a flag added later) is told to see that flag.
KNOWN_FLAGS = frozenset({*VERIFY_FLAGS, *CAPACITY_FLAGS, "silting", *OTHER_WORDS})

#: Largest slope a remedy proposes [m/m]: steeper than 1 in 1 is no sewer.
MAX_SLOPE = 1.0

_INSPECT = "inspect (CCTV), then rehabilitate or replace: "
_BISECTIONS = 52  # halvings of the relative depth: to machine precision
_SHEAR_PASSES = 40  # fixed-point passes for a slope that gives a boundary shear
_SHEAR_TOLERANCE = 1e-7  # relative change in slope that ends them


@dataclass(frozen=True)
class CleansingCriterion:
    r"""What a silting remedy must reach: the ``[rules] self_cleansing`` criterion.

    ``minimum`` is the least velocity [m/s] (the velocity criteria) or boundary shear [Pa]
    (``dry_weather_shear``); ``flow`` the flow it is judged at per pipe [m^3/s] (None flowing
    full); ``min_diameter_m`` the least size a smaller pipe may have [m]; ``words`` how the
    rules say where it is judged (``flowing full``).
    """

    criterion: str
    minimum: float
    flow: Array | None
    min_diameter_m: float
    words: str

    @property
    def by_shear(self) -> bool:
        """True when the criterion is a boundary shear, not a velocity."""
        return self.criterion == "dry_weather_shear"


def cleansing_criterion(rules: RuleSettings, flows: DesignFlows) -> CleansingCriterion:
    """The criterion the rules judged ``silting`` by, with its flow per pipe (``audit.rules.cleansing_state``'s choice)."""
    criterion = rules.self_cleansing
    flow: Array | None
    if criterion == "full_velocity":
        flow = None
    elif criterion == "design_velocity":
        flow = flows.q_design
    elif criterion == "fraction_velocity":
        flow = rules.cleansing_fraction * flows.q_design
    else:
        flow = np.full(flows.q_design.size, np.nan) if flows.parts is None else flows.parts.dry_weather(rules.dry_weather)
    minimum = rules.min_shear if criterion == "dry_weather_shear" else rules.min_velocity
    words = CLEANSING_WORDS[criterion].format(fraction=rules.cleansing_fraction, dry=rules.dry_weather)
    return CleansingCriterion(criterion, float(minimum), flow, rules.min_diameter_mm / 1000.0, words)


def subset(pipes: PipeHydraulics, index: Index) -> PipeHydraulics:
    """The pipes ``index`` alone, as the hydraulics sees them."""
    sections = pipes.sections
    return PipeHydraulics(
        PipeSections(sections.kind[index], sections.height[index], sections.width[index], sections.shapes),
        np.asarray(pipes.slope, dtype=float)[index],
        Friction(pipes.friction.formula, pipes.friction.roughness[index], pipes.friction.kinematic_viscosity),
        np.asarray(pipes.length, dtype=float)[index],
        pipes.temperature_c,
    )


def circles(diameter: Array) -> PipeSections:
    """Circular sections of the given diameters [m] (built directly: no shape names to look up)."""
    diameter = np.asarray(diameter, dtype=float)
    return PipeSections(np.zeros(diameter.shape, dtype=np.int64), diameter, diameter, (Circular(),))


def carried_at_ratio(pipes: PipeHydraulics, ratio: float) -> Array:
    """Discharge [m^3/s] of each pipe at relative depth ``ratio`` (capped at its peak) at its slope."""
    eta = np.minimum(ratio, pipes.sections.eta_capacity())
    return discharge_at(pipes.sections, eta, pipes.slope, pipes.friction)


def smallest_size(pipes: PipeHydraulics, flow: Array, *, sizes_m: Sequence[float], ratio: float) -> Array:
    r"""The smallest diameter [m] of ``sizes_m`` whose circle carries ``flow`` [m^3/s] at the
    pipes' slopes and friction when filled to ``ratio`` of its depth (capped at the depth of
    greatest discharge), as ``audit.hydraulics.smallest_diameter`` judges it; NaN where none does.

    The discharge at a fixed relative depth grows with the diameter, so each pipe's size is
    found by bisection over the sorted list: :math:`\lceil \log_2 m \rceil` passes over all
    pipes for ``m`` sizes, instead of one per size.
    """
    listed = np.sort(np.asarray(sizes_m, dtype=float))
    low, high = np.zeros(flow.size, dtype=np.intp), np.full(flow.size, listed.size, dtype=np.intp)  # the answer lies in [low, high]
    usable = np.isfinite(flow) & (flow >= 0) & np.isfinite(pipes.slope) & (pipes.slope > 0) & pipes.friction.roughness_known()
    while True:  # a loop per halving of the list, over the pipes not yet settled
        open_ = np.flatnonzero(usable & (low < high))
        if open_.size == 0:
            break
        middle = (low[open_] + high[open_]) // 2
        trial = circles(listed[middle])
        friction = Friction(pipes.friction.formula, pipes.friction.roughness[open_], pipes.friction.kinematic_viscosity)
        carries = discharge_at(trial, np.minimum(ratio, trial.eta_capacity()), pipes.slope[open_], friction) >= flow[open_]
        high[open_] = np.where(carries, middle, high[open_])
        low[open_] = np.where(carries, low[open_], middle + 1)
    return np.where(usable & (low < listed.size), listed[np.minimum(low, listed.size - 1)], np.nan)


def capacity_remedy(pipes: PipeHydraulics, flow: Array, *, sizes_m: Sequence[float], ratio: float) -> tuple[Array, Array]:
    r"""The smallest listed diameter [m] that carries ``flow`` [m^3/s] within ``ratio`` of its
    depth at the present slope (:func:`smallest_size`), and the slope [m/m] at which the present
    section would (``audit.hydraulics.required_slope``).

    .. math:: Q(\eta\, D, S_0) \ge Q_d \quad\text{and}\quad Q(\eta\, H, S) = Q_d

    Either is NaN where none exists (no listed size is large enough; the slope would exceed
    ``MAX_SLOPE``). Manning, Colebrook-White or Chezy, as the pipes' friction says.
    """
    size = smallest_size(pipes, flow, sizes_m=sizes_m, ratio=ratio)
    slope = required_slope(flow, pipes.sections, pipes.friction, depth_ratio=ratio, max_slope=MAX_SLOPE)
    return size, slope


def _depth_of_area(sections: PipeSections, area: Array) -> Array:
    """Relative depth at which each section's flow area equals ``area`` [m^2] (bisection; area rises with depth)."""
    low, high = np.zeros(area.size), np.ones(area.size)
    for _ in range(_BISECTIONS):  # a loop per halving, over all pipes at once
        middle = 0.5 * (low + high)
        below = sections.elements(middle)[0] < area
        low, high = np.where(below, middle, low), np.where(below, high, middle)
    return 0.5 * (low + high)


def slope_for_velocity(pipes: PipeHydraulics, flow: Array | None, velocity: float) -> Array:
    r"""The bed slope [m/m] at which each pipe's mean velocity is ``velocity`` [m/s].

    Flowing full (``flow`` None) the hydraulic radius is :math:`R_f`; at a flow :math:`Q` the
    depth is the one whose area is :math:`A = Q / V`, so :math:`R = A / P` there. Either way
    the slope solves :math:`V(R, S) = V_{min}`, found as the slope at which a circle of
    diameter :math:`4R` running full moves :math:`V_{min}\,\pi (4R)^2 / 4`: the friction laws
    depend on :math:`R` alone, so the circle has the same velocity. NaN where the flow fills the
    section before reaching the velocity (it is reached at any slope) or none up to ``MAX_SLOPE``.
    """
    if flow is None:
        area, perimeter = pipes.sections.full()
    else:
        full_area, _ = pipes.sections.full()
        area = np.where(flow / velocity < full_area, flow / velocity, np.nan)
        eta = _depth_of_area(pipes.sections, np.nan_to_num(area, nan=0.0))
        _, perimeter, _ = pipes.sections.elements(eta)
    with np.errstate(invalid="ignore", divide="ignore"):
        diameter = 4.0 * area / perimeter
    moved = velocity * np.pi * diameter**2 / 4.0
    return required_slope(moved, circles(diameter), pipes.friction, depth_ratio=1.0, max_slope=MAX_SLOPE)


def slope_for_shear(pipes: PipeHydraulics, flow: Array, shear: float) -> Array:
    r"""The bed slope [m/m] at which the boundary shear at normal depth for ``flow`` is ``shear`` [Pa].

    .. math:: S_{k+1} = \frac{\tau_{min}}{\rho g R(y_n(Q, S_k))}

    from the present slope. While the shear is short of the minimum each pass steepens the slope
    and lowers the depth, so the slopes rise to the fixed point (``R`` changes far more slowly
    than ``S``). NaN where the flow is unknown or the slope would exceed ``MAX_SLOPE``.
    """
    rho_g = float(water_density(pipes.temperature_c)) * GRAVITY
    slope = np.where(np.isfinite(flow) & (pipes.slope > 0), pipes.slope, np.nan)
    for _ in range(_SHEAR_PASSES):  # a loop per pass, over all pipes at once
        state = normal_depth(np.nan_to_num(flow, nan=-1.0), pipes.sections, np.nan_to_num(slope, nan=-1.0), pipes.friction, temperature_c=pipes.temperature_c)
        with np.errstate(invalid="ignore", divide="ignore"):
            radius = state.shear / (rho_g * slope)  # tau = rho g R S at the normal depth
            steeper = np.where(slope > MAX_SLOPE, np.nan, shear / (rho_g * radius))
        done = np.nanmax(np.abs(steeper / slope - 1.0), initial=0.0) < _SHEAR_TOLERANCE
        slope = steeper
        if done:
            break
    return np.where(slope <= MAX_SLOPE, slope, np.nan)


def _cleanses(pipes: PipeHydraulics, flow: Array, criterion: CleansingCriterion) -> Mask:
    """Per pipe: the criterion is met at ``flow`` [m^3/s] at normal depth (free surface only)."""
    state = normal_depth(np.nan_to_num(flow, nan=-1.0), pipes.sections, pipes.slope, pipes.friction, temperature_c=pipes.temperature_c)
    value = state.shear if criterion.by_shear else state.velocity
    return (value >= criterion.minimum) & (state.depth_ratio < 1.0)


def smaller_size(pipes: PipeHydraulics, q_design: Array, criterion: CleansingCriterion, *, sizes_m: Sequence[float], ratio: float) -> Array:
    """The largest listed diameter [m] below each pipe's height that self-cleanses at the present
    slope and still carries ``q_design`` [m^3/s] within ``ratio`` of its depth; NaN where none.

    Flowing full no smaller pipe is faster (the full-bore velocity grows with the size), so the
    ``full_velocity`` criterion never gets one. Sizes below the rules' least diameter are not offered.
    """
    chosen = np.full(len(pipes.sections), np.nan)
    if criterion.flow is None:
        return chosen
    flow = criterion.flow
    for size in sorted(sizes_m, reverse=True):  # a loop per listed size, over the pipes still open
        open_ = np.flatnonzero(np.isnan(chosen) & (pipes.sections.height > size) & (size >= criterion.min_diameter_m))
        if open_.size == 0:
            continue
        trial = subset(pipes, open_)
        trial = PipeHydraulics(circles(np.full(open_.size, size)), trial.slope, trial.friction, trial.length, trial.temperature_c)
        fits = _cleanses(trial, flow[open_], criterion) & (carried_at_ratio(trial, ratio) >= q_design[open_])
        chosen[open_[fits]] = size
    return chosen


def silting_remedy(pipes: PipeHydraulics, q_design: Array, criterion: CleansingCriterion, *, sizes_m: Sequence[float], ratio: float) -> tuple[Array, Array]:
    """The slope [m/m] at which the present section self-cleanses by ``criterion``, and the
    smaller listed size [m] that would at the present slope (:func:`smaller_size`); NaN where none."""
    if criterion.by_shear:
        assert criterion.flow is not None
        slope = slope_for_shear(pipes, criterion.flow, criterion.minimum)
    else:
        slope = slope_for_velocity(pipes, criterion.flow, criterion.minimum)
    return slope, smaller_size(pipes, q_design, criterion, sizes_m=sizes_m, ratio=ratio)


@dataclass(frozen=True)
class FlagSets:
    """The rule flags of every pipe, read once: the distinct ';'-joined sets and which one each pipe has.

    >>> sets = FlagSets.of(np.array(["surcharge;silting", "", None, "silting"], dtype=object))
    >>> sets.has("silting").tolist(), sets.has("surcharge", "zero_grade").tolist()
    ([True, False, False, True], [True, False, False, False])
    """

    which: NDArray[np.intp]
    sets: tuple[frozenset[str], ...]

    @classmethod
    def of(cls, flags: NDArray[np.object_] | pd.Categorical) -> FlagSets:
        """Factorise the ``flags`` column (one hash per pipe, one split per distinct set); a
        column held as labels is read as it is. A missing value is -1: no flag."""
        labels = as_labels(flags)
        return cls(np.asarray(labels.codes, dtype=np.intp), tuple(frozenset(str(text).split(";")) - {""} for text in labels.categories))

    def first_pipes(self) -> NDArray[np.intp]:
        """The first pipe of each set, in the order of ``sets``: what follows from the flags alone
        (the worst severity) is read there once for every pipe of the set."""
        first = np.zeros(len(self.sets) + 1, dtype=np.intp)
        first[self.which[::-1]] = np.arange(self.which.size - 1, -1, -1)  # a missing value (-1) writes the spare last slot
        return first[:-1]

    def has_other(self, known: frozenset[str]) -> Mask:
        """Per pipe: it carries a code outside ``known``."""
        return np.array([not held <= known for held in self.sets] + [False], dtype=bool)[self.which]

    def has(self, *codes: str) -> Mask:
        """Per pipe: it carries any of ``codes``."""
        return np.array([not held.isdisjoint(codes) for held in self.sets] + [False], dtype=bool)[self.which]


@dataclass(frozen=True)
class Remedies:
    """Per pipe: the first kind of remedy that applies ("" for none) and its words, as labels
    (``audit.labels``), the size [m] and
    the slope [m/m] it proposes (NaN where none), whether the data must be verified first, and
    whether it cannot carry its own design flow (a member of a scheme)."""

    kind: pd.Categorical
    text: pd.Categorical
    size_m: Array
    slope: Array
    review: Mask
    short: Mask


@dataclass(frozen=True)
class PipeFacts:
    """What the remedies read about every pipe (SI; one value per pipe)."""

    flags: FlagSets  # the rule flags
    findings: Mapping[str, Mask]  # per finding code of ``VERIFY_FINDINGS``, the pipes it names
    q_design: Array  # [m^3/s]
    evaluated: Mask  # the hydraulics ran
    floods_below: Mask  # the node the pipe flows into floods
    floods_above: Mask  # the node the pipe flows from floods
    age_years: Array  # [years]; NaN where the install year is unknown
    service_life: Array  # [years]
    structural: Array  # grade 1-5; NaN where none
    service: Array  # grade 1-5; NaN where none


UNSIZED_WORDS = "capacity: not sized, the hydraulics did not run for it (no size, slope or design flow)"


def plan_remedies(pipes: PipeHydraulics, facts: PipeFacts, *, cleansing: CleansingCriterion, settings: RenewalSettings,
                  note: NDArray[np.intp] | None = None, note_words: Sequence[str] = ("",), max_velocity: float = np.inf) -> Remedies:  # fmt: skip
    """The remedy of every pipe; ``note_words[note]`` ends its words (0, "": no note).

    A capacity remedy offers re-laying the present pipe steeper only where it would then run at
    no more than ``max_velocity`` [m/s] at the design flow (V = Q / A at the design depth ratio):
    a re-lay that trades a surcharge for scour is no remedy.

    The words with numbers that vary continuously (capacity, silting) are written for their own
    pipes only; every other piece is written once per distinct combination of what it says
    (the flag set, the verify findings, the age and service life, the grades, the note), and
    each pipe holds codes into those tables: the pieces are joined once per distinct pair, so a
    million pipes cost a few thousand strings plus the distinct capacity and silting words.
    """
    count = facts.q_design.size
    ratio, sizes = settings.design_depth_ratio, settings.sizes_m
    note = np.zeros(count, dtype=np.intp) if note is None else note
    found = [facts.findings.get(code, np.zeros(count, dtype=bool)) for code in VERIFY_FINDINGS]
    review = facts.flags.has(*VERIFY_FLAGS) | np.logical_or.reduce(found)

    hydraulic = ~review & facts.evaluated & np.isfinite(facts.q_design) & (facts.q_design > 0)
    wanted = ~review & (facts.floods_below | facts.flags.has(*CAPACITY_FLAGS))
    rows = np.flatnonzero(wanted & hydraulic)
    short = np.zeros(count, dtype=bool)
    short[rows] = carried_at_ratio(subset(pipes, rows), ratio) < facts.q_design[rows]
    capacity_rows = np.flatnonzero(short)
    capacity_pipes = subset(pipes, capacity_rows)
    new_size, new_slope = capacity_remedy(capacity_pipes, facts.q_design[capacity_rows], sizes_m=sizes, ratio=ratio)
    design_area = capacity_pipes.sections.elements(np.full(capacity_rows.size, ratio))[0]
    too_fast = np.isfinite(new_slope) & (facts.q_design[capacity_rows] / design_area > max_velocity)
    new_slope[too_fast] = np.nan
    unsized = wanted & ~hydraulic
    downstream = wanted & hydraulic & ~short

    silting = ~review & ~short & facts.flags.has("silting") & (pipes.slope > 0)
    silt_rows = np.flatnonzero(silting)
    silt_pipes = subset(pipes, silt_rows)
    criterion_flow = None if cleansing.flow is None else cleansing.flow[silt_rows]
    silt_criterion = CleansingCriterion(cleansing.criterion, cleansing.minimum, criterion_flow, cleansing.min_diameter_m, cleansing.words)
    silt_slope, silt_size = silting_remedy(silt_pipes, facts.q_design[silt_rows], silt_criterion, sizes_m=sizes, ratio=ratio)

    old = facts.age_years > facts.service_life
    worn = (facts.structural >= settings.grade_limit) | (facts.service >= settings.grade_limit)
    inspect_kind = old | worn | facts.flags.has("high_velocity", "hydraulic_jump")
    other_kind = facts.flags.has(*OTHER_WORDS) | facts.flags.has_other(KNOWN_FLAGS)
    code = np.select([review, short | unsized, downstream, silting, inspect_kind, other_kind], range(1, len(REMEDY_KINDS) + 1), 0)
    kinds = labels_from(code, ["", *REMEDY_KINDS])

    relief = f"relieve downstream: it carries its own design flow within {ratio:g} of its depth; the water backs up from below"
    silt_words = _silting_words(silt_slope, silt_size, cleansing, units=settings.units)
    after = pa.array(downstream[silt_rows])  # a pipe can be relieved downstream and silt too
    lead = _Words.spread(count, [  # verify, capacity, downstream or silting words; a later piece wins
        (np.flatnonzero(review), _verify_words(facts, np.flatnonzero(review), found)),
        (capacity_rows, as_labels(_capacity_words(capacity_pipes, facts.q_design[capacity_rows], new_size, new_slope, settings, too_fast=too_fast))),
        (np.flatnonzero(unsized), labels_from(np.zeros(int(unsized.sum()), dtype=np.intp), [UNSIZED_WORDS])),
        (np.flatnonzero(downstream), labels_from(np.zeros(int(downstream.sum()), dtype=np.intp), [relief])),
        (silt_rows, as_labels(pc.if_else(after, join(f"{relief}; ", silt_words), silt_words))),
    ])  # fmt: skip
    text = _with_tail(lead, facts, old=old, worn=worn, note=note, note_words=note_words, settings=settings)
    size = scatter(new_size, capacity_rows, count)
    size[silt_rows] = silt_size
    slope = scatter(new_slope, capacity_rows, count)
    slope[silt_rows] = silt_slope
    return Remedies(kinds, text, size, slope, review, short)


def keyed_words(key: NDArray[np.int64], words: Callable[[int], str]) -> pd.Categorical:
    """``words(row)`` for one row of each distinct ``key`` (the row's position in ``key``), as
    labels of every row with that key (``audit.labels``: one string per distinct text)."""
    which, distinct = pd.factorize(key)  # by hashing: no sort
    first = np.zeros(distinct.size, dtype=np.intp)
    first[which[::-1]] = np.arange(which.size - 1, -1, -1)  # the first row of each key
    return labels_from(which, [words(int(row)) for row in first])  # one string per distinct key


@dataclass(frozen=True)
class _Words:
    """Words for every pipe as a code into a short table (-1: none), so that pieces are joined
    once per distinct combination, not once per pipe."""

    code: NDArray[np.int64]
    table: list[str]

    @classmethod
    def spread(cls, count: int, pieces: Sequence[tuple[Index, pd.Categorical]]) -> _Words:
        """Each piece's labels on its rows (a later piece's rows override an earlier one's)."""
        code = np.full(count, -1, dtype=np.int64)
        table: list[str] = []
        for rows, labels in pieces:  # a loop over the few kinds of words
            codes = labels.codes.astype(np.int64)
            code[rows] = np.where(codes >= 0, codes + len(table), -1)
            table.extend(labels.categories)
        return cls(code, table)


def _verify_words(facts: PipeFacts, rows: Index, found: Sequence[Mask]) -> pd.Categorical:
    """``verify the survey before any renewal (reverse grade, length mismatch)`` for the pipes ``rows``."""
    key = facts.flags.which[rows].astype(np.int64) * 2 ** len(found)
    for place, mask in enumerate(found):
        key += mask[rows].astype(np.int64) << place

    def words(at: int) -> str:
        held = facts.flags.sets[facts.flags.which[rows[at]]]
        named = [word for code, word in VERIFY_FLAGS.items() if code in held]
        named += [word for (code, word), mask in zip(VERIFY_FINDINGS.items(), found, strict=True) if mask[rows[at]]]
        return f"verify the survey before any renewal ({', '.join(named)})"

    return keyed_words(key, words)


def _with_tail(lead: _Words, facts: PipeFacts, *, old: Mask, worn: Mask, note: NDArray[np.intp], note_words: Sequence[str],
               settings: RenewalSettings) -> pd.Categorical:  # fmt: skip
    """Each pipe's ``lead`` words followed by its inspection, its other flags' words and its note, joined by "; " ("" for none)."""
    limit = settings.grade_limit
    tailed = np.flatnonzero(old | worn | facts.flags.has(*OTHER_WORDS) | facts.flags.has_other(KNOWN_FLAGS) | (note > 0))
    aged = old[tailed]
    structural, service = (np.where(grade[tailed] >= limit, grade[tailed], np.nan) for grade in (facts.structural, facts.service))
    age = np.where(aged, np.clip(np.round(facts.age_years[tailed]), 0, 4095), 0).astype(np.int64)
    life = np.where(aged, np.clip(np.round(facts.service_life[tailed] * 10), 0, 2**14 - 1), 0).astype(np.int64)
    grades = [np.nan_to_num(np.round(grade * 10), nan=0.0).astype(np.int64) for grade in (structural, service)]
    # one integer per distinct tail: flag set, age, service life, the two grades, the note
    key = (((facts.flags.which[tailed].astype(np.int64) * 4096 + age) * 2**14 + life) * 64 + grades[0]) * 64 + grades[1]
    key = key * 4 + note[tailed]

    def words(at: int) -> str:
        pipe = tailed[at]
        reasons = []
        if aged[at]:
            reasons.append(f"age {age[at]} years, beyond the {life[at] / 10:g}-year service life of its material")
        reasons += [f"{name} grade {value:g}" for name, value in (("structural", structural[at]), ("service", service[at])) if np.isfinite(value)]
        held = facts.flags.sets[facts.flags.which[pipe]]
        pieces = [_INSPECT + ", ".join(reasons)] if reasons else []
        pieces += [words_ for code, words_ in OTHER_WORDS.items() if code in held]
        pieces += [f"see the {code} flag" for code in sorted(held - KNOWN_FLAGS)]
        pieces += [note_words[note[pipe]]] if note[pipe] else []
        return "; ".join(pieces)

    tail = _Words.spread(lead.code.size, [(tailed, keyed_words(key, words))])
    width = len(tail.table) + 1
    pair, distinct = pd.factorize((lead.code + 1) * width + tail.code + 1)  # one join per distinct pair, in Arrow
    heads = pa.array(["", *lead.table], pa.string()).take(pa.array(distinct // width))
    tails = pa.array(["", *tail.table], pa.string()).take(pa.array(distinct % width))
    both = pc.and_(pc.not_equal(heads, ""), pc.not_equal(tails, ""))
    return labels_from(pair, pc.if_else(both, join(heads, "; ", tails), join(heads, tails)))


def _capacity_words(pipes: PipeHydraulics, q_design: Array, size: Array, slope: Array, settings: RenewalSettings, *, too_fast: Mask) -> pa.Array:
    """``capacity: upsize from 300 to 450 mm: carries 85 l/s within 0.8 of its depth at the present
    slope 0.3 %; or re-lay the present 300 mm at 0.95 %``, or what to do when no listed size (or no
    slope) will. A section other than circular is replaced by a circular pipe of the new size. No
    re-lay is offered where it would run too fast (``too_fast``)."""
    units, ratio = settings.units, settings.design_depth_ratio
    height = few(pipes.sections.height, "size", units)
    shape = np.array([section.name for section in pipes.sections.shapes] + ["section"], dtype=object)[pipes.sections.kind]
    circular = pa.array(shape == "circular")
    bare = few(pipes.sections.height, "size", units, with_unit=False)  # for "from 300 to 450 mm"
    start = pc.if_else(circular, join("capacity: upsize from ", bare, " to "), join("capacity: replace the ", height, " high ", pa.array(shape, pa.string()), " with a "))
    new = join(few(size, "size", units), pc.if_else(circular, "", " pipe"))
    largest = f"capacity: no listed size up to {few(np.array([max(settings.sizes_m)]), 'size', units)[0].as_py()} carries "
    sized = pc.if_else(pa.array(np.isfinite(size)), join(start, new, ": carries "), largest)
    relief = "; a relief sewer or storage is needed"
    relay = pc.if_else(pa.array(np.isfinite(slope)), join("; or re-lay the present ", height, " at ", percent(slope)),
                       pc.if_else(pa.array(too_fast), pc.if_else(pa.array(np.isfinite(size)), "", relief),
                                  f"; and no slope up to {100 * MAX_SLOPE:g} % would do: a relief sewer or storage is needed"))  # fmt: skip
    return join(sized, amount(q_design, "flow", units), f" within {ratio:g} of its depth at the present slope ", percent(pipes.slope), relay)


def _silting_words(slope: Array, size: Array, cleansing: CleansingCriterion, *, units: UnitSystem) -> pa.Array:
    """``silting: re-lay at 0.45 % to self-cleanse (0.6 m/s flowing full); or replace with a 225 mm pipe at the present slope``."""
    quantity = "stress" if cleansing.by_shear else "velocity"
    least = amount(np.array([cleansing.minimum]), quantity, units)[0].as_py()
    target = f" to self-cleanse ({'boundary shear ' if cleansing.by_shear else ''}{least} {cleansing.words})"
    relay = join("silting: re-lay at ", percent(slope), target)
    smaller = join("replace with a ", few(size, "size", units), " pipe at the present slope")
    neither = f"silting: no slope up to {100 * MAX_SLOPE:g} % and no smaller listed size self-cleanses; flush it regularly"
    has_slope, has_size = pa.array(np.isfinite(slope)), pa.array(np.isfinite(size))
    alone = pc.if_else(has_size, join("silting: ", smaller, target), neither)
    return pc.if_else(has_slope, pc.if_else(has_size, join(relay, "; or ", smaller), relay), alone)
