"""The grade line benchmark script still runs: its synthetic network is a sound tree. Nothing is timed."""

from __future__ import annotations

import runpy
from pathlib import Path
from typing import Any

import numpy as np
import pytest

SCRIPT = Path(__file__).resolve().parents[2] / "scripts" / "bench_grade_line.py"


@pytest.fixture(scope="module")
def bench() -> dict[str, Any]:
    """The script's names, as if it were imported (its ``main`` is not run)."""
    return runpy.run_path(str(SCRIPT), run_name="bench_grade_line")


@pytest.mark.parametrize("joints", ["crowns", "inverts"])
def test_the_synthetic_network_drains_every_pipe_downhill_to_the_outfall(bench: dict[str, Any], joints: str) -> None:
    net = bench["make_network"](2000, joints=joints)
    assert net.upstream.tolist() == list(range(1, 2001))
    assert np.all(net.downstream < net.upstream)
    assert np.all(net.pipes.slope > 0)
    np.testing.assert_allclose(net.up_invert - net.down_invert, net.pipes.slope * bench["SPACING_M"])
    leaving = np.zeros(2001)
    leaving[net.upstream] = net.up_invert
    assert np.all(net.down_invert >= leaving[net.downstream] - 1e-12)  # a drop, never a step up, at each manhole
    assert np.all(net.rim[1:] > leaving[1:])


def test_a_small_run_prints_a_table(bench: dict[str, Any], capsys: pytest.CaptureFixture[str]) -> None:
    bench["run_size"](3000, repeat=1, tailwater=0.5, formula="manning", joints="crowns")
    printed = capsys.readouterr().out
    assert "x the floor" in printed
    assert "regimes:" in printed
