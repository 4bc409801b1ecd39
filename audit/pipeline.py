"""The audit from end to end: config -> layers -> network -> flows -> hydraulics -> rules.

``run(config)`` returns an :class:`audit.result.AuditResult` (GeoDataFrames, nothing written);
``audit.outputs.write_outputs`` writes it. ``prepare(config)`` stops after the network and the
slopes, for users who want the graph itself.
"""

from __future__ import annotations

from dataclasses import asdict, dataclass, replace
from functools import partial
from pathlib import Path

import geopandas as gpd
import numpy as np
import pandas as pd
import pyarrow as pa
from tqdm import tqdm

from audit.config import Config, load_config
from audit.findings import FindingLog
from audit.flows import DesignFlows, built_flows, flow_assumptions
from audit.grade_line import BoundaryKind, FloodState, FullCause, GradeLine, Outfall, PipeRegime, grade_line, manhole_turns, node_boundaries
from audit.hydraulics import (
    GRAVITY,
    FlowState,
    FlowStatus,
    Friction,
    PipeHydraulics,
    PipeSections,
    full_bore,
    normal_depth,
    water_density,
    water_kinematic_viscosity,
)
from audit.labels import as_labels
from audit.layers import Layers, read_layers
from audit.network import Network, arrow_text, build_network, derive_levels, nodes_upstream, pipe_labels
from audit.renewal import Programme, cleansing_criterion, read_condition, read_critical_areas, renewal_programme
from audit.result import (
    PIPE_COLUMNS,
    AuditResult,
    finding_codes,
    finding_points,
    manhole_output,
    network_totals,
    with_columns,
)
from audit.rules import JUDGED_KINDS, check_manholes, check_pipes, cleansing_state, unusual_values
from audit.units import LENGTH_FACTORS

STAGES = ("reading layers", "building the network", "slopes", "design flows", "hydraulics", "grade line", "rules", "renewal", "assembling")

# hydraulic statuses as the rules stage reads them: a flow above full bore still has a normal
# depth (the load-ratio rules judge it); zero flow and an unknown shape leave a check unrun.
_RULE_STATUS = {FlowStatus.ABOVE_FULL_BORE: "ok", FlowStatus.ZERO_FLOW: "missing_flow", FlowStatus.UNKNOWN_SHAPE: "missing_size"}
_STATUS_LABELS = np.array([status.label for status in FlowStatus], dtype=object)  # by status code
# what the hydraulic status says for a pipe the gravity rules do not judge
_KIND_STATUS = {"rising_main": "pressure_pipe", "siphon": "pressure_pipe", "overflow": "overflow", "abandoned": "left_out"}
_RULE_LABELS = np.array([_RULE_STATUS.get(status, status.label) for status in FlowStatus], dtype=object)
# the rules' columns taken from the computed ones as they are, and those under another name
_METRIC_SAME = ("length_m", "slope", "q_full", "q_design", "load_ratio", "depth_ratio", "v_design", "shear")
_METRIC_RENAMED = {"up_cover": "up_cover_m", "down_cover": "down_cover_m", "upstream_invert": "up_invert_m",
                   "downstream_invert": "down_invert_m"}  # fmt: skip


@dataclass(frozen=True, eq=False)
class Prepared:
    """The network ready for hydraulics: layers, graph, levels (SI) and the findings so far."""

    config: Config
    layers: Layers
    network: Network
    levels: pd.DataFrame
    findings: FindingLog


def prepare(config: Config | str | Path, *, progress: tqdm | None = None) -> Prepared:
    """Read the layers, build the network and derive lengths, slopes and cover."""
    config = config if isinstance(config, Config) else load_config(config)
    findings = FindingLog()
    for key, message in unusual_values(config.rules):
        findings.add("config", key, "unusual_setting", message)
    if config.rules.self_cleansing.startswith("dry_weather") and not config.flows.builds_sanitary:
        findings.add("config", "rules.self_cleansing", "unusual_setting", f"rules.self_cleansing = {config.rules.self_cleansing!r} needs a "
                     "dry-weather flow, which only flows built as sanitary or combined have ([flows] kind); silting is not judged")
    _step(progress, 0)
    layers = read_layers(config.pipes, manholes=config.manholes, catchments=config.catchments, options=config.input, findings=findings)
    pipes = layers.pipes.canonical
    manholes = layers.manholes.canonical if layers.manholes is not None else None
    _step(progress, 1)
    network = build_network(
        pipes, manholes, snap_tolerance_m=config.network.snap_tolerance_m, direction=config.network.direction,
        placeholder_ids=config.network.placeholder_ids, findings=findings,
    )  # fmt: skip
    _step(progress, 2)
    levels = derive_levels(
        pipes,
        network,
        manholes,
        length_tolerance_ratio=config.network.length_tolerance_ratio,
        length_tolerance_m=config.network.length_tolerance_m,
        findings=findings,
    )
    return Prepared(config, layers, network, levels, findings)


def run(config: Config | str | Path, *, progress: bool = False) -> AuditResult:
    """Audit the network a config describes; return every feature with its results."""
    with tqdm(total=len(STAGES), desc="audit", unit="stage", disable=not progress, leave=False) as bar:
        ready = prepare(config, progress=bar)
        pipes, network = ready.layers.pipes.canonical, ready.network
        _step(bar, 3)
        height, width = pipe_sizes(pipes)  # once, for hydraulics, outputs and rules
        labels = pipe_labels(pipes)  # once, for the design flows' findings and the rules
        hydraulics = _pipe_hydraulics(ready, height=height, width=width)
        layers = ready.layers
        kind = pipes["kind"].to_numpy(dtype=object)
        flows = built_flows(
            network,
            manholes=None if layers.manholes is None else layers.manholes.canonical,
            catchments=None if layers.catchments is None else layers.catchments.canonical,
            given_flow=pipes["flow"].to_numpy(dtype=float),
            pipes=hydraulics,
            pipe_labels=labels,
            options=ready.config.flows,
            findings=ready.findings,
            capacity=full_bore(hydraulics.sections, hydraulics.slope, hydraulics.friction)[0],
            carries=kind != "overflow",
            collects=np.isin(kind, JUDGED_KINDS),
        )
        _step(bar, 4)
        uniform = normal_depth(flows.q_design, hydraulics.sections, hydraulics.slope, hydraulics.friction, temperature_c=hydraulics.temperature_c)
        judged = np.isin(kind, JUDGED_KINDS)
        state = _gravity_only(uniform, judged=judged)
        cleansing = cleansing_state(ready.config.rules, state=state, flows=flows, pipes=hydraulics)
        _step(bar, 5)
        grade, turn = _grade_line(ready, flows.q_design, hydraulics, uniform=uniform, evaluate=judged & ~ready.network.left_out)
        state = replace(state, shear=_shear(state, grade, hydraulics))
        _step(bar, 6)
        computed = _computed_columns(ready, flows, state, height=height).assign(v_cleansing=cleansing.velocity, shear_cleansing=cleansing.shear)
        computed = computed.assign(**_grade_line_columns(grade, turn=turn))
        computed = _checked(ready, computed, _metrics(pipes, computed, state, flows, height=height, labels=labels, sections=hydraulics.sections, grade=grade))
        _step(bar, 7)
        computed, schemes = _with_programme(ready, flows, computed, hydraulics, grade=grade, labels=labels)
        _step(bar, 8)
        return _result(ready, flows, computed, grade=grade, schemes=schemes)


def _checked(ready: Prepared, computed: pd.DataFrame, metrics: pd.DataFrame) -> pd.DataFrame:
    """The computed columns with the design rules' flags, severity, reasons and access runs (the rest of the rules' frame is let go here)."""
    network = ready.network
    checks = check_pipes(
        metrics,
        upstream=network.upstream,
        downstream=network.downstream,
        node_access=network.nodes["access"].to_numpy(dtype=bool),
        settings=ready.config.rules,
        units=ready.config.output_units,
    )
    labels = {name: as_labels(checks[name]) for name in ("flags", "severity", "reasons")}
    return computed.assign(**labels, access_run_m=checks["access_run_m"].to_numpy())


def _with_programme(ready: Prepared, flows: DesignFlows, computed: pd.DataFrame, hydraulics: PipeHydraulics, *, grade: GradeLine,
                    labels: np.ndarray) -> tuple[pd.DataFrame, pd.DataFrame]:  # fmt: skip
    """The computed columns with the renewal programme's, and its schemes. The programme's own
    arrays (a million remedies as Python text) end here, once its columns hold them as Arrow text."""
    programme = _programme(ready, flows, computed, hydraulics, grade=grade, labels=labels)
    return computed.assign(**_programme_columns(programme)), programme.schemes


def _grade_line(ready: Prepared, flow: np.ndarray, hydraulics: PipeHydraulics, *, uniform: FlowState, evaluate: np.ndarray) -> tuple[GradeLine, np.ndarray]:
    """The hydraulic grade line at the design flows, with the outfalls' boundaries from ``[grade_line]``
    and the manhole losses by the turn the flow makes (returned too: the turn [degrees] per pipe).

    Every outfall takes its boundary (the default, or its own entry by node id); a pump station's
    wet well is a free outfall for the gravity pipes that reach it. Anywhere else the grade line
    has to start (the pipe below could not be evaluated) is a ``grade_line_break`` finding.
    """
    network, config, findings = ready.network, ready.config, ready.findings
    nodes = network.nodes
    ends = np.zeros(len(nodes), dtype=bool)
    ends[network.outfalls] = True
    ids = nodes["node_id"].to_numpy(dtype=object)
    boundary, raw_level, unknown = node_boundaries(config.grade_line, ids, ends)
    pumps = (nodes["role"].to_numpy(dtype=object) == "pump_station") & (boundary < 0)
    boundary[pumps] = np.int8(BoundaryKind.FREE)
    for name in unknown:  # a loop over the config's entries
        findings.add("config", f"grade_line.outfalls.{name}", "unusual_setting", f"grade_line.outfalls names node '{name}', which no pipe "
                     "reaches; its boundary is not used")  # fmt: skip
    up_invert, down_invert = ready.levels["up_invert"].to_numpy(dtype=float), ready.levels["down_invert"].to_numpy(dtype=float)
    turns = manhole_turns(network.upstream, network.downstream, flow, nodes["x"].to_numpy(dtype=float), nodes["y"].to_numpy(dtype=float),
                          up_invert=up_invert, down_invert=down_invert, height=hydraulics.sections.height)  # fmt: skip
    grade = grade_line(
        hydraulics, flow=flow, upstream=network.upstream, downstream=network.downstream, node_count=len(nodes),
        up_invert=up_invert, down_invert=down_invert,
        node_rim=nodes["rim"].to_numpy(dtype=float), boundary=boundary, boundary_level=raw_level * _level_factor(config),
        evaluate=evaluate, settings=config.grade_line, uniform=uniform, turns=turns,
    )  # fmt: skip
    _report_breaks(network, grade.boundary_assumed, findings=findings)
    return grade, turns.angle


def _level_factor(config: Config) -> float:
    """Metres per unit of the levels in the layers ([manholes.units] rim, else [pipes.units] upstream_invert)."""
    unit = config.manholes.units.get("rim", "m") if config.manholes is not None else config.pipes.units.get("upstream_invert", "m")
    return LENGTH_FACTORS[unit]


def _report_breaks(network: Network, assumed: np.ndarray, *, findings: FindingLog) -> None:
    """A ``grade_line_break`` finding at each node where the grade line starts without an outfall."""
    node = np.flatnonzero(assumed)
    if not node.size:
        return
    nodes = network.nodes
    ids = nodes["node_id"].to_numpy(dtype=object)[node].astype(str)
    xy = nodes[["x", "y"]].to_numpy(dtype=float)[node]
    message = [f"the grade line starts at '{name}' as a free outfall: no pipe below it could be evaluated (size, slope, levels or "
               "flow missing), so the water levels upstream of it may be too low: flooding and surcharge above it stand, manholes "
               "that stay below the soffit are not evaluated" for name in ids]  # fmt: skip
    manhole = nodes["manhole_row"].to_numpy(dtype=np.int64)[node] >= 0
    messages = np.asarray(message, dtype=object)
    for layer, pick in (("manholes", manhole), ("network", ~manhole)):  # a manhole, or a junction of pipe ends
        if pick.any():
            findings.add_many(layer, ids[pick], "grade_line_break", messages[pick], x=xy[pick, 0], y=xy[pick, 1])


def _shear(state: FlowState, grade: GradeLine, hydraulics: PipeHydraulics) -> np.ndarray:
    r"""Boundary shear [Pa]: :math:`\rho g R S` at normal depth, and where the pipe runs full
    :math:`\rho g R_f S_f` with the full-bore hydraulic radius and the friction slope, not the bed slope."""
    full = np.isfinite(grade.full_friction_slope)
    if not full.any():
        return state.shear
    area, perimeter = hydraulics.sections.full()
    with np.errstate(invalid="ignore", divide="ignore"):
        full_shear = water_density(hydraulics.temperature_c) * GRAVITY * area / perimeter * grade.full_friction_slope
    return np.where(full, full_shear, state.shear)


def _step(bar: tqdm | None, index: int) -> None:
    if bar is not None:
        bar.set_description(STAGES[index])
        bar.n = index
        bar.refresh()


def pipe_sizes(pipes: pd.DataFrame) -> tuple[np.ndarray, np.ndarray]:
    """Height and width [m] per pipe from the canonical sizes, by shape.

    Circular: the diameter, else the height or width. Egg: the height, else 1.5 x the width.
    Rectangular and tabulated: the height and width as given (width = height if missing). Open
    channels: the bank-full depth and the bottom width as given (a trapezoid without a bottom
    width is a V ditch, width 0).
    """
    shape = pipes["shape"].to_numpy(dtype=object)
    diameter, height, width = (pipes[name].to_numpy(dtype=float) for name in ("diameter", "height", "width"))
    round_size = np.where(np.isfinite(diameter), diameter, np.where(np.isfinite(height), height, width))
    egg_height = np.where(np.isfinite(height), height, 1.5 * width)
    other_width = np.where(np.isfinite(width), width, height)
    circular, egg, vee = shape == "circular", shape == "egg", (shape == "trapezoidal") & ~np.isfinite(width)
    out_height = np.select([circular, egg], [round_size, egg_height], height)
    out_width = np.select([circular, egg, vee], [round_size, egg_height / 1.5, 0.0], other_width)
    return out_height, out_width


def _gravity_only(state: FlowState, *, judged: np.ndarray) -> FlowState:
    """Uniform-flow results kept for the pipes the gravity rules judge; NaN for pressure, overflow
    and abandoned pipes, whose flow no free-surface formula describes."""
    if judged.all():
        return state
    blank = {name: np.where(judged, getattr(state, name), np.nan)
             for name in ("q_full", "v_full", "q_max", "depth", "depth_ratio", "area", "velocity", "shear")}  # fmt: skip
    return replace(state, **blank)


def _status_labels(state: FlowState, kind: np.ndarray) -> pa.Array:
    """The hydraulic status per pipe; a pipe not judged by the gravity rules says why instead."""
    labels = pa.array(_STATUS_LABELS.tolist()).take(pa.array(state.status))
    other = ~np.isin(kind, JUDGED_KINDS)
    if not other.any():
        return labels
    named = pd.Series(kind, dtype=object).map(_KIND_STATUS).fillna("not_judged").to_numpy(dtype=object)
    return pa.array(np.where(other, named, np.asarray(labels.to_pylist(), dtype=object)), type=pa.string())


def _pipe_hydraulics(ready: Prepared, *, height: np.ndarray, width: np.ndarray) -> PipeHydraulics:
    """Sections, slopes, friction (the config's formula) and lengths of every pipe (sizes in [m])."""
    pipes, options = ready.layers.pipes.canonical, ready.config.hydraulics
    sections = PipeSections.from_names(pipes["shape"].to_numpy(dtype=object), height, width, side_slope=pipes["side_slope"].to_numpy(dtype=float))
    default = options.manning_n if options.formula == "manning" else options.ks_mm
    roughness = pipes["roughness"].to_numpy(dtype=float)
    viscosity = float(water_kinematic_viscosity(options.water_temp_c))
    friction = Friction(options.formula, np.where(np.isfinite(roughness), roughness, default), viscosity)  # type: ignore[arg-type]
    slope = ready.levels["slope"].to_numpy(dtype=float)
    length = ready.levels["length_m"].to_numpy(dtype=float)
    return PipeHydraulics(sections, slope, friction, length, temperature_c=options.water_temp_c)


def _computed_columns(ready: Prepared, flows: DesignFlows, state: FlowState, *, height: np.ndarray) -> pd.DataFrame:
    """The computed pipe columns of ``PIPE_COLUMNS`` (all but the rule results); ``height`` [m].

    Text columns are built as Arrow strings (the dtype pandas would infer) and the numeric
    arrays are taken without a copy into one block.
    """
    levels, network = ready.levels, ready.network
    node_ids = arrow_text(network.nodes["node_id"])
    kind = ready.layers.pipes.canonical["kind"].to_numpy(dtype=object)  # categories: one Python string per kind
    columns = {
        "height_m": height,
        "length_m": levels["length_m"],
        "slope": levels["slope"],
        "up_invert_m": levels["up_invert"],
        "down_invert_m": levels["down_invert"],
        "up_cover_m": levels["up_cover"],
        "down_cover_m": levels["down_cover"],
        "q_full": state.q_full,
        "v_full": state.v_full,
        "q_design": flows.q_design,
        "flow_source": as_labels(pa.array(flows.source)),
        "load_ratio": flows.q_design / state.q_full,
        "depth_ratio": state.depth_ratio,
        "v_design": state.velocity,
        "shear": state.shear,
        "hydraulic_status": as_labels(_status_labels(state, kind)),
        "pipe_kind": as_labels(kind),
        "from_node_id": _as_column(_node_text(node_ids, network.upstream)),
        "to_node_id": _as_column(_node_text(node_ids, network.downstream)),
        "upstream_length_m": flows.upstream_length,
        **_flow_parts(flows),
    }
    return pd.DataFrame(columns, index=ready.layers.pipes.canonical.index, copy=False)


_REGIME_LABELS = np.array([regime.label for regime in PipeRegime], dtype=object)
_CAUSE_LABELS = np.array([cause.label for cause in FullCause], dtype=object)
_FLOOD_LABELS = np.array([state.label for state in FloodState], dtype=object)


def _grade_line_columns(grade: GradeLine, *, turn: np.ndarray) -> dict[str, object]:
    """The grade line's pipe columns of ``PIPE_COLUMNS`` (the turn where the pipe was evaluated)."""
    return {
        "water_level_up_m": grade.level_up,
        "water_level_down_m": grade.level_down,
        "depth_up_m": grade.depth_up,
        "depth_down_m": grade.depth_down,
        "critical_depth_m": grade.critical_depth,
        "froude": grade.froude,
        "turn_deg": np.where(np.isfinite(grade.loss_k), turn, np.nan),
        "manhole_loss_k": grade.loss_k,
        "flow_regime": as_labels(_REGIME_LABELS[grade.regime]),
        "full_cause": as_labels(_CAUSE_LABELS[grade.full_cause]),
    }


def _node_columns(ready: Prepared, grade: GradeLine) -> dict[str, np.ndarray]:
    """The grade line's results per node, with the manhole flags (``MANHOLE_COLUMNS``)."""
    config, network = ready.config, ready.network
    rim = network.nodes["rim"].to_numpy(dtype=float)
    state = _FLOOD_LABELS[grade.flood_state]
    # above a node where the grade line had to assume a free outfall its levels are lower bounds:
    # flooding or surcharge there is certain, water below the soffit is not (never silently safe)
    if grade.boundary_assumed.any():
        above = nodes_upstream(np.flatnonzero(grade.boundary_assumed), network.upstream, network.downstream, node_count=len(network.nodes))
        state[above & (state == FloodState.BELOW_SOFFIT.label)] = FloodState.NOT_EVALUATED.label
    flags = check_manholes(state, level=grade.node_level, rim=rim, freeboard_m=config.grade_line.freeboard_m,
                           settings=config.rules, units=config.output_units)  # fmt: skip
    return {
        "rim_m": rim,
        "water_level_m": grade.node_level,
        "freeboard_m": grade.freeboard,
        "flood_depth_m": grade.flood_depth,
        "flood_state": state,
        "boundary": _boundary_words(ready, grade),
        "flags": flags["flags"].to_numpy(dtype=object),
        "severity": flags["severity"].to_numpy(dtype=object),
        "reasons": flags["reasons"].to_numpy(dtype=object),
    }


def _boundary_words(ready: Prepared, grade: GradeLine) -> np.ndarray:
    """Per node the boundary the grade line started from there: ``free``, ``normal``, ``fixed``, ``free (assumed)``, or ""."""
    network = ready.network
    ends = np.zeros(len(network.nodes), dtype=bool)
    ends[network.outfalls] = True
    codes, _, _ = node_boundaries(ready.config.grade_line, network.nodes["node_id"].to_numpy(dtype=object), ends)
    pumps = network.nodes["role"].to_numpy(dtype=object) == "pump_station"
    codes = np.where(pumps & (codes < 0), np.int8(BoundaryKind.FREE), codes)
    words = np.array(["", *(kind.label for kind in BoundaryKind)], dtype=object)[codes + 1]
    words[grade.boundary_assumed] = "free (assumed)"
    return words


def _node_text(node_ids: pa.Array, node: np.ndarray) -> pa.Array:
    """The id of each pipe's node; null where the pipe has none (-1)."""
    return node_ids.take(pa.array(np.maximum(node, 0), mask=node < 0))


def _as_column(text: pa.Array) -> pd.api.extensions.ExtensionArray | np.ndarray:
    """Text as pandas infers it from Python strings: Arrow strings, or objects when all missing."""
    if text.null_count == len(text):
        return np.full(len(text), None, dtype=object)
    return pd.array(text.cast(pa.large_string()), dtype=pd.StringDtype("pyarrow", na_value=np.nan))


def _flow_parts(flows: DesignFlows) -> dict[str, np.ndarray]:
    """The parts of the design flow per pipe; NaN throughout for ``[flows] kind = "given"``."""
    names = ("q_sanitary", "q_infiltration", "q_storm", "tc_min", "population_served", "area_served_ha")
    if flows.parts is None:
        return {name: np.full(flows.q_design.size, np.nan) for name in names}
    return {name: getattr(flows.parts, name) for name in names}


def _metrics(
    pipes: pd.DataFrame, computed: pd.DataFrame, state: FlowState, flows: DesignFlows, *, height: np.ndarray, labels: np.ndarray,
    sections: PipeSections, grade: GradeLine,
) -> pd.DataFrame:
    """The frame the rules read (``audit.rules.METRIC_COLUMNS``); ``height`` [m], ``labels`` pipe ids.

    Text columns stay Python objects, taken from a few labels where they are codes: the rules
    read them back as such.
    """
    shape = pipes["shape"].to_numpy(dtype=object)
    text = partial(_objects, index=computed.index)
    full_area, _ = sections.full()
    return pd.DataFrame(
        {
            "pipe_id": text(labels),
            "shape": text(shape),
            "diameter": np.where(shape == "circular", height, np.nan),
            "height": height,
            **{name: computed[name].to_numpy() for name in _METRIC_SAME},
            **{name: computed[column].to_numpy() for name, column in _METRIC_RENAMED.items()},
            "hydraulic_status": text(_RULE_LABELS[state.status]),
            "flow_status": text(flows.source.astype(object)),
            "full_area": full_area,
            "v_cleansing": computed["v_cleansing"].to_numpy(),
            "shear_cleansing": computed["shear_cleansing"].to_numpy(),
            "population_served": computed["population_served"].to_numpy(),
            "kind": text(pipes["kind"].to_numpy(dtype=object)),
            "flow_regime": text(_REGIME_LABELS[grade.regime]),
            "full_cause": text(_CAUSE_LABELS[grade.full_cause]),
            "froude": grade.froude,
            "jump": grade.jump.astype(float),
            "depth_up": grade.depth_up,
            "depth_down": grade.depth_down,
        },
        index=computed.index,
        copy=False,
    )


def _objects(values: np.ndarray | pd.Series, *, index: pd.Index) -> pd.Series:
    """A text column kept as Python objects (no conversion to Arrow strings and back)."""
    return pd.Series(np.asarray(values, dtype=object), index=index, dtype=object)


def _result(ready: Prepared, flows: DesignFlows, computed: pd.DataFrame, *, grade: GradeLine, schemes: pd.DataFrame) -> AuditResult:
    """Put the computed columns beside the original features and gather the totals."""
    layers, config = ready.layers, ready.config
    crs = layers.pipes.original.crs or config.pipes.crs
    computed = computed.assign(findings=as_labels(finding_codes(ready.findings, "pipes", layers.pipes.canonical["pipe_id"])))[list(PIPE_COLUMNS)]
    pipes = with_columns(layers.pipes.original, computed, ready.findings, layer="pipes")
    node_columns = _node_columns(ready, grade)
    manholes = manhole_output(layers, ready.network, flows.node_total, ready.findings, node_columns=node_columns) if layers.manholes is not None else None
    findings = finding_points(ready.findings, source_crs=layers.crs, target_crs=crs)
    sources = (config.pipes, config.manholes, config.catchments)
    inputs = tuple(dict.fromkeys(source.path for source in sources if source is not None))
    settings = {"hydraulics": asdict(config.hydraulics), "network": asdict(config.network), "working_crs": layers.crs.to_string(),
                "flows": flow_assumptions(config.flows, flows), "grade_line": _grade_line_settings(config), "title": config.title}
    return AuditResult(
        pipes=gpd.GeoDataFrame(pipes, geometry=layers.pipes.original.geometry.name, crs=crs),
        manholes=manholes,
        findings=findings,
        rules=config.rules,
        settings=settings,
        totals=network_totals(layers, ready.network, computed, node_columns=node_columns),
        missing_fields=layers.missing_fields,
        inputs=inputs,
        config_path=config.source,
        canonical_pipes=_attributes(layers.pipes.canonical),
        canonical_manholes=None if layers.manholes is None else _attributes(layers.manholes.canonical),
        schemes=schemes,
        computed=computed,
        units=config.output_units,
    )


def _attributes(canonical: gpd.GeoDataFrame) -> pd.DataFrame:
    """The canonical columns but the geometry, as they are (no copy of a million rows)."""
    return pd.DataFrame({name: canonical[name] for name in canonical.columns if name != "geometry"}, index=canonical.index, copy=False)


def _programme(ready: Prepared, flows: DesignFlows, computed: pd.DataFrame, hydraulics: PipeHydraulics, *, grade: GradeLine,
               labels: np.ndarray) -> Programme:  # fmt: skip
    """The renewal programme: a remedy, a scheme and a risk for every pipe (``[renewal]``, docs/renewal.md)."""
    config, layers, network, findings = ready.config, ready.layers, ready.network, ready.findings
    settings = config.renewal
    pipes = layers.pipes.canonical
    rim = network.nodes["rim"].to_numpy(dtype=float)
    up, down = network.upstream, network.downstream
    up_rim = np.where(up >= 0, rim[np.maximum(up, 0)], np.nan)
    down_rim = np.where(down >= 0, rim[np.maximum(down, 0)], np.nan)
    condition = None if settings.condition is None else read_condition(settings.condition, findings=findings)
    areas = read_critical_areas(settings.critical_areas, crs=layers.crs, findings=findings)
    return renewal_programme(
        pipes=hydraulics, flags=computed["flags"].array, severity=computed["severity"].to_numpy(dtype=object),
        q_design=flows.q_design, load_ratio=computed["load_ratio"].to_numpy(dtype=float),
        population_served=computed["population_served"].to_numpy(dtype=float), install_year=pipes["install_year"].to_numpy(dtype=float),
        material=pipes["material"], up_depth_m=up_rim - ready.levels["up_invert"].to_numpy(dtype=float),
        down_depth_m=down_rim - ready.levels["down_invert"].to_numpy(dtype=float), upstream=up, downstream=down,
        node_flooding=grade.flood_state == FloodState.FLOODING, geometry=pipes.geometry.to_numpy(), pipe_ids=labels,
        cleansing=cleansing_criterion(config.rules, flows), evaluated=computed["hydraulic_status"].isin(("ok", "above_full_bore", "surcharged")).to_numpy(),
        settings=settings, condition=condition, critical_areas=areas, findings=findings, max_velocity=config.rules.max_velocity,
    )  # fmt: skip


def _programme_columns(programme: Programme) -> dict[str, object]:
    """The programme's pipe columns of ``PIPE_COLUMNS`` (its ``rank`` as ``renewal_rank``)."""
    text = {name: as_labels(getattr(programme, name))
            for name in ("remedy", "remedy_kind", "scheme_id", "likelihood_driver", "consequence_driver", "risk_driver")}  # fmt: skip
    numbers = {name: getattr(programme, name) for name in ("remedy_size_m", "remedy_slope", "scheme_position", "likelihood", "consequence", "risk", "review")}
    return {**text, **numbers, "renewal_rank": programme.rank}


def _grade_line_settings(config: Config) -> dict[str, object]:
    """``[grade_line]`` as used, JSON-safe: boundaries by name, fixed levels as given (the layers' level units)."""
    settings = config.grade_line

    def boundary(outfall: Outfall) -> object:
        return outfall.level if outfall.kind == BoundaryKind.FIXED else outfall.kind.label

    return {"outfall": boundary(settings.outfall), "outfalls": {name: boundary(entry) for name, entry in settings.outfalls.items()},
            "manhole_loss": settings.manhole_loss, "bend_loss": settings.bend_loss, "freeboard_m": settings.freeboard_m, "profile_steps": settings.profile_steps}  # fmt: skip
