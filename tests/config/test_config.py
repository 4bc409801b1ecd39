"""Loading the TOML configuration: defaults, paths, and one test per kind of bad input."""

from pathlib import Path

import numpy as np
import pytest

from audit.config import load_config
from audit.errors import ConfigError


def _write(folder: Path, text: str) -> Path:
    path = folder / "town.toml"
    path.write_text(text, encoding="utf-8")
    return path


def _problem(folder: Path, text: str) -> str:
    path = _write(folder, text)
    with pytest.raises(ConfigError) as error:
        load_config(path)
    message = str(error.value)
    assert str(path.resolve()) in message
    return message


def test_minimal_config_takes_documented_defaults(tmp_path: Path) -> None:
    config = load_config(_write(tmp_path, '[pipes]\npath = "data/pipes.gpkg"\n'))
    assert config.pipes.path == (tmp_path / "data" / "pipes.gpkg").resolve()
    assert config.pipes.layer is None
    assert config.pipes.crs is None
    assert config.manholes is None
    assert dict(config.pipes.fields) == {}
    assert config.pipes.units["diameter"] == "mm"
    assert config.pipes.units["upstream_invert"] == "m"
    assert config.pipes.units["flow"] == "l/s"
    assert config.pipes.units["length"] == "m"
    assert config.input.engine == "pyogrio"
    assert config.input.sentinels == (-9999.0, -999.0)
    assert config.network.snap_tolerance_m == 1.0
    assert config.network.direction == "ids"
    assert config.network.length_tolerance_ratio == 0.05
    assert config.network.length_tolerance_m == 0.5
    assert config.hydraulics.formula == "manning"
    assert config.hydraulics.manning_n == 0.013
    assert config.hydraulics.ks_mm == 1.5
    assert config.hydraulics.water_temp_c == 15.0


FULL = """
[input]
engine = "fiona"
sentinels = [-1, 9999.5]
[pipes]
path = "town.gpkg"
layer = "sewers"
crs = "EPSG:27700"
[pipes.fields]
id = "PIPE_REF"
diameter = "DIA"
upstream_invert = "US_IL"
[pipes.units]
diameter = "in"
upstream_invert = "FT"
flow = "MGD"
[pipes.shapes]
C = "circular"
E = "egg"
[pipes.kinds]
GRAV = "gravity"
FM = "rising_main"
ABAN = "abandoned"
[pipes.sentinels]
upstream_invert = 0
diameter = [0, 99]
[manholes]
path = "../shared/nodes.geojson"
[manholes.fields]
id = "MH"
inflow = "Q"
[manholes.units]
inflow = "gpm"
[manholes.kinds]
LS = "pump_station"
[network]
direction = "digitised"
snap_tolerance_m = 0.25
[hydraulics]
formula = "colebrook-white"
ks_mm = 0.6
[rules]
min_velocity_m_s = 0.7
min_slope = [[150, 0.0067], [225, 0.004]]
"""


def test_full_config_is_read_into_frozen_dataclasses(tmp_path: Path) -> None:
    config = load_config(_write(tmp_path, FULL))
    assert config.input.engine == "fiona"
    assert config.input.sentinels == (-1.0, 9999.5)
    assert config.pipes.layer == "sewers"
    assert config.pipes.crs == "EPSG:27700"
    assert dict(config.pipes.fields) == {"id": "PIPE_REF", "diameter": "DIA", "upstream_invert": "US_IL"}
    assert config.pipes.units["diameter"] == "in"
    assert config.pipes.units["upstream_invert"] == "ft"
    assert config.pipes.units["flow"] == "mgd"
    assert config.pipes.units["height"] == "mm"
    assert dict(config.pipes.shapes) == {"C": "circular", "E": "egg"}
    assert dict(config.pipes.kinds) == {"GRAV": "gravity", "FM": "rising_main", "ABAN": "abandoned"}
    assert dict(config.pipes.sentinels) == {"upstream_invert": (0.0,), "diameter": (0.0, 99.0)}
    assert config.manholes is not None
    assert config.manholes.path == (tmp_path.parent / "shared" / "nodes.geojson").resolve()
    assert config.manholes.units["inflow"] == "gpm"
    assert config.manholes.units["rim"] == "m"
    assert dict(config.manholes.kinds) == {"LS": "pump_station"}
    assert config.network.direction == "digitised"
    assert config.network.snap_tolerance_m == 0.25
    assert config.hydraulics.formula == "colebrook-white"
    assert config.hydraulics.ks_mm == 0.6
    with pytest.raises(AttributeError):
        config.network.direction = "ids"  # type: ignore[misc]


def test_rules_are_parsed_at_load_and_the_raw_table_is_read_only(tmp_path: Path) -> None:
    config = load_config(_write(tmp_path, FULL))
    assert config.rules.min_velocity == 0.7
    assert config.rules.min_slope is not None
    assert list(config.rules.min_slope.lookup(np.array([0.15, 0.2, 0.3]))) == [0.0067, 0.0067, 0.004]
    rules = config.rules_table
    assert rules["min_velocity_m_s"] == 0.7
    with pytest.raises(TypeError):
        rules["min_velocity_m_s"] = 1.0  # type: ignore[index]
    with pytest.raises(TypeError):
        rules["min_slope"][0][1] = 0.0  # type: ignore[index]


def test_a_misspelt_rule_fails_at_load_naming_file_and_key(tmp_path: Path) -> None:
    path = _write(tmp_path, '[pipes]\npath = "a.gpkg"\n[rules]\nmax_velocty = 2.5\n')
    with pytest.raises(ConfigError, match=r"town.toml: rules.max_velocty: unknown key \(did you mean 'max_velocity_m_s'\?\)"):
        load_config(path)


P = '[pipes]\npath = "a.gpkg"\n'


@pytest.mark.parametrize(
    ("text", "expected"),
    [
        pytest.param(P + '[pipes.fields]\ndiametre = "DIA"\n',
                     "pipes.fields.diametre: unknown key; did you mean 'diameter'?", id="unknown-key-close"),
        pytest.param(P + '[colours]\npipe = "red"\n', "colours: unknown key; known keys: input, pipes",
                     id="unknown-table"),
        pytest.param(P + '[network]\nsnap_tolerance_m = "one"\n',
                     "network.snap_tolerance_m: expected a number >= 0, got 'one'", id="wrong-type"),
        pytest.param(P + "[hydraulics]\nmanning_n = true\n", "hydraulics.manning_n: expected a number",
                     id="boolean-not-number"),
        pytest.param(P + '[pipes.units]\ndiameter = "cm"\n',
                     "pipes.units.diameter: expected a length unit, one of m, mm, ft, in, got 'cm'", id="unit"),
        pytest.param(P + '[manholes]\npath = "b.gpkg"\n[manholes.units]\nrim = "l/s"\n',
                     "manholes.units.rim: expected a length unit", id="flow-unit-on-level"),
        pytest.param(P + '[hydraulics]\nformula = "chezy"\n',
                     "hydraulics.formula: expected one of 'manning', 'colebrook-white', got 'chezy'", id="choice"),
        pytest.param('[input]\nengine = "gdal"\n' + P, "input.engine: expected one of 'pyogrio', 'fiona'",
                     id="engine"),
        pytest.param(P + '[pipes.shapes]\nOV = "oval"\n',
                     "pipes.shapes.OV: expected one of 'circular', 'rectangular', 'egg', 'open_rectangular', 'trapezoidal', got 'oval'", id="shape"),
        pytest.param('[input]\nsentinels = ["none"]\n' + P, "input.sentinels: expected an array of numbers",
                     id="sentinels"),
        pytest.param(P + '[pipes.kinds]\nFM = "force_main"\n',
                     "pipes.kinds.FM: expected one of 'gravity', 'private', 'rising_main', 'siphon', 'overflow', 'abandoned', got 'force_main'",
                     id="pipe-kind"),
        pytest.param(P + '[manholes]\npath = "b.gpkg"\n[manholes.kinds]\nLS = "lift"\n',
                     "manholes.kinds.LS: expected one of 'manhole', 'chamber', 'pump_station', 'outfall', got 'lift'", id="node-kind"),
        pytest.param(P + '[pipes.sentinels]\ndiameter = ["zero"]\n', "pipes.sentinels.diameter: expected a number or an array of numbers",
                     id="field-sentinels"),
        pytest.param(P + '[pipes.sentinels]\ndiam = 0\n', "pipes.sentinels.diam: unknown key; did you mean 'diameter'?",
                     id="field-sentinels-key"),
        pytest.param(P + '[catchments]\npath = "c.gpkg"\n[catchments.kinds]\nX = "manhole"\n', "catchments.kinds: unknown key",
                     id="kinds-only-for-pipes-and-manholes"),
        pytest.param(P + 'crs = "EPSG:0"\n', "pipes.crs: expected a CRS", id="crs"),
        pytest.param('[pipes]\nlayer = "sewers"\n',
                     "pipes.path: expected the path of the layer's file (required)", id="path-required"),
        pytest.param(P + "[hydraulics]\nwater_temp_c = 120\n", "hydraulics.water_temp_c: expected a water",
                     id="temperature"),
    ],
)  # fmt: skip
def test_bad_value_names_file_and_dotted_key(tmp_path: Path, text: str, expected: str) -> None:
    assert expected in _problem(tmp_path, text)


def test_all_problems_are_reported_at_once(tmp_path: Path) -> None:
    message = _problem(tmp_path, '[pipes]\npath = "a.gpkg"\nlayr = "x"\n[network]\ndirection = "up"\n')
    assert "pipes.layr" in message
    assert "network.direction" in message


def test_not_toml_names_the_file(tmp_path: Path) -> None:
    message = _problem(tmp_path, "[pipes\npath = 'a.gpkg'\n")
    assert "not valid TOML" in message


def test_missing_file_names_the_file(tmp_path: Path) -> None:
    with pytest.raises(ConfigError, match="nowhere.toml: configuration file not found"):
        load_config(tmp_path / "nowhere.toml")


def test_flows_default_to_the_given_flows_as_before(tmp_path: Path) -> None:
    config = load_config(_write(tmp_path, '[pipes]\npath = "p.gpkg"\n'))
    assert config.flows.kind == "given"
    assert config.flows.rainfall is None
    assert config.catchments is None
    assert config.flows.population_growth == 1.0
    assert config.flows.rainfall_uplift == 1.0
    assert config.flows.urban_creep == 0.0
    assert config.flows.peaking == "harmon"
    assert config.manholes is None


COMBINED = """
[pipes]
path = "p.gpkg"
[manholes]
path = "p.gpkg"
[manholes.fields]
population = "POP"
point_load = "TRADE"
[manholes.units]
point_load = "m3/s"
[catchments]
path = "areas.gpkg"
layer = "subareas"
[catchments.fields]
id = "AREA_ID"
drains_to = "OUTLET_MH"
impervious_fraction = "IMP"
[flows]
kind = "combined"
per_capita_l_day = 250
peaking = [[1000, 3.5], [10000, 2.5]]
infiltration_l_s_km = 0.2
population_growth = 1.25
rainfall_uplift = 1.4
urban_creep = 0.1
[flows.rainfall]
table = [[5, 120.0], [60, 30.0]]
inlet_time_min = 7
return_period_years = 30
"""


def test_flows_catchments_and_manhole_loads_are_read(tmp_path: Path) -> None:
    config = load_config(_write(tmp_path, COMBINED))
    flows, rain = config.flows, config.flows.rainfall
    assert flows.kind == "combined"
    assert flows.builds_sanitary
    assert flows.needs_rainfall
    assert flows.per_capita_l_day == 250.0
    assert flows.peaking == "table"
    assert flows.peaking_table == ((1000.0, 3.5), (10000.0, 2.5))
    assert flows.infiltration_l_s_km == 0.2
    assert (flows.population_growth, flows.rainfall_uplift, flows.urban_creep) == (1.25, 1.4, 0.1)
    assert rain is not None
    assert rain.a is None
    assert rain.table == ((5.0, 120.0), (60.0, 30.0))
    assert rain.inlet_time_min == 7.0
    assert rain.return_period_years == 30.0
    assert config.catchments is not None
    assert config.catchments.layer == "subareas"
    assert dict(config.catchments.fields) == {"id": "AREA_ID", "drains_to": "OUTLET_MH", "impervious_fraction": "IMP"}
    assert config.manholes is not None
    assert config.manholes.units["point_load"] == "m3/s"
    assert config.manholes.fields["population"] == "POP"


@pytest.mark.parametrize(
    ("body", "expected"),
    [
        ('[flows]\nkind = "foul"\n', "flows.kind: expected one of"),
        ('[flows]\npeaking = "harman"\n', "flows.peaking: expected one of"),
        ('[flows]\npeaking = [[1000, 3.0], [500, 2.0]]\n', "flows.peaking: expected an array of at least two"),
        ('[flows]\npopulation_growth = 0\n', "flows.population_growth: expected a number"),
        ('[flows]\ngrowth_factor = 1.2\n', "flows.growth_factor: expected no longer a key: it is replaced by population_growth"),
        ('[flows]\nc_pervious = 1.5\n', "flows.c_pervious: expected a runoff coefficient"),
        ('[flows]\ntc_max_iterations = 0\n', "flows.tc_max_iterations: expected a whole number"),
        ('[flows]\nper_capita = 200\n', "flows.per_capita: unknown key; did you mean 'per_capita_l_day'?"),
        ('[flows]\nkind = "storm"\n', "flows.rainfall: expected a rainfall table"),
        ('[flows]\nkind = "storm"\n[flows.rainfall]\na = 1000\n', "catchments: expected a catchment layer"),
        ('[flows.rainfall]\na = 1000\ntable = [[5, 100], [10, 80]]\n', "flows.rainfall: expected either a"),
        ('[flows.rainfall]\nb = 10\n', "flows.rainfall: expected either a"),
        ('[flows.rainfall]\na = 1000\nduration = 5\n', "flows.rainfall.duration: unknown key"),
        ('[catchments]\npath = "a.gpkg"\n[catchments.fields]\nrunoff = "C"\n', "catchments.fields.runoff: unknown key"),
        ('[catchments]\npath = "a.gpkg"\n[catchments.units]\narea_ha = "km2"\n', "catchments.units.area_ha: expected an area unit, one of ha, ac, m2"),
        ('[manholes]\npath = "m.gpkg"\n[manholes.units]\npoint_load = "litres"\n', "manholes.units.point_load: expected a flow unit"),
    ],
)
def test_bad_flow_settings_name_file_and_key(tmp_path: Path, body: str, expected: str) -> None:
    assert expected in _problem(tmp_path, '[pipes]\npath = "p.gpkg"\n' + body)


def test_the_complete_example_in_the_docs_loads(tmp_path: Path) -> None:
    text = (Path(__file__).resolve().parents[2] / "docs" / "config.md").read_text(encoding="utf-8")
    example = text.split("## A complete example", 1)[1].split("```toml\n", 1)[1].split("```", 1)[0]
    config = load_config(_write(tmp_path, example))
    assert config.pipes.fields["from_node"] == "US_MH"
    assert config.rules.min_velocity == 0.75


def test_flows_in_us_units_are_the_same_settings(tmp_path: Path) -> None:
    text = ('[pipes]\npath = "p.gpkg"\n[catchments]\npath = "c.gpkg"\n[flows]\nkind = "combined"\nper_capita_gal_day = 100\n'
            'infiltration_gal_day_mile = 2000\nload_per_manhole_gpm = 15\npersons_per_mile = 1609.344\nfallback_velocity_ft_s = 2\n'
            '[flows.rainfall]\nintensity_unit = "in/h"\ntable = [[5, 4.0], [60, 1.0]]\n')  # fmt: skip
    flows = load_config(_write(tmp_path, text)).flows
    # Source: NIST SP 811 (2008), appendix B: 1 US gallon = 3.785411784 l, 1 mile = 1.609344 km, 1 in = 25.4 mm
    assert flows.per_capita_l_day == pytest.approx(378.5411784)
    assert flows.infiltration_l_s_km == pytest.approx(2000 * 3.785411784 / 86400 / 1.609344)
    assert flows.load_per_manhole_l_s == pytest.approx(15 * 3.785411784 / 60)
    assert flows.persons_per_km == pytest.approx(1000.0)
    assert flows.fallback_velocity_m_s == pytest.approx(0.6096)
    assert flows.rainfall is not None
    assert [intensity for _, intensity in flows.rainfall.table] == pytest.approx([101.6, 25.4])
    with pytest.raises(ConfigError, match="flows.per_capita_gal_day: expected one of flows.per_capita_l_day and flows.per_capita_gal_day"):
        load_config(_write(tmp_path, '[pipes]\npath = "p.gpkg"\n[flows]\nper_capita_l_day = 200\nper_capita_gal_day = 50\n'))
