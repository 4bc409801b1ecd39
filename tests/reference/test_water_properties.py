"""Water density and viscosity against the IAPWS formulations, written out here.

The formulations are written out independently of audit.hydraulics.friction: the density of
liquid water by the IAPWS industrial formulation 1997 (region 1; within 1e-5 of the IAPWS-95
scientific formulation from 0 to 40 C at 101.325 kPa, checked once against the iapws package's
IAPWS-95, which is not a test dependency), the viscosity by the IAPWS 2008 formulation without
its critical enhancement (which is 1 this far from the critical point). Each is first checked at
its own published check values, then used as the reference for the correlations of friction.py
and for the tabulated viscosities of tests/hydraulics/test_friction.py.
"""

import numpy as np
import pytest

from audit.hydraulics.friction import water_density, water_kinematic_viscosity

# Source: IAPWS R7-97(2012), Revised Release on the IAPWS Industrial Formulation 1997, table 2
# (region 1: exponents I, J and coefficients n of the dimensionless Gibbs free energy);
# transcribed from the iapws Python package 1.5.5, which reproduces the release.
IF97_I = np.array([0, 0, 0, 0, 0, 0, 0, 0, 1, 1, 1, 1, 1, 1, 2, 2, 2, 2, 2, 3, 3, 3, 4, 4, 4, 5, 8, 8, 21, 23, 29, 30, 31, 32])
IF97_J = np.array([-2, -1, 0, 1, 2, 3, 4, 5, -9, -7, -1, 0, 1, 3, -3, 0, 1, 3, 17, -4, 0, 6, -5, -2, 10, -8, -11, -6, -29, -31, -38, -39, -40, -41])
IF97_N = np.array([
    0.14632971213167, -0.84548187169114, -3.756360367204, 0.33855169168385e1, -0.95791963387872,
    0.15772038513228, -0.16616417199501e-1, 0.81214629983568e-3, 0.28319080123804e-3,
    -0.60706301565874e-3, -0.18990068218419e-1, -0.32529748770505e-1, -0.21841717175414e-1,
    -0.52838357969930e-4, -0.47184321073267e-3, -0.30001780793026e-3, 0.47661393906987e-4,
    -0.44141845330846e-5, -0.72694996297594e-15, -0.31679644845054e-4, -0.28270797985312e-5,
    -0.85205128120103e-9, -0.22425281908000e-5, -0.65171222895601e-6, -0.14341729937924e-12,
    -0.40516996860117e-6, -0.12734301741641e-8, -0.17424871230634e-9, -0.68762131295531e-18,
    0.14478307828521e-19, 0.26335781662795e-22, -0.11947622640071e-22, 0.18228094581404e-23,
    -0.93537087292458e-25,
])  # fmt: skip
IF97_GAS_CONSTANT = 461.526  # specific gas constant of water [J/(kg K)], IAPWS R7-97 eq. 1

# Source: IAPWS R12-08, Release on the IAPWS Formulation 2008 for the Viscosity of Ordinary Water
# Substance, tables 1 and 2 (H_i of the dilute-gas term, H_ij of the residual term); transcribed
# from the iapws Python package 1.5.5, which reproduces the release.
VISCOSITY_H0 = np.array([1.67752, 2.20462, 0.6366564, -0.241605])
VISCOSITY_I = np.array([0, 1, 2, 3, 0, 1, 2, 3, 5, 0, 1, 2, 3, 4, 0, 1, 0, 3, 4, 3, 5])
VISCOSITY_J = np.array([0, 0, 0, 0, 1, 1, 1, 1, 1, 2, 2, 2, 2, 2, 3, 3, 4, 4, 5, 6, 6])
VISCOSITY_H1 = np.array([
    0.520094, 0.850895e-1, -0.108374e1, -0.289555, 0.222531, 0.999115, 0.188797e1, 0.126613e1,
    0.120573, -0.281378, -0.906851, -0.772479, -0.489837, -0.257040, 0.161913, 0.257399,
    -0.325372e-1, 0.698452e-1, 0.872102e-2, -0.435673e-2, -0.593264e-3,
])  # fmt: skip
CRITICAL_TEMPERATURE, CRITICAL_DENSITY = 647.096, 322.0  # [K], [kg/m3], IAPWS R12-08 eq. 2

ATMOSPHERE_PA = 101_325.0


def iapws_density(kelvin: float, pascal: float = ATMOSPHERE_PA) -> float:
    """IF97 region 1: v = (R T / p) pi gamma_pi, with pi = p / 16.53 MPa, tau = 1386 K / T."""
    pi, tau = pascal / 16.53e6, 1386.0 / kelvin
    gamma_pi = float(np.sum(-IF97_N * IF97_I * (7.1 - pi) ** (IF97_I - 1) * (tau - 1.222) ** IF97_J))
    return 1.0 / (IF97_GAS_CONSTANT * kelvin / pascal * pi * gamma_pi)


def iapws_viscosity(kelvin: float, density: float) -> float:
    """IAPWS 2008: mu = mu_0(T) mu_1(T, rho) x 1 uPa s, without the critical enhancement."""
    t, d = kelvin / CRITICAL_TEMPERATURE, density / CRITICAL_DENSITY
    mu0 = 100.0 * np.sqrt(t) / float(np.sum(VISCOSITY_H0 / t ** np.arange(4)))
    mu1 = np.exp(d * float(np.sum(VISCOSITY_H1 * (1.0 / t - 1.0) ** VISCOSITY_I * (d - 1.0) ** VISCOSITY_J)))
    return float(mu0 * mu1) * 1e-6


def iapws_kinematic_viscosity(celsius: float) -> float:
    kelvin = celsius + 273.15
    density = iapws_density(kelvin)
    return iapws_viscosity(kelvin, density) / density


@pytest.mark.parametrize(("kelvin", "megapascal", "volume"), [(300.0, 3.0, 0.100215168e-2), (300.0, 80.0, 0.971180894e-3), (500.0, 3.0, 0.120241800e-2)])
def test_written_out_density_meets_the_if97_check_values(kelvin: float, megapascal: float, volume: float) -> None:
    # Source: IAPWS R7-97(2012), table 5, specific volume at the region 1 check points (from memory).
    assert 1.0 / iapws_density(kelvin, megapascal * 1e6) == pytest.approx(volume, rel=1e-8)


@pytest.mark.parametrize(("kelvin", "density", "micropascal_s"), [(298.15, 998.0, 889.735100), (298.15, 1200.0, 1437.649467), (373.15, 1000.0, 307.883622)])
def test_written_out_viscosity_meets_the_iapws_2008_check_values(kelvin: float, density: float, micropascal_s: float) -> None:
    # Source: IAPWS R12-08, table 4, check values without the critical enhancement (from memory).
    assert iapws_viscosity(kelvin, density) * 1e6 == pytest.approx(micropascal_s, rel=1e-8)


@pytest.mark.parametrize("celsius", [0.0, 4.0, 10.0, 20.0, 30.0, 40.0])
def test_tanaka_density_is_within_the_if97_consistency_of_iapws(celsius: float) -> None:
    # Tanaka et al. (2001) against IF97 at 101.325 kPa: within 1.2e-5, the size of IF97's own
    # departure from IAPWS-95 here (largest 9e-6, at 40 C).
    assert float(water_density(celsius)) == pytest.approx(iapws_density(celsius + 273.15), rel=1.2e-5)


@pytest.mark.parametrize("celsius", [0.0, 5.0, 10.0, 15.0, 20.0, 25.0, 30.0, 35.0, 40.0])
def test_kestin_viscosity_is_within_a_tenth_of_a_percent_of_iapws_from_0_to_40_c(celsius: float) -> None:
    # The correlation's stated accuracy near room temperature is about 0.1 %; largest deviation
    # here 0.083 % at 10 C.
    assert float(water_kinematic_viscosity(celsius)) == pytest.approx(iapws_kinematic_viscosity(celsius), rel=1e-3)


def test_the_correlations_drift_above_40_c_which_is_why_the_config_stops_there() -> None:
    # The reason audit.hydraulics.settings accepts 0 to 40 C only: at 90 C the kinematic
    # viscosity of friction.py is more than 1 % below IAPWS.
    assert float(water_kinematic_viscosity(90.0)) < 0.99 * iapws_kinematic_viscosity(90.0)


# Kinematic viscosity of fresh water at 101.325 kPa [m2/s].
# Source: ITTC Recommended Procedure 7.5-02-01-03 (2011), Fresh water and seawater properties,
# table of fresh water (from memory).
ITTC_FRESH_WATER = [(5.0, 1.5182e-6), (10.0, 1.3063e-6), (15.0, 1.1386e-6), (20.0, 1.0034e-6), (30.0, 0.8007e-6)]


@pytest.mark.parametrize(("celsius", "nu"), ITTC_FRESH_WATER)
def test_the_tabulated_viscosities_agree_with_iapws_to_their_last_digit(celsius: float, nu: float) -> None:
    # The table's five significant figures: half a unit in the last place is at most 6e-5.
    assert nu == pytest.approx(iapws_kinematic_viscosity(celsius), rel=6.5e-5)
