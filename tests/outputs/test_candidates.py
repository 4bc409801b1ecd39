"""candidates.csv as written through Arrow: text survives quoting, unknowns are empty, sizes keep '.0'."""

import csv
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from audit.outputs.candidates import write_candidates
from audit.units import US


def _rows(path: Path) -> list[dict[str, str]]:
    with path.open(encoding="utf-8", newline="") as handle:
        return list(csv.DictReader(handle))


def test_text_with_commas_quotes_and_newlines_reads_back_unchanged(tmp_path: Path) -> None:
    awkward = ['cover 0.5 m, "shallow"', "two\nlines", "plain", None]
    table = pd.DataFrame({"rank": [1, 2, 3, 4], "reasons": pd.Series(awkward, dtype=object)})
    write_candidates(table, tmp_path / "c.csv")
    assert [row["reasons"] for row in _rows(tmp_path / "c.csv")] == ['cover 0.5 m, "shallow"', "two\nlines", "plain", ""]


def test_numbers_unknowns_and_whole_sizes(tmp_path: Path) -> None:
    table = pd.DataFrame({
        "rank": [1, 2], "load_ratio": [1.235, np.nan], "slope": [0.00123, 0.5],
        "diameter_mm": [225.0, np.nan], "install_year": [1968.0, np.inf],
    })  # fmt: skip
    write_candidates(table, tmp_path / "c.csv")
    rows = _rows(tmp_path / "c.csv")
    assert [row["rank"] for row in rows] == ["1", "2"]
    assert [row["load_ratio"] for row in rows] == ["1.235", ""]
    assert [row["slope"] for row in rows] == ["0.00123", "0.5"]
    assert [row["diameter_mm"] for row in rows] == ["225.0", ""]
    assert [row["install_year"] for row in rows] == ["1968.0", ""]
    assert (tmp_path / "c.csv").read_bytes().count(b"\r") == 0


def test_mixed_objects_are_written_as_their_text(tmp_path: Path) -> None:
    table = pd.DataFrame({"rank": [1, 2, 3], "material": pd.Series(["clay", 7, None], dtype=object)})
    write_candidates(table, tmp_path / "c.csv")
    assert [row["material"] for row in _rows(tmp_path / "c.csv")] == ["clay", "7", ""]


def test_candidates_in_us_units_name_and_convert_their_columns(tmp_path: Path) -> None:
    table = pd.DataFrame({"rank": [1], "pipe_id": ["P1"], "v_design": [0.6096], "diameter_mm": [203.2], "length_m": [30.48],
                          "upstream_length_m": [304.8]})  # fmt: skip
    write_candidates(table, tmp_path / "c.csv", units=US)
    with (tmp_path / "c.csv").open(encoding="utf-8", newline="") as handle:
        rows = list(csv.DictReader(handle))
    # Source: NIST SP 811 (2008), appendix B: 1 ft = 0.3048 m, 1 in = 25.4 mm, exactly
    assert rows == [{"rank": "1", "pipe_id": "P1", "v_design_ft_s": "2", "diameter_in": "8", "length_ft": "100", "upstream_length_ft": "1000"}]


def test_pipes_whose_only_serious_flags_are_grades_come_after_as_levels_to_verify() -> None:
    from audit.outputs.candidates import rank_candidates

    pipes = pd.DataFrame({
        "pipe_id": ["R", "S", "RS", "Z"],
        "severity": ["high", "high", "high", "medium"],
        "flags": ["reverse_grade", "surcharge", "surcharge;reverse_grade", "zero_grade;long_spacing"],
        "load_ratio": [np.nan, 1.2, 1.4, np.nan],
    })  # fmt: skip
    table = rank_candidates(pipes)
    # a reverse or zero grade is most often a survey error: verify the levels before renewing
    assert table["pipe_id"].tolist() == ["RS", "S", "R", "Z"]
    assert table["action"].tolist() == ["consider renewal", "consider renewal", "verify levels", "verify levels"]


def test_candidates_written_in_pieces_are_the_file_written_at_once(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    from audit.outputs import candidates
    from audit.outputs.candidates import rank_candidates, write_ranked_candidates

    pipes = pd.DataFrame({
        "pipe_id": [f"P{place}" for place in range(7)],
        "severity": ["high", "medium", "low", "high", "medium", "high", "none"],
        "flags": ["surcharge", "silting", "long_spacing", "surcharge", "silting", "reverse_grade", ""],
        "load_ratio": [1.5, 0.2, 0.4, 2.5, np.nan, np.nan, 0.3],
        "reasons": ["load ratio 1.50 > 1.00", "v 0.20 < 0.75", "", 'a "quoted" reason, with a comma', "", "", ""],
    })  # fmt: skip
    write_candidates(rank_candidates(pipes), tmp_path / "whole.csv")
    monkeypatch.setattr(candidates, "CHUNK_ROWS", 2)  # five candidates: three pieces
    write_ranked_candidates(pipes, tmp_path / "pieces.csv")
    assert (tmp_path / "pieces.csv").read_bytes() == (tmp_path / "whole.csv").read_bytes()
    lines = (tmp_path / "pieces.csv").read_text(encoding="utf-8").splitlines()
    assert [line.split(",")[0] for line in lines] == ["\"rank\"", "1", "2", "3", "4", "5"]
    write_ranked_candidates(pipes.iloc[6:], tmp_path / "none.csv")  # no candidate: the header alone
    assert (tmp_path / "none.csv").read_text(encoding="utf-8").splitlines() == lines[:1]


def test_pieces_keep_the_row_names_and_the_text_of_a_mixed_column(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    # a frame without pipe ids names each pipe by its row; a column of text and numbers is text in every piece
    from audit.outputs import candidates
    from audit.outputs.candidates import rank_candidates, write_ranked_candidates

    pipes = pd.DataFrame({
        "severity": ["high"] * 6,
        "flags": ["surcharge"] * 6,
        "load_ratio": [6.0, 5.0, 4.0, 3.0, 2.0, 1.5],
        "material": np.array(["clay", "pvc", 7, 8, 9, 10], dtype=object),
    })  # fmt: skip
    write_candidates(rank_candidates(pipes), tmp_path / "whole.csv")
    monkeypatch.setattr(candidates, "CHUNK_ROWS", 2)
    write_ranked_candidates(pipes, tmp_path / "pieces.csv")
    assert (tmp_path / "pieces.csv").read_bytes() == (tmp_path / "whole.csv").read_bytes()
    rows = _rows(tmp_path / "pieces.csv")
    assert [row["pipe_id"] for row in rows] == ["#0", "#1", "#2", "#3", "#4", "#5"]
    assert '"7"' in (tmp_path / "pieces.csv").read_text(encoding="utf-8")  # quoted as text, as in the file written at once
