"""audit.gpkg describes itself: default styles in layer_styles, field meanings in gpkg_data_columns, a yes/no column per flag.

Each test audits the small town of tests/_small_town.py and reads the written GeoPackage back
with sqlite3, the way a desktop GIS does. The classes the styles must draw are worked out here
from the town's expected flags, not from the code's output.
"""

import sqlite3
import xml.etree.ElementTree as ET
from pathlib import Path
from typing import Any

import geopandas as gpd
import pytest
import xmlschema
from _small_town import EXPECTED_FLAGS, EXPECTED_FLOOD_STATES, PIPES, write_town

from audit.outputs import write_outputs
from audit.pipeline import run
from audit.result import COLUMN_UNITS, MANHOLE_COLUMNS, PIPE_COLUMNS, output_name
from audit.rules import DEFAULT_SEVERITY, FLAG_CODES, MANHOLE_FLAG_CODES, SEVERITY_ORDER
from audit.units import SI, US

SCHEMA = xmlschema.XMLSchema(Path(__file__).parent / "sld_schema" / "sld.xsd")
NS = {"se": "http://www.opengis.net/se", "ogc": "http://www.opengis.net/ogc", "sld": "http://www.opengis.net/sld"}
STYLE_COLUMNS = ["id", "f_table_catalog", "f_table_schema", "f_table_name", "f_geometry_column", "styleName", "styleQML", "styleSLD",
                 "useAsDefault", "description", "owner", "ui", "update_time"]  # fmt: skip
# Okabe and Ito's colour-blind-safe colours, as docs/outputs.md lists them
VERMILLION, ORANGE, BLUE = "#d55e00", "#e69f00", "#0072b2"


def _audit(folder: Path, *, units: str = "si") -> Path:
    config = write_town(folder, "GPKG", ".gpkg")
    if units == "us":
        config.write_text(config.read_text(encoding="utf-8") + '\n[output]\nunits = "us"\n', encoding="utf-8")
    write_outputs(run(config), folder / "out")
    return folder / "out" / "audit.gpkg"


@pytest.fixture(scope="module")
def gpkg(tmp_path_factory: pytest.TempPathFactory) -> Path:
    return _audit(tmp_path_factory.mktemp("styled"))


def _styles(path: Path) -> dict[str, dict[str, Any]]:
    with sqlite3.connect(path) as connection:
        connection.row_factory = sqlite3.Row
        rows = connection.execute("SELECT * FROM layer_styles").fetchall()
    return {row["f_table_name"]: dict(row) for row in rows}


def _holds(test: ET.Element, feature: dict[str, Any]) -> bool:
    """Evaluate one Filter Encoding operator on a feature's attributes."""
    name = test.tag.split("}")[1]
    if name in ("And", "Or"):
        results = [_holds(part, feature) for part in test]
        return all(results) if name == "And" else any(results)
    value = feature[test.find("ogc:PropertyName", NS).text]  # type: ignore[union-attr]
    if name == "PropertyIsNull":
        return value is None or value != value
    literal = test.find("ogc:Literal", NS).text  # type: ignore[union-attr]
    if name == "PropertyIsEqualTo":
        return str(value) == literal
    if value is None or value != value:
        return False
    number = float(literal)  # type: ignore[arg-type]
    return {"PropertyIsLessThan": value < number, "PropertyIsGreaterThanOrEqualTo": value >= number}[name]


def _drawn(sld: str, feature: dict[str, Any]) -> list[tuple[str, str]]:
    """The (colour, size) of every rule with a filter that the feature meets."""
    matched = []
    for rule in ET.fromstring(sld).iter(f"{{{NS['se']}}}Rule"):
        test = rule.find("ogc:Filter", NS)
        if test is None:
            continue  # the else rule
        if _holds(test[0], feature):
            colour = rule.find(".//se:SvgParameter[@name='stroke']", NS) if rule.find(".//se:LineSymbolizer", NS) is not None else None
            colour = colour if colour is not None else rule.find(".//se:Fill/se:SvgParameter[@name='fill']", NS)
            size = rule.find(".//se:SvgParameter[@name='stroke-width']", NS)
            size = size if size is not None and rule.find(".//se:LineSymbolizer", NS) is not None else rule.find(".//se:Size", NS)
            matched.append((colour.text, size.text))  # type: ignore[union-attr]
    return matched


def test_each_layer_has_one_default_style_in_the_table_a_gis_reads(gpkg: Path) -> None:
    with sqlite3.connect(gpkg) as connection:
        columns = [row[1] for row in connection.execute("PRAGMA table_info(layer_styles)")]
        geometry = dict(connection.execute("SELECT table_name, column_name FROM gpkg_geometry_columns").fetchall())
    assert columns == STYLE_COLUMNS
    styles = _styles(gpkg)
    assert sorted(styles) == ["findings", "manholes", "pipes"]
    for layer, style in styles.items():
        assert style["useAsDefault"] == 1
        assert style["f_geometry_column"] == geometry[layer]
        SCHEMA.validate(style["styleSLD"])  # raises on any departure from SLD 1.1
        qml = ET.fromstring(style["styleQML"].split("\n", 1)[1])
        assert qml.tag == "qgis"
        rules = qml.findall("./renderer-v2/rules/rule")
        symbols = {symbol.get("name") for symbol in qml.findall("./renderer-v2/symbols/symbol")}
        assert {rule.get("symbol") for rule in rules} == symbols
        assert len(rules) == len(ET.fromstring(style["styleSLD"]).findall(".//se:Rule", NS))  # both documents hold the same classes


def test_every_layer_says_it_is_a_screening_aid(gpkg: Path) -> None:
    with sqlite3.connect(gpkg) as connection:
        descriptions = dict(connection.execute("SELECT table_name, description FROM gpkg_contents WHERE data_type = 'features'").fetchall())
    assert sorted(descriptions) == ["findings", "manholes", "pipes"]
    assert all(text.startswith("Screening aid only") and "licensed engineer" in text for text in descriptions.values())


def test_a_broken_sld_is_caught_by_the_schema(gpkg: Path) -> None:
    sld = _styles(gpkg)["pipes"]["styleSLD"]
    assert not SCHEMA.is_valid(sld.replace("<se:Stroke>", "<se:Stroke><se:Size>3</se:Size>", 1))  # a size where a stroke parameter goes
    assert not SCHEMA.is_valid(sld.replace('version="1.1.0"', 'version="1.0.0"', 1))


def test_every_pipe_is_drawn_by_exactly_one_class_in_its_severitys_colour_and_its_sizes_width(gpkg: Path) -> None:
    pipes = gpd.read_file(gpkg, layer="pipes", engine="pyogrio")
    sld = _styles(gpkg)["pipes"]["styleSLD"]
    colour = {"high": VERMILLION, "medium": ORANGE, "low": BLUE}
    widths = {}
    for ref, _, _, diameter_mm, _, _ in PIPES:
        feature = pipes.loc[pipes["REF"] == ref].iloc[0].to_dict()
        worst = max((DEFAULT_SEVERITY[flag] for flag in EXPECTED_FLAGS[ref]), key=SEVERITY_ORDER.index)  # low < medium < high
        drawn = _drawn(sld, feature)
        assert len(drawn) == 1, ref
        assert drawn[0][0] == colour[worst], ref
        widths[diameter_mm] = float(drawn[0][1])
    assert widths[150] == widths[200] < widths[300]  # under 300 mm, then 300 to under 900 mm


def test_manholes_are_drawn_by_flood_state(gpkg: Path) -> None:
    manholes = gpd.read_file(gpkg, layer="manholes", engine="pyogrio")
    sld = _styles(gpkg)["manholes"]["styleSLD"]
    colour = {"flooding": VERMILLION, "surcharged": ORANGE, "below_soffit": BLUE}
    for feature in manholes.to_dict("records"):
        drawn = _drawn(sld, feature)
        assert [tone for tone, _ in drawn] == [colour[EXPECTED_FLOOD_STATES[feature["MH"]]]], feature["MH"]


def test_one_yes_no_column_per_flag_beside_the_joined_text(gpkg: Path) -> None:
    pipes = gpd.read_file(gpkg, layer="pipes", engine="pyogrio").set_index("REF")
    for code in FLAG_CODES:
        assert pipes[f"flag_{code}"].dtype == bool
        assert set(pipes.index[pipes[f"flag_{code}"]]) == {ref for ref, flags in EXPECTED_FLAGS.items() if code in flags}, code
    manholes = gpd.read_file(gpkg, layer="manholes", engine="pyogrio").set_index("MH")
    assert list(manholes.columns[-3:]) == [*(f"flag_{code}" for code in MANHOLE_FLAG_CODES), "geometry"]  # after the computed fields
    assert set(manholes.index[manholes["flag_flooding"]]) == {name for name, state in EXPECTED_FLOOD_STATES.items() if state == "flooding"}
    assert set(manholes.index[manholes["flag_manhole_surcharge"]]) == {name for name, state in EXPECTED_FLOOD_STATES.items() if state == "surcharged"}
    assert "findings" in pipes.columns  # the pipe layer carries its data-finding codes, as the manhole layer does


@pytest.mark.parametrize("system", ["si", "us"])
def test_every_computed_field_is_described_with_its_unit_and_no_user_field_is(tmp_path: Path, system: str) -> None:
    units = US if system == "us" else SI
    path = _audit(tmp_path, units=system)
    with sqlite3.connect(path) as connection:
        rows = connection.execute("SELECT table_name, column_name, name, title, description FROM gpkg_data_columns").fetchall()
        extensions = connection.execute("SELECT table_name, extension_name, scope FROM gpkg_extensions WHERE extension_name = 'gpkg_schema'").fetchall()
    assert sorted(extensions) == [("gpkg_data_column_constraints", "gpkg_schema", "read-write"), ("gpkg_data_columns", "gpkg_schema", "read-write")]
    described = {(table, column): (title, description) for table, column, name, title, description in rows if name == column}
    assert len(described) == len(rows)
    expected_pipes = {output_name(name, units) for name in PIPE_COLUMNS} | {f"flag_{code}" for code in FLAG_CODES}
    assert {column for table, column in described if table == "pipes"} == expected_pipes
    assert {column for table, column in described if table == "manholes"} == {output_name(name, units) for name in MANHOLE_COLUMNS} | {
        f"flag_{code}" for code in MANHOLE_FLAG_CODES}  # fmt: skip
    flow = output_name("q_design", units)
    title, description = described[("pipes", flow)]
    unit = units.unit(COLUMN_UNITS["q_design"][1])
    assert title == f"Design flow [{unit}]"
    assert f"[{unit}]" in description
    assert ("[m3/s]" not in description or unit == "m3/s")
    assert described[("pipes", "flag_surcharge")][0] == "Flag: surcharge"
    assert ("pipes", "REF") not in described
    assert ("manholes", "COVER") not in described
