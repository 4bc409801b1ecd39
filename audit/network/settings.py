"""``[network]``: how pipe ends join manholes and which way flow runs, parsed once at config load."""

from __future__ import annotations

from dataclasses import dataclass

from audit.errors import ConfigProblems

DIRECTIONS = ("ids", "digitised", "inverts")
"""Where flow direction comes from: the from/to ids, the digitising order, or the invert levels."""


@dataclass(frozen=True)
class NetworkOptions:
    """``[network]``: how pipe ends join manholes and which way flow runs."""

    snap_tolerance_m: float = 1.0
    direction: str = "ids"
    length_tolerance_ratio: float = 0.05
    length_tolerance_m: float = 0.5
    placeholder_ids: tuple[str, ...] = ()  # node ids that mean "no node" even where a manhole bears them


def parse_network(check: ConfigProblems, data: object) -> NetworkOptions:
    """``[network]`` as :class:`NetworkOptions`; every problem goes to ``check``."""
    table = check.table(data, "network", tuple(NetworkOptions.__dataclass_fields__))
    placeholders = table.get("placeholder_ids", [])
    if not isinstance(placeholders, list) or not all(isinstance(v, str | int) and not isinstance(v, bool) for v in placeholders):
        check.fail("network.placeholder_ids", "an array of node ids (strings or whole numbers)", placeholders)
        placeholders = []
    return NetworkOptions(
        placeholder_ids=tuple(str(value).strip() for value in placeholders),
        snap_tolerance_m=check.number(table, "snap_tolerance_m", "network", NetworkOptions.snap_tolerance_m),
        direction=check.choice(table, "direction", "network", DIRECTIONS),
        length_tolerance_ratio=check.number(
            table, "length_tolerance_ratio", "network", NetworkOptions.length_tolerance_ratio
        ),
        length_tolerance_m=check.number(table, "length_tolerance_m", "network", NetworkOptions.length_tolerance_m),
    )
