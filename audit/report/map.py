"""The network map: every pipe drawn in the colour of its map class, one ``<path>`` per class.

Coordinates are the pipes' own, in metres (a geographic or non-metre CRS is first projected to
the audit's working CRS), scaled to fit the drawing with north up (grid north of the CRS). Each
part of a multi-part line is its own subpath. A scale bar of a round length and a north arrow
are drawn in the corners.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass

import geopandas as gpd
import numpy as np
import pyproj
import shapely

from audit.layers import MAX_COORDINATE_M
from audit.outputs.styles import NOT_EVALUATED_COLOUR, SEVERITY_COLOURS
from audit.report.svg import Array, element, label, line_path_data, rect, svg
from audit.units import SI, UnitSystem

#: Colour of each map class (see ``tables.MAP_CLASSES``): the palette of the GIS styles in
#: audit.gpkg (``audit.outputs.styles``), so the page and the layers read alike.
CLASS_COLOURS: Mapping[str, str] = {
    "high": SEVERITY_COLOURS["high"],
    "medium": SEVERITY_COLOURS["medium"],
    "not_evaluated": NOT_EVALUATED_COLOUR,
    "low": SEVERITY_COLOURS["low"],
    "none": SEVERITY_COLOURS["none"],
}

#: Stroke width of each class on the map [px]; the urgent classes are drawn wider and last.
_STROKE_PX = {"none": 1.0, "low": 1.6, "not_evaluated": 1.8, "medium": 2.2, "high": 2.8}

_SMALLEST_SPAN_M = 1.0  # the extent drawn around a network that is one point [m]

MAP_WIDTH_PX = 960.0
MAP_MAX_HEIGHT_PX = 720.0
_MARGIN_PX = 16.0


@dataclass(frozen=True)
class Frame:
    """How metres become pixels: ``px = margin + (x - x0) * scale``, y flipped."""

    x0: float
    y1: float
    scale: float  # [px/m]
    width: float  # [px]
    height: float  # [px]

    def to_px(self, x: Array, y: Array) -> tuple[Array, Array]:
        """Pixel coordinates of points given in metres."""
        return _MARGIN_PX + (x - self.x0) * self.scale, _MARGIN_PX + (self.y1 - y) * self.scale


def metric_geometry(pipes: gpd.GeoDataFrame, *, working_crs: str | None) -> tuple[np.ndarray, bool]:
    """The pipe geometries in metres, and whether the unit is known to be the metre.

    A layer in a geographic CRS or in feet is projected to ``working_crs`` (the audit's own);
    a layer with no CRS is drawn as it is and its unit is unknown.
    """
    crs = pipes.crs
    if crs is None:
        return pipes.geometry.to_numpy(), False
    if _in_metres(crs):
        return pipes.geometry.to_numpy(), True
    if working_crs is None:
        return pipes.geometry.to_numpy(), False
    return pipes.geometry.to_crs(working_crs).to_numpy(), True


def _in_metres(crs: pyproj.CRS) -> bool:
    return bool(crs.is_projected and crs.axis_info and crs.axis_info[0].unit_name in ("metre", "meter"))


@dataclass(frozen=True)
class MapMarks:
    """Points drawn over the pipes (flooding manholes, numbered candidates), each with an optional label."""

    xy: np.ndarray  # (n, 2) in the map's coordinates [m]
    colour: str
    name: str  # the group's data-marks attribute
    labels: tuple[str, ...] = ()  # text beside the first len(labels) points
    radius_px: float = 4.5


def network_map(geometry: np.ndarray, classes: np.ndarray, *, metres: bool, units: UnitSystem = SI, marks: tuple[MapMarks, ...] = ()) -> str:
    """The map as inline SVG.

    Parameters
    ----------
    geometry : one line geometry per pipe (None where missing) in metres
    classes : map class of each pipe
    metres : whether the coordinates are known to be metres (else no scale bar)
    units : the scale bar is in m and km (SI) or ft and mi (US)
    marks : groups of points drawn over the pipes, in the same coordinates; points with a
        coordinate that is not a number are left out
    """
    parts, pipe_of_part = _single_parts(geometry)
    coords, part_of_vertex = shapely.get_coordinates(parts, return_index=True)
    with np.errstate(invalid="ignore"):  # a vertex that is not a number, or farther out than any place on Earth, is not drawn
        placed = (np.abs(coords) <= MAX_COORDINATE_M).all(axis=1)
    coords, part_of_vertex = coords[placed], part_of_vertex[placed]
    if coords.shape[0] == 0:
        return svg(label(20, 40, "No pipe has a geometry to draw."), width=MAP_WIDTH_PX, height=80, title="Network map")
    frame = _fit(coords)
    x, y = frame.to_px(coords[:, 0], coords[:, 1])
    vertex_class = classes[pipe_of_part][part_of_vertex]
    layers = []
    for name in reversed(list(CLASS_COLOURS)):
        chosen = vertex_class == name
        if chosen.any():
            data = line_path_data(x[chosen], y[chosen], part_of_vertex[chosen])
            layers.append(element("path", d=data, stroke=CLASS_COLOURS[name], stroke_width=_STROKE_PX[name], data_class=name))
    content = element("g", "".join(layers), fill="none", stroke_linecap="round", stroke_linejoin="round")
    content += "".join(_marks(group, frame) for group in marks)
    content += north_arrow(frame.width - 40.0, 24.0)
    if metres:
        content += scale_bar(frame, x=_MARGIN_PX, y=frame.height - 14.0, units=units)
    return svg(content, width=frame.width, height=frame.height, title="Network map coloured by each pipe's worst flag")


def anchor_points(geometry: np.ndarray) -> np.ndarray:
    """Where a mark goes on each geometry, as (n, 2) coordinates: the middle of a line, a point itself.

    Any other geometry (a polygon, a collection), a missing or empty one, gives not-a-number,
    which :func:`network_map` leaves out; the middle of a line is half-way along its length.
    """
    geometry = np.asarray(geometry, dtype=object).reshape(-1)
    xy = np.full((geometry.size, 2), np.nan)
    kind = shapely.get_type_id(geometry)
    lines = np.isin(kind, (1, 5)) & ~shapely.is_empty(geometry)
    points = (kind == 0) & ~shapely.is_empty(geometry)
    with np.errstate(invalid="ignore", over="ignore"):
        middle = shapely.line_interpolate_point(geometry[lines], 0.5, normalized=True)
    xy[lines, 0], xy[lines, 1] = shapely.get_x(middle), shapely.get_y(middle)
    xy[points, 0], xy[points, 1] = shapely.get_x(geometry[points]), shapely.get_y(geometry[points])
    return xy


def _marks(group: MapMarks, frame: Frame) -> str:
    """One ``<g>`` of circles (and labels) for a group of points; a few hundred at most are expected."""
    xy = np.asarray(group.xy, dtype=float).reshape(-1, 2)
    with np.errstate(invalid="ignore"):
        placed = np.flatnonzero((np.abs(xy) <= MAX_COORDINATE_M).all(axis=1))
    x, y = frame.to_px(xy[placed, 0], xy[placed, 1])
    items = []
    for number, (px, py) in zip(placed, zip(x, y, strict=True), strict=True):  # one element per marked point
        items.append(element("circle", cx=f"{px:.1f}", cy=f"{py:.1f}", r=f"{group.radius_px:g}", fill=group.colour, stroke="#fff", stroke_width=1))
        if number < len(group.labels):  # the first points are labelled; beside the point, on its left near the right edge
            left = px > frame.width - 80.0
            x_text = px - group.radius_px - 2 if left else px + group.radius_px + 2
            items.append(label(x_text, py - group.radius_px, group.labels[number], font_size=11, fill=group.colour, font_weight="bold",
                               text_anchor="end" if left else None))  # fmt: skip
    return element("g", "".join(items), data_marks=group.name)


def _single_parts(geometry: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Every single-part line and the pipe it belongs to (splitting only when a multi-part exists)."""
    if np.all(shapely.get_type_id(geometry) == 1):  # LineString only: nothing to split
        return geometry, np.arange(len(geometry))
    return shapely.get_parts(geometry, return_index=True)


def _fit(coords: np.ndarray) -> Frame:
    """Scale the extent of the coordinates to the drawing, keeping the aspect ratio.

    An extent narrower than :data:`_SMALLEST_SPAN_M` (a network drawn at one point) is drawn at
    that span, so pixel coordinates stay within what the drawing's integers hold.
    """
    xmin, ymin = coords[:, :2].min(axis=0)
    xmax, ymax = coords[:, :2].max(axis=0)
    span_x, span_y = max(xmax - xmin, _SMALLEST_SPAN_M), max(ymax - ymin, _SMALLEST_SPAN_M)
    inner = MAP_WIDTH_PX - 2 * _MARGIN_PX
    scale = min(inner / span_x, (MAP_MAX_HEIGHT_PX - 2 * _MARGIN_PX) / span_y)
    height = max(span_y * scale + 2 * _MARGIN_PX + 24.0, 120.0)  # room for the scale bar below
    return Frame(x0=float(xmin), y1=float(ymax), scale=float(scale), width=MAP_WIDTH_PX, height=float(height))


def round_length(target: float) -> float:
    """The largest of 1, 2 or 5 times a power of ten that is at most ``target`` [m].

    Examples
    --------
    >>> [round_length(value) for value in (0.7, 180.0, 350.0, 999.0, 1000.0, 4200.0)]
    [0.5, 100.0, 200.0, 500.0, 1000.0, 2000.0]
    """
    power = 10.0 ** math.floor(math.log10(target))
    return max(step * power for step in (1.0, 2.0, 5.0) if step * power <= target * (1 + 1e-12))


def length_words(length: float, unit: str = "m") -> str:
    """A round length in m below 1 km, else in km; in ft below a mile, else in mi.

    Examples
    --------
    >>> length_words(500.0), length_words(2000.0), length_words(0.5), length_words(10560.0, "ft")
    ('500 m', '2 km', '0.5 m', '2 mi')
    """
    if unit == "ft":
        return f"{length / 5280.0:g} mi" if length >= 5280.0 else f"{length:g} ft"
    return f"{length / 1000.0:g} km" if length >= 1000.0 else f"{length:g} m"


def scale_bar(frame: Frame, *, x: float, y: float, units: UnitSystem = SI) -> str:
    """A bar of a round length close to a fifth of the map's width, labelled in m or km (ft or mi)."""
    per_unit = 1.0 / float(units.convert(1.0, "length"))  # metres per unit of length
    rounded = round_length((frame.width - 2 * _MARGIN_PX) / 5.0 / frame.scale / per_unit)
    if units.unit("length") == "ft" and rounded >= 5280.0:
        rounded = round_length(rounded / 5280.0) * 5280.0  # whole miles, not 5,000 ft
    metres = rounded * per_unit
    length = metres * frame.scale
    half = length / 2.0
    bar = rect(x, y - 6, half, 6, fill="#333") + rect(x + half, y - 6, half, 6, fill="#fff", stroke="#333")
    words = label(x + length + 6, y, length_words(rounded, units.unit("length")), font_size=12)
    return element("g", bar + words, data_role="scale-bar", data_metres=f"{metres:g}")


def north_arrow(x: float, y: float) -> str:
    """An arrow pointing up with an N above it, centred on ``x``, its tip at ``y`` + 14 px."""
    arrow = element("path", d=f"M{x:g} {y + 14:g}l-8 24 8-6 8 6z", fill="#333")
    return element("g", label(x, y + 8, "N", text_anchor="middle", font_size=14, font_weight="bold") + arrow, data_role="north-arrow")
