"""Manhole rules from the hydraulic grade line: flags, a worst severity and reasons per node.

``flooding`` where the water level at the design flows reaches the cover less the freeboard;
``manhole_surcharge`` where it stands above the soffit of the pipe leaving the manhole but
below flooding (the water rises in the shaft). A node without a cover level, or without a water
level, gets neither: its ``flood_state`` says ``not_evaluated``, never safe. Severities come from
``[rules.severity]`` (``MANHOLE_SEVERITY``).
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from audit.rules.settings import MANHOLE_FLAG_CODES, SEVERITY_NONE, SEVERITY_OFF, SEVERITY_ORDER, RuleSettings
from audit.rules.text import concat, fixed, join, pick
from audit.units import SI, UnitSystem


def check_manholes(
    flood_state: np.ndarray, *, level: np.ndarray, rim: np.ndarray, freeboard_m: float, settings: RuleSettings, units: UnitSystem = SI
) -> pd.DataFrame:
    """Flags, worst severity and reasons of every node.

    Parameters
    ----------
    flood_state : per node the flood screening label (``below_soffit``, ``surcharged``,
        ``flooding``, ``not_evaluated``; ``audit.grade_line.FloodState`` labels)
    level, rim : water level and cover level per node [m]; NaN where unknown
    freeboard_m : the freeboard flooding is judged with [m]
    settings : the severities
    units : the unit system of the reasons

    Returns
    -------
    DataFrame with ``flags`` (codes joined by ";"), ``severity`` (``none`` when no flag) and
    ``reasons``, one row per node

    Examples
    --------
    >>> table = check_manholes(np.array(["flooding", "surcharged", "below_soffit"]), level=np.array([10.4, 9.2, 8.0]),
    ...                        rim=np.array([10.0, 10.0, 10.0]), freeboard_m=0.0, settings=RuleSettings())
    >>> table.values.tolist()
    [['flooding', 'high', 'the grade line needs 10.40 m, 0.40 m above the cover 10.00 m: the water comes out here'], ['manhole_surcharge', 'low', 'water level 9.20 m stands in the shaft, 0.80 m below the cover'], ['', 'none', '']]
    """
    state = np.asarray(flood_state, dtype=object)
    count = state.size
    unit = units.unit("length")
    digits = 2 if unit == "m" else 1
    shown_level, shown_rim = units.convert(level, "length"), units.convert(rim, "length")
    above = units.convert(level - rim, "length")
    floods, shaft = state == "flooding", state == "surcharged"
    margin = f" within the freeboard {float(units.convert(freeboard_m, 'length')):.{digits}f} {unit} of it" if freeboard_m > 0 else ""
    flood_words = concat(
        "the grade line needs ", fixed(shown_level[floods], digits), f" {unit}, ", fixed(np.abs(above[floods]), digits), f" {unit} ",
        pick(("below", "above"), above[floods] >= 0), " the cover ", fixed(shown_rim[floods], digits), f" {unit}",
        pick((margin, ": the water comes out here"), above[floods] >= 0),
    )  # fmt: skip
    shaft_words = concat("water level ", fixed(shown_level[shaft], digits), f" {unit} stands in the shaft, ", fixed(-above[shaft], digits), f" {unit} below the cover")
    hits = {"flooding": (floods, flood_words), "manhole_surcharge": (shaft, shaft_words)}
    live = {code: hits[code] for code in MANHOLE_FLAG_CODES if settings.severity[code] != SEVERITY_OFF}
    rank = np.zeros(count, dtype=np.int8)
    for code, (mask, _) in live.items():
        rank = np.maximum(rank, mask * np.int8(SEVERITY_ORDER.index(settings.severity[code]) + 1))
    return pd.DataFrame(
        {
            "flags": pd.array(join([(mask, code) for code, (mask, _) in live.items()], sep=";", count=count), dtype="str"),
            "severity": pd.array(pick((SEVERITY_NONE, *SEVERITY_ORDER), rank), dtype="str"),
            "reasons": pd.array(join(list(live.values()), sep="; ", count=count), dtype="str"),
        }
    )
