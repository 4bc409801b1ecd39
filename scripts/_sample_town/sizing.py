"""Pipe sizes for a target load ratio, by Manning at full bore, never shrinking downstream."""

from __future__ import annotations

import numpy as np
import pandas as pd

from .plan import (
    CIRCULAR_MM,
    EGG_AREA_COEF,
    EGG_RADIUS_COEF,
    EGG_SPAN_MM,
    MANNING_N,
    MODERN_MIN_MM,
    OLD_LATERAL_YEAR,
    OLD_MIN_MM,
    TARGET_LOAD_RATIO,
)
from .tree import sweep


def full_bore_capacity(span_m: np.ndarray, slope: np.ndarray, egg: np.ndarray) -> np.ndarray:
    r"""Pipe-full discharge [m^3/s] by Manning, circular or standard egg (rise 1.5 x span).

    .. math:: Q_f = \frac{1}{n} A R^{2/3} S^{1/2}

    Source: Chow, Open-Channel Hydraulics (1959); egg coefficients from memory.
    """
    area = np.where(egg, EGG_AREA_COEF * span_m**2, np.pi * span_m**2 / 4)
    radius = np.where(egg, EGG_RADIUS_COEF * span_m, span_m / 4)
    return area * radius ** (2 / 3) * np.sqrt(np.maximum(slope, 0)) / MANNING_N


def size_pipes(pipes: pd.DataFrame, flow_ls: np.ndarray, level: np.ndarray, n_nodes: int) -> np.ndarray:
    """Commercial span [mm] per pipe: capacity at the target load ratio, never shrinking downstream."""
    egg = pipes["egg"].to_numpy()
    sizes = np.r_[CIRCULAR_MM, EGG_SPAN_MM]
    ok = full_bore_capacity(sizes[None, :] / 1000, pipes["slope"].to_numpy()[:, None], egg[:, None])
    ok = ok * 1000 * TARGET_LOAD_RATIO >= flow_ls[:, None]
    ok &= np.r_[np.zeros(CIRCULAR_MM.size, bool), np.ones(EGG_SPAN_MM.size, bool)] == egg[:, None]  # its own list
    ok &= (sizes >= np.where(pipes["laid"] < OLD_LATERAL_YEAR, OLD_MIN_MM, MODERN_MIN_MM)[:, None])
    need = np.where(ok.any(axis=1), np.where(ok, sizes, np.inf).min(axis=1), sizes.max())
    width, node_w = need.copy(), np.zeros(n_nodes)
    up, dn = pipes["up"].to_numpy(), pipes["dn"].to_numpy()
    for p in sweep(level, up):
        width[p] = np.maximum(width[p], node_w[up[p]])
        np.maximum.at(node_w, dn[p], width[p])
    return _round_up(width, np.where(egg, 1, 0))


def _round_up(width: np.ndarray, table: np.ndarray) -> np.ndarray:
    """Smallest size of the pipe's own list (0 circular, 1 egg) that is at least ``width``."""
    out = np.empty_like(width)
    for code, sizes in enumerate((CIRCULAR_MM, EGG_SPAN_MM)):
        sel = table == code
        out[sel] = sizes[np.minimum(np.searchsorted(sizes, width[sel]), sizes.size - 1)]
    return out
