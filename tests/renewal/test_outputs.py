"""schemes.csv (audit/outputs/schemes.py) and the report's programme section (audit/report/programme.py)."""

import csv
import re
from pathlib import Path

import numpy as np

from audit.outputs.schemes import write_schemes
from audit.renewal import renewal_programme
from audit.report.programme import programme_labels, programme_section, risk_matrix
from audit.units import SI, US

from ._network import programme_inputs
from .test_risk import table_of_pipes
from .test_schemes import schemes_of_the_network


def read_rows(path: Path) -> list[list[str]]:
    with path.open(newline="", encoding="utf-8") as handle:
        return list(csv.reader(handle))


def test_schemes_csv_in_si_and_us_units(tmp_path: Path) -> None:
    table = schemes_of_the_network().table
    write_schemes(table, tmp_path / "si.csv", units=SI)
    header, *rows = read_rows(tmp_path / "si.csv")
    assert header == ["scheme_id", "pipes", "first_pipe", "pipe_ids", "length_m", "sizes", "q_outlet_l_s", "cost", "currency", "max_risk", "risk_driver"]
    assert rows[0] == ["S001", "2", "p5", "p5;p6", "30", "225 \u2192 300; 225 \u2192 375", "60", "", "EUR", "20", "load ratio x population"]
    assert rows[1][4] == "220"
    assert rows[1][7] == "118500"
    assert rows[1][9] == "12"
    assert rows[2][9] == ""  # no risk known
    write_schemes(table, tmp_path / "us.csv", units=US)
    header, *rows = read_rows(tmp_path / "us.csv")
    assert header[4] == "length_ft"
    assert header[6] == "q_outlet_cfs"
    # 220 m / 0.3048 = 721.78 ft; 0.2 m3/s / 0.028316847 = 7.063 cfs (NIST SP 811 factors)
    assert rows[1][4] == "721.8"
    assert rows[1][6] == "7.063"


def test_a_programme_without_schemes_writes_the_header_alone(tmp_path: Path) -> None:
    programme = renewal_programme(**programme_inputs(2))
    assert programme.schemes.empty
    write_schemes(programme.schemes, tmp_path / "schemes.csv")
    assert len(read_rows(tmp_path / "schemes.csv")) == 1


def counts_in(matrix: str) -> dict[tuple[int, int], int]:
    cells = re.findall(r'data-likelihood="(\d)" data-consequence="(\d)" data-count="(\d+)"', matrix)
    return {(int(l_score), int(c_score)): int(count) for l_score, c_score, count in cells}


def test_the_risk_matrix_counts_pipes_per_cell() -> None:
    # the table of tests/renewal/test_risk.py: (L, C) = (3, 2), (4, 4), (5, 5), (4, 5), unscored, (4, 3), (4, 3)
    programme = renewal_programme(**table_of_pipes())
    counts = counts_in(risk_matrix(programme.likelihood, programme.consequence))
    assert len(counts) == 25
    assert {cell: count for cell, count in counts.items() if count} == {(3, 2): 1, (4, 4): 1, (5, 5): 1, (4, 5): 1, (4, 3): 2}


def test_the_programme_section_lists_schemes_and_pipes_numbered_for_the_map() -> None:
    count = 4  # P1 and P2 form one run (P2 flows into P1's upstream node), P3 stands alone, P4 is old
    inputs = programme_inputs(
        count, upstream=[1, 2, 4, 6], downstream=[0, 1, 3, 5], height=np.full(count, 0.225), q_design=[0.2, 0.2, 0.2, 0.01],
        flags=["surcharge", "surcharge", "surcharge", ""], load_ratio=[2.0, 2.0, 2.0, 0.1], install_year=[2000, 2000, 2000, 1900],
        population_served=[5000, 100, 10, 10],
    )  # fmt: skip
    programme = renewal_programme(**inputs)
    page = programme_section(programme, pipe_ids=inputs["pipe_ids"], units=SI)
    assert page.startswith('<section id="programme">')
    assert "Screening estimates" in page
    scheme_rows = re.findall(r"<tr><td>(S\d)</td><td>(S\d+)</td><td class=\"num\">(\d+)</td><td>(P\d)</td>", page)
    assert scheme_rows == [("S1", "S001", "2", "P1"), ("S2", "S002", "1", "P3")]  # the run holds 5000 persons: the greater risk
    assert re.search(r'<table id="programme-pipes">.*<td class="num">1</td><td>P4</td><td>inspect \(CCTV\)', page)
    labels = programme_labels(programme, inputs["geometry"])
    # the middle of each scheme's downstream pipe (P1 from x 0 to 50, P3 from 200 to 250), then of P4 (300 to 350)
    assert labels.to_dict("list") == {"label": ["S1", "S2", "1"], "x": [25.0, 225.0, 325.0], "y": [0.0, 0.0, 0.0]}

