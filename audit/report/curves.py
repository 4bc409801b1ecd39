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
from numpy.typing import NDArray

from audit.hydraulics import Circular, Egg, Section

Array = NDArray[np.float64]

#: Shapes whose curve the report draws, with the width-to-height ratio of each.
CURVE_SHAPES: dict[str, tuple[Section, float]] = {"circular": (Circular(), 1.0), "egg": (Egg(), 2.0 / 3.0)}


def part_full_curve(section: Section, *, width_ratio: float = 1.0, points: int = 401) -> tuple[Array, Array]:
    r"""Relative depth :math:`y/H` [-] and relative discharge :math:`Q/Q_f` [-] of a section.

    Parameters
    ----------
    section : the section shape (``audit.sections``)
    width_ratio : width over height of the section [-]
    points : number of relative depths from 0 to 1

    Returns
    -------
    depths from 0 to 1 and the Manning discharge ratio at each

    Examples
    --------
    >>> depth, ratio = part_full_curve(Circular(), points=3)  # empty, half full, full
    >>> [round(float(value), 3) for value in ratio]
    [0.0, 0.5, 1.0]
    """
    eta = np.linspace(0.0, 1.0, points)
    unit = np.ones_like(eta)
    area, perimeter, _ = section.elements(eta, unit, unit * width_ratio)
    full_area, full_perimeter = section.full(np.array(1.0), np.array(width_ratio))
    with np.errstate(invalid="ignore", divide="ignore"):
        radius_ratio = np.where(perimeter > 0, (area / perimeter) / (full_area / full_perimeter), 0.0)
    return eta, area / full_area * radius_ratio ** (2.0 / 3.0)


def report_curves(*, points: int = 401) -> dict[str, tuple[Array, Array]]:
    """The part-full curve of every shape in ``CURVE_SHAPES``, by name."""
    return {name: part_full_curve(section, width_ratio=ratio, points=points) for name, (section, ratio) in CURVE_SHAPES.items()}
