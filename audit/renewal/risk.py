r"""Likelihood and consequence of failure on 1 to 5 scales, and risk = likelihood x consequence.

Each part of a score is itself 1 to 5 (docs/renewal.md gives the bands):

* likelihood: ``hydraulic`` (the load ratio's band; 5 where the node below floods; at least the
  band of a load ratio of 1 where backwater fills the pipe), ``structural`` and ``service``
  (the grades of the condition table), ``age`` (age over the material's service life, in bands);
* consequence: ``critical_area`` (the configured consequence of the worst area the pipe crosses
  or lies within the buffer of), ``population`` (served upstream), ``size`` (internal height),
  ``depth`` (the greater depth from cover to invert).

A part is weighted, :math:`\lceil w_i s_i \rceil` with :math:`0 \le w_i \le 1` (0 leaves it out),
and the score is the **largest** weighted part:

.. math:: L = \max_i \lceil w_i\, s_i \rceil, \qquad C = \max_j \lceil w_j\, c_j \rceil, \qquad R = L\,C

The maximum, not a mean: a pipe fails by whichever mode comes first, so a collapsed pipe that is
young and far from full is still likely to fail, and a mean would hide it behind its good parts;
likewise one grave consequence (a railway above) is not softened by a small population. Unknown
parts are left out; where every part is unknown the score is NaN and the reason is said. The
part that gives the maximum is the score's driver (on a tie, the first in the order above).

The 1 to 5 scales, their product and the matrix of the two are common practice in asset
management (no source); the bands are the user's to set.

References
----------
.. [1] ISO 31000:2018, Risk management: guidelines (risk described by the likelihood and the
   consequences of an event; from memory).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
import pandas as pd
import shapely
from numpy.typing import NDArray

from audit.labels import labels_from
from audit.renewal.inputs import CriticalAreas
from audit.renewal.settings import CONSEQUENCE_PARTS, LIKELIHOOD_PARTS, RenewalSettings

Array = NDArray[np.float64]
Mask = NDArray[np.bool_]

#: How each likelihood driver is written; the hydraulic part says which of its causes gave it.
HYDRAULIC_WORDS = ("flooding downstream", "load ratio", "backwater")
LIKELIHOOD_WORDS = {"structural": "structural grade", "service": "service grade", "age": "age"}
CONSEQUENCE_WORDS = {"population": "population", "size": "size", "depth": "depth", "flooding": "flooding at its upstream manhole"}

#: The consequence of a pipe whose upstream manhole floods at the design flows: sewage on the
#: street and in property is the gravest outcome a screening can show (common practice, no source).
FLOODING_CONSEQUENCE = 5.0
CRITICAL_WORDS = "critical area: "
_NO_LIKELIHOOD = "no load ratio, install year or condition grade for the likelihood"
_NO_CONSEQUENCE = "no population, size, depth, flooding or critical area for the consequence"
#: Why a pipe is not scored: 1 no likelihood, 2 no consequence, 3 neither.
UNSCORED_WORDS = ("", f"risk not scored: {_NO_LIKELIHOOD}", f"risk not scored: {_NO_CONSEQUENCE}", f"risk not scored: {_NO_LIKELIHOOD}; {_NO_CONSEQUENCE}")


@dataclass(frozen=True)
class Scores:
    """Per pipe: likelihood, consequence (1 to 5) and risk (1 to 25), NaN where not scored; the
    words of each driver as labels (``audit.labels``; "" where not scored); why a pipe is not scored, as an index into
    ``UNSCORED_WORDS`` (0 where it is scored)."""

    likelihood: Array
    consequence: Array
    risk: Array
    likelihood_driver: pd.Categorical
    consequence_driver: pd.Categorical
    risk_driver: pd.Categorical
    unscored: NDArray[np.intp]


def combine(parts: Sequence[Array], weights: Sequence[float]) -> tuple[Array, NDArray[np.intp]]:
    r"""The largest weighted part :math:`\lceil w_i s_i \rceil` per pipe, and which part gives it
    (the first on a tie; -1 where every part is unknown or weighted 0).

    >>> score, which = combine([np.array([3.0, np.nan, np.nan]), np.array([5.0, 2.0, np.nan])], [1.0, 0.5])
    >>> score.tolist(), which.tolist()
    ([3.0, 1.0, nan], [0, 1, -1])
    """
    # one small integer per pipe and part, score x 16 + (15 - part): the largest wins, and on a tie the earlier part
    best = np.zeros(parts[0].shape)
    for place, (part, weight) in enumerate(zip(parts, weights, strict=True)):  # a loop per part, over all pipes
        if weight <= 0:
            continue
        weighted = part if weight == 1.0 else np.ceil(weight * part - 1e-9)  # the parts are whole scores already
        np.fmax(best, weighted * 16.0 + (15 - place), out=best)  # an unknown part (NaN) leaves the best as it is
    known = best > 0
    whole = best.astype(np.int64)
    return np.where(known, whole // 16, np.nan), np.where(known, 15 - whole % 16, -1).astype(np.intp)


def hydraulic_part(load_ratio: Array, *, evaluated: Mask, floods_below: Mask, backwater: Mask, settings: RenewalSettings) -> tuple[Array, NDArray[np.intp]]:
    """The hydraulic likelihood part and its cause (index into ``HYDRAULIC_WORDS``).

    The band of the load ratio where the hydraulics ran; 5 where the node below floods; at
    least the band of a load ratio of 1 where backwater fills the pipe.
    """
    bands = settings.load_ratio_bands
    ratio = bands.score(np.where(evaluated, load_ratio, np.nan))
    backed = np.where(backwater, bands.score(np.array([1.0]))[0], np.nan)
    flooded = np.where(floods_below, 5.0, np.nan)
    score, cause = combine([flooded, ratio, backed], [1.0, 1.0, 1.0])
    return score, np.maximum(cause, 0)


def near_areas(areas: CriticalAreas | None, geometry: NDArray[np.object_], *, buffer_m: float) -> tuple[Array, NDArray[np.intp]]:
    """Per pipe, the largest consequence of the areas it crosses or lies within the buffer of,
    and the layer that gives it (-1 and NaN where none).

    One STRtree query of every pipe against every feature within the largest buffer, then the
    exact distance of each pair against its own layer's buffer [m]: no loop per pipe.
    """
    count = len(geometry)
    if areas is None or areas.geometry.size == 0:
        return np.full(count, np.nan), np.full(count, -1, dtype=np.intp)
    buffers = np.array([buffer_m if value is None else value for value in areas.buffer_m], dtype=float)
    tree = shapely.STRtree(areas.geometry)
    pipe, feature = tree.query(geometry, predicate="dwithin", distance=float(buffers.max()))
    layer = areas.layer[feature]
    close = shapely.dwithin(geometry[pipe], areas.geometry[feature], buffers[layer])
    pipe, layer = pipe[close], layer[close]
    consequence = np.asarray(areas.consequence, dtype=float)[layer]
    order = np.lexsort((layer, -consequence, pipe))  # per pipe, the worst layer first (the first configured on a tie)
    first = order[np.unique(pipe[order], return_index=True)[1]]
    score, which = np.full(count, np.nan), np.full(count, -1, dtype=np.intp)
    score[pipe[first]], which[pipe[first]] = consequence[first], layer[first]
    return score, which


def risk_scores(
    *, likelihood_parts: dict[str, Array], consequence_parts: dict[str, Array], hydraulic_cause: NDArray[np.intp],
    critical_layer: NDArray[np.intp], area_names: Sequence[str], settings: RenewalSettings,
) -> Scores:  # fmt: skip
    """Likelihood, consequence and risk from their parts (keyed as ``LIKELIHOOD_PARTS`` and
    ``CONSEQUENCE_PARTS``), with the words of each driver."""
    likelihood, l_part = combine([likelihood_parts[name] for name in LIKELIHOOD_PARTS], [settings.likelihood_weights[name] for name in LIKELIHOOD_PARTS])
    consequence, c_part = combine([consequence_parts[name] for name in CONSEQUENCE_PARTS], [settings.consequence_weights[name] for name in CONSEQUENCE_PARTS])
    # likelihood words: the hydraulic causes, then the other parts
    l_words = np.array([*HYDRAULIC_WORDS, *(LIKELIHOOD_WORDS[name] for name in LIKELIHOOD_PARTS[1:]), ""], dtype=object)
    l_code = np.where(l_part == 0, hydraulic_cause, np.where(l_part > 0, l_part + len(HYDRAULIC_WORDS) - 1, len(l_words) - 1))
    # consequence words: each critical area by name, then the other parts
    c_words = np.array([*(CRITICAL_WORDS + name for name in area_names), *(CONSEQUENCE_WORDS[name] for name in CONSEQUENCE_PARTS[1:]), ""], dtype=object)
    c_code = np.where(c_part == 0, critical_layer, np.where(c_part > 0, c_part + len(area_names) - 1, len(c_words) - 1))
    both = np.array([f"{a} x {b}" if a and b else "" for a in l_words for b in c_words], dtype=object)  # a few dozen words
    risk = likelihood * consequence
    unscored = np.isnan(likelihood).astype(np.intp) + 2 * np.isnan(consequence).astype(np.intp)
    drivers = labels_from(l_code, l_words), labels_from(c_code, c_words), labels_from(l_code * len(c_words) + c_code, both)
    return Scores(likelihood, consequence, risk, *drivers, unscored)
