"""``[grade_line]``: outfall boundaries, the manhole loss, the flood freeboard and the profile steps.

Parsed once at config load through :class:`~audit.errors.ConfigProblems`, so every bad value of
the table is reported at once under its dotted key. Water levels in this table (the fixed level
of an outfall) are kept as the raw numbers of the file, in the layer's level units: the caller
converts them to metres when it builds the per-node ``boundary_level`` array
(:func:`node_boundaries` hands back the raw numbers).

    [grade_line]
    outfall = "free"          # every outfall without its own entry: "free", "normal" or "fixed"
    outfall_level = 12.5      # only with outfall = "fixed" [level units]
    manhole_loss = 0.15       # k in k v^2 / 2g where the flow goes straight through a node [-]
    bend_loss = 1.0           # k where it turns through a right angle or more [-]
    freeboard_m = 0.0         # a node floods when its level reaches rim - freeboard [m]
    profile_steps = 16        # depth steps of the direct step method per pipe

    [grade_line.outfalls]     # per outfall, by node id
    OF1 = "normal"
    OF2 = 3.75                # a number is a fixed level [level units]
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass, field
from enum import IntEnum
from types import MappingProxyType
from typing import Any

import numpy as np
import pandas as pd
from numpy.typing import ArrayLike, NDArray

from audit.errors import ConfigProblems
from audit.network import first_places


class BoundaryKind(IntEnum):
    """The water level condition at a boundary node (an outfall or another terminal)."""

    FREE = 0  # the depth at the outlet is the smaller of critical and normal depth of the pipe in
    NORMAL = 1  # normal depth in the incoming pipe
    FIXED = 2  # a given water level (river, tide, a receiving sewer)

    @property
    def label(self) -> str:
        """The lower-case name used in the config file and in outputs, e.g. ``free``."""
        return self.name.lower()


BOUNDARY_NAMES = tuple(kind.label for kind in BoundaryKind)
"""The names a boundary takes in ``[grade_line]``: ``free``, ``normal``, ``fixed``."""


@dataclass(frozen=True)
class Outfall:
    """One boundary: its kind and, for ``FIXED``, the water level in the layer's level units (raw)."""

    kind: BoundaryKind = BoundaryKind.FREE
    level: float = math.nan


@dataclass(frozen=True)
class GradeLineSettings:
    """``[grade_line]``: how the hydraulic grade line is swept from the outfalls up.

    ``outfall`` is the boundary of every outfall without an entry in ``outfalls`` (node id to
    boundary). Levels are raw numbers in the layer's level units, not metres.
    ``manhole_loss`` [-] is k in the head loss :math:`k v^2 / 2g` at a node the flow goes
    straight through, with v the velocity leaving it (0.15: a benched straight-through manhole,
    0.1 to 0.2); ``bend_loss`` [-] is k where the flow turns through a right angle or more, and
    where the water leaving starts from rest (a head of run, a drop into the chamber), 1.0; k is
    interpolated linearly in the turn between (:mod:`audit.grade_line.losses`; values from
    memory, local design manuals give tables). ``bend_loss`` is never below ``manhole_loss``;
    left out it is the larger of 1.0 and ``manhole_loss``; equal to it, one k serves every node.
    ``freeboard_m`` [m]: a node floods when its level reaches its rim less this; 0 by default
    (flooding means the level reaches the cover). ``profile_steps``: depth steps of the direct
    step method in each pipe (16 keeps the upstream depth within 0.5 % of an accurate
    integration; see docs/methods.md).
    """

    outfall: Outfall = Outfall()
    outfalls: Mapping[str, Outfall] = field(default_factory=lambda: MappingProxyType({}))
    manhole_loss: float = 0.15
    bend_loss: float = 1.0
    freeboard_m: float = 0.0
    profile_steps: int = 16


KEYS = ("outfall", "outfall_level", "outfalls", "manhole_loss", "bend_loss", "freeboard_m", "profile_steps")
PROFILE_STEPS_RANGE = (4, 200)
MANHOLE_LOSS_MAX = 10.0  # above this k is a typing error rather than a manhole; common practice, no source


def _level(value: object) -> float | None:
    """A finite number as float (a level may be negative: below the datum), else None."""
    if isinstance(value, bool) or not isinstance(value, int | float) or not math.isfinite(value):
        return None
    return float(value)


def _default_outfall(check: ConfigProblems, table: dict[str, Any]) -> Outfall:
    kind = BoundaryKind[check.choice(table, "outfall", "grade_line", BOUNDARY_NAMES).upper()]
    if "outfall_level" not in table:
        if kind == BoundaryKind.FIXED:
            check.fail("grade_line.outfall_level", 'a water level (a number in the layer\'s level units) with outfall = "fixed"')
            return Outfall()
        return Outfall(kind)
    level = _level(table["outfall_level"])
    if kind != BoundaryKind.FIXED:
        check.fail("grade_line.outfall_level", 'no level unless outfall = "fixed"', table["outfall_level"])
    elif level is None:
        check.fail("grade_line.outfall_level", "a finite number [level units]", table["outfall_level"])
        return Outfall()
    return Outfall(kind, math.nan if level is None else level)


def _outfall_entry(check: ConfigProblems, name: str, value: object) -> Outfall | None:
    """One ``[grade_line.outfalls]`` entry: "free", "normal" or a number (a fixed level)."""
    if isinstance(value, str) and value in ("free", "normal"):
        return Outfall(BoundaryKind[value.upper()])
    level = _level(value)
    if level is None:
        check.fail(f"grade_line.outfalls.{name}", '"free", "normal" or a fixed water level (a number in the layer\'s level units)', value)
        return None
    return Outfall(BoundaryKind.FIXED, level)


def _outfalls(check: ConfigProblems, data: object) -> Mapping[str, Outfall]:
    table = check.table(data, "grade_line.outfalls", None)
    entries = {str(name): _outfall_entry(check, str(name), value) for name, value in table.items()}
    return MappingProxyType({name: entry for name, entry in entries.items() if entry is not None})


def _loss(check: ConfigProblems, table: dict[str, Any], key: str, default: float) -> float:
    """A loss coefficient k from 0 to ``MANHOLE_LOSS_MAX``."""
    value = check.number(table, key, "grade_line", default)
    if not value <= MANHOLE_LOSS_MAX:
        check.fail(f"grade_line.{key}", f"a loss coefficient from 0 to {MANHOLE_LOSS_MAX:g}", value)
        return default
    return value


def _steps(check: ConfigProblems, table: dict[str, Any]) -> int:
    low, high = PROFILE_STEPS_RANGE
    value = table.get("profile_steps", GradeLineSettings.profile_steps)
    if isinstance(value, bool) or not isinstance(value, int) or not low <= value <= high:
        check.fail("grade_line.profile_steps", f"a whole number from {low} to {high}", value)
        return GradeLineSettings.profile_steps
    return value


def parse_grade_line(check: ConfigProblems, data: object) -> GradeLineSettings:
    """``[grade_line]`` as :class:`GradeLineSettings`; every problem goes to ``check``."""
    table = check.table(data, "grade_line", KEYS)
    defaults = GradeLineSettings()
    loss = _loss(check, table, "manhole_loss", defaults.manhole_loss)
    bend = _loss(check, table, "bend_loss", max(defaults.bend_loss, loss))
    if bend < loss:
        check.fail("grade_line.bend_loss", f"a loss coefficient no smaller than manhole_loss ({loss:g}) and at most {MANHOLE_LOSS_MAX:g}", bend)
        bend = max(defaults.bend_loss, loss)
    freeboard = check.number(table, "freeboard_m", "grade_line", defaults.freeboard_m)
    if not math.isfinite(freeboard):
        check.fail("grade_line.freeboard_m", "a finite number >= 0 [m]", freeboard)
        freeboard = defaults.freeboard_m
    return GradeLineSettings(
        outfall=_default_outfall(check, table),
        outfalls=_outfalls(check, table["outfalls"]) if "outfalls" in table else MappingProxyType({}),
        manhole_loss=loss,
        bend_loss=bend,
        freeboard_m=freeboard,
        profile_steps=_steps(check, table),
    )


def node_boundaries(
    settings: GradeLineSettings, node_ids: ArrayLike, outfall: NDArray[np.bool_]
) -> tuple[NDArray[np.int8], NDArray[np.float64], tuple[str, ...]]:
    """The per-node boundary arrays the sweep takes, from the settings and the node ids.

    Parameters
    ----------
    settings : the parsed ``[grade_line]`` table
    node_ids : the id of every node (as the register types it)
    outfall : per node, True where the network ends (the default boundary applies there)

    Returns
    -------
    boundary : int8 :class:`BoundaryKind` code per node: the node's own entry where
        ``[grade_line.outfalls]`` names it, the default at the other outfalls, -1 elsewhere
    level : the fixed water level per node in the layer's level units (raw, not metres); NaN
        where the boundary is not ``FIXED``
    unknown : the ids of ``[grade_line.outfalls]`` that name no node (for a finding)

    >>> settings = GradeLineSettings(outfalls=MappingProxyType({"B": Outfall(BoundaryKind.FIXED, 2.5)}))
    >>> codes, levels, unknown = node_boundaries(settings, ["A", "B", "C"], np.array([True, False, False]))
    >>> codes.tolist(), levels.tolist(), unknown
    ([0, 2, -1], [nan, 2.5, nan], ())
    """
    codes = np.where(outfall, np.int8(settings.outfall.kind), np.int8(-1)).astype(np.int8)
    levels = np.where(outfall & (settings.outfall.kind == BoundaryKind.FIXED), settings.outfall.level, np.nan)
    if not settings.outfalls:  # nothing named: no need to look at a million ids
        return codes, levels, ()
    names = pd.Index(list(settings.outfalls))
    rows = first_places(pd.Series(np.asarray(node_ids, dtype=object)).astype(str), names)  # the first node of a repeated id
    for row, name in zip(rows, names, strict=True):  # a loop over the config's entries
        if row >= 0:
            entry = settings.outfalls[name]
            codes[row] = int(entry.kind)
            levels[row] = entry.level if entry.kind == BoundaryKind.FIXED else np.nan
    return codes, levels, tuple(str(name) for name, row in zip(names, rows, strict=True) if row < 0)
