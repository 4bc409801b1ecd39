"""Default styles for the layers of audit.gpkg, so the GeoPackage opens ready to read in a desktop GIS.

Each layer gets one row in the GeoPackage's ``layer_styles`` table (the table desktop GIS reads
styles from), marked as the layer's default, holding the same classes twice: a QGIS style
document (QML, the native one of the most common open desktop GIS) and an OGC Styled Layer
Descriptor 1.1 document (SLD with Symbology Encoding 1.1 and Filter Encoding 1.1, OGC 05-078r4
and 05-077r4), which other GIS read.

* pipes: coloured by ``severity`` (high, medium, low, none), wider by internal size in three
  bands (under 300 mm, 300 to under 900 mm, 900 mm and over; 12 in and 36 in in US outputs);
  an unknown size is drawn in the narrowest band, a pipe without a severity thin and grey;
* manholes: by ``flood_state`` where the grade line ran (flooding, surcharged, below soffit, not
  evaluated), else by whether a data finding names the manhole;
* findings: one marker.

Colours: the colour-blind-safe palette of Okabe and Ito (2008, "Color Universal Design", J*FLY),
with vermillion for high and flooding, orange for medium and surcharged, blue for low and below
soffit, reddish purple for data findings and pipes not evaluated, grey for nothing to report.
Line widths are in millimetres in QML and in pixels in SLD (about 3.8 px per mm at 96 dpi).
"""

from __future__ import annotations

import html
import sqlite3
from collections.abc import Mapping, Sequence
from dataclasses import dataclass

from audit.result import output_name, written_name
from audit.units import UnitSystem

#: Colours of the severities on the map and in the GIS styles (Okabe and Ito 2008).
SEVERITY_COLOURS: Mapping[str, str] = {"high": "#d55e00", "medium": "#e69f00", "low": "#0072b2", "none": "#999999"}
NOT_EVALUATED_COLOUR = "#cc79a7"
FLOOD_COLOURS: Mapping[str, str] = {"flooding": "#d55e00", "surcharged": "#e69f00", "below_soffit": "#0072b2", "not_evaluated": "#999999"}
FINDING_COLOUR = "#cc79a7"
OTHER_COLOUR = "#bbbbbb"

#: Pipe size bands [m] (lower bounds) and their line widths [mm].
SIZE_BANDS_M: tuple[float, ...] = (0.0, 0.3, 0.9)
SIZE_WIDTHS_MM: tuple[float, ...] = (0.35, 0.7, 1.2)

_PX_PER_MM = 96.0 / 25.4

STYLE_TABLE = """CREATE TABLE IF NOT EXISTS layer_styles (
    id INTEGER PRIMARY KEY AUTOINCREMENT, f_table_catalog TEXT(256), f_table_schema TEXT(256), f_table_name TEXT(256),
    f_geometry_column TEXT(256), styleName TEXT(30), styleQML TEXT, styleSLD TEXT, useAsDefault BOOLEAN, description TEXT,
    owner TEXT(30), ui TEXT(30), update_time DATETIME DEFAULT (strftime('%Y-%m-%dT%H:%M:%fZ', 'now')))"""


@dataclass(frozen=True)
class Condition:
    """A test on one field: equal to a text, at least a number, below a number (or unknown)."""

    field: str
    equals: str | None = None
    at_least: float | None = None
    below: float | None = None  # an unknown value counts as below

    def qml(self) -> str:
        name = '"' + self.field.replace('"', '""') + '"'
        if self.equals is not None:
            return f"{name} = '{self.equals}'"
        if self.at_least is not None:
            return f"{name} >= {self.at_least:g}"
        return f"coalesce({name}, -1e300) < {self.below:g}"

    def sld(self) -> str:
        prop = f"<ogc:PropertyName>{html.escape(self.field)}</ogc:PropertyName>"
        if self.equals is not None:
            return f"<ogc:PropertyIsEqualTo>{prop}<ogc:Literal>{html.escape(self.equals)}</ogc:Literal></ogc:PropertyIsEqualTo>"
        if self.at_least is not None:
            return f"<ogc:PropertyIsGreaterThanOrEqualTo>{prop}<ogc:Literal>{self.at_least:g}</ogc:Literal></ogc:PropertyIsGreaterThanOrEqualTo>"
        return (f"<ogc:Or><ogc:PropertyIsLessThan>{prop}<ogc:Literal>{self.below:g}</ogc:Literal></ogc:PropertyIsLessThan>"
                f"<ogc:PropertyIsNull>{prop}</ogc:PropertyIsNull></ogc:Or>")  # fmt: skip


@dataclass(frozen=True)
class StyleRule:
    """One class of a layer's style: the features meeting every condition (none: every feature not drawn yet)."""

    title: str
    conditions: tuple[Condition, ...]
    colour: str
    size_mm: float  # line width, or marker diameter


@dataclass(frozen=True)
class LayerStyle:
    """The classes of one layer, tried in order; ``kind`` is line or point."""

    layer: str
    kind: str
    rules: tuple[StyleRule, ...]
    description: str

    def qml(self) -> str:
        """The style as a QGIS style document: a rule-based renderer, one symbol per class."""
        rules, symbols = [], []
        for number, rule in enumerate(self.rules):
            test = " AND ".join(f"({condition.qml()})" for condition in rule.conditions) or "ELSE"
            rules.append(f'<rule key="r{number}" symbol="{number}" label="{html.escape(rule.title)}" filter="{html.escape(test)}"/>')
            symbols.append(_qml_symbol(self.kind, number, rule))
        return (
            "<!DOCTYPE qgis PUBLIC 'http://mrcc.com/qgis.dtd' 'SYSTEM'>\n"
            '<qgis version="3.28.0" styleCategories="Symbology">'
            '<renderer-v2 type="RuleRenderer" symbollevels="0" enableorderby="0" forceraster="0">'
            f'<rules key="root">{"".join(rules)}</rules><symbols>{"".join(symbols)}</symbols>'
            "</renderer-v2></qgis>\n"
        )

    def sld(self) -> str:
        """The style as an OGC SLD 1.1 document (Symbology Encoding 1.1, Filter Encoding 1.1)."""
        rules = []
        for rule in self.rules:
            if not rule.conditions:
                test = "<se:ElseFilter/>"
            elif len(rule.conditions) == 1:
                test = f"<ogc:Filter>{rule.conditions[0].sld()}</ogc:Filter>"
            else:
                test = f"<ogc:Filter><ogc:And>{''.join(condition.sld() for condition in rule.conditions)}</ogc:And></ogc:Filter>"
            title = html.escape(rule.title)
            rules.append(f"<se:Rule><se:Name>{title}</se:Name><se:Description><se:Title>{title}</se:Title></se:Description>"
                         f"{test}{_sld_symbolizer(self.kind, rule)}</se:Rule>")  # fmt: skip
        return (
            '<?xml version="1.0" encoding="UTF-8"?>\n'
            '<StyledLayerDescriptor version="1.1.0" xmlns="http://www.opengis.net/sld" xmlns:se="http://www.opengis.net/se" '
            'xmlns:ogc="http://www.opengis.net/ogc" xmlns:xlink="http://www.w3.org/1999/xlink" '
            'xmlns:xsi="http://www.w3.org/2001/XMLSchema-instance" '
            'xsi:schemaLocation="http://www.opengis.net/sld http://schemas.opengis.net/sld/1.1.0/StyledLayerDescriptor.xsd">'
            f"<NamedLayer><se:Name>{html.escape(self.layer)}</se:Name><UserStyle><se:Name>{html.escape(self.layer)}</se:Name>"
            f"<se:Description><se:Title>{html.escape(self.description)}</se:Title></se:Description>"
            f"<se:FeatureTypeStyle>{''.join(rules)}</se:FeatureTypeStyle></UserStyle></NamedLayer></StyledLayerDescriptor>\n"
        )


def _qml_symbol(kind: str, number: int, rule: StyleRule) -> str:
    red, green, blue = (int(rule.colour[place:place + 2], 16) for place in (1, 3, 5))
    colour = f"{red},{green},{blue},255"
    if kind == "line":
        options = {"line_color": colour, "line_width": f"{rule.size_mm:g}", "line_width_unit": "MM", "capstyle": "round", "joinstyle": "round",
                   "line_style": "solid"}  # fmt: skip
        layer_class, symbol_type = "SimpleLine", "line"
    else:
        options = {"color": colour, "size": f"{rule.size_mm:g}", "size_unit": "MM", "name": "circle", "outline_color": "255,255,255,255",
                   "outline_width": "0.2", "outline_width_unit": "MM"}  # fmt: skip
        layer_class, symbol_type = "SimpleMarker", "marker"
    values = "".join(f'<Option type="QString" name="{key}" value="{value}"/>' for key, value in options.items())
    return (f'<symbol type="{symbol_type}" name="{number}" alpha="1" clip_to_extent="1" force_rhr="0">'
            f'<layer class="{layer_class}" enabled="1" locked="0" pass="0"><Option type="Map">{values}</Option></layer></symbol>')  # fmt: skip


def _sld_symbolizer(kind: str, rule: StyleRule) -> str:
    size = f"{rule.size_mm * _PX_PER_MM:.1f}"
    if kind == "line":
        return ('<se:LineSymbolizer><se:Stroke>'
                f'<se:SvgParameter name="stroke">{rule.colour}</se:SvgParameter><se:SvgParameter name="stroke-width">{size}</se:SvgParameter>'
                '<se:SvgParameter name="stroke-linejoin">round</se:SvgParameter><se:SvgParameter name="stroke-linecap">round</se:SvgParameter>'
                '</se:Stroke></se:LineSymbolizer>')  # fmt: skip
    return ('<se:PointSymbolizer><se:Graphic><se:Mark><se:WellKnownName>circle</se:WellKnownName>'
            f'<se:Fill><se:SvgParameter name="fill">{rule.colour}</se:SvgParameter></se:Fill>'
            '<se:Stroke><se:SvgParameter name="stroke">#ffffff</se:SvgParameter><se:SvgParameter name="stroke-width">1</se:SvgParameter></se:Stroke>'
            f'</se:Mark><se:Size>{size}</se:Size></se:Graphic></se:PointSymbolizer>')  # fmt: skip


def pipe_style(fields: Sequence[str], units: UnitSystem) -> LayerStyle | None:
    """Pipes by severity and size band; None when the layer has no severity field."""
    severity = written_name(fields, "severity")
    if severity is None:
        return None
    size = written_name(fields, output_name("height_m", units))
    bounds = [float(units.convert(low, "size")) for low in SIZE_BANDS_M]
    unit = units.unit("size")
    rules = []
    for word, colour in SEVERITY_COLOURS.items():
        for band, width in enumerate(SIZE_WIDTHS_MM):
            if size is None:
                rules.append(StyleRule(word, (Condition(severity, equals=word),), colour, SIZE_WIDTHS_MM[0]))
                break
            low, high = bounds[band], (bounds[band + 1] if band + 1 < len(bounds) else None)
            tests: tuple[Condition, ...] = (Condition(size, at_least=low),) if band else ()
            tests += (Condition(size, below=high),) if high is not None else ()
            words = f"{word}, {_size_words(low, high, unit)}"
            rules.append(StyleRule(words, (Condition(severity, equals=word), *tests), colour, width))
    rules.append(StyleRule("other", (), OTHER_COLOUR, 0.25))
    return LayerStyle("pipes", "line", tuple(rules), "Pipes by worst severity, wider by internal size")


def _size_words(low: float, high: float | None, unit: str) -> str:
    if not low:
        return f"under {high:g} {unit}"
    return f"{low:g} {unit} and over" if high is None else f"{low:g} to under {high:g} {unit}"


def manhole_style(fields: Sequence[str]) -> LayerStyle | None:
    """Manholes by flood state, else by data finding; None when the layer has neither field."""
    state = written_name(fields, "flood_state")
    if state is not None:
        sizes = {"flooding": 3.4, "surcharged": 2.8, "below_soffit": 2.0, "not_evaluated": 1.8}
        rules = tuple(StyleRule(name.replace("_", " "), (Condition(state, equals=name),), colour, sizes[name]) for name, colour in FLOOD_COLOURS.items())
        return LayerStyle("manholes", "point", (*rules, StyleRule("other", (), OTHER_COLOUR, 1.6)), "Manholes by flood state at the design flows")
    findings = written_name(fields, "findings")
    if findings is None:
        return None
    rules = (StyleRule("no data finding", (Condition(findings, equals=""),), SEVERITY_COLOURS["none"], 1.8),
             StyleRule("data finding", (), FINDING_COLOUR, 2.6))  # fmt: skip
    return LayerStyle("manholes", "point", rules, "Manholes, those named by a data finding marked")


def finding_style() -> LayerStyle:
    """Every finding as one marker."""
    return LayerStyle("findings", "point", (StyleRule("data finding", (), FINDING_COLOUR, 2.4),), "Where each data finding is")


def write_styles(connection: sqlite3.Connection, styles: Sequence[LayerStyle]) -> None:
    """Store each style in the GeoPackage's ``layer_styles`` table as the default of its layer (replacing an earlier default)."""
    connection.execute(STYLE_TABLE)
    for style in styles:
        column = connection.execute("SELECT column_name FROM gpkg_geometry_columns WHERE table_name = ?", (style.layer,)).fetchone()
        connection.execute("UPDATE layer_styles SET useAsDefault = 0 WHERE f_table_name = ?", (style.layer,))
        connection.execute(
            "INSERT INTO layer_styles (f_table_catalog, f_table_schema, f_table_name, f_geometry_column, styleName, styleQML, styleSLD, "
            "useAsDefault, description, owner, ui) VALUES ('', '', ?, ?, ?, ?, ?, 1, ?, '', '')",
            (style.layer, column[0] if column else "", f"{style.layer} (sewer-audit)", style.qml(), style.sld(), style.description),
        )
