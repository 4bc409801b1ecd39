"""``sewer-audit inspect`` on a register shaped like a US city's: a folder of Shapefiles in US survey feet.

The register is invented (no real place). Like real ones it holds a legacy numbering beside the
manhole ids, end-of-line and junction placeholders, zeros for unknown sizes, a 9999 level,
dates as m/d/yyyy text, pipe kinds mixed with the gravity sewers, and more point layers than
the manholes. Every expected value is counted here from the data the test writes.
"""

import hashlib
import re
import tomllib
from pathlib import Path

import geopandas as gpd
import numpy as np
import pandas as pd
import pyogrio
import pytest
from shapely.geometry import LineString, Point

from audit import cli
from audit.config import load_config
from audit.findings import FindingLog
from audit.inspect.inspection import default_target, guess_roles, inspect_layers, inspect_path
from audit.inspect.listing import describe
from audit.layers.reading import read_layers

STATE_PLANE_FT_US = "EPSG:2249"  # NAD83 / Massachusetts Mainland (ftUS): a grid in US survey feet
PIPES = 60
MANHOLES = 53
KINDS = {"GRAVITY": 40, "FORCE MAIN": 8, "ABANDONED": 5, "PVT LATERAL": 4, "INV SIPHON": 2, "UNK": 1}
STRUCTURES = {"SSMH": 45, "CLEANOUT": 4, "LIFT STA": 2, "OUTFALL": 1, "VAULT": 1}


def _pipes() -> gpd.GeoDataFrame:
    """60 pipes along a street grid; 8 stubs end at 'EOL', 6 pipes at the junction code 'JCT'."""
    rows = np.arange(PIPES)
    up = [f"MH-{i:03d}" for i in range(52)] + [f"MH-{i - 50:03d}" for i in range(52, PIPES)]
    down = [f"MH-{i + 1:03d}" for i in range(46)] + ["JCT"] * 6 + ["EOL"] * 8
    up[7] = "MH-9999"  # a typing error: names no manhole, used once
    diameter = np.array([8, 10, 12, 15, 18, 10] * 10, dtype=float)
    diameter[[3, 17, 29, 41, 55]] = 0.0  # unknown sizes typed as 0
    up_invert = 140.0 - 0.5 * rows
    up_invert[[11, 12]] = 9999.0  # "unknown" in this register's own habit
    kinds = [kind for kind, count in KINDS.items() for _ in range(count)]
    return gpd.GeoDataFrame(
        {
            "ASSET_NO": [f"SM-{i:04d}" for i in rows],
            "FROM_MH": [str(1001 + i) for i in rows],  # the numbering before the 2004 survey
            "UP_STRUCT": up,
            "DN_STRUCT": down,
            "DIAM": diameter,
            "UP_INV_EL": up_invert,
            "DN_INV_EL": 139.6 - 0.5 * rows,
            "PIPE_LEN": np.full(PIPES, 250.0),
            "MATERIAL": ["VCP", "PVC", "RCP"] * 20,
            "INSTALLED": [f"{1 + i % 12}/{1 + i % 28}/{1950 + i}" for i in rows],
            "SEWER_TYPE": kinds,
            "STATUS": ["ACTIVE"] * 55 + ["INACTIVE"] * 5,
            "DES_FLOW": np.linspace(0.2, 3.0, PIPES),  # cubic feet per second
            "NOTES": ["televised, roots at joint 3"] * PIPES,
        },
        geometry=[LineString([(700000 + 250 * i, 2900000), (700250 + 250 * i, 2900000)]) for i in rows],
        crs=STATE_PLANE_FT_US,
    )


def _structures() -> gpd.GeoDataFrame:
    kinds = [kind for kind, count in STRUCTURES.items() for _ in range(count)]
    return gpd.GeoDataFrame(
        {"STRUCT_ID": [f"MH-{i:03d}" for i in range(MANHOLES)], "RIM_ELEV": 150.0 - 0.5 * np.arange(MANHOLES),
         "SUMP_ELEV": 139.0 - 0.5 * np.arange(MANHOLES), "STRUCT_TYP": kinds},
        geometry=[Point(700000 + 250 * i, 2900000) for i in range(MANHOLES)], crs=STATE_PLANE_FT_US,
    )  # fmt: skip


def _cleanouts() -> gpd.GeoDataFrame:
    """More points than the manholes, in a layer named like nodes: the name alone would pick it."""
    return gpd.GeoDataFrame(
        {"CO_ID": [f"CO-{i:03d}" for i in range(80)], "NODE_TYPE": ["CLEANOUT"] * 80},
        geometry=[Point(700010 + 100 * i, 2900050) for i in range(80)], crs=STATE_PLANE_FT_US,
    )  # fmt: skip


def _register(tmp_path: Path) -> Path:
    folder = tmp_path / "alderwick_sewer"
    folder.mkdir()
    _pipes().to_file(folder / "sewer_mains.shp", engine="fiona")
    _structures().to_file(folder / "sewer_structures.shp", engine="fiona")
    _cleanouts().to_file(folder / "cleanout_nodes.shp", engine="pyogrio")
    return folder


def _digests(folder: Path) -> dict[str, str]:
    return {path.name: hashlib.sha256(path.read_bytes()).hexdigest() for path in folder.iterdir() if path.suffix != ".toml"}


@pytest.fixture
def inspected(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> tuple[Path, str, str]:
    """The register's folder, the printed summary and the text of the starter config."""
    folder = _register(tmp_path)
    before = _digests(folder)
    assert cli.main(["inspect", str(folder)]) == cli.EXIT_OK
    assert _digests(folder) == before  # the data is never touched
    return folder, capsys.readouterr().out, (folder / "alderwick_sewer.toml").read_text(encoding="utf-8")


def _line(text: str, table: str, key: str) -> str:
    """The one uncommented line of the config table ``[table]`` that sets ``key``."""
    body = text.split(f"\n[{table}]")[1].split("\n[")[0]
    (found,) = [line for line in body.splitlines() if re.match(rf"{re.escape(key)} = ", line)]
    return found


def _percent(share: float) -> str:
    return f"{100 * share:.0f} %"


def test_folder_config_is_named_after_the_folder_inside_it(inspected: tuple[Path, str, str]) -> None:
    folder, out, _ = inspected
    assert sorted(path.name for path in folder.glob("*.toml")) == ["alderwick_sewer.toml"]
    assert not list(folder.glob(".*"))
    assert f"Wrote the starter config {folder / 'alderwick_sewer.toml'}" in out
    assert default_target(folder) == folder.resolve() / "alderwick_sewer.toml"


def test_starter_config_loads_and_reads_the_register(inspected: tuple[Path, str, str]) -> None:
    folder, _, _ = inspected
    config = load_config(folder / "alderwick_sewer.toml")
    assert config.pipes.path == (folder / "sewer_mains.shp").resolve()
    assert config.manholes is not None
    assert config.manholes.path == (folder / "sewer_structures.shp").resolve()
    findings = FindingLog()
    layers = read_layers(config.pipes, manholes=config.manholes, options=config.input, findings=findings)
    assert layers.pipes.canonical["pipe_id"].tolist() == [f"SM-{i:04d}" for i in range(PIPES)]
    # 8 in and 10 in, read as inches: 0.2032 m and 0.254 m (1 in = 0.0254 m exactly, NIST SP 811)
    assert layers.pipes.canonical["diameter"].iloc[:2].tolist() == pytest.approx([0.2032, 0.254])
    # 140 ft, read as feet: 42.672 m (1 ft = 0.3048 m exactly, NIST SP 811)
    assert layers.pipes.canonical["upstream_invert"].iloc[0] == pytest.approx(42.672)


def test_node_fields_are_chosen_by_match_rate_not_name(inspected: tuple[Path, str, str]) -> None:
    folder, out, text = inspected
    pipes, structures = _pipes(), _structures()
    rate_up = pipes["UP_STRUCT"].isin(structures["STRUCT_ID"]).mean()
    rate_down = pipes["DN_STRUCT"].isin(structures["STRUCT_ID"]).mean()
    legacy = pipes["FROM_MH"].isin(structures["STRUCT_ID"]).mean()
    assert (round(100 * rate_up), round(100 * rate_down), round(100 * legacy)) == (98, 77, 0)  # 59/60 (one typing error), 46/60 (14 placeholders), 0/60
    assert f"from_node = UP_STRUCT: {_percent(rate_up)} of UP_STRUCT values name a manhole in STRUCT_ID" in out
    assert f"other candidates: FROM_MH {_percent(legacy)}" in out
    assert _line(text, "pipes.fields", "from_node").startswith('from_node = "UP_STRUCT"  # check this: 98 % of UP_STRUCT values')
    assert _line(text, "pipes.fields", "to_node").startswith('to_node = "DN_STRUCT"  # check this: 77 % of DN_STRUCT values name a manhole in STRUCT_ID')
    assert _line(text, "pipes.fields", "id").startswith('id = "ASSET_NO"')
    config = load_config(folder / "alderwick_sewer.toml")
    assert config.manholes is not None
    assert config.manholes.fields["id"] == "STRUCT_ID"


def test_the_manhole_layer_is_the_one_the_pipes_name(inspected: tuple[Path, str, str]) -> None:
    folder, out, _ = inspected
    roles = guess_roles(describe(folder))
    assert roles.points[0].name == "cleanout_nodes"  # by name and size alone the wrong layer
    assert "sewer_structures.shp: layer 'sewer_structures': Point, 53 features, CRS EPSG:2249  <- manholes" in out
    assert "of 2 point layers, the one the pipe ends name most: 88 % (cleanout_nodes 0 %)" in out  # (59 + 46) / 120 ends
    assert "cleanout_nodes.shp: layer 'cleanout_nodes': Point, 80 features, CRS EPSG:2249\n" in out


def test_placeholders_are_suggested_with_their_counts(inspected: tuple[Path, str, str]) -> None:
    _, out, text = inspected
    pipes = _pipes()
    ends = pd.concat([pipes["UP_STRUCT"], pipes["DN_STRUCT"]])
    unmatched = ends[~ends.isin(_structures()["STRUCT_ID"])].value_counts()
    assert unmatched.to_dict() == {"EOL": 8, "JCT": 6, "MH-9999": 1}
    (line,) = [line for line in text.splitlines() if "placeholder_ids" in line]
    assert line.startswith('# placeholder_ids = ["EOL", "JCT"]  # check this:')
    assert "EOL 8, JCT 6" in line
    assert "'EOL' (8 pipe ends), 'JCT' (6 pipe ends)" in out


def test_units_from_the_crs_and_from_value_ranges(inspected: tuple[Path, str, str]) -> None:
    _, out, text = inspected
    diameters = _pipes()["DIAM"]
    median = np.median(diameters[diameters > 0])
    assert median == 12  # of 8, 10, 12, 15, 18, 10 with five zeros left out
    assert _line(text, "pipes.fields", "diameter") == 'diameter = "DIAM"  # check this: named like diameter; median 12'
    assert _line(text, "pipes.units", "diameter") == 'diameter = "in"  # check this: median of DIAM is 12: inches (about 4 to 120)'
    for key in ("upstream_invert", "downstream_invert", "length"):
        assert _line(text, "pipes.units", key).startswith(f'{key} = "ft"  # check this: CRS unit is US survey foot')
    assert _line(text, "manholes.units", "rim").startswith('rim = "ft"  # check this: CRS unit is US survey foot')
    assert "flow = cfs: median of DES_FLOW over the full-bore area is" in out


def test_flow_unit_is_the_one_that_fits_the_pipes(inspected: tuple[Path, str, str]) -> None:
    _, out, _ = inspected
    pipes = _pipes()
    usable = pipes["DIAM"] > 0
    area = np.pi * (pipes["DIAM"][usable] * 0.0254) ** 2 / 4  # m2; 1 in = 0.0254 m (NIST SP 811)
    as_cfs = np.median(pipes["DES_FLOW"][usable] * 0.3048**3 / area)  # 1 ft3 = 0.3048^3 m3 (NIST SP 811)
    as_gpm = np.median(pipes["DES_FLOW"][usable] * 3.785411784e-3 / 60 / area)  # US gallon, NIST SP 811
    assert as_cfs < 3 < as_cfs * 100  # the test data is plausible in cfs only
    assert f"{as_cfs:.3g} m/s as cfs, {as_gpm:.3g} m/s as gpm: cfs keeps it below 3 m/s" in out


def test_sentinels_are_counted_and_suggested(inspected: tuple[Path, str, str]) -> None:
    _, out, text = inspected
    pipes = _pipes()
    zeros = int((pipes["DIAM"] == 0).sum())
    assert zeros == 5
    assert f"diameter = [0]  # check this: {zeros} of {PIPES} values are 0, which cannot be a real diameter" in text
    assert "upstream_invert = [9999]  # check this: 2 values are 9999" in text
    (row,) = [line for line in out.splitlines() if line.split()[:2] == ["diameter", "DIAM"]]
    assert row.split() == ["diameter", "DIAM", "0", "5", "0", "0", "0", "12"]  # nulls, zeros, -9999, -999, 9999, median
    config_text = text.split("[pipes.sentinels]")[1].split("\n\n")[0]
    assert tomllib.loads("[s]" + config_text)["s"] == {"diameter": [0], "upstream_invert": [9999]}


def test_kind_tables_are_written_for_the_user_to_check(inspected: tuple[Path, str, str]) -> None:
    folder, out, text = inspected
    config = load_config(folder / "alderwick_sewer.toml")
    assert dict(config.pipes.kinds) == {"GRAVITY": "gravity", "FORCE MAIN": "rising_main", "ABANDONED": "abandoned",
                                        "PVT LATERAL": "private", "INV SIPHON": "siphon"}  # fmt: skip
    assert '# "UNK" = ""  # 1 pipe: no word rule knows this code' in text
    assert config.pipes.fields["kind"] == "SEWER_TYPE"  # STATUS names kinds for only 5 of 60 pipes
    assert "STATUS 8 %" in out  # INACTIVE on 5 of 60 pipes
    assert config.manholes is not None
    assert dict(config.manholes.kinds) == {"SSMH": "manhole", "CLEANOUT": "chamber", "LIFT STA": "pump_station",
                                           "OUTFALL": "outfall", "VAULT": "chamber"}  # fmt: skip
    for code, count in KINDS.items():
        assert re.search(rf"'{code}'\s+{count}\s+->", out), code


def test_date_text_is_the_install_year(inspected: tuple[Path, str, str]) -> None:
    _, _, text = inspected
    assert _line(text, "pipes.fields", "install_year") == 'install_year = "INSTALLED"  # check this: named like install year; 100 % of its values are dates or years'


def test_guessing_reads_named_columns_through_arrow_only(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    folder = _register(tmp_path)
    calls: list[dict[str, object]] = []
    read_arrow = pyogrio.read_arrow

    def recorded(path: Path, **options: object) -> object:
        calls.append(options)
        return read_arrow(path, **options)

    def refused(*_: object, **__: object) -> None:
        raise AssertionError("features read as Python objects")

    monkeypatch.setattr(pyogrio, "read_arrow", recorded)
    monkeypatch.setattr(pyogrio, "read_dataframe", refused)
    monkeypatch.setattr(gpd, "read_file", refused)
    found = inspect_layers(describe(folder))
    assert found is not None
    assert calls
    assert all(call["read_geometry"] is False for call in calls)
    read = {name for call in calls for name in call["columns"]}  # type: ignore[attr-defined]
    assert "NOTES" not in read  # no name rule wants it
    assert {"UP_STRUCT", "DN_STRUCT", "DIAM", "STRUCT_ID"} <= read


def test_existing_config_is_never_overwritten(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    folder = _register(tmp_path)
    target = folder / "alderwick_sewer.toml"
    target.write_text("# my own settings\n", encoding="utf-8")
    assert cli.main(["inspect", str(folder)]) == cli.EXIT_OK
    assert target.read_text(encoding="utf-8") == "# my own settings\n"
    assert "exists and was left unchanged" in capsys.readouterr().out


def test_config_out_chooses_the_file(tmp_path: Path) -> None:
    folder = _register(tmp_path)
    target = tmp_path / "configs" / "town.toml"
    target.parent.mkdir()
    assert cli.main(["inspect", str(folder / "sewer_mains.shp"), "--config-out", str(target)]) == cli.EXIT_OK
    assert load_config(target).pipes.path == (folder / "sewer_mains.shp").resolve()
    assert not (folder / "sewer_mains.audit.toml").exists()


def test_a_file_gets_its_config_beside_it(tmp_path: Path) -> None:
    folder = _register(tmp_path)
    assert inspect_path(folder / "sewer_mains.shp").endswith("check every line marked 'check this'.")
    assert (folder / "sewer_mains.audit.toml").exists()


def test_layer_without_crs_gets_a_crs_reminder(tmp_path: Path) -> None:
    path = tmp_path / "drains.shp"
    frame = gpd.GeoDataFrame({"REF": ["D1"], "LEVEL_US": [3.0]}, geometry=[LineString([(0, 0), (5, 0)])])
    with pytest.warns(UserWarning, match="'crs' was not provided"):
        frame.to_file(path)
    assert cli.main(["inspect", str(tmp_path)]) == cli.EXIT_OK
    text = (tmp_path / f"{tmp_path.name}.toml").read_text(encoding="utf-8")
    assert "# required: the layer has no CRS" in text
    assert 'path = "drains.shp"' in text
    assert 'upstream_invert = "m"  # check this: the layer has no CRS; the default applies' in text


def test_no_line_layer_writes_no_config(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    _structures().to_file(tmp_path / "only_points.gpkg")
    assert cli.main(["inspect", str(tmp_path / "only_points.gpkg")]) == cli.EXIT_OK
    assert "No line layer found" in capsys.readouterr().out
    assert not list(tmp_path.glob("*.toml"))


def test_missing_file_exits_1_naming_the_file(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    missing = tmp_path / "nowhere.gpkg"
    assert cli.main(["inspect", str(missing)]) == cli.EXIT_BAD_INPUT
    assert f"{missing}: file not found" in capsys.readouterr().err


def test_unreadable_file_exits_1_naming_the_file(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    path = tmp_path / "broken.gpkg"
    path.write_bytes(b"this is not a vector file")
    assert cli.main(["inspect", str(path)]) == cli.EXIT_BAD_INPUT
    assert f"{path}: not a readable vector file" in capsys.readouterr().err
    assert path.read_bytes() == b"this is not a vector file"
