"""Words with numbers for whole columns at once: amounts in the output's units, percentages, joins.

Numbers that vary continuously (a flow, a slope) are written by Arrow for a whole column in one
cast; numbers from a short list (pipe sizes) once per distinct value and then looked up. Pieces
are joined row by row in one Arrow call; a row is null where any of its pieces is.
"""

from __future__ import annotations

import numpy as np
import pyarrow as pa
import pyarrow.compute as pc
from numpy.typing import ArrayLike, NDArray

from audit.units import UnitSystem

#: Decimals of an amount by the unit it is written in (trailing zeros are dropped).
DECIMALS = {"mm": 0, "in": 1, "m": 1, "ft": 1, "l/s": 1, "cfs": 2, "m/s": 2, "ft/s": 2, "Pa": 2, "psf": 3}


def number(values: ArrayLike, decimals: int) -> pa.Array:
    """Numbers rounded to ``decimals`` as their shortest text (``0.3``, ``450``); null where NaN.

    >>> number(np.array([450.0, 0.2999, -0.0001, np.nan]), 2).to_pylist()
    ['450', '0.3', '0', None]
    """
    values = np.round(np.asarray(values, dtype=float), decimals) + 0.0  # + 0.0: no negative zero
    return pc.cast(pa.array(values, from_pandas=True), pa.string())


def few(values: ArrayLike, quantity: str, units: UnitSystem, *, with_unit: bool = True) -> pa.Array:
    """Like :func:`amount` for values drawn from a short list (sizes): each distinct value is written once.

    >>> from audit.units import US
    >>> few(np.array([0.3, 0.45, 0.3, np.nan]), "size", US).to_pylist(), few(np.array([0.3]), "size", US, with_unit=False).to_pylist()
    (['11.8 in', '17.7 in', '11.8 in', None], ['11.8'])
    """
    values = np.asarray(values, dtype=float)
    distinct, which = np.unique(values, return_inverse=True)  # NaN sorts last and stays NaN
    converted = units.convert(distinct, quantity)
    text = amount(distinct, quantity, units) if with_unit else number(converted, DECIMALS.get(units.unit(quantity), 2))
    return text.take(pa.array(which.ravel()))


def amount(values: ArrayLike, quantity: str, units: UnitSystem) -> pa.Array:
    """SI ``values`` of ``quantity`` in ``units`` with the unit after a space: ``450 mm``, ``2.5 cfs``."""
    unit = units.unit(quantity)
    return join(number(units.convert(values, quantity), DECIMALS.get(unit, 2)), f" {unit}")


def percent(slope: ArrayLike) -> pa.Array:
    """Slopes [m/m] as percentages to three decimals: ``0.45 %``.

    >>> percent([0.0045, 0.0123456]).to_pylist()
    ['0.45 %', '1.235 %']
    """
    return join(number(100.0 * np.asarray(slope, dtype=float), 3), " %")


def join(*parts: pa.Array | str) -> pa.Array:
    """Pieces joined row by row with nothing between them; null where any piece is null."""
    return pc.binary_join_element_wise(*parts, "")


def scatter(values: ArrayLike, rows: NDArray[np.intp], count: int) -> NDArray[np.float64]:
    """``values`` of the pipes ``rows`` spread over ``count`` pipes, NaN elsewhere."""
    out = np.full(count, np.nan)
    out[rows] = values
    return out


def objects(text: pa.Array) -> NDArray[np.object_]:
    """A text column as Python strings, ``""`` where null."""
    return np.asarray(pc.fill_null(text, "").to_numpy(zero_copy_only=False), dtype=object)
