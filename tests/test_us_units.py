"""A US-units run of the demo town writes every output in US customary units, names included."""

import json
import re
from pathlib import Path

import pyogrio
import pytest

from audit.cli import main

TOWN = Path(__file__).resolve().parent.parent / "sample_gis" / "town.toml"
# Source: NIST SP 811 (2008), appendix B: 1 ft = 0.3048 m, 1 in = 25.4 mm, 1 ft3 = 0.028316846592 m3
FOOT, CUBIC_FOOT = 0.3048, 0.3048**3


@pytest.fixture(scope="module")
def outputs(tmp_path_factory: pytest.TempPathFactory) -> dict[str, Path]:
    folder = tmp_path_factory.mktemp("us")
    text = TOWN.read_text(encoding="utf-8").replace('path = "town.gpkg"', f'path = "{(TOWN.parent / "town.gpkg").as_posix()}"')
    (folder / "si.toml").write_text(text, encoding="utf-8")
    assert text.count("[output]\n") == 1
    (folder / "us.toml").write_text(text.replace("[output]\n", '[output]\nunits = "us"\n'), encoding="utf-8")
    for name in ("si", "us"):
        assert main(["run", str(folder / f"{name}.toml"), "-o", str(folder / name), "-q"]) == 0
    return {"si": folder / "si", "us": folder / "us"}


def test_the_layers_name_their_us_units_and_hold_the_converted_values(outputs: dict[str, Path]) -> None:
    si = pyogrio.read_dataframe(outputs["si"] / "audit.gpkg", layer="pipes")
    us = pyogrio.read_dataframe(outputs["us"] / "audit.gpkg", layer="pipes")
    for si_name, us_name, factor in [("q_design_l_s", "q_design_cfs", 1e-3 / CUBIC_FOOT), ("height_mm", "height_in", 1 / 25.4),
                                     ("v_design_m_s", "v_design_ft_s", 1 / FOOT), ("length_m", "length_ft", 1 / FOOT),
                                     ("up_invert_m", "up_invert_ft", 1 / FOOT), ("shear_pa", "shear_psf", FOOT**2 / 4.4482216152605)]:  # fmt: skip
        assert us_name in us.columns
        assert si_name not in us.columns
        assert us[us_name].to_numpy() == pytest.approx(si[si_name].to_numpy() * factor, nan_ok=True, rel=1e-9)
    assert us["load_ratio"].to_numpy() == pytest.approx(si["load_ratio"].to_numpy(), nan_ok=True)
    manholes = pyogrio.read_dataframe(outputs["us"] / "audit.gpkg", layer="manholes")
    assert "flow_out_cfs" in manholes.columns
    # the reasons speak the same units: every velocity in ft/s, none in m/s
    reasons = " ".join(us["reasons"].dropna())
    assert "ft/s" in reasons
    assert "m/s" not in reasons
    assert re.search(r"cover \d+\.\d ft < 3\.0 ft", reasons)  # the 0.9 m minimum cover is 2.95 ft


def test_summary_candidates_and_report_follow(outputs: dict[str, Path]) -> None:
    summary = json.loads((outputs["us"] / "summary.json").read_text(encoding="utf-8"))
    assert summary["units"]["system"] == "us"
    assert "length_ft" in summary["totals"]
    si_summary = json.loads((outputs["si"] / "summary.json").read_text(encoding="utf-8"))
    assert summary["totals"]["length_ft"] == pytest.approx(si_summary["totals"]["length_m"] / FOOT, abs=0.1)
    assert summary["rules"]["min_velocity_ft_s"] == pytest.approx(0.6 / FOOT, abs=1e-6)
    assert "min_velocity_m_s" not in summary["rules"]
    header = (outputs["us"] / "candidates.csv").read_text(encoding="utf-8").splitlines()[0]
    assert "v_design_ft_s" in header
    assert "diameter_in" in header
    page = (outputs["us"] / "report.html").read_text(encoding="utf-8")
    assert "Design flow [cfs]" in page
    assert "velocity at design flow [ft/s]" in page
    assert "Length of pipe [mi]" in page
    assert "[l/s]" not in page
