"""Manhole losses by the turn the flow makes: the turns of a layout drawn here, and a surcharged
chain round a right-angle bend written out by hand."""

from __future__ import annotations

import numpy as np
import pytest

from audit.grade_line import BoundaryKind, GradeLineSettings, grade_line, loss_coefficients, turn_angles
from audit.hydraulics import Friction, PipeHydraulics, PipeSections

G = 9.80665  # [m/s2] (CGPM 1901)
N = 0.013  # Manning n [s/m^(1/3)]; common practice, no source


def test_turns_of_a_layout_drawn_here() -> None:
    # node 0 is the outfall at the origin; the main line comes from the east: 8 -> 3 -> 2 -> 1 -> 0
    xy = [(0.0, 0.0), (40.0, 0.0), (80.0, 0.0), (108.28, 28.28), (40.0, 40.0), (80.0, 40.0), (np.nan, np.nan), (80.0, 0.0), (94.14, 14.14)]
    x, y = np.array([p[0] for p in xy]), np.array([p[1] for p in xy])
    pipes = [(1, 0, 0.30), (2, 1, 0.20), (3, 2, 0.15), (4, 1, 0.05), (5, 4, 0.05), (6, 5, 0.01), (2, 7, 0.01), (8, 3, 0.15)]  # from, to, flow
    up, down, flow = (np.array([p[k] for p in pipes]) for k in range(3))
    turn = turn_angles(up.astype(np.intp), down.astype(np.intp), flow, x, y)
    assert turn[0] == pytest.approx(0.0, abs=1e-9)  # 2 -> 1 carries on west into 1 -> 0; the lateral 4 -> 1 brings less
    assert turn[1] == pytest.approx(45.0, abs=0.01)  # 3 -> 2 runs south-west, 2 -> 1 west
    assert turn[2] == pytest.approx(180.0, abs=0.01)  # 8 -> 3 runs north-east, 3 -> 2 doubles back south-west
    assert turn[3] == pytest.approx(90.0)  # 5 -> 4 runs west, 4 -> 1 south
    assert np.isnan(turn[4])  # node 5 is entered only from node 6, which has no coordinates: no direction
    assert np.isnan(turn[5])  # node 6 is the head of its run (and has no coordinates)
    assert np.isnan(turn[6])  # node 7 lies on node 2: a pipe of no length has no direction
    assert np.isnan(turn[7])  # node 8 is the head of its run


def test_the_main_incoming_pipe_is_the_one_with_the_most_flow() -> None:
    x, y = np.array([0.0, 10.0, 20.0, 10.0]), np.array([0.0, 0.0, 0.0, 10.0])
    up, down = np.array([1, 2, 3]), np.array([0, 1, 1])
    straight = turn_angles(up, down, np.array([0.3, 0.2, 0.1]), x, y)
    lateral = turn_angles(up, down, np.array([0.3, 0.1, 0.2]), x, y)
    tie = turn_angles(up, down, np.array([0.3, 0.2, 0.2]), x, y)
    assert straight[0] == pytest.approx(0.0, abs=1e-9)
    assert lateral[0] == pytest.approx(90.0)
    assert tie[0] == pytest.approx(0.0, abs=1e-9)  # equal flows: the first of them is the main pipe


def test_k_rises_linearly_to_the_right_angle_and_stays() -> None:
    k = loss_coefficients(np.array([0.0, 30.0, 90.0, 135.0, np.nan]), straight=0.2, right_angle=1.1)
    np.testing.assert_allclose(k, [0.2, 0.2 + 0.9 / 3, 1.1, 1.1, 0.2], rtol=1e-12)


def test_a_surcharged_chain_round_a_right_angle_bend_by_hand() -> None:
    # 2 -> 1 runs west, 1 -> 0 runs south: the flow turns 90 degrees at node 1. A high tailwater at
    # the outfall fills both 600 mm pipes; each level is the one below plus the full-bore friction
    # loss plus k v^2/2g at the node the pipe leaves: bend_loss at node 1, manhole_loss at node 2.
    diameter, flow, length, tail = 0.6, 0.25, 50.0, 14.0
    area = np.pi * diameter**2 / 4
    friction = (flow * N / (area * (diameter / 4) ** (2 / 3))) ** 2  # Sf = (Q n / (A R^(2/3)))^2 (Chow 1959, eq. 5-6)
    head = (flow / area) ** 2 / (2 * G)
    node_1 = tail + friction * length + 1.2 * head
    node_2 = node_1 + friction * length + 0.2 * head
    sections = PipeSections.from_names(["circular"] * 2, np.full(2, diameter), np.full(2, diameter))
    pipes = PipeHydraulics(sections, np.full(2, 0.002), Friction.uniform("manning", N, 2), np.full(2, length))
    x, y = np.array([40.0, 40.0, 90.0]), np.array([0.0, 50.0, 50.0])
    up, down = np.array([1, 2]), np.array([0, 1])
    flows = np.full(2, flow)
    down_invert = np.array([10.0, 10.1])
    result = grade_line(
        pipes, flow=flows, upstream=up, downstream=down, node_count=3, up_invert=down_invert + 0.002 * length, down_invert=down_invert,
        node_rim=np.full(3, 20.0), boundary=np.array([BoundaryKind.FIXED, -1, -1], dtype=np.int8), boundary_level=np.array([tail, np.nan, np.nan]),
        evaluate=np.ones(2, dtype=bool), settings=GradeLineSettings(manhole_loss=0.2, bend_loss=1.2), turn=turn_angles(up, down, flows, x, y),
    )  # fmt: skip
    assert result.node_level[1] == pytest.approx(node_1, rel=1e-12)
    assert result.node_level[2] == pytest.approx(node_2, rel=1e-12)
