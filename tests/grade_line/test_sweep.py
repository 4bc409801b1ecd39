"""The sweep, case by case, on boxes, whose critical, normal and sequent depths have closed forms
or are solved here independently."""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pytest
from scipy.integrate import solve_ivp
from scipy.optimize import brentq

from audit.grade_line import BoundaryKind, FloodState, FullCause, GradeLine, GradeLineSettings, PipeRegime, grade_line
from audit.hydraulics import Friction, PipeHydraulics, PipeSections, normal_depth

G = 9.80665  # [m/s2] (CGPM 1901)
N = 0.013  # Manning n [s/m^(1/3)]; common practice, no source
WIDTH, HEIGHT = 1.0, 1.0  # the box of most tests [m]


def box_normal_depth(flow: float, slope: float, width: float = WIDTH) -> float:
    """Manning normal depth of a box (lid dry): Q = B y (B y / (B + 2y))^(2/3) S^(1/2) / n (Chow 1959, eq. 5-6)."""
    return float(brentq(lambda y: width * y * (width * y / (width + 2 * y)) ** (2 / 3) * np.sqrt(slope) / N - flow, 1e-9, 50.0, xtol=1e-14))


def box_critical_depth(flow: float, width: float = WIDTH) -> float:
    """yc = (q^2 / g)^(1/3), q = Q / B (Chow 1959, ch. 3)."""
    return float(((flow / width) ** 2 / G) ** (1 / 3))


def box_full_friction(flow: float, width: float = WIDTH, height: float = HEIGHT) -> float:
    """Sf = (Q n / (A R^(2/3)))^2 with the lid wetted (Chow 1959, eq. 5-6)."""
    area, radius = width * height, width * height / (2 * (width + height))
    return float((flow * N / (area * radius ** (2 / 3))) ** 2)


@dataclass
class Net:
    """A small network: pipe i runs from ``up[i]`` to ``down[i]``; node 0 is the outfall."""

    up: list[int]
    down: list[int]
    flow: list[float]
    slope: list[float]
    length: list[float]
    down_invert: list[float]
    shape: str = "rectangular"
    height: float = HEIGHT
    width: float = WIDTH
    rim: list[float] | None = None
    boundary: dict[int, tuple[BoundaryKind, float]] = field(default_factory=lambda: {0: (BoundaryKind.FREE, np.nan)})
    evaluate: list[bool] | None = None
    loss: float = 0.5
    freeboard: float = 0.0

    @property
    def nodes(self) -> int:
        return max(self.up + self.down) + 1

    def run(self, *, uniform: bool = False) -> GradeLine:
        count = len(self.up)
        slope, length = np.array(self.slope), np.array(self.length)
        sections = PipeSections.from_names([self.shape] * count, np.full(count, self.height), np.full(count, self.width))
        pipes = PipeHydraulics(sections, slope, Friction.uniform("manning", N, count), length)
        codes, levels = np.full(self.nodes, -1, dtype=np.int8), np.full(self.nodes, np.nan)
        for node, (kind, level) in self.boundary.items():
            codes[node], levels[node] = kind, level
        flow = np.array(self.flow)
        state = normal_depth(flow, sections, slope, pipes.friction) if uniform else None
        down_invert = np.array(self.down_invert)
        return grade_line(
            pipes, flow=flow, upstream=np.array(self.up), downstream=np.array(self.down), node_count=self.nodes,
            up_invert=down_invert + slope * length, down_invert=down_invert,
            node_rim=np.full(self.nodes, np.nan) if self.rim is None else np.array(self.rim), boundary=codes, boundary_level=levels,
            evaluate=np.ones(count, dtype=bool) if self.evaluate is None else np.array(self.evaluate),
            settings=GradeLineSettings(manhole_loss=self.loss, freeboard_m=self.freeboard), uniform=state,
        )  # fmt: skip


def one(flow: float = 0.3, slope: float = 0.002, length: float = 60.0, **options: object) -> Net:
    return Net(up=[1], down=[0], flow=[flow], slope=[slope], length=[length], down_invert=[10.0], **options)  # type: ignore[arg-type]


def fixed(level: float) -> dict[int, tuple[BoundaryKind, float]]:
    return {0: (BoundaryKind.FIXED, level)}


def velocity_head(flow: float, depth: float) -> float:
    return (flow / (WIDTH * depth)) ** 2 / (2 * G)


def test_a_mild_pipe_falls_freely_at_a_free_outfall() -> None:
    result = one().run()
    yn, yc = box_normal_depth(0.3, 0.002), box_critical_depth(0.3)
    assert yc < yn
    assert result.regime[0] == PipeRegime.FREE_FALL
    assert result.depth_down[0] == pytest.approx(yc, rel=1e-9)
    assert result.depth_up[0] == pytest.approx(yn, rel=1e-9)  # the M2 drawdown is not followed
    assert result.critical_depth[0] == pytest.approx(yc, rel=1e-9)
    assert result.froude[0] == pytest.approx(0.3 / (WIDTH * yn) / np.sqrt(G * yn), rel=1e-6)
    assert result.node_level[1] == pytest.approx(10.12 + yn + 0.5 * velocity_head(0.3, yn), rel=1e-12)
    assert result.node_level[0] == pytest.approx(10.0 + yc, rel=1e-12)  # the highest outlet at a free outfall
    assert result.free_outlet[0]
    assert result.full_cause[0] == FullCause.NONE
    assert np.isnan(result.full_friction_slope[0])
    assert not result.boundary_assumed.any()


def test_a_normal_outfall_holds_the_pipe_at_normal_depth() -> None:
    result = one(boundary={0: (BoundaryKind.NORMAL, np.nan)}).run()
    yn = box_normal_depth(0.3, 0.002)
    assert result.regime[0] == PipeRegime.SUBCRITICAL
    assert result.depth_down[0] == pytest.approx(yn, rel=1e-9)
    assert result.depth_up[0] == pytest.approx(yn, rel=1e-9)


def test_a_tailwater_below_critical_depth_leaves_a_free_fall() -> None:
    result = one(boundary=fixed(10.05)).run()
    assert result.regime[0] == PipeRegime.FREE_FALL
    assert result.depth_down[0] == pytest.approx(box_critical_depth(0.3), rel=1e-9)
    assert result.node_level[0] == 10.05


def test_a_tailwater_between_critical_and_normal_depth_leaves_the_upstream_end_at_normal_depth() -> None:
    yn, yc = box_normal_depth(0.3, 0.002), box_critical_depth(0.3)
    result = one(boundary=fixed(10.0 + (yn + yc) / 2)).run()
    assert result.regime[0] == PipeRegime.SUBCRITICAL
    assert result.depth_down[0] == pytest.approx((yn + yc) / 2, rel=1e-12)
    assert result.depth_up[0] == pytest.approx(yn, rel=1e-9)
    assert not result.free_outlet[0]


@pytest.mark.parametrize("length", [20.0, 100.0, 400.0])
def test_a_tailwater_above_normal_depth_backs_up_an_m1_curve(length: float) -> None:
    # dy/dx = (S0 - Sf) / (1 - Fr^2) for the box written out here (Chow 1959, eq. 9-13), integrated
    # upstream by solve_ivp from the tailwater depth.
    flow, slope, start = 0.3, 0.002, 0.8

    def upstream_slope(_: float, y: np.ndarray) -> list[float]:
        area, perimeter = WIDTH * y[0], WIDTH + 2 * y[0]
        friction = (flow * N / (area * (area / perimeter) ** (2 / 3))) ** 2
        return [-(slope - friction) / (1 - flow**2 / (G * WIDTH**2 * y[0] ** 3))]

    expected = solve_ivp(upstream_slope, (0.0, length), [start], rtol=1e-11, atol=1e-13).y[0, -1]
    result = one(flow, slope, length, boundary=fixed(10.0 + start)).run()
    assert result.regime[0] == PipeRegime.SUBCRITICAL
    assert result.depth_up[0] == pytest.approx(expected, rel=0.005)
    assert box_normal_depth(flow, slope) < result.depth_up[0] < start


def test_a_pipe_over_its_capacity_runs_full_from_its_outlet() -> None:
    capacity = WIDTH * HEIGHT * (WIDTH * HEIGHT / (2 * (WIDTH + HEIGHT))) ** (2 / 3) * np.sqrt(0.002) / N
    flow = 1.3 * capacity
    result = one(flow).run()
    assert result.regime[0] == PipeRegime.PRESSURISED
    assert result.full_cause[0] == FullCause.OWN_CAPACITY
    assert result.full_friction_slope[0] == pytest.approx(box_full_friction(flow), rel=1e-12)
    assert result.level_down[0] == pytest.approx(10.0 + HEIGHT)  # full at the outlet, above the free outfall
    assert result.level_up[0] == pytest.approx(11.0 + box_full_friction(flow) * 60.0, rel=1e-12)
    assert result.free_outlet[0]


def test_a_high_tailwater_surcharges_a_pipe_under_its_capacity() -> None:
    result = one(boundary=fixed(12.0)).run()
    assert result.regime[0] == PipeRegime.PRESSURISED
    assert result.full_cause[0] == FullCause.BACKWATER
    assert result.level_up[0] == pytest.approx(12.0 + box_full_friction(0.3) * 60.0, rel=1e-12)
    assert result.depth_down[0] == pytest.approx(2.0)


def test_a_pipe_full_at_its_outlet_falls_back_inside_upstream() -> None:
    # The crown rises at 0.002 and the grade line at Sf: 0.05 m above the outlet crown it falls
    # back within 0.05 / (S0 - Sf) of the outlet, and the M1 curve continues from the crown.
    slope, flow = 0.002, 0.3
    result = one(flow, slope, 200.0, boundary=fixed(11.05)).run()
    fall = 0.05 / (slope - box_full_friction(flow))
    assert fall < 200.0
    assert result.regime[0] == PipeRegime.PARTLY_PRESSURISED
    assert result.full_cause[0] == FullCause.BACKWATER
    assert box_normal_depth(flow, slope) < result.depth_up[0] < HEIGHT


def test_a_steep_pipe_is_drowned_only_above_the_sequent_depth() -> None:
    flow, slope = 0.3, 0.05
    yn, yc = box_normal_depth(flow, slope), box_critical_depth(flow)
    froude = flow / (WIDTH * yn) / np.sqrt(G * yn)
    sequent = yn * (np.sqrt(1 + 8 * froude**2) - 1) / 2  # Belanger (Chow 1959, ch. 15)
    assert yn < yc < sequent < HEIGHT
    free = one(flow, slope).run()
    below = one(flow, slope, boundary=fixed(10.0 + 0.98 * sequent)).run()
    above = one(flow, slope, boundary=fixed(10.0 + 1.02 * sequent)).run()
    assert free.regime[0] == below.regime[0] == PipeRegime.SUPERCRITICAL
    assert free.depth_up[0] == pytest.approx(yn, rel=1e-9)
    assert free.depth_down[0] == pytest.approx(yn, rel=1e-9)
    assert not below.jump[0]
    assert below.free_outlet[0]
    assert below.depth_down[0] == pytest.approx(yn, rel=1e-9)
    assert above.jump[0]
    assert above.depth_down[0] == pytest.approx(1.02 * sequent, rel=1e-9)
    assert above.regime[0] == PipeRegime.SUPERCRITICAL  # the jump lies inside the 60 m pipe
    assert above.depth_up[0] == pytest.approx(yn, rel=1e-9)


def test_a_drowned_short_steep_pipe_carries_the_level_to_its_upstream_end() -> None:
    flow, slope = 0.3, 0.05
    result = one(flow, slope, 2.0, boundary=fixed(10.0 + 0.7)).run()
    assert result.jump[0]
    assert result.regime[0] == PipeRegime.SUBCRITICAL
    assert result.depth_up[0] > box_critical_depth(flow)
    assert result.level_up[0] == pytest.approx(10.7, abs=0.02)  # nearly level over 2 m


def test_a_flat_pipe_rises_upstream_from_critical_depth() -> None:
    result = one(0.3, 0.0, 50.0).run()
    assert result.regime[0] == PipeRegime.FREE_FALL
    assert result.depth_down[0] == pytest.approx(box_critical_depth(0.3), rel=1e-9)
    assert result.depth_down[0] < result.depth_up[0] < HEIGHT
    assert np.isnan(result.froude[0])


def test_a_long_flat_pipe_runs_full_by_its_own_friction() -> None:
    result = one(0.3, 0.0, 5000.0).run()
    assert result.regime[0] == PipeRegime.PARTLY_PRESSURISED
    assert result.full_cause[0] == FullCause.OWN_CAPACITY
    assert result.depth_up[0] > HEIGHT


def test_a_pipe_without_flow_holds_standing_water() -> None:
    dry = one(0.0, boundary=fixed(10.05)).run()
    ponded = one(0.0, boundary=fixed(10.5)).run()
    assert dry.regime[0] == ponded.regime[0] == PipeRegime.DRY
    assert dry.level_up[0] == pytest.approx(10.12)  # empty at its upstream invert
    assert dry.level_down[0] == pytest.approx(10.05)
    assert ponded.level_up[0] == ponded.level_down[0] == 10.5
    assert ponded.node_level[1] == 10.5


def test_pipes_left_out_and_their_nodes_are_not_evaluated() -> None:
    net = Net(up=[1, 2, 3], down=[0, 1, 0], flow=[0.3, 0.2, 0.1], slope=[0.002] * 3, length=[50.0] * 3, down_invert=[10.0, 10.2, np.nan])
    net.evaluate = [True, False, True]
    result = net.run()
    assert result.regime.tolist() == [PipeRegime.FREE_FALL, PipeRegime.NOT_EVALUATED, PipeRegime.NOT_EVALUATED]
    assert np.isnan(result.level_up[1:]).all()
    assert np.isnan(result.node_level[[2, 3]]).all()
    assert result.flood_state[2] == FloodState.NOT_EVALUATED


def test_a_loop_is_left_out_and_the_nodes_above_it_are_reached() -> None:
    # 3 -> 2 -> 1 -> 0 with a loop 1 -> 4 -> 1; the loop's pipes are not evaluated.
    net = Net(up=[1, 2, 3, 1, 4], down=[0, 1, 2, 4, 1], flow=[0.3] * 5, slope=[0.002] * 5, length=[40.0] * 5,
              down_invert=[10.0, 10.1, 10.2, 10.1, 10.1])  # fmt: skip
    result = net.run()
    assert result.on_cycle.tolist() == [False, False, False, True, True]
    assert result.regime[3] == result.regime[4] == PipeRegime.NOT_EVALUATED
    assert np.isfinite(result.node_level[[0, 1, 2, 3]]).all()


def test_an_unmarked_end_is_taken_as_a_free_outfall_and_reported() -> None:
    net = Net(up=[1, 3], down=[0, 2], flow=[0.3, 0.3], slope=[0.002] * 2, length=[60.0] * 2, down_invert=[10.0, 10.0])
    net.boundary = {0: (BoundaryKind.FIXED, np.nan)}  # a fixed outfall without a level
    result = net.run()
    assert result.boundary_assumed.tolist() == [True, False, True, False]
    assert result.regime.tolist() == [PipeRegime.FREE_FALL, PipeRegime.FREE_FALL]


def test_a_fixed_level_at_a_node_pipes_leave_is_a_floor() -> None:
    net = Net(up=[1, 2], down=[0, 1], flow=[0.3, 0.3], slope=[0.002] * 2, length=[60.0] * 2, down_invert=[10.0, 10.2])
    net.boundary = {0: (BoundaryKind.FREE, np.nan), 1: (BoundaryKind.FIXED, 11.5)}
    result = net.run()
    assert result.node_level[1] == 11.5
    assert result.regime[1] == PipeRegime.PRESSURISED


def test_a_node_takes_the_highest_level_its_outgoing_pipes_need() -> None:
    # node 2 splits into a wide and a narrow pipe to the outfall: the narrow one needs more
    split = Net(up=[2, 2], down=[0, 0], flow=[0.3, 0.3], slope=[0.002, 0.001], length=[60.0] * 2, down_invert=[10.0, 10.0]).run()
    gentle = Net(up=[1], down=[0], flow=[0.3], slope=[0.001], length=[60.0], down_invert=[10.0]).run()
    steeper = Net(up=[1], down=[0], flow=[0.3], slope=[0.002], length=[60.0], down_invert=[10.0]).run()
    assert split.node_level[2] == pytest.approx(max(gentle.node_level[1], steeper.node_level[1]), rel=1e-12)
    assert gentle.node_level[1] != steeper.node_level[1]


def test_the_manhole_loss_is_k_times_the_velocity_head() -> None:
    with_loss, without = one(loss=0.8).run(), one(loss=0.0).run()
    yn = box_normal_depth(0.3, 0.002)
    assert with_loss.node_level[1] - without.node_level[1] == pytest.approx(0.8 * velocity_head(0.3, yn), rel=1e-9)


def test_a_flooding_node_spills_at_its_rim() -> None:
    net = Net(up=[1, 2], down=[0, 1], flow=[0.3, 0.3], slope=[0.002] * 2, length=[60.0] * 2, down_invert=[10.0, 10.2])
    net.boundary, net.rim, net.freeboard = fixed(12.0), [13.0, 11.8, 14.0], 0.1
    result = net.run()
    assert result.flood_state.tolist() == [FloodState.SURCHARGED, FloodState.FLOODING, FloodState.SURCHARGED]
    assert result.node_level[1] > 11.8
    assert result.flood_depth[1] == pytest.approx(result.node_level[1] - 11.8)
    assert result.freeboard[0] == pytest.approx(1.0)
    # the pipe above sees the rim (11.8), not the level the pipe below would need
    assert result.level_down[1] == pytest.approx(11.8)
    assert result.level_up[1] == pytest.approx(11.8 + box_full_friction(0.3) * 60.0, rel=1e-12)


def test_a_level_below_the_soffit_of_the_pipe_leaving_is_below_soffit() -> None:
    assert one(rim=[12.0, 12.5]).run().flood_state.tolist() == [FloodState.BELOW_SOFFIT, FloodState.BELOW_SOFFIT]


def test_a_manhole_is_surcharged_above_the_soffit_of_the_pipe_leaving_it_not_of_a_drowned_inlet() -> None:
    # the trunk (pipe 0) leaves node 1 part full; a lateral (pipe 1) joins node 1 0.8 H lower, so the
    # water there covers the lateral's crown but not the trunk's: the lateral's outlet is drowned,
    # node 1 is not surcharged; node 2, whose own pipe out (the lateral) is under water, is
    trunk_up_invert = 10.0 + 0.002 * 60.0
    net = Net(up=[1, 2], down=[0, 1], flow=[0.01, 0.005], slope=[0.002, 0.002], length=[60.0, 30.0],
              down_invert=[10.0, trunk_up_invert - 0.8 * HEIGHT], rim=[20.0, 20.0, 20.0], boundary=fixed(trunk_up_invert + 0.5 * HEIGHT))  # fmt: skip
    result = net.run()
    level = result.node_level[1]
    assert trunk_up_invert + 0.2 * HEIGHT < level < trunk_up_invert + HEIGHT  # above the lateral's crown, below the trunk's
    assert result.flood_state.tolist() == [FloodState.BELOW_SOFFIT, FloodState.BELOW_SOFFIT, FloodState.SURCHARGED]


def test_a_given_uniform_state_gives_the_same_grade_line() -> None:
    net = Net(up=[1, 2, 3], down=[0, 1, 1], flow=[0.5, 0.3, 0.0], slope=[0.002, 0.03, 0.0], length=[60.0, 30.0, 20.0], down_invert=[10.0, 10.3, 10.3])
    given, solved = net.run(uniform=True), net.run()
    for name in GradeLine.__dataclass_fields__:
        np.testing.assert_array_equal(getattr(given, name), getattr(solved, name), err_msg=name)


def test_an_open_channel_rises_above_its_banks_instead_of_running_under_pressure() -> None:
    channel = one(boundary=fixed(12.0), shape="open_rectangular").run()
    assert channel.regime[0] == PipeRegime.ABOVE_BANK_FULL
    assert channel.full_cause[0] == FullCause.BACKWATER


def test_regimes_causes_and_states_have_lower_case_labels() -> None:
    assert PipeRegime.PARTLY_PRESSURISED.label == "partly_pressurised"
    assert FullCause.OWN_CAPACITY.label == "own_capacity"
    assert FloodState.NOT_EVALUATED.label == "not_evaluated"
