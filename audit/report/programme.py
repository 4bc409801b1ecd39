"""The report's "programme" section: schemes of work, the risk matrix and the riskiest pipes.

The schemes and the pipes of the two tables carry numbers (``S1``, ``S2``, ... and ``1``, ``2``,
...) that :func:`programme_labels` places on the map (:func:`label_marks` draws them), so the
tables and the map can be read together. The risk matrix counts the pipes in each cell of
likelihood (rows, 5 at the top) against consequence (columns), coloured by the cell's risk.
Every user string is escaped; the drawing is inline SVG.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
from numpy.typing import NDArray

from audit.renewal import Programme
from audit.report.html import cell, paragraph, section, table
from audit.report.map import anchor_points
from audit.report.svg import element, label, rect, svg
from audit.report.tables import text_array, texts
from audit.result import AuditResult
from audit.units import UnitSystem

#: Schemes and pipes listed (and numbered on the map).
SCHEME_ROWS = 10
PIPE_ROWS = 10

#: Cell colours of the risk matrix by risk band, from the gravest (common practice, no source).
RISK_BANDS: tuple[tuple[float, str, str], ...] = (
    (15.0, "#c0392b", "high (15 to 25)"),
    (8.0, "#e67e22", "medium (8 to 14)"),
    (4.0, "#d4ac0d", "low (4 to 7)"),
    (1.0, "#9bbf85", "very low (1 to 3)"),
)

SCREENING_WORDS = (
    "Screening estimates: new sizes and slopes are for uniform flow at the design flow and the present slope, costs come from "
    "the unit costs in [renewal], and likelihood and consequence are 1 to 5 scores from the bands in [renewal]. Verify the "
    "survey and design every scheme before any works."
)

_CELL_PX = 64.0


def risk_colour(risk: float) -> str:
    """The colour of a cell of the matrix by its risk (likelihood x consequence)."""
    return next(colour for lowest, colour, _ in RISK_BANDS if risk >= lowest)


def risk_matrix(likelihood: NDArray[np.float64], consequence: NDArray[np.float64]) -> str:
    """Pipes per cell of likelihood (rows, 5 at the top) against consequence (columns), as inline SVG.

    Pipes with either score unknown are left out; the counts come from one ``bincount``.
    """
    scored = np.isfinite(likelihood) & np.isfinite(consequence)
    cells = (likelihood[scored].astype(int) - 1) * 5 + (consequence[scored].astype(int) - 1)
    counts = np.bincount(cells, minlength=25).reshape(5, 5)
    left, top = 72.0, 16.0
    parts = []
    for row in range(5):
        for column in range(5):
            score_l, score_c = 5 - row, column + 1
            x, y = left + column * _CELL_PX, top + row * _CELL_PX
            count = int(counts[score_l - 1, score_c - 1])
            parts.append(rect(x, y, _CELL_PX - 2, _CELL_PX - 2, fill=risk_colour(score_l * score_c), fill_opacity=1.0 if count else 0.35,
                              data_likelihood=score_l, data_consequence=score_c, data_count=count))  # fmt: skip
            parts.append(label(x + _CELL_PX / 2 - 1, y + _CELL_PX / 2 + 5, f"{count:,}" if count else "", text_anchor="middle", font_size=14))
    for score in range(1, 6):
        parts.append(label(left - 8, top + (5 - score) * _CELL_PX + _CELL_PX / 2 + 4, str(score), text_anchor="end"))
        parts.append(label(left + (score - 1) * _CELL_PX + _CELL_PX / 2, top + 5 * _CELL_PX + 16, str(score), text_anchor="middle"))
    bottom = top + 5 * _CELL_PX
    parts.append(label(left + 2.5 * _CELL_PX, bottom + 36, "consequence of failure", text_anchor="middle"))
    parts.append(label(20, top + 2.5 * _CELL_PX, "likelihood of failure", text_anchor="middle", transform=f"rotate(-90 20 {top + 2.5 * _CELL_PX:g})"))
    key = [rect(left + 5 * _CELL_PX + 24, top + place * 22, 16, 14, fill=colour) + label(left + 5 * _CELL_PX + 46, top + place * 22 + 12, words)
           for place, (_, colour, words) in enumerate(RISK_BANDS)]  # fmt: skip
    content = element("g", "".join(parts + key), font_size=12, fill="#222")
    return svg(content, width=left + 5 * _CELL_PX + 190, height=bottom + 48, title="Risk matrix: pipes by likelihood and consequence of failure")


def _top_pipes(programme: Programme, limit: int) -> NDArray[np.intp]:
    """Positions of the best-ranked pipes with a remedy outside any scheme (those are in the scheme table)."""
    chosen = np.flatnonzero((programme.rank > 0) & (programme.scheme_id == ""))
    return chosen[np.argsort(programme.rank[chosen], kind="stable")][:limit]


def programme_labels(programme: Programme, geometry: NDArray[np.object_], *, schemes: int = SCHEME_ROWS, pipes: int = PIPE_ROWS) -> pd.DataFrame:
    """Where the map writes the numbers of the listed schemes and pipes.

    Columns ``label`` (``S1``... for the schemes, ``1``... for the pipes, as in the tables),
    ``x`` and ``y`` (the middle of the scheme's downstream pipe, or of the pipe; coordinates of
    ``geometry``, one line per pipe). Items without a geometry are left out.
    """
    first = np.flatnonzero(programme.scheme_position == 1)
    first = first[np.argsort(programme.scheme_id[first].astype(str), kind="stable")][:schemes]
    top = _top_pipes(programme, pipes)
    rows = np.concatenate([first, top])
    words = [f"S{place}" for place in range(1, first.size + 1)] + [str(place) for place in range(1, top.size + 1)]
    xy = anchor_points(np.asarray(geometry, dtype=object)[rows])
    known = np.isfinite(xy).all(axis=1)
    return pd.DataFrame({"label": np.asarray(words, dtype=object)[known], "x": xy[known, 0], "y": xy[known, 1]})


def _schemes(programme: Programme, units: UnitSystem) -> str:
    schemes = programme.schemes.head(SCHEME_ROWS)
    if schemes.empty:
        return paragraph("No pipe needs a capacity scheme.")
    length = units.convert(schemes["length_m"].to_numpy(dtype=float), "length")
    currency = str(schemes["currency"].iloc[0])
    rows = [
        (cell(f"S{place}"), cell(row.scheme_id), cell(int(row.pipes)), cell(row.first_pipe), cell(float(length[place - 1]), digits=1), cell(row.sizes),
         cell(float(row.cost), digits=0), cell(float(row.max_risk), digits=0), cell(row.risk_driver))
        for place, row in enumerate(schemes.itertuples(index=False), start=1)
    ]  # fmt: skip
    headers = ("#", "Scheme", "Pipes", "First pipe (downstream)", f"Length [{units.unit('length')}]", f"Sizes [{units.unit('size')}]",
               f"Cost [{currency}]" if currency else "Cost", "Greatest risk", "Risk driver")  # fmt: skip
    note = paragraph(
        f"{len(programme.schemes):,} scheme{'' if len(programme.schemes) == 1 else 's'} of contiguous pipes with a capacity remedy, built from "
        "the outlet up: the first pipe is the "
        "downstream one, and the sizes run in the same order. Numbered by greatest risk, then length."
        + ("" if schemes["currency"].iloc[0] else " No cost without unit costs ([renewal] costs_per_m)."),
        class_="note",
    )
    return table(headers, rows, numeric=(False, False, True, False, True, False, True, True, False), id="scheme-table") + note


def _pipes(programme: Programme, pipe_ids: NDArray[np.object_]) -> str:
    top = _top_pipes(programme, PIPE_ROWS)
    if top.size == 0:
        return paragraph("No other pipe has a remedy.")
    rows = [
        (cell(place), cell(str(pipe_ids[pipe])), cell(str(programme.remedy[pipe])), cell(float(programme.likelihood[pipe]), digits=0),
         cell(float(programme.consequence[pipe]), digits=0), cell(float(programme.risk[pipe]), digits=0), cell(str(programme.risk_driver[pipe])),
         cell("yes" if programme.review[pipe] else ""))
        for place, pipe in enumerate(top, start=1)
    ]  # fmt: skip
    headers = ("#", "Pipe", "Remedy", "Likelihood", "Consequence", "Risk", "Risk driver", "Verify first")
    note = paragraph("The riskiest pipes with a remedy outside the schemes; review candidates (verify first) come after all others.", class_="note")
    return table(headers, rows, numeric=(True, False, False, True, True, True, False, False), id="programme-pipes") + note


def _summary(programme: Programme) -> str:
    kinds = pd.Series(programme.remedy_kind, dtype=object).value_counts()
    words = {"capacity": "capacity", "downstream": "relief downstream", "silting": "silting", "inspect": "inspection",
             "verify": "verify first (review candidates)", "other": "other"}  # fmt: skip
    listed = ", ".join(f"{text} {int(kinds[kind]):,}" for kind, text in words.items() if kind in kinds)
    total = int((programme.remedy_kind != "").sum())
    unscored = int(np.count_nonzero(~np.isfinite(programme.risk)))
    return paragraph(f"{total:,} pipes have a remedy" + (f": {listed}." if listed else ".") + f" {unscored:,} pipes could not be scored for risk.")


def programme_of(result: AuditResult) -> Programme | None:
    """The renewal programme as the audit's pipe columns and schemes hold it; None for a result without one.

    Its ``remedy`` holds the text only for the pipes the section lists (``PIPE_ROWS``), "" for the others.
    """
    pipes = result.pipe_results
    if "renewal_rank" not in pipes.columns or result.schemes is None:
        return None

    def text(name: str) -> NDArray[np.object_]:
        return text_array(pipes, name)

    def number(name: str) -> NDArray[np.float64]:
        return pd.to_numeric(pipes[name], errors="coerce").to_numpy(dtype=float)

    programme = Programme(
        remedy=np.full(len(pipes), "", dtype=object), remedy_kind=text("remedy_kind"), remedy_size_m=number("remedy_size_m"),
        remedy_slope=number("remedy_slope"),
        scheme_id=text("scheme_id"), scheme_position=np.nan_to_num(number("scheme_position")).astype(np.intp), likelihood=number("likelihood"),
        consequence=number("consequence"), risk=number("risk"), likelihood_driver=text("likelihood_driver"),
        consequence_driver=text("consequence_driver"), risk_driver=text("risk_driver"),
        unscored=np.isnan(number("likelihood")).astype(np.intp) + 2 * np.isnan(number("consequence")).astype(np.intp),
        review=np.nan_to_num(number("review")) > 0,
        rank=np.nan_to_num(number("renewal_rank")).astype(np.intp), schemes=result.schemes,
    )  # fmt: skip
    # a remedy is a long text of its own per pipe: made into strings only for the pipes the report lists
    listed = _top_pipes(programme, PIPE_ROWS)
    programme.remedy[listed] = texts(pipes.iloc[listed], "remedy").to_numpy(dtype=object)
    return programme


def programme_section(programme: Programme, *, pipe_ids: NDArray[np.object_], units: UnitSystem) -> str:
    """The whole "programme" section as an HTML fragment (``<section id="programme">``)."""
    matrix = risk_matrix(programme.likelihood, programme.consequence)
    content = (
        element("p", cell(SCREENING_WORDS), class_="note")
        + _summary(programme)
        + element("h3", "Schemes")
        + _schemes(programme, units)
        + element("h3", "Risk matrix")
        + matrix
        + paragraph("Pipes per likelihood (rows) and consequence (columns) of failure; risk = likelihood x consequence.", class_="note")
        + element("h3", "Riskiest pipes outside the schemes")
        + _pipes(programme, np.asarray(pipe_ids, dtype=object))
    )
    return section("programme", "Renewal programme", content)
