"""The report's section on the hydraulic grade line: flooding manholes and a long section.

The manholes whose water level at the design flows reaches the cover are listed, deepest first,
with the level the grade line needs there; the long section follows the pipes from the worst of
them (or, with none flooding, from the manhole with the least freeboard) down to its outfall.
"""

from __future__ import annotations

from dataclasses import replace

import pandas as pd

from audit.report.html import cell, paragraph, plural, table
from audit.report.long_section import Steps, downstream_path, downstream_walk, long_section, next_pipes, section_data
from audit.result import AuditResult
from audit.units import UnitSystem

#: Flooding manholes listed in the report.
FLOODING_ROWS = 20


def node_levels(result: AuditResult) -> pd.DataFrame | None:
    """Per manhole id: cover, water level, freeboard, flood depth, flood state [m] (SI); None without a manhole layer."""
    manholes = result.manholes
    if manholes is None or "flood_state" not in manholes.columns or result.canonical_manholes is None:
        return None
    ids = pd.Index(result.canonical_manholes["manhole_id"].astype(str))
    names = {"rim_m": "rim", "water_level_m": "level", "freeboard_m": "freeboard", "flood_depth_m": "flood_depth"}
    frame = pd.DataFrame({short: pd.to_numeric(manholes[name], errors="coerce").to_numpy(dtype=float) for name, short in names.items()}, index=ids)
    frame["state"] = manholes["flood_state"].astype(str).to_numpy(dtype=object)
    return frame[~frame.index.duplicated()]


def flooding_section(result: AuditResult, pipes: pd.DataFrame, nodes: pd.DataFrame | None) -> str:
    """Counts per flood state, the flooding manholes and the long section from the worst of them (``nodes``: :func:`node_levels`)."""
    if nodes is None:
        return paragraph("No manhole layer: the grade line runs through the pipes, but no cover level tells where the water would come out.")
    units = result.units
    counts = nodes["state"].value_counts()
    words = (
        f"At the design flows the water comes out of {plural(int(counts.get('flooding', 0)), 'manhole')}; it stands above "
        f"the soffit of the pipe leaving {plural(int(counts.get('surcharged', 0)), 'more manhole')}; "
        f"{plural(int(counts.get('not_evaluated', 0)), 'manhole')} could not be judged (no cover level, no evaluated pipe, or "
        "upstream of a break in the grade line). "
        + _settings_words(result)
    )
    flooding = nodes[nodes["state"] == "flooding"].sort_values("flood_depth", ascending=False)
    parts = [paragraph(words)]
    if not flooding.empty:
        parts.append(_flooding_table(flooding.head(FLOODING_ROWS), units))
    steps = next_pipes(pipes)
    start = _section_start(flooding, steps) if not flooding.empty else _least_freeboard(nodes)
    if start is not None:
        parts.append(_section(pipes, nodes, downstream_path(start, steps), start, units, flooding=not flooding.empty))
    return "".join(parts)


def _settings_words(result: AuditResult) -> str:
    settings = result.settings.get("grade_line") or {}
    outfall = settings.get("outfall", "free")
    boundary = f"a fixed level {outfall:g}" if isinstance(outfall, float | int) else f"a {outfall} outfall"
    straight = settings.get("manhole_loss", 0.15)
    bend = settings.get("bend_loss", straight)
    loss = (f"a loss of {straight:g} v\u00b2/2g at every manhole" if bend == straight else
            f"a loss of k v\u00b2/2g at every manhole, k from {straight:g} where the flow goes straight through to {bend:g} where it turns a "
            "right angle or starts from rest (a head of run, a drop)")
    return f"The grade line starts at every outfall from {boundary} (unless set per outfall) and adds {loss} ([grade_line], docs/methods.md)."  # fmt: skip


def _section_start(flooding: pd.DataFrame, steps: Steps) -> str:
    """The flooding manhole whose path to the outfall passes the most flooding manholes (the deepest first on a tie).

    Starting at the top of a run of flooding manholes shows them all in one drawing. The
    ``FLOODING_ROWS`` deepest are tried: one walk down per candidate, not per pipe.
    """
    flooded = set(flooding.index)
    best, most = str(flooding.index[0]), 0
    for node in flooding.index[:FLOODING_ROWS]:
        passed = 1 + sum(below in flooded for _, below in downstream_walk(str(node), steps))
        if passed > most:
            best, most = str(node), passed
    return best


def _least_freeboard(nodes: pd.DataFrame) -> str | None:
    known = nodes["freeboard"].dropna()
    return None if known.empty else str(known.idxmin())


def _flooding_table(flooding: pd.DataFrame, units: UnitSystem) -> str:
    unit = units.unit("length")
    digits = 2 if unit == "m" else 1
    shown = {name: units.convert(flooding[name].to_numpy(dtype=float), "length") for name in ("rim", "level", "flood_depth")}
    rows = [
        (cell(node), cell(float(shown["rim"][row]), digits=digits), cell(float(shown["level"][row]), digits=digits),
         cell(float(shown["flood_depth"][row]), digits=digits))
        for row, node in enumerate(flooding.index)
    ]  # fmt: skip
    headers = ("Manhole", f"Cover [{unit}]", f"Grade line needs [{unit}]", f"Head above the cover [{unit}]")
    note = paragraph("The level the grade line needs at a flooding manhole to push the design flow through, and how far that is "
                     "above the cover: a measure of how badly the pipes are overloaded, not a depth of water on the street. The "
                     "water spills at the cover, so the level carried further upstream is the cover's; the volume and depth of "
                     "flooding are not estimated.", class_="note")  # fmt: skip
    return table(headers, rows, numeric=(False, True, True, True), id="flooding-table") + note


def _section(pipes: pd.DataFrame, nodes: pd.DataFrame, path: list[int], start: str, units: UnitSystem, *, flooding: bool) -> str:
    if not path:
        return ""
    data = section_data(pipes, path, nodes["rim"], nodes["level"])
    factor = float(units.convert(1.0, "length"))
    scaled = replace(data, **{name: getattr(data, name) * factor for name in (
        "chainage", "invert_up", "invert_down", "crown_up", "crown_down", "level_up", "level_down", "rim", "node_level")})  # fmt: skip
    why = "the top of the longest run of flooding manholes" if flooding else "the manhole with the least freeboard (none floods)"
    words = (f"Long section from {start}, {why}, down to {data.node_ids[-1]}: {plural(len(path), 'pipe')}, taking the larger flow "
             "at a split. Where the water line meets the ground the manhole floods.")  # fmt: skip
    return long_section(scaled, title=f"Long section from {start}", unit=units.unit("length")) + paragraph(words, class_="note")
