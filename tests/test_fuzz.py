"""Malformed registers and configs never end in a traceback, a crash, a hang, a changed input or a lost feature.

A seeded subset of scripts/fuzz.py (whose full run of 10,000 cases is in docs/reliability.md):
300 cases over every category, format and engine, most in process and a share through the
command line. The harness's own judgement is tested first, on outcomes made to fail, so that
its zeros mean something.
"""

import os
import signal
import sys
from collections import Counter
from pathlib import Path
from types import ModuleType

import geopandas as gpd
import pytest
import shapely
from _scripts import load_script

SEED = 16
CASES = 300


@pytest.fixture(scope="module")
def fuzz() -> ModuleType:
    return load_script("fuzz")


@pytest.fixture
def case(fuzz: ModuleType, tmp_path: Path) -> object:
    """A written case of the ``ids`` category (its register valid, its ids odd), not yet run."""
    return fuzz.make_case(SEED, fuzz.CATEGORIES.index("ids"), tmp_path, cli_share=0.0)


def test_the_judge_sees_each_failure(fuzz: ModuleType, case: object) -> None:
    judge, outcome = fuzz.judge, fuzz.Outcome
    assert judge(case, outcome(-int(signal.SIGSEGV), "", died=True)).failures == ["crash"]
    assert judge(case, outcome(None, "")).failures == ["hang"]
    assert "traceback" in judge(case, outcome(1, "Traceback (most recent call last):\n  ...\nKeyError: 'x'\n")).failures
    assert judge(case, outcome(1, "sewer-audit: audit.toml: x\n/x/y.py:3: RuntimeWarning: divide by zero\n")).failures == ["warning"]
    assert judge(case, outcome(1, "sewer-audit: something is wrong\n")).failures == ["unclear message"]
    assert judge(case, outcome(1, f"sewer-audit: {Path(case.folder) / 'in' / 'audit.toml'}: x\n")).failures == []
    assert judge(case, outcome(7, "sewer-audit: audit.toml: x\n")).failures == ["crash"]  # an exit code the CLI does not document


def test_the_judge_sees_a_changed_input_and_a_partial_output(fuzz: ModuleType, case: object) -> None:
    config = Path(case.folder) / "in" / "audit.toml"
    config.write_text(config.read_text(encoding="utf-8") + "\n", encoding="utf-8")
    (Path(case.folder) / "out").mkdir()
    (Path(case.folder) / "out" / "summary.json").write_text("{}", encoding="utf-8")
    verdict = fuzz.judge(case, fuzz.Outcome(1, f"sewer-audit: {config}: x\n"))
    assert verdict.failures == ["modified input", "partial output"]


def test_the_judge_counts_the_features_that_came_back(fuzz: ModuleType, case: object) -> None:
    out = Path(case.folder) / "out"
    out.mkdir()
    for name in fuzz.OUTPUTS[1:]:
        (out / name).write_text("x", encoding="utf-8")
    expected = case.expected["pipes"]
    assert expected >= 3  # the base register has 3 to 13 pipes
    rows = gpd.GeoDataFrame({"a": range(expected - 1)}, geometry=[shapely.Point(0, 0)] * (expected - 1), crs="EPSG:32630")
    rows.to_file(out / "audit.gpkg", layer="pipes")
    manholes = case.expected["manholes"]
    gpd.GeoDataFrame({"a": range(manholes)}, geometry=[shapely.Point(0, 0)] * manholes, crs="EPSG:32630").to_file(out / "audit.gpkg", layer="manholes")
    verdict = fuzz.judge(case, fuzz.Outcome(0, ""))
    assert verdict.failures == ["lost features"]
    assert f"pipes: {expected} features in, {expected - 1} rows out" in verdict.notes


def test_a_process_that_dies_or_hangs_is_caught(fuzz: ModuleType) -> None:
    dead = fuzz.run_command([sys.executable, "-c", "import os, signal; os.kill(os.getpid(), signal.SIGSEGV)"], timeout_s=60)
    assert dead.died
    assert dead.code == -int(signal.SIGSEGV)
    hung = fuzz.run_command([sys.executable, "-c", "import time; time.sleep(60)"], timeout_s=1)
    assert hung.code is None


def test_the_independent_counts_read_each_format(fuzz: ModuleType, tmp_path: Path) -> None:
    frame = gpd.GeoDataFrame({"a": range(7)}, geometry=[shapely.Point(i, 0) for i in range(7)], crs="EPSG:32630")
    for ext, driver in fuzz.DRIVERS.items():
        path = tmp_path / f"points.{ext}"
        frame.to_file(path, driver=driver, **({"SPATIAL_INDEX": "NO"} if ext == "fgb" else {}))
        assert fuzz.count_features(path, None) == 7, ext
    dbf = tmp_path / "points.dbf"
    dbf.write_bytes(dbf.read_bytes()[:-30])  # records cut: the .shp still holds 7 shapes
    assert fuzz.count_features(tmp_path / "points.shp", None) == 7


def test_seeded_cases_never_fail_badly(fuzz: ModuleType, tmp_path: Path) -> None:
    verdicts = fuzz.run_cases(cases=range(CASES), seed=SEED, workers=max(2, min(os.cpu_count() or 1, 4)), cli_share=0.05, workdir=tmp_path)
    assert len(verdicts) == CASES
    failed = [f"case {v.index} [{v.category}/{v.mutation}] {v.detail}: {v.failures} {v.notes} {v.stderr[-600:]}" for v in verdicts if v.failures]
    assert failed == []
    # every category, format, engine and way of running was exercised, and both answers came
    categories = Counter(verdict.category for verdict in verdicts)
    assert set(categories) == set(fuzz.CATEGORIES)
    assert min(categories.values()) >= CASES // len(fuzz.CATEGORIES)
    assert {fmt for verdict in verdicts for fmt in verdict.formats.values()} == set(fuzz.FORMATS)
    assert {verdict.engine for verdict in verdicts} == set(fuzz.ENGINES)
    assert Counter(verdict.mode for verdict in verdicts)["cli"] >= 5
    codes = Counter(verdict.code for verdict in verdicts)
    assert codes[0] >= CASES // 3
    assert codes[1] >= CASES // 10
