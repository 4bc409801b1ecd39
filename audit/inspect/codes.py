"""Word rules that read a register's shape and kind codes, for ``sewer-audit inspect``.

A code is split into lower-case words (``ForceMain`` -> ``force main``, ``SSMH-2`` -> ``ssmh 2``)
and tried against the rules of one table in order; the first rule whose pattern is found names
the canonical value. Short codes (``FM``, ``PS``, ``OF``) must be whole words, so ``OF`` inside
``ROOF`` is no outfall. A code no rule knows is left to the user. The rules are this project's
own reading of common register practice (common practice, no source); every guess is written
into the starter config as ``check this`` with the word that decided it.
"""

from __future__ import annotations

import re
from collections.abc import Sequence
from dataclasses import dataclass

WordRule = tuple[str, str]
"""(canonical value, regular expression over the code's words)."""

PIPE_KIND_WORDS: tuple[WordRule, ...] = (
    ("abandoned", r"aband|disused|decommission|retired|inactive|removed|out of service|\b(ab|abn|oos)\b"),
    ("rising_main", r"force|rising|pressur|pumped|\b(fm|rm)\b"),
    ("siphon", r"siphon|syphon"),
    ("overflow", r"overflow|spill|\b(cso|sso|ovf)\b"),
    ("private", r"privat|lateral|house connection|service connection|\b(pvt|priv)\b"),
    ("gravity", r"gravity|sanitary|foul|sewer|storm|combined|surface|waste|trunk|interceptor|collector|culvert"
                r"|\b(grav|gr|gs|ss|san|fw|sw|stm|cs|comb|main)\b"),
)  # fmt: skip
"""``[pipes.kinds]``: a private pipe or a lateral before gravity, an abandoned one before all."""

SHAPE_WORDS: tuple[WordRule, ...] = (
    ("trapezoidal", r"trapez|ditch|swale|\b(trap|tz)\b"),
    ("open_rectangular", r"\bopen\b.*\b(rect\w*|box|chan\w*)|\b(rect\w*|box|chan\w*)\b.*\bopen\b|flume"),
    ("egg", r"\begg|ovoid|\b(ov|e)\b"),
    ("rectangular", r"rect|\bbox|square|\b(rcb|sq|r)\b"),
    ("circular", r"circ|round|\b(c|cir|cp|pipe)\b"),
)
"""``[pipes.shapes]``: open sections before closed ones, as an open box is still a box."""

NODE_KIND_WORDS: tuple[WordRule, ...] = (
    ("pump_station", r"pump|lift|\b(ps|ls|sps|pmp|wwps)\b"),
    ("outfall", r"outfall|outlet|discharge|headwall|endwall|\b(of|ofl|out)\b"),
    ("manhole", r"manhole|maintenance hole|access|\b\w*mh\b"),
    ("chamber", r"chamber|junction|vault|valve|meter|inlet|catch|gull|cleanout|clean out|lamphole|rodding|inspection"
                r"|\b(jb|jct|junc|box|cb|co|ri|ic|bend|tee|wye|plug|cap|fitting)\b"),
)  # fmt: skip
"""``[manholes.kinds]``: a pumping station or an outfall before the structure types."""


@dataclass(frozen=True)
class CodeGuess:
    """One code of a field: how many features hold it, its guessed canonical value (None: unknown) and why."""

    code: str
    count: int
    canonical: str | None
    reason: str


def words(code: str) -> str:
    """The code as lower-case words separated by single spaces, padded with one space at each end.

    >>> words("ForceMain"), words("SSMH-2"), words("GRAV_SAN")
    (' force main ', ' ssmh 2 ', ' grav san ')
    """
    split = re.sub(r"(?<=[a-z])(?=[A-Z])|(?<=[A-Za-z])(?=[0-9])|(?<=[0-9])(?=[A-Za-z])", " ", code)
    return " " + " ".join(re.findall(r"[a-z0-9]+", split.lower())) + " "


def read_code(code: str, rules: Sequence[WordRule]) -> tuple[str | None, str]:
    """The canonical value of one code by the first rule that knows it, and the reason.

    >>> read_code("FM", PIPE_KIND_WORDS), read_code("ROOF DRAIN", NODE_KIND_WORDS)
    (('rising_main', "word rule: 'fm'"), (None, 'no word rule knows this code'))
    """
    for canonical, pattern in rules:
        found = re.search(pattern, words(code))
        if found:
            return canonical, f"word rule: '{found.group(0).strip()}'"
    return None, "no word rule knows this code"


def code_table(counts: Sequence[tuple[str, int]], rules: Sequence[WordRule]) -> list[CodeGuess]:
    """Each distinct code with its count and its guess, in the order given (most used first)."""
    return [CodeGuess(code, count, *read_code(code, rules)) for code, count in counts]


def known_share(table: Sequence[CodeGuess], *, features: int) -> float:
    """Share of ``features`` whose code a word rule knows."""
    return sum(row.count for row in table if row.canonical is not None) / features if features else 0.0
