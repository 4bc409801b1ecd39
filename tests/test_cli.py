"""The command line's help and exit codes."""

import fcntl
import io
import json
import os
import subprocess
import sys
from pathlib import Path

import geopandas as gpd
import pytest
from _small_town import write_town
from shapely.geometry import LineString

from audit import cli


def test_help_teaches_commands_and_exit_codes(capsys: pytest.CaptureFixture[str]) -> None:
    with pytest.raises(SystemExit) as stop:
        cli.main(["--help"])
    assert stop.value.code == 0
    text = capsys.readouterr().out
    for word in ("inspect", "run", "demo", "Exit codes", "licensed engineer"):
        assert word in text


def test_unknown_command_is_a_usage_error() -> None:
    with pytest.raises(SystemExit) as stop:
        cli.main(["frobnicate"])
    assert stop.value.code == cli.EXIT_USAGE


def _town(tmp_path: Path, driver: str = "GPKG", suffix: str = ".gpkg") -> Path:
    data = tmp_path / "data"
    data.mkdir()
    return write_town(data, driver, suffix)


@pytest.mark.parametrize(("driver", "suffix"), [("GPKG", ".gpkg"), ("ESRI Shapefile", ".shp")])
def test_run_writes_layers_that_hand_back_every_feature_and_field(tmp_path: Path, driver: str, suffix: str) -> None:
    config = _town(tmp_path, driver, suffix)
    before = {path.name: path.read_bytes() for path in config.parent.iterdir()}
    assert cli.main(["run", str(config), "-o", str(tmp_path / "out"), "-q"]) == cli.EXIT_OK
    assert {path.name: path.read_bytes() for path in config.parent.iterdir()} == before
    original = gpd.read_file(config.parent / f"pipes{suffix}")
    written = gpd.read_file(tmp_path / "out" / "audit.gpkg", layer="pipes")
    assert len(written) == len(original)
    for column in original.columns.drop("geometry"):
        assert written[column].equals(original[column]), column
    assert written.geometry.geom_equals_exact(original.geometry, tolerance=0).all()
    assert written.crs == original.crs
    assert set(written.loc[written["REF"] == "P3", "flags"].iloc[0].split(";")) == {"surcharge", "below_min_diameter", "diameter_decrease"}
    manholes = gpd.read_file(tmp_path / "out" / "audit.gpkg", layer="manholes")
    assert len(manholes) == 6
    assert manholes.loc[manholes["MH"] == "E", "pipes_in"].iloc[0] == 1
    summary = json.loads((tmp_path / "out" / "summary.json").read_text())
    assert summary["flags"]["surcharge"]["pipes"] == 1
    assert "licensed engineer" in summary["caution"]


def test_exit_codes_for_scripts(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    config = _town(tmp_path)
    out = tmp_path / "out"
    assert cli.main(["run", str(config), "-o", str(out), "-q", "--fail-on", "high"]) == cli.EXIT_FLAGGED
    # the folder now holds our files: refused without --overwrite, nothing replaced
    stamp = (out / "summary.json").stat().st_mtime_ns
    assert cli.main(["run", str(config), "-o", str(out), "-q"]) == cli.EXIT_USAGE
    refusal = capsys.readouterr().err
    assert "--overwrite" in refusal
    listed = refusal.split("replace the outputs (")[1].split(")")[0].split(", ")
    assert sorted(listed) == sorted(path.name for path in out.iterdir())  # every file the run wrote, report.html too
    assert (out / "summary.json").stat().st_mtime_ns == stamp
    assert cli.main(["run", str(config), "-o", str(out), "-q", "--overwrite"]) == cli.EXIT_OK
    # a bad config: exit 1 with the file and key named, no traceback
    bad = tmp_path / "bad.toml"
    bad.write_text('[pipes]\npath = "data/pipes.gpkg"\n[hydraulics]\nformula = "darcy"\n', encoding="utf-8")
    capsys.readouterr()
    assert cli.main(["run", str(bad), "-o", str(tmp_path / "o2")]) == cli.EXIT_BAD_INPUT
    error = capsys.readouterr().err
    assert "bad.toml" in error
    assert "hydraulics.formula" in error
    assert "Traceback" not in error
    # a mapped field that the layer does not have: exit 1 naming the field
    config.write_text(config.read_text().replace('diameter = "DIA"', 'diameter = "BORE"'), encoding="utf-8")
    assert cli.main(["run", str(config), "-o", str(tmp_path / "o3")]) == cli.EXIT_BAD_INPUT
    assert "BORE" in capsys.readouterr().err
    with pytest.raises(SystemExit) as stop:
        cli.main(["run", str(config)])
    assert stop.value.code == cli.EXIT_USAGE


def test_demo_runs_on_the_bundled_town_and_prints_a_table(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    assert cli.main(["demo", "-o", str(tmp_path / "demo")]) == cli.EXIT_OK
    text = capsys.readouterr().out
    assert "surcharge" in text
    assert "audit.gpkg" in text
    assert "licensed engineer" in text
    assert {path.name for path in (tmp_path / "demo").iterdir()} >= {"audit.gpkg", "summary.json", "candidates.csv", "report.html"}


class _ClosedPipe(io.StringIO):
    """A buffered standard output whose reader has gone: writes are kept, the flush fails as on a closed pipe."""

    def flush(self) -> None:
        raise BrokenPipeError(32, "Broken pipe")


@pytest.mark.parametrize("argv", [["--help"], ["--version"], ["inspect", "WIDE"]])
def test_a_closed_output_ends_every_command_quietly(tmp_path: Path, monkeypatch: pytest.MonkeyPatch, argv: list[str]) -> None:
    wide = _wide_register(tmp_path)
    monkeypatch.setattr(sys, "stdout", _ClosedPipe())
    assert cli.main([str(wide) if arg == "WIDE" else arg for arg in argv]) == cli.EXIT_CLOSED_PIPE == 141  # 128 + SIGPIPE (13), POSIX


def _wide_register(tmp_path: Path) -> Path:
    """A pipe layer with 1,200 long field names: its listing alone is far longer than any pipe buffer."""
    path = tmp_path / "wide.gpkg"
    columns = {f"ATTRIBUTE_{i:04d}_OF_A_REGISTER_EXPORTED_WITH_EVERY_FIELD": [float(i)] for i in range(1200)}
    gpd.GeoDataFrame(columns, geometry=[LineString([(0, 0), (10, 0)])], crs="EPSG:27700").to_file(path)
    return path


def test_output_piped_into_head_ends_quietly(tmp_path: Path) -> None:
    wide = _wide_register(tmp_path)
    read_end, write_end = os.pipe()
    if hasattr(fcntl, "F_SETPIPE_SZ"):  # Linux: a one-page pipe, so the writer must wait for head
        fcntl.fcntl(write_end, fcntl.F_SETPIPE_SZ, 4096)
    command = Path(sys.executable).with_name("sewer-audit")
    with subprocess.Popen([str(command), "inspect", str(wide), "--config-out", str(tmp_path / "wide.toml")],
                          stdout=write_end, stderr=subprocess.PIPE) as audit:  # fmt: skip
        os.close(write_end)
        with subprocess.Popen(["head", "-1"], stdin=read_end, stdout=subprocess.PIPE) as head:
            os.close(read_end)
            first, _ = head.communicate(timeout=60)
        _, errors = audit.communicate(timeout=60)
    assert first.decode() == "wide.gpkg: layer 'wide': LineString, 1 features, CRS EPSG:27700  <- pipes\n"
    assert audit.returncode == cli.EXIT_CLOSED_PIPE
    assert errors == b""  # no traceback, no "Exception ignored" at exit
