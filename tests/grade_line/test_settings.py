"""``[grade_line]``: parsing, every problem reported under its key, and the per-node boundary arrays."""

from __future__ import annotations

import math
import tomllib
from pathlib import Path

import numpy as np
import pytest

from audit.errors import ConfigError, ConfigProblems
from audit.grade_line import BoundaryKind, GradeLineSettings, Outfall, node_boundaries, parse_grade_line


def parsed(text: str) -> tuple[GradeLineSettings, list[str]]:
    check = ConfigProblems(Path("town.toml"))
    settings = parse_grade_line(check, tomllib.loads(text).get("grade_line", {}))
    return settings, check.problems


def test_an_empty_table_gives_the_defaults() -> None:
    settings, problems = parsed("")
    assert problems == []
    assert settings == GradeLineSettings()
    assert settings.outfall == Outfall(BoundaryKind.FREE)
    assert math.isnan(settings.outfall.level)
    assert (settings.manhole_loss, settings.bend_loss, settings.freeboard_m, settings.profile_steps) == (0.15, 1.0, 0.0, 16)


def test_every_key_is_read() -> None:
    settings, problems = parsed(
        """
        [grade_line]
        outfall = "fixed"
        outfall_level = -1.25
        manhole_loss = 0.3
        bend_loss = 0.75
        freeboard_m = 0.15
        profile_steps = 24
        [grade_line.outfalls]
        OF1 = "normal"
        OF2 = "free"
        "OF 3" = 4
        """
    )
    assert problems == []
    assert settings.outfall == Outfall(BoundaryKind.FIXED, -1.25)  # a level below the datum is fine
    assert dict(settings.outfalls) == {
        "OF1": Outfall(BoundaryKind.NORMAL),
        "OF2": Outfall(BoundaryKind.FREE),
        "OF 3": Outfall(BoundaryKind.FIXED, 4.0),
    }
    assert (settings.manhole_loss, settings.bend_loss, settings.freeboard_m, settings.profile_steps) == (0.3, 0.75, 0.15, 24)


@pytest.mark.parametrize(("text", "bend"), [("manhole_loss = 0.3", 1.0), ("manhole_loss = 2.5", 2.5), ("manhole_loss = 0.3\nbend_loss = 0.3", 0.3)])
def test_the_bend_loss_left_out_is_never_below_the_straight_one(text: str, bend: float) -> None:
    settings, problems = parsed(f"[grade_line]\n{text}")
    assert problems == []
    assert settings.bend_loss == bend


@pytest.mark.parametrize(
    ("text", "key"),
    [
        ('outfall = "tidal"', "grade_line.outfall"),
        ('outfall = "fixed"', "grade_line.outfall_level"),
        ('outfall = "free"\noutfall_level = 3.0', "grade_line.outfall_level"),
        ('outfall = "fixed"\noutfall_level = "high"', "grade_line.outfall_level"),
        ("manhole_loss = -0.1", "grade_line.manhole_loss"),
        ("manhole_loss = 25", "grade_line.manhole_loss"),
        ("bend_loss = -1", "grade_line.bend_loss"),
        ('bend_loss = "high"', "grade_line.bend_loss"),
        ("bend_loss = 11", "grade_line.bend_loss"),
        ("manhole_loss = 0.5\nbend_loss = 0.3", "grade_line.bend_loss"),
        ("freeboard_m = -1", "grade_line.freeboard_m"),
        ("freeboard_m = inf", "grade_line.freeboard_m"),
        ("profile_steps = 2", "grade_line.profile_steps"),
        ("profile_steps = 16.5", "grade_line.profile_steps"),
        ("profile_steps = true", "grade_line.profile_steps"),
        ("manhole_los = 0.2", "grade_line.manhole_los"),
        ('[grade_line.outfalls]\nOF1 = "fixed"', "grade_line.outfalls.OF1"),
        ("[grade_line.outfalls]\nOF1 = nan", "grade_line.outfalls.OF1"),
        ("[grade_line.outfalls]\nOF1 = true", "grade_line.outfalls.OF1"),
    ],
)
def test_a_bad_value_is_reported_under_its_key(text: str, key: str) -> None:
    body = text if text.startswith("[") else f"[grade_line]\n{text}"
    settings, problems = parsed(body)
    assert len(problems) == 1
    assert problems[0].startswith(f"{key}:")
    assert isinstance(settings, GradeLineSettings)


def test_all_problems_of_the_table_are_reported_at_once() -> None:
    check = ConfigProblems(Path("town.toml"))
    parse_grade_line(check, {"outfall": "river", "manhole_loss": -1, "profile_steps": 1})
    assert len(check.problems) == 3
    with pytest.raises(ConfigError, match="town.toml"):
        check.raise_if_any()


def test_a_misspelt_key_gets_a_suggestion() -> None:
    _, problems = parsed("[grade_line]\nfreeboard = 0.2")
    assert "did you mean 'freeboard_m'" in problems[0]


def test_node_boundaries_apply_the_default_at_outfalls_and_the_entries_by_id() -> None:
    settings = GradeLineSettings(
        outfall=Outfall(BoundaryKind.FIXED, 2.0),
        outfalls={"B": Outfall(BoundaryKind.NORMAL), "D": Outfall(BoundaryKind.FIXED, 7.5), "Z": Outfall(BoundaryKind.FREE)},
    )
    ids = np.array(["A", "B", "C", "D", "E"], dtype=object)
    codes, levels, unknown = node_boundaries(settings, ids, np.array([True, True, False, False, True]))
    assert codes.tolist() == [BoundaryKind.FIXED, BoundaryKind.NORMAL, -1, BoundaryKind.FIXED, BoundaryKind.FIXED]
    np.testing.assert_array_equal(levels, [2.0, np.nan, np.nan, 7.5, 2.0])
    assert unknown == ("Z",)
    assert codes.dtype == np.int8


def test_node_boundaries_without_fixed_levels_have_none() -> None:
    codes, levels, unknown = node_boundaries(GradeLineSettings(), ["A", "B"], np.array([False, True]))
    assert codes.tolist() == [-1, BoundaryKind.FREE]
    assert np.isnan(levels).all()
    assert unknown == ()


def test_boundary_kinds_have_lower_case_labels() -> None:
    assert [kind.label for kind in BoundaryKind] == ["free", "normal", "fixed"]
