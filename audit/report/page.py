"""report.html: one self-contained page, its sections in a fixed order.

Order: caution, network totals, map, flags, load against depth ratio, velocities, renewal
candidates, data findings, rules and run. Every user string (ids, reasons, paths, finding codes)
is escaped; the page has inline CSS and inline SVG only: no script, no font, no outside address.
"""

from __future__ import annotations

import dataclasses
import html
from collections.abc import Mapping
from datetime import datetime
from typing import Any

import numpy as np
import pandas as pd

from audit.about import __version__
from audit.report.charts import flag_bars, part_full_chart, velocity_histogram
from audit.report.curves import report_curves
from audit.report.flows import flows_section
from audit.report.html import cell, paragraph, percent, section, table
from audit.report.map import CLASS_COLOURS, metric_geometry, network_map
from audit.report.svg import element
from audit.report.tables import (
    MAP_CLASSES,
    class_counts,
    finding_digest,
    flag_totals,
    map_classes,
    numeric,
    renewal_candidates,
)
from audit.result import AuditResult
from audit.rules import CLEANSING_WORDS, DiameterTable, RuleSettings

CAUTION_WORDS = (
    "This report is a screening aid. It applies uniform-flow checks to every pipe against design "
    "rules that the user can configure. It does not replace a calibrated hydraulic model of the "
    "network. Local codes and the judgement of a licensed engineer govern every decision taken on it."
)

#: Candidates listed in the report.
CANDIDATE_ROWS = 20

_CSS = """
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
.note{color:#555;font-size:.85em}
#candidate-table td:nth-child(2),#candidate-table td:nth-child(3){white-space:nowrap}
"""


def render_page(result: AuditResult, *, id_field: str | None, created: datetime) -> str:
    """The whole report as one HTML string."""
    pipes = analysis_frame(result)
    classes = map_classes(pipes)
    totals = flag_totals(pipes, severity=result.rules.severity)
    body = "".join(
        (
            element("section", element("h2", "Caution") + paragraph(CAUTION_WORDS), id="caution", class_="caution"),
            section("totals", "Network totals", _totals(result.totals)),
            section("map", "Map of the network by worst flag", _map(result, classes, totals)),
            section("flags", "Flags: pipes and length", _flags(totals, len(pipes))),
            section("part-full", "Load ratio against depth ratio", _part_full(pipes, classes)),
            section("velocity", "Velocity at design flow", _velocity(pipes, result.rules)),
            section("candidates", f"Top {CANDIDATE_ROWS} renewal candidates", _candidates(pipes, id_field=id_field)),
            section("findings", "Data findings", _findings(result.findings)),
            section("flows", "Design flows at the outfalls", flows_section(pipes, result.settings.get("flows"))),
            section("rules", "Rules and run", _rules(result, created=created)),
        )
    )
    head = element("head", '<meta charset="utf-8"><meta name="viewport" content="width=device-width, initial-scale=1">' + element("title", "Sewer audit report") + element("style", _CSS))
    return "<!DOCTYPE html>\n" + element("html", head + element("body", element("h1", "Sewer audit report") + element("main", body)), lang="en")


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


def _totals(totals: Mapping[str, Any]) -> str:
    length = totals.get("length_m")
    rows = [
        ("Pipes", cell(totals.get("pipes"))),
        ("Length of pipe [km]", cell(None if length is None else float(length) / 1000.0, digits=2)),
        ("Manholes", cell(totals.get("manholes"))),
        ("Outfalls", cell(totals.get("outfalls"))),
        ("Separate networks (components)", cell(totals.get("components"))),
        ("Pipes on loops", cell(totals.get("pipes_on_loops"))),
        ("Pipes whose hydraulics could not run", cell(totals.get("pipes_not_evaluated"))),
    ]
    shares = totals.get("missing_share") or {}
    rows += [(f"Pipes missing {name.replace('_', ' ')}", html.escape(percent(float(share)))) for name, share in shares.items()]
    return table(("Quantity", "Value"), rows, numeric=(False, True))


def _map(result: AuditResult, classes: np.ndarray, totals: pd.DataFrame) -> str:
    geometry, metres = metric_geometry(result.pipes, working_crs=result.settings.get("working_crs"))
    drawing = network_map(geometry, classes, metres=metres)
    counts = class_counts(classes)
    items = []
    for name, words in MAP_CLASSES.items():
        flags = totals.loc[totals["severity"] == name, "flag"].tolist()
        detail = f" ({', '.join(flags)})" if flags else (" (hydraulics could not run)" if name == "not_evaluated" else "")
        swatch = element("span", "", class_="swatch", style=f"background:{CLASS_COLOURS[name]}")
        items.append(element("li", swatch + html.escape(f"{words}: {counts[name]:,} pipes{detail}"), data_class=name))
    note = "North is up (grid north of the map's coordinate system)." + ("" if metres else " The unit of the coordinates is unknown: no scale bar.")
    return drawing + element("ul", "".join(items), class_="legend") + paragraph(note, class_="note")


def _flags(totals: pd.DataFrame, pipe_count: int) -> str:
    if totals.empty:
        return paragraph("No pipe raised a flag.")
    rows = [
        (element("code", cell(flag)), cell(severity), cell(int(count)), cell(float(length) / 1000.0, digits=2), html.escape(percent(count / max(pipe_count, 1))))
        for flag, severity, count, length in totals[["flag", "severity", "pipes", "length_m"]].itertuples(index=False)
    ]
    headers = ("Flag", "Severity", "Pipes", "Length [km]", "Share of pipes")
    note = paragraph("A pipe with several flags counts once under each.", class_="note")
    return table(headers, rows, numeric=(False, False, True, True, True), id="flag-table") + note + flag_bars(totals)


def _part_full(pipes: pd.DataFrame, classes: np.ndarray) -> str:
    load, depth = numeric(pipes, "load_ratio"), numeric(pipes, "depth_ratio")
    drawn = int(np.count_nonzero(np.isfinite(load) & np.isfinite(depth)))
    words = (
        f"{drawn:,} pipes with both ratios known, coloured as on the map, over the part-full curve of the "
        "circular and the egg-shaped section (Manning). A point on the curve flows at normal depth; "
        "surcharged pipes sit at depth ratio 1; load ratios above 1.5 are drawn at the right edge."
    )
    return part_full_chart(load, depth, classes, report_curves()) + paragraph(words, class_="note")


def _velocity(pipes: pd.DataFrame, rules: RuleSettings) -> str:
    velocity = numeric(pipes, "v_design")
    known = int(np.count_nonzero(np.isfinite(velocity)))
    criterion = CLEANSING_WORDS[rules.self_cleansing].format(fraction=rules.cleansing_fraction, dry=rules.dry_weather)
    threshold = f"boundary shear of {rules.min_shear:g} Pa" if rules.self_cleansing == "dry_weather_shear" else f"velocity of {rules.min_velocity:g} m/s"
    words = (
        f"{known:,} pipes with a velocity at the design flow, in bands of 0.1 m/s; the dashed lines are the minimum "
        f"({rules.min_velocity:g} m/s) and maximum ({rules.max_velocity:g} m/s, against scour) velocity of the rules. "
        "Bands outside them are orange; the last band holds every faster pipe. "
        f"Self-cleansing (the silting flag) is judged {criterion} (rules.self_cleansing = {rules.self_cleansing}): "
        f"a pipe silts below a {threshold} there."
    )
    return velocity_histogram(velocity, min_velocity=rules.min_velocity, max_velocity=rules.max_velocity) + paragraph(words, class_="note")


def _candidates(pipes: pd.DataFrame, *, id_field: str | None) -> str:
    ranked = renewal_candidates(pipes, id_field=id_field, limit=CANDIDATE_ROWS)
    if ranked.empty:
        return paragraph("No pipe raised a flag.")
    rows = [
        (cell(rank), cell(row.pipe), cell(row.from_to), cell(row.severity), cell(row.load_ratio, digits=2), cell(row.height_mm, digits=0),
         cell(row.length_m, digits=1), cell(row.upstream_length_m, digits=0), cell(row.reasons))
        for rank, row in enumerate(ranked.itertuples(index=False), start=1)
    ]  # fmt: skip
    headers = ("#", "Pipe", "From \u2192 to", "Severity", "Load ratio", "Height [mm]", "Length [m]", "Upstream [m]", "Reasons")
    note = paragraph("Ranked by worst severity, then load ratio, then length of network upstream.", class_="note")
    return table(headers, rows, numeric=(True, False, False, False, True, True, True, True, False), id="candidate-table") + note


def _findings(findings: pd.DataFrame) -> str:
    digest = finding_digest(findings)
    if digest.empty:
        return paragraph("No data finding.")
    rows = [
        (element("code", cell(code)), cell(layers), cell(int(count)), cell(", ".join(examples)))
        for code, layers, count, examples in digest[["code", "layers", "count", "examples"]].itertuples(index=False)
    ]
    return table(("Finding", "Layer", "Count", "Examples (up to 3 features)"), rows, numeric=(False, False, True, False), id="finding-table")


_RULE_UNITS = {
    "max_load_ratio": "-", "near_capacity_ratio": "-", "min_velocity": "m/s", "min_shear": "Pa",
    "max_velocity": "m/s", "min_slope": "m/m", "min_diameter_mm": "mm", "min_cover_m": "m", "max_spacing_m": "m",
}  # fmt: skip


def _rule_value(name: str, value: object) -> str:
    if isinstance(value, DiameterTable):
        return "; ".join(f"from {size:g} mm: {row:g}" if np.isfinite(row) else f"from {size:g} mm: no limit" for size, row in zip(value.from_diameter_mm, value.values, strict=True))
    if value is None:
        return "only a zero or negative slope is flagged" if name == "min_slope" else "not checked"
    if isinstance(value, Mapping):
        return ", ".join(f"{flag} {word}" for flag, word in value.items())
    return f"{value:g}" if isinstance(value, float) else str(value)


def _rules(result: AuditResult, *, created: datetime) -> str:
    rules = [(element("code", cell(item.name)), cell(_RULE_UNITS.get(item.name, "")), cell(_rule_value(item.name, getattr(result.rules, item.name)))) for item in dataclasses.fields(result.rules)]
    settings = [
        (element("code", cell(f"{group}.{key}")), "", cell(value))
        for group in ("hydraulics", "network")
        for key, value in (result.settings.get(group) or {}).items()
    ]
    run = [
        ("Tool", cell(f"sewer-audit {__version__}")),
        ("Config", cell("(none)" if result.config_path is None else str(result.config_path))),
        ("Inputs", cell(", ".join(str(path) for path in result.inputs) or "(none)")),
        ("Run time (report written)", cell(created.strftime("%Y-%m-%d %H:%M:%S %Z").strip())),
    ]
    return table(("Rule", "Unit", "Value"), rules + settings, id="rule-table") + table(("Run", ""), run, id="run-table")
