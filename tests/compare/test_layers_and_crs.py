"""Registers in another CRS are matched after reprojection; a layer one audit lacks is all added or removed."""

import json
import shutil
from collections.abc import Callable
from pathlib import Path

import pyogrio
import pyproj
import pytest
import shapely


def test_a_register_in_another_crs_is_matched_in_the_earlier_ones(audits: dict[str, Path], compare: Callable[..., tuple[int, Path]]) -> None:
    code, out = compare(audits["after"], audits["after_32631"])
    assert code == 0
    table = pyogrio.read_dataframe(out / "compare.gpkg", layer="pipes")
    assert set(table["change"]) <= {"unchanged", "changed"}  # every pipe found again: none added, none removed
    assert not table["fields_changed"].fillna("").str.contains("geometry").any()  # the ends lie where they lay, once reprojected
    assert table.crs == pyproj.CRS("EPSG:32631")  # the later audit's geometry, in its own CRS


def test_an_earlier_audit_in_longitude_and_latitude_is_matched_in_its_working_crs(audits: dict[str, Path],
                                                                                   compare: Callable[..., tuple[int, Path]]) -> None:  # fmt: skip
    code, out = compare(audits["after_4326"], audits["after"])
    assert code == 0
    summary = json.loads((out / "compare.json").read_text(encoding="utf-8"))
    assert any("geographic CRS" in note for note in summary["notes"])
    assert summary["changes"]["pipes"]["added"] == summary["changes"]["pipes"]["removed"] == 0
    table = pyogrio.read_dataframe(out / "compare.gpkg", layer="pipes")
    assert not table["fields_changed"].fillna("").str.contains("geometry").any()


def test_a_removed_feature_is_drawn_in_the_later_audits_crs(audits: dict[str, Path], compare: Callable[..., tuple[int, Path]]) -> None:
    code, out = compare(audits["before"], audits["after_32631"])
    assert code == 0
    table = pyogrio.read_dataframe(out / "compare.gpkg", layer="pipes")
    removed = table.loc[table["change"] == "removed", "geometry"].iloc[0]
    # P5 ran from E (60, 60) to B (60, 0) in EPSG:32630
    x, y = pyproj.Transformer.from_crs("EPSG:32630", "EPSG:32631", always_xy=True).transform([60.0, 60.0], [60.0, 0.0])
    assert shapely.get_coordinates(removed).ravel().tolist() == pytest.approx([x[0], y[0], x[1], y[1]], abs=1e-6)


def test_a_manhole_layer_only_one_audit_has_is_all_removed(audits: dict[str, Path], compare: Callable[..., tuple[int, Path]], tmp_path: Path) -> None:
    pipes_only = tmp_path / "pipes_only"
    pipes_only.mkdir()
    shutil.copyfile(audits["before"] / "summary.json", pipes_only / "summary.json")
    pyogrio.write_dataframe(pyogrio.read_dataframe(audits["before"] / "audit.gpkg", layer="pipes"), pipes_only / "audit.gpkg", layer="pipes")
    code, out = compare(audits["before"], pipes_only)
    assert code == 0
    summary = json.loads((out / "compare.json").read_text(encoding="utf-8"))
    assert summary["changes"]["manholes"] == {"added": 0, "removed": 5, "changed": 0, "unchanged": 0, "worse": 0, "better": 0, "mixed": 0}
    assert summary["changes"]["pipes"]["unchanged"] == 4
