"""report.html: one self-contained page, its sections in a fixed order.

Order: caution, network totals, map, flags, load against depth ratio, velocities, renewal
candidates, data findings, rules and run. Every user string (ids, reasons, paths, finding codes)
is escaped; the page has inline CSS and inline SVG only: no script, no font, no outside address.
"""

from __future__ import annotations

import html
from collections.abc import Mapping
from datetime import datetime
from typing import Any

import numpy as np
import pandas as pd
import shapely

from audit.about import __version__
from audit.network import first_places
from audit.outputs import candidate_rows
from audit.renewal import Programme
from audit.report.charts import flag_bars, part_full_chart, velocity_histogram
from audit.report.curves import report_curves
from audit.report.flooding import flooding_section, node_levels
from audit.report.flows import flows_section, outfall_pipes
from audit.report.html import cell, paragraph, percent, plural, section, table
from audit.report.long_section import FLOOD_COLOUR
from audit.report.map import CLASS_COLOURS, MapMarks, anchor_points, metric_geometry, network_map
from audit.report.programme import programme_labels, programme_of, programme_section
from audit.report.svg import element
from audit.report.tables import (
    MAP_CLASSES,
    class_counts,
    evaluated,
    finding_digest,
    flag_totals,
    map_classes,
    numeric,
    pipe_labels,
    pipes_flags,
    renewal_candidates,
    text_array,
)
from audit.result import AuditResult
from audit.rules import CLEANSING_WORDS, DiameterTable, RuleSettings, as_table
from audit.units import UNIT_SIZES, UnitSystem

CAUTION_WORDS = (
    "This report is a screening aid. It applies uniform-flow checks to every pipe and a steady "
    "hydraulic grade line to the network against design rules that the user can configure, and "
    "gives rough estimates of remedies and their costs. It does not replace a calibrated hydraulic "
    "model of the network or a design. Local codes and the judgement of a licensed engineer govern "
    "every decision taken on it."
)

#: The colour of the programme's numbers on the map.
PROGRAMME_COLOUR = "#222222"

#: The colour of the outfalls on the map, and how many of them (the largest by design flow) it labels.
OUTFALL_COLOUR = "#009e73"
OUTFALLS_LABELLED = 20

#: How many flooding manholes the map draws and labels, the deepest first: a network of a million
#: pipes can flood thousands, and the page must stay readable and small.
FLOODING_DRAWN = 1000
FLOODING_LABELLED = 20

#: Candidates listed in the report.
CANDIDATE_ROWS = 20

STYLE_SHEET = """
body{font-family:system-ui,-apple-system,"Segoe UI",Roboto,Arial,sans-serif;color:#222;margin:0;background:#fafafa}
main{max-width:1040px;margin:0 auto;padding:0 20px 40px}
h1{font-size:1.6em;margin:24px auto 8px;max-width:1040px;padding:0 20px}
h2{font-size:1.2em;border-bottom:1px solid #ccc;padding-bottom:4px;margin-top:32px}
section{background:#fff;border:1px solid #e2e2e2;border-radius:6px;padding:4px 18px 14px;margin-top:18px}
.caution{border-left:6px solid #c0392b;background:#fdf3f2}
table{border-collapse:collapse;font-size:.9em;margin:8px 0}
th,td{border-bottom:1px solid #e6e6e6;padding:4px 8px;text-align:left;vertical-align:top}
th{background:#f2f2f2}
.num{text-align:right;font-variant-numeric:tabular-nums}
svg{max-width:100%;height:auto;display:block}
.legend{list-style:none;padding:0;display:flex;flex-wrap:wrap;gap:6px 22px;font-size:.9em}
.swatch{display:inline-block;width:22px;height:6px;margin-right:6px;vertical-align:middle;border-radius:2px}
.swatch.dot{width:10px;height:10px;border-radius:50%}
.note{color:#555;font-size:.85em}
#candidate-table td:nth-child(2),#candidate-table td:nth-child(3){white-space:nowrap}
.title-block{max-width:1040px;margin:0 auto;padding:0 20px;color:#444;font-size:.9em}
.title-block dl{display:grid;grid-template-columns:max-content 1fr;gap:2px 14px;margin:4px 0 0}
.title-block dt{font-weight:600}.title-block dd{margin:0}
.summary{font-size:1.05em}
@media print{
@page{margin:14mm 12mm}
body{background:#fff;font-size:9.5pt}
main,h1,.title-block{max-width:none;padding:0}
h1{margin:0 0 4px}
section{border:none;border-radius:0;padding:0;margin-top:10px;break-inside:avoid-page}
section.long{break-inside:auto}
h2{margin-top:6px;break-after:avoid-page}
thead{display:table-header-group}
tr,svg,.legend,.note{break-inside:avoid-page}
svg{max-height:150mm;width:auto;margin:0 auto}
.caution{border-left:4px solid #c0392b}
}
"""


def render_page(result: AuditResult, *, id_field: str | None, created: datetime) -> str:
    """The whole report as one HTML string."""
    pipes = analysis_frame(result)
    classes = map_classes(pipes)
    totals = flag_totals(pipes, severity=result.rules.severity)
    ranking, programme, nodes = candidate_rows(pipes), programme_of(result), node_levels(result)  # each used by two sections: worked out once
    body = "".join(
        (
            element("section", element("h2", "Caution") + paragraph(CAUTION_WORDS), id="caution", class_="caution"),
            section("summary", "Summary", paragraph(_summary_words(result, pipes, actions=ranking[1], nodes=nodes), class_="summary")),
            section("totals", "Network totals", _totals(result.totals, result.units)),
            section("map", "Map of the network by worst flag", _map(result, pipes, classes, totals, programme=programme)),
            section("flooding", "Water levels and flooding", flooding_section(result, pipes, nodes)),
            section("flags", "Flags: pipes and length", _flags(totals, len(pipes), result.units)),
            section("part-full", "Load ratio against depth ratio", _part_full(pipes, classes, result.canonical_pipes)),
            section("velocity", "Velocity at design flow", _velocity(pipes, result.rules, result.units)),
            section("candidates", f"Top {CANDIDATE_ROWS} renewal candidates", _candidates(pipes, ranking, id_field=id_field, units=result.units), long=True),
            _programme(result, pipes, programme, id_field=id_field),
            section("findings", "Data findings", _findings(result.findings), long=True),
            section("flows", "Design flows at the outfalls", flows_section(pipes, result.settings.get("flows"), units=result.units), long=True),
            section("rules", "Rules and run", _rules(result, created=created), long=True),
        )
    )
    head = element("head", '<meta charset="utf-8"><meta name="viewport" content="width=device-width, initial-scale=1">' + element("title", "Sewer audit report") + element("style", STYLE_SHEET))
    heading = element("h1", html.escape(f"Sewer audit report: {network_name(result)}"))
    return "<!DOCTYPE html>\n" + element("html", head + element("body", heading + _title_block(result, created=created) + element("main", body)), lang="en")


def network_name(result: AuditResult) -> str:
    """The network's name: ``[output] title`` of the config, else the config file's name, else "network"."""
    title = result.settings.get("title")
    if title:
        return str(title)
    return result.config_path.stem if result.config_path is not None else "network"


def _title_block(result: AuditResult, *, created: datetime) -> str:
    """Network, date, config, tool and design storm, for the top of every printed copy."""
    rainfall = (result.settings.get("flows") or {}).get("rainfall") or {}
    period = rainfall.get("return_period_years")
    storm = f"{period:g}-year return period" if isinstance(period, float | int) and period == period else "none (no storm flow)"
    rows = [
        ("Network", network_name(result)),
        ("Date", created.strftime("%Y-%m-%d %H:%M %Z").strip()),
        ("Config", "(none)" if result.config_path is None else str(result.config_path)),
        ("Tool", f"sewer-audit {__version__}"),
        ("Design storm", storm),
    ]
    items = "".join(element("dt", html.escape(key)) + element("dd", html.escape(value)) for key, value in rows)
    return element("div", element("dl", items), class_="title-block")


def _summary_words(result: AuditResult, pipes: pd.DataFrame, *, actions: np.ndarray, nodes: pd.DataFrame | None) -> str:
    """One paragraph for a manager: the length of pipe per worst severity and what to do first (``actions``: of candidates.csv's
    rows), and how many manholes flood (``nodes``: :func:`node_levels`)."""
    length = numeric(pipes, "length_m")
    severity = text_array(pipes, "severity")
    total, unit = _long(float(np.nansum(length)), result.units)
    parts = []
    for word in ("high", "medium", "low"):
        chosen = severity == word
        amount = _long(float(np.nansum(length[chosen])), result.units)[0] or 0.0
        parts.append(f"{amount:,.2f} {unit} ({plural(int(np.count_nonzero(chosen)), 'pipe')}) of {word} severity")
    verify = int(np.count_nonzero(np.isin(actions, ("verify data first", "verify levels"))))
    inspect = int(np.count_nonzero(actions == "inspect"))
    renew = int(np.count_nonzero(np.isin(actions, ("consider renewal", "relieve downstream"))))
    other = actions.size - verify - inspect - renew
    schemes = 0 if result.schemes is None else len(result.schemes)
    in_schemes = f" ({plural(schemes, 'scheme')} of work)" if schemes else ""
    unevaluated = int(np.count_nonzero(~evaluated(pipes)))
    return (
        f"Of {total or 0.0:,.2f} {unit} of pipe in {plural(len(pipes), 'pipe')}, the worst flag puts "
        + ", ".join(parts[:-1]) + f" and {parts[-1]}. "
        + f"{plural(renew, 'pipe')} {'is a candidate' if renew == 1 else 'are candidates'} for renewal or relief{in_schemes}, {inspect:,} to inspect, "
        + f"{verify:,} {'needs its' if verify == 1 else 'need their'} data verified first and {other:,} {'has' if other == 1 else 'have'} a lesser "
        + f"measure; the hydraulics of {plural(unevaluated, 'pipe')} could not run for want of data."
        + _flooding_words(nodes)
    )


def _flooding_words(nodes: pd.DataFrame | None) -> str:
    if nodes is None:
        return ""
    flooding = int((nodes["state"] == "flooding").sum())
    return f" At the design flows the water comes out of {plural(flooding, 'manhole')} (the grade line reaches the cover)."


def analysis_frame(result: AuditResult) -> pd.DataFrame:
    """The computed pipe columns under their documented names, with the canonical pipe id.

    The ids come from the result's canonical columns where it has them (whatever the user's id
    field is called); an ``id_field`` given to the report still takes precedence.
    """
    pipes = result.pipe_results
    if result.canonical_pipes is not None and "pipe_id" not in pipes.columns:
        pipes = pipes.assign(pipe_id=result.canonical_pipes["pipe_id"].to_numpy(dtype=object))
    if result.pipes is not pipes:
        extra = [name for name in result.pipes.columns if name not in pipes.columns]
        pipes = pd.concat([pipes.reset_index(drop=True), pd.DataFrame(result.pipes[extra]).reset_index(drop=True)], axis=1)
    return pipes


def _long(metres: float | None, units: UnitSystem) -> tuple[float | None, str]:
    """A network length [m] in km (SI) or mi (US), and the unit's name."""
    unit = "mi" if units.name == "us" else "km"
    return (None if metres is None else float(metres) / UNIT_SIZES["length"][unit]), unit


def _totals(totals: Mapping[str, Any], units: UnitSystem) -> str:
    length, unit = _long(totals.get("length_m"), units)
    rows = [
        ("Pipes", cell(totals.get("pipes"))),
        (f"Length of pipe [{unit}]", cell(length, digits=2)),
        ("Manholes", cell(totals.get("manholes"))),
        ("Outfalls", cell(totals.get("outfalls"))),
        ("Separate networks (components)", cell(totals.get("components"))),
        ("Pipes on loops", cell(totals.get("pipes_on_loops"))),
        ("Pipes whose hydraulics could not run", cell(totals.get("pipes_not_evaluated"))),
    ]
    shares = totals.get("missing_share") or {}
    rows += [(f"Pipes missing {name.replace('_', ' ')}", html.escape(percent(float(share)))) for name, share in shares.items()]
    return table(("Quantity", "Value"), rows, numeric=(False, True))


def _map(result: AuditResult, pipes: pd.DataFrame, classes: np.ndarray, totals: pd.DataFrame, *, programme: Programme | None) -> str:
    geometry, metres = metric_geometry(result.pipes, working_crs=result.settings.get("working_crs"))
    marks = _outfall_marks(result, pipes, geometry) + _flooding_marks(result) + _programme_marks(programme, geometry)
    drawing = network_map(geometry, classes, metres=metres, units=result.units, marks=marks)
    counts = class_counts(classes)
    flags_of = pipes_flags(pipes)
    order = {flag: place for place, flag in enumerate(totals["flag"])}
    unevaluated = int(np.count_nonzero(~evaluated(pipes)))
    items = []
    for name, words in MAP_CLASSES.items():
        present = set().union(*flags_of[classes == name]) if counts[name] else set()
        flags = sorted((flag for flag in present if flag in order), key=order.__getitem__)
        if name == "not_evaluated":
            drawn_elsewhere = unevaluated - counts[name]
            more = f"; {plural(drawn_elsewhere, 'more pipe')} drawn by {'its' if drawn_elsewhere == 1 else 'their'} high or medium flag" if drawn_elsewhere else ""
            detail = f" (hydraulics could not run{': ' + ', '.join(flags) if flags else ''}{more})"
        else:
            detail = f" ({', '.join(flags)})" if flags else ""
        swatch = element("span", "", class_="swatch", style=f"background:{CLASS_COLOURS[name]}")
        items.append(element("li", swatch + html.escape(f"{words}: {plural(counts[name], 'pipe')}{detail}"), data_class=name))
    for group in marks:
        swatch = element("span", "", class_="swatch dot", style=f"background:{group.colour}")
        words = {"flooding": _flooding_legend(result),
                 "outfall": f"Outfall: {plural(len(group.labels), 'outfall')}" + ("" if len(group.labels) < OUTFALLS_LABELLED
                            else f", those with the {OUTFALLS_LABELLED} largest design flows"),
                 "programme": "Renewal programme: S1, S2, ... the schemes, 1, 2, ... the riskiest other pipes, as numbered in its tables"}[group.name]  # fmt: skip
        items.append(element("li", swatch + html.escape(words), data_class=group.name))
    note = "North is up (grid north of the map's coordinate system)." + ("" if metres else " The unit of the coordinates is unknown: no scale bar.")
    return drawing + element("ul", "".join(items), class_="legend") + paragraph(note, class_="note")


def _flooding_legend(result: AuditResult) -> str:
    total = int((result.manholes["flood_state"].astype(str) == "flooding").sum()) if result.manholes is not None else 0
    drawn = "" if total <= FLOODING_DRAWN else f", the {FLOODING_DRAWN:,} deepest drawn"
    labelled = "" if total <= FLOODING_LABELLED else f", the {FLOODING_LABELLED} deepest labelled"
    return f"Flooding manhole: {plural(total, 'manhole')}{drawn}{labelled}"


def _outfall_marks(result: AuditResult, pipes: pd.DataFrame, geometry: np.ndarray) -> tuple[MapMarks, ...]:
    """The outfalls with the largest design flows, labelled with their node, at their manhole (else at the end of the pipe into them)."""
    into = outfall_pipes(pipes)
    if not into.size:
        return ()
    flow = pd.to_numeric(pipes["q_design"].iloc[into], errors="coerce").fillna(-1.0).to_numpy(dtype=float)
    node = pipes["to_node_id"].iloc[into].astype(str).to_numpy(dtype=object)
    largest = pd.Series(flow).groupby(node).max().sort_values(ascending=False, kind="stable").index[:OUTFALLS_LABELLED]  # several pipes may end at one
    ends = np.asarray(geometry, dtype=object)[into[first_places(node, largest)]]
    xy = np.full((len(ends), 2), np.nan)
    lines = shapely.get_type_id(ends) == 1
    last = shapely.get_point(ends[lines], -1)
    xy[lines, 0], xy[lines, 1] = shapely.get_x(last), shapely.get_y(last)
    if result.manholes is not None and result.canonical_manholes is not None:
        row = first_places(result.canonical_manholes["manhole_id"].astype(str), largest)
        known = row >= 0
        if known.any():
            points, _ = metric_geometry(result.manholes.iloc[row[known]], working_crs=result.settings.get("working_crs"))
            at = anchor_points(points)
            found = np.isfinite(at).all(axis=1)
            xy[np.flatnonzero(known)[found]] = at[found]
    return (MapMarks(xy, OUTFALL_COLOUR, "outfall", labels=tuple(str(name) for name in largest), radius_px=5.0),)


def _flooding_marks(result: AuditResult) -> tuple[MapMarks, ...]:
    """The flooding manholes as marks on the map, the deepest first: at most ``FLOODING_DRAWN`` drawn and
    ``FLOODING_LABELLED`` labelled with their ids (none when no manhole floods)."""
    manholes = result.manholes
    if manholes is None or "flood_state" not in manholes.columns or result.canonical_manholes is None:
        return ()
    chosen = np.flatnonzero((manholes["flood_state"].astype(str) == "flooding").to_numpy(dtype=bool))
    if not chosen.size:
        return ()
    depth = pd.to_numeric(manholes["flood_depth_m"].iloc[chosen], errors="coerce").fillna(0.0).to_numpy(dtype=float)
    chosen = chosen[np.argsort(-depth, kind="stable")][:FLOODING_DRAWN]
    points, _ = metric_geometry(manholes.iloc[chosen], working_crs=result.settings.get("working_crs"))
    ids = result.canonical_manholes["manhole_id"].astype(str).iloc[chosen[:FLOODING_LABELLED]].to_numpy(dtype=object)
    return (MapMarks(anchor_points(points), FLOOD_COLOUR, "flooding", labels=tuple(ids)),)


def _programme_marks(programme: Programme | None, geometry: np.ndarray) -> tuple[MapMarks, ...]:
    """The numbers of the programme's top schemes and pipes, where the map draws them."""
    if programme is None:
        return ()
    labels = programme_labels(programme, geometry)
    if labels.empty:
        return ()
    return (MapMarks(labels[["x", "y"]].to_numpy(dtype=float), PROGRAMME_COLOUR, "programme", labels=tuple(labels["label"].astype(str)), radius_px=3.5),)


def _programme(result: AuditResult, pipes: pd.DataFrame, programme: Programme | None, *, id_field: str | None) -> str:
    if programme is None:
        return ""
    ids = pipe_labels(pipes, np.arange(len(pipes)), id_field=id_field)
    return programme_section(programme, pipe_ids=ids, units=result.units)


def _flags(totals: pd.DataFrame, pipe_count: int, units: UnitSystem) -> str:
    if totals.empty:
        return paragraph("No pipe raised a flag.")
    rows = [
        (element("code", cell(flag)), cell(severity), cell(int(count)), cell(_long(length, units)[0], digits=2), html.escape(percent(count / max(pipe_count, 1))))
        for flag, severity, count, length in totals[["flag", "severity", "pipes", "length_m"]].itertuples(index=False)
    ]
    headers = ("Flag", "Severity", "Pipes", f"Length [{_long(None, units)[1]}]", "Share of pipes")
    note = paragraph("A pipe with several flags counts once under each.", class_="note")
    return table(headers, rows, numeric=(False, False, True, True, True), id="flag-table") + note + flag_bars(totals)


def _part_full(pipes: pd.DataFrame, classes: np.ndarray, canonical: pd.DataFrame | None) -> str:
    load, depth = numeric(pipes, "load_ratio"), numeric(pipes, "depth_ratio")
    drawn = np.isfinite(load) & np.isfinite(depth)
    if canonical is not None and {"shape", "height", "width"} <= set(canonical.columns):
        rows = np.flatnonzero(drawn)  # the three columns of those rows, not a copy of the whole table
        curves = report_curves(*(canonical[name].to_numpy(dtype=dtype)[rows] for name, dtype in (("shape", object), ("height", float), ("width", float))))
    else:
        curves = report_curves(["circular"], [1.0], [1.0])
    names = list(curves)
    shapes = names[0] if len(names) == 1 else ", ".join(names[:-1]) + " and " + names[-1] if names else "no known"
    words = (
        f"{plural(int(np.count_nonzero(drawn)), 'pipe')} with both ratios known, coloured as on the map, over the part-full curve of "
        f"each shape among them (Manning): {shapes}. A point on the curve flows at normal depth; "
        "surcharged pipes sit at depth ratio 1; load ratios above 1.5 are drawn at the right edge."
    )
    return part_full_chart(load, depth, classes, curves) + paragraph(words, class_="note")


def _velocity(pipes: pd.DataFrame, rules: RuleSettings, units: UnitSystem) -> str:
    velocity = units.convert(numeric(pipes, "v_design"), "velocity")
    unit = units.unit("velocity")
    low, high = (round(float(units.convert(value, "velocity")), 2) for value in (rules.min_velocity, rules.max_velocity))
    band = 0.1 if unit == "m/s" else 0.25
    known = int(np.count_nonzero(np.isfinite(velocity)))
    criterion = CLEANSING_WORDS[rules.self_cleansing].format(fraction=rules.cleansing_fraction, dry=rules.dry_weather)
    shear = f"{float(units.convert(rules.min_shear, 'stress')):.3g} {units.unit('stress')}"
    threshold = f"boundary shear of {shear}" if rules.self_cleansing == "dry_weather_shear" else f"velocity of {low:g} {unit}"
    words = (
        f"{known:,} pipes with a velocity at the design flow, in bands of {band:g} {unit}; the dashed lines are the minimum "
        f"({low:g} {unit}) and maximum ({high:g} {unit}, against scour) velocity of the rules. "
        "Bands outside them are orange; the last band holds every faster pipe. "
        f"Self-cleansing (the silting flag) is judged {criterion} (rules.self_cleansing = {rules.self_cleansing}): "
        f"a pipe silts below a {threshold} there."
    )
    chart = velocity_histogram(velocity, min_velocity=low, max_velocity=high, bin_width=band, unit=unit)
    return chart + paragraph(words, class_="note")


def _candidates(pipes: pd.DataFrame, ranking: tuple[np.ndarray, np.ndarray], *, id_field: str | None, units: UnitSystem) -> str:
    ranked = renewal_candidates(pipes, id_field=id_field, limit=CANDIDATE_ROWS, ranking=ranking)
    if ranked.empty:
        return paragraph("No pipe raised a flag.")
    height = units.convert(ranked["height_mm"].to_numpy(dtype=float) / 1000.0, "size")
    length = units.convert(ranked["length_m"].to_numpy(dtype=float), "length")
    size_digits = 0 if units.unit("size") == "mm" else 1
    rows = [
        (cell(rank), cell(row.pipe), cell(row.action), cell(row.severity), cell(row.load_ratio, digits=2), cell(height[rank - 1], digits=size_digits),
         cell(length[rank - 1], digits=1), cell(row.reasons), cell(row.remedy))
        for rank, row in enumerate(ranked.itertuples(index=False), start=1)
    ]  # fmt: skip
    headers = ("#", "Pipe", "Action", "Severity", "Load ratio", f"Height [{units.unit('size')}]", f"Length [{units.unit('length')}]",
               "Reasons (flags)", "Remedy")  # fmt: skip
    note = paragraph("The first rows of candidates.csv (which also gives each pipe's nodes, risk and length served upstream): the "
                     "renewal programme's pipes ranked by risk (docs/renewal.md), a scheme's pipes together, review candidates, "
                     "whose data must be verified first, after all others.", class_="note")  # fmt: skip
    return table(headers, rows, numeric=(True, False, False, False, True, True, True, False, False), id="candidate-table") + note


def _findings(findings: pd.DataFrame) -> str:
    digest = finding_digest(findings)
    if digest.empty:
        return paragraph("No data finding.")
    rows = [
        (element("code", cell(code)), cell(layers), cell(int(count)), cell(", ".join(examples)))
        for code, layers, count, examples in digest[["code", "layers", "count", "examples"]].itertuples(index=False)
    ]
    return table(("Finding", "Layer", "Count", "Examples (up to 3 features)"), rows, numeric=(False, False, True, False), id="finding-table")


def _rule_unit(key: str) -> str:
    """The unit a ``[rules]`` key names at its end (``min_velocity_ft_s`` -> ft/s); "-" for none."""
    for ending, unit in (("_m_s", "m/s"), ("_ft_s", "ft/s"), ("_pa", "Pa"), ("_psf", "lb/ft2"), ("_mm", "mm"), ("_in", "in"), ("_m", "m"), ("_ft", "ft")):
        if key.endswith(ending):
            return unit
    return "m/m" if key.startswith("min_slope") else "-"


def _rule_value(name: str, value: object) -> str:
    if isinstance(value, DiameterTable):
        size = "in" if name.endswith(("_ft", "_by_in")) else "mm"
        return "; ".join(f"from {start:g} {size}: {row:g}" if np.isfinite(row) else f"from {start:g} {size}: no limit" for start, row in zip(value.from_diameter_mm, value.values, strict=True))
    if value is None:
        return "not checked"
    if isinstance(value, Mapping):
        return ", ".join(f"{flag} {word}" for flag, word in value.items())
    return f"{value:g}" if isinstance(value, float) else str(value)


#: The [hydraulics] settings each friction formula does not use.
_UNUSED_BY_FORMULA: dict[str, tuple[str, ...]] = {"manning": ("ks_mm", "water_temp_c"), "colebrook-white": ("manning_n",)}


def _rules(result: AuditResult, *, created: datetime) -> str:
    rules = [(element("code", cell(key)), cell(_rule_unit(key)), cell(_rule_value(key, value))) for key, value in as_table(result.rules, result.units).items()]
    settings = [
        (element("code", cell(f"{group}.{key}")), "", cell(value))
        for group in ("hydraulics", "network", "grade_line")
        for key, value in (result.settings.get(group) or {}).items()
        if not (group == "hydraulics" and key in _UNUSED_BY_FORMULA.get(str((result.settings.get(group) or {}).get("formula")), ()))
    ]
    run = [
        ("Tool", cell(f"sewer-audit {__version__}")),
        ("Config", cell("(none)" if result.config_path is None else str(result.config_path))),
        ("Inputs", cell(", ".join(str(path) for path in result.inputs) or "(none)")),
        ("Run time (report written)", cell(created.strftime("%Y-%m-%d %H:%M:%S %Z").strip())),
    ]
    return table(("Rule", "Unit", "Value"), rules + settings, id="rule-table") + table(("Run", ""), run, id="run-table")
