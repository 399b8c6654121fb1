"""Local gravity (IEC 60041 formula) and the ISO 2533 standard atmosphere."""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
import pytest

from analytics.site import atmospheric_pressure, local_gravity


def test_gravity_formula_step_by_step() -> None:
    # IEC 60041 2.3.2 formula (from memory): at 45 deg, sea level,
    # sin^2 = 0.5 -> 9.7803 * (1 + 0.00265) = 9.806218...
    assert local_gravity(45.0, 0.0) == pytest.approx(9.7803 * 1.00265, abs=1e-12)
    # within 0.5 mm/s2 of standard gravity 9.80665 (CGPM 1901), which is defined near 45 deg
    assert abs(local_gravity(45.0, 0.0) - 9.80665) < 5e-4
    # equator and pole: 9.7803 and 9.7803 * 1.0053 = 9.83213 (measured polar g is about
    # 9.832 m/s2; from memory)
    assert local_gravity(0.0, 0.0) == pytest.approx(9.7803)
    assert local_gravity(90.0, 0.0) == pytest.approx(9.832135, abs=1e-6)
    # altitude term: 1000 m lowers g by 3 mm/s2
    assert local_gravity(45.0, 0.0) - local_gravity(45.0, 1000.0) == pytest.approx(3e-3)


def test_gravity_takes_arrays_and_propagates_nan() -> None:
    out = local_gravity(np.array([0.0, 45.0, np.nan]), np.array([0.0, 0.0, 0.0]))
    assert out[0] == pytest.approx(9.7803) and math.isnan(out[2])


# ISO 2533 standard atmosphere table values (from memory): 1000 m 89,875 Pa;
# 2000 m 79,495 Pa; 3000 m 70,108 Pa; 5000 m 54,020 Pa.
@pytest.mark.parametrize(("altitude", "pressure"), [
    (0.0, 101_325.0), (1000.0, 89_875.0), (2000.0, 79_495.0), (3000.0, 70_108.0),
    (5000.0, 54_020.0),
])
def test_standard_atmosphere_table(altitude: float, pressure: float) -> None:
    # tolerance 1 Pa: the table is printed to the pascal
    assert atmospheric_pressure(altitude) == pytest.approx(pressure, abs=1.0)


def test_atmosphere_series_in_series_out_and_limits() -> None:
    series = pd.Series([0.0, 1000.0, 12_000.0], index=["a", "b", "c"])
    out = atmospheric_pressure(series)
    assert isinstance(out, pd.Series) and list(out.index) == ["a", "b", "c"]
    assert math.isnan(out["c"])  # above the troposphere the formula does not hold
    assert math.isnan(atmospheric_pressure(float("nan")))
