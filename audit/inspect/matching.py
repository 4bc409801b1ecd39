"""Which fields join the pipes to the manholes, decided by how many pipe ends name a manhole.

A field name says little: registers keep an old numbering beside a new one, and ``FROM_MH``
may hold either. So every candidate pair (a node field of the pipes, an id field of the
manholes) gets its match rate, the share of pipes whose value is one of the manhole ids, and
the rate decides; names only order the candidates and break ties. Which end is upstream comes
from the names (``US_``, ``FROM``, ``1`` ...), as no value can say it.

Candidates are compared on a random sample of at most ``SAMPLE`` pipes; the rates of
the chosen fields, which the user reads, are counted over every pipe. Each rate is one
``pyarrow.compute.is_in`` over the column.

Values shared by many pipe ends that name no manhole (an end-of-line, junction or lift-station
code) are placeholders: the starter config suggests them for ``[network] placeholder_ids``.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import pyarrow as pa
import pyarrow.compute as pc

from audit.inspect.profiling import LayerValues, sample

MIN_RATE = 0.2
"""Below this share of pipes naming a manhole, a pair of fields is no join at all (a rule of this project)."""
PLACEHOLDER_USES = 5
"""A value naming no manhole but used by this many pipe ends or more is a placeholder: a manhole
rarely joins more than four pipes (common practice, no source)."""


@dataclass(frozen=True)
class NodeMatch:
    """The node fields chosen, their rates and the placeholders found.

    ``rate`` maps (pipe field, manhole field) to the share of pipes whose value names a manhole,
    for every pair compared (sampled) and, exactly, for the chosen ones. ``reasons`` maps
    ``from_node``, ``to_node`` and ``id`` to the sentence the user reads.
    """

    from_node: str | None
    to_node: str | None
    manhole_id: str | None
    rate: dict[tuple[str, str], float]
    reasons: dict[str, str]
    placeholders: tuple[tuple[str, int], ...]


def _rate(values: pa.ChunkedArray, ids: pa.Array) -> float:
    """Share of all ``values`` (nulls count as no match) that are one of ``ids``."""
    found = pc.sum(pc.is_in(values, value_set=ids)).as_py() or 0
    return found / len(values) if len(values) else 0.0


def _percent(share: float) -> str:
    return f"{100 * share:.0f} %"


def pair_rates(pipes: LayerValues, manholes: LayerValues, fields: Sequence[str], ids: Sequence[str]) -> dict[tuple[str, str], float]:
    """Sampled match rate of every pipe field in ``fields`` against every manhole field in ``ids``."""
    samples = {name: sample(pipes.keys(name)) for name in fields}
    known = {name: pc.unique(manholes.keys(name).combine_chunks()).drop_null() for name in ids}
    return {(field, name): _rate(samples[field], known[name]) for field in fields for name in ids}


def _best(rates: dict[tuple[str, str], float], ups: Sequence[str], downs: Sequence[str], others: Sequence[str],
          ids: Sequence[str]) -> tuple[str, str, str] | None:  # fmt: skip
    """(from, to, id) with the highest rates, whole percents compared; names rank the ties."""
    starts, ends = [*ups, *others], [*downs, *others]
    best: tuple[tuple[int, int], tuple[str, str, str]] | None = None
    for rank_id, name in enumerate(ids):
        for rank_from, start in enumerate(starts):
            for rank_to, end in enumerate(ends):
                if start == end:
                    continue
                score = round(100 * rates[(start, name)]) + round(100 * rates[(end, name)])
                key = (score, -(rank_from + rank_to + rank_id))
                if best is None or key > best[0]:
                    best = (key, (start, end, name))
    if best is None or best[0][0] < 2 * 100 * MIN_RATE:
        return None
    return best[1]


def _described(layer: LayerValues, field: str, name: str, rate: float, *, what: str = "pipes") -> str:
    """``94 % of FROM_MH values name a manhole in ID``: the rate over the features that have a value."""
    values = layer.fields[field].filled
    share = rate * layer.count / values if values else 0.0
    empty = layer.count - values
    return f"{_percent(share)} of {field} values name a manhole in {name}" + (f" ({empty} {what} have no {field})" if empty else "")


def _losers(rates: dict[tuple[str, str], float], chosen: str, side: Sequence[str], name: str) -> str:
    others = [f"{field} {_percent(rates[(field, name)])}" for field in side if field != chosen and (field, name) in rates]
    return f"; other candidates: {', '.join(others)}" if others else ""


def _other_ids(rates: dict[tuple[str, str], float], chosen: str, ids: Sequence[str], start: str) -> str:
    others = [f"{name} {_percent(rates[(start, name)])}" for name in ids if name != chosen]
    return f"; other id candidates (named by {start}): {', '.join(others)}" if others else ""


def placeholders(pipes: LayerValues, ends: Sequence[str], ids: pa.Array | None) -> tuple[tuple[str, int], ...]:
    """Values of the pipe-end fields ``ends`` that name no manhole in ``ids`` and are used by
    ``PLACEHOLDER_USES`` pipe ends or more, most used first (``ids`` None: no manhole layer)."""
    if not ends:
        return ()
    values = pa.chunked_array([chunk for name in ends for chunk in pipes.keys(name).chunks], type=pa.string())
    if ids is not None:
        values = values.filter(pc.invert(pc.is_in(values, value_set=ids)))
    counted = pc.value_counts(values.drop_null())
    pairs = zip(counted.field("values").to_pylist(), counted.field("counts").to_pylist(), strict=True)
    return tuple(sorted(((str(v), int(c)) for v, c in pairs if c >= PLACEHOLDER_USES), key=lambda pair: (-pair[1], pair[0])))


def _known(manholes: LayerValues, name: str) -> pa.Array:
    """The distinct ids of one manhole field."""
    return pc.unique(manholes.keys(name).combine_chunks()).drop_null()


def match_nodes(pipes: LayerValues, manholes: LayerValues | None, *, ups: Sequence[str], downs: Sequence[str],
                others: Sequence[str], ids: Sequence[str]) -> NodeMatch:  # fmt: skip
    """Choose the from-node and to-node fields of the pipes and the id field of the manholes.

    Parameters
    ----------
    pipes, manholes : the columns read from the two layers (manholes None: no manhole layer)
    ups, downs : pipe fields named like the upstream or the downstream node, best name first
    others : pipe fields that may hold node ids but whose names do not say which end
    ids : manhole fields that may be the id, best name first

    Returns
    -------
    the chosen fields (None where nothing fits), their rates and reasons, and the placeholders
    """
    start, end = (ups[0] if ups else None), (downs[0] if downs else None)
    if manholes is None or not ids:
        lacking = "no manhole layer" if manholes is None else "no manhole field looks like an id"
        reasons = {key: f"named like the {end_name} node; {lacking} to count matches against"
                   for key, end_name in (("from_node", "upstream"), ("to_node", "downstream"))}  # fmt: skip
        return NodeMatch(start, end, None, {}, reasons, placeholders(pipes, [f for f in (start, end) if f], None))
    rates = pair_rates(pipes, manholes, list(dict.fromkeys([*ups, *downs, *others])), ids)
    chosen = _best(rates, ups, downs, others, ids)
    if chosen is None:
        top = max(rates.items(), key=lambda item: item[1], default=None)
        best = f"; the best pair, {top[0][0]} in {top[0][1]}, matches {_percent(top[1])}" if top else ""
        reasons = dict.fromkeys(("from_node", "to_node", "id"), f"named like it, but no pair of fields joins pipes to manholes{best}")
        return NodeMatch(start, end, ids[0], rates, reasons, placeholders(pipes, [f for f in (start, end) if f], _known(manholes, ids[0])))
    start, end, name = chosen
    known = _known(manholes, name)
    for field in (start, end):
        rates[(field, name)] = _rate(pipes.keys(field), known)
    order = "" if start in ups or end in downs else "; the names do not say which end is upstream: the first field is taken"
    reasons = {
        "from_node": _described(pipes, start, name, rates[(start, name)]) + _losers(rates, start, ups, name) + order,
        "to_node": _described(pipes, end, name, rates[(end, name)]) + _losers(rates, end, downs, name) + order,
        "id": f"{_percent((rates[(start, name)] + rates[(end, name)]) / 2)} of the pipe ends ({start}, {end}) name one of its values"
              + _other_ids(rates, name, ids, start),
    }  # fmt: skip
    return NodeMatch(start, end, name, rates, reasons, placeholders(pipes, [start, end], known))


def match_outlets(areas: LayerValues, manholes: LayerValues, fields: Sequence[str], name: str) -> tuple[str, str] | None:
    """The field of ``areas`` (catchments) whose values name manholes in ``name`` most often, and why.

    None when no candidate reaches ``MIN_RATE``: the reader then joins each area to its nearest node.
    """
    rates = pair_rates(areas, manholes, fields, [name])
    if not rates:
        return None
    (best, _), rate = max(rates.items(), key=lambda item: item[1])  # the first (best name) among equals
    if rate < MIN_RATE:
        return None
    rates[(best, name)] = _rate(areas.keys(best), _known(manholes, name))
    return best, _described(areas, best, name, rates[(best, name)], what="areas") + _losers(rates, best, fields, name)
