"""The audit finds every error planted in the invented demo town (sample_gis/ERRORS.md)."""

import math
from pathlib import Path

import pytest

import audit
import audit.result

SAMPLE = Path(__file__).resolve().parent.parent / "sample_gis"

# planted error (ERRORS.md code) -> the pipe flag or the data finding that must report it
FLAG_FOR = {
    "long_access_run": "long_spacing",
    "overloaded": "surcharge",
    "silting": "silting",
    "too_steep": "high_velocity",
    "diameter_decrease": "diameter_decrease",
    "shallow_cover": "shallow_cover",
    "reverse_grade": "reverse_grade",
    "flat_grade": "zero_grade",  # planted as equal inverts: no fall at all
    "null_diameter": "missing_data",
}
FINDING_FOR = {
    "sentinel_diameter": "sentinel_value",
    "zero_diameter": "nonpositive_size",
    "length_mismatch": "length_mismatch",
    "duplicate_id": "duplicate_id",
    "unknown_node": "unknown_node",
    "orphan_manhole": "orphan_manhole",
}


def planted_errors() -> list[tuple[str, str, str]]:
    """(code, layer, ref) rows of the ERRORS.md table."""
    rows = []
    for line in (SAMPLE / "ERRORS.md").read_text(encoding="utf-8").splitlines():
        cells = [cell.strip() for cell in line.strip().strip("|").split("|")]
        if len(cells) == 5 and cells[0] not in ("code", "---") and not set(cells[0]) <= {"-"}:
            rows.append((cells[0], cells[1], cells[3]))
    return rows


@pytest.fixture(scope="module")
def demo() -> audit.result.AuditResult:
    return audit.run(SAMPLE / "town.toml")


def test_the_error_list_is_read(demo: audit.result.AuditResult) -> None:
    codes = {code for code, _, _ in planted_errors()}
    assert codes >= set(FLAG_FOR) | set(FINDING_FOR) | {"digitised_backwards"}


@pytest.mark.parametrize(("code", "layer", "ref"), planted_errors())
def test_every_planted_error_is_reported(demo: audit.result.AuditResult, code: str, layer: str, ref: str) -> None:
    if code in FINDING_FOR:
        found = demo.findings[(demo.findings["feature"] == ref) & (demo.findings["layer"] == layer)]
        assert FINDING_FOR[code] in set(found["code"]), (code, ref)
        return
    rows = demo.pipe_results[demo.pipes["asset_ref"] == ref]
    if code == "digitised_backwards":  # reported, and the ids give the flow direction, whatever the drawing
        assert (rows["from_node_id"] == demo.pipes.loc[rows.index, "mh_up"]).all()
        found = demo.findings[(demo.findings["feature"] == ref) & (demo.findings["code"] == "drawn_against_flow")]
        assert len(found) == 1, ref
        return
    flags = {flag for text in rows["flags"] for flag in text.split(";")}
    assert FLAG_FOR[code] in flags, (code, ref, flags)


def test_the_planted_grade_errors_are_also_found_below_their_manholes(demo: audit.result.AuditResult) -> None:
    # the reverse grade (P0014) and the flat grade (P0280) were planted by lowering the pipe's upstream
    # invert, which then lies below the invert of the manhole it leaves: the finding says which level is wrong
    found = demo.findings[demo.findings["code"] == "invert_below_manhole"]
    assert sorted(found["feature"]) == ["P0014", "P0280"]
    assert found["message"].str.contains("upstream invert as recorded").all()


@pytest.mark.parametrize("column", ["population_served", "area_served_ha", "tc_min"])
def test_served_totals_and_tc_never_fall_downstream(demo: audit.result.AuditResult, column: str) -> None:
    pipes = demo.pipe_results.reset_index(drop=True)
    feeding = pipes.groupby("to_node_id")[column].max()
    above = pipes["from_node_id"].map(feeding)
    known = above.notna() & pipes[column].notna()
    assert known.sum() > 250  # every pipe below the heads of runs
    assert (pipes.loc[known, column] >= above[known] - 1e-9).all()


def test_the_town_is_a_combined_sewer_of_some_eight_thousand_people(demo: audit.result.AuditResult) -> None:
    outfalls = demo.pipe_results[demo.pipes["mh_down"].isin(["W000", "E000"])]
    assert 6_000 <= outfalls["population_served"].sum() <= 10_000  # the generator's plan, about 8,500 persons
    assert (outfalls["q_storm"] > outfalls["q_sanitary"]).all()  # a combined sewer is sized by the storm
    assert demo.settings["flows"]["kind"] == "combined"


def test_the_manhole_loss_follows_the_turn_worked_out_from_the_manholes(demo: audit.result.AuditResult) -> None:
    # the turn into each pipe, worked out here from the manhole points: the angle between the pipe in with the most
    # design flow and the pipe out, each as the line from manhole to manhole; k = 0.15 + (1.0 - 0.15) min(turn, 90) / 90
    where = {row.mh_ref: (row.geometry.x, row.geometry.y) for row in demo.manholes.itertuples()}
    pipes = demo.pipes
    mains: dict[str, tuple[float, int]] = {}
    for place, (end, flow) in enumerate(zip(pipes["to_node_id"], pipes["q_design"], strict=True)):
        if flow == flow and (end not in mains or flow > mains[end][0]):  # flow == flow: not NaN
            mains[end] = (flow, place)
    checked = bends = 0
    for place, (start, end, k) in enumerate(zip(pipes["from_node_id"], pipes["to_node_id"], pipes["manhole_loss_k"], strict=True)):
        if k != k or start not in mains:  # not evaluated, or a head of run
            continue
        main = mains[start][1]
        before = (pipes["from_node_id"].iloc[main], pipes["to_node_id"].iloc[main])
        if not all(node in where for node in (*before, start, end)):  # a junction without a manhole point
            continue
        a = (where[before[1]][0] - where[before[0]][0], where[before[1]][1] - where[before[0]][1])
        b = (where[end][0] - where[start][0], where[end][1] - where[start][1])
        cosine = (a[0] * b[0] + a[1] * b[1]) / (math.hypot(*a) * math.hypot(*b))
        turn = math.degrees(math.acos(max(-1.0, min(1.0, cosine))))
        assert pipes["turn_deg"].iloc[place] == pytest.approx(turn, abs=1e-6)
        assert k == pytest.approx(0.15 + 0.85 * min(turn, 90.0) / 90.0, rel=1e-9)
        checked += 1
        bends += turn > 60.0
    assert checked > 200
    assert bends >= 5  # the town has bends and laterals as well as straight runs
