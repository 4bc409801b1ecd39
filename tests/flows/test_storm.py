"""Storm runoff: the rational method's units, the rainfall curve, and the settling of tc."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from scipy.optimize import brentq

from audit.findings import FindingLog
from audit.flows.carrier import Carrier
from audit.flows.settings import FlowOptions, Rainfall
from audit.flows.storm import (
    PipeHydraulics,
    pipe_levels,
    rainfall_intensity,
    rational_discharge,
    runoff_coefficients,
    storm_flows,  # fmt: skip
)
from audit.hydraulics.friction import Friction
from audit.hydraulics.sections import PipeSections

ACRE_HA = 0.40468564224  # Source: NIST SP 811, Appendix B (1 acre = 4046.8564224 m2)
CFS = 0.028316846592  # m3/s; Source: NIST SP 811, Appendix B (1 ft3 = 0.028316846592 m3)


def test_rational_method_one_acre_one_inch_per_hour_is_1_008_cfs() -> None:
    # Source: FHWA HEC-22, Urban Drainage Design Manual, ch. 3: Q = C i A with Cu = 1.00 in US units,
    # the exact conversion being 1.008 cfs per acre-inch/hour (from memory).
    q = rational_discharge(1.0 * ACRE_HA, 25.4)
    assert float(q) / CFS == pytest.approx(1.008, abs=0.0005)


def test_intensity_curve_and_table() -> None:
    curve = Rainfall(a=1200.0, b=10.0, c=0.8)
    # worked by hand: 1200 / 20^0.8 and 1200 / 70^0.8
    np.testing.assert_allclose(rainfall_intensity([10.0, 60.0], curve), [1200 / 20**0.8, 1200 / 70**0.8])
    table = Rainfall(table=((5.0, 120.0), (20.0, 60.0), (80.0, 30.0)))
    # log-log interpolation: 10 min is halfway between 5 and 20 in log t, so i = sqrt(120 x 60)
    np.testing.assert_allclose(rainfall_intensity([1.0, 10.0, 40.0, 500.0], table), [120.0, (120 * 60) ** 0.5, (60 * 30) ** 0.5, 30.0])


def test_runoff_coefficient_from_field_or_impervious_share() -> None:
    areas = pd.DataFrame({"catchment_id": ["a", "b", "c", "d"], "runoff_coefficient": [0.7, np.nan, np.nan, 1.4],
                          "impervious_fraction": [0.1, 0.5, np.nan, 0.5]})  # fmt: skip
    findings = FindingLog()
    coefficient = runoff_coefficients(areas, options=FlowOptions(c_impervious=0.9, c_pervious=0.2), findings=findings)
    np.testing.assert_allclose(coefficient, [0.7, 0.5 * 0.9 + 0.5 * 0.2, 0.0, 0.0])
    assert sorted(zip(findings.to_frame()["feature"], findings.to_frame()["code"], strict=True)) == [("c", "no_runoff_coefficient"), ("d", "runoff_out_of_range")]


# A small invented storm sewer laid out like a design table: head pipes 0 and 1 join at node 2,
# pipe 2 runs to node 3, pipe 3 to the outfall 4. Concrete pipes, Manning n = 0.013.
UPSTREAM, DOWNSTREAM = np.array([0, 1, 2, 3]), np.array([2, 2, 3, 4])
LENGTH = np.array([120.0, 60.0, 150.0, 200.0])
SLOPE = np.array([0.004, 0.01, 0.003, 0.002])
DIAMETER = np.array([0.6, 0.45, 0.9, 1.05])
CA_NODE = np.array([0.5 * 2.0, 0.6 * 1.0, 0.4 * 3.0, 0.0, 0.0])  # C x A [ha] per node
RAIN = Rainfall(a=1200.0, b=10.0, c=0.8, inlet_time_min=10.0)  # invented curve, i [mm/h], t [min]
N = 0.013


def _carrier() -> Carrier:
    return Carrier.build(upstream=UPSTREAM, downstream=DOWNSTREAM, order=np.arange(4), node_group=np.arange(5), node_count=5)


def _pipes() -> PipeHydraulics:
    sections = PipeSections.from_names(np.full(4, "circular"), DIAMETER, DIAMETER)
    return PipeHydraulics(sections, SLOPE, Friction.uniform("manning", N, 4), LENGTH)


def _velocity_by_hand(q: float, d: float, s: float) -> float:
    """Manning velocity at normal depth in a circular pipe (Chow, 1959), by brentq on the angle."""
    def flow(theta: float) -> float:
        area = d**2 / 8 * (theta - np.sin(theta))
        return area * (area / (d * theta / 2)) ** (2 / 3) * s**0.5 / N - q
    theta = brentq(flow, 1e-6, 5.278)  # 5.278 rad: about the depth of greatest discharge (y/D 0.94)
    return q / (d**2 / 8 * (theta - np.sin(theta)))


def _design_table_by_hand() -> tuple[np.ndarray, np.ndarray]:
    """The design-table procedure of HEC-22 ch. 7 (from memory), pipe by pipe, to a fixed point."""
    travel = np.zeros(4)
    for _ in range(100):
        tc = np.empty(4)
        tc[0] = tc[1] = RAIN.inlet_time_min
        tc[2] = max(RAIN.inlet_time_min, tc[0] + travel[0], tc[1] + travel[1])
        tc[3] = max(RAIN.inlet_time_min, tc[2] + travel[2])
        ca = np.array([CA_NODE[0], CA_NODE[1], CA_NODE[0] + CA_NODE[1] + CA_NODE[2], CA_NODE[:3].sum()])
        q = ca * 1200.0 / (tc + 10.0) ** 0.8 / 360.0
        travel = np.array([LENGTH[p] / _velocity_by_hand(q[p], DIAMETER[p], SLOPE[p]) / 60 for p in range(4)])
    return q, tc


def test_storm_sewer_design_table_through_the_whole_module() -> None:
    findings = FindingLog()
    options = FlowOptions(kind="storm", rainfall=RAIN, tc_tolerance_min=1e-6)
    flows = storm_flows(_carrier(), CA_NODE, _pipes(), base_flow=np.zeros(4), given_flow=np.full(4, np.nan), options=options, findings=findings)
    q, tc = _design_table_by_hand()
    # the head pipe by hand: C A = 1.0 ha at tc = 10 min, i = 1200 / 20^0.8 mm/h
    assert flows.q_storm[0] == pytest.approx(1.0 * 1200 / 20**0.8 / 360, rel=1e-12)
    np.testing.assert_allclose(flows.tc_min, tc, rtol=1e-5)
    np.testing.assert_allclose(flows.q_storm, q, rtol=1e-5)
    assert flows.settled
    assert 1 < flows.iterations < 20
    assert len(findings) == 0


def test_tc_grows_downstream_and_runoff_area_adds_up() -> None:
    options = FlowOptions(kind="storm", rainfall=RAIN)
    flows = storm_flows(_carrier(), CA_NODE, _pipes(), base_flow=np.zeros(4), given_flow=np.full(4, np.nan), options=options, findings=FindingLog())
    assert flows.tc_min[0] == flows.tc_min[1] == 10.0
    assert 10.0 < flows.tc_min[2] < flows.tc_min[3]
    np.testing.assert_allclose(flows.runoff_area_ha, [1.0, 0.6, 2.8, 2.8])
    assert flows.q_storm[3] < flows.q_storm[2]  # same area, longer time, lower intensity


def test_unsettled_iteration_is_reported() -> None:
    options = FlowOptions(kind="storm", rainfall=RAIN, tc_max_iterations=1, tc_tolerance_min=1e-12)
    findings = FindingLog()
    flows = storm_flows(_carrier(), CA_NODE, _pipes(), base_flow=np.zeros(4), given_flow=np.full(4, np.nan), options=options, findings=findings)
    assert not flows.settled
    assert flows.iterations == 1
    assert findings.to_frame()["code"].tolist() == ["tc_not_settled"]


def test_levels_put_every_pipe_after_those_above_it() -> None:
    # a branch joining late: 0 -> 1 -> 2 -> 3 and 4 -> 2; pipe 4 is a head pipe, pipe 2 waits for both
    carrier = Carrier.build(upstream=np.array([0, 1, 2, 4]), downstream=np.array([1, 2, 3, 2]), order=np.array([0, 3, 1, 2]),
                            node_group=np.arange(5), node_count=5)  # fmt: skip
    assert [sorted(level.tolist()) for level in pipe_levels(carrier, node_count=5)] == [[0, 3], [1], [2]]
