"""The long section's axis ticks: round values over the span, and none where the span is no number."""

import numpy as np
import pandas as pd
import pytest

from audit.report.long_section import _ticks, downstream_path, next_pipes


@pytest.mark.parametrize(
    ("low", "high", "expected"),
    [
        (0.0, 105.0, [0.0, 20.0, 40.0, 60.0, 80.0, 100.0]),  # a step of 20: 105 / 6 = 17.5 rounds up to 2 x 10
        (-3.2, 7.9, [-2.0, 0.0, 2.0, 4.0, 6.0]),
        (10.0, 10.0, [10.0]),  # a span of nothing: the one value
    ],
)
def test_ticks_are_round_values_within_the_span(low: float, high: float, expected: list[float]) -> None:
    assert _ticks(low, high).tolist() == pytest.approx(expected)


def test_a_span_at_the_edge_of_floating_point_gives_a_few_ticks_or_none() -> None:
    # a length typed as 1e39 digits reads as the largest float: high + step / 2 would overflow to inf (a fuzz case)
    largest = float(np.finfo(float).max)
    ticks = _ticks(0.0, largest)
    assert 1 <= ticks.size <= 25
    assert np.isfinite(ticks).all()
    assert _ticks(-1e308, 1e308).size == 0  # the span itself overflows: no ticks rather than an endless axis
    assert _ticks(0.0, float("nan")).size == 0


def test_the_walk_downstream_takes_the_largest_flow_and_stops_at_a_loop() -> None:
    pipes = pd.DataFrame({"from_node_id": ["A", "B", "B", "C", "D", "E"], "to_node_id": ["B", "C", "D", "O", "E", "D"],
                          "q_design": [1.0, 0.4, 0.6, 0.4, 0.6, 0.6]})  # fmt: skip
    steps = next_pipes(pipes)
    assert downstream_path("A", steps) == [0, 2, 4, 5]  # B -> D (0.6 > 0.4), D -> E -> back to D: a loop ends the walk
    assert downstream_path("C", steps) == [3]
    assert downstream_path("O", steps) == []  # an outfall: no pipe leaves it
    assert downstream_path("A", next_pipes(pipes.iloc[:0])) == []  # a layer with no pipe (a fuzz case)

