"""Compare reports exactly the survey corrections made to a register, and the flags they move.

The register and its corrections are described in conftest.py. Every expected flag is worked out
here from the rules of docs/rules.md and the hydraulics in closed form, not read from the code.
"""

import json
import math
from collections.abc import Callable
from pathlib import Path
from typing import Any

import pandas as pd
import pyogrio
import pytest
import shapely

L_S = 1e-3  # m3/s per l/s

# loads carried downstream (conftest.py): before, P3 takes A + B + E + C; after, A + B + C + F + G
Q_P3_BEFORE = (10.0 + 5.0 + 8.0 + 12.0) * L_S
Q_P3_AFTER = (10.0 + 5.0 + 12.0 + 1.0 + 1.0) * L_S
Q_P2_AFTER = (10.0 + 5.0) * L_S


N = 0.013  # Manning n; the conftest's registers set the same (fixture manning_n)


def full_bore(diameter_m: float, slope: float) -> float:
    """Manning's full-bore discharge of a circular pipe [m3/s]: Q = A R^(2/3) S^(1/2) / n, A = pi D^2 / 4, R = D / 4."""
    # Source: Chow, Open-Channel Hydraulics (1959), sec. 5-6, the Manning formula (SI form, from memory)
    return math.pi * diameter_m**2 / 4.0 * (diameter_m / 4.0) ** (2.0 / 3.0) * math.sqrt(slope) / N


def test_the_registers_use_the_n_assumed_here(manning_n: float) -> None:
    assert manning_n == N


def test_the_closed_form_behind_the_expected_flags() -> None:
    # The flags below follow from these load ratios (docs/rules.md: surcharge above 1.0, near capacity above 0.8).
    assert Q_P3_BEFORE / full_bore(0.225, 0.3 / 60.0) > 1.0  # P3 before: surcharged
    for ratio in (Q_P3_AFTER / full_bore(0.375, 0.3 / 60.0), Q_P2_AFTER / full_bore(0.300, 0.3 / 60.0), 2 * L_S / full_bore(0.150, 0.6 / 60.0)):
        assert ratio < 0.8  # after: no capacity flag anywhere
    # self-cleansing flowing full (the default criterion, 0.6 m/s): the smallest pipes still pass
    assert full_bore(0.150, 0.01) / (math.pi * 0.150**2 / 4.0) > 0.6
    assert full_bore(0.200, 0.005) / (math.pi * 0.200**2 / 4.0) > 0.6


@pytest.fixture(scope="module")
def result(survey: Path) -> Path:
    return survey


def _pipes(result: Path) -> dict[tuple[object, object], pd.Series]:
    table = pyogrio.read_dataframe(result / "compare.gpkg", layer="pipes")
    return {(row["id_old"], row["id_new"]): row for _, row in table.iterrows()}


def _none(value: object) -> object:
    return None if value is None or (isinstance(value, float) and math.isnan(value)) else value


def test_every_pipe_is_listed_with_the_change_made_to_it(result: Path) -> None:
    pipes = {(_none(old), _none(new)): row["change"] for (old, new), row in _pipes(result).items()}
    assert pipes == {
        ("P1", "P1"): "unchanged",  # the original P1, matched by its ends since its id is now used twice
        ("P2", "P2"): "changed",
        ("P3", "P3"): "changed",
        ("P5", None): "removed",
        (None, "P6"): "added",
        (None, "P1"): "added",  # the branch pipe typed with P1's id
    }


def test_the_register_fields_that_changed_are_exactly_those_corrected(result: Path) -> None:
    pipes = _pipes(result)
    assert pipes[("P2", "P2")]["fields_changed"] == "DS_IL"
    assert pipes[("P3", "P3")]["fields_changed"] == "DIA"
    assert pipes[("P1", "P1")]["fields_changed"] in ("", None)
    # P1 carries A's 10 l/s in both audits: none of its uniform-flow results moved (its grade line did, test_flood_state.py)
    assert not {"q_design_l_s", "load_ratio", "q_full_l_s", "v_design_m_s", "depth_ratio"} & set((pipes[("P1", "P1")]["results_moved"] or "").split(";"))
    assert pipes[("P1", "P1")]["matched_by"] == "geometry"
    assert pipes[("P2", "P2")]["matched_by"] == "id"


def test_a_field_only_one_register_holds_is_said_and_not_compared(result: Path) -> None:
    summary = json.loads((result / "compare.json").read_text(encoding="utf-8"))
    assert "pipes: register fields only NEW holds, not compared: SURVEYED" in summary["notes"]


def test_the_flags_moved_are_those_worked_out_by_hand(result: Path) -> None:
    pipes = _pipes(result)
    p2, p3 = pipes[("P2", "P2")], pipes[("P3", "P3")]
    # P2: the corrected invert clears the reverse grade; at 0.5 % it carries 15 l/s well within capacity
    assert (p2["flags_cleared"], p2["flags_gained"] or "", p2["severity_old"], p2["severity_new"]) == ("reverse_grade", "", "high", "none")
    # P3: 375 mm clears the surcharge and the step down from the 300 mm pipe above it
    assert (p3["flags_cleared"], p3["flags_gained"] or "", p3["severity_old"], p3["severity_new"]) == ("surcharge;diameter_decrease", "", "high", "none")
    assert p2["severity_move"] == p3["severity_move"] == "down"
    assert p2["outcome"] == p3["outcome"] == "better"
    for key in ((None, "P6"), (None, "P1")):
        added = next(row for (old, new), row in pipes.items() if (_none(old), _none(new)) == key)
        assert (added["flags_gained"], added["gained_severity"]) == ("below_min_diameter", "low")  # 150 mm < 200 mm
    removed = next(row for (old, new), row in pipes.items() if (_none(old), _none(new)) == ("P5", None))
    assert (removed["flags_cleared"] or "", removed["severity_old"]) == ("", "none")


def test_the_load_ratios_before_and_after_follow_manning(result: Path) -> None:
    pipes = _pipes(result)
    p3 = pipes[("P3", "P3")]
    assert p3["load_ratio_old"] == pytest.approx(Q_P3_BEFORE / full_bore(0.225, 0.3 / 60.0), rel=1e-6)
    assert p3["load_ratio_new"] == pytest.approx(Q_P3_AFTER / full_bore(0.375, 0.3 / 60.0), rel=1e-6)
    assert pipes[("P2", "P2")]["load_ratio_new"] == pytest.approx(Q_P2_AFTER / full_bore(0.300, 0.3 / 60.0), rel=1e-6)
    assert pipes[("P1", "P1")]["load_ratio_new"] == pytest.approx(10.0 * L_S / full_bore(0.300, 0.3 / 60.0), rel=1e-6)


def test_manholes_are_compared_by_id(result: Path, levels: dict[str, Any]) -> None:
    table = pyogrio.read_dataframe(result / "compare.gpkg", layer="manholes")
    change = {(_none(row.id_old), _none(row.id_new)): row.change for row in table.itertuples()}
    # no cover moved and every manhole is surcharged and flagged manhole_surcharge in both audits (conftest.py):
    # what moved at A, B, C and D are numbers alone, which leave a manhole unchanged
    assert change == {("A", "A"): "unchanged", ("B", "B"): "unchanged", ("C", "C"): "unchanged", ("D", "D"): "unchanged",
                      ("E", None): "removed", (None, "F"): "added", (None, "G"): "added"}  # fmt: skip
    by_id = table.set_index("id_old")
    # A, B and C stand above P3, whose full-bore loss fell from 0.36 m to 0.02 m (test_flood_state.py): their levels moved;
    # D's is the fixed outfall level in both audits
    assert by_id.loc["A", "results_moved"] == "water_level_m;freeboard_m"
    assert by_id.loc["B", "results_moved"] == "pipes_in;flow_out_l_s;water_level_m;freeboard_m"  # E's pipe no longer arrives
    assert by_id.loc["C", "results_moved"] == "pipes_in;flow_out_l_s;water_level_m;freeboard_m"  # the branch arrives
    assert by_id.loc["D", "results_moved"] == "flow_out_l_s"
    assert (by_id.loc["D", "flow_out_l_s_old"], by_id.loc["D", "flow_out_l_s_new"]) == (pytest.approx(35.0), pytest.approx(29.0))
    tailwater = levels["tailwater"]
    assert (by_id.loc["D", "water_level_m_old"], by_id.loc["D", "water_level_m_new"]) == (pytest.approx(tailwater), pytest.approx(tailwater))
    assert by_id.loc["D", "freeboard_m_new"] == pytest.approx(levels["rim"] - tailwater)  # freeboard: cover less water level
    assert set(table["flood_state_old"].dropna()) == set(table["flood_state_new"].dropna()) == {"surcharged"}
    matched = by_id.loc[["A", "B", "C", "D"]]
    assert (matched["flags_gained"].fillna("") + matched["flags_cleared"].fillna("") + matched["outcome"].fillna("")).eq("").all()
    added = table[table["change"] == "added"]
    assert (added["flags_gained"] + "/" + added["gained_severity"]).tolist() == ["manhole_surcharge/low"] * 2
    assert by_id.loc["E", "flags_cleared"] == "manhole_surcharge"


def test_a_removed_pipe_keeps_its_old_geometry(result: Path) -> None:
    table = pyogrio.read_dataframe(result / "compare.gpkg", layer="pipes")
    removed = table.loc[table["change"] == "removed", "geometry"].iloc[0]
    assert shapely.equals(removed, shapely.LineString([(60.0, 60.0), (60.0, 0.0)]))  # E -> B as drawn before
    assert str(table.crs) == "EPSG:32630"


def test_the_totals_move_as_the_flags_do(result: Path) -> None:
    summary = json.loads((result / "compare.json").read_text(encoding="utf-8"))
    assert summary["warning"] is None
    assert summary["settings_differ"] == []
    flags = summary["flags"]
    moved = {code: (row["pipes_old"], row["pipes_new"], row["gained"], row["cleared"]) for code, row in flags.items() if row["pipes_old"] or row["pipes_new"]}
    assert moved == {"surcharge": (1, 0, 0, 1), "reverse_grade": (1, 0, 0, 1), "diameter_decrease": (1, 0, 0, 1), "below_min_diameter": (0, 2, 2, 0)}
    assert flags["surcharge"]["length_m_old"] == pytest.approx(60.0)  # P3 is drawn 60 m long
    assert summary["severity"] == {"high": {"old": 2, "new": 0}, "medium": {"old": 0, "new": 0}, "low": {"old": 0, "new": 2},
                                   "none": {"old": 2, "new": 3}}  # fmt: skip
    assert summary["changes"]["pipes"] == {"added": 2, "removed": 1, "changed": 2, "unchanged": 1, "worse": 0, "better": 2, "mixed": 0}
    assert summary["changes"]["manholes"] == {"added": 2, "removed": 1, "changed": 0, "unchanged": 4, "worse": 0, "better": 0, "mixed": 0}
    manhole_flags = {code: (row["manholes_old"], row["manholes_new"], row["gained"], row["cleared"]) for code, row in summary["manhole_flags"].items()}
    assert manhole_flags == {"flooding": (0, 0, 0, 0), "manhole_surcharge": (5, 6, 2, 1)}  # E removed, F and G added, all surcharged
    assert summary["flood_states"] == {"flooding": {"old": 0, "new": 0}, "surcharged": {"old": 5, "new": 6},
                                       "below_soffit": {"old": 0, "new": 0}, "not_evaluated": {"old": 0, "new": 0}}  # fmt: skip
    assert summary["matching"]["pipes"]["id_field_old"] == "REF"
    assert (summary["matching"]["pipes"]["by_id"], summary["matching"]["pipes"]["by_geometry"]) == (2, 1)
    assert "licensed engineer" in summary["caution"]


def test_changes_csv_lists_every_feature_that_is_not_unchanged(result: Path) -> None:
    table = pd.read_csv(result / "changes.csv")
    assert sorted(zip(table["layer"], table["change"], strict=True)) == sorted(
        [("pipes", "changed")] * 2 + [("pipes", "added")] * 2 + [("pipes", "removed")] + [("manholes", "added")] * 2 + [("manholes", "removed")]
    )  # fmt: skip


def test_the_page_opens_with_the_caution_and_maps_what_got_better(result: Path) -> None:
    page = (result / "compare.html").read_text(encoding="utf-8")
    assert "settings-differ" not in page
    assert page.index('id="caution"') < page.index('id="changes"') < page.index('id="map"')
    assert 'data-class="better"' in page
    assert "Better: severity down, or flags cleared and none gained (2)" in page
    assert "No manhole started or stopped flooding." in page  # every manhole is surcharged in both audits (conftest.py)
    assert "http" not in page.lower().replace("http-equiv", "")  # self-contained: no outside address


@pytest.mark.parametrize(("threshold", "code"), [("low", 3), ("medium", 0), ("high", 0)])
def test_fail_on_new_stops_only_when_a_flag_of_that_severity_appeared(audits: dict[str, Path], compare: Callable[..., tuple[int, Path]], threshold: str, code: int) -> None:
    # the only flags gained are the added 150 mm pipes' below_min_diameter, of low severity
    assert compare(audits["before"], audits["after"], "--fail-on-new", threshold)[0] == code


def test_an_audit_compared_with_itself_is_unchanged(audits: dict[str, Path], compare: Callable[..., tuple[int, Path]]) -> None:
    code, out = compare(audits["before"], audits["before"] / "audit.gpkg")
    assert code == 0
    summary = json.loads((out / "compare.json").read_text(encoding="utf-8"))
    assert summary["changes"] == {"pipes": {"added": 0, "removed": 0, "changed": 0, "unchanged": 4, "worse": 0, "better": 0, "mixed": 0},
                                  "manholes": {"added": 0, "removed": 0, "changed": 0, "unchanged": 5, "worse": 0, "better": 0, "mixed": 0}}  # fmt: skip
