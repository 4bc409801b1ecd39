"""Design-rule checks: every flag, its boundary, the tables, the spacing runs and the settings."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from audit.errors import ConfigError
from audit.rules import (
    RSWF_MAX_SPACING,
    RSWF_MIN_SLOPE,
    SEVERITY_ORDER,
    DiameterTable,
    RuleSettings,
    as_table,
    check_pipes,
    unusual_values,
    worst_severity_at_least,
)
from audit.units import US

# A healthy 300 mm pipe: nothing in it breaks a default rule (values invented for the fixture).
HEALTHY = {
    "pipe_id": "P", "shape": "circular", "diameter": 0.3, "height": 0.3, "length_m": 50.0,
    "slope": 0.01, "q_full": 0.1, "q_design": 0.05, "load_ratio": 0.5, "depth_ratio": 0.5,
    "v_design": 1.0, "shear": 3.0, "up_cover": 2.0, "down_cover": 2.0,
    "hydraulic_status": "ok", "flow_status": "given",
}  # fmt: skip


def metrics(count: int = 1, **columns: object) -> pd.DataFrame:
    """``count`` healthy pipes with some columns replaced (a scalar or one value per pipe)."""
    frame = pd.DataFrame({name: [value] * count for name, value in HEALTHY.items()})
    frame["pipe_id"] = [f"P{row}" for row in range(count)]
    for name, value in columns.items():
        frame[name] = value
    return frame


def check(
    frame: pd.DataFrame,
    *,
    upstream: list[int] | None = None,
    downstream: list[int] | None = None,
    access: list[bool] | None = None,
    **settings: object,
) -> pd.DataFrame:
    """Run the checks; by default each pipe runs alone between two manholes of its own."""
    count = len(frame)
    up = np.arange(count) * 2 if upstream is None else np.array(upstream)
    down = np.arange(count) * 2 + 1 if downstream is None else np.array(downstream)
    nodes = np.ones(2 * count, dtype=bool) if access is None else np.array(access)
    return check_pipes(frame, upstream=up, downstream=down, node_access=nodes, settings=RuleSettings(**settings))


def test_healthy_pipe_has_no_flag() -> None:
    result = check(metrics())
    assert result.loc[0, ["flags", "severity", "reasons"]].tolist() == ["", "none", ""]


def test_surcharge_reason_carries_the_numbers() -> None:
    result = check(metrics(q_design=0.134, load_ratio=1.34, hydraulic_status="surcharged"))
    assert result.loc[0, "flags"] == "surcharge"
    assert result.loc[0, "severity"] == "high"
    assert result.loc[0, "reasons"] == "load ratio 1.34 > 1.00"


def test_load_ratio_boundaries() -> None:
    # load ratio exactly 1.0 is not surcharged but is near capacity; exactly 0.8 is neither
    frame = metrics(3, q_design=[0.1, 0.08, 0.085], load_ratio=[1.0, 0.8, 0.85])
    result = check(frame)
    assert result["flags"].tolist() == ["near_capacity", "", "near_capacity"]
    assert result.loc[2, "reasons"] == "load ratio 0.85 > 0.80"


def test_load_ratio_falls_back_to_flows_when_not_given() -> None:
    result = check(metrics(q_design=0.09, load_ratio=np.nan))
    assert result.loc[0, "reasons"] == "load ratio 0.90 > 0.80"


def test_silting_by_velocity_with_boundary() -> None:
    # a frame without the criterion's velocity is judged at the design flow
    result = check(metrics(2, v_design=[0.59, 0.6]))
    assert result["flags"].tolist() == ["silting", ""]
    assert result.loc[0, "reasons"] == "velocity 0.59 m/s < 0.60 m/s at the design flow"
    assert result.loc[0, "severity"] == "medium"


@pytest.mark.parametrize(
    ("criterion", "words"),
    [
        ("full_velocity", "velocity 0.50 m/s < 0.60 m/s flowing full"),
        ("design_velocity", "velocity 0.50 m/s < 0.60 m/s at the design flow"),
        ("fraction_velocity", "velocity 0.50 m/s < 0.60 m/s at 0.33 x the design flow"),
        ("dry_weather_velocity", "velocity 0.50 m/s < 0.60 m/s at the dry-weather peak flow"),
    ],
)
def test_silting_by_each_velocity_criterion(criterion: str, words: str) -> None:
    frame = metrics(2, v_design=1.0)
    frame["v_cleansing"] = [0.5, 0.6]  # the velocity at the criterion's flow, from the pipeline
    result = check(frame, self_cleansing=criterion)
    assert result["flags"].tolist() == ["silting", ""]
    assert result.loc[0, "reasons"] == words


def test_silting_by_shear_at_the_dry_weather_flow_and_the_exemption() -> None:
    frame = metrics(4, v_design=1.0)
    frame["v_cleansing"] = 1.0
    frame["shear_cleansing"] = [0.8, 0.99, 1.0, 0.2]
    frame["population_served"] = [500.0, 500.0, 500.0, 20.0]  # the last pipe heads a run of a few houses
    result = check(frame, self_cleansing="dry_weather_shear", dry_weather="average", exempt_population=50.0)
    assert result["flags"].tolist() == ["silting", "silting", "", ""]
    assert result.loc[0, "reasons"] == "shear 0.80 Pa < 1.00 Pa at the dry-weather average flow"


def test_high_velocity_with_boundary() -> None:
    result = check(metrics(2, v_design=[3.4, 3.0]))
    assert result["flags"].tolist() == ["high_velocity", ""]
    assert result.loc[0, "reasons"] == "velocity 3.40 m/s > 3.00 m/s"


def test_no_normal_depth_leaves_only_the_grade_flag() -> None:
    # zero and negative slope: whatever the hydraulics left in the other columns, only grade speaks
    frame = metrics(
        2, slope=[0.0, -0.002], v_design=[0.1, 5.0], q_full=np.nan, q_design=[0.5, np.nan],
        load_ratio=np.nan, hydraulic_status="nonpositive_slope", flow_status=["given", "missing"],
    )  # fmt: skip
    result = check(frame)
    assert result["flags"].tolist() == ["zero_grade", "reverse_grade"]
    # both are most often survey or register errors: the reason says to verify the levels
    assert result["reasons"].tolist() == ["no fall between the inverts; verify levels", "slope -0.200 % falls against the flow; verify levels"]
    assert result["severity"].tolist() == ["medium", "high"]


def test_min_slope_as_a_number_with_boundary() -> None:
    frame = metrics(3, slope=[0.004, 0.005, 0.01])
    assert check(frame)["flags"].tolist() == ["", "", ""]
    result = check(frame, min_slope=DiameterTable.constant(0.005))
    assert result["flags"].tolist() == ["flat_grade", "", ""]
    assert result.loc[0, "reasons"] == "slope 0.400 % < 0.500 %"


def test_min_slope_table_by_diameter() -> None:
    # 300 mm and 304.8 mm (12 in) take the 12 in row, 0.22 %; 280 mm takes the 10 in row, 0.28 %
    frame = metrics(4, diameter=[0.3, 0.3048, 0.28, 0.3], slope=[0.0021, 0.0022, 0.0025, 0.0022])
    result = check(frame, min_slope=RSWF_MIN_SLOPE)
    assert result["flags"].tolist() == ["flat_grade", "", "flat_grade", ""]
    assert result.loc[0, "reasons"] == "slope 0.210 % < 0.220 %"
    assert result.loc[2, "reasons"] == "slope 0.250 % < 0.280 %"


def test_table_lookup_rows_and_below_first_row() -> None:
    table = DiameterTable(from_diameter_mm=(200.0, 300.0), values=(0.004, 0.0022))
    sizes = np.array([0.15, 0.2, 0.2999, 0.3, 0.9, np.nan])
    assert table.lookup(sizes)[:5].tolist() == [0.004, 0.004, 0.004, 0.0022, 0.0022]
    assert np.isnan(table.lookup(sizes)[5])
    # Recommended Standards for Wastewater Facilities: 400 ft up to 15 in, 500 ft for 18 to 30 in,
    # no limit given above (from memory); 450 mm is the metric 18 in and takes the 18 in class, as
    # it takes the 18 in slope in the minimum-slope table
    sizes = np.array([0.375, 0.4499, 0.45, 0.4572, 0.75, 0.7999, 0.825, 1.2])
    assert RSWF_MAX_SPACING.lookup(sizes).tolist() == [121.92, 121.92, 152.4, 152.4, 152.4, 152.4, np.inf, np.inf]
    assert RSWF_MIN_SLOPE.lookup(np.array([0.45, 0.4572])).tolist() == [0.0012, 0.0012]


def test_rswf_min_slopes_give_two_feet_per_second_flowing_full() -> None:
    # Source: Recommended Standards for Wastewater Facilities (Great Lakes - Upper Mississippi
    # River Board, 2014), sec. 33.41: the minimum slopes give at least 2 ft/s flowing full with
    # n = 0.013 (from memory). Manning full bore: V = (1/n) (D/4)^(2/3) S^(1/2).
    inches = np.array([8, 10, 12, 15, 18, 21, 24, 27, 30, 36])
    diameter = inches * 0.0254
    slope = RSWF_MIN_SLOPE.lookup(diameter)
    velocity = (1 / 0.013) * (diameter / 4) ** (2 / 3) * np.sqrt(slope)
    assert np.all(velocity >= 2.0 * 0.3048 - 0.005)
    assert np.all(velocity <= 2.3 * 0.3048)


def test_spacing_chain_through_buried_nodes_is_one_run() -> None:
    # three 50 m pipes 0 -> 1 -> 2 -> 3; nodes 1 and 2 have no access: one run of 150 m
    frame = metrics(3)
    chain = {"upstream": [0, 1, 2], "downstream": [1, 2, 3]}
    buried = check(frame, **chain, access=[True, False, False, True])
    assert buried["flags"].tolist() == ["long_spacing"] * 3
    assert buried.loc[1, "reasons"] == "access run 150.0 m > 121.9 m (3 pipes)"
    assert buried["access_run_m"].tolist() == [150.0] * 3
    manholes = check(frame, **chain, access=[True, True, True, True])
    assert manholes["flags"].tolist() == ["", "", ""]
    assert manholes["access_run_m"].tolist() == [50.0] * 3


def test_spacing_limit_by_diameter_and_strictest_in_run() -> None:
    chain = {"upstream": [0, 1, 2], "downstream": [1, 2, 3], "access": [True, False, False, True]}
    large = check(metrics(3, diameter=0.6), **chain)
    assert large["flags"].tolist() == ["", "", ""]  # 150 m <= 152.4 m for 18 to 30 in
    mixed = check(metrics(3, diameter=[0.375, 0.6, 0.6]), **chain)
    assert mixed["flags"].tolist() == ["long_spacing"] * 3


def test_spacing_as_a_number_with_boundary_and_unknown_end() -> None:
    frame = metrics(2, length_m=[100.0, 100.5])
    assert check(frame, max_spacing_m=DiameterTable.constant(100.0))["flags"].tolist() == ["", "long_spacing"]
    # an unknown end (-1) ends the run even though the other node is buried
    split = check(metrics(2, length_m=80.0), upstream=[-1, 0], downstream=[0, -1], access=[False])
    assert split["flags"].tolist() == ["long_spacing", "long_spacing"]
    alone = check(metrics(2, length_m=80.0), upstream=[-1, 0], downstream=[-1, -1], access=[False])
    assert alone["flags"].tolist() == ["", ""]


def test_diameter_decrease_at_a_junction() -> None:
    # 300 mm and 450 mm pipes meet at node 2; the 375 mm pipe leaving it is smaller than 450 mm
    frame = metrics(4, diameter=[0.3, 0.45, 0.375, 0.375])
    result = check(frame, upstream=[0, 1, 2, 3], downstream=[2, 2, 3, 4], access=[True] * 5)
    assert result["flags"].tolist() == ["", "", "diameter_decrease", ""]
    # full areas pi D^2 / 4: 0.110 m2 < 0.159 m2
    assert result.loc[2, "reasons"] == "diameter 375 mm, full area 0.110 m2 < 0.159 m2 of the 450 mm pipe entering upstream"


def test_size_steps_compare_full_areas_not_heights() -> None:
    # An egg 600 x 400 mm (area 0.1838 m2: 4.594 R^2 with R = 200 mm, Butler and Davies 2011, from
    # memory) into a 525 mm circular pipe (0.2165 m2): lower, but larger; no step. A 1200 x 900 box
    # (1.08 m2) into a 2000 x 600 box (1.2 m2): lower, but larger; no step. A 600 mm pipe into a
    # 450 x 300 box (0.135 m2 < 0.283 m2): a real step.
    frame = metrics(6, shape=["egg", "circular", "rectangular", "rectangular", "circular", "rectangular"],
                    diameter=[np.nan, 0.525, np.nan, np.nan, 0.6, np.nan], height=[0.6, 0.525, 0.9, 0.6, 0.6, 0.3])  # fmt: skip
    frame["full_area"] = [4.594 * 0.2**2, np.pi * 0.525**2 / 4, 1.2 * 0.9, 2.0 * 0.6, np.pi * 0.6**2 / 4, 0.45 * 0.3]
    result = check(frame, upstream=[0, 1, 2, 3, 4, 5], downstream=[1, 6, 3, 6, 5, 6], access=[True] * 7)
    assert result["flags"].tolist() == ["", "", "", "", "", "diameter_decrease"]


def test_shallow_cover_takes_the_lesser_known_cover() -> None:
    frame = metrics(4, up_cover=[0.5, 0.9, np.nan, np.nan], down_cover=[2.0, 2.0, 0.6, np.nan])
    result = check(frame)
    assert result["flags"].tolist() == ["shallow_cover", "", "shallow_cover", "missing_data"]
    assert result.loc[0, "reasons"] == "cover 0.50 m < 0.90 m"
    assert result.loc[2, "reasons"] == "cover 0.60 m < 0.90 m"
    assert result.loc[3, "reasons"] == "no cover at either end"


def test_below_min_diameter_with_boundary_and_non_circular() -> None:
    frame = metrics(3, shape=["circular", "circular", "rectangular"], diameter=[0.15, 0.2, np.nan],
                    height=[0.15, 0.2, 0.15])  # fmt: skip
    result = check(frame)
    assert result["flags"].tolist() == ["below_min_diameter", "", "below_min_diameter"]
    assert result.loc[0, "reasons"] == "diameter 150 mm < 200 mm"
    assert result.loc[2, "reasons"] == "height 150 mm < 200 mm"


def test_missing_data_names_what_is_missing() -> None:
    frame = metrics(
        6,
        slope=[np.nan, np.nan, 0.01, 0.01, 0.01, 0.01],
        v_design=np.nan, q_full=[np.nan, np.nan, np.nan, 0.1, 0.1, 0.1],
        q_design=[0.05, 0.05, 0.05, np.nan, np.nan, 0.05], load_ratio=np.nan,
        hydraulic_status=["missing_slope", "missing_slope", "missing_roughness", "missing_flow", "ok", "queued"],
        flow_status=["given", "given", "given", "missing", "self_loop", "given"],
    )  # fmt: skip
    frame["upstream_invert"] = [np.nan, 12.0, 12.0, 12.0, 12.0, 12.0]
    frame["downstream_invert"] = [11.0, np.nan, 11.0, 11.0, 11.0, 11.0]
    result = check(frame)
    assert result["flags"].tolist() == ["missing_data"] * 6
    assert result["reasons"].tolist() == [
        "no slope: upstream invert missing",
        "no slope: downstream invert missing",
        "no roughness",
        "no design flow",
        "no design flow: both ends of the pipe join one node (a self-loop)",
        "hydraulics not computed (status 'queued')",
    ]


def test_missing_size_and_length() -> None:
    frame = metrics(2, shape=["circular", "egg"], diameter=np.nan, height=np.nan, length_m=[np.nan, 20.0],
                    v_design=np.nan, hydraulic_status="missing_size")  # fmt: skip
    result = check(frame)
    assert result["reasons"].tolist() == ["no size: diameter missing, no length", "no size: height missing"]
    assert np.isnan(result.loc[0, "access_run_m"])


def test_flags_in_fixed_order_and_worst_severity() -> None:
    frame = metrics(q_design=0.12, load_ratio=1.2, diameter=0.15, up_cover=0.5, v_design=3.5)
    result = check(frame)
    assert result.loc[0, "flags"] == "surcharge;high_velocity;below_min_diameter;shallow_cover"
    assert result.loc[0, "severity"] == "high"
    assert result.loc[0, "reasons"] == (
        "load ratio 1.20 > 1.00; velocity 3.50 m/s > 3.00 m/s; diameter 150 mm < 200 mm; cover 0.50 m < 0.90 m"
    )


def test_severity_override_and_off() -> None:
    frame = metrics(2, up_cover=[0.5, 2.0], diameter=[0.3, 0.15])
    severity = RuleSettings.from_table({"severity": {"shallow_cover": "high", "below_min_diameter": "off"}},
                                       source="t.toml").severity  # fmt: skip
    result = check(frame, severity=severity)
    assert result["flags"].tolist() == ["shallow_cover", ""]
    assert result["severity"].tolist() == ["high", "none"]


def test_severity_order_and_fail_on_masks() -> None:
    assert SEVERITY_ORDER == ("low", "medium", "high")
    column = pd.Series(["", "low", "medium", "high"])
    assert worst_severity_at_least(column, "low").tolist() == [False, True, True, True]
    assert worst_severity_at_least(column, "medium").tolist() == [False, False, True, True]
    assert worst_severity_at_least(column, "high").tolist() == [False, False, False, True]
    with pytest.raises(ConfigError, match="low, medium, high"):
        worst_severity_at_least(column, "severe")


def test_result_keeps_the_index_and_handles_no_pipes() -> None:
    frame = metrics(2, v_design=[0.5, 1.0]).set_axis([10, 20])
    assert check(frame)["flags"].to_dict() == {10: "silting", 20: ""}
    empty = check_pipes(metrics(0), upstream=np.array([], dtype=int), downstream=np.array([], dtype=int),
                        node_access=np.array([], dtype=bool), settings=RuleSettings())  # fmt: skip
    assert empty.columns.tolist() == ["flags", "severity", "reasons", "access_run_m"]
    assert len(empty) == 0


def test_same_answers_over_many_pipes() -> None:
    # 10,000 copies of the buried chain give the same flags as one
    copies = 10_000
    frame = metrics(3 * copies)
    nodes = np.arange(copies)[:, None] * 4 + np.arange(3)
    access = np.tile([True, False, False, True], copies)
    result = check(frame, upstream=nodes.ravel().tolist(), downstream=(nodes + 1).ravel().tolist(), access=access.tolist())
    assert (result["flags"] == "long_spacing").all()
    assert (result["access_run_m"] == 150.0).all()


def test_settings_defaults() -> None:
    settings = RuleSettings.from_table({}, source="town.toml")
    assert settings == RuleSettings()
    assert settings.max_spacing_m.values == (121.92, 152.4, np.inf)
    assert settings.min_slope is None
    assert settings.min_shear == 1.0
    assert settings.self_cleansing == "full_velocity"


def test_settings_from_table() -> None:
    settings = RuleSettings.from_table(
        {"min_velocity_m_s": 0.75, "max_spacing_m": 90, "min_slope": [[0, 0.005], [300, 0.003]], "min_shear_pa": 1},
        source="town.toml",
    )
    assert settings.min_velocity == 0.75
    assert settings.min_shear == 1.0
    assert settings.max_spacing_m == DiameterTable.constant(90.0)
    assert settings.min_slope == DiameterTable(from_diameter_mm=(0.0, 300.0), values=(0.005, 0.003))


@pytest.mark.parametrize(
    ("table", "words"),
    [
        ({"max_velocty": 3.0}, ["rules.max_velocty", "did you mean 'max_velocity_m_s'"]),
        ({"min_velocity_m_s": "fast"}, ["rules.min_velocity_m_s", "finite number"]),
        ({"min_velocity_ft_s": True}, ["rules.min_velocity_ft_s", "finite number"]),
        ({"min_velocity": 0.7}, ["rules.min_velocity", "renamed to min_velocity_m_s (or min_velocity_ft_s)"]),
        ({"min_cover_m": 0.9, "min_cover_ft": 3}, ["rules.min_cover_ft", "give one of rules.min_cover_m and rules.min_cover_ft"]),
        ({"min_cover_m": -1}, ["rules.min_cover_m", ">= 0"]),
        ({"max_spacing_m": [[0, 120], [0, 150]]}, ["rules.max_spacing_m[1]", "ascend"]),
        ({"max_spacing_m": [[0, 120, 3]]}, ["rules.max_spacing_m[0]", "[from_diameter_mm, value]"]),
        ({"min_slope": "steep"}, ["rules.min_slope", "list of [from_diameter_mm, value] rows"]),
        ({"min_slope": [[0, "x"]]}, ["rules.min_slope[0][1]", "finite number"]),
        ({"severity": {"siltng": "low"}}, ["rules.severity.siltng", "did you mean 'silting'"]),
        ({"self_cleansing": "slow"}, ["rules.self_cleansing", "full_velocity, design_velocity, fraction_velocity"]),
        ({"dry_weather": "mean"}, ["rules.dry_weather", "peak, average"]),
        ({"cleansing_fraction": 0}, ["rules.cleansing_fraction", "> 0"]),
        ({"severity": {"silting": "urgent"}}, ["rules.severity.silting", "low, medium, high, off"]),
        ({"near_capacity_ratio": 1.2}, ["rules.near_capacity_ratio", "rules.max_load_ratio"]),
        ({"min_velocity_m_s": 4.0}, ["rules.min_velocity", "rules.max_velocity"]),
    ],
)
def test_settings_errors_name_file_and_key(table: dict[str, object], words: list[str]) -> None:
    with pytest.raises(ConfigError) as error:
        RuleSettings.from_table(table, source="town.toml")
    message = str(error.value)
    assert message.startswith("town.toml: ")
    for word in words:
        assert word in message


def test_settings_table_must_be_a_table() -> None:
    with pytest.raises(ConfigError, match=r"town.toml: rules: expected a table"):
        RuleSettings.from_table([1, 2], source="town.toml")  # type: ignore[arg-type]


def test_metrics_frame_must_carry_the_contract_columns() -> None:
    with pytest.raises(ValueError, match="lacks column.*shear"):
        check(metrics().drop(columns="shear"))


def test_only_gravity_and_private_pipes_are_judged() -> None:
    # Six pipes in a chain 0 -> 1 -> ... -> 6, each with a reverse grade, a 150 mm size and shallow
    # cover; only the gravity pipe is flagged for all three, the private drain for all but its size.
    frame = metrics(6, slope=-0.01, diameter=0.15, height=0.15, up_cover=0.3, down_cover=0.3)
    frame["kind"] = ["gravity", "private", "rising_main", "siphon", "overflow", "abandoned"]
    result = check_pipes(frame, upstream=np.arange(6), downstream=np.arange(1, 7), node_access=np.ones(7, dtype=bool),
                         settings=RuleSettings())  # fmt: skip
    assert result["flags"].tolist() == ["reverse_grade;below_min_diameter;shallow_cover", "reverse_grade;shallow_cover", "", "", "", ""]
    assert result["reasons"].iloc[1] == "slope -1.000 % falls against the flow; verify levels; cover 0.30 m < 0.90 m"
    assert np.isnan(result["access_run_m"].iloc[2:]).all()


def test_thresholds_far_outside_their_usual_range_are_said(tmp_path: Path) -> None:
    from _small_town import write_town

    from audit.pipeline import run

    config = write_town(tmp_path, "GPKG", ".gpkg")
    # a minimum slope of 0.4 meant as 0.4 %, a cover of 3.5 meant as feet, a velocity in ft/s
    text = config.read_text(encoding="utf-8").replace("[rules]\n", "[rules]\nmin_slope = 0.4\nmin_cover_m = 3.5\nmin_velocity_m_s = 2.0\n")
    config.write_text(text, encoding="utf-8")
    found = run(config).findings.query("code == 'unusual_setting'")
    assert found["layer"].unique().tolist() == ["config"]
    assert found["feature"].tolist() == ["rules.min_velocity_m_s", "rules.min_slope", "rules.min_cover_m"]
    assert found["message"].iloc[0] == "rules.min_velocity_m_s = 2 lies outside the usual 0.2 to 1.5; expected m/s (2 ft/s is 0.61 m/s)"
    assert unusual_values(RuleSettings()) == []  # the defaults are usual


def test_rules_in_us_units_are_the_same_settings() -> None:
    # Source: NIST SP 811 (2008), appendix B: 1 ft = 0.3048 m, 1 in = 25.4 mm, 1 lbf/ft^2 = 47.880 Pa
    us = RuleSettings.from_table(
        {"min_velocity_ft_s": 2.0, "max_velocity_ft_s": 10.0, "min_shear_psf": 0.02, "min_cover_ft": 3.0, "min_diameter_in": 8,
         "max_spacing_ft": [[0, 400], [18, 500]], "min_slope_by_in": [[8, 0.004], [12, 0.0022]]},
        source="town.toml",
    )  # fmt: skip
    assert us.min_velocity == pytest.approx(0.6096)
    assert us.max_velocity == pytest.approx(3.048)
    assert us.min_shear == pytest.approx(0.02 * 47.880259, rel=1e-6)
    assert us.min_cover_m == pytest.approx(0.9144)
    assert us.min_diameter_mm == pytest.approx(203.2)
    assert us.max_spacing_m.from_diameter_mm == pytest.approx((0.0, 457.2))
    assert us.max_spacing_m.values == pytest.approx((121.92, 152.4))
    assert us.min_slope is not None
    assert us.min_slope.from_diameter_mm == pytest.approx((203.2, 304.8))
    assert us.min_slope.values == (0.004, 0.0022)
    back = as_table(us, US)
    assert back["min_velocity_ft_s"] == pytest.approx(2.0)
    assert back["max_spacing_ft"].values == pytest.approx((400.0, 500.0))  # type: ignore[attr-defined]
    assert "min_velocity_m_s" not in back
