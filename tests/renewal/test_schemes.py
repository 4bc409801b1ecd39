"""Scheme grouping on a small network built here: two contiguous runs, a gap, a branch.

Pipes (upstream node -> downstream node) and whether each has a capacity remedy:

    p0: 1 -> 0  yes   the outlet pipe of run A
    p1: 2 -> 1  yes
    p2: 3 -> 2  yes
    p3: 4 -> 2  yes   a branch joining run A at node 2
    p4: 5 -> 3  no    the gap between run A and run B
    p5: 6 -> 5  yes   run B
    p6: 7 -> 6  yes
    p7: 8 -> 5  yes   meets run B at node 5, whose outgoing pipe (p4) needs nothing: a scheme of its own
    p8: 9 -> 1  no    joins run A without a remedy
"""

import numpy as np

from audit.renewal import RenewalSettings, renewal_programme, unit_costs
from audit.renewal.schemes import Schemes, build_schemes, group_pipes

from ._network import programme_inputs

NAN = np.nan
UPSTREAM = np.array([1, 2, 3, 4, 5, 6, 7, 8, 9])
DOWNSTREAM = np.array([0, 1, 2, 2, 3, 5, 6, 5, 1])
MEMBER = np.array([True, True, True, True, False, True, True, True, False])
# cost per metre by diameter, invented for the test: 300 mm 400, 375 mm 450, 450 mm 520, 600 mm 700
COSTS = RenewalSettings(costs=((0.3, 400.0), (0.375, 450.0), (0.45, 520.0), (0.6, 700.0)), currency="EUR")


def schemes_of_the_network(settings: RenewalSettings = COSTS) -> Schemes:
    return build_schemes(
        MEMBER, upstream=UPSTREAM, downstream=DOWNSTREAM, pipe_ids=np.array([f"p{i}" for i in range(9)], dtype=object),
        length=np.array([50, 60, 70, 40, 10, 30, NAN, 25, 10], dtype=float),
        height=np.array([0.45, 0.3, 0.3, 0.3, 0.3, 0.225, 0.225, 0.3, 0.3]),
        q_design=np.array([0.20, 0.15, 0.05, 0.09, 0.04, 0.06, 0.03, 0.02, 0.01]),
        new_size=np.array([0.6, 0.45, 0.375, 0.4, NAN, 0.3, 0.375, NAN, NAN]),
        new_slope=np.array([NAN, NAN, NAN, NAN, NAN, NAN, NAN, 0.02, NAN]),
        risk=np.array([12, 10, 8, 6, 25, 20, NAN, NAN, 3], dtype=float),
        risk_driver=np.array(["age x depth", "", "", "", "", "load ratio x population", "", "", ""], dtype=object), settings=settings,
    )  # fmt: skip


def test_two_runs_a_gap_and_a_branch_form_three_schemes_ordered_from_downstream() -> None:
    schemes = schemes_of_the_network()
    # run B holds the greatest risk (20) -> S001; run A (12) -> S002; p7 (no risk known) -> S003
    assert schemes.ids.tolist() == ["S002", "S002", "S002", "S002", "", "S001", "S001", "S003", ""]
    # run A from the outlet: p0 (0 pipes up), p1 (1), then p2 and p3 (2 each; p3 carries more, so first)
    assert schemes.position.tolist() == [1, 2, 4, 3, 0, 1, 2, 1, 0]
    table = schemes.table
    assert table["scheme_id"].tolist() == ["S001", "S002", "S003"]
    assert table["first_pipe"].tolist() == ["p5", "p0", "p7"]
    assert table["pipe_ids"].tolist() == ["p5;p6", "p0;p1;p3;p2", "p7"]
    assert table["pipes"].tolist() == [2, 4, 1]
    assert table["length_m"].tolist() == [30.0, 220.0, 25.0]  # 30 + unknown; 50 + 60 + 40 + 70; 25
    assert table["sizes"].tolist() == ["225 \u2192 300; 225 \u2192 375", "450 \u2192 600; 300 \u2192 450; 300 \u2192 400; 300 \u2192 375", "300 at 2 %"]
    # A: 50 m x 700 + 60 m x 520 + 40 m x 520 (0.4 m takes the next larger row, 450 mm) + 70 m x 450 = 118,500;
    # B: p6 has no length, so no cost; p7 is re-laid at its present 300 mm: 25 m x 400 = 10,000
    np.testing.assert_array_equal(table["cost"].to_numpy(), [NAN, 118_500.0, 10_000.0])
    assert table["currency"].tolist() == ["EUR"] * 3
    np.testing.assert_array_equal(table["max_risk"].to_numpy(), [20.0, 12.0, NAN])
    assert table["risk_driver"].tolist() == ["load ratio x population", "age x depth", ""]
    assert table["q_outlet"].tolist() == [0.06, 0.20, 0.02]


def test_without_unit_costs_a_scheme_has_no_cost() -> None:
    table = schemes_of_the_network(RenewalSettings(currency="EUR")).table
    assert np.isnan(table["cost"].to_numpy()).all()
    assert set(table["currency"]) == {""}


def test_equal_risk_puts_the_longer_scheme_first() -> None:
    schemes = build_schemes(
        np.array([True, True]), upstream=np.array([0, 2]), downstream=np.array([1, 3]), pipe_ids=np.array(["short", "long"], dtype=object),
        length=np.array([10.0, 20.0]), height=np.full(2, 0.3), q_design=np.full(2, 0.1), new_size=np.full(2, 0.45), new_slope=np.full(2, NAN),
        risk=np.full(2, 9.0), risk_driver=np.full(2, "", dtype=object), settings=RenewalSettings(),
    )  # fmt: skip
    assert schemes.ids.tolist() == ["S002", "S001"]


def test_a_loop_of_members_starts_from_its_first_pipe() -> None:
    group, distance = group_pipes(np.array([True, True, True]), upstream=np.array([0, 1, 2]), downstream=np.array([1, 2, 0]))
    assert group.tolist() == [0, 0, 0]
    assert distance.tolist() == [0, 2, 1]  # pipe 2 flows into pipe 0, pipe 1 into pipe 2


def test_unit_cost_of_a_size_beyond_the_table_is_unknown() -> None:
    np.testing.assert_array_equal(unit_costs(np.array([0.2, 0.6, 0.61]), COSTS), [400.0, 700.0, NAN])


def test_the_programme_groups_surcharged_pipes_into_schemes() -> None:
    # the same network, every member surcharged: 0.2 m3/s and more in 225 mm pipes at 0.3 %
    count = 9
    inputs = programme_inputs(
        count, upstream=UPSTREAM, downstream=DOWNSTREAM, height=np.full(count, 0.225),
        q_design=np.where(MEMBER, 0.2, 0.005), flags=np.where(MEMBER, "surcharge", ""), load_ratio=np.where(MEMBER, 2.0, 0.1),
    )  # fmt: skip
    programme = renewal_programme(**inputs)
    assert programme.remedy_kind.tolist() == ["capacity"] * 4 + [""] + ["capacity"] * 3 + [""]
    groups = {scheme: set(np.flatnonzero(programme.scheme_id == scheme)) for scheme in set(programme.scheme_id) - {""}}
    assert sorted(groups.values(), key=min) == [{0, 1, 2, 3}, {5, 6}, {7}]
    assert programme.scheme_position[[0, 1, 5, 6, 7]].tolist() == [1, 2, 1, 2, 1]
    assert programme.schemes["first_pipe"].tolist()[programme.schemes["pipes"].tolist().index(4)] == "P1"
