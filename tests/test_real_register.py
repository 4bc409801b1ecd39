"""Acceptance: the audit reads a register shaped as real ones are, end to end.

The register of the invented town Orrinsford (tests/_messy_register.py) is written as a
GeoPackage of pipes and a Shapefile of manholes in a grid in US survey feet, with the habits of
real registers: placeholder ids on stubs drawn either way, a pump station and its rising main,
loops, overflow and abandoned pipes, 0 for unknown sizes and levels, end depths, dates as text,
multi-part lines. Every expected value comes from what the generator planted, from the
documentation (docs/config.md, docs/outputs.md) and from published relations written out here;
lengths on the ground come from pyproj.Geod, never from the audit.
"""

from __future__ import annotations

import hashlib
import math
import re
from dataclasses import dataclass
from pathlib import Path

import geopandas as gpd
import networkx as nx
import numpy as np
import pandas as pd
import pyogrio
import pyproj
import pytest
from _messy_register import (
    CONFIGURED_PLACEHOLDERS,
    FT_M,
    IN_M,
    MANHOLES_FILE,
    OTHER_PLACEHOLDERS,
    PER_CAPITA_L_DAY,
    PERSONS_PER_KM,
    PIPES_FILE,
    PIPES_LAYER,
    Register,
    write_register,
)

import audit
from audit import cli

GEOD = pyproj.Geod(ellps="GRS80")
# The UTM grid the audit works in, the town's grid and the ellipsoid differ in scale by under 4e-4 here:
# UTM's scale is 0.9996 on its central meridian and grows about (dlon cos(lat))^2 / 2 away from it
# Source: Snyder, Map Projections - A Working Manual, USGS PP 1395 (1987), sec. 8 (from memory)
LENGTH_SLACK = 1e-3
CARRYING = ("gravity", "private", "rising_main")  # kinds that carry a design flow down (docs/config.md, kinds table)


@dataclass(frozen=True)
class Audited:
    register: Register
    result: audit.AuditResult
    pipes: pd.DataFrame  # result.pipe_results indexed by pipe id
    canonical: pd.DataFrame  # result.canonical_pipes indexed by pipe id
    findings: pd.DataFrame
    fingerprint: dict[str, str]


def _fingerprint(folder: Path) -> dict[str, str]:
    return {path.name: hashlib.sha256(path.read_bytes()).hexdigest() for path in sorted(folder.iterdir())}


@pytest.fixture(scope="module")
def town(tmp_path_factory: pytest.TempPathFactory) -> Audited:
    register = write_register(tmp_path_factory.mktemp("orrinsford"))
    before = _fingerprint(register.folder)
    result = audit.run(register.config)
    assert result.canonical_pipes is not None
    ids = pd.Index(result.pipes["PIPE_NO"].astype(str))
    pipes, canonical = result.pipe_results.set_axis(ids), result.canonical_pipes.set_axis(ids)
    return Audited(register, result, pipes, canonical, result.findings, before)


@pytest.fixture(scope="module")
def cli_output(town: Audited, tmp_path_factory: pytest.TempPathFactory) -> tuple[int, Path]:
    out = tmp_path_factory.mktemp("cli") / "out"
    return cli.main(["run", str(town.register.config), "-o", str(out), "-q"]), out


def _found(town: Audited, code: str) -> pd.DataFrame:
    return town.findings[town.findings["code"] == code]


def _input_pipes(register: Register) -> gpd.GeoDataFrame:
    return gpd.read_file(register.folder / PIPES_FILE, layer=PIPES_LAYER)


def _geodesic_m(geometry: gpd.GeoSeries) -> np.ndarray:
    """Length on the GRS80 ellipsoid of each line (all parts of a multi-line) [m], by pyproj.Geod.geometry_length."""
    return np.array([GEOD.geometry_length(line) for line in geometry.to_crs("EPSG:4326")])


# --- design flows -----------------------------------------------------------------------------


def _harmon(persons: float) -> float:
    """Harmon's peaking factor, evaluated at no fewer than 1000 persons (docs/config.md default).

    PF = 1 + 14 / (4 + sqrt(P / 1000)), P in persons.
    Source: Metcalf & Eddy, Wastewater Engineering (from memory); the 1000-person floor is the
    documented `min_peaking_population` default.
    """
    return 1.0 + 14.0 / (4.0 + math.sqrt(max(persons, 1000.0) / 1000.0))


def _sanitary_m3s(persons: float) -> float:
    """Peak sanitary flow: PF(P) x P x q / 86 400 [m3/s], q the per-capita flow [m3/person/day]."""
    return _harmon(persons) * persons * PER_CAPITA_L_DAY / 1000.0 / 86_400.0


def _served_bounds(town: Audited) -> pd.DataFrame:
    """Persons upstream of every flow-carrying pipe, by an accumulation written here with networkx.

    The persons of each manhole plus `persons_per_km` x the length of every pipe at its upstream
    node. Only gravity and private pipes take in sewage along their length (docs/config.md,
    `persons_per_km`); which length (the field or the drawing) it takes, the documentation leaves
    open: the lower bound counts the shorter length, the upper bound the longer one.
    A loop is one node (docs/config.md, "Loops"); no node has two outgoing pipes that carry flow.
    """
    register = town.register
    drawn = pd.Series(_geodesic_m(_input_pipes(register).geometry), index=register.pipe_ids)
    typed = pd.Series(register.length_ft) * FT_M
    shorter, longer = np.fmin(drawn, typed), np.fmax(drawn, typed)
    carrying = [p for p in register.pipe_ids if register.kinds[p] in CARRYING and p != register.self_loop]
    collecting = [p for p in carrying if register.kinds[p] in ("gravity", "private")]
    graph = nx.DiGraph([register.links[p] for p in carrying])
    for bound, length in (("low", shorter), ("high", longer)):
        load = {n: float(register.persons.get(n, 0)) for n in graph.nodes}  # a stub's head has no persons of its own
        for pipe in collecting:
            load[register.links[pipe][0]] += PERSONS_PER_KM * length[pipe] / 1000.0
        nx.set_node_attributes(graph, load, bound)
    condensed = nx.condensation(graph)
    group = condensed.graph["mapping"]
    own = {g: {b: sum(graph.nodes[n][b] for n in condensed.nodes[g]["members"]) for b in ("low", "high")} for g in condensed.nodes}
    served = {g: {b: own[g][b] + sum(own[a][b] for a in nx.ancestors(condensed, g)) for b in ("low", "high")} for g in condensed.nodes}
    rows = {p: served[group[register.links[p][0]]] for p in carrying}
    bounds = pd.DataFrame.from_dict(rows, orient="index")
    return bounds.assign(low=bounds["low"] * (1 - LENGTH_SLACK), high=bounds["high"] * (1 + LENGTH_SLACK))


def test_every_gravity_pipe_gets_a_design_flow(town: Audited) -> None:
    register, pipes = town.register, town.pipes
    gravity = [p for p in register.pipe_ids if register.kinds[p] in ("gravity", "private") and p != register.self_loop]
    assert len(gravity) > 380
    q = pipes.loc[gravity, "q_design"]
    assert (np.isfinite(q) & (q > 0)).all(), q[~(q > 0)].index.tolist()
    known = pipes.loc[gravity].query("height_m > 0 and slope == slope").index
    assert len(known) > 330  # the brief's "known size and slope": most of the register
    assert set(pipes.loc[gravity, "flow_source"]) == {"accumulated", "loop"}
    outlets = list(register.main_outlets.values())
    assert (pipes.loc[outlets, "q_design"] > 0.05).all()  # thousands of persons reach each outlet (bounds test below)


def test_below_the_loop_and_the_ring_the_flow_goes_on(town: Audited) -> None:
    register, pipes = town.register, town.pipes
    graph = nx.MultiDiGraph([(*register.links[p], p) for p in register.pipe_ids if register.kinds[p] in CARRYING])
    for loop in (register.loop_pipes, register.ring_pipes):
        nodes = {n for p in loop for n in register.links[p]}
        reach = nodes.union(*(nx.descendants(graph, n) for n in nodes))
        below = {p for u, _, p in graph.edges(keys=True) if u in reach and p not in loop}
        assert len(below) >= 10
        assert set(pipes.loc[sorted(loop), "flow_source"]) == {"loop"}
        entering = pipes.loc[sorted(loop), "q_design"].min()
        assert (pipes.loc[sorted(below), "q_design"] >= entering * (1 - 1e-12)).all()
    cycles = set(_found(town, "cycle")["feature"])
    assert cycles == register.loop_pipes | register.ring_pipes


def test_population_and_flow_match_an_independent_accumulation(town: Audited) -> None:
    bounds = _served_bounds(town)
    assert len(bounds) > 400
    assert (bounds["high"] / bounds["low"] < 1.05).all()  # the readings differ by a few per cent at most: the check has teeth
    served = town.pipes.loc[bounds.index, "population_served"]
    outside = bounds[(served < bounds["low"]) | (served > bounds["high"])]
    assert outside.empty, f"{len(outside)} pipes outside:\n{outside.assign(audit=served[outside.index]).head()}"
    # the flow is monotone in the persons served, so the bounds carry over to Harmon's peak flow
    low, high = bounds["low"].map(_sanitary_m3s), bounds["high"].map(_sanitary_m3s)
    q = town.pipes.loc[bounds.index, "q_design"]
    assert ((q >= low * (1 - 1e-9)) & (q <= high * (1 + 1e-9))).all()
    # the persons of the manhole numbered '0' reach no pipe: '0' is a configured placeholder
    assert town.register.persons["0"] > 0


def test_the_rising_main_carries_the_pump_station_catchment_to_main_a(town: Audited) -> None:
    register, pipes = town.register, town.pipes
    rising = pipes.loc[register.rising_main]
    into_pump = [p for p in register.pipe_ids if register.links[p][1] == register.pump_station]
    assert rising["pipe_kind"] == "rising_main"
    assert rising["from_node_id"] == register.pump_station
    assert rising["to_node_id"] == register.links[register.rising_main][1]
    assert rising["flags"] == ""
    assert rising["hydraulic_status"] == "pressure_pipe"  # docs/outputs.md: not judged by the gravity rules
    assert rising["q_design"] >= pipes.loc[into_pump, "q_design"].max()
    # a rising main is sealed: it adds no persons per km of its own (docs/config.md)
    at_pump = register.persons.get(register.pump_station, 0) + pipes.loc[into_pump, "population_served"].sum()
    assert rising["population_served"] == pytest.approx(at_pump, rel=1e-12)
    # walk main A from where the rising main delivers down to the outfall
    node, walked = register.links[register.rising_main][1], []
    while node != "OF-1":
        pipe = next(p for p in register.pipe_ids if register.links[p][0] == node and register.kinds[p] == "gravity")
        walked.append(pipe)
        node = register.links[pipe][1]
    assert len(walked) >= 5
    assert (pipes.loc[walked, "q_design"] >= rising["q_design"]).all()
    assert (pipes.loc[walked, "population_served"] >= rising["population_served"]).all()


def test_abandoned_and_overflow_pipes_carry_nothing_and_are_not_judged(town: Audited) -> None:
    register, pipes = town.register, town.pipes
    for pipe in register.abandoned:
        row = pipes.loc[pipe]
        assert (row["flow_source"], row["hydraulic_status"], row["flags"]) == ("left_out", "left_out", ""), pipe
        assert not row["q_design"] > 0
    overflow = pipes.loc[register.overflow]
    assert (overflow["flow_source"], overflow["hydraulic_status"], overflow["flags"]) == ("overflow", "overflow", "")
    assert not overflow["q_design"] > 0
    chamber = register.links[register.overflow][0]
    onward = next(p for p in register.pipe_ids if register.links[p][0] == chamber and p != register.overflow)
    arriving = [p for p in register.pipe_ids if register.links[p][1] == chamber]
    assert pipes.loc[onward, "q_design"] >= pipes.loc[arriving, "q_design"].max()  # the whole flow goes on, none spills
    outfalls = _found(town, "outfall")
    assert set(outfalls["feature"]) == {"OF-1", "OF-2", "OF-3"}


# --- joins: stubs, self-loops ----------------------------------------------------------------


def test_no_false_self_loop(town: Audited) -> None:
    pipes, register = town.pipes, town.register
    assert set(_found(town, "self_loop")["feature"]) == {register.self_loop}
    same = pipes.index[(pipes["from_node_id"] == pipes["to_node_id"]) & pipes["from_node_id"].notna()]
    assert set(same) == {register.self_loop}
    assert pipes.loc[register.self_loop, "flow_source"] == "self_loop"


def _stubs(register: Register, placeholder: str) -> list[str]:
    return sorted(p for p, code in register.placeholders.items() if code == placeholder)


@pytest.mark.parametrize("placeholder", CONFIGURED_PLACEHOLDERS + OTHER_PLACEHOLDERS)
def test_each_stub_joins_its_manhole_and_starts_a_run_of_its_own(town: Audited, placeholder: str) -> None:
    register, pipes = town.register, town.pipes
    stubs = _stubs(register, placeholder)
    assert len(stubs) >= 5
    assert {p in register.backwards for p in stubs} == {True, False}  # drawn both ways
    every_end = pd.concat([pipes["from_node_id"], pipes["to_node_id"]]).value_counts()
    for stub in stubs:
        head = pipes.loc[stub, "from_node_id"]
        assert pipes.loc[stub, "to_node_id"] == register.links[stub][1], stub
        assert head not in register.manhole_ids, (stub, head)
        assert every_end[head] == 1, (stub, head)  # no other pipe touches the stub's head
    messages = _found(town, "unknown_node").set_index("feature")["message"]
    assert all(f"'{placeholder}'" in messages.get(stub, "(no unknown_node finding)") for stub in stubs)


@pytest.mark.parametrize("placeholder", CONFIGURED_PLACEHOLDERS)
def test_the_findings_call_a_configured_placeholder_one(town: Audited, placeholder: str) -> None:
    messages = _found(town, "unknown_node").set_index("feature")["message"]
    assert all("placeholder" in messages.get(stub, "(no unknown_node finding)") for stub in _stubs(town.register, placeholder))


def test_every_pipe_drawn_backwards_is_said_and_follows_its_ids(town: Audited) -> None:
    register, pipes = town.register, town.pipes
    drawn_against = set(_found(town, "drawn_against_flow")["feature"])
    assert drawn_against - {register.self_loop} == register.backwards
    joined = [p for p in register.pipe_ids if register.kinds[p] != "abandoned" and p not in register.placeholders]
    expected = pd.DataFrame([register.links[p] for p in joined], index=joined, columns=["from_node_id", "to_node_id"])
    pd.testing.assert_frame_equal(pipes.loc[joined, ["from_node_id", "to_node_id"]].astype(str), expected, check_names=False)


def test_manholes_no_pipe_joins_are_orphans(town: Audited) -> None:
    # the spare manhole, and the one numbered '0': a configured placeholder names no node, even where a manhole bears it
    assert set(_found(town, "orphan_manhole")["feature"]) == set(town.register.orphans) == {"MH-9001", "0"}


# --- attributes as typed: kinds, dates, zeros, depths ----------------------------------------


def test_kind_codes(town: Audited) -> None:
    register = town.register
    assert town.canonical["kind"].to_dict() == dict(register.kinds)
    assert set(_found(town, "unknown_kind")["feature"]) == {register.unknown_kind}


def _years_match(found: pd.Series, register: Register) -> None:
    expected = pd.Series(register.install_year).loc[found.index]
    pd.testing.assert_series_equal(found.astype(float), expected, check_names=False)


def test_install_years_from_date_text(town: Audited) -> None:
    _years_match(town.canonical["install_year"], town.register)
    assert set(_found(town, "not_a_date")["feature"]) == town.register.not_a_date
    assert np.isfinite(town.canonical["install_year"]).sum() > 300


def test_install_years_from_a_date_field_read_by_fiona(town: Audited) -> None:
    result = audit.run(town.register.date_config)
    assert result.canonical_pipes is not None
    _years_match(result.canonical_pipes.set_axis(result.pipes["PIPE_NO"])["install_year"], town.register)
    assert "not_a_date" not in set(result.findings["code"])  # an empty Date is no finding


def test_zero_diameters_are_unknown_with_a_finding(town: Audited) -> None:
    written = pd.Series(town.register.diameter_in)
    zero = written.index[written == 0]
    assert len(zero) == 6
    diameter = town.canonical["diameter"]
    assert diameter[zero].isna().all()
    np.testing.assert_allclose(diameter.drop(zero), written.drop(zero) * IN_M, rtol=1e-12)
    sizes = _found(town, "nonpositive_size")
    assert set(zero) <= set(sizes.loc[sizes["message"].str.contains("DIAM_IN"), "feature"])
    assert (town.pipes.loc[zero, "flags"].str.contains("missing_data")).all()


def test_zero_inverts_are_unknown_with_a_finding(town: Audited) -> None:
    register, canonical = town.register, town.canonical
    typed = _input_pipes(register).set_index("PIPE_NO")
    sentinel = _found(town, "sentinel_value")
    assert set(sentinel.query("layer == 'pipes'")["feature"]) == set(register.zero_invert_ends)
    assert set(sentinel.query("layer == 'manholes'")["feature"]) == {register.rim_sentinel}  # the -9999 cover level
    for column, field, end in (("upstream_invert", "UP_INV_FT", 0), ("downstream_invert", "DN_INV_FT", 1)):
        zero = [p for p, ends in register.zero_invert_ends.items() if ends[end]]
        assert canonical.loc[zero, column].isna().all()
        known = typed[field].notna() & (typed[field] != 0)
        np.testing.assert_allclose(canonical.loc[known[known].index, column], typed.loc[known, field] * FT_M, rtol=1e-12)
    both = [p for p, ends in register.zero_invert_ends.items() if all(ends) and p not in register.end_depths]
    assert town.pipes.loc[both, "slope"].isna().all()
    assert set(both) <= set(_found(town, "missing_invert")["feature"])


def test_inverts_from_end_depths_are_rim_minus_depth(town: Audited) -> None:
    depths = town.register.end_depths
    assert len(depths) == 70
    rows = town.pipes.loc[list(depths)]
    for column, end in (("up_invert_m", 0), ("down_invert_m", 1)):
        expected = [(depths[p][end][0] - depths[p][end][1]) * FT_M for p in depths]
        np.testing.assert_allclose(rows[column], expected, rtol=0, atol=1e-9)
    # and the slope follows from them: it is positive, as laid
    assert (rows["slope"] > 0).all()


# --- geometry: multi-part lines, lengths -----------------------------------------------------


def test_a_multi_part_line_with_a_gap_is_described_and_measured_by_its_parts(town: Audited) -> None:
    register = town.register
    gapped = next(p for p, parts in register.multipart.items() if any(parts.gaps_ft))
    line = _input_pipes(register).set_index("PIPE_NO").loc[[gapped]].to_crs("EPSG:4326").geometry.iloc[0]
    parts = [GEOD.geometry_length(part) for part in line.geoms]
    (gap_lon, gap_lat), (resume_lon, resume_lat) = line.geoms[1].coords[-1], line.geoms[2].coords[0]
    gap = GEOD.inv(gap_lon, gap_lat, resume_lon, resume_lat)[2]
    assert gap == pytest.approx(20 * 1200 / 3937, rel=LENGTH_SLACK)  # 20 US survey ft; 1 ft = 1200/3937 m  # Source: NIST SP 811 (2008), appendix B (from memory)
    message = _found(town, "multipart_line").set_index("feature").loc[gapped, "message"]
    assert "3 parts" in message
    numbers = [float(n) for n in re.findall(r"\d+\.\d+", message)]
    for value in [*parts, sum(parts), gap]:
        assert any(abs(n - value) <= LENGTH_SLACK * value + 0.006 for n in numbers), (value, message)
    assert town.canonical.loc[gapped, "drawn_length"] == pytest.approx(sum(parts), rel=LENGTH_SLACK)
    # the length field holds the parts' total; compared with that, nothing is amiss (the gap alone is 6 %)
    assert set(_found(town, "length_mismatch")["feature"]) == {register.length_typo}


def test_multi_part_lines_that_touch_in_order_are_one_line(town: Audited) -> None:
    register = town.register
    touching = [p for p, parts in register.multipart.items() if not any(parts.gaps_ft)]
    lines = _input_pipes(register).set_index("PIPE_NO").loc[touching].geometry
    np.testing.assert_allclose(town.canonical.loc[touching, "drawn_length"], _geodesic_m(lines), rtol=LENGTH_SLACK)
    in_order = [p for p in touching if lines[p].geoms[0].coords[-1] == lines[p].geoms[1].coords[0]]
    assert len(in_order) == 1
    assert not set(in_order) & set(_found(town, "multipart_line")["feature"])


def test_a_mistyped_length_is_reported_with_both_lengths(town: Audited) -> None:
    register = town.register
    typo = register.length_typo
    drawn = _geodesic_m(_input_pipes(register).set_index("PIPE_NO").loc[[typo]].geometry)[0]
    message = _found(town, "length_mismatch").set_index("feature").loc[typo, "message"]
    numbers = [float(n) for n in re.findall(r"\d+\.\d+", message)]
    assert numbers[0] == pytest.approx(register.length_ft[typo] * FT_M, abs=1e-3)
    assert numbers[1] == pytest.approx(drawn, rel=LENGTH_SLACK)


# --- every feature back, inputs untouched ------------------------------------------------------


def _assert_same_fields(found: pd.DataFrame, original: pd.DataFrame) -> None:
    for column in original.columns.drop("geometry"):
        mine, theirs = found[column], original[column]
        if pd.api.types.is_datetime64_any_dtype(theirs):  # the same dates, whatever the resolution
            mine, theirs = mine.astype("datetime64[ms]"), theirs.astype("datetime64[ms]")
        pd.testing.assert_series_equal(mine.reset_index(drop=True), theirs.reset_index(drop=True), check_dtype=False, obj=column)
    assert found.geometry.reset_index(drop=True).geom_equals_exact(original.geometry, tolerance=0).all()


def test_every_feature_and_field_comes_back(town: Audited) -> None:
    register, result = town.register, town.result
    pipes, manholes = _input_pipes(register), gpd.read_file(register.folder / MANHOLES_FILE)
    assert len(pipes) == len(register.pipe_ids)
    assert len(manholes) == len(register.manhole_ids)
    _assert_same_fields(result.pipes, pipes)
    _assert_same_fields(result.manholes, manholes)


def test_the_command_line_writes_every_pipe_and_leaves_the_inputs_alone(town: Audited, cli_output: tuple[int, Path]) -> None:
    code, out = cli_output
    assert code == cli.EXIT_OK
    written = gpd.read_file(out / "audit.gpkg", layer="pipes")
    assert written["PIPE_NO"].tolist() == list(town.register.pipe_ids)
    _assert_same_fields(written, _input_pipes(town.register))
    types = dict(zip(*(pyogrio.read_info(out / "audit.gpkg", layer="pipes")[k] for k in ("fields", "ogr_types")), strict=True))
    assert (types["LAID_ON"], types["WORK_ORDER"]) == ("OFTDate", "OFTInteger64")  # written back in their own type
    assert len(gpd.read_file(out / "audit.gpkg", layer="manholes")) == len(town.register.manhole_ids)
    assert _fingerprint(town.register.folder) == town.fingerprint
