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
from audit.hydraulics import (
    FlowState,
    FlowStatus,
    Friction,
    PipeHydraulics,
    PipeSections,
    full_bore,
    normal_depth,
    water_kinematic_viscosity,
)
from audit.layers import Layers, read_layers
from audit.network import Network, arrow_text, build_network, derive_levels, pipe_labels
from audit.result import (
    PIPE_COLUMNS,
    AuditResult,
    finding_points,
    manhole_output,
    network_totals,
    with_columns,
)
from audit.rules import JUDGED_KINDS, check_pipes, cleansing_state, unusual_values

STAGES = ("reading layers", "building the network", "slopes", "design flows", "hydraulics", "rules", "assembling")

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
        state = normal_depth(flows.q_design, hydraulics.sections, hydraulics.slope, hydraulics.friction, temperature_c=hydraulics.temperature_c)
        state = _gravity_only(state, judged=np.isin(kind, JUDGED_KINDS))
        cleansing = cleansing_state(ready.config.rules, state=state, flows=flows, pipes=hydraulics)
        _step(bar, 5)
        computed = _computed_columns(ready, flows, state, height=height).assign(v_cleansing=cleansing.velocity, shear_cleansing=cleansing.shear)
        checks = check_pipes(
            _metrics(pipes, computed, state, flows, height=height, labels=labels, sections=hydraulics.sections),
            upstream=network.upstream,
            downstream=network.downstream,
            node_access=network.nodes["access"].to_numpy(dtype=bool),
            settings=ready.config.rules,
            units=ready.config.output_units,
        )
        _step(bar, 6)
        return _result(ready, flows, computed.join(checks[["flags", "severity", "reasons", "access_run_m"]]))


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
        "flow_source": _as_column(pa.array(flows.source)),
        "load_ratio": flows.q_design / state.q_full,
        "depth_ratio": state.depth_ratio,
        "v_design": state.velocity,
        "shear": state.shear,
        "hydraulic_status": _as_column(_status_labels(state, ready.layers.pipes.canonical["kind"].to_numpy(dtype=object))),
        "pipe_kind": _as_column(pa.array(ready.layers.pipes.canonical["kind"].to_numpy(dtype=object), type=pa.string())),
        "from_node_id": _as_column(_node_text(node_ids, network.upstream)),
        "to_node_id": _as_column(_node_text(node_ids, network.downstream)),
        "upstream_length_m": flows.upstream_length,
        **_flow_parts(flows),
    }
    return pd.DataFrame(columns, index=ready.layers.pipes.canonical.index, copy=False)


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
    sections: PipeSections,
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
        },
        index=computed.index,
        copy=False,
    )


def _objects(values: np.ndarray | pd.Series, *, index: pd.Index) -> pd.Series:
    """A text column kept as Python objects (no conversion to Arrow strings and back)."""
    return pd.Series(np.asarray(values, dtype=object), index=index, dtype=object)


def _result(ready: Prepared, flows: DesignFlows, computed: pd.DataFrame) -> AuditResult:
    """Put the computed columns beside the original features and gather the totals."""
    layers, config = ready.layers, ready.config
    crs = layers.pipes.original.crs or config.pipes.crs
    computed = computed[list(PIPE_COLUMNS)]
    pipes = with_columns(layers.pipes.original, computed, ready.findings, layer="pipes")
    manholes = manhole_output(layers, ready.network, flows.node_total, ready.findings) if layers.manholes is not None else None
    findings = finding_points(ready.findings, source_crs=layers.crs, target_crs=crs)
    sources = (config.pipes, config.manholes, config.catchments)
    inputs = tuple(dict.fromkeys(source.path for source in sources if source is not None))
    settings = {"hydraulics": asdict(config.hydraulics), "network": asdict(config.network), "working_crs": layers.crs.to_string(),
                "flows": flow_assumptions(config.flows, flows)}
    return AuditResult(
        pipes=gpd.GeoDataFrame(pipes, geometry=layers.pipes.original.geometry.name, crs=crs),
        manholes=manholes,
        findings=findings,
        rules=config.rules,
        settings=settings,
        totals=network_totals(layers, ready.network, computed),
        missing_fields=layers.missing_fields,
        inputs=inputs,
        config_path=config.source,
        canonical_pipes=pd.DataFrame(layers.pipes.canonical.drop(columns="geometry")),
        computed=computed,
        units=config.output_units,
    )
