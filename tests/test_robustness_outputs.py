"""Writing and reporting what went wrong: a full disk said as such, no input ever replaced by an
output, library warnings kept off the terminal, messages of bounded length, a map for any extent
(failures found by scripts/fuzz.py)."""

import errno
import hashlib
import shutil
import warnings
from pathlib import Path

import geopandas as gpd
import numpy as np
import pyogrio.errors
import pytest
import shapely
from _small_town import write_town

import audit.outputs.geopackage
import audit.pipeline
from audit import cli
from audit.errors import InputError
from audit.report.map import network_map


def _town(tmp_path: Path) -> Path:
    data = tmp_path / "data"
    data.mkdir()
    return write_town(data, "GPKG", ".gpkg")


def _digest(folder: Path) -> dict[str, str]:
    return {path.name: hashlib.sha256(path.read_bytes()).hexdigest() for path in sorted(folder.iterdir()) if path.is_file()}


@pytest.mark.parametrize(
    "failure",
    [
        OSError(errno.ENOSPC, "No space left on device"),
        pyogrio.errors.DataSourceError("sqlite3_exec(ROLLBACK) failed: cannot rollback - no transaction is active"),
    ],
)
def test_a_full_disk_is_said_as_such_and_leaves_no_output(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch, capsys: pytest.CaptureFixture[str], failure: Exception
) -> None:
    config = _town(tmp_path)

    def full(*args: object, **kwargs: object) -> None:
        raise failure

    monkeypatch.setattr(audit.outputs.geopackage, "write_layer", full)
    free = shutil.disk_usage(tmp_path)
    # SQLite names a full disk only by what failed next, so the free space is asked: here, none
    monkeypatch.setattr(shutil, "disk_usage", lambda path: free._replace(free=4096))
    code = cli.main(["run", str(config), "-o", str(tmp_path / "out"), "-q"])
    assert code == cli.EXIT_BAD_INPUT
    said = " (No space left on device)" if isinstance(failure, OSError) else ""
    assert capsys.readouterr().err == f"sewer-audit: {tmp_path / 'out'}: cannot write the outputs: the disk is full{said}; free some space and run again\n"
    assert not (tmp_path / "out").exists()
    assert [path.name for path in tmp_path.iterdir()] == ["data"]  # no staging folder left either


def test_a_write_error_on_a_roomy_disk_gives_the_library_s_first_line_only(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch, capsys: pytest.CaptureFixture[str]
) -> None:
    config = _town(tmp_path)
    statement = "sqlite3_exec(CREATE TABLE pipes (" + ", ".join(f'"field{i}" REAL' for i in range(500)) + ")) failed: locked"

    def locked(*args: object, **kwargs: object) -> None:
        raise pyogrio.errors.DataSourceError(statement + "\nsecond line")

    monkeypatch.setattr(audit.outputs.geopackage, "write_layer", locked)
    assert cli.main(["run", str(config), "-o", str(tmp_path / "out"), "-q"]) == cli.EXIT_BAD_INPUT
    message = capsys.readouterr().err
    assert message.startswith(f"sewer-audit: {tmp_path / 'out'}: cannot write the outputs: sqlite3_exec(CREATE TABLE pipes (")
    assert len(message.split("cannot write the outputs: ", 1)[1].rstrip("\n")) == 300  # the first line, cut to 300 characters
    assert message.rstrip("\n").endswith("...")
    assert "second line" not in message


def test_an_input_named_like_the_report_in_the_output_folder_is_never_replaced(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    config = _town(tmp_path)
    out = tmp_path / "out"
    assert cli.main(["run", str(config), "-o", str(out), "-q"]) == cli.EXIT_OK
    # the manholes moved into the output folder as GeoJSON under the report's name
    manholes = gpd.read_file(config.parent / "manholes.gpkg")
    manholes.to_file(out / "report.html", driver="GeoJSON")
    text = config.read_text(encoding="utf-8").replace('path = "manholes.gpkg"', f'path = "{out / "report.html"}"')
    config.write_text(text, encoding="utf-8")
    earlier = _digest(out)
    capsys.readouterr()
    code = cli.main(["run", str(config), "-o", str(out), "-q", "--overwrite"])
    assert code == cli.EXIT_USAGE
    assert capsys.readouterr().err == (f"sewer-audit: {out / 'report.html'}: this output file would replace the input "
                                       f"{out / 'report.html'}; choose another output folder\n")  # fmt: skip
    assert _digest(out) == earlier  # the input and the earlier outputs as they were
    assert sorted(path.name for path in tmp_path.iterdir()) == ["data", "out"]


def test_library_warnings_stay_off_the_terminal(tmp_path: Path, monkeypatch: pytest.MonkeyPatch, capsys: pytest.CaptureFixture[str]) -> None:
    def warned(*args: object, **kwargs: object) -> None:
        np.log(np.array([0.0]))  # numpy's RuntimeWarning: divide by zero, as NaN-laden arithmetic gives
        warnings.warn("a library's notice", UserWarning, stacklevel=1)
        raise InputError("pipes.gpkg: cannot be read (a test)")

    monkeypatch.setattr(audit.pipeline, "run", warned)
    with warnings.catch_warnings():
        warnings.simplefilter("error")  # as the tests run: a warning that got through would raise here
        code = cli.main(["run", str(_town(tmp_path)), "-o", str(tmp_path / "out"), "-q"])
    assert code == cli.EXIT_BAD_INPUT
    assert capsys.readouterr().err == "sewer-audit: pipes.gpkg: cannot be read (a test)\n"


def test_a_long_message_keeps_its_start_and_its_end(tmp_path: Path, monkeypatch: pytest.MonkeyPatch, capsys: pytest.CaptureFixture[str]) -> None:
    long_path = "/".join(["d" * 200] * 40) + "/pipes.gpkg"

    def refused(*args: object, **kwargs: object) -> None:
        raise InputError(f"{long_path}: file not found (from pipes.path)")

    monkeypatch.setattr(audit.pipeline, "run", refused)
    assert cli.main(["run", str(_town(tmp_path)), "-o", str(tmp_path / "out"), "-q"]) == cli.EXIT_BAD_INPUT
    message = capsys.readouterr().err
    assert message.startswith("sewer-audit: dddd")
    assert message.endswith("/pipes.gpkg: file not found (from pipes.path)\n")
    assert "characters left out" in message
    assert len(message) < cli.MESSAGE_LIMIT + 100


def test_a_full_disk_anywhere_in_a_command_is_said_as_such(tmp_path: Path, monkeypatch: pytest.MonkeyPatch, capsys: pytest.CaptureFixture[str]) -> None:
    def full(*args: object, **kwargs: object) -> None:
        raise OSError(errno.ENOSPC, "No space left on device", str(tmp_path / "x"))

    monkeypatch.setattr(audit.pipeline, "run", full)
    assert cli.main(["run", str(_town(tmp_path)), "-o", str(tmp_path / "out"), "-q"]) == cli.EXIT_BAD_INPUT
    assert capsys.readouterr().err == f"sewer-audit: the disk is full ({tmp_path / 'x'}); free some space and run again\n"


@pytest.mark.parametrize(
    "lines",
    [
        [shapely.LineString([(5e5, 5.7e6), (5e5, 5.7e6)])] * 3,  # one point: every pipe of zero length at one place
        [shapely.LineString([(0, 0), (np.inf, 0)]), shapely.LineString([(0, 0), (10, 0)])],
        [shapely.LineString([(-1e308, 0), (1e308, 0)]), shapely.LineString([(0, 0), (10, 5)])],
        [None, shapely.LineString()],
    ],
)
def test_the_map_is_drawn_for_any_extent(lines: list[shapely.LineString | None]) -> None:
    geometry = np.array(lines, dtype=object)
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        drawing = network_map(geometry, np.array(["none"] * len(lines), dtype=object), metres=True)
    assert drawing.startswith("<svg")
    assert "nan" not in drawing.lower()
    assert "inf" not in drawing.lower()
    if lines[0] is not None:
        assert 'data-role="scale-bar"' in drawing
