"""The docs name every output column and every finding code the code can write."""

import re
from pathlib import Path

import pytest

from audit.findings import FINDING_CODES, FindingLog
from audit.result import FINDING_COLUMNS, MANHOLE_COLUMNS, PIPE_COLUMNS

ROOT = Path(__file__).resolve().parents[1]


def _documented(page: str) -> set[str]:
    text = (ROOT / "docs" / page).read_text(encoding="utf-8")
    return set(re.findall(r"^\| `([a-z_0-9]+)`", text, flags=re.MULTILINE))


def test_every_computed_column_is_in_docs_outputs() -> None:
    documented = _documented("outputs.md")
    assert set(PIPE_COLUMNS) - documented == set()
    assert set(MANHOLE_COLUMNS) - documented == set()
    assert set(FINDING_COLUMNS) - documented == set()


def test_the_finding_codes_are_exactly_those_documented() -> None:
    text = (ROOT / "docs" / "outputs.md").read_text(encoding="utf-8").split("## Finding codes", 1)[1]
    documented = set(re.findall(r"^\| `([a-z_0-9]+)`", text, flags=re.MULTILINE))
    assert documented == set(FINDING_CODES)


def test_a_code_outside_the_vocabulary_is_refused() -> None:
    with pytest.raises(ValueError, match="not in audit.findings.FINDING_CODES"):
        FindingLog().add("pipes", "P1", "pipe_is_sad", "an invented code")
