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


def parse_network(check: ConfigProblems, data: object) -> NetworkOptions:
    """``[network]`` as :class:`NetworkOptions`; every problem goes to ``check``."""
    table = check.table(data, "network", tuple(NetworkOptions.__dataclass_fields__))
    return NetworkOptions(
        snap_tolerance_m=check.number(table, "snap_tolerance_m", "network", NetworkOptions.snap_tolerance_m),
        direction=check.choice(table, "direction", "network", DIRECTIONS),
        length_tolerance_ratio=check.number(
            table, "length_tolerance_ratio", "network", NetworkOptions.length_tolerance_ratio
        ),
        length_tolerance_m=check.number(table, "length_tolerance_m", "network", NetworkOptions.length_tolerance_m),
    )
