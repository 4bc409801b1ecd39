"""The starter config ``sewer-audit inspect`` writes: every guess marked ``check this`` with its reason.

Only keys of the config contract (:mod:`audit.layers.settings`, :mod:`audit.network.settings`)
are written, so the file loads with :func:`audit.config.load_config` as it stands; what the
user must decide (an unknown code, a placeholder id, a catchment layer) is written commented out.
"""

from __future__ import annotations

import json
import os
from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path

from audit.inspect.codes import CodeGuess
from audit.inspect.guessing import LayerGuess
from audit.inspect.listing import LayerInfo
from audit.inspect.matching import NodeMatch
from audit.layers import MANHOLE_UNITS, NODE_KINDS, PIPE_KINDS, PIPE_UNITS, SHAPES

MAX_LISTED = 40
"""Codes written per table; the rest are counted in one comment."""
CHECK = "# check this: "


@dataclass(frozen=True)
class Chosen:
    """A layer taken for a role (``pipes``, ``manholes``, ``catchments``), why, and its guesses."""

    layer: LayerInfo
    reason: str
    guess: LayerGuess


def quote(text: str) -> str:
    """``text`` as a TOML basic string (JSON's escapes are TOML's, but DEL must be escaped too).

    >>> print(quote('FORCE "MAIN"'))
    "FORCE \\"MAIN\\""
    """
    return json.dumps(text, ensure_ascii=False).replace("\x7f", "\\u007f")


def _number(value: float) -> str:
    return f"{value:g}"


def counted(count: int, noun: str) -> str:
    """``1 pipe``, ``2 pipes``: a count with its noun (``noun`` given in the plural).

    >>> counted(1, "manholes"), counted(3, "pipes")
    ('1 manhole', '3 pipes')
    """
    return f"{count} {noun[:-1] if count == 1 else noun}"


def _code_lines(table: Sequence[CodeGuess], *, noun: str) -> list[str]:
    lines = []
    for row in table[:MAX_LISTED]:
        if row.canonical is None:
            lines.append(f'# {quote(row.code)} = ""  # {counted(row.count, noun)}: {row.reason}; map it yourself or leave it out')
        else:
            lines.append(f"{quote(row.code)} = {quote(row.canonical)}  {CHECK}{counted(row.count, noun)}, {row.reason}")
    rest = table[MAX_LISTED:]
    if rest:
        lines.append(f"# ... and {len(rest)} more codes ({counted(sum(row.count for row in rest), noun)}) not listed")
    return lines


def _layer_table(chosen: Chosen, *, folder: Path) -> list[str]:
    layer, guess = chosen.layer, chosen.guess
    key = guess.role
    relative = Path(os.path.relpath(layer.path.resolve(), folder.resolve())).as_posix()
    lines = [f"[{key}]", f"path = {quote(relative)}", f"layer = {quote(layer.name)}  {CHECK}{chosen.reason}"]
    if layer.crs is None:
        lines.append('# crs = "EPSG:...."  # required: the layer has no CRS; give the one it was drawn in')
    lines.append(f"\n[{key}.fields]  # canonical name = your field name")
    for canonical, found in guess.fields.items():
        lines.append(f"{canonical} = {quote(found.value)}  {CHECK}{found.reason}")
    units = {"pipes": PIPE_UNITS, "manholes": MANHOLE_UNITS}.get(key)
    if units is not None:
        lines.append(f"\n[{key}.units]  # defaults shown commented out; uncomment and change to match your data")
        for canonical, (_, default) in units.items():
            unit_guess = guess.units.get(canonical)
            lines.append(f"{canonical} = {quote(unit_guess.value)}  {CHECK}{unit_guess.reason}" if unit_guess
                         else f"# {canonical} = {quote(default)}")  # fmt: skip
    choices = {"shape": ("shapes", SHAPES), "kind": ("kinds", PIPE_KINDS if key == "pipes" else NODE_KINDS)}
    for canonical, coded in guess.codes.items():
        table, allowed = choices[canonical]
        lines.append(f"\n[{key}.{table}]  # codes of {coded.field}: your code = one of {', '.join(allowed)}")
        lines += _code_lines(coded.table, noun=key)
    if guess.sentinels:
        lines.append(f'\n[{key}.sentinels]  # values that mean "unknown" in one field, beside [input] sentinels')
        for canonical, (values, why) in guess.sentinels.items():
            lines.append(f"{canonical} = [{', '.join(map(_number, values))}]  {CHECK}{why}")
    return lines


def _network_table(nodes: NodeMatch) -> list[str]:
    lines = ["[network]"]
    if nodes.placeholders:
        listed = ", ".join(quote(value) for value, _ in nodes.placeholders)
        uses = ", ".join(f"{value} {count}" for value, count in nodes.placeholders)
        lines.append(f"# placeholder_ids = [{listed}]  {CHECK}pipe ends naming no manhole, shared by many pipes ({uses}):"
                     " end-of-line or junction codes? uncomment if they mean no node")  # fmt: skip
    lines.append("# snap_tolerance_m = 1.0")
    if nodes.from_node is None or nodes.to_node is None:
        lines.append('# direction = "digitised"  # no from/to node fields were found: flow may be taken in the drawn direction')
    else:
        lines.append('# direction = "ids"')
    return lines


def starter_config(pipes: Chosen, *, manholes: Chosen | None, catchments: Chosen | None, nodes: NodeMatch, folder: Path) -> str:
    """The text of a starter TOML config for these layers, with paths relative to ``folder``."""
    lines = ["# Starter config written by `sewer-audit inspect`; see docs/config.md for every key and docs/inspect.md",
             "# for how each guess was made. Lines marked 'check this' are guesses, each with its reason.", "",
             "[input]", '# engine = "pyogrio"', "# sentinels = [-9999, -999]", ""]  # fmt: skip
    lines += _layer_table(pipes, folder=folder)
    if manholes is not None:
        lines += ["", *_layer_table(manholes, folder=folder)]
    if catchments is not None:
        table = _layer_table(catchments, folder=folder)
        lines += ["", "# A polygon layer that may be the catchments; uncomment to use it ([flows] kind storm or combined)."]
        lines += [line if line.startswith("#") or not line else f"# {line}" for line in "\n".join(table).splitlines()]
    lines += ["", *_network_table(nodes), "", "[hydraulics]", '# formula = "manning"', "# manning_n = 0.013", ""]
    return "\n".join(lines)
