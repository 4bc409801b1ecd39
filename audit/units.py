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
from dataclasses import dataclass
from types import MappingProxyType

import numpy as np
import numpy.typing as npt

from audit.errors import ConfigError, ConfigProblems

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

AREA_FACTORS: Mapping[str, float] = MappingProxyType({"ha": 1.0, "ac": 0.40468564224, "m2": 1.0e-4})
"""Hectares per unit of area [ha/unit]: areas are held in hectares, as the rational method takes them."""

FACTORS: Mapping[str, Mapping[str, float]] = MappingProxyType({"length": LENGTH_FACTORS, "flow": FLOW_FACTORS, "area": AREA_FACTORS})
"""Factor table per quantity."""

SPELLING: Mapping[str, str] = MappingProxyType(
    {name: name for name in (*LENGTH_FACTORS, *FLOW_FACTORS, *AREA_FACTORS)} | {"mgd": "MGD"}
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


POUND_FORCE_N = 4.4482216152605  # exact: 0.45359237 kg x 9.80665 m/s^2, NIST SP 811 appendix B
ACRE_M2 = 4046.8564224  # exact for the international acre: 43,560 ft^2, NIST SP 811 appendix B
SQUARE_METRES_PER_HA = 10_000.0


@dataclass(frozen=True)
class UnitSystem:
    """The units every output is written in: ``si`` (metres, l/s, ...) or ``us`` (feet, cfs, ...).

    Values inside the audit are SI (``SI_BASE``); ``convert`` turns them into this system's unit
    of a quantity, ``unit`` names that unit as a reader writes it, and ``suffix`` as an output
    field name carries it (``q_design_l_s``, ``q_design_cfs``).

    >>> US.convert([1.0, 0.3048], "length").round(6).tolist(), US.unit("flow"), US.suffix("velocity")
    ([3.28084, 1.0], 'cfs', 'ft_s')
    >>> SI.convert([0.3], "size").tolist(), SI.unit("size")
    ([300.0], 'mm')
    """

    name: str
    units: Mapping[str, str]

    def unit(self, quantity: str) -> str:
        """The unit of ``quantity`` in this system, as written for a reader (``m/s``, ``ft``)."""
        return self.units[quantity]

    def suffix(self, quantity: str) -> str:
        """The unit as the end of a field name: ``m/s`` -> ``m_s``, ``m2`` stays, ``Pa`` -> ``pa``."""
        return self.units[quantity].lower().replace("/", "_")

    def convert(self, values: npt.ArrayLike, quantity: str) -> npt.NDArray[np.float64]:
        """Values given in the SI base unit of ``quantity`` (``SI_BASE``), in this system's unit."""
        with np.errstate(over="ignore"):  # a value at the edge of floating point (1e308 m) becomes inf, not a warning
            return np.asarray(values, dtype=float) / UNIT_SIZES[quantity][self.units[quantity]]


#: The SI base of each quantity inside the audit, in which ``UnitSystem.convert`` takes values.
SI_BASE: Mapping[str, str] = MappingProxyType(
    {"length": "m", "level": "m", "size": "m", "flow": "m3/s", "velocity": "m/s", "stress": "Pa", "area": "ha", "section": "m2", "time": "min"}
)

#: Size of each unit in the SI base of its quantity [base unit per unit].
UNIT_SIZES: Mapping[str, Mapping[str, float]] = MappingProxyType(
    {
        "length": {"m": 1.0, "ft": FOOT_M, "km": 1000.0, "mi": 5280 * FOOT_M},
        "level": {"m": 1.0, "ft": FOOT_M},
        "size": {"m": 1.0, "mm": 1e-3, "in": INCH_M},
        "flow": {"m3/s": 1.0, "l/s": 1e-3, "cfs": FOOT_M**3, "gpm": US_GALLON_M3 / 60.0, "mgd": US_GALLON_M3 * 1e6 / SECONDS_PER_DAY},
        "velocity": {"m/s": 1.0, "ft/s": FOOT_M},
        "stress": {"Pa": 1.0, "psf": POUND_FORCE_N / FOOT_M**2},
        "area": {"ha": 1.0, "ac": ACRE_M2 / SQUARE_METRES_PER_HA},
        "section": {"m2": 1.0, "ft2": FOOT_M**2},
        "time": {"min": 1.0},
    }
)

SI = UnitSystem("si", MappingProxyType(
    {"length": "m", "level": "m", "size": "mm", "flow": "l/s", "velocity": "m/s", "stress": "Pa", "area": "ha", "section": "m2",
     "time": "min"}))  # fmt: skip
US = UnitSystem("us", MappingProxyType(
    {"length": "ft", "level": "ft", "size": "in", "flow": "cfs", "velocity": "ft/s", "stress": "psf", "area": "ac", "section": "ft2",
     "time": "min"}))  # fmt: skip
SYSTEMS: Mapping[str, UnitSystem] = MappingProxyType({"si": SI, "us": US})
"""The unit systems outputs can be written in, by the name ``[output] units`` takes."""


OUTPUT_KEYS = ("units", "title")
"""Keys of ``[output]``."""


def parse_output(check: ConfigProblems, data: object) -> UnitSystem:
    """``[output]``: ``units = "si"`` (default: metres, millimetres, l/s, m/s, Pa, ha) or ``"us"``
    (feet, inches, cfs, ft/s, lb/ft^2, acres); every problem goes to ``check``."""
    table = check.table(data, "output", OUTPUT_KEYS)
    return SYSTEMS[check.choice(table, "units", "output", tuple(SYSTEMS))]


def parse_title(check: ConfigProblems, data: object) -> str:
    """``[output] title``: the network's name, printed at the top of the report; "" when not given."""
    table = data if isinstance(data, dict) else {}
    title = table.get("title", "")
    if not isinstance(title, str) or len(title) > 200 or any(ord(character) < 32 for character in title):
        check.fail("output.title", "a line of text (up to 200 characters)", title)
        return ""
    return title.strip()
