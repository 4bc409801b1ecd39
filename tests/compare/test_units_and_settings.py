"""Audits in other unit systems are converted before they are compared; other settings are said first."""

import json
import shutil
from collections.abc import Callable
from pathlib import Path

import pyogrio
import pytest

# Source: NIST SP 811 (2008), appendix B: 1 ft = 0.3048 m exactly, so 1 ft3 = 0.3048^3 m3
CUBIC_FOOT_M3 = 0.3048**3
L_S = 1e-3  # m3/s per l/s


def test_the_same_register_in_us_units_is_unchanged(audits: dict[str, Path], compare: Callable[..., tuple[int, Path]]) -> None:
    code, out = compare(audits["before"], audits["before_us"])
    assert code == 0
    summary = json.loads((out / "compare.json").read_text(encoding="utf-8"))
    # every number of NEW is converted into SI before it is compared: nothing moved
    assert summary["changes"]["pipes"]["unchanged"] == 4
    assert summary["changes"]["manholes"]["unchanged"] == 5
    assert summary["settings_differ"] == []  # 0.6 m/s and 1.9685 ft/s are the same rule
    assert summary["warning"] is None
    assert summary["units"]["system"] == "si"
    assert any("converted into SI" in note for note in summary["notes"])


def test_an_si_audit_compared_into_us_units_says_flows_in_cfs(audits: dict[str, Path], compare: Callable[..., tuple[int, Path]]) -> None:
    code, out = compare(audits["before_us"], audits["after"])
    assert code == 0
    table = pyogrio.read_dataframe(out / "compare.gpkg", layer="manholes").set_index("id_old")
    # the outfall D: 35 l/s before (A + B + E + C), 29 l/s after (A + B + C + F + G), both in cfs
    assert table.loc["D", "flow_out_cfs_old"] == pytest.approx(35.0 * L_S / CUBIC_FOOT_M3, rel=1e-9)
    assert table.loc["D", "flow_out_cfs_new"] == pytest.approx(29.0 * L_S / CUBIC_FOOT_M3, rel=1e-9)
    summary = json.loads((out / "compare.json").read_text(encoding="utf-8"))
    assert summary["units"]["system"] == "us"
    assert summary["changes"]["pipes"]["changed"] == 2  # the same two corrected pipes as in SI
    assert "length_ft_old" in summary["flags"]["surcharge"]
    assert summary["flags"]["surcharge"]["length_ft_old"] == pytest.approx(60.0 / 0.3048, abs=0.01)  # rounded to 0.01


def test_other_rule_settings_are_said_first_and_still_compared(audits: dict[str, Path], compare: Callable[..., tuple[int, Path]]) -> None:
    code, out = compare(audits["before"], audits["before_looser"])
    assert code == 0
    summary = json.loads((out / "compare.json").read_text(encoding="utf-8"))
    assert next(iter(summary)) == "warning"
    assert "max_load_ratio" in summary["warning"]
    assert summary["settings_differ"] == [{"key": "rules.max_load_ratio", "old": 1.0, "new": 1.2}]
    # the same register: P3's load ratio 1.10 is no longer a surcharge above 1.2 but is near capacity above 0.8
    p3 = pyogrio.read_dataframe(out / "compare.gpkg", layer="pipes").set_index("id_old").loc["P3"]
    assert (p3["flags_cleared"], p3["flags_gained"], p3["severity_old"], p3["severity_new"]) == ("surcharge", "near_capacity", "high", "medium")
    assert p3["fields_changed"] in ("", None)
    page = (out / "compare.html").read_text(encoding="utf-8")
    assert page.index('id="settings-differ"') < page.index('id="caution"')
    assert "max_load_ratio" in page[: page.index('id="caution"')]


def test_another_tool_version_is_said_first(audits: dict[str, Path], compare: Callable[..., tuple[int, Path]], tmp_path: Path) -> None:
    later = tmp_path / "later"
    shutil.copytree(audits["before"], later)
    summary = json.loads((later / "summary.json").read_text(encoding="utf-8"))
    summary["version"] = "99.0.0"
    (later / "summary.json").write_text(json.dumps(summary), encoding="utf-8")
    code, out = compare(audits["before"], later)
    assert code == 0
    written = json.loads((out / "compare.json").read_text(encoding="utf-8"))
    assert [item["key"] for item in written["settings_differ"]] == ["version"]
    assert written["settings_differ"][0]["new"] == "99.0.0"
    assert written["changes"]["pipes"]["unchanged"] == 4


def test_the_terminal_table_opens_with_the_warning(audits: dict[str, Path], tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    from audit.cli import main

    assert main(["compare", str(audits["before"]), str(audits["before_looser"]), "-o", str(tmp_path / "out")]) == 0
    lines = capsys.readouterr().out.splitlines()
    assert lines[0].startswith("WARNING: ")
    assert "rules.max_load_ratio" in lines[0]
    assert "licensed engineer" in lines[-1]
