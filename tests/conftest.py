"""Shared fixtures: the two reading engines, a config writer and a file fingerprint."""

import hashlib
from collections.abc import Callable
from pathlib import Path

import pytest


@pytest.fixture(params=["pyogrio", "fiona"])
def engine(request: pytest.FixtureRequest) -> str:
    """Each reading engine in turn; every test that takes it runs once per engine."""
    return str(request.param)


@pytest.fixture
def make_config(tmp_path: Path, engine: str) -> Callable[[str], Path]:
    """Write a TOML config beside the test's data, with ``[input] engine`` set per engine."""

    def make(body: str) -> Path:
        path = tmp_path / "audit.toml"
        path.write_text(f'[input]\nengine = "{engine}"\n{body}', encoding="utf-8")
        return path

    return make


def fingerprint(folder: Path) -> dict[str, str]:
    """SHA-256 of every data file in a folder (all Shapefile sidecars included), by name."""
    return {
        path.name: hashlib.sha256(path.read_bytes()).hexdigest()
        for path in sorted(folder.iterdir())
        if path.is_file() and path.suffix != ".toml"
    }


@pytest.fixture
def unchanged(tmp_path: Path) -> Callable[[], None]:
    """Call after writing the data (takes the fingerprint) and again after reading (compares)."""
    before: dict[str, str] = {}

    def check() -> None:
        if not before:
            before.update(fingerprint(tmp_path))
            assert before, "no data file to fingerprint"
            return
        assert fingerprint(tmp_path) == before

    return check
