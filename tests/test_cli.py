"""The command line's help and exit codes."""

import pytest

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
