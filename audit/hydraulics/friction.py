r"""Uniform-flow friction formulas and the water properties they need.

Each formula gives the mean velocity [m/s] of uniform flow from the hydraulic radius ``R`` [m]
and the bed slope ``S`` [-] (the friction slope equals the bed slope in uniform flow):

* Manning, roughness ``n`` [s/m^(1/3)];
* Colebrook-White, wall roughness ``ks`` [mm] and the kinematic viscosity of the water;
* Chezy, coefficient ``C`` [m^(1/2)/s], with its conversion to and from Manning's n.

All functions are vectorised and give NaN (never an exception) where an input is missing or
out of range; the caller decides what that means.

References
----------
.. [1] Chow, V. T. (1959). Open-Channel Hydraulics. McGraw-Hill, ch. 5.
.. [2] Colebrook, C. F. (1939). Turbulent flow in pipes, with particular reference to the
   transition region between the smooth and rough pipe laws. J. Inst. Civil Eng. 11, 133-156.
.. [3] HR Wallingford and Barr, D. I. H. (2006). Tables for the hydraulic design of pipes,
   sewers and channels, 8th ed. Thomas Telford (the explicit velocity form used here).
.. [4] Tanaka, M. et al. (2001). Recommended table for the density of water between 0 C and
   40 C based on recent experimental reports. Metrologia 38, 301-309.
.. [5] Kestin, J., Sokolov, M. and Wakeham, W. A. (1978). Viscosity of liquid water in the range
   -8 C to 150 C. J. Phys. Chem. Ref. Data 7, 941-948 (the correlation relative to 20 C, as
   quoted in the CRC Handbook of Chemistry and Physics; from memory).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Literal

import numpy as np
from numpy.typing import ArrayLike, NDArray

Array = NDArray[np.float64]
FormulaName = Literal["manning", "colebrook-white", "chezy"]
FORMULAS: tuple[FormulaName, ...] = ("manning", "colebrook-white", "chezy")

GRAVITY = 9.80665
"""Standard acceleration of gravity [m/s^2] (CGPM 1901)."""


def water_density(temperature_c: ArrayLike) -> Array:
    r"""Density of air-free water at 101.325 kPa, by Tanaka et al. (2001).

    .. math:: \rho = a_5 \left[1 - \frac{(t + a_1)^2 (t + a_2)}{a_3 (t + a_4)}\right]

    Parameters
    ----------
    temperature_c : water temperature [C], valid 0 to 40

    Returns
    -------
    density [kg/m^3]

    >>> round(float(water_density(4.0)), 2)
    999.97
    """
    t = np.asarray(temperature_c, dtype=float)
    a1, a2, a3, a4, a5 = -3.983035, 301.797, 522528.9, 69.34881, 999.974950
    return a5 * (1.0 - (t + a1) ** 2 * (t + a2) / (a3 * (t + a4)))


def water_kinematic_viscosity(temperature_c: ArrayLike) -> Array:
    r"""Kinematic viscosity of water, by the correlation of Kestin et al. (1978) relative to 20 C.

    .. math:: \log_{10} \frac{\mu}{\mu_{20}} = \frac{20 - t}{t + 96}
        \left[1.2364 - 1.37\times10^{-3} (20 - t) + 5.7\times10^{-6} (20 - t)^2\right],
        \quad \nu = \mu / \rho

    with :math:`\mu_{20}` = 1.0020 mPa s and the density of :func:`water_density`; within
    0.1 % of the IAPWS 2008 values from 0 to 40 C, more than 1 % low at 90 C (so ``[hydraulics]
    water_temp_c`` stops at 40 C; tests/reference/test_water_properties.py).

    Parameters
    ----------
    temperature_c : water temperature [C], valid 0 to 40

    Returns
    -------
    kinematic viscosity [m^2/s]

    >>> round(float(water_kinematic_viscosity(20.0)) * 1e6, 4)
    1.0038
    """
    t = np.asarray(temperature_c, dtype=float)
    below = 20.0 - t
    log_ratio = below / (t + 96.0) * (1.2364 - 1.37e-3 * below + 5.7e-6 * below**2)
    return 1.0020e-3 * 10.0**log_ratio / water_density(t)


def manning_velocity(hydraulic_radius: ArrayLike, slope: ArrayLike, n: ArrayLike) -> Array:
    r"""Mean velocity by Manning's formula (SI form).

    .. math:: V = \frac{1}{n} R^{2/3} S^{1/2}

    Parameters
    ----------
    hydraulic_radius : R = A / P [m]
    slope : bed slope [-]
    n : Manning roughness [s/m^(1/3)]

    Returns
    -------
    velocity [m/s]

    References: Chow (1959), eq. 5-6.

    >>> round(float(manning_velocity(0.25, 0.01, 0.013)), 4)  # 1 m pipe, full
    3.0527
    """
    with np.errstate(invalid="ignore"):
        return np.asarray(hydraulic_radius, dtype=float) ** (2.0 / 3.0) * np.sqrt(slope) / np.asarray(n, dtype=float)


def colebrook_white_velocity(
    hydraulic_radius: ArrayLike, slope: ArrayLike, ks_mm: ArrayLike, kinematic_viscosity: ArrayLike
) -> Array:
    r"""Mean velocity by the Colebrook-White transition law, written explicitly in V.

    With the Darcy-Weisbach friction factor :math:`\lambda` and :math:`D = 4R`, uniform flow
    gives :math:`V = \sqrt{2 g D S / \lambda}`, so :math:`Re \sqrt{\lambda} = D \sqrt{2 g D S}/\nu`
    is known and the Colebrook equation becomes explicit:

    .. math:: V = -2 \sqrt{2 g D S}\; \log_{10}\left(\frac{k_s}{3.7 D}
        + \frac{2.51\, \nu}{D \sqrt{2 g D S}}\right)

    ``ks_mm`` = 0 is the hydraulically smooth wall. Where the log argument exceeds 1 (millimetre
    pipes at tiny slopes, below the turbulent range) the velocity comes out negative; callers
    take it as zero.

    Parameters
    ----------
    hydraulic_radius : R [m]
    slope : bed slope [-]
    ks_mm : equivalent sand roughness [mm], 0 or more
    kinematic_viscosity : [m^2/s]

    Returns
    -------
    velocity [m/s]

    References: Colebrook (1939); HR Wallingford and Barr (2006).
    """
    diameter = 4.0 * np.asarray(hydraulic_radius, dtype=float)
    with np.errstate(invalid="ignore", divide="ignore"):
        scale = np.sqrt(2.0 * GRAVITY * diameter * np.asarray(slope, dtype=float))
        term = np.asarray(ks_mm, dtype=float) / 1000.0 / (3.7 * diameter) + 2.51 * np.asarray(kinematic_viscosity, dtype=float) / (diameter * scale)
        return -2.0 * scale * np.log10(term)


def chezy_velocity(hydraulic_radius: ArrayLike, slope: ArrayLike, chezy_c: ArrayLike) -> Array:
    r"""Mean velocity by Chezy's formula.

    .. math:: V = C \sqrt{R S}

    Parameters
    ----------
    hydraulic_radius : R [m]; slope : [-]; chezy_c : C [m^(1/2)/s]

    References: Chow (1959), eq. 5-1.
    """
    with np.errstate(invalid="ignore"):
        return np.asarray(chezy_c, dtype=float) * np.sqrt(np.asarray(hydraulic_radius, dtype=float) * slope)


def chezy_from_manning(n: ArrayLike, hydraulic_radius: ArrayLike) -> Array:
    r"""Chezy's C equivalent to Manning's n at a hydraulic radius: :math:`C = R^{1/6} / n`.

    References: Chow (1959), eq. 5-7.

    >>> round(float(chezy_from_manning(0.013, 0.25)), 3)
    61.054
    """
    return np.asarray(hydraulic_radius, dtype=float) ** (1.0 / 6.0) / np.asarray(n, dtype=float)


def manning_from_chezy(chezy_c: ArrayLike, hydraulic_radius: ArrayLike) -> Array:
    r"""Manning's n equivalent to Chezy's C at a hydraulic radius: :math:`n = R^{1/6} / C`."""
    return np.asarray(hydraulic_radius, dtype=float) ** (1.0 / 6.0) / np.asarray(chezy_c, dtype=float)


@dataclass(frozen=True)
class Friction:
    """One friction formula with a roughness per pipe.

    ``roughness`` is Manning's n [s/m^(1/3)], Colebrook-White ks [mm] or Chezy C [m^(1/2)/s],
    according to ``formula``; ``kinematic_viscosity`` [m^2/s] of the water (Colebrook-White).
    """

    formula: FormulaName
    roughness: Array
    kinematic_viscosity: float = float(water_kinematic_viscosity(15.0))

    def __post_init__(self) -> None:
        if self.formula not in FORMULAS:
            raise ValueError(f"friction formula {self.formula!r}: expected one of {', '.join(FORMULAS)}")
        object.__setattr__(self, "roughness", np.asarray(self.roughness, dtype=float))

    @classmethod
    def uniform(cls, formula: FormulaName, roughness: float, count: int, *, temperature_c: float = 15.0) -> Friction:
        """The same roughness for ``count`` pipes, with the viscosity at ``temperature_c``."""
        return cls(formula, np.full(count, float(roughness)), float(water_kinematic_viscosity(temperature_c)))

    def roughness_known(self) -> NDArray[np.bool_]:
        """Per pipe: the roughness is usable, finite and positive; for Colebrook-White also
        ``ks = 0``, the hydraulically smooth wall (Manning's n and Chezy's C must be positive)."""
        usable = np.isfinite(self.roughness) & (self.roughness > 0)
        if self.formula == "colebrook-white":
            usable |= self.roughness == 0
        return usable

    def velocity(self, hydraulic_radius: Array, slope: Array, index: NDArray[np.intp] | None = None) -> Array:
        """Mean velocity [m/s] for the pipes ``index`` (all pipes when None)."""
        roughness = self.roughness if index is None else self.roughness[index]
        if self.formula == "manning":
            return manning_velocity(hydraulic_radius, slope, roughness)
        if self.formula == "colebrook-white":
            return colebrook_white_velocity(hydraulic_radius, slope, roughness, self.kinematic_viscosity)
        return chezy_velocity(hydraulic_radius, slope, roughness)
