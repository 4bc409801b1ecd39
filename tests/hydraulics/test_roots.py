"""The vectorised solvers against scipy's scalar ones."""

import numpy as np
from scipy.optimize import brentq, minimize_scalar

from audit.hydraulics.roots import bracketed_root, golden_maximum


def test_bracketed_root_matches_brentq_on_many_problems() -> None:
    # Independent reference: scipy.optimize.brentq, problem by problem.
    rng = np.random.default_rng(7)
    power = rng.uniform(0.3, 4.0, 200)
    target = rng.uniform(0.01, 0.99, 200)

    def func(x: np.ndarray, index: np.ndarray) -> np.ndarray:
        return x ** power[index] - target[index]

    roots = bracketed_root(func, np.zeros(200), np.ones(200), xtol=1e-14)
    expected = [brentq(lambda x, p=p, t=t: x**p - t, 0, 1, xtol=1e-15) for p, t in zip(power, target, strict=True)]
    np.testing.assert_allclose(roots, expected, rtol=1e-10)


def test_no_sign_change_gives_nan_and_exact_ends_are_kept() -> None:
    roots = bracketed_root(lambda x, i: x - np.array([2.0, 0.0, 1.0])[i], np.zeros(3), np.ones(3))
    assert np.isnan(roots[0])
    assert roots[1] == 0.0
    assert roots[2] == 1.0


def test_golden_maximum_matches_minimize_scalar() -> None:
    # Independent reference: scipy.optimize.minimize_scalar (bounded).
    centre = np.array([0.2, 0.55, 0.9])

    def func(x: np.ndarray, index: np.ndarray) -> np.ndarray:
        return np.sin(np.pi * (x - centre[index] + 0.5))

    location, _ = golden_maximum(func, np.zeros(3), np.ones(3), xtol=1e-10)
    for c, found in zip(centre, location, strict=True):
        expected = minimize_scalar(lambda x, c=c: -np.sin(np.pi * (x - c + 0.5)), bounds=(0, 1), method="bounded", options={"xatol": 1e-10}).x
        assert abs(found - expected) < 1e-7
