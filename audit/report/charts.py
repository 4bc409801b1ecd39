"""The report's charts as inline SVG: flag bars, the part-full scatter, the velocity histogram.

Scatter points are drawn as one ``<path>`` of zero-length marks per map class, one mark per
occupied pixel, never as one element per pipe; the histogram is counted with ``numpy.histogram`` over all pipes.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass

import numpy as np
import pandas as pd

from audit.report.map import CLASS_COLOURS
from audit.report.svg import (
    Array,
    dot_path_data,
    element,
    label,
    line_path_data,
    rect,
    segment,
    svg,
)

_AXIS = {"stroke": "#555", "stroke_width": 1}
_GRID = {"stroke": "#e3e3e3", "stroke_width": 1}
_SEVERITY_COLOURS = {word: CLASS_COLOURS[word] for word in ("high", "medium", "low")}
_CURVE_DASHES = (None, "6 4", "2 3", "10 3 2 3")


def _dash(place: int) -> str | None:
    """The dash pattern of the ``place``-th curve: solid, then dashed, dotted, dash-dotted."""
    return _CURVE_DASHES[place % len(_CURVE_DASHES)]
#: Scatter marks are 6 px round dots; one per occupied 1 px cell draws the same picture.
SCATTER_CELL_PX = 1.0


@dataclass(frozen=True)
class Plot:
    """A plotting area: its box [px] and the data ranges it shows."""

    left: float
    top: float
    width: float
    height: float
    x_range: tuple[float, float]
    y_range: tuple[float, float]

    def px(self, x: Array, y: Array) -> tuple[Array, Array]:
        """Pixel coordinates of data values."""
        (x0, x1), (y0, y1) = self.x_range, self.y_range
        return self.left + (x - x0) / (x1 - x0) * self.width, self.top + (y1 - y) / (y1 - y0) * self.height

    def axes(self, *, x_ticks: Array, y_ticks: Array, x_title: str, y_title: str) -> str:
        """Grid lines, tick labels, the two axes and their titles."""
        bottom, right = self.top + self.height, self.left + self.width
        tick_x, _ = self.px(np.asarray(x_ticks, dtype=float), np.zeros(len(x_ticks)))
        _, tick_y = self.px(np.zeros(len(y_ticks)), np.asarray(y_ticks, dtype=float))
        parts = [segment(px, self.top, px, bottom, **_GRID) + label(px, bottom + 16, f"{tick:g}", text_anchor="middle") for px, tick in zip(tick_x, x_ticks, strict=True)]
        parts += [segment(self.left, py, right, py, **_GRID) + label(self.left - 6, py + 4, f"{tick:g}", text_anchor="end") for py, tick in zip(tick_y, y_ticks, strict=True)]
        parts.append(segment(self.left, bottom, right, bottom, **_AXIS) + segment(self.left, self.top, self.left, bottom, **_AXIS))
        parts.append(label(self.left + self.width / 2, bottom + 36, x_title, text_anchor="middle"))
        middle = self.top + self.height / 2
        parts.append(label(16, middle, y_title, text_anchor="middle", transform=f"rotate(-90 16 {middle:g})"))
        return element("g", "".join(parts), font_size=12, fill="#333")


def flag_bars(totals: pd.DataFrame) -> str:
    """Horizontal bars of pipes per flag, coloured by the flag's severity, count at the end."""
    row_px, left, width = 26.0, 170.0, 560.0
    height = row_px * max(len(totals), 1) + 16
    largest = max(int(totals["pipes"].max()) if len(totals) else 0, 1)
    parts = []
    for place, (flag, severity, count) in enumerate(totals[["flag", "severity", "pipes"]].itertuples(index=False)):
        y = 8 + place * row_px
        length = max(count / largest * width, 1.0)
        parts.append(label(left - 8, y + 15, str(flag), text_anchor="end"))
        parts.append(rect(left, y + 3, length, row_px - 8, fill=_SEVERITY_COLOURS.get(str(severity), "#888")))
        parts.append(label(left + length + 6, y + 15, f"{int(count):,}"))
    content = element("g", "".join(parts), font_size=12, fill="#333")
    return svg(content, width=left + width + 80, height=height, title="Pipes per flag")


def part_full_chart(
    load_ratio: Array, depth_ratio: Array, classes: np.ndarray, curves: Mapping[str, tuple[Array, Array]], *, x_max: float = 1.5
) -> str:
    """Each pipe's load ratio against its depth ratio, over the part-full curve of each shape.

    Load ratios above ``x_max`` are drawn at the right edge; pipes with either ratio unknown are
    left out.
    """
    plot = Plot(left=56, top=16, width=620, height=360, x_range=(0.0, x_max), y_range=(0.0, 1.0))
    parts = [plot.axes(x_ticks=np.arange(0, x_max + 1e-9, 0.25), y_ticks=np.arange(0, 1.01, 0.2), x_title="load ratio Q/Qf [-]", y_title="depth ratio y/H [-]")]
    for place, (name, (depth, ratio)) in enumerate(curves.items()):
        cx, cy = plot.px(ratio, depth)
        parts.append(element("path", d=line_path_data(cx, cy, np.zeros(cx.size)), fill="none", stroke="#222", stroke_width=1.5, stroke_dasharray=_dash(place), data_curve=name))
    shown = np.isfinite(load_ratio) & np.isfinite(depth_ratio)
    x, y = plot.px(np.clip(load_ratio, 0.0, x_max), np.clip(depth_ratio, 0.0, 1.0))
    for name in reversed(list(CLASS_COLOURS)):
        chosen = shown & (classes == name)
        if chosen.any():
            parts.append(element("path", d=dot_path_data(x[chosen], y[chosen], cell_px=SCATTER_CELL_PX), stroke=CLASS_COLOURS[name], stroke_width=6, stroke_linecap="round", stroke_opacity=0.85, data_class=name))
    parts.append(_curve_key(curves, x=plot.left + plot.width + 16, y=plot.top + 20))
    return svg("".join(parts), width=plot.left + plot.width + 190, height=plot.top + plot.height + 48, title="Load ratio against depth ratio")


def _curve_key(curves: Mapping[str, tuple[Array, Array]], *, x: float, y: float) -> str:
    rows = []
    for place, name in enumerate(curves):
        yy = y + place * 20
        rows.append(segment(x, yy - 4, x + 28, yy - 4, stroke="#222", stroke_width=1.5, stroke_dasharray=_dash(place)))
        rows.append(label(x + 34, yy, f"{name} (Manning)"))
    return element("g", "".join(rows), font_size=12, fill="#333")


def velocity_histogram(velocity: Array, *, min_velocity: float, max_velocity: float, bin_width: float = 0.1, unit: str = "m/s") -> str:
    """Pipes per velocity band (velocities and limits in ``unit``), with the minimum and maximum limits drawn as lines.

    Bars below the minimum or above the maximum take the colour of the medium severity; the
    last band also holds every velocity beyond the drawn range.
    """
    values = velocity[np.isfinite(velocity)]
    top = max(np.ceil(1.25 * max_velocity), np.ceil(min(float(np.max(values, initial=0.0)), 2.0 * max_velocity)))
    edges = np.arange(0.0, top + bin_width / 2, bin_width)
    counts, _ = np.histogram(np.clip(values, 0.0, edges[-1] - bin_width / 2), bins=edges)
    plot = Plot(left=56, top=24, width=620, height=240, x_range=(0.0, float(edges[-1])), y_range=(0.0, float(max(counts.max(initial=0), 1)) * 1.1))
    parts = [plot.axes(x_ticks=np.arange(0.0, edges[-1] + 1e-9, 5 * bin_width), y_ticks=_count_ticks(plot.y_range[1]), x_title=f"velocity at design flow [{unit}]", y_title="pipes")]
    x0, y0 = plot.px(edges[:-1], counts.astype(float))
    x1, _ = plot.px(edges[1:], counts.astype(float))
    outside = (edges[1:] <= min_velocity + 1e-9) | (edges[:-1] >= max_velocity - 1e-9)
    base = plot.top + plot.height
    for colour, chosen in (("#5d8aa8", ~outside), (CLASS_COLOURS["medium"], outside)):
        bars = "".join(rect(a, b, max(c - a - 1, 0.5), base - b) for a, b, c in zip(x0[chosen], y0[chosen], x1[chosen], strict=True))
        parts.append(element("g", bars, fill=colour))
    for limit, words in ((min_velocity, "min"), (max_velocity, "max")):
        lx, _ = plot.px(np.array([limit]), np.zeros(1))
        parts.append(segment(lx[0], plot.top - 8, lx[0], base, stroke="#222", stroke_width=2, stroke_dasharray="5 3", data_limit=words))
        parts.append(label(lx[0] + 4, plot.top - 10, f"{words} {limit:g} {unit}", font_size=12, fill="#222"))
    return svg("".join(parts), width=plot.left + plot.width + 40, height=plot.top + plot.height + 48, title="Velocity at design flow")


def _count_ticks(largest: float) -> np.ndarray:
    """About five round ticks from 0 up to ``largest`` pipes."""
    raw = max(largest / 5.0, 1.0)
    power = 10.0 ** np.floor(np.log10(raw))
    step = min((s * power for s in (1, 2, 5, 10) if s * power >= raw), default=raw)
    return np.arange(0.0, largest + 1e-9, step)
