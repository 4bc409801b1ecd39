"""A config file that cannot be used stops the run with one message naming the file: never a
traceback, a hang or NaN settings that pass (failures found by scripts/fuzz.py)."""

import os
import subprocess
import sys
from pathlib import Path

import pytest

from audit.config import load_config
from audit.errors import ConfigError

MINIMAL = '[pipes]\npath = "pipes.gpkg"\n'


def _problem(path: Path | str) -> str:
    with pytest.raises(ConfigError) as error:
        load_config(path)
    return str(error.value)


def _write(folder: Path, data: bytes) -> Path:
    path = folder / "town.toml"
    path.write_bytes(data)
    return path


def test_a_config_that_is_not_utf8_is_refused_naming_the_line(tmp_path: Path) -> None:
    path = _write(tmp_path, MINIMAL.encode() + b'[network]\ndirection = "\xff"\n')
    message = _problem(path)
    assert message.startswith(f"{path}: is not UTF-8 text: byte 0xff on line 4")


def test_a_utf16_config_is_said_to_be_utf16(tmp_path: Path) -> None:
    message = _problem(_write(tmp_path, MINIMAL.encode("utf-16")))
    assert "is not UTF-8 text (it is UTF-16)" in message


def test_a_utf8_byte_order_mark_is_accepted(tmp_path: Path) -> None:
    # Windows editors save UTF-8 with a byte order mark (EF BB BF; The Unicode Standard, sec. 23.8, from memory)
    config = load_config(_write(tmp_path, b"\xef\xbb\xbf" + MINIMAL.encode()))
    assert config.pipes.path == (tmp_path / "pipes.gpkg").resolve()


@pytest.mark.parametrize(
    ("text", "key"),
    [
        ("[hydraulics]\nmanning_n = nan\n", "hydraulics.manning_n"),
        ("[network]\nsnap_tolerance_m = inf\n", "network.snap_tolerance_m"),
        ("[flows]\nper_capita_l_day = -inf\n", "flows.per_capita_l_day"),
        ('[flows]\nkind = "sanitary"\npeaking = [[1000, 3.5], [50000, inf]]\n', "flows.peaking[1][1]"),
        ("[rules]\nmax_load_ratio = nan\n", "rules.max_load_ratio"),
        ("[input]\nsentinels = [-9999, nan]\n", "input.sentinels[1]"),
        ("[pipes.sentinels]\ndiameter = inf\n", "pipes.sentinels.diameter"),
    ],
)
def test_numbers_that_are_not_finite_are_refused_under_their_key(tmp_path: Path, text: str, key: str) -> None:
    message = _problem(_write(tmp_path, (MINIMAL + text).encode()))
    assert f"{key}: expected a finite number, got " in message


@pytest.mark.parametrize("depth", [20, 1000, 100_000])
def test_arrays_nested_deeply_are_refused(tmp_path: Path, depth: int) -> None:
    text = MINIMAL + "[input]\nsentinels = " + "[" * depth + "]" * depth + "\n"
    message = _problem(_write(tmp_path, text.encode()))
    assert "nested at most 16 levels deep" in message or "nest too deeply to read (at most 16 levels)" in message


def test_a_key_of_many_dotted_parts_is_refused_before_it_is_read(tmp_path: Path) -> None:
    # TOML takes time growing with the square of a key's parts: 100,000 parts would take minutes
    text = MINIMAL + "[rules.x]\n" + ".".join(["a"] * 100_000) + " = 1\n"
    message = _problem(_write(tmp_path, text.encode()))
    assert "line 4: a key of more than 16 dotted parts" in message


def test_a_config_larger_than_any_config_is_refused(tmp_path: Path) -> None:
    message = _problem(_write(tmp_path, (MINIMAL + "# " + "x" * 300_000 + "\n").encode()))
    assert "too large for a configuration file" in message


@pytest.mark.parametrize("unit", [" mm", "mm ", "mm\u00a0", "\tmm"])
def test_a_unit_with_a_stray_space_is_refused(tmp_path: Path, unit: str) -> None:
    text = MINIMAL + f'[pipes.units]\ndiameter = "{unit}"\n'
    message = _problem(_write(tmp_path, text.encode()))
    assert "pipes.units.diameter: expected a length unit (without the stray space)" in message


def test_a_unit_in_capitals_is_still_accepted(tmp_path: Path) -> None:
    config = load_config(_write(tmp_path, (MINIMAL + '[pipes.units]\ndiameter = "MM"\n').encode()))
    assert config.pipes.units["diameter"] == "mm"  # docs/config.md: unit names ignore case


def test_a_config_path_that_is_a_symlink_loop_is_refused(tmp_path: Path) -> None:
    (tmp_path / "a.toml").symlink_to(tmp_path / "b.toml")
    (tmp_path / "b.toml").symlink_to(tmp_path / "a.toml")
    message = _problem(tmp_path / "a.toml")
    assert "a.toml" in message
    assert "a symbolic link that loops" in message


def test_a_config_path_with_a_null_character_is_refused(tmp_path: Path) -> None:
    message = _problem(str(tmp_path / "town\x00.toml"))
    assert message.endswith("the configuration path holds a null character")
    assert "town\\x00.toml" in message


def test_a_config_path_too_long_for_the_file_system_is_refused(tmp_path: Path) -> None:
    message = _problem(tmp_path / ("t" * 300 + ".toml"))  # NAME_MAX is 255 bytes on Linux file systems (from memory)
    assert "a path too long for the file system" in message


@pytest.mark.parametrize("name", ["folder", "/dev/zero"])
def test_a_config_path_that_is_a_folder_or_a_device_is_refused(tmp_path: Path, name: str) -> None:
    path = tmp_path / name if name == "folder" else Path(name)
    if name == "folder":
        path.mkdir()
    message = _problem(path)
    assert message.startswith(f"{path}: is ")
    assert "give the path of the TOML configuration file" in message


def test_a_config_path_that_is_a_fifo_is_refused_without_waiting(tmp_path: Path) -> None:
    fifo = tmp_path / "town.toml"
    os.mkfifo(fifo)
    # in a fresh process with a time limit: opening a FIFO blocks until a writer comes, and none will
    command = [sys.executable, "-c", "import sys, audit.cli; sys.exit(audit.cli.main(sys.argv[1:]))", "run", str(fifo), "-o", str(tmp_path / "out")]
    done = subprocess.run(command, capture_output=True, text=True, timeout=120, check=False)
    assert done.returncode == 1
    assert done.stderr.strip() == f"sewer-audit: {fifo}: is not a file but a FIFO, a device or a socket; give the path of the TOML configuration file"
    assert not (tmp_path / "out").exists()


def test_a_layer_path_that_is_a_symlink_loop_is_refused_naming_the_key(tmp_path: Path) -> None:
    (tmp_path / "a.gpkg").symlink_to(tmp_path / "b.gpkg")
    (tmp_path / "b.gpkg").symlink_to(tmp_path / "a.gpkg")
    message = _problem(_write(tmp_path, b'[pipes]\npath = "a.gpkg"\n'))
    assert "pipes.path: expected a path that can be opened (a symbolic link that loops)" in message


def test_a_layer_path_with_a_null_character_is_refused_naming_the_key(tmp_path: Path) -> None:
    message = _problem(_write(tmp_path, b'[pipes]\npath = "pipes\\u0000.gpkg"\n'))
    assert "pipes.path: expected a non-empty string without a null character" in message
