"""Friction formulas and water properties against reference values and fluids."""

import fluids
import numpy as np
import pytest

from audit.hydraulics.friction import (
    Friction,
    chezy_from_manning,
    chezy_velocity,
    colebrook_white_velocity,
    manning_from_chezy,
    manning_velocity,
    water_density,
    water_kinematic_viscosity,
)


@pytest.mark.parametrize(("temperature", "nu"), [(5.0, 1.5182e-6), (10.0, 1.3063e-6), (15.0, 1.1386e-6), (20.0, 1.0034e-6), (30.0, 0.8007e-6)])
def test_kinematic_viscosity_within_a_tenth_of_a_percent_of_the_table(temperature: float, nu: float) -> None:
    # Source: ITTC Recommended Procedure 7.5-02-01-03 (2011), Fresh water and seawater
    # properties, kinematic viscosity of fresh water (from memory; cross-checked against the
    # IAPWS 2008 viscosity written out in tests/reference/test_water_properties.py).
    assert float(water_kinematic_viscosity(temperature)) == pytest.approx(nu, rel=1e-3)


@pytest.mark.parametrize(("temperature", "rho"), [(0.0, 999.843), (4.0, 999.975), (20.0, 998.207), (40.0, 992.22)])
def test_density_matches_the_standard_table(temperature: float, rho: float) -> None:
    # Source: Tanaka et al. (2001), Metrologia 38, table of density of SMOW (from memory).
    assert float(water_density(temperature)) == pytest.approx(rho, abs=0.01)


def test_chezy_conversion_matches_fluids() -> None:
    # Source: fluids.n_Manning_to_C_Chezy, fluids.C_Chezy_to_n_Manning, fluids.V_Chezy.
    radius, slope, n = 0.2, 0.003, 0.012
    c = float(chezy_from_manning(n, radius))
    assert c == pytest.approx(fluids.n_Manning_to_C_Chezy(n, radius), rel=1e-12)
    assert float(manning_from_chezy(c, radius)) == pytest.approx(fluids.C_Chezy_to_n_Manning(c, radius), rel=1e-12)
    assert float(chezy_velocity(radius, slope, c)) == pytest.approx(fluids.V_Chezy(radius, slope, c), rel=1e-12)
    assert float(chezy_velocity(radius, slope, c)) == pytest.approx(float(manning_velocity(radius, slope, n)), rel=1e-12)


def test_colebrook_white_is_rougher_for_larger_ks_and_bad_inputs_give_nan() -> None:
    velocity = colebrook_white_velocity(np.full(3, 0.15), np.full(3, 0.002), np.array([0.03, 1.5, 6.0]), 1.14e-6)
    assert np.all(np.diff(velocity) < 0)
    bad = colebrook_white_velocity(np.array([0.15, 0.15]), np.array([np.nan, -0.01]), np.array([1.5, 1.5]), 1.14e-6)
    assert np.isnan(bad).all()
    assert np.isnan(manning_velocity(np.array([0.2]), np.array([-0.001]), np.array([0.013]))).all()


def test_friction_refuses_an_unknown_formula_and_picks_per_pipe_roughness() -> None:
    with pytest.raises(ValueError, match="darcy"):
        Friction("darcy", np.ones(2))  # type: ignore[arg-type]
    friction = Friction("manning", np.array([0.010, 0.020]))
    velocity = friction.velocity(np.array([0.1]), np.array([0.01]), np.array([1]))
    assert velocity[0] == pytest.approx(fluids.V_Manning(0.1, 0.01, 0.020))


@pytest.mark.parametrize(("diameter", "slope"), [(0.3, 0.005), (1.2, 0.0004), (0.1, 0.05)])
def test_colebrook_white_with_zero_ks_is_the_smooth_pipe_law_of_fluids(diameter: float, slope: float) -> None:
    # Source: fluids.friction.Colebrook(Re, eD=0), the smooth-pipe Colebrook equation; with
    # Darcy-Weisbach S = f V^2 / (2 g D) the velocity must give back the slope.
    nu = 1.14e-6
    velocity = float(colebrook_white_velocity(diameter / 4, slope, 0.0, nu))
    darcy = fluids.friction.Colebrook(velocity * diameter / nu, 0.0)
    assert darcy * velocity**2 / (2 * 9.80665 * diameter) == pytest.approx(slope, rel=1e-9)


def test_zero_roughness_is_usable_for_colebrook_white_only() -> None:
    roughness = np.array([0.0, 0.6, -0.1, np.nan, np.inf])
    assert list(Friction("colebrook-white", roughness).roughness_known()) == [True, True, False, False, False]
    assert list(Friction("manning", roughness).roughness_known()) == [False, True, False, False, False]
    assert list(Friction("chezy", roughness).roughness_known()) == [False, True, False, False, False]
