"""Flood screening at the nodes."""

from __future__ import annotations

import numpy as np

from audit.grade_line import FloodState, flood_screen


def test_each_state_at_its_boundary() -> None:
    level = np.array([9.0, 9.5, 9.6, 9.8, 10.0, 10.4, 9.0, np.nan])
    rim = np.array([10.0, 10.0, 10.0, 10.0, 10.0, 10.0, np.nan, 10.0])
    crown = np.array([9.5, 9.5, 9.5, 9.5, 9.5, 9.5, 8.0, 9.5])
    freeboard, depth, state = flood_screen(level, rim, crown, freeboard_m=0.2)
    assert [FloodState(code).label for code in state] == [
        "below_soffit", "below_soffit", "surcharged", "flooding", "flooding", "flooding", "not_evaluated", "not_evaluated",
    ]  # fmt: skip
    np.testing.assert_allclose(freeboard[:6], [1.0, 0.5, 0.4, 0.2, 0.0, -0.4])
    np.testing.assert_allclose(depth[:6], [0.0, 0.0, 0.0, 0.0, 0.0, 0.4])
    assert np.isnan(freeboard[6:]).all()
    assert np.isnan(depth[6:]).all()


def test_a_node_without_a_pipe_crown_is_below_soffit_until_it_floods() -> None:
    _, _, state = flood_screen(np.array([5.0, 9.99]), np.array([10.0, 10.0]), np.array([np.inf, np.inf]), freeboard_m=0.0)
    assert state.tolist() == [FloodState.BELOW_SOFFIT, FloodState.BELOW_SOFFIT]
