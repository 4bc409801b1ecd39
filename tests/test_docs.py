"""The docs name every output column and every finding code the code can write."""

import re
from pathlib import Path

import pytest

from audit.findings import FINDING_CODES, FindingLog
from audit.result import FINDING_COLUMNS, MANHOLE_COLUMNS, PIPE_COLUMNS, output_name
from audit.units import SI, US

ROOT = Path(__file__).resolve().parents[1]


def _documented(page: str) -> set[str]:
    text = (ROOT / "docs" / page).read_text(encoding="utf-8")
    return set(re.findall(r"^\| `([a-z_0-9]+)`", text, flags=re.MULTILINE))


def test_every_computed_column_is_in_docs_outputs_under_its_si_and_us_names() -> None:
    text = (ROOT / "docs" / "outputs.md").read_text(encoding="utf-8")
    # a row of the field tables: | `q_design_l_s` / `q_design_cfs` | ... or | `load_ratio` | ...
    documented = set(re.findall(r"^\| `([a-z_0-9]+)`(?: / `([a-z_0-9]+)`)?", text, flags=re.MULTILINE))
    names = {name for pair in documented for name in pair if name}
    for system in (SI, US):
        assert {output_name(name, system) for name in [*PIPE_COLUMNS, *MANHOLE_COLUMNS]} - names == set(), system.name
    assert set(FINDING_COLUMNS) - names == set()


def test_the_finding_codes_are_exactly_those_documented() -> None:
    text = (ROOT / "docs" / "outputs.md").read_text(encoding="utf-8").split("## Finding codes", 1)[1]
    documented = set(re.findall(r"^\| `([a-z_0-9]+)`", text, flags=re.MULTILINE))
    assert documented == set(FINDING_CODES)


def test_a_code_outside_the_vocabulary_is_refused() -> None:
    with pytest.raises(ValueError, match="not in audit.findings.FINDING_CODES"):
        FindingLog().add("pipes", "P1", "pipe_is_sad", "an invented code")
