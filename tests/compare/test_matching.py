"""Matching by id, else by end points: reversed pipes, the tolerance, duplicates and ambiguity."""

import numpy as np
import pandas as pd
import pyarrow as pa
import pytest
import shapely

from audit.compare.matching import AMBIGUOUS, BY_GEOMETRY, BY_ID, end_points, match_ends, match_features, plain_text


def _ends(*lines: tuple[tuple[float, float], tuple[float, float]]) -> np.ndarray:
    return np.array(lines, dtype=float)


def _ids(*values: str | None) -> pd.Series:
    return plain_text(pd.Series(list(values), dtype=object))


def test_a_pipe_drawn_the_other_way_round_still_matches() -> None:
    old = _ends(((0.0, 0.0), (50.0, 0.0)))
    new = _ends(((50.0, 0.2), (0.1, 0.0)))
    rows_old, rows_new, ambiguous = match_ends(old, new, tolerance=0.5)
    assert (rows_old.tolist(), rows_new.tolist(), ambiguous.tolist()) == ([0], [0], [False])


@pytest.mark.parametrize(("offset", "matched"), [(0.49, True), (0.51, False)])
def test_each_end_must_lie_within_the_tolerance(offset: float, matched: bool) -> None:
    old = _ends(((0.0, 0.0), (50.0, 0.0)))
    new = _ends(((0.0, offset), (50.0, 0.0)))  # one end moved by the offset, the other not at all
    assert (match_ends(old, new, tolerance=0.5)[0].size == 1) is matched


def test_both_ends_are_needed_not_their_sum() -> None:
    old = _ends(((0.0, 0.0), (50.0, 0.0)))
    new = _ends(((0.0, 0.0), (50.0, 0.7)))  # within 0.5 m * sqrt(2) in four coordinates, but one end is 0.7 m off
    assert match_ends(old, new, tolerance=0.5)[0].size == 0


def test_a_pipe_drawn_twice_is_an_ambiguous_match_and_the_copy_is_added() -> None:
    old_ids, new_ids = _ids("P7"), _ids("P7", "P7")
    old = _ends(((0.0, 0.0), (50.0, 0.0)))
    new = _ends(((0.0, 0.0), (50.0, 0.0)), ((0.0, 0.1), (50.0, 0.0)))
    matches = match_features(old_ids, new_ids, old, new, tolerance=0.5)
    assert (matches.old.tolist(), matches.new.tolist(), matches.how.tolist()) == ([0], [0], [AMBIGUOUS])  # the closer copy
    assert (matches.removed.tolist(), matches.added.tolist()) == ([], [1])


def test_unique_ids_match_wherever_the_pipes_lie() -> None:
    old = _ends(((0.0, 0.0), (50.0, 0.0)), ((0.0, 10.0), (50.0, 10.0)))
    new = _ends(((0.0, 10.0), (50.0, 10.0)), ((500.0, 0.0), (550.0, 0.0)))  # P2 moved far; P1 lies where P2 was
    matches = match_features(_ids("P1", "P2"), _ids("P2", "P1"), old, new, tolerance=0.5)
    assert sorted(zip(matches.old.tolist(), matches.new.tolist(), matches.how.tolist(), strict=True)) == [(0, 1, BY_ID), (1, 0, BY_ID)]


def test_missing_duplicate_and_placeholder_ids_fall_back_to_geometry() -> None:
    old = _ends(((0.0, 0.0), (50.0, 0.0)), ((0.0, 10.0), (50.0, 10.0)), ((0.0, 20.0), (50.0, 20.0)), ((0.0, 30.0), (50.0, 30.0)))
    new = old[::-1].copy()
    old_ids = plain_text(pd.Series(["A", "", "X", "X"], dtype=object), placeholders=frozenset({"0"}))
    new_ids = plain_text(pd.Series(["0", "0", " ", "A"], dtype=object), placeholders=frozenset({"0"}))
    matches = match_features(old_ids, new_ids, old, new, tolerance=0.5)
    pairs = sorted(zip(matches.old.tolist(), matches.new.tolist(), matches.how.tolist(), strict=True))
    assert pairs == [(0, 3, BY_ID), (1, 2, BY_GEOMETRY), (2, 1, BY_GEOMETRY), (3, 0, BY_GEOMETRY)]


def test_what_cannot_be_matched_is_never_dropped() -> None:
    old = _ends(((0.0, 0.0), (50.0, 0.0)), ((np.nan, np.nan), (np.nan, np.nan)))
    new = _ends(((100.0, 0.0), (150.0, 0.0)))
    matches = match_features(_ids(None, None), _ids(None), old, new, tolerance=0.5)
    assert matches.old.size == 0
    assert (matches.removed.tolist(), matches.added.tolist()) == ([0, 1], [0])


def test_many_leftovers_are_matched_one_to_one() -> None:
    rng = np.random.default_rng(5)
    start = rng.uniform(0.0, 10_000.0, size=(2_000, 2))
    old = np.stack([start, start + rng.uniform(20.0, 60.0, size=(2_000, 2))], axis=1)
    shuffled = rng.permutation(2_000)
    new = old[shuffled][:, ::-1] + rng.uniform(-0.2, 0.2, size=(2_000, 2, 2))  # redrawn the other way, each end moved a little
    rows_old, rows_new, _ = match_ends(old, new, tolerance=0.5)
    assert rows_old.size == 2_000
    assert np.array_equal(shuffled[rows_new], rows_old)


def test_end_points_read_from_the_bytes_agree_with_shapely() -> None:
    rng = np.random.default_rng(3)
    lines = [shapely.LineString(rng.uniform(0, 100, size=(count, 2))) for count in rng.integers(2, 6, size=50)]
    shapes = [*lines, shapely.Point(1.0, 2.0), None, shapely.MultiLineString([[(0, 0), (1, 1)], [(1, 1), (2, 5)]]),
              shapely.LineString([(0, 0, 1), (3, 4, 2)])]  # fmt: skip
    ends = end_points(pa.array(shapely.to_wkb(shapes), type=pa.binary()))
    for shape, found in zip(shapes, ends, strict=True):
        if shape is None:
            assert np.isnan(found).all()
            continue
        coords = shapely.get_coordinates(shape)
        assert found.tolist() == [coords[0].tolist(), coords[-1].tolist()]
