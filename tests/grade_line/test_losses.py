"""Manhole losses by the turn the flow makes: the turns of a layout drawn here, and a surcharged
chain round a right-angle bend written out by hand."""

from __future__ import annotations

import numpy as np
import pytest

from audit.grade_line import BoundaryKind, GradeLineSettings, Turns, grade_line, loss_coefficients, manhole_turns
from audit.hydraulics import Friction, PipeHydraulics, PipeSections

G = 9.80665  # [m/s2] (CGPM 1901)
N = 0.013  # Manning n [s/m^(1/3)]; common practice, no source


def turns_of(up: list[int], down: list[int], flow: list[float], xy: list[tuple[float, float]], *, drop: dict[int, float] | None = None) -> Turns:
    """``manhole_turns`` of 300 mm pipes whose inverts all stand at 10 m, but the downstream inverts ``drop`` names."""
    count = len(up)
    down_invert = np.full(count, 10.0)
    for pipe, level in (drop or {}).items():
        down_invert[pipe] = level
    return manhole_turns(np.array(up), np.array(down), np.array(flow, dtype=float), np.array([p[0] for p in xy]), np.array([p[1] for p in xy]),
                         up_invert=np.full(count, 10.0), down_invert=down_invert, height=np.full(count, 0.3))  # fmt: skip


def test_turns_of_a_layout_drawn_here() -> None:
    # node 0 is the outfall at the origin; the main line comes from the east: 8 -> 3 -> 2 -> 1 -> 0
    xy = [(0.0, 0.0), (40.0, 0.0), (80.0, 0.0), (108.28, 28.28), (40.0, 40.0), (80.0, 40.0), (np.nan, np.nan), (80.0, 0.0), (94.14, 14.14)]
    pipes = [(1, 0, 0.30), (2, 1, 0.20), (3, 2, 0.15), (4, 1, 0.05), (5, 4, 0.05), (6, 5, 0.01), (2, 7, 0.01), (8, 3, 0.15)]  # from, to, flow
    turns = turns_of([p[0] for p in pipes], [p[1] for p in pipes], [p[2] for p in pipes], xy)
    turn = turns.angle
    assert turn[0] == pytest.approx(0.0, abs=1e-9)  # 2 -> 1 carries on west into 1 -> 0; the lateral 4 -> 1 brings less
    assert turn[1] == pytest.approx(45.0, abs=0.01)  # 3 -> 2 runs south-west, 2 -> 1 west
    assert turn[2] == pytest.approx(180.0, abs=0.01)  # 8 -> 3 runs north-east, 3 -> 2 doubles back south-west
    assert turn[3] == pytest.approx(90.0)  # 5 -> 4 runs west, 4 -> 1 south
    assert np.isnan(turn[4])  # node 5 is entered only from node 6, which has no coordinates: no direction
    assert np.isnan(turn[5])  # node 6 is the head of its run (and has no coordinates)
    assert np.isnan(turn[6])  # node 7 lies on node 2: a pipe of no length has no direction
    assert np.isnan(turn[7])  # node 8 is the head of its run
    # the water starts from rest at a head of run and where the turn is unknown
    assert turns.from_rest.tolist() == [False, False, False, False, True, True, True, True]


def test_the_main_incoming_pipe_is_the_one_with_the_most_flow_and_on_a_tie_the_one_that_turns_most() -> None:
    xy = [(0.0, 0.0), (10.0, 0.0), (20.0, 0.0), (10.0, 10.0)]  # 2 -> 1 -> 0 runs west; 3 -> 1 comes from the north
    assert turns_of([1, 2, 3], [0, 1, 1], [0.3, 0.2, 0.1], xy).angle[0] == pytest.approx(0.0, abs=1e-9)
    assert turns_of([1, 2, 3], [0, 1, 1], [0.3, 0.1, 0.2], xy).angle[0] == pytest.approx(90.0)
    # equal flows: the larger turn, whichever pipe the register lists first
    assert turns_of([1, 2, 3], [0, 1, 1], [0.3, 0.2, 0.2], xy).angle[0] == pytest.approx(90.0)
    assert turns_of([1, 3, 2], [0, 1, 1], [0.3, 0.2, 0.2], [xy[0], xy[1], xy[3], xy[2]]).angle[0] == pytest.approx(90.0)
    # a pipe without a design flow (NaN or 0) brings no water in: the other one is the main pipe, or none is
    assert turns_of([1, 2, 3], [0, 1, 1], [0.3, np.nan, 0.0], xy).from_rest[0]
    assert turns_of([1, 2, 3], [0, 1, 1], [0.3, np.nan, 0.1], xy).angle[0] == pytest.approx(90.0)


def test_water_dropping_into_the_chamber_starts_from_rest() -> None:
    xy = [(0.0, 0.0), (10.0, 0.0), (20.0, 0.0)]
    assert not turns_of([1, 2], [0, 1], [0.3, 0.3], xy, drop={1: 10.3}).from_rest[0]  # the invert in level with the crown out
    dropped = turns_of([1, 2], [0, 1], [0.3, 0.3], xy, drop={1: 10.31})  # above it: a backdrop
    assert dropped.from_rest[0]
    assert dropped.angle[0] == pytest.approx(0.0, abs=1e-9)  # straight on in plan all the same


def test_k_rises_linearly_to_the_right_angle_and_stays() -> None:
    turns = Turns(np.array([0.0, 30.0, 90.0, 135.0, np.nan, 0.0]), np.array([False, False, False, False, True, True]))
    np.testing.assert_allclose(loss_coefficients(turns, straight=0.2, right_angle=1.1), [0.2, 0.2 + 0.9 / 3, 1.1, 1.1, 1.1, 1.1], rtol=1e-12)


def test_no_pipes_and_pipes_not_placed() -> None:
    empty = manhole_turns(np.zeros(0, dtype=np.intp), np.zeros(0, dtype=np.intp), np.zeros(0), np.zeros(0), np.zeros(0),
                          up_invert=np.zeros(0), down_invert=np.zeros(0), height=np.zeros(0))  # fmt: skip
    assert empty.angle.size == 0
    unplaced = turns_of([-1, 1], [0, -1], [0.1, 0.1], [(0.0, 0.0), (1.0, 0.0)])
    assert np.isnan(unplaced.angle).all()
    assert unplaced.from_rest.all()


def test_a_surcharged_chain_round_a_right_angle_bend_by_hand() -> None:
    # 2 -> 1 runs west, 1 -> 0 runs south: the flow turns 90 degrees at node 1. A high tailwater at
    # the outfall fills both 600 mm pipes; each level is the one below plus the full-bore friction
    # loss plus k v^2/2g at the node the pipe leaves: bend_loss at node 1 (the turn) and at node 2
    # (the head of the run, where the water starts from rest).
    diameter, flow, length, tail = 0.6, 0.25, 50.0, 14.0
    area = np.pi * diameter**2 / 4
    friction = (flow * N / (area * (diameter / 4) ** (2 / 3))) ** 2  # Sf = (Q n / (A R^(2/3)))^2 (Chow 1959, eq. 5-6)
    head = (flow / area) ** 2 / (2 * G)
    node_1 = tail + friction * length + 1.2 * head
    node_2 = node_1 + friction * length + 1.2 * head
    sections = PipeSections.from_names(["circular"] * 2, np.full(2, diameter), np.full(2, diameter))
    pipes = PipeHydraulics(sections, np.full(2, 0.002), Friction.uniform("manning", N, 2), np.full(2, length))
    x, y = np.array([40.0, 40.0, 90.0]), np.array([0.0, 50.0, 50.0])
    up, down = np.array([1, 2]), np.array([0, 1])
    flows = np.full(2, flow)
    down_invert = np.array([10.0, 10.1])
    result = grade_line(
        pipes, flow=flows, upstream=up, downstream=down, node_count=3, up_invert=down_invert + 0.002 * length, down_invert=down_invert,
        node_rim=np.full(3, 20.0), boundary=np.array([BoundaryKind.FIXED, -1, -1], dtype=np.int8), boundary_level=np.array([tail, np.nan, np.nan]),
        evaluate=np.ones(2, dtype=bool), settings=GradeLineSettings(manhole_loss=0.2, bend_loss=1.2),
        turns=manhole_turns(up, down, flows, x, y, up_invert=down_invert + 0.002 * length, down_invert=down_invert, height=np.full(2, diameter)),
    )  # fmt: skip
    assert result.node_level[1] == pytest.approx(node_1, rel=1e-12)
    assert result.node_level[2] == pytest.approx(node_2, rel=1e-12)


def test_plain_lists_are_taken() -> None:
    turns = manhole_turns([1, 2], [0, 1], [0.2, 0.1], [0.0, 10.0, 10.0], [0.0, 0.0, 10.0], up_invert=[10.0, 10.0], down_invert=[10.0, 10.0],  # type: ignore[arg-type]
                          height=[0.3, 0.3])  # fmt: skip
    assert turns.angle[0] == pytest.approx(90.0)
    assert turns.from_rest.tolist() == [False, True]
