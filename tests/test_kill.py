"""A run killed or interrupted at any moment leaves the earlier output or a complete new one.

A seeded subset of scripts/kill_test.py (which kills 60 runs of a 200,000-pipe audit; its table
is in docs/reliability.md): a few runs of a small network, killed at moments spread over a run.
"""

from pathlib import Path
from types import ModuleType

import pytest
from _scripts import load_script


@pytest.fixture(scope="module")
def kill_test() -> ModuleType:
    return load_script("kill_test")


def test_killed_runs_never_leave_a_mixture_or_a_partial_set(kill_test: ModuleType, tmp_path: Path) -> None:
    kills, beside = kill_test.kill_test(pipes=20_000, kills=6, seed=3, workdir=tmp_path)
    outcomes = [kill.outcome for kill in kills]
    assert set(outcomes) <= {"earlier output", "new output"}, outcomes
    assert "earlier output" in outcomes  # some kills fell inside a run
    assert beside == []  # what the killed runs left is tidied by the next run
    interrupted = [kill for kill in kills if kill.signal == "SIGINT"]
    assert interrupted
    for kill in interrupted:
        if kill.outcome == "earlier output":
            assert kill.returncode == 130
            assert kill.stderr.strip().splitlines() == ["sewer-audit: interrupted; no output was written"]
