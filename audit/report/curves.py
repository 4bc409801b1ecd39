r"""The part-full curve of a section: relative discharge against relative depth.

For a constant Manning n the ratio of part-full to full-bore discharge depends on the shape
alone:

.. math:: \frac{Q}{Q_f} = \frac{A}{A_f} \left(\frac{R}{R_f}\right)^{2/3}, \qquad R = A / P

with :math:`A, P` the flow area and wetted perimeter at relative depth :math:`y/H` and
:math:`A_f, P_f` their full-bore values (``audit.sections``). It is computed once per shape, never
per pipe. With Colebrook-White the curve moves slightly with size and roughness; the report draws
the Manning curve as the reference shape.

References
----------
.. [1] Chow, V. T. (1959). Open-Channel Hydraulics. McGraw-Hill, ch. 6 (conduits flowing partly
   full).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
from numpy.typing import ArrayLike, NDArray

from audit.hydraulics import PipeSections, section_names

Array = NDArray[np.float64]

#: The width-to-height ratio of shapes whose proportions are fixed by their name.
FIXED_WIDTH_RATIO: dict[str, float] = {"circular": 1.0, "egg": 2.0 / 3.0}


def part_full_curve(shape: str, *, width_ratio: float = 1.0, points: int = 401) -> tuple[Array, Array]:
    r"""Relative depth :math:`y/H` [-] and relative discharge :math:`Q/Q_f` [-] of a section.

    Parameters
    ----------
    shape : a registered section name (``audit.hydraulics.section_names``)
    width_ratio : width over height of the section [-]
    points : number of relative depths from 0 to 1

    Returns
    -------
    depths from 0 to 1 and the Manning discharge ratio at each

    Examples
    --------
    >>> depth, ratio = part_full_curve("circular", points=3)  # empty, half full, full
    >>> [round(float(value), 3) for value in ratio]
    [0.0, 0.5, 1.0]
    """
    eta = np.linspace(0.0, 1.0, points)
    sections = PipeSections.from_names(np.full(points, shape), np.ones(points), np.full(points, width_ratio))
    area, perimeter, _ = sections.elements(eta)
    full_area, full_perimeter = sections.full()
    with np.errstate(invalid="ignore", divide="ignore"):
        radius_ratio = np.where(perimeter > 0, (area / perimeter) / (full_area / full_perimeter), 0.0)
    return eta, area / full_area * radius_ratio ** (2.0 / 3.0)


def report_curves(shape: ArrayLike, height: ArrayLike, width: ArrayLike, *, points: int = 401) -> dict[str, tuple[Array, Array]]:
    """The part-full curve of every shape among the pipes, by a label naming it.

    A shape whose proportions vary (a box, an open channel) is drawn at the median
    width-to-height ratio of its pipes, and the label says which. Pipes of an unknown shape or
    size add no curve.

    Examples
    --------
    >>> sorted(report_curves(["rectangular", "rectangular", "circular"], [1.0, 1.0, 0.3], [1.5, 2.5, 0.3]))
    ['circular', 'rectangular, B/H 2']
    """
    names = np.asarray(shape, dtype=object)
    with np.errstate(invalid="ignore", divide="ignore"):
        ratio = np.asarray(width, dtype=float) / np.asarray(height, dtype=float)
    curves = {}
    present = pd.unique(pd.Series(names, dtype=object))  # the few distinct shapes, by one hash
    for name in sorted({str(value) for value in present if isinstance(value, str) and value in section_names()}):
        fixed = FIXED_WIDTH_RATIO.get(name)
        usable = ratio[(names == name) & np.isfinite(ratio) & (ratio > 0)]
        if fixed is None and usable.size == 0:
            continue
        width_ratio = fixed if fixed is not None else float(np.median(usable))
        label = name if fixed is not None else f"{name}, B/H {width_ratio:.3g}"
        curves[label] = part_full_curve(name, width_ratio=width_ratio, points=points)
    return curves
