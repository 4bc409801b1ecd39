"""Design-rule checks: per-pipe numbers become flags, a severity and reasons a person can read.

``check_pipes`` takes the hydraulics stage's metrics frame and the network's graph arrays and
returns, per pipe and in the same order, the flag codes raised (joined by ";" in the fixed order
of ``FLAG_CODES``), the worst severity among them and one reason per flag with its numbers. Every
rule is one boolean mask over all pipes; reasons are built with vectorised string operations.

Flag codes: ``surcharge``, ``near_capacity``, ``silting``, ``high_velocity``, ``reverse_grade``,
``zero_grade``, ``flat_grade``, ``long_spacing``, ``below_min_diameter``, ``diameter_decrease``,
``shallow_cover``, ``missing_data``. docs/rules.md gives each one's threshold and source.

Where a pipe's slope is zero or negative no uniform flow exists, so only the grade flag speaks
for its hydraulics: surcharge, near capacity, silting, high velocity and the missing roughness
or design flow that a velocity would have needed are not raised.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pyarrow as pa
import pyarrow.compute as pc

from audit.errors import ConfigError
from audit.layers import OPEN_SHAPES
from audit.rules.access import access_runs, run_totals
from audit.rules.settings import (
    FLAG_CODES,
    SEVERITY_NONE,
    SEVERITY_OFF,
    SEVERITY_ORDER,
    RuleSettings,
)
from audit.rules.text import concat, fixed, join, pick, rows, strings
from audit.units import SI, UnitSystem

METRIC_COLUMNS: tuple[str, ...] = (
    "pipe_id", "shape", "diameter", "height", "length_m", "slope", "q_full", "q_design",
    "load_ratio", "depth_ratio", "v_design", "shear", "up_cover", "down_cover",
    "hydraulic_status", "flow_status",
)  # fmt: skip

#: hydraulic_status codes the hydraulics stage emits; any other value is reported as such.
HYDRAULIC_STATUSES: tuple[str, ...] = (
    "ok", "surcharged", "above_bank_full", "nonpositive_slope", "missing_slope", "missing_size",
    "missing_roughness", "missing_flow",
)  # fmt: skip

#: Pipe kinds the gravity rules judge (``audit.layers.settings.PIPE_KINDS``).
JUDGED_KINDS: tuple[str, ...] = ("gravity", "private")

# Areas closer than this share are equal: absorbs unit-conversion noise, not real steps [-].
_AREA_TOLERANCE = 1e-6

Hit = tuple[np.ndarray, pa.Array | str]


def check_pipes(
    metrics: pd.DataFrame,
    *,
    upstream: np.ndarray,
    downstream: np.ndarray,
    node_access: np.ndarray,
    settings: RuleSettings,
    units: UnitSystem = SI,
) -> pd.DataFrame:
    """Flags, worst severity and reasons per pipe.

    Parameters
    ----------
    metrics : one row per pipe with the columns of ``METRIC_COLUMNS`` (SI, NaN where unknown);
        optional ``upstream_invert`` / ``downstream_invert`` [m] let a missing slope name the
        missing invert; optional ``kind`` (``audit.layers.settings.PIPE_KINDS``): only gravity
        and private pipes are judged (a private drain is not held to the public minimum
        diameter); rising mains, siphons, overflow and abandoned pipes get no flag and take no
        part in the access runs or the size steps
    upstream, downstream : node index at the two ends of each pipe, in flow direction; -1 where
        unknown
    node_access : True for each node that is an access point (manhole with a cover)
    settings : the thresholds
    units : the unit system the reasons are written in (``[output] units``); the checks are SI

    Returns
    -------
    DataFrame on the index of ``metrics`` with ``flags`` (codes joined by ";", "" when none),
    ``severity`` (the worst, ``none`` when no flag), ``reasons`` (joined by "; ") and ``access_run_m``,
    the length of pipe [m] between the access points around each pipe.
    """
    columns = _columns(metrics)
    size = _size(columns)
    upstream, downstream, node_access = _graph(upstream, downstream, node_access, count=len(metrics))
    kind = metrics["kind"].to_numpy(dtype=object) if "kind" in metrics else np.full(len(metrics), "gravity", dtype=object)
    judged = np.isin(kind, JUDGED_KINDS)
    upstream, downstream = np.where(judged, upstream, -1), np.where(judged, downstream, -1)
    run = access_runs(upstream=upstream, downstream=downstream, node_access=node_access)
    run_length, run_pipes = run_totals(run, length=columns["length_m"])
    hits = {
        **_capacity_hits(columns, settings=settings),
        **_velocity_hits(columns, settings=settings, units=units),
        **_grade_hits(columns, size=size, settings=settings),
        **_grade_line_hits(columns, settings=settings, units=units),
        "long_spacing": _spacing_hit(size, run, run_length, run_pipes, settings=settings, units=units),
        "below_min_diameter": _diameter_hit(columns, size=size, settings=settings, units=units),
        "diameter_decrease": _decrease_hit(columns, size, upstream, downstream, nodes=len(node_access), units=units),
        "shallow_cover": _cover_hit(columns, settings=settings, units=units),
        "missing_data": _missing_hit(columns, size=size),
    }
    hits = {code: _restrict(hit, judged) for code, hit in hits.items()}
    hits["below_min_diameter"] = _restrict(hits["below_min_diameter"], kind != "private")
    return _assemble(hits, settings=settings, index=metrics.index, run_length=np.where(judged, run_length, np.nan))


def _restrict(hit: Hit, keep: np.ndarray) -> Hit:
    """A rule's hit kept only where ``keep``: its mask and the reasons of the rows that stay."""
    mask, reason = hit
    kept = keep[mask]
    if isinstance(reason, str) or kept.all():  # every flagged row stays (all pipes judged, as is usual): no reason to drop
        return mask & keep, reason
    return mask & keep, reason.filter(pa.array(kept))


def worst_severity_at_least(severity_column: pd.Series | np.ndarray, threshold: str) -> np.ndarray:
    """Mask of pipes whose worst severity is ``threshold`` or more serious.

    Examples
    --------
    >>> worst_severity_at_least(np.array(["none", "low", "medium", "high"]), "medium").tolist()
    [False, False, True, True]
    """
    if threshold not in SEVERITY_ORDER:
        raise ConfigError(f"severity threshold: expected one of {', '.join(SEVERITY_ORDER)}, got {threshold!r}")
    rank = {word: place for place, word in enumerate(SEVERITY_ORDER, start=1)}
    words = pd.Series(np.asarray(severity_column, dtype=object)).fillna(SEVERITY_NONE)
    unknown = ~words.isin([*rank, SEVERITY_NONE, ""])
    if unknown.any():
        raise ValueError(f"severity column holds {words[unknown].iloc[0]!r}, not one of {', '.join(SEVERITY_ORDER)}")
    return words.map(rank).fillna(0).to_numpy(dtype=float) >= rank[threshold]


def _text_column(values: pd.Series) -> np.ndarray:
    """Python strings, "unknown" where missing; a column of strings is not converted again."""
    text = values.to_numpy(dtype=object).copy()
    if pd.api.types.infer_dtype(text, skipna=True) not in ("string", "empty"):
        return values.fillna("unknown").astype(str).to_numpy(dtype=object)
    text[pd.isna(text)] = "unknown"
    return text


def _columns(metrics: pd.DataFrame) -> dict[str, np.ndarray]:
    missing = [name for name in METRIC_COLUMNS if name not in metrics.columns]
    if missing:
        raise ValueError(f"rules: metrics frame lacks column(s) {', '.join(missing)}")
    texts = ("pipe_id", "shape", "hydraulic_status", "flow_status")
    columns = {name: _text_column(metrics[name]) for name in texts}
    for name in GRADE_LINE_TEXTS:
        if name in metrics.columns:
            columns[name] = _text_column(metrics[name])
    for name in (*METRIC_COLUMNS, "upstream_invert", "downstream_invert", "full_area", "v_cleansing", "shear_cleansing", "population_served",
                 *GRADE_LINE_NUMBERS):  # fmt: skip
        if name not in texts and name in metrics.columns:
            columns[name] = metrics[name].to_numpy(dtype=float, na_value=np.nan)
    return columns


def _graph(
    upstream: np.ndarray, downstream: np.ndarray, node_access: np.ndarray, *, count: int
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    upstream = np.asarray(upstream, dtype=np.int64)
    downstream = np.asarray(downstream, dtype=np.int64)
    node_access = np.asarray(node_access, dtype=bool)
    for name, ends in (("upstream", upstream), ("downstream", downstream)):
        if ends.shape != (count,):
            raise ValueError(f"rules: {name} has {ends.size} entries for {count} pipes")
        if ends.size and (ends.min() < -1 or ends.max() >= len(node_access)):
            raise ValueError(f"rules: {name} holds a node index outside -1 .. {len(node_access) - 1}")
    return upstream, downstream, node_access


def _size(columns: dict[str, np.ndarray]) -> np.ndarray:
    """Internal size [m]: the diameter, else the height of a non-circular section."""
    return np.where(np.isfinite(columns["diameter"]), columns["diameter"], columns["height"])


def _size_word(columns: dict[str, np.ndarray], mask: np.ndarray) -> pa.Array:
    return pick(("height ", "diameter "), np.isfinite(columns["diameter"][mask]))


def _load_ratio(columns: dict[str, np.ndarray]) -> np.ndarray:
    with np.errstate(divide="ignore", invalid="ignore"):
        ratio = columns["q_design"] / columns["q_full"]
    return np.where(np.isfinite(columns["load_ratio"]), columns["load_ratio"], ratio)


def _capacity_hits(columns: dict[str, np.ndarray], *, settings: RuleSettings) -> dict[str, Hit]:
    flowing = columns["slope"] > 0
    ratio = _load_ratio(columns)
    over = flowing & (columns["q_design"] > settings.max_load_ratio * columns["q_full"])
    near = flowing & ~over & (ratio > settings.near_capacity_ratio)
    channel = pick(("", " (above bank-full)"), np.isin(columns["shape"][over], OPEN_SHAPES))
    return {
        "surcharge": (over, concat("load ratio ", fixed(ratio[over], 2), f" > {settings.max_load_ratio:.2f}", channel)),
        "near_capacity": (near, concat("load ratio ", fixed(ratio[near], 2), f" > {settings.near_capacity_ratio:.2f}")),
    }


#: The words a silting reason ends with, per criterion (``RuleSettings.self_cleansing``).
CLEANSING_WORDS = {"full_velocity": "flowing full", "design_velocity": "at the design flow",
                   "fraction_velocity": "at {fraction:.2f} x the design flow", "dry_weather_velocity": "at the dry-weather {dry} flow",
                   "dry_weather_shear": "at the dry-weather {dry} flow"}  # fmt: skip


#: Decimals of a number in a reason, by the unit it is written in.
_DECIMALS = {"m/s": 2, "ft/s": 2, "Pa": 2, "psf": 3, "m": 2, "ft": 1, "mm": 0, "in": 1, "m2": 3, "ft2": 2}


def _amount(values: np.ndarray, quantity: str, units: UnitSystem) -> pa.Array:
    """SI ``values`` of ``quantity`` as text in ``units``, with the unit: ``0.45 m/s``, ``1.5 ft/s``."""
    unit = units.unit(quantity)
    return concat(fixed(units.convert(values, quantity), _DECIMALS[unit]), f" {unit}")


def _limit(value: float, quantity: str, units: UnitSystem) -> str:
    """One SI threshold as text in ``units``, with the unit."""
    unit = units.unit(quantity)
    return f"{float(units.convert(value, quantity)):.{_DECIMALS[unit]}f} {unit}"


def _velocity_hits(columns: dict[str, np.ndarray], *, settings: RuleSettings, units: UnitSystem) -> dict[str, Hit]:
    flowing = columns["slope"] > 0
    velocity = columns["v_design"]
    fast = flowing & _free_surface(columns) & (velocity > settings.max_velocity)
    return {
        "silting": _silting_hit(columns, settings=settings, units=units),
        "high_velocity": (fast, concat("velocity ", _amount(velocity[fast], "velocity", units), " > ", _limit(settings.max_velocity, "velocity", units))),
    }


#: The optional metric columns of the grade line (text, then numbers); without them its rules do not run.
GRADE_LINE_TEXTS = ("flow_regime", "full_cause")
GRADE_LINE_NUMBERS = ("froude", "jump", "depth_up", "depth_down", "height")

#: Regimes in which a pipe runs full over some of its length (``audit.grade_line.PipeRegime`` labels).
FULL_REGIMES = ("partly_pressurised", "pressurised", "above_bank_full")


def _free_surface(columns: dict[str, np.ndarray]) -> np.ndarray:
    """True where the flow has a free surface: every pipe without a grade line; with one, those not running full."""
    if "flow_regime" not in columns:
        return np.ones(len(columns["slope"]), dtype=bool)
    return ~np.isin(columns["flow_regime"], FULL_REGIMES)


def _grade_line_hits(columns: dict[str, np.ndarray], *, settings: RuleSettings, units: UnitSystem) -> dict[str, Hit]:
    """``backwater_surcharge``, ``hydraulic_jump`` and ``near_critical`` from the grade line's columns.

    * ``backwater_surcharge``: a pipe within its own capacity held up by the level below so that
      the water stands above its crown at its upstream end: the manhole above it surcharges. A
      pipe whose outlet only is drowned (a smaller pipe into a larger one with matched inverts)
      runs partly full, which ``flow_regime`` and ``full_cause`` say, without a flag.
    * ``hydraulic_jump``: a supercritical flow drowned by the level below, where the water after
      the jump reaches the crown at the outlet: the jump fills the pipe, with surging and trapped
      air. A jump that stays below the crown is ordinary in a steep sewer and is not flagged.
    * ``near_critical``: a free-surface flow whose Froude number at normal depth lies within
      ``near_critical_band`` of 1, where the surface is unstable and waves form.

    Common practice, no source.
    """
    count = len(columns["slope"])
    if "full_cause" not in columns:
        none = np.zeros(count, dtype=bool)
        return {"backwater_surcharge": (none, ""), "hydraulic_jump": (none, ""), "near_critical": (none, "")}
    height = columns["height"]
    above = columns["depth_up"] - height
    held = (columns["full_cause"] == "backwater") & (above > 0)
    ratio = _load_ratio(columns)
    froude = columns["froude"]
    filling = (columns["jump"] > 0) & (columns["depth_down"] >= height)
    near = _free_surface(columns) & (np.abs(froude - 1.0) < settings.near_critical_band) & (columns["q_design"] > 0)
    return {
        "backwater_surcharge": (held, concat("held up by the level below", _within_capacity(ratio[held]), ": water ",
                                             _amount(above[held], "length", units), " above the crown at its upstream end")),
        "hydraulic_jump": (filling, concat("supercritical flow (Froude ", fixed(froude[filling], 2), ") drowned by the level below: "
                                           "a hydraulic jump that fills the pipe")),
        "near_critical": (near, concat("Froude number ", fixed(froude[near], 2), f" within {settings.near_critical_band:g} of 1: an unstable, wavy surface")),
    }  # fmt: skip


def _within_capacity(ratio: np.ndarray) -> pa.Array:
    """`` within its capacity (load ratio 0.62)`` where the load ratio is known, else nothing."""
    words = concat(" within its capacity (load ratio ", fixed(ratio, 2), ")")
    return pc.if_else(pa.array(np.isfinite(ratio)), words, "")


def _silting_hit(columns: dict[str, np.ndarray], *, settings: RuleSettings, units: UnitSystem) -> Hit:
    """Self-cleansing by the configured criterion: the velocity (or shear) at the criterion's flow.

    The frame's ``v_cleansing`` and ``shear_cleansing`` hold them; a frame without them is judged
    at the design flow. Pipes serving fewer than ``exempt_population`` persons are not judged.
    """
    flowing = columns["slope"] > 0
    if "population_served" in columns:
        flowing &= ~(columns["population_served"] < settings.exempt_population)
    criterion = settings.self_cleansing if "v_cleansing" in columns else "design_velocity"
    words = CLEANSING_WORDS[criterion].format(fraction=settings.cleansing_fraction, dry=settings.dry_weather)
    if criterion == "dry_weather_shear":
        shear = columns.get("shear_cleansing", columns["shear"])
        weak = flowing & (shear < settings.min_shear)
        return weak, concat("shear ", _amount(shear[weak], "stress", units), f" < {_limit(settings.min_shear, 'stress', units)} {words}")
    velocity = columns.get("v_cleansing", columns["v_design"])
    slow = flowing & (velocity < settings.min_velocity)
    return slow, concat("velocity ", _amount(velocity[slow], "velocity", units), f" < {_limit(settings.min_velocity, 'velocity', units)} {words}")


def _grade_hits(columns: dict[str, np.ndarray], *, size: np.ndarray, settings: RuleSettings) -> dict[str, Hit]:
    slope = columns["slope"]
    reverse = slope < 0
    least = np.full(len(slope), np.nan) if settings.min_slope is None else settings.min_slope.lookup(size)
    zero = slope == 0
    shy = (slope > 0) & (slope < least)
    return {
        # a fall against the flow, or none at all, is most often a survey or register error
        "reverse_grade": (reverse, concat("slope ", fixed(100 * slope[reverse], 3), " % falls against the flow; verify levels")),
        "zero_grade": (zero, "no fall between the inverts; verify levels"),
        "flat_grade": (shy, concat("slope ", fixed(100 * slope[shy], 3), " % < ", fixed(100 * least[shy], 3), " %")),
    }


def _spacing_hit(
    size: np.ndarray, run: np.ndarray, run_length: np.ndarray, run_pipes: np.ndarray, *, settings: RuleSettings, units: UnitSystem
) -> Hit:
    """A run is held to the strictest limit of its pipes; a pipe of unknown size to the table's strictest."""
    limit = settings.max_spacing_m.lookup(size)
    limit = np.where(np.isnan(limit), settings.max_spacing_m.strictest, limit)
    run_limit = np.full(int(run.max(initial=-1)) + 1, np.inf)
    np.minimum.at(run_limit, run, limit)
    limit = run_limit[run]
    long = run_length > limit
    unit = units.unit("length")
    reason = concat(
        "access run ", fixed(units.convert(run_length[long], "length"), 1), f" {unit} > ", fixed(units.convert(limit[long], "length"), 1),
        f" {unit} (", fixed(run_pipes[long], 0), " pipes)",
    )  # fmt: skip
    return long, reason


def _diameter_hit(columns: dict[str, np.ndarray], *, size: np.ndarray, settings: RuleSettings, units: UnitSystem) -> Hit:
    size_mm = np.round(size * 1000.0, 6)
    small = size_mm < settings.min_diameter_mm
    least = _limit(settings.min_diameter_mm / 1000.0, "size", units)
    return small, concat(_size_word(columns, small), _amount(size[small], "size", units), f" < {least}")


def _decrease_hit(
    columns: dict[str, np.ndarray], size: np.ndarray, upstream: np.ndarray, downstream: np.ndarray, *, nodes: int, units: UnitSystem
) -> Hit:
    """A full-bore area smaller than that of the largest pipe ending at this pipe's upstream node.

    Areas, not heights, are compared: an egg-shaped pipe (height 1.5 x width) into a larger
    circular one, or a box drain that grows wider as it gets lower, is no step down.
    """
    area = columns["full_area"] if "full_area" in columns else np.pi * size**2 / 4.0
    largest_in = np.full(nodes, -np.inf)
    feeds = (downstream >= 0) & np.isfinite(area)
    order = np.argsort(area[feeds], kind="stable")  # the largest area entering each node last, so it wins
    largest_in[downstream[feeds][order]] = area[feeds][order]
    entering_size = np.full(nodes, np.nan)
    entering_size[downstream[feeds][order]] = size[feeds][order]
    entering, entering_height = np.full(len(area), -np.inf), np.full(len(area), np.nan)
    known = upstream >= 0
    entering[known], entering_height[known] = largest_in[upstream[known]], entering_size[upstream[known]]
    step = area < entering * (1.0 - _AREA_TOLERANCE)
    reason = concat(
        _size_word(columns, step), _amount(size[step], "size", units), ", full area ", _amount(area[step], "section", units), " < ",
        _amount(entering[step], "section", units), " of the ", _amount(entering_height[step], "size", units), " pipe entering upstream",
    )  # fmt: skip
    return step, reason


def _cover_hit(columns: dict[str, np.ndarray], *, settings: RuleSettings, units: UnitSystem) -> Hit:
    cover = np.fmin(columns["up_cover"], columns["down_cover"])
    shallow = cover < settings.min_cover_m
    return shallow, concat("cover ", _amount(cover[shallow], "length", units), " < ", _limit(settings.min_cover_m, "length", units))


def _missing_hit(columns: dict[str, np.ndarray], *, size: np.ndarray) -> Hit:
    """What kept a check from running, in words; hydraulic needs only where the slope is positive or unknown."""
    status, flow_status = columns["hydraulic_status"], columns["flow_status"]
    slope = columns["slope"]
    hydraulic = ~(slope <= 0)
    loop = hydraulic & (flow_status == "self_loop")
    no_flow = hydraulic & ~loop & (
        (status == "missing_flow") | (flow_status == "missing") | np.isnan(columns["q_design"])
    )  # fmt: skip
    no_slope = np.isnan(slope) | (status == "missing_slope")
    odd = hydraulic & ~np.isin(status, HYDRAULIC_STATUSES)
    no_size = ~np.isfinite(size) | (status == "missing_size")
    closed = ~np.isin(columns["shape"], OPEN_SHAPES)  # an open channel has no crown to cover
    circular = columns["shape"][no_size] == "circular"
    hits: list[Hit] = [
        (no_size, pick(("no size: height missing", "no size: diameter missing"), circular)),
        (no_slope, _slope_words(columns, no_slope)),
        (np.isnan(columns["length_m"]), "no length"),
        (hydraulic & (status == "missing_roughness"), "no roughness"),
        (no_flow, "no design flow"),
        (loop, "no design flow: both ends of the pipe join one node (a self-loop)"),
        (odd, concat("hydraulics not computed (status '", strings(status[odd]), "')")),
        (closed & np.isnan(columns["up_cover"]) & np.isnan(columns["down_cover"]), "no cover at either end"),
    ]
    missing = np.logical_or.reduce([mask for mask, _ in hits])
    return missing, rows(join(hits, sep=", ", count=len(slope)), missing)


def _slope_words(columns: dict[str, np.ndarray], mask: np.ndarray) -> pa.Array:
    """Which invert is missing, where the frame carries the inverts."""
    up = np.isnan(columns.get("upstream_invert", np.zeros(len(mask)))[mask])
    down = np.isnan(columns.get("downstream_invert", np.zeros(len(mask)))[mask])
    choices = ("no slope", "no slope: upstream invert missing", "no slope: downstream invert missing",
               "no slope: both inverts missing")  # fmt: skip
    return pick(choices, up + 2 * down)


def _assemble(
    hits: dict[str, Hit], *, settings: RuleSettings, index: pd.Index, run_length: np.ndarray
) -> pd.DataFrame:
    count = len(index)
    live = {code: hits[code] for code in FLAG_CODES if settings.severity[code] != SEVERITY_OFF}
    rank = np.zeros(count, dtype=np.int8)
    for code, (mask, _) in live.items():
        rank = np.maximum(rank, mask * np.int8(SEVERITY_ORDER.index(settings.severity[code]) + 1))
    flags = join([(mask, code) for code, (mask, _) in live.items()], sep=";", count=count)
    return pd.DataFrame(
        {
            "flags": pd.array(flags, dtype="str"),
            "severity": pd.array(pick((SEVERITY_NONE, *SEVERITY_ORDER), rank), dtype="str"),
            "reasons": pd.array(join(list(live.values()), sep="; ", count=count), dtype="str"),
            "access_run_m": run_length,
        },
        index=index,
        copy=False,
    )
