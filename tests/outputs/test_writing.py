"""Outputs stage: GeoPackage round trip, atomic writes, folder refusal, summary and candidates."""

import csv
import io
import json
import math
from pathlib import Path

import geopandas as gpd
import numpy as np
import pandas as pd
import pytest
import shapely

from audit.about import CAUTION
from audit.errors import AuditError, OutputExistsError
from audit.outputs import geopackage, print_summary_table, rank_candidates, write_outputs
from audit.outputs import writing as outputs
from audit.result import COLUMN_UNITS, FINDING_COLUMNS, PIPE_COLUMNS, AuditResult, output_name
from audit.rules import FLAG_CODES, RuleSettings
from audit.units import SI

CRS = "EPSG:27700"
ORIGINAL = ["Pipe ID", "DIAM_MM_10", "Up Level", "note", "laid", "isPublic", "fid", "geom"]


def _pipes() -> gpd.GeoDataFrame:
    """Four pipes of an invented street: awkward original fields, then the computed columns."""
    original = {
        "Pipe ID": ["P1", "P2", "P3", "P4"],  # space in the name
        "DIAM_MM_10": np.array([225, 300, 150, 375], dtype="int64"),  # 10-character Shapefile name
        "Up Level": [12.5, np.nan, 11.75, 10.0],  # float with NaN
        "note": ["cracked", None, "", "relined"],  # str with None
        "laid": ["1968-04-01", None, "2001-11-30", "1985-06-15"],  # dates as strings
        "isPublic": [True, False, True, True],  # bool, mixed case
        "fid": ["a", "b", "c", "d"],  # the GeoPackage id column's default name, as text
        "geom": ["x", "y", "z", "w"],  # the geometry column's default name
    }
    computed = {name: np.full(4, 0.5) for name in PIPE_COLUMNS}
    computed.update({
        "length_m": [40.0, 60.0, np.nan, 25.0],
        "flow_source": ["given", "accumulated", "missing", "given"],
        "hydraulic_status": ["surcharged", "ok", "missing_flow", "ok"],
        "flags": ["surcharge;silting", "", "missing_data", "silting;flat_grade"],
        "severity": ["high", "", "low", "medium"],
        "reasons": ["load ratio 1.20 > 1.00; velocity 0.40 < 0.60", "", "no flow", "v 0.5; slope 0"],
        "from_node_id": ["M1", "M2", "J1", "M4"],
        "to_node_id": ["M2", "M3", "M3", "M5"],
        # the renewal programme: the surcharged pipe first, then the silting one
        "remedy": ["capacity: upsize", "", "", "silting: re-lay"], "remedy_kind": ["capacity", "", "", "silting"],
        "scheme_id": ["S001", "", "", ""], "likelihood": [5.0, np.nan, np.nan, 3.0], "consequence": [3.0, np.nan, np.nan, 2.0],
        "risk": [15.0, np.nan, np.nan, 6.0], "risk_driver": ["load ratio x depth", "", "", "load ratio x size"],
        "review": [0.0, 0.0, 0.0, 0.0], "renewal_rank": [1, 0, 0, 2],
    })  # fmt: skip
    geometry = shapely.linestrings([[[0, 0], [40, 0]], [[40, 0], [100, 0]], [[0, 5], [0, 9]], [[9, 9], [9, 34]]])
    return gpd.GeoDataFrame({**original, **computed}, geometry=geometry, crs=CRS)


def _manholes() -> gpd.GeoDataFrame:
    frame = {"MH_REF": ["M1", "M2"], "Cover Level": [14.0, np.nan]}
    computed = {"pipes_in": [0, 1], "pipes_out": [1, 1], "flow_out": [0.01, np.nan], "findings": ["", "orphan_manhole"]}
    return gpd.GeoDataFrame({**frame, **computed}, geometry=shapely.points([[0, 0], [40, 0]]), crs=CRS)


def _findings() -> gpd.GeoDataFrame:
    rows = {
        "layer": ["pipes", "pipes", "manholes", "pipes", "pipes", "pipes", "pipes", "pipes", "pipes"],
        "feature": ["P1", "P2", "M2", "P3", "P4", "P5", "P6", "P7", "P8"],
        "code": ["duplicate_id", "duplicate_id", "orphan_manhole"] + ["length_mismatch"] * 6,
        "message": ["m"] * 9,
    }
    points = shapely.points([[1, 1], [np.nan, np.nan], [40, 0], [2, 2], [3, 3], [4, 4], [5, 5], [6, 6], [7, 7]])
    return gpd.GeoDataFrame(rows, geometry=points, crs=CRS)


def _result(tmp_path: Path, **changes: object) -> AuditResult:
    values: dict[str, object] = {
        "pipes": _pipes(), "manholes": _manholes(), "findings": _findings(), "rules": RuleSettings(),
        "settings": {"formula": "manning", "snap_tolerance_m": 0.5, "unset": float("nan")},
        "totals": {"pipes": 4, "length_m": float("nan"), "outfalls": 1},
        "missing_fields": {"pipes": ("flow",), "manholes": ()},
        "inputs": (tmp_path / "register.gpkg",), "config_path": tmp_path / "audit.toml",
    }  # fmt: skip
    values.update(changes)
    return AuditResult(**values)  # type: ignore[arg-type]


def _written(tmp_path: Path, **changes: object) -> dict[str, Path]:
    return write_outputs(_result(tmp_path, **changes), tmp_path / "out")


def _listing(folder: Path) -> list[str]:
    return sorted(path.name for path in folder.iterdir())


def test_writes_the_four_files_and_nothing_else(tmp_path: Path) -> None:
    paths = _written(tmp_path)
    assert _listing(tmp_path / "out") == ["audit.gpkg", "candidates.csv", "schemes.csv", "summary.json"]
    assert set(paths) == {"geopackage", "summary", "candidates", "schemes"}
    assert all(path.parent == tmp_path / "out" for path in paths.values())


def test_pipes_round_trip_keeps_every_original_field_and_the_computed_columns(tmp_path: Path) -> None:
    back = gpd.read_file(_written(tmp_path)["geopackage"], layer="pipes", engine="pyogrio")
    sent = _pipes()
    flag_columns = [f"flag_{code}" for code in FLAG_CODES]
    assert list(back.columns) == [*ORIGINAL, *(output_name(name, SI) for name in PIPE_COLUMNS), *flag_columns, "geometry"]
    # one yes/no column per flag, read back as booleans, true exactly where the joined text holds the code
    assert back["flag_surcharge"].tolist() == [True, False, False, False]
    assert back["flag_silting"].tolist() == [True, False, False, True]
    assert back["flag_missing_data"].tolist() == [False, False, True, False]
    assert back[flag_columns].to_numpy().sum() == 5
    assert back["flag_silting"].dtype == bool
    assert back["DIAM_MM_10"].dtype == np.int64
    assert back["isPublic"].dtype == bool
    for name in [*ORIGINAL, *PIPE_COLUMNS]:
        expected = sent[name].astype(object).where(sent[name].notna(), None).tolist()
        if name in COLUMN_UNITS:  # written in the SI output units: l/s, mm, ...
            expected = [None if value is None else float(SI.convert(value, COLUMN_UNITS[name][1])) for value in expected]
        column = output_name(name, SI)
        got = back[column].astype(object).where(back[column].notna(), None).tolist()
        assert got == pytest.approx(expected) if name in COLUMN_UNITS else got == expected, name
    assert back.crs == sent.crs
    assert back.geometry.geom_equals(sent.geometry).all()


def test_manholes_and_findings_layers(tmp_path: Path) -> None:
    path = _written(tmp_path)["geopackage"]
    manholes = gpd.read_file(path, layer="manholes", engine="pyogrio")
    assert list(manholes.columns) == ["MH_REF", "Cover Level", *(output_name(name, SI) for name in ("pipes_in", "pipes_out", "flow_out", "findings")),
                                      "geometry"]  # fmt: skip
    assert manholes["flow_out_l_s"].tolist()[0] == pytest.approx(10.0)  # 0.01 m3/s written in l/s
    assert manholes["flow_out_l_s"].isna().tolist() == [False, True]
    findings = gpd.read_file(path, layer="findings", engine="pyogrio")
    assert list(findings.columns) == [*FINDING_COLUMNS, "geometry"]
    assert findings["feature"].tolist() == ["P1", "P2", "M2", "P3", "P4", "P5", "P6", "P7", "P8"]
    assert findings.geometry.isna().tolist() == [False, True] + [False] * 7  # the NaN point has no location


def test_no_manhole_layer_when_there_are_no_manholes(tmp_path: Path) -> None:
    import pyogrio

    layers = pyogrio.list_layers(_written(tmp_path, manholes=None)["geopackage"])[:, 0].tolist()
    assert layers == ["pipes", "findings", "layer_styles"]  # the styles table, without geometry


def test_names_equal_but_for_case_are_renamed_and_reported(tmp_path: Path) -> None:
    pipes = _pipes()
    pipes.insert(1, "pipe id", ["p1", "p2", "p3", "p4"])
    path = _written(tmp_path, pipes=pipes)["geopackage"]
    back = gpd.read_file(path, layer="pipes", engine="pyogrio")
    assert back.columns[:2].tolist() == ["Pipe ID", "pipe id_2"]
    assert back["pipe id_2"].tolist() == ["p1", "p2", "p3", "p4"]
    findings = gpd.read_file(path, layer="findings", engine="pyogrio")
    renamed = findings[findings["code"] == "field_renamed"]
    assert renamed[["layer", "feature"]].values.tolist() == [["pipes", "*"]]
    assert "'pipe id'" in renamed["message"].iloc[0]
    assert "'pipe id_2'" in renamed["message"].iloc[0]


def test_an_existing_folder_with_files_is_refused(tmp_path: Path) -> None:
    out = tmp_path / "out"
    out.mkdir()
    (out / "notes.txt").write_text("mine", encoding="utf-8")
    with pytest.raises(OutputExistsError, match=r"out: the output folder already holds files; pass --overwrite to replace the outputs "
                       r"\(audit\.gpkg, summary\.json, candidates\.csv, schemes\.csv\)"):
        write_outputs(_result(tmp_path), out)
    assert _listing(out) == ["notes.txt"]


def test_an_existing_empty_folder_is_used(tmp_path: Path) -> None:
    (tmp_path / "out").mkdir()
    assert _written(tmp_path)["summary"].is_file()


def test_overwrite_replaces_our_files_and_leaves_others_alone(tmp_path: Path) -> None:
    out = tmp_path / "out"
    out.mkdir()
    (out / "notes.txt").write_text("mine", encoding="utf-8")
    (out / "summary.json").write_text("old", encoding="utf-8")
    write_outputs(_result(tmp_path), out, overwrite=True)
    assert (out / "notes.txt").read_text(encoding="utf-8") == "mine"
    assert json.loads((out / "summary.json").read_text(encoding="utf-8"))["tool"] == "sewer-audit"
    assert _listing(out) == ["audit.gpkg", "candidates.csv", "notes.txt", "schemes.csv", "summary.json"]


def test_a_target_that_is_an_input_is_refused_even_with_overwrite(tmp_path: Path) -> None:
    out = tmp_path / "out"
    out.mkdir()
    register = out / "audit.gpkg"
    register.write_bytes(b"the user's register")
    with pytest.raises(OutputExistsError, match="would replace the input"):
        write_outputs(_result(tmp_path, inputs=(out / ".." / "out" / "audit.gpkg",)), out, overwrite=True)
    assert register.read_bytes() == b"the user's register"
    assert _listing(out) == ["audit.gpkg"]


def test_an_output_folder_that_is_a_file_is_refused(tmp_path: Path) -> None:
    (tmp_path / "out").write_text("x", encoding="utf-8")
    with pytest.raises(OutputExistsError, match="is a file"):
        _written(tmp_path)


def test_a_failure_in_the_writing_process_leaves_no_file_and_keeps_the_old_ones(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    out = tmp_path / "out"
    out.mkdir()
    (out / "audit.gpkg").write_bytes(b"good old file")
    real = geopackage.arrow_layer

    def no_such_type_for_manholes(frame: gpd.GeoDataFrame, *, geometry_type: str | None) -> tuple[object, str, str | None]:
        table, kind, crs = real(frame, geometry_type=geometry_type)
        return table, ("NoSuchType" if "MH_REF" in frame.columns else kind), crs  # GDAL refuses it, in the second process

    monkeypatch.setattr(geopackage, "SECOND_PROCESS_FROM", 0)  # even these few features
    monkeypatch.setattr(geopackage, "arrow_layer", no_such_type_for_manholes)
    with pytest.raises(AuditError, match="cannot write the outputs: .*NoSuchType"):
        write_outputs(_result(tmp_path), out, overwrite=True)
    assert _listing(out) == ["audit.gpkg"]
    assert (out / "audit.gpkg").read_bytes() == b"good old file"
    assert [path.name for path in tmp_path.iterdir() if path.name.startswith(".out.")] == []  # no staging, no scratch left


def test_a_full_disk_midway_in_process_leaves_no_file_and_keeps_the_old_ones(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    out = tmp_path / "out"
    out.mkdir()
    (out / "audit.gpkg").write_bytes(b"good old file")
    real = geopackage.write_layer

    def cannot_start(*_: object) -> None:
        raise OSError(11, "Resource temporarily unavailable")  # no second process: the layers are written here

    def fail_on_manholes(frame: gpd.GeoDataFrame, path: Path, *, layer: str, geometry_type: str | None) -> None:
        if layer == "manholes":
            raise OSError(28, "No space left on device")
        real(frame, path, layer=layer, geometry_type=geometry_type)

    monkeypatch.setattr(geopackage, "SECOND_PROCESS_FROM", 0)
    monkeypatch.setattr(geopackage.LayerWriter, "_start", cannot_start)
    monkeypatch.setattr(geopackage, "write_layer", fail_on_manholes)
    with pytest.raises(AuditError, match="cannot write the outputs: .*No space left"):
        write_outputs(_result(tmp_path), out, overwrite=True)
    assert _listing(out) == ["audit.gpkg"]
    assert (out / "audit.gpkg").read_bytes() == b"good old file"


def test_a_failure_in_the_last_file_replaces_nothing(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    def fail(*_: object, **__: object) -> None:
        raise OSError(5, "Input/output error")

    monkeypatch.setattr(outputs, "write_ranked_candidates", fail)
    with pytest.raises(AuditError, match="Input/output error"):
        _written(tmp_path)
    assert not (tmp_path / "out").exists()  # nothing at all: not even an empty folder
    assert [path.name for path in tmp_path.iterdir() if path.name.startswith(".out.")] == []  # no staging left


def _summary(tmp_path: Path, **changes: object) -> dict[str, object]:
    text = _written(tmp_path, **changes)["summary"].read_text(encoding="utf-8")
    return json.loads(text, parse_constant=lambda word: pytest.fail(f"invalid JSON constant {word}"))


def test_summary_flag_counts_and_lengths(tmp_path: Path) -> None:
    flags = _summary(tmp_path)["flags"]
    assert isinstance(flags, dict)
    # by hand from _pipes: P1 surcharge+silting 40 m, P3 missing_data of unknown length, P4 silting+flat 25 m
    assert flags["surcharge"] == {"severity": "high", "pipes": 1, "length_m": 40.0}
    assert flags["silting"] == {"severity": "medium", "pipes": 2, "length_m": 65.0}
    assert flags["flat_grade"] == {"severity": "medium", "pipes": 1, "length_m": 25.0}
    assert flags["missing_data"] == {"severity": "low", "pipes": 1, "length_m": 0.0}
    assert flags["near_capacity"]["pipes"] == 0


def test_summary_leaves_out_flags_switched_off(tmp_path: Path) -> None:
    severity = {**RuleSettings().severity, "near_capacity": "off"}
    flags = _summary(tmp_path, rules=RuleSettings(severity=severity))["flags"]
    assert "near_capacity" not in flags  # type: ignore[operator]


def test_summary_severities_and_findings(tmp_path: Path) -> None:
    summary = _summary(tmp_path)
    assert summary["severity"] == {"high": 1, "medium": 1, "low": 1, "none": 1}
    findings = summary["findings"]
    assert findings["count"] == 9  # type: ignore[index]
    codes = findings["codes"]  # type: ignore[index]
    assert codes["duplicate_id"] == {"count": 2, "layers": ["pipes"], "examples": ["P1", "P2"]}
    assert codes["length_mismatch"]["count"] == 6
    assert codes["length_mismatch"]["examples"] == ["P3", "P4", "P5", "P6", "P7"]


def test_summary_header_rules_settings_and_nan_as_null(tmp_path: Path) -> None:
    from audit import __version__

    summary = _summary(tmp_path)
    assert summary["version"] == __version__
    assert str(summary["created_utc"]).endswith("Z")
    assert summary["config"] == str(tmp_path / "audit.toml")
    assert summary["caution"] == CAUTION
    assert summary["totals"] == {"pipes": 4, "length_m": None, "outfalls": 1}
    assert summary["settings"] == {"formula": "manning", "snap_tolerance_m": 0.5, "unset": None}
    assert summary["missing_fields"] == {"pipes": ["flow"], "manholes": []}
    rules = summary["rules"]
    # Source: Recommended Standards for Wastewater Facilities, 400 ft up to 15 in, 500 ft for 18 to
    # 30 in, no limit given above (from memory): 400 ft = 121.92 m, 500 ft = 152.4 m; classes at
    # the metric nominal sizes of 18 in (450 mm) and 33 in (825 mm); no limit is written as null
    assert rules["max_spacing_m"] == [[0.0, 121.92], [450.0, 152.4], [825.0, None]]  # type: ignore[index]
    assert rules["min_slope"] is None
    assert rules["severity"]["surcharge"] == "high"


def _ranking_frame() -> pd.DataFrame:
    return pd.DataFrame({
        "pipe_id": ["A", "B", "C", "D", "E", "F", "G"],
        "severity": ["medium", "high", "", "high", "low", "high", "medium"],
        "load_ratio": [2.0, np.nan, 9.0, 0.5, 5.0, 0.5, 2.0],
        "upstream_length_m": [10.0, 500.0, 1.0, 100.0, 1.0, 300.0, 20.0],
        "shape": ["circular", "egg", "circular", "circular", "circular", "rectangular", "circular"],
        "diameter": [0.225, np.nan, 0.3, 0.3, 0.15, np.nan, 0.2254],
        "height": [np.nan, 0.9, np.nan, np.nan, np.nan, 1.2, np.nan],
    })  # fmt: skip


def test_ranking_order() -> None:
    table = rank_candidates(_ranking_frame())
    # high first; among high, load ratio descending with NaN last, then upstream length descending
    assert table["pipe_id"].tolist() == ["F", "D", "B", "G", "A"]
    assert table["rank"].tolist() == [1, 2, 3, 4, 5]
    assert table["diameter_mm"].tolist() == [1200.0, 300.0, 900.0, 225.0, 225.0]


def test_ranking_includes_low_when_asked() -> None:
    assert rank_candidates(_ranking_frame(), include_low=True)["pipe_id"].tolist() == ["F", "D", "B", "G", "A", "E"]


def test_candidates_file(tmp_path: Path) -> None:
    with _written(tmp_path)["candidates"].open(encoding="utf-8", newline="") as handle:
        rows = list(csv.DictReader(handle))
    assert list(rows[0]) == [
        "rank", "pipe_id", "action", "remedy", "scheme_id", "risk", "likelihood", "consequence", "risk_driver", "severity", "flags",
        "reasons", "load_ratio", "depth_ratio", "v_design_m_s", "slope", "diameter_mm", "length_m", "upstream_length_m",
        "install_year", "material",
    ]  # fmt: skip
    assert [row["action"] for row in rows] == ["consider renewal", "consider renewal"]
    assert [row["scheme_id"] for row in rows] == ["S001", ""]
    assert [row["severity"] for row in rows] == ["high", "medium"]
    assert rows[0]["reasons"] == "load ratio 1.20 > 1.00; velocity 0.40 < 0.60"
    assert rows[0]["pipe_id"] == "#0"  # the test frame has no canonical pipe_id column
    assert rows[0]["material"] == ""
    assert math.isclose(float(rows[0]["load_ratio"]), 0.5)


def test_candidates_rounding() -> None:
    frame = _ranking_frame().assign(load_ratio=1.23456, v_design=0.987, slope=0.0012345678)
    row = rank_candidates(frame).iloc[0]
    assert (row["load_ratio"], row["v_design"], row["slope"]) == (1.235, 0.99, 0.00123)


def test_progress_bar_only_when_asked(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    write_outputs(_result(tmp_path), tmp_path / "quiet")
    assert capsys.readouterr().err == ""
    write_outputs(_result(tmp_path), tmp_path / "loud", progress=True)
    assert "writing outputs" in capsys.readouterr().err


def test_summary_table() -> None:
    stream = io.StringIO()
    result = _result(Path("nowhere"))
    print_summary_table(result, {"geopackage": Path("out/audit.gpkg")}, file=stream)
    lines = stream.getvalue().splitlines()
    assert lines[0].split() == ["flag", "severity", "pipes", "length", "km"]
    assert next(line for line in lines if line.startswith("silting ")).split() == ["silting", "medium", "2", "0.065"]
    codes = [line.split()[0] for line in lines[1 : lines.index("data findings: 9")]]
    assert set(codes) <= set(FLAG_CODES)
    assert codes == [code for code in FLAG_CODES if code in codes]  # the fixed order of docs/rules.md
    assert "data findings: 9" in lines
    assert "geopackage: out/audit.gpkg" in lines
    assert lines[-1] == CAUTION


def test_candidates_take_ids_sizes_and_materials_from_the_canonical_columns(tmp_path: Path) -> None:
    canonical = pd.DataFrame({
        "pipe_id": ["P1", "P2", "P3", "P4"], "shape": ["circular", "circular", "egg", "rectangular"],
        "diameter": [0.225, 0.3, np.nan, np.nan], "height": [0.225, 0.3, 0.9, 1.2],
        "install_year": [1968.0, np.nan, 2001.0, 1985.0], "material": ["clay", None, "concrete", "brick"],
    })  # fmt: skip
    with _written(tmp_path, canonical_pipes=canonical)["candidates"].open(encoding="utf-8", newline="") as handle:
        rows = list(csv.DictReader(handle))
    picked = [[row[name] for name in ("pipe_id", "diameter_mm", "install_year", "material")] for row in rows]
    assert picked == [["P1", "225.0", "1968.0", "clay"], ["P4", "1200.0", "1985.0", "brick"]]


def test_outputs_are_ordinary_readable_files(tmp_path: Path) -> None:
    from _small_town import write_town

    from audit.outputs.writing import write_outputs
    from audit.pipeline import run

    data = tmp_path / "data"
    data.mkdir()
    paths = write_outputs(run(write_town(data, "GPKG", ".gpkg")), tmp_path / "out")
    for path in paths.values():
        assert path.stat().st_mode & 0o044 == 0o044, path  # group and others may read (umask 022)
