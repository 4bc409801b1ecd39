"""The benchmark script still works: a small network is generated, audited and tabled.

Nothing here is timed; the test checks the shape of the synthetic network, that the planted
register errors reach the audit, and that the printed table has a row per size and a column
per pipeline stage.
"""

from pathlib import Path
from types import ModuleType

import numpy as np
import pyogrio
import pytest
from _scripts import load_script

import audit
from audit.pipeline import STAGES


@pytest.fixture(scope="module")
def bench() -> ModuleType:
    return load_script("bench")


def test_the_synthetic_network_is_a_tree_of_n_pipes_over_n_plus_one_manholes(bench: ModuleType) -> None:
    pipes, manholes = bench.make_layers(3000, seed=1)
    assert (len(pipes), len(manholes)) == (3000, 3001)
    index = {name: row for row, name in enumerate(manholes["mh"])}
    up = np.array([index[name] for name in pipes["mh_up"]])
    down = np.array([index[name] for name in pipes["mh_dn"]])
    # every manhole but the outfall drains through exactly one pipe to a manhole listed before it
    assert sorted(up) == list(range(1, 3001))
    assert (down < up).all()
    assert set(pipes["form"]) == {"C", "OV", "R"}


def test_the_planted_errors_reach_the_audit(bench: ModuleType, tmp_path: Path) -> None:
    config = bench.write_network(3000, tmp_path, seed=2)
    written = pyogrio.read_dataframe(tmp_path / "net.gpkg", layer="pipes")
    result = audit.run(config)
    codes = result.findings["code"].value_counts()
    assert codes["duplicate_id"] >= (written["ref"] == "S1").sum()
    assert codes["sentinel_value"] == (written["il_dn"] == -9999).sum()
    assert codes["nonpositive_size"] == (written["bore_mm"] == 0).sum()
    assert result.totals["outfalls"] == 1


def test_the_benchmark_prints_a_row_per_size_and_a_column_per_stage(bench: ModuleType, capsys: pytest.CaptureFixture[str]) -> None:
    assert bench.main(["--sizes", "1500", "2500"]) == 0
    lines = capsys.readouterr().out.strip().splitlines()
    head = [cell.strip() for cell in lines[0].strip("|").split("|")]
    assert head[:8] == ["pipes", "floor s", "audit s", "ratio", "floor peak MB", "audit peak MB", "writer peak MB", "together peak MB"]
    assert head[8:] == [*STAGES, "writing outputs", "other"]
    rows = [[cell.strip() for cell in line.strip("|").split("|")] for line in lines[2:]]
    assert [row[0] for row in rows] == ["1,500", "2,500"]
    numbers = np.array([[float(cell) for cell in row[1:]] for row in rows])
    assert np.isfinite(numbers).all()
    assert (numbers >= 0).all()
    assert (numbers[:, 1:3] > 0).all()  # audit seconds and the ratio
    assert (numbers[:, 6] >= numbers[:, 4]).all()  # together: at least the audit's own peak (no writer below 100,000 features)
