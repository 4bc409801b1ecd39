r"""Vectorised root finding and maximisation on brackets, for many independent problems at once.

Each problem ``i`` has its own bracket; ``func(x, index)`` evaluates the problems ``index`` at
the points ``x`` (one point per problem). Converged problems drop out of the working set, so the
cost falls as they settle, and no Python loop runs per problem.

References
----------
.. [1] Anderson, N. and Bjoerck, A. (1973). A new high order method of regula falsi type for
   computing a root of an equation. BIT 13, 253-264.
.. [2] Kiefer, J. (1953). Sequential minimax search for a maximum. Proc. AMS 4, 502-506
   (golden-section search).
"""

from __future__ import annotations

from collections.abc import Callable

import numpy as np
from numpy.typing import NDArray

Array = NDArray[np.float64]
Function = Callable[[Array, NDArray[np.intp]], Array]

GOLDEN = (np.sqrt(5.0) - 1.0) / 2.0


def bracketed_root(
    func: Function,
    low: Array,
    high: Array,
    *,
    f_low: Array | None = None,
    f_high: Array | None = None,
    xtol: float = 1e-13,
    ftol: Array | float = 0.0,
    maxiter: int = 100,
) -> Array:
    r"""Roots of ``func`` on ``[low, high]`` by the Anderson-Bjoerck regula falsi.

    Each step takes the secant point of the bracket, :math:`c = b - f_b (b - a)/(f_b - f_a)`,
    keeps the sign change, and when the same end would be kept twice scales its function value
    by :math:`m = 1 - f_c / f_b` (or 1/2 when m <= 0), which gives superlinear convergence.
    A problem stops when the bracket is narrower than ``xtol`` or :math:`|f(c)| \le` ``ftol``.

    ``f_low`` and ``f_high``, when given, are the function values at the bracket ends.
    Returns NaN for problems without a sign change on their bracket.

    >>> import numpy as np
    >>> roots = bracketed_root(lambda x, i: x**2 - np.array([2.0, 9.0])[i], np.zeros(2), np.full(2, 4.0))
    >>> [round(float(r), 12) for r in roots]
    [1.414213562373, 3.0]
    """
    everyone = np.arange(low.size)
    a, b = low.astype(float).copy(), high.astype(float).copy()
    fa = func(a, everyone) if f_low is None else f_low.astype(float).copy()
    fb = func(b, everyone) if f_high is None else f_high.astype(float).copy()
    tolerance = np.broadcast_to(np.asarray(ftol, dtype=float), a.shape)
    root = np.where(fa == 0.0, a, np.where(fb == 0.0, b, np.nan))
    active = np.flatnonzero((fa * fb < 0.0) & np.isfinite(fa) & np.isfinite(fb))
    for _ in range(maxiter):
        if active.size == 0:
            break
        sa, sb, sfa, sfb = a[active], b[active], fa[active], fb[active]
        c = sb - sfb * (sb - sa) / (sfb - sfa)
        stuck = ~((c > np.minimum(sa, sb)) & (c < np.maximum(sa, sb)))
        c = np.where(stuck, 0.5 * (sa + sb), c)
        fc = func(c, active)
        flipped = fc * sfb < 0.0
        scale = np.where(sfb != 0.0, 1.0 - fc / np.where(sfb != 0.0, sfb, 1.0), 0.5)
        scale = np.where(scale > 0.0, scale, 0.5)
        a[active] = np.where(flipped, sb, sa)
        fa[active] = np.where(flipped, sfb, sfa * scale)
        b[active], fb[active] = c, fc
        done = (np.abs(fc) <= tolerance[active]) | (np.abs(b[active] - a[active]) <= xtol)
        root[active[done]] = c[done]
        active = active[~done]
    root[active] = b[active]
    return root


def golden_maximum(func: Function, low: Array, high: Array, *, xtol: float = 1e-9) -> tuple[Array, Array]:
    r"""Location and value of the maximum of unimodal ``func`` on each ``[low, high]``.

    Golden-section search: the bracket shrinks by :math:`(\sqrt5 - 1)/2` per step, with one
    new evaluation per step.

    >>> import numpy as np
    >>> x, f = golden_maximum(lambda x, i: -(x - np.array([0.3, 0.7])[i]) ** 2, np.zeros(2), np.ones(2))
    >>> [round(float(v), 6) for v in x]
    [0.3, 0.7]
    """
    everyone = np.arange(low.size)
    a, b = low.astype(float).copy(), high.astype(float).copy()
    x1, x2 = b - GOLDEN * (b - a), a + GOLDEN * (b - a)
    f1, f2 = func(x1, everyone), func(x2, everyone)
    steps = int(np.ceil(np.log(max(float(np.max(b - a, initial=0.0)), xtol) / xtol) / -np.log(GOLDEN)))
    for _ in range(steps):
        left = f1 >= f2  # the maximum lies in [a, x2]
        b = np.where(left, x2, b)
        a = np.where(left, a, x1)
        x_new = np.where(left, b - GOLDEN * (b - a), a + GOLDEN * (b - a))
        f_new = func(x_new, everyone)
        x2, f2, x1, f1 = np.where(left, x1, x_new), np.where(left, f1, f_new), np.where(left, x_new, x2), np.where(left, f_new, f2)
    best = np.where(f1 >= f2, x1, x2)
    return best, np.maximum(f1, f2)
