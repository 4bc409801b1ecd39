"""compare.html: one short self-contained page, in the report's style, of what moved between two audits.

Order: the settings-differ warning (only when the audits' settings or tool versions differ), the
caution, notes on how the audits were put side by side, the counts of change, a map of what got
worse and what got better, the flags of pipes and manholes and the pipes' severities before and
after, the manholes that started or stopped flooding, the pipes that got worse and better, and
the two audits. The page reuses the report's style sheet, tables, escaping and
map (:mod:`audit.report`): inline CSS and SVG only, no script, no font, no outside address, every
user string escaped.

The map is the report's network map (``audit.report.map.network_map``) drawn with this page's
classes standing in for the report's (``STAND_INS``) and then given this page's colours.
"""

from __future__ import annotations

import html
import re
from datetime import datetime

import geopandas as gpd
import numpy as np
import pandas as pd
import shapely

from audit.about import CAUTION, TOOL, __version__
from audit.compare.comparison import Comparison
from audit.compare.differences import ADDED, CHANGED, FLOODING, REMOVED, UNCHANGED, severity_rank
from audit.compare.summary import warning
from audit.compare.totals import OUTCOMES, change_counts
from audit.report import STYLE_SHEET as REPORT_CSS  # the report's style sheet, so both pages look alike
from audit.report.html import cell, paragraph, section, table
from audit.report.map import CLASS_COLOURS, metric_geometry, network_map
from audit.report.svg import element
from audit.result import output_name

#: Map classes, from the most to the least urgent, with the legend's words and colours.
MAP_CLASSES: dict[str, tuple[str, str]] = {
    "worse": ("Worse: severity up, or flags gained and none cleared", "#c0392b"),
    "better": ("Better: severity down, or flags cleared and none gained", "#1e8449"),
    "added": ("Added", "#2471a3"),
    "removed": ("Removed (drawn where it was)", "#6c3483"),
    "other": ("Unchanged, or changed with no flag moved", CLASS_COLOURS["none"]),
}

#: The report's map class each of this page's classes is drawn as (their order and widths).
STAND_INS = {"worse": "high", "better": "medium", "added": "not_evaluated", "removed": "low", "other": "none"}

#: Pipes listed in each of the tables of pipes that got worse and better.
LISTED = 20


def render_comparison_page(comparison: Comparison, *, created: datetime) -> str:
    """The whole page as one HTML string."""
    words = warning(comparison)
    parts = [element("section", element("h2", "Settings differ") + paragraph(words) + _settings(comparison), id="settings-differ", class_="caution")] if words else []
    parts.append(element("section", element("h2", "Caution") + paragraph(CAUTION), id="caution", class_="caution"))
    if comparison.notes:
        parts.append(section("notes", "How the audits were put side by side", element("ul", "".join(element("li", html.escape(note)) for note in comparison.notes))))
    parts += [
        section("changes", "What changed", _changes(comparison)),
        section("map", "Map of what got worse and what got better", _map(comparison)),
        section("flags", "Flags before and after", _flags(comparison)),
        section("severity", "Pipes by worst severity", _severity(comparison)),
        section("flooding", "Manholes that started or stopped flooding", _flooding(comparison)),
        section("worse", "Pipes that got worse", _pipes(comparison, "worse")),
        section("better", "Pipes that got better", _pipes(comparison, "better")),
        section("audits", "The two audits", _audits(comparison, created)),
    ]
    head = element("head", '<meta charset="utf-8"><meta name="viewport" content="width=device-width, initial-scale=1">'
                   + element("title", "Sewer audit comparison") + element("style", REPORT_CSS))  # fmt: skip
    return "<!DOCTYPE html>\n" + element("html", head + element("body", element("h1", "Sewer audit comparison") + element("main", "".join(parts))), lang="en")


def _settings(comparison: Comparison) -> str:
    rows = [(element("code", cell(item["key"])), cell(_value(item["old"])), cell(_value(item["new"]))) for item in comparison.settings_differ]
    return table(("Setting", comparison.old.label, comparison.new.label), rows, id="settings-table")


def _value(value: object) -> str:
    return "(none)" if value is None else str(value)


def _changes(comparison: Comparison) -> str:
    headers = ("Layer", "Added", "Removed", "Changed", "Unchanged", *(word.capitalize() for word in OUTCOMES))
    rows = []
    for layer in comparison.layers():
        counts = change_counts(layer.table)
        rows.append((cell(layer.kind.name), *(cell(counts[word]) for word in (ADDED, REMOVED, CHANGED, UNCHANGED)),
                     *(cell(counts.get(word)) for word in OUTCOMES)))  # fmt: skip
    note = paragraph("A feature is changed when a register field or the geometry of its ends changed, or its flags, severity or flood "
                     "state changed; a number that moved alone (a water level, a load ratio) leaves it unchanged and is listed in "
                     "changes.csv. Worse and better count the features whose flags moved (docs/compare.md).", class_="note")  # fmt: skip
    return table(headers, rows, numeric=(False, *([True] * (len(headers) - 1))), id="change-table") + note


def map_classes(frame: pd.DataFrame) -> np.ndarray:
    """This page's map class of every row of the pipes' change table."""
    change, outcome = frame["change"].to_numpy(dtype=object), frame["outcome"].to_numpy(dtype=object)
    return np.select([outcome == "worse", outcome == "better", change == ADDED, change == REMOVED], ["worse", "better", "added", "removed"], "other").astype(object)


def _map(comparison: Comparison) -> str:
    pipes = comparison.pipes
    classes = map_classes(pipes.table)
    shapes = shapely.from_wkb(pipes.wkb.to_numpy(zero_copy_only=False), on_invalid="ignore")
    layer = gpd.GeoDataFrame(geometry=gpd.GeoSeries(shapes, crs=pipes.crs))
    geometry, metres = metric_geometry(layer, working_crs=comparison.new.working_crs())
    drawing = network_map(geometry, np.array([STAND_INS[name] for name in classes], dtype=object) if classes.size else classes,
                          metres=metres, units=comparison.old.units)  # fmt: skip
    for ours, theirs in STAND_INS.items():
        drawing = drawing.replace(f'stroke="{CLASS_COLOURS[theirs]}"', f'stroke="{MAP_CLASSES[ours][1]}"')
        drawing = drawing.replace(f'data-class="{theirs}"', f'data-class="{ours}"')
    drawing = re.sub("<title>[^<]*</title>", "<title>Map of the pipes coloured by what moved between the two audits</title>", drawing, count=1)
    counts = {name: int(np.count_nonzero(classes == name)) for name in MAP_CLASSES}
    items = [element("li", element("span", "", class_="swatch", style=f"background:{colour}") + html.escape(f"{words} ({counts[name]:,})"), data_class=name)
             for name, (words, colour) in MAP_CLASSES.items()]  # fmt: skip
    note = (f"{comparison.new.label}'s pipes where they are now, removed pipes where they were. North is up (grid north of the map's "
            "coordinate system)." + ("" if metres else " The unit of the coordinates is unknown: no scale bar."))  # fmt: skip
    return drawing + element("ul", "".join(items), class_="legend") + paragraph(note, class_="note")


def _flags(comparison: Comparison) -> str:
    flags = comparison.flags
    unit = comparison.old.units.suffix("length")
    old, new = comparison.old.label, comparison.new.label
    rows = [
        (element("code", cell(code)), cell(row["severity_new"] or row["severity_old"]), cell(int(row["pipes_old"])), cell(int(row["pipes_new"])),
         cell(int(row["gained"])), cell(int(row["cleared"])), cell(float(row[f"length_{unit}_old"]), digits=1), cell(float(row[f"length_{unit}_new"]), digits=1))
        for code, row in flags.iterrows()
    ]  # fmt: skip
    unit_words = comparison.old.units.unit("length")
    headers = ("Flag", "Severity", f"Pipes {old}", f"Pipes {new}", "Gained", "Cleared", f"Length {old} [{unit_words}]", f"Length {new} [{unit_words}]")
    note = paragraph("Gained counts the features that carry the flag now and did not before (an added one gains all its flags); "
                     "cleared, the mirror (a removed one clears all of its).", class_="note")  # fmt: skip
    pipes = table(headers, rows, numeric=(False, False, True, True, True, True, True, True), id="flag-table")
    if comparison.manhole_flags is None:
        return pipes + note
    manhole_rows = [(element("code", cell(code)), cell(row["severity_new"] or row["severity_old"]), cell(int(row["manholes_old"])),
                     cell(int(row["manholes_new"])), cell(int(row["gained"])), cell(int(row["cleared"])))
                    for code, row in comparison.manhole_flags.iterrows()]  # fmt: skip
    manhole_headers = ("Manhole flag", "Severity", f"Manholes {old}", f"Manholes {new}", "Gained", "Cleared")
    return pipes + table(manhole_headers, manhole_rows, numeric=(False, False, True, True, True, True), id="manhole-flag-table") + note


def _severity(comparison: Comparison) -> str:
    counts = comparison.severity
    rows = [(cell(word), cell(value["old"]), cell(value["new"]), cell(value["new"] - value["old"])) for word, value in counts.items()]
    return table(("Worst severity", comparison.old.label, comparison.new.label, "Change"), rows, numeric=(False, True, True, True), id="severity-table")


def _pipes(comparison: Comparison, outcome: str) -> str:
    frame = comparison.pipes.table
    chosen = frame[frame["outcome"] == outcome]
    if chosen.empty:
        return paragraph(f"No pipe got {outcome}.")
    load = next((name for name in frame.columns if name.startswith("load_ratio") and name.endswith("_new")), None)
    before, after = (severity_rank(chosen[name].to_numpy(dtype=object)) for name in ("severity_old", "severity_new"))
    first = [after, before] if outcome == "worse" else [before, after]  # the worst now, or the worst cleared, first
    ratio = pd.to_numeric(chosen[load], errors="coerce").to_numpy(dtype=float, na_value=np.nan) if load else np.zeros(len(chosen))
    keys = [np.nan_to_num(-ratio, nan=np.inf), -first[1], -first[0]]  # np.lexsort: the last key sorts first
    listed = chosen.iloc[np.lexsort(keys)[:LISTED]]
    rows = [
        (cell(row.id_new if row.id_new is not None else row.id_old), cell(f"{row.severity_old or 'none'} \u2192 {row.severity_new or 'none'}"),
         cell(row.flags_gained), cell(row.flags_cleared), cell(getattr(row, "load_ratio_old", None), digits=2),
         cell(getattr(row, "load_ratio_new", None), digits=2), cell(row.fields_changed))
        for row in listed.itertuples(index=False)
    ]  # fmt: skip
    headers = ("Pipe", "Severity", "Flags gained", "Flags cleared", "Load ratio before", "Load ratio after", "Register fields changed")
    more = f" The first {LISTED} of {len(chosen):,}; changes.csv lists them all." if len(chosen) > LISTED else ""
    order = "severity now, then severity before" if outcome == "worse" else "severity before, then severity now"
    note = paragraph(f"Ranked by {order}, then load ratio now (highest first).{more}", class_="note")
    return table(headers, rows, numeric=(False, False, False, False, True, True, False), id=f"{outcome}-table") + note


def flood_moves(frame: pd.DataFrame) -> np.ndarray:
    """Per row of the manholes' change table: ``started`` (flooding now, not before), ``stopped`` (the reverse) or "" (neither, or not matched)."""
    if "flood_state_old" not in frame:
        return np.full(len(frame), "", dtype=object)
    matched = frame["change"].isin([CHANGED, UNCHANGED]).to_numpy(dtype=bool)
    before, after = ((frame[f"flood_state_{side}"].astype("string") == FLOODING).fillna(False).to_numpy(dtype=bool) for side in ("old", "new"))
    return np.select([matched & after & ~before, matched & before & ~after], ["started", "stopped"], "").astype(object)


def _flooding(comparison: Comparison) -> str:
    manholes = comparison.manholes
    if manholes is None or "flood_state_old" not in manholes.table:
        return paragraph("The audits do not both give the manholes a flood state (an audit made before the hydraulic grade line).")
    frame = manholes.table
    moves = flood_moves(frame)
    chosen = frame[moves != ""].assign(move=moves[moves != ""])
    if chosen.empty:
        return paragraph("No manhole started or stopped flooding.")
    units = comparison.old.units
    level, freeboard = output_name("water_level_m", units), output_name("freeboard_m", units)
    listed = chosen.iloc[np.argsort(chosen["move"].to_numpy(dtype=object) != "started", kind="stable")[:LISTED]]  # those that started first
    digits = 2 if units.unit("length") == "m" else 1
    rows = [
        (cell(row["id_new"] if pd.notna(row["id_new"]) else row["id_old"]), cell(row["move"]), cell(row["flood_state_old"]), cell(row["flood_state_new"]),
         cell(row.get(f"{level}_old"), digits=digits), cell(row.get(f"{level}_new"), digits=digits), cell(row.get(f"{freeboard}_new"), digits=digits),
         cell(row["fields_changed"]))
        for _, row in listed.iterrows()
    ]  # fmt: skip
    old, new, unit = comparison.old.label, comparison.new.label, units.unit("length")
    headers = ("Manhole", "Flooding", f"Flood state {old}", f"Flood state {new}", f"Water level {old} [{unit}]", f"Water level {new} [{unit}]",
               f"Freeboard {new} [{unit}]", "Register fields changed")  # fmt: skip
    started = int(np.count_nonzero(moves == "started"))
    more = f" The first {LISTED} of {len(chosen):,}; changes.csv lists them all." if len(chosen) > LISTED else ""
    note = paragraph(f"{started:,} started and {len(chosen) - started:,} stopped flooding: the water level at the design flows reaches the "
                     f"cover (less the freeboard) in one audit and not in the other. The freeboard is the cover less the water level, "
                     f"negative where the water stands above the cover. Added and removed manholes are in changes.csv.{more}", class_="note")  # fmt: skip
    return table(headers, rows, numeric=(False, False, False, False, True, True, True, False), id="flooding-table") + note


def _audits(comparison: Comparison, created: datetime) -> str:
    rows = []
    for audit in (comparison.old, comparison.new):
        summary = audit.summary
        rows.append((cell(audit.label), cell(str(audit.folder)), cell(summary.get("version")), cell(summary.get("created_utc")),
                     cell(audit.units.name.upper()), cell(summary.get("config") or "(none)")))  # fmt: skip
    run = table(("Compare", ""), [("Tool", cell(f"{TOOL} {__version__}")), ("Written", cell(created.strftime("%Y-%m-%d %H:%M:%S %Z").strip())),
                                  ("Matching tolerance", cell(f"{comparison.tolerance:g} {comparison.old.units.unit('length')}"))], id="run-table")  # fmt: skip
    return table(("Audit", "Folder", "Version", "Created (UTC)", "Units", "Config"), rows, id="audit-table") + run
