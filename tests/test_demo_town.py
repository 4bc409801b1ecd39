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
    # worked out here from the manhole points and the pipes' columns: the main pipe into a manhole brings the most
    # design flow (of equals, the one that turns most); the turn is the angle between it and the pipe out, each as the
    # line from manhole to manhole; k = 0.15 + (1.0 - 0.15) min(turn, 90) / 90, or 1.0 where the water starts from rest:
    # no pipe brings water in (a head of run), or the main pipe's invert stands above the crown of the pipe out (a drop)
    where = {row.mh_ref: (row.geometry.x, row.geometry.y) for row in demo.manholes.itertuples()}
    rows = list(demo.pipes[["from_node_id", "to_node_id", "q_design", "up_invert_m", "down_invert_m", "height_m", "turn_deg", "manhole_loss_k"]].itertuples(index=False))

    def direction(row: tuple) -> tuple[float, float]:
        (x0, y0), (x1, y1) = where[row[0]], where[row[1]]
        return x1 - x0, y1 - y0

    checked = {"straight": 0, "turning": 0, "head": 0, "drop": 0}
    for row in rows:
        start, end, _, up_invert, _, height, turn, k = row
        if k != k or start not in where or end not in where:  # not evaluated, or a junction without a manhole point
            continue
        arriving = [other for other in rows if other[1] == start and other[2] > 0]  # NaN > 0 is False
        if not arriving:
            assert k == pytest.approx(1.0)
            assert turn != turn  # NaN: no turn
            checked["head"] += 1
            continue
        if not all(other[0] in where for other in arriving):
            continue
        out = direction(row)

        def angle(other: tuple, out: tuple[float, float] = out) -> float:
            a = direction(other)
            cosine = (a[0] * out[0] + a[1] * out[1]) / (math.hypot(*a) * math.hypot(*out))
            return math.degrees(math.acos(max(-1.0, min(1.0, cosine))))

        most = max(other[2] for other in arriving)
        main = max((other for other in arriving if other[2] == most), key=angle)
        assert turn == pytest.approx(angle(main), abs=1e-6)
        if main[4] > up_invert + height:
            assert k == pytest.approx(1.0)
            checked["drop"] += 1
        else:
            assert k == pytest.approx(0.15 + 0.85 * min(angle(main), 90.0) / 90.0, rel=1e-9)
            checked["turning" if angle(main) > 60.0 else "straight"] += 1
    # the town has straight runs, bends, heads of runs and at least one backdrop
    assert checked["straight"] > 150, checked
    assert checked["turning"] >= 5, checked
    assert checked["head"] > 40, checked
    assert checked["drop"] >= 1, checked
