"""Schemes of work: contiguous pipes with a capacity remedy along the flow, built from the outlet up.

Two pipes with a capacity remedy touch along the flow when one flows into the node the other
leaves; every pipe so linked, branches included, belongs to one scheme (the weakly connected
components of that graph, ``scipy.sparse.csgraph.connected_components``). Two pipes that only
meet at a node whose outgoing pipe needs nothing stay apart. Within a scheme the pipes are
ordered by their distance in pipes from its lowest pipe (a breadth-first search from a source
joined to every lowest pipe), downstream first, because works are built from the outlet upward;
pipes at the same distance by design flow, largest first. Schemes are numbered ``S001``,
``S002``, ... by their greatest risk (unknown last), then their length, longest first.

Cost: the length of each pipe times the cost per metre of its new size (of its present size
where it is re-laid or relieved), from the ``[renewal]`` table of costs by diameter: a size takes
the row of the same diameter or, between rows, of the next larger one. A scheme whose pipe has no
cost (no table, a size beyond the table, an unknown length) has no cost.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd
import pyarrow as pa
import pyarrow.compute as pc
from numpy.typing import NDArray
from scipy.sparse import coo_matrix
from scipy.sparse.csgraph import connected_components, shortest_path

from audit.labels import labels_from
from audit.renewal.settings import RenewalSettings
from audit.renewal.wording import DECIMALS, join, number, objects, percent

Array = NDArray[np.float64]
Mask = NDArray[np.bool_]
Index = NDArray[np.intp]

#: Columns of the schemes table (SI), in order.
SCHEME_COLUMNS: dict[str, str] = {
    "scheme_id": "S001, S002, ...: by greatest risk, then length",
    "pipes": "number of pipes in the scheme",
    "first_pipe": "the pipe at the scheme's downstream end, where the works start",
    "pipe_ids": "every pipe of the scheme, downstream first, joined by ';'",
    "length_m": "total length of its pipes [m] (an unknown length counts 0)",
    "sizes": "per pipe, downstream first: present size -> new size (or the slope to re-lay at), in the output's size unit",
    "q_outlet": "design flow of the first pipe [m3/s]",
    "cost": "estimated cost of the works: length x cost per metre of the new size; empty without [renewal] costs",
    "currency": "the label [renewal] currency gives the costs",
    "max_risk": "greatest risk (likelihood x consequence, 1-25) of its pipes",
    "risk_driver": "what drives the risk of its riskiest pipe",
}


@dataclass(frozen=True)
class Schemes:
    """Per pipe: the scheme's number (0 for S001; -1 for none), its id as labels, and the pipe's place
    in it (1 for the downstream pipe; 0 for none); and the table of schemes (``SCHEME_COLUMNS``)."""

    number: NDArray[np.intp]
    ids: pd.Categorical
    position: NDArray[np.intp]
    table: pd.DataFrame


def group_pipes(member: Mask, *, upstream: Index, downstream: Index) -> tuple[Index, Index]:
    """Per pipe, its group of touching members (-1 for a pipe not a member) and its distance in
    pipes from the group's lowest pipe (0 there; -1 for a non-member).

    A lowest pipe flows into no member. A group with none (a loop) starts from its first pipe.
    """
    count = member.size
    rows = np.flatnonzero(member)
    size = rows.size
    group, distance = np.full(count, -1, dtype=np.intp), np.full(count, -1, dtype=np.intp)
    if size == 0:
        return group, distance
    local = np.arange(size)
    entering = pd.DataFrame({"node": downstream[rows], "below": local})
    leaving = pd.DataFrame({"node": upstream[rows], "above": local})
    pairs = entering[entering["node"] >= 0].merge(leaving[leaving["node"] >= 0], on="node")
    below, above = pairs["below"].to_numpy(dtype=np.intp), pairs["above"].to_numpy(dtype=np.intp)
    flows_into = coo_matrix((np.ones(below.size), (below, above)), shape=(size, size)).tocsr()
    _, label = connected_components(flows_into, directed=True, connection="weak")
    lowest = np.bincount(below, minlength=size) == 0
    first_of_group = np.unique(label, return_index=True)[1]
    lacking = ~np.isin(np.arange(label.max() + 1), label[lowest])
    sources = np.flatnonzero(lowest)
    sources = np.concatenate([sources, first_of_group[lacking]])
    # from a source joined to every lowest pipe, up the flow: an edge from each pipe to those flowing into it
    up_rows = np.concatenate([above, np.full(sources.size, size)])
    up_cols = np.concatenate([below, sources])
    upward = coo_matrix((np.ones(up_rows.size), (up_rows, up_cols)), shape=(size + 1, size + 1)).tocsr()
    steps = shortest_path(upward, directed=True, unweighted=True, indices=size)
    group[rows] = label
    distance[rows] = np.where(np.isfinite(steps[:size]), steps[:size] - 1, 0).astype(np.intp)
    return group, distance


def unit_costs(size_m: Array, settings: RenewalSettings) -> Array:
    """Cost per metre of each size [m] from ``settings.costs``: the row of the same diameter or the
    next larger one; NaN beyond the last row, for an unknown size, or without a table.

    >>> settings = RenewalSettings(costs=((0.3, 400.0), (0.45, 520.0)))
    >>> unit_costs(np.array([0.3, 0.375, 0.45, 0.6, np.nan]), settings).tolist()
    [400.0, 520.0, 520.0, nan, nan]
    """
    if not settings.costs:
        return np.full(size_m.shape, np.nan)
    sizes, costs = (np.array(column, dtype=float) for column in zip(*settings.costs, strict=True))
    row = np.searchsorted(sizes, np.nan_to_num(size_m, nan=np.inf) - 1e-9, side="left")  # 1e-9 m: noise of unit conversion
    return np.where(row < sizes.size, costs[np.minimum(row, sizes.size - 1)], np.nan)


def _size_steps(height: Array, new_size: Array, new_slope: Array, settings: RenewalSettings) -> pa.Array:
    """``300 -> 450`` per pipe (sizes in the output's unit), ``300 at 0.95 %`` when re-laid, ``300 -> relief`` else."""
    units = settings.units
    decimals = DECIMALS[units.unit("size")]
    before, after = number(units.convert(height, "size"), decimals), number(units.convert(new_size, "size"), decimals)
    resized = join(before, " \u2192 ", after)
    relaid = join(before, " at ", percent(new_slope))
    return pc.coalesce(resized, relaid, join(before, " \u2192 relief"), "? \u2192 relief")


def build_schemes(
    member: Mask, *, upstream: Index, downstream: Index, pipe_ids: NDArray[np.object_], length: Array, height: Array, q_design: Array,
    new_size: Array, new_slope: Array, risk: Array, risk_driver: NDArray[np.object_] | pd.Categorical, settings: RenewalSettings,
) -> Schemes:  # fmt: skip
    """The schemes of the pipes ``member`` (those with a capacity remedy) and their table (SI)."""
    count = member.size
    group, distance = group_pipes(member, upstream=upstream, downstream=downstream)
    rows = np.flatnonzero(group >= 0)
    if rows.size == 0:
        empty = pd.DataFrame({name: pd.Series(dtype=float if name in ("length_m", "q_outlet", "cost", "max_risk") else object) for name in SCHEME_COLUMNS})
        return Schemes(np.full(count, -1, dtype=np.intp), np.full(count, "", dtype=object), np.zeros(count, dtype=np.intp), empty)
    groups = int(group.max()) + 1
    length_known = np.nan_to_num(length[rows], nan=0.0)
    total_length = np.bincount(group[rows], weights=length_known, minlength=groups)
    cost = length[rows] * unit_costs(np.where(np.isfinite(new_size[rows]), new_size[rows], height[rows]), settings)
    unpriced = np.bincount(group[rows], weights=np.isnan(cost), minlength=groups) > 0
    total_cost = np.where(unpriced, np.nan, np.bincount(group[rows], weights=np.nan_to_num(cost), minlength=groups))
    pipe_risk = risk[rows]
    max_risk = np.full(groups, np.nan)
    np.fmax.at(max_risk, group[rows], pipe_risk)
    # within a scheme: downstream first, then the larger flow, then the input order
    order_in = np.lexsort((rows, -np.nan_to_num(q_design[rows], nan=-np.inf), distance[rows], group[rows]))
    ranked_rows = rows[order_in]
    starts = np.r_[0, np.flatnonzero(np.diff(group[ranked_rows])) + 1]
    first = ranked_rows[starts]  # the downstream pipe of each scheme, groups in label order
    # the schemes' order: greatest risk first (unknown last), then longest, then the order of their first pipe
    numbering = np.lexsort((first, -total_length, np.where(np.isnan(max_risk), np.inf, -max_risk)))
    number_of = np.empty(groups, dtype=np.intp)
    number_of[numbering] = np.arange(groups)
    width = max(3, len(str(groups)))
    scheme_ids = np.array([f"S{place + 1:0{width}d}" for place in range(groups)] + [""], dtype=object)  # one id per scheme
    number = np.full(count, -1, dtype=np.intp)
    number[rows] = number_of[group[rows]]
    position = np.zeros(count, dtype=np.intp)
    position[ranked_rows] = np.arange(ranked_rows.size) - np.repeat(starts, np.diff(np.r_[starts, ranked_rows.size])) + 1
    riskiest = _riskiest(group[rows], pipe_risk, rows, groups)
    steps = _size_steps(height[ranked_rows], new_size[ranked_rows], new_slope[ranked_rows], settings)
    offsets = pa.array(np.r_[starts, ranked_rows.size].astype(np.int32))  # each scheme's pipes, downstream first, in label order
    joined = {name: objects(pc.binary_join(pa.ListArray.from_arrays(offsets, values), separator))
              for name, values, separator in (("pipe_ids", pa.array(pipe_ids[ranked_rows].astype(str), pa.string()), ";"), ("sizes", steps, "; "))}  # fmt: skip
    table = pd.DataFrame(
        {
            "scheme_id": scheme_ids[number_of],
            "pipes": np.bincount(group[rows], minlength=groups),
            "first_pipe": pipe_ids[first].astype(object),
            "pipe_ids": joined["pipe_ids"],
            "length_m": total_length,
            "sizes": joined["sizes"],
            "q_outlet": q_design[first],
            "cost": total_cost,
            "currency": settings.currency if settings.costs else "",
            "max_risk": max_risk,
            "risk_driver": np.where(riskiest >= 0, risk_driver[np.maximum(riskiest, 0)], "").astype(object),
        }
    ).iloc[numbering].reset_index(drop=True)
    return Schemes(number, labels_from(np.where(number >= 0, number, groups), scheme_ids), position, table)


def _riskiest(group: Index, risk: Array, rows: Index, groups: int) -> Index:
    """Per group, the pipe (index over all pipes) of greatest known risk; -1 where none is scored."""
    order = np.lexsort((rows, np.where(np.isnan(risk), np.inf, -risk), group))
    first = order[np.unique(group[order], return_index=True)[1]]
    out = np.full(groups, -1, dtype=np.intp)
    out[group[first]] = np.where(np.isnan(risk[first]), -1, rows[first])
    return out
