"""Unit names and their factors to SI; the only place where a unit is converted.

Two quantities are read from a register:

* ``length``: sizes (diameter, height, width), levels (inverts, rim) and depths, to metres;
* ``flow``: design flows and inflows, to cubic metres per second.

The US customary units are defined exactly in terms of SI:

* 1 ft = 0.3048 m and 1 in = 0.0254 m (international yard and pound agreement, 1959);
* 1 US liquid gallon = 231 in^3 = 3.785411784 L.

Source: NIST Special Publication 811 (2008), Guide for the Use of the International System of
Units, appendix B.

Unit names are matched without regard to case and surrounding spaces (``"MGD"`` = ``"mgd"``).

>>> float(to_si(300.0, "mm", quantity="length"))
0.3
>>> round(float(to_si(1.0, "cfs", quantity="flow")), 9)
0.028316847
"""

from __future__ import annotations

from collections.abc import Mapping
from types import MappingProxyType

import numpy as np
import numpy.typing as npt

from audit.errors import ConfigError

FOOT_M = 0.3048  # exact, NIST SP 811 appendix B
INCH_M = 0.0254  # exact, NIST SP 811 appendix B
US_GALLON_M3 = 3.785411784e-3  # exact, 231 in^3, NIST SP 811 appendix B
SECONDS_PER_DAY = 86_400.0

LENGTH_FACTORS: Mapping[str, float] = MappingProxyType(
    {
        "m": 1.0,
        "mm": 1.0e-3,
        "ft": FOOT_M,
        "in": INCH_M,
    }
)
"""Metres per unit of length [m/unit]."""

FLOW_FACTORS: Mapping[str, float] = MappingProxyType(
    {
        "m3/s": 1.0,
        "l/s": 1.0e-3,
        "cfs": FOOT_M**3,
        "gpm": US_GALLON_M3 / 60.0,
        "mgd": US_GALLON_M3 * 1.0e6 / SECONDS_PER_DAY,
    }
)
"""Cubic metres per second per unit of flow [(m^3/s)/unit]; ``gpm`` and ``mgd`` are US gallons."""

FACTORS: Mapping[str, Mapping[str, float]] = MappingProxyType({"length": LENGTH_FACTORS, "flow": FLOW_FACTORS})
"""Factor table per quantity."""

SPELLING: Mapping[str, str] = MappingProxyType(
    {name: name for name in (*LENGTH_FACTORS, *FLOW_FACTORS)} | {"mgd": "MGD"}
)
"""How each unit is written in messages and docs."""


def normalise_unit(unit: str) -> str:
    """Return the table key of a unit name: lower case, surrounding spaces removed.

    >>> normalise_unit(" MGD ")
    'mgd'
    """
    return unit.strip().lower()


def factor(unit: str, *, quantity: str) -> float:
    """SI factor of one unit.

    Parameters
    ----------
    unit : unit name as written in the config, e.g. ``"mm"`` or ``"MGD"``
    quantity : ``"length"`` or ``"flow"``

    Returns
    -------
    SI units per given unit [m/unit or (m^3/s)/unit]

    Raises
    ------
    ConfigError
        When the quantity or the unit is not known; the message lists the accepted units.
    """
    if quantity not in FACTORS:
        raise ConfigError(f"unknown quantity {quantity!r}; expected one of {', '.join(FACTORS)}")
    table = FACTORS[quantity]
    key = normalise_unit(unit)
    if key not in table:
        accepted = ", ".join(SPELLING[name] for name in table)
        raise ConfigError(f"unknown {quantity} unit {unit!r}; expected one of {accepted}")
    return table[key]


def to_si(
    values: npt.ArrayLike,
    unit: str,
    *,
    quantity: str,
) -> npt.NDArray[np.float64]:
    r"""Convert values given in ``unit`` to SI.

    .. math:: x_{SI} = f_{unit} \, x

    Parameters
    ----------
    values : numbers in ``unit``; NaN stays NaN
    unit : unit name, one of the keys of ``LENGTH_FACTORS`` or ``FLOW_FACTORS``
    quantity : ``"length"`` (to [m]) or ``"flow"`` (to [m^3/s])

    Returns
    -------
    the values in SI [m or m^3/s], as a float array of the same shape

    References
    ----------
    .. [1] NIST Special Publication 811 (2008), appendix B.

    >>> to_si([1.0, 12.0], "in", quantity="length").round(4).tolist()
    [0.0254, 0.3048]
    """
    return np.asarray(values, dtype=float) * factor(unit, quantity=quantity)
