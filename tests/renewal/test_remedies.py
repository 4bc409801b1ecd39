"""Remedy sizes and slopes against hand calculations written out here, and against ``fluids``.

Manning for a circle filled to relative depth eta (Chow 1959, table 2-1 and eq. 5-6):
theta = 2 arccos(1 - 2 eta), A = D^2/8 (theta - sin theta), P = D theta / 2,
Q = (1/n) A (A/P)^(2/3) S^(1/2).
"""

import fluids
import numpy as np
import pytest
from scipy.optimize import brentq

from audit.hydraulics import Friction, PipeHydraulics, PipeSections
from audit.renewal import CleansingCriterion, RenewalSettings, capacity_remedy, silting_remedy
from audit.renewal.remedies import FlagSets, PipeFacts, plan_remedies
from audit.rules import FLAG_CODES

# A commercial list written for the test (metric internal diameters, m); common practice, no source.
SIZES = [0.15, 0.225, 0.3, 0.375, 0.45, 0.525, 0.6, 0.75, 0.9]
N = 0.013  # Manning n of concrete, common practice, no source
GRAVITY = 9.80665  # standard gravity (CGPM 1901)


def circle(diameter: float, eta: float) -> tuple[float, float]:
    """Area and wetted perimeter of a circle of diameter D at relative depth eta (Chow 1959, table 2-1)."""
    theta = 2.0 * np.arccos(1.0 - 2.0 * eta)
    return diameter**2 / 8.0 * (theta - np.sin(theta)), diameter * theta / 2.0


def manning_q(diameter: float, slope: float, eta: float) -> float:
    area, perimeter = circle(diameter, eta)
    return area * (area / perimeter) ** (2 / 3) * slope**0.5 / N


def pipes_of(diameters: list[float], slopes: list[float], friction: Friction) -> PipeHydraulics:
    size = np.asarray(diameters, dtype=float)
    return PipeHydraulics(PipeSections.from_names(["circular"] * size.size, size, size), np.asarray(slopes, dtype=float), friction,
                          np.full(size.size, 50.0))  # fmt: skip


def test_capacity_remedy_matches_manning_in_closed_form_over_the_size_list() -> None:
    diameters = [0.225, 0.3, 0.3, 0.45, 0.6]
    slopes = [0.004, 0.002, 0.01, 0.0015, 0.0008]
    flows = [0.05, 0.11, 0.25, 0.40, 1.50]
    pipes = pipes_of(diameters, slopes, Friction.uniform("manning", N, len(diameters)))
    size, slope = capacity_remedy(pipes, np.array(flows), sizes_m=SIZES, ratio=0.8)
    for place, (diameter, bed, flow) in enumerate(zip(diameters, slopes, flows, strict=True)):
        carrying = [d for d in SIZES if manning_q(d, bed, 0.8) >= flow]
        margins = [abs(manning_q(d, bed, 0.8) / flow - 1.0) for d in SIZES]
        assert min(margins) > 1e-3, "a flow too close to a size's capacity would test rounding, not the method"
        expected = carrying[0] if carrying else np.nan
        np.testing.assert_equal(size[place], expected)
        # the present pipe at 0.8 depth: S = (Q n / (A R^(2/3)))^2
        area, perimeter = circle(diameter, 0.8)
        np.testing.assert_allclose(slope[place], (flow * N / (area * (area / perimeter) ** (2 / 3))) ** 2, rtol=1e-9)
    assert np.isnan(size[4])  # 1.5 m3/s at 0.08 % needs more than 0.9 m
    # by the formula above at 0.8 depth: 0.3 m at 0.4 % carries 0.0598 m3/s (0.225 m: 0.0278); 0.45 m at 0.2 % carries
    # 0.1246 (0.375 m: 0.0766); 0.45 m at 1 % carries 0.2787 (0.375 m: 0.1714); 0.75 m at 0.15 % carries 0.4215 (0.6 m: 0.2324)
    assert size[:4].tolist() == [0.3, 0.45, 0.45, 0.75]


def colebrook_velocity(radius: float, slope: float, ks_m: float, viscosity: float) -> float:
    """Mean velocity of uniform flow by Colebrook (1939) with the friction factor of ``fluids``: S = f V^2 / (2 g 4R)."""
    hydraulic_diameter = 4.0 * radius

    def excess(velocity: float) -> float:
        friction = fluids.friction.Colebrook(velocity * hydraulic_diameter / viscosity, ks_m / hydraulic_diameter, tol=1e-14)
        return friction * velocity**2 / (2.0 * GRAVITY * hydraulic_diameter) - slope

    return float(brentq(excess, 0.05, 20.0, xtol=1e-14))


def test_capacity_remedy_with_colebrook_white_against_fluids() -> None:
    ks_mm, viscosity = 1.5, 1.14e-6  # ks of concrete (HR Wallingford and Barr 2006, from memory); water at 15 C about 1.14e-6 m2/s
    diameters, slopes, flows = [0.3, 0.375, 0.6], [0.003, 0.002, 0.001], [0.09, 0.2, 0.35]
    friction = Friction("colebrook-white", np.full(3, ks_mm), viscosity)
    size, slope = capacity_remedy(pipes_of(diameters, slopes, friction), np.array(flows), sizes_m=SIZES, ratio=0.8)
    for place, (diameter, bed, flow) in enumerate(zip(diameters, slopes, flows, strict=True)):
        capacity = []
        for d in SIZES:
            area, perimeter = circle(d, 0.8)
            capacity.append(area * colebrook_velocity(area / perimeter, bed, ks_mm / 1000.0, viscosity))
        assert min(abs(q / flow - 1.0) for q in capacity) > 1e-3
        assert size[place] == next(d for d, q in zip(SIZES, capacity, strict=True) if q >= flow)
        # the slope at which the present pipe carries the flow at 0.8 depth: S = f V^2 / (2 g 4R), V = Q / A
        area, perimeter = circle(diameter, 0.8)
        velocity, hydraulic_diameter = flow / area, 4.0 * area / perimeter
        factor = fluids.friction.Colebrook(velocity * hydraulic_diameter / viscosity, ks_mm / 1000.0 / hydraulic_diameter, tol=1e-14)
        np.testing.assert_allclose(slope[place], factor * velocity**2 / (2.0 * GRAVITY * hydraulic_diameter), rtol=1e-6)


def criterion(name: str, minimum: float, flow: np.ndarray | None) -> CleansingCriterion:
    return CleansingCriterion(name, minimum, flow, 0.15, "in the test")


def test_silting_flowing_full_needs_the_slope_of_the_two_feet_per_second_rule() -> None:
    # V_full = (1/n) (D/4)^(2/3) S^(1/2) = V_min  =>  S = (V_min n / (D/4)^(2/3))^2  (Chow 1959, eq. 5-6)
    diameters = [0.2, 0.3, 0.45]
    pipes = pipes_of(diameters, [0.001, 0.001, 0.0005], Friction.uniform("manning", N, 3))
    slope, size = silting_remedy(pipes, np.full(3, 0.01), criterion("full_velocity", 0.6, None), sizes_m=SIZES, ratio=0.8)
    expected = [(0.6 * N / (d / 4) ** (2 / 3)) ** 2 for d in diameters]
    np.testing.assert_allclose(slope, expected, rtol=1e-9)
    assert np.isnan(size).all()  # flowing full, a smaller pipe is never faster


def manning_normal_eta(diameter: float, slope: float, flow: float) -> float:
    return float(brentq(lambda eta: manning_q(diameter, slope, eta) - flow, 1e-9, 0.938))


def test_silting_at_the_design_flow_gives_the_slope_and_the_largest_smaller_size_that_cleanse() -> None:
    diameter, bed, flow, least = 0.45, 0.002, 0.02, 0.59
    pipes = pipes_of([diameter], [bed], Friction.uniform("manning", N, 1))
    slope, size = silting_remedy(pipes, np.array([flow]), criterion("design_velocity", least, np.array([flow])), sizes_m=SIZES, ratio=0.8)
    # at the slope sought the flow fills the area A = Q / V_min; then S = (V_min n / R^(2/3))^2 at that depth
    eta = brentq(lambda e: circle(diameter, e)[0] - flow / least, 1e-9, 1.0)
    area, perimeter = circle(diameter, eta)
    np.testing.assert_allclose(slope[0], (least * N / (area / perimeter) ** (2 / 3)) ** 2, rtol=1e-8)
    # a smaller size at the present slope: the largest below 0.45 m whose velocity at the flow reaches 0.6 m/s
    expected = np.nan
    for d in sorted((d for d in SIZES if d < diameter), reverse=True):
        if manning_q(d, bed, 0.8) < flow:
            continue  # too small to carry the flow within 0.8 of its depth
        velocity = flow / circle(d, manning_normal_eta(d, bed, flow))[0]
        if velocity >= least:
            expected = d
            break
    np.testing.assert_equal(size[0], expected)
    assert expected == 0.375  # by the loop above: 0.45 m runs at 0.584 m/s here, 0.375 m at 0.593 m/s


def test_silting_by_shear_reaches_the_least_shear_at_the_slope_found() -> None:
    diameter, flow, least = 0.3, 0.004, 1.5  # dry-weather flow [m3/s], least shear [Pa]
    pipes = pipes_of([diameter], [0.0008], Friction.uniform("manning", N, 1))
    slope, _ = silting_remedy(pipes, np.array([0.03]), criterion("dry_weather_shear", least, np.array([flow])), sizes_m=SIZES, ratio=0.8)
    # tau = rho g R S at the normal depth there; rho of water at 15 C is 999.10 kg/m3 (CRC handbook, from memory)
    eta = manning_normal_eta(diameter, slope[0], flow)
    area, perimeter = circle(diameter, eta)
    np.testing.assert_allclose(999.10 * GRAVITY * area / perimeter * slope[0], least, rtol=1e-4)
    assert slope[0] > 0.0008


def test_plan_remedies_chooses_a_kind_per_pipe_and_says_the_numbers() -> None:
    # pipes: reverse grade, surcharged, flooding below but fit, silting, old, long run, nothing
    count = 7
    diameters = np.array([0.3, 0.225, 0.45, 0.3, 0.375, 0.3, 0.3])
    slopes = np.array([-0.002, 0.004, 0.003, 0.001, 0.002, 0.003, 0.003])
    flows = np.array([0.02, 0.05, 0.05, 0.01, 0.03, 0.02, 0.02])
    pipes = pipes_of(list(diameters), list(slopes), Friction.uniform("manning", N, count))
    flags = np.array(["reverse_grade", "surcharge", "", "silting", "", "long_spacing", ""], dtype=object)
    facts = PipeFacts(
        flags=FlagSets.of(flags), findings={}, q_design=flows,
        evaluated=slopes > 0, floods_below=np.array([False, False, True, False, False, False, False]), floods_above=np.zeros(count, dtype=bool),
        age_years=np.array([10.0, 10.0, 10.0, 10.0, 120.0, 10.0, np.nan]), service_life=np.full(count, 100.0),
        structural=np.full(count, np.nan), service=np.full(count, np.nan),
    )  # fmt: skip
    remedies = plan_remedies(pipes, facts, cleansing=criterion("full_velocity", 0.6, None), settings=RenewalSettings(sizes_m=tuple(SIZES)))
    assert remedies.kind.tolist() == ["verify", "capacity", "downstream", "silting", "inspect", "other", ""]
    assert remedies.review.tolist() == [True, False, False, False, False, False, False]
    assert remedies.text[0] == "verify the survey before any renewal (reverse grade)"
    # 0.05 m3/s at 0.4 %: 0.225 m carries 0.0278 at 0.8 depth, 0.3 m carries 0.0598 (Manning above)
    assert manning_q(0.225, 0.004, 0.8) < 0.05 < manning_q(0.3, 0.004, 0.8)
    assert remedies.size_m[1] == 0.3
    assert remedies.text[1].startswith("capacity: upsize from 225 to 300 mm: carries 50 l/s within 0.8 of its depth at the present slope 0.4 %")
    area, perimeter = circle(0.225, 0.8)
    relay = (0.05 * N / (area * (area / perimeter) ** (2 / 3))) ** 2
    np.testing.assert_allclose(remedies.slope[1], relay, rtol=1e-9)
    assert remedies.text[1].endswith(f"; or re-lay the present 225 mm at {round(100 * relay, 3):g} %")
    assert remedies.text[2].startswith("relieve downstream")
    np.testing.assert_allclose(remedies.slope[3], (0.6 * N / (0.3 / 4) ** (2 / 3)) ** 2, rtol=1e-9)  # as the test above
    silt = (0.6 * N / (0.3 / 4) ** (2 / 3)) ** 2
    assert remedies.text[3] == f"silting: re-lay at {round(100 * silt, 3):g} % to self-cleanse (0.6 m/s in the test)"
    assert remedies.text[4] == "inspect (CCTV), then rehabilitate or replace: age 120 years, beyond the 100-year service life of its material"
    assert remedies.text[5].startswith("add an access point")
    assert remedies.text[6] == ""
    assert np.isnan(remedies.size_m[[0, 2, 4, 5, 6]]).all()


@pytest.mark.parametrize("flow", [0.0, np.nan])
def test_a_flagged_pipe_without_a_flow_is_said_not_sized(flow: float) -> None:
    pipes = pipes_of([0.3], [0.003], Friction.uniform("manning", N, 1))
    facts = PipeFacts(FlagSets.of(np.array(["surcharge"], dtype=object)), {}, np.array([flow]), np.array([True]), np.array([False]), np.array([False]),
                      np.array([np.nan]), np.array([100.0]), np.array([np.nan]), np.array([np.nan]))  # fmt: skip
    remedies = plan_remedies(pipes, facts, cleansing=criterion("full_velocity", 0.6, None), settings=RenewalSettings())
    assert remedies.kind[0] == "capacity"
    assert np.isnan(remedies.size_m[0])
    assert not remedies.short[0]
    assert remedies.text[0] == "capacity: not sized, the hydraulics did not run for it (no size, slope or design flow)"


def test_every_rule_flag_and_an_unknown_one_get_a_remedy() -> None:
    codes = [*FLAG_CODES, "a_flag_added_later"]
    count = len(codes)
    pipes = pipes_of([0.3] * count, [0.003] * count, Friction.uniform("manning", N, count))
    facts = PipeFacts(FlagSets.of(np.array(codes, dtype=object)), {}, np.full(count, 0.2), np.ones(count, dtype=bool), np.zeros(count, dtype=bool), np.zeros(count, dtype=bool),
                      np.full(count, np.nan), np.full(count, 100.0), np.full(count, np.nan), np.full(count, np.nan))  # fmt: skip
    remedies = plan_remedies(pipes, facts, cleansing=criterion("full_velocity", 0.6, None), settings=RenewalSettings())
    assert all(remedies.kind), dict(zip(codes, remedies.kind, strict=True))
    assert remedies.kind[codes.index("hydraulic_jump")] == "inspect"
    assert remedies.text[-1] == "see the a_flag_added_later flag"
    assert remedies.kind[-1] == "other"


def test_hundreds_of_distinct_remedies_each_keep_their_own_words() -> None:
    # 290 surcharged 225 mm pipes, each with its own flow and an old age: more distinct words than a small code holds
    count = 290
    flows = 0.030 + 0.0001 * np.arange(count)  # 30.0 to 58.9 l/s: each its own "carries ... l/s"
    pipes = pipes_of([0.225] * count, [0.004] * count, Friction.uniform("manning", N, count))
    facts = PipeFacts(FlagSets.of(np.full(count, "surcharge;silting", dtype=object)), {}, flows, np.ones(count, dtype=bool), np.zeros(count, dtype=bool),
                      np.zeros(count, dtype=bool), np.full(count, 120.0), np.full(count, 100.0), np.full(count, np.nan), np.full(count, np.nan))  # fmt: skip
    remedies = plan_remedies(pipes, facts, cleansing=criterion("full_velocity", 0.6, None), settings=RenewalSettings(sizes_m=tuple(SIZES)))
    tail = "; inspect (CCTV), then rehabilitate or replace: age 120 years, beyond the 100-year service life of its material"
    for place, flow in enumerate(flows):
        # 0.225 m at 0.4 % carries 0.0278 m3/s at 0.8 depth, 0.3 m 0.0598 (Manning above): every flow here needs 300 mm
        expected = f"capacity: upsize from 225 to 300 mm: carries {round(1000 * flow, 1):g} l/s within 0.8 of its depth at the present slope 0.4 %"
        assert remedies.text[place].startswith(expected), (place, remedies.text[place])
        assert remedies.text[place].endswith(tail)
    assert len(set(remedies.text)) == count
