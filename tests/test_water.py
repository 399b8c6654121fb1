"""Water properties against the IAPWS verification tables, the `iapws` reference library
(registry package, https://pypi.org/project/iapws/) and handbook values."""

from __future__ import annotations

import math
import time

import numpy as np
import pandas as pd
import pytest
from iapws import IAPWS95, IAPWS97

from analytics.water import (
    density,
    dynamic_viscosity,
    dynamic_viscosity_t_rho,
    kinematic_viscosity,
    specific_volume,
    vapour_pressure,
)

ZERO_C = 273.15  # [K]
MPA = 1e6  # [Pa]


# --- verification tables of the releases ---------------------------------------------------

# IAPWS-IF97 (R7-97), Table 5, region 1 specific volume (from memory). The table prints nine
# significant digits; tolerance is half a unit of the last digit.
@pytest.mark.parametrize(("temperature", "pressure", "volume", "half_unit"), [
    (300.0, 3 * MPA, 0.100215168e-2, 0.5e-11),
    (300.0, 80 * MPA, 0.971180894e-3, 0.5e-12),
    (500.0, 3 * MPA, 0.120241800e-2, 0.5e-11),
])
def test_if97_table5_region1_specific_volume(temperature: float, pressure: float,
                                             volume: float, half_unit: float) -> None:
    assert specific_volume(temperature, pressure) == pytest.approx(volume, abs=half_unit)
    assert density(temperature, pressure) == pytest.approx(1.0 / volume, rel=1e-8)


# IAPWS-IF97 (R7-97), Table 35, saturation pressure (from memory), printed in MPa to nine
# significant digits.
@pytest.mark.parametrize(("temperature", "pressure_mpa", "half_unit_mpa"), [
    (300.0, 0.353658941e-2, 0.5e-11),
    (500.0, 0.263889776e1, 0.5e-8),
    (600.0, 0.123443146e2, 0.5e-7),
])
def test_if97_table35_saturation_pressure(temperature: float, pressure_mpa: float,
                                          half_unit_mpa: float) -> None:
    assert vapour_pressure(temperature) == pytest.approx(pressure_mpa * MPA,
                                                         abs=half_unit_mpa * MPA)


# IAPWS 2008 viscosity (R12-08), Table 4, verification points for mu_2 = 1 (from memory), in
# micropascal seconds to six decimals.
@pytest.mark.parametrize(("temperature", "rho", "mu_micro"), [
    (298.15, 998.0, 889.735100),
    (298.15, 1200.0, 1437.649467),
    (373.15, 1000.0, 307.883622),
    (433.15, 1.0, 14.538324),
    (433.15, 1000.0, 217.685358),
    (873.15, 1.0, 32.619287),
    (873.15, 100.0, 35.802262),
    (873.15, 600.0, 77.430195),
    (1173.15, 1.0, 44.217245),
    (1173.15, 100.0, 47.640433),
    (1173.15, 400.0, 64.154608),
])
def test_iapws2008_table4_viscosity(temperature: float, rho: float, mu_micro: float) -> None:
    assert dynamic_viscosity_t_rho(temperature, rho) * 1e6 == pytest.approx(mu_micro, abs=5e-7)


# --- cross-check against the reference library `iapws` ---------------------------------------

GRID_T = ZERO_C + np.linspace(0.1, 40.0, 12)  # [K], 0.1..40 degC
GRID_P = np.linspace(0.1, 10.0, 8) * MPA  # [Pa], 0.1..10 MPa


def test_density_and_viscosity_match_iapws97_library() -> None:
    # reference: iapws.IAPWS97 (same formulation, independent implementation): expect
    # agreement to round-off; 1e-10 leaves room for summation order only.
    ref_rho = np.array([[IAPWS97(T=t, P=p / MPA).rho for p in GRID_P] for t in GRID_T])
    ref_mu = np.array([[IAPWS97(T=t, P=p / MPA).mu for p in GRID_P] for t in GRID_T])
    ref_nu = np.array([[IAPWS97(T=t, P=p / MPA).nu for p in GRID_P] for t in GRID_T])
    t, p = GRID_T[:, None], GRID_P[None, :]
    np.testing.assert_allclose(density(t, p), ref_rho, rtol=1e-10)
    np.testing.assert_allclose(dynamic_viscosity(t, p), ref_mu, rtol=1e-10)
    np.testing.assert_allclose(kinematic_viscosity(t, p), ref_nu, rtol=1e-10)


def test_density_close_to_iapws95_library() -> None:
    # reference: iapws.IAPWS95, the scientific formulation IF97 approximates; in region 1
    # IF97 densities agree with it to better than 1e-4 (0.01 %, from memory of the IF97
    # paper's consistency statement).
    t_grid, p_grid = GRID_T[::2], GRID_P[::2]
    ref = np.array([[IAPWS95(T=t, P=p / MPA).rho for p in p_grid] for t in t_grid])
    np.testing.assert_allclose(density(t_grid[:, None], p_grid[None, :]), ref, rtol=1e-4)
    ref_mu = np.array([[IAPWS95(T=t, P=p / MPA).mu for p in p_grid] for t in t_grid])
    np.testing.assert_allclose(dynamic_viscosity(t_grid[:, None], p_grid[None, :]), ref_mu,
                               rtol=1e-4)


def test_vapour_pressure_matches_iapws_library() -> None:
    temps = np.linspace(273.16, 623.15, 15)
    # iapws.IAPWS97 saturated liquid (x = 0): the same region 4 equation
    ref97 = np.array([IAPWS97(T=t, x=0).P for t in temps]) * MPA
    np.testing.assert_allclose(vapour_pressure(temps), ref97, rtol=1e-12)
    # iapws.IAPWS95 saturation (Maxwell criterion): 0..100 degC within 1e-4
    cold = np.linspace(273.16, 373.15, 6)
    ref95 = np.array([IAPWS95(T=t, x=0).P for t in cold]) * MPA
    np.testing.assert_allclose(vapour_pressure(cold), ref95, rtol=1e-4)


# --- handbook values ---------------------------------------------------------------------

def test_handbook_points() -> None:
    # density of pure water at 4 degC, 1 atm: 999.97 kg/m3 (handbook value, from memory)
    assert density(ZERO_C + 4.0) == pytest.approx(999.97, abs=0.01)
    # vapour pressure at 20 degC: 2339 Pa (steam tables, from memory)
    assert vapour_pressure(ZERO_C + 20.0) == pytest.approx(2339.0, abs=1.0)
    # normal boiling point 99.974 degC on ITS-90 (from memory): p_s = 101,325 Pa there;
    # dp_s/dT is about 3.6 kPa/K, so 20 Pa is about 0.006 K
    assert vapour_pressure(ZERO_C + 99.974) == pytest.approx(101_325.0, abs=20.0)
    # viscosity of water at 20 degC, 1 atm: 1.0016 mPa s, nu = 1.0034e-6 m2/s (from memory)
    assert dynamic_viscosity(ZERO_C + 20.0) == pytest.approx(1.0016e-3, abs=1e-7)
    assert kinematic_viscosity(ZERO_C + 20.0) == pytest.approx(1.0034e-6, abs=1e-9)


def test_density_maximum_near_four_degrees() -> None:
    # maximum density of water at 1 atm is at 3.98 degC (handbook value, from memory)
    temps = ZERO_C + np.arange(0.0, 10.0, 0.001)
    t_max = temps[np.argmax(density(temps))] - ZERO_C
    assert t_max == pytest.approx(3.98, abs=0.05)


def test_density_rises_with_pressure() -> None:
    # compressibility of water about 4.6e-10 1/Pa near 20 degC (handbook, from memory):
    # 10 MPa raises the density by about 0.46 %
    gain = density(ZERO_C + 20.0, 10 * MPA) / density(ZERO_C + 20.0, 0.1 * MPA) - 1.0
    assert gain == pytest.approx(0.0046, abs=0.0003)


# --- ranges, NaN, shapes, speed -------------------------------------------------------------

def test_nan_outside_range_of_validity() -> None:
    assert math.isnan(density(273.0))  # below 273.15 K
    assert math.isnan(density(624.0, 50 * MPA))  # above 623.15 K (region 3)
    assert math.isnan(density(300.0, 101 * MPA))  # above 100 MPa
    assert math.isnan(density(350.0, 1e4))  # below p_s(350 K) = 41.7 kPa: steam
    assert math.isnan(density(float("nan")))
    assert math.isnan(density(300.0, float("nan")))
    assert math.isnan(vapour_pressure(273.0))
    assert math.isnan(vapour_pressure(648.0))  # above the critical point
    assert math.isnan(kinematic_viscosity(273.0))
    # the bounds themselves are inside
    assert np.isfinite(density(273.15)) and np.isfinite(density(300.0, 100 * MPA))
    assert np.isfinite(density(623.15, 50 * MPA))
    assert np.isfinite(vapour_pressure(273.15)) and np.isfinite(vapour_pressure(647.096))
    # exactly at saturation the liquid is still region 1
    assert np.isfinite(density(350.0, vapour_pressure(350.0)))


def test_shapes_types_and_broadcasting() -> None:
    assert isinstance(density(300.0), float)
    assert isinstance(vapour_pressure(300.0), float)
    out = density(np.array([[280.0], [300.0], [320.0]]), np.array([1e5, 1e6, 5e6, 1e7]))
    assert out.shape == (3, 4)
    assert out[1, 2] == pytest.approx(density(300.0, 5e6), rel=1e-15)
    mixed = density(np.array([300.0, np.nan, 200.0]), 1e5)
    assert np.isfinite(mixed[0]) and np.isnan(mixed[1]) and np.isnan(mixed[2])
    series = pd.Series([280.0, 290.0], index=["a", "b"])
    for func in (density, vapour_pressure, kinematic_viscosity):
        result = func(series)
        assert isinstance(result, pd.Series) and list(result.index) == ["a", "b"]
    assert kinematic_viscosity(300.0, 2e6) == pytest.approx(
        dynamic_viscosity(300.0, 2e6) / density(300.0, 2e6), rel=1e-15)


def test_vectorised_speed() -> None:
    rng = np.random.default_rng(0)
    temps = rng.uniform(274.0, 320.0, 1_000_000)
    pressures = rng.uniform(1e5, 1e7, 1_000_000)
    for func in (density, kinematic_viscosity):
        start = time.perf_counter()
        result = func(temps, pressures)
        elapsed = time.perf_counter() - start
        assert result.shape == (1_000_000,) and np.isfinite(result).all()
        assert elapsed < 1.0, f"{func.__name__} took {elapsed:.2f} s for 1e6 elements"
    start = time.perf_counter()
    vapour_pressure(temps)
    assert time.perf_counter() - start < 1.0
