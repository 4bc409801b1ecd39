"""Compare reports manholes that start or stop flooding, and a grade line that moved alone as no change.

Every pipe of these registers runs full below a fixed outfall level (conftest.py), so the levels
follow in closed form and are bounded here by hand: a node's level is the outfall level plus, along
the pipes between, Manning's full-bore friction loss of each pipe plus k v^2/2g at each manhole.
Levels never fall going upstream along a full pipe (each step adds a loss >= 0), and every path
to the outfall is bounded by the sum of the losses of all the pipes.

The flooding case: the register after the corrections with covers at C 20.9 m and D (the outfall)
21.0 m, audited once with the outfall held at 20.8 m and once at 21.3 m. The level carried
upstream from a flooding manhole is its cover (the water spills there; docs/methods.md, "Flood
screening").
"""

import json
import math
from pathlib import Path
from typing import Any

import pandas as pd
import pyogrio
import pytest

G = 9.80665  # standard acceleration of gravity [m/s2]; Source: 3rd CGPM (1901), declaration on gn (from memory)
N = 0.013  # Manning n the registers set [s/m^(1/3)]; checked against the fixture in test_survey_corrections.py
L_S = 1e-3  # m3/s per l/s
LENGTH = 60.0  # every pipe is drawn 60 m long [m] (conftest.py)

# design flow per pipe [l/s], by its (from, to) manholes: each manhole's load carried downstream (conftest.py)
FLOWS = {
    "before": {("A", "B"): 10.0, ("E", "B"): 8.0, ("B", "C"): 10.0 + 8.0 + 5.0, ("C", "D"): 10.0 + 8.0 + 5.0 + 12.0},
    "after": {("A", "B"): 10.0, ("B", "C"): 10.0 + 5.0, ("G", "F"): 1.0, ("F", "C"): 1.0 + 1.0, ("C", "D"): 10.0 + 5.0 + 1.0 + 1.0 + 12.0},
}


def full_pipe_losses(diameter_m: float, flow_m3_s: float, *, manhole_loss: float) -> tuple[float, float]:
    r"""A full circular pipe's friction loss over ``LENGTH`` and the manhole loss at its upstream end [m].

    Manning solved for the friction slope, :math:`S_f = (Q n)^2 / (A^2 R^{4/3})`, with
    :math:`A = \pi D^2 / 4`, :math:`R = D / 4`; the manhole loss :math:`k v^2 / 2g`, :math:`v = Q / A`.
    """
    # Source: Chow, Open-Channel Hydraulics (1959), sec. 5-6, the Manning formula (SI form, from memory)
    area = math.pi * diameter_m**2 / 4.0
    friction = LENGTH * (flow_m3_s * N) ** 2 / (area**2 * (diameter_m / 4.0) ** (4.0 / 3.0))
    return friction, manhole_loss * (flow_m3_s / area) ** 2 / (2.0 * G)


def total_losses(pipes: list[tuple[str, str, str, int, float, float]], flows: dict[tuple[str, str], float], *, manhole_loss: float) -> float:
    """The losses of every pipe and of the manhole above each, summed [m]: a bound on the rise along any path."""
    return sum(sum(full_pipe_losses(size / 1000.0, flows[(start, end)] * L_S, manhole_loss=manhole_loss)) for _, start, end, size, _, _ in pipes)


def highest_crown(pipes: list[tuple[str, str, str, int, float, float]]) -> float:
    """The highest soffit of any pipe at either end [m]."""
    return max(max(up, down) + size / 1000.0 for _, _, _, size, up, down in pipes)


def test_the_fixed_outfall_level_drowns_every_crown_and_stays_below_every_cover(registers: dict[str, Any], levels: dict[str, Any]) -> None:
    k, tailwater, rim = levels["manhole_loss"], levels["tailwater"], levels["rim"]
    for name in ("before", "after"):
        assert highest_crown(registers[name]) < tailwater  # every pipe full, every manhole surcharged
        assert tailwater + total_losses(registers[name], FLOWS[name], manhole_loss=k) < rim  # and none floods
    # after the corrections the losses are small: every level lies within 0.1 m above the outfall
    assert total_losses(registers["after"], FLOWS["after"], manhole_loss=k) < 0.1


def test_a_grade_line_that_moved_alone_leaves_the_pipe_unchanged(survey: Path, registers: dict[str, Any], levels: dict[str, Any]) -> None:
    k, tailwater = levels["manhole_loss"], levels["tailwater"]
    # before, B stands at least P3's friction loss above the outfall (P3 at 1.10 times its capacity); after, within every loss of it
    p3 = next(pipe for pipe in registers["before"] if pipe[0] == "P3")
    b_before = tailwater + full_pipe_losses(p3[3] / 1000.0, FLOWS["before"][("C", "D")] * L_S, manhole_loss=k)[0]
    b_after = tailwater + total_losses(registers["after"], FLOWS["after"], manhole_loss=k)
    assert b_before - b_after > 0.2
    table = pyogrio.read_dataframe(survey / "compare.gpkg", layer="pipes")
    p1 = table[(table["id_old"] == "P1") & (table["id_new"] == "P1")].iloc[0]  # the original P1, from A to B
    # P1 ends at B: its grade line moved, its register and its flow did not
    assert {"water_level_up_m", "water_level_down_m", "depth_up_m", "depth_down_m"} <= set(p1["results_moved"].split(";"))
    assert p1["change"] == "unchanged"


def _compared(old: Path, new: Path, out: Path) -> Path:
    from audit.cli import main

    assert main(["compare", str(old), str(new), "-o", str(out), "-q"]) == 0
    return out


@pytest.fixture(scope="module")
def raised(audits: dict[str, Path], tmp_path_factory: pytest.TempPathFactory) -> Path:
    """compare of the audit with the outfall low (OLD) and raised (NEW)."""
    return _compared(audits["outfall_low"], audits["outfall_raised"], tmp_path_factory.mktemp("raised") / "out")


@pytest.fixture(scope="module")
def lowered(audits: dict[str, Path], tmp_path_factory: pytest.TempPathFactory) -> Path:
    """The same two audits the other way round: the outfall lowered."""
    return _compared(audits["outfall_raised"], audits["outfall_low"], tmp_path_factory.mktemp("lowered") / "out")


def test_the_flooding_case_worked_out_by_hand(registers: dict[str, Any], levels: dict[str, Any]) -> None:
    covers, low, high = levels["low_covers"], levels["outfall_low"], levels["outfall_raised"]
    rise = total_losses(registers["after"], FLOWS["after"], manhole_loss=levels["manhole_loss"])
    # low outfall: every level lies from 20.8 m to 20.8 m + the losses, above every crown and below every cover
    assert highest_crown(registers["after"]) < low
    assert low + rise < min(covers.values())
    # raised outfall: D stands at 21.3 m, above its cover 21.0 m; 21.0 m is carried to C, above its cover 20.9 m;
    # C's cover 20.9 m is carried further up, so A, B, F and G stand from 20.9 m to 20.9 m + the losses, below 22 m
    assert high >= covers["D"] >= covers["C"]
    assert covers["C"] + rise < levels["rim"]
    # so every level moved: from at most 20.8 m + the losses (below 20.9 m, just asserted) to at least 20.9 m


def _manholes(out: Path) -> pd.DataFrame:
    return pyogrio.read_dataframe(out / "compare.gpkg", layer="manholes").set_index("id_new")


def test_manholes_whose_cover_the_raised_outfall_overtops_start_flooding(raised: Path, levels: dict[str, Any]) -> None:
    table = _manholes(raised)
    flooded, dry = ["C", "D"], ["A", "B", "F", "G"]
    assert table.loc[flooded, "change"].tolist() == ["changed"] * 2
    assert table.loc[flooded, "flood_state_old"].tolist() == ["surcharged"] * 2
    assert table.loc[flooded, "flood_state_new"].tolist() == ["flooding"] * 2
    assert table.loc[flooded, "flags_gained"].tolist() == ["flooding"] * 2  # flooding replaces manhole_surcharge
    assert table.loc[flooded, "flags_cleared"].tolist() == ["manhole_surcharge"] * 2
    assert table.loc[flooded, ["severity_old", "severity_new", "severity_move", "gained_severity"]].to_numpy().tolist() == [["low", "high", "up", "high"]] * 2
    assert table.loc[flooded, "outcome"].tolist() == ["worse"] * 2  # severity up, though a flag was cleared too
    assert table.loc[flooded, "fields_changed"].fillna("").tolist() == ["", ""]  # the same register: only the outfall level moved
    # D, the outfall, stands at the fixed level: freeboard = cover - level
    assert (table.loc["D", "water_level_m_old"], table.loc["D", "water_level_m_new"]) == (pytest.approx(levels["outfall_low"]), pytest.approx(levels["outfall_raised"]))
    assert table.loc["D", "freeboard_m_new"] == pytest.approx(levels["low_covers"]["D"] - levels["outfall_raised"])
    # the other manholes stay surcharged under the same flag: their level moved, and that alone is no change
    assert table.loc[dry, "change"].tolist() == ["unchanged"] * 4
    assert table.loc[dry, "results_moved"].tolist() == ["water_level_m;freeboard_m"] * 4
    assert (table.loc[dry, "flood_state_old"] == table.loc[dry, "flood_state_new"]).all()
    assert table.loc[dry, "outcome"].fillna("").tolist() == [""] * 4


def test_no_pipe_changed_when_only_the_outfall_level_moved(raised: Path) -> None:
    table = pyogrio.read_dataframe(raised / "compare.gpkg", layer="pipes")
    assert table["change"].tolist() == ["unchanged"] * 5
    for moved in table["results_moved"]:
        assert {"water_level_up_m", "water_level_down_m"} <= set(moved.split(";"))  # every level rose by at least 0.02 m


def test_compare_json_totals_the_manhole_flags_and_flood_states(raised: Path) -> None:
    summary = json.loads((raised / "compare.json").read_text(encoding="utf-8"))
    assert summary["changes"]["manholes"] == {"added": 0, "removed": 0, "changed": 2, "unchanged": 4, "worse": 2, "better": 0, "mixed": 0}
    assert summary["changes"]["pipes"] == {"added": 0, "removed": 0, "changed": 0, "unchanged": 5, "worse": 0, "better": 0, "mixed": 0}
    assert summary["manhole_flags"] == {
        "flooding": {"severity_old": "high", "severity_new": "high", "manholes_old": 0, "manholes_new": 2, "gained": 2, "cleared": 0},
        "manhole_surcharge": {"severity_old": "low", "severity_new": "low", "manholes_old": 6, "manholes_new": 4, "gained": 0, "cleared": 2},
    }
    assert summary["flood_states"] == {"flooding": {"old": 0, "new": 2}, "surcharged": {"old": 6, "new": 4},
                                       "below_soffit": {"old": 0, "new": 0}, "not_evaluated": {"old": 0, "new": 0}}  # fmt: skip
    # the outfall level is a setting: said first, since it, not the network, explains the difference
    assert [item["key"] for item in summary["settings_differ"]] == ["settings.grade_line.outfall"]
    assert "grade_line" in summary["warning"]
    changes = pd.read_csv(raised / "changes.csv")
    assert sorted(changes.loc[changes["layer"] == "manholes", "id_new"]) == ["C", "D"]


def test_the_page_lists_the_manholes_that_started_flooding(raised: Path) -> None:
    page = (raised / "compare.html").read_text(encoding="utf-8")
    section = page[page.index('id="flooding"') : page.index('id="worse"')]
    rows = section[section.index("<tbody>") : section.index("</tbody>")].split("<tr>")[1:]
    assert [row.split("</td>")[:4] for row in rows] == [["<td>C", "<td>started", "<td>surcharged", "<td>flooding"],
                                                        ["<td>D", "<td>started", "<td>surcharged", "<td>flooding"]]  # fmt: skip
    assert "2 started and 0 stopped flooding" in section
    assert 'id="manhole-flag-table"' in page


def test_lowering_the_outfall_again_stops_the_flooding(lowered: Path) -> None:
    table = _manholes(lowered)
    assert table.loc[["C", "D"], ["flood_state_old", "flood_state_new", "severity_move", "outcome"]].to_numpy().tolist() == [
        ["flooding", "surcharged", "down", "better"]] * 2  # fmt: skip
    assert table.loc[["C", "D"], "flags_cleared"].tolist() == ["flooding"] * 2
    page = (lowered / "compare.html").read_text(encoding="utf-8")
    assert "0 started and 2 stopped flooding" in page
    assert page.count("<td>stopped</td>") == 2


def test_the_terminal_table_shows_the_manhole_flags_that_moved(audits: dict[str, Path], tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    from audit.cli import main

    assert main(["compare", str(audits["outfall_low"]), str(audits["outfall_raised"]), "-o", str(tmp_path / "out")]) == 0
    lines = capsys.readouterr().out.splitlines()
    assert "manholes: 0 added, 0 removed, 2 changed, 4 unchanged (2 worse, 0 better, 0 mixed)" in lines
    assert "no flag moved" in lines  # no pipe flag moved
    table = lines[lines.index(next(line for line in lines if line.startswith("manhole flag"))) + 1 :][:2]
    assert [line.split() for line in table] == [["flooding", "high", "0", "2", "2", "0"], ["manhole_surcharge", "low", "6", "4", "0", "2"]]


def test_an_audit_made_before_the_grade_line_compares_its_manholes_by_their_findings(audits: dict[str, Path], tmp_path: Path) -> None:
    earlier = tmp_path / "earlier"
    earlier.mkdir()
    (earlier / "summary.json").write_bytes((audits["before"] / "summary.json").read_bytes())
    pipes = pyogrio.read_dataframe(audits["before"] / "audit.gpkg", layer="pipes")
    manholes = pyogrio.read_dataframe(audits["before"] / "audit.gpkg", layer="manholes")
    grade_line = ["rim_m", "water_level_m", "freeboard_m", "flood_depth_m", "flood_state", "boundary", "flags", "severity", "reasons"]
    pyogrio.write_dataframe(pipes, earlier / "audit.gpkg", layer="pipes")
    pyogrio.write_dataframe(manholes.drop(columns=grade_line), earlier / "audit.gpkg", layer="manholes", append=True)
    out = _compared(earlier, audits["before"], tmp_path / "out")
    summary = json.loads((out / "compare.json").read_text(encoding="utf-8"))
    for words in ("flags", "severity", "flood_state"):
        assert any(note.startswith(f"OLD manholes: no {words} field") for note in summary["notes"]), words
    assert "manhole_flags" not in summary
    assert "flood_states" not in summary
    # the same register, the same findings: not a manhole gains the flags it carried all along
    assert summary["changes"]["manholes"] == {"added": 0, "removed": 0, "changed": 0, "unchanged": 5}
    table = pyogrio.read_dataframe(out / "compare.gpkg", layer="manholes")
    assert "flags_gained" not in table.columns
    assert "findings_gained" in table.columns
    page = (out / "compare.html").read_text(encoding="utf-8")
    assert "do not both give the manholes a flood state" in page
