"""``sewer-audit inspect``: describe the layers of a file or folder and write a starter config.

The steps, each in its own module:

1. list the layers, their geometry types, CRS, counts and fields (:mod:`audit.inspect.listing`);
2. choose the roles: pipes are lines, catchments polygons, both ranked by name; manholes are
   the point layer whose ids the pipes name most often;
3. read only the columns the name rules offer, through Arrow (:mod:`audit.inspect.profiling`);
4. guess the node fields by match rate (:mod:`audit.inspect.matching`), the other fields, the
   units and the sentinels (:mod:`audit.inspect.guessing`), the code tables by word rules
   (:mod:`audit.inspect.codes`);
5. print what was found with every reason, and write the starter config
   (:mod:`audit.inspect.starter`) unless the file exists: a config is never overwritten.

The config is written to ``--config-out``; by default ``<stem>.audit.toml`` beside a file, and
``<folder name>.toml`` inside a folder (beside the data it names, never a hidden file).
"""

from __future__ import annotations

import argparse
import math
import re
from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path

from audit.inspect.guessing import (
    MANHOLE_IDS,
    NOT_NUMBERS,
    OUTLETS,
    Guess,
    LayerGuess,
    candidates,
    guess_layer,
    node_candidates,
    wanted,
)
from audit.inspect.listing import LayerInfo, describe
from audit.inspect.matching import NodeMatch, match_nodes, match_outlets
from audit.inspect.profiling import SENTINEL_LIKE, LayerValues, read_values
from audit.inspect.starter import Chosen, starter_config

ROLE_NAMES = {
    "line": re.compile(r"pipe|sewer|main|conduit|link|line|drain"),
    "point": re.compile(r"manhole|mh|node|chamber|structure|junction|point"),
    "polygon": re.compile(r"catch|basin|subcat|area|shed|zone|drain"),
}
"""Layer names that suggest a role, per geometry kind (a rule of this project)."""
MAX_MANHOLE_LAYERS = 5
"""Point layers weighed as the manholes, best names first."""


@dataclass(frozen=True)
class Roles:
    """Layers by role, best first: the pipes (lines), the possible manholes (points) and catchments (polygons)."""

    lines: list[LayerInfo]
    points: list[LayerInfo]
    polygons: list[LayerInfo]

    def reason(self, layer: LayerInfo, role: str) -> str:
        """Why ``layer`` is taken for ``role``, by its geometry and name."""
        of = {"pipes": self.lines, "manholes": self.points, "catchments": self.polygons}[role]
        kind = layer.kind
        if len(of) == 1:
            return f"the only {kind} layer"
        named = "named like " + role if ROLE_NAMES[kind].search(layer.name.lower()) else "the largest"
        return f"{named} of {len(of)} {kind} layers"


def guess_roles(layers: Sequence[LayerInfo]) -> Roles:
    """Each geometry kind's layers, those named for their role first, then the larger first."""

    def ranked(kind: str) -> list[LayerInfo]:
        found = [layer for layer in layers if layer.kind == kind]
        return sorted(found, key=lambda layer: (not ROLE_NAMES[kind].search(layer.name.lower()), -layer.features))

    return Roles(ranked("line"), ranked("point"), ranked("polygon"))


@dataclass(frozen=True)
class Inspection:
    """What ``inspect`` found: the layers chosen with their guesses, the node match and the values read."""

    pipes: Chosen
    manholes: Chosen | None
    catchments: Chosen | None
    nodes: NodeMatch
    values: dict[str, LayerValues]


def _read(layer: LayerInfo, role: str) -> LayerValues:
    return read_values(layer.path, layer.name, wanted(role, layer.names), count=layer.features)


@dataclass(frozen=True)
class _Weighed:
    """One point layer weighed as the manholes: its values, the node match, the share of pipe ends naming it."""

    layer: LayerInfo
    values: LayerValues
    match: NodeMatch
    share: float


def _weigh(layer: LayerInfo, pipes: LayerValues, ends: tuple[list[str], list[str], list[str]]) -> _Weighed:
    values = _read(layer, "manholes")
    ups, downs, others = ends
    match = match_nodes(pipes, values, ups=ups, downs=downs, others=others, ids=candidates(layer.names, MANHOLE_IDS, values))
    rates = [match.rate.get((field, match.manhole_id or ""), 0.0) for field in (match.from_node, match.to_node) if field]
    return _Weighed(layer, values, match, sum(rates) / 2)


def _manholes(roles: Roles, pipes: LayerInfo, values: LayerValues) -> tuple[_Weighed | None, NodeMatch, str]:
    """The point layer whose ids the pipe ends name most often (names break ties), the node match and why."""
    ends = node_candidates(pipes.names, values)
    weighed = [_weigh(layer, values, ends) for layer in roles.points[:MAX_MANHOLE_LAYERS]]
    if not weighed:
        ups, downs, others = ends
        return None, match_nodes(values, None, ups=ups, downs=downs, others=others, ids=[]), ""
    best = max(weighed, key=lambda item: round(100 * item.share))  # the first (best name) among equals
    if len(weighed) == 1:
        return best, best.match, roles.reason(best.layer, "manholes")
    rest = ", ".join(f"{item.layer.name} {100 * item.share:.0f} %" for item in weighed if item is not best)
    return best, best.match, f"of {len(roles.points)} point layers, the one the pipe ends name most: {100 * best.share:.0f} % ({rest})"


def _fixed_nodes(match: NodeMatch) -> dict[str, Guess]:
    chosen = {"from_node": match.from_node, "to_node": match.to_node}
    return {key: Guess(field, match.reasons[key]) for key, field in chosen.items() if field}


def inspect_layers(layers: Sequence[LayerInfo]) -> Inspection | None:
    """Choose the roles and make every guess; None when no layer is made of lines."""
    roles = guess_roles(layers)
    if not roles.lines:
        return None
    pipes = roles.lines[0]
    values = {"pipes": _read(pipes, "pipes")}
    weighed, nodes, why = _manholes(roles, pipes, values["pipes"])
    pipe_guess = guess_layer("pipes", pipes.names, values["pipes"], crs=pipes.crs, fixed=_fixed_nodes(nodes))
    chosen_manholes, manhole_values = None, None
    if weighed is not None:
        manholes, manhole_values = weighed.layer, weighed.values
        values["manholes"] = manhole_values
        fixed = {"id": Guess(nodes.manhole_id, nodes.reasons["id"])} if nodes.manhole_id else {}
        guess = guess_layer("manholes", manholes.names, manhole_values, crs=manholes.crs, fixed=fixed, pipe_units=pipe_guess.units)
        chosen_manholes = Chosen(manholes, why, guess)
    chosen_catchments = None
    if roles.polygons:
        areas = roles.polygons[0]
        values["catchments"] = _read(areas, "catchments")
        outlet = None
        if manhole_values is not None and nodes.manhole_id:
            outlet = match_outlets(values["catchments"], manhole_values, candidates(areas.names, [OUTLETS], values["catchments"]), nodes.manhole_id)
        fixed = {"drains_to": Guess(*outlet)} if outlet else {}
        guess = guess_layer("catchments", areas.names, values["catchments"], crs=areas.crs, fixed=fixed)
        chosen_catchments = Chosen(areas, roles.reason(areas, "catchments"), guess)
    return Inspection(Chosen(pipes, roles.reason(pipes, "pipes"), pipe_guess), chosen_manholes, chosen_catchments, nodes, values)


def _listing(layers: Sequence[LayerInfo], found: Inspection | None) -> list[str]:
    roles = {}
    if found is not None:
        roles = {id(chosen.layer): role for role, chosen in (("pipes", found.pipes), ("manholes", found.manholes),
                                                              ("catchments", found.catchments)) if chosen}  # fmt: skip
    lines = []
    for layer in layers:
        role = f"  <- {roles[id(layer)]}" if id(layer) in roles else ""
        lines.append(f"{layer.path.name}: layer '{layer.name}': {layer.geometry_type}, {layer.features} features, CRS {layer.crs or 'none'}{role}")
        lines += [f"    {name}: {kind}" for name, kind in layer.fields]
    return lines


def _counts(guess: LayerGuess, values: LayerValues) -> list[str]:
    """Nulls, zeros and sentinel-like values per mapped numeric field, as a table."""
    rows = [(key, found.value, values.fields[found.value]) for key, found in guess.fields.items()
            if found.value in values.fields and values.fields[found.value].numeric and key not in NOT_NUMBERS]  # fmt: skip
    if not rows:
        return []
    head = f"    {'key':<20} {'field':<16} {'nulls':>7} {'zeros':>7}" + "".join(f" {v:>7g}" for v in SENTINEL_LIKE) + f" {'median':>9}"
    lines = ["  values of the mapped numeric fields:", head]
    for key, name, counted in rows:
        sentinels = "".join(f" {counted.sentinels.get(value, 0):>7}" for value in SENTINEL_LIKE)
        median = "-" if math.isnan(counted.median) else f"{counted.median:g}"
        lines.append(f"    {key:<20} {name:<16} {counted.nulls:>7} {counted.zeros:>7}{sentinels} {median:>9}")
    return lines


def _section(chosen: Chosen, values: LayerValues) -> list[str]:
    guess = chosen.guess
    lines = [f"{guess.role}: {chosen.layer.path.name}, layer '{chosen.layer.name}' ({chosen.reason})", "  fields:"]
    lines += [f"    {key} = {found.value}: {found.reason}" for key, found in guess.fields.items()] or ["    none recognised"]
    if guess.units:
        lines += ["  units:", *(f"    {key} = {unit.value}: {unit.reason}" for key, unit in guess.units.items())]
    lines += _counts(guess, values)
    for key, coded in guess.codes.items():
        lines.append(f"  {key} codes of {coded.field} ({coded.reason}):")
        lines += [f"    {row.code!r:<24} {row.count:>9}  -> {row.canonical or '?'} ({row.reason})" for row in coded.table]
    for key, (listed, why) in guess.sentinels.items():
        lines.append(f"  suggested [{guess.role}.sentinels] {key} = [{', '.join(f'{v:g}' for v in listed)}]: {why}")
    return lines


def summary(layers: Sequence[LayerInfo], found: Inspection | None) -> str:
    """The text ``inspect`` prints: every layer, then each role's guesses with their reasons and counts."""
    lines = _listing(layers, found)
    if found is None:
        return "\n".join(lines)
    for chosen in (found.pipes, found.manholes, found.catchments):
        if chosen is not None:
            lines += ["", *_section(chosen, found.values[chosen.guess.role])]
    if found.nodes.placeholders:
        uses = ", ".join(f"{value!r} ({count} pipe ends)" for value, count in found.nodes.placeholders)
        lines += ["", f"Pipe-end values that name no manhole but are shared by many pipes: {uses}.",
                  "They look like placeholders (end of line, junction); see [network] placeholder_ids in the config."]  # fmt: skip
    return "\n".join(lines)


def default_target(path: Path) -> Path:
    """``<stem>.audit.toml`` beside a file; ``<folder name>.toml`` inside a folder.

    >>> default_target(Path("/data/town.gpkg")).as_posix()
    '/data/town.audit.toml'
    """
    if path.is_dir():
        folder = path.resolve()
        return folder / f"{folder.name or 'register'}.toml"
    return path.with_name(f"{path.stem}.audit.toml")


def inspect_path(path: Path, *, config_out: Path | None = None) -> str:
    """Describe ``path`` and write a starter config; return the text to show the user.

    The config goes to ``config_out`` (default :func:`default_target`) and is never written
    over an existing file.
    """
    layers = describe(path)
    found = inspect_layers(layers)
    lines = [summary(layers, found), ""]
    target = config_out or default_target(path)
    if found is None:
        lines.append("No line layer found, so no starter config was written: pipes must be lines.")
    elif target.exists():
        lines.append(f"{target} exists and was left unchanged; choose another file with --config-out.")
    else:
        text = starter_config(found.pipes, manholes=found.manholes, catchments=found.catchments, nodes=found.nodes, folder=target.parent)
        target.write_text(text, encoding="utf-8")
        lines.append(f"Wrote the starter config {target}; check every line marked 'check this'.")
    return "\n".join(lines)


def inspect_command(args: argparse.Namespace) -> int:
    """Run ``sewer-audit inspect``; bad input raises InputError, which the CLI turns into exit 1."""
    config_out = Path(args.config_out) if args.config_out else None
    print(inspect_path(Path(args.path), config_out=config_out))
    return 0
