"""The compare command: one clear line and exit 1 for input that is not an audit, exit 2 for usage."""

import json
import shutil
from collections.abc import Callable
from pathlib import Path

import geopandas as gpd
import pyogrio
import pytest
import shapely

from audit import cli


def _one_line_error(capsys: pytest.CaptureFixture[str]) -> str:
    captured = capsys.readouterr()
    assert "Traceback" not in captured.err
    lines = captured.err.strip().splitlines()
    assert len(lines) == 1, captured.err
    return lines[0]


def test_a_folder_that_is_not_an_audit(audits: dict[str, Path], compare: Callable[..., tuple[int, Path]], tmp_path: Path,
                                       capsys: pytest.CaptureFixture[str]) -> None:  # fmt: skip
    empty = tmp_path / "not_an_audit"
    empty.mkdir()
    assert compare(empty, audits["after"])[0] == cli.EXIT_BAD_INPUT
    line = _one_line_error(capsys)
    assert str(empty) in line
    assert "audit.gpkg" in line
    assert "OLD" in line


def test_a_path_that_does_not_exist(audits: dict[str, Path], compare: Callable[..., tuple[int, Path]], tmp_path: Path,
                                    capsys: pytest.CaptureFixture[str]) -> None:  # fmt: skip
    assert compare(audits["before"], tmp_path / "missing")[0] == cli.EXIT_BAD_INPUT
    assert "NEW" in _one_line_error(capsys)


def test_a_summary_that_does_not_parse(audits: dict[str, Path], compare: Callable[..., tuple[int, Path]], tmp_path: Path,
                                       capsys: pytest.CaptureFixture[str]) -> None:  # fmt: skip
    broken = tmp_path / "broken"
    shutil.copytree(audits["after"], broken)
    (broken / "summary.json").write_text('{"units": {"system": "si"', encoding="utf-8")
    assert compare(audits["before"], broken)[0] == cli.EXIT_BAD_INPUT
    line = _one_line_error(capsys)
    assert str(broken / "summary.json") in line
    assert "not valid JSON" in line


def _audit_folder(folder: Path, *, summary_from: Path, layers: dict[str, gpd.GeoDataFrame]) -> Path:
    """A folder with another audit's summary.json and an audit.gpkg holding only ``layers``."""
    folder.mkdir()
    shutil.copyfile(summary_from / "summary.json", folder / "summary.json")
    for number, (name, frame) in enumerate(layers.items()):
        pyogrio.write_dataframe(frame, folder / "audit.gpkg", layer=name, driver="GPKG", append=number > 0)
    return folder


def test_a_geopackage_without_the_pipes_layer(audits: dict[str, Path], compare: Callable[..., tuple[int, Path]], tmp_path: Path,
                                              capsys: pytest.CaptureFixture[str]) -> None:  # fmt: skip
    manholes = pyogrio.read_dataframe(audits["after"] / "audit.gpkg", layer="manholes")
    partial = _audit_folder(tmp_path / "partial", summary_from=audits["after"], layers={"manholes": manholes})
    assert compare(partial / "audit.gpkg", audits["after"])[0] == cli.EXIT_BAD_INPUT
    line = _one_line_error(capsys)
    assert str(partial / "audit.gpkg") in line
    assert "'pipes'" in line


def test_a_pipes_layer_without_the_flags(audits: dict[str, Path], compare: Callable[..., tuple[int, Path]], tmp_path: Path,
                                         capsys: pytest.CaptureFixture[str]) -> None:  # fmt: skip
    register = gpd.GeoDataFrame({"REF": ["P1"]}, geometry=[shapely.LineString([(0, 0), (1, 0)])], crs="EPSG:32630")
    stripped = _audit_folder(tmp_path / "stripped", summary_from=audits["after"], layers={"pipes": register})
    assert compare(audits["before"], stripped)[0] == cli.EXIT_BAD_INPUT
    line = _one_line_error(capsys)
    assert "layer pipes" in line
    assert "'flags'" in line


def test_an_id_field_that_the_layer_lacks(audits: dict[str, Path], compare: Callable[..., tuple[int, Path]], capsys: pytest.CaptureFixture[str]) -> None:
    assert compare(audits["before"], audits["after"], "--pipe-id", "ASSET")[0] == cli.EXIT_BAD_INPUT
    line = _one_line_error(capsys)
    assert "'ASSET'" in line
    assert "--pipe-id" in line
    assert "layer pipes" in line


def test_ids_unknown_fall_back_to_geometry_and_say_so(audits: dict[str, Path], compare: Callable[..., tuple[int, Path]], tmp_path: Path) -> None:
    anonymous = tmp_path / "anonymous"
    shutil.copytree(audits["after"], anonymous)
    summary = json.loads((anonymous / "summary.json").read_text(encoding="utf-8"))
    summary["config"] = None  # an audit made in Python, with no config file
    (anonymous / "summary.json").write_text(json.dumps(summary), encoding="utf-8")
    code, out = compare(audits["before"], anonymous)
    assert code == 0
    written = json.loads((out / "compare.json").read_text(encoding="utf-8"))
    assert written["matching"]["pipes"]["id_field_new"] is None
    assert any(note.startswith("NEW pipes: no id field") for note in written["notes"])
    # the same changes are found by the ends alone: P1, P2 and P3 lie where they lay
    assert written["changes"]["pipes"] == {"added": 2, "removed": 1, "changed": 2, "unchanged": 1, "worse": 0, "better": 2, "mixed": 0}


def test_output_rules_as_for_run(audits: dict[str, Path], tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    out = tmp_path / "out"
    arguments = ["compare", str(audits["before"]), str(audits["after"]), "-o", str(out), "-q"]
    assert cli.main(arguments) == cli.EXIT_OK
    (out / "notes.txt").write_text("mine", encoding="utf-8")
    assert cli.main(arguments) == cli.EXIT_USAGE  # the folder holds files
    assert "--overwrite" in _one_line_error(capsys)
    assert cli.main([*arguments, "--overwrite"]) == cli.EXIT_OK
    assert (out / "notes.txt").read_text(encoding="utf-8") == "mine"  # other files are carried over
    assert sorted(path.name for path in out.iterdir()) == ["changes.csv", "compare.gpkg", "compare.html", "compare.json", "notes.txt"]
    into_audit = ["compare", str(audits["before"]), str(audits["after"]), "-o", str(audits["after"]), "-q", "--overwrite"]
    assert cli.main(into_audit) == cli.EXIT_USAGE
    assert "NEW" in _one_line_error(capsys)


@pytest.mark.parametrize("tolerance", ["-1", "nan", "wide"])
def test_a_bad_tolerance_is_a_usage_error(audits: dict[str, Path], tmp_path: Path, tolerance: str) -> None:
    with pytest.raises(SystemExit) as stop:
        cli.main(["compare", str(audits["before"]), str(audits["after"]), "-o", str(tmp_path / "out"), "--tolerance", tolerance])
    assert stop.value.code == cli.EXIT_USAGE


def test_help_teaches_the_command(capsys: pytest.CaptureFixture[str]) -> None:
    with pytest.raises(SystemExit) as stop:
        cli.main(["compare", "--help"])
    assert stop.value.code == 0
    text = capsys.readouterr().out
    for words in ("--fail-on-new", "--tolerance", "compare.gpkg", "changes.csv", "compare.json", "compare.html", "docs/compare.md"):
        assert words in text
