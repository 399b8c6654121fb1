"""Lost energy and money from the weekly relative loss (analytics.energy)."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from analytics.drift import weekly_drift
from analytics.energy import (
    J_PER_MWH,
    j_to_mwh,
    lost_energy,
    mwh_to_j,
    weekly_generated_energy,
    weekly_lost_energy,
)


def test_mwh_constant_and_round_trip() -> None:
    # 1 h = 3600 s (SI Brochure, 9th ed., table 8): 1 MWh = 1e6 W * 3600 s
    assert J_PER_MWH == 1e6 * 3600.0
    assert j_to_mwh(7.2e9) == pytest.approx(2.0)
    values = np.array([0.0, 1.5, -3.0])
    assert np.allclose(j_to_mwh(mwh_to_j(values)), values)


def test_lost_energy_worked_example_step_by_step() -> None:
    # hand computation (domain.md §4): 100 MWh at eta_i = 0.90 against eta_ref = 0.92
    # r = 0.92 / 0.90 - 1 = 0.02222..., E_lost = 100 MWh * r = 2.2222 MWh
    eta_i, eta_ref = 0.90, 0.92
    r = eta_ref / eta_i - 1.0
    assert r == pytest.approx(0.022222, abs=1e-6)
    out = lost_energy(mwh_to_j(100.0), r, r - 0.005, r + 0.005)
    assert j_to_mwh(out.lost) == pytest.approx(2.2222, abs=1e-4)
    assert j_to_mwh(out.low) == pytest.approx(1.7222, abs=1e-4)
    assert j_to_mwh(out.high) == pytest.approx(2.7222, abs=1e-4)
    # identity behind it: the same water at eta_ref gives 100 / 0.90 * 0.92 MWh
    assert 100.0 + j_to_mwh(out.lost) == pytest.approx(100.0 / eta_i * eta_ref)


def test_lost_energy_sign_band_order_and_nan() -> None:
    # a unit better than its reference: eta_i 0.93 vs 0.92 -> negative (a gain)
    r = 0.92 / 0.93 - 1.0
    out = lost_energy(mwh_to_j(100.0), r, r - 0.001, r + 0.001)
    assert out.lost < 0 and j_to_mwh(out.lost) == pytest.approx(-1.07527, abs=1e-5)
    # band given in the wrong order still comes out low <= high
    swapped = lost_energy([1e9, np.nan], [0.01, 0.01], [0.02, 0.0], [0.0, 0.02])
    assert np.allclose(swapped.low[:1], [0.0]) and np.allclose(swapped.high[:1], [2e7])
    assert np.isnan(swapped.lost[1]) and np.isnan(swapped.low[1])


def _weeks() -> pd.DataFrame:
    return pd.DataFrame({
        "week": ["2026-W02", "2026-W01", "2026-W03"],
        "week_start_utc": pd.to_datetime(["2026-01-04 23:00", "2025-12-28 23:00",
                                          "2026-01-11 23:00"], utc=True),
        "generated_energy_j": mwh_to_j(np.array([50.0, 100.0, 80.0])),
        "relative_loss_median": [0.01, 0.92 / 0.90 - 1.0, np.nan],
        "relative_loss_low": [0.005, 0.92 / 0.90 - 1.0 - 0.005, np.nan],
        "relative_loss_high": [0.015, 0.92 / 0.90 - 1.0 + 0.005, np.nan],
    })


def test_weekly_lost_energy_money_and_cumulative_sum_of_bounds() -> None:
    out = weekly_lost_energy(_weeks(), 60.0, "EUR")
    assert list(out["week"]) == ["2026-W01", "2026-W02", "2026-W03"]  # sorted by time
    # W01: 2.2222 MWh (worked example above) * 60 EUR/MWh = 133.33 EUR; W02: 0.5 MWh, 30 EUR
    assert out["lost_mwh"][:2].tolist() == pytest.approx([2.22222, 0.5], abs=1e-5)
    assert out["lost_money"][:2].tolist() == pytest.approx([133.333, 30.0], abs=1e-3)
    assert out["lost_money_low"][1] == pytest.approx(0.25 * 60.0)
    assert out["lost_money_high"][1] == pytest.approx(0.75 * 60.0)
    assert np.isnan(out["lost_mwh"][2]) and (out["currency"] == "EUR").all()
    # cumulative: bounds summed (documented choice); the NaN week adds nothing
    assert out["cumulative_lost_mwh"].tolist() == pytest.approx([2.22222, 2.72222, 2.72222],
                                                                 abs=1e-5)
    assert out["cumulative_lost_mwh_low"].tolist() == pytest.approx(
        [1.72222, 1.97222, 1.97222], abs=1e-5)
    assert out["cumulative_lost_money_high"][2] == pytest.approx(
        (2.72222 + 0.75) * 60.0, abs=1e-3)


def test_weekly_lost_energy_negative_and_per_week_prices() -> None:
    frame = _weeks()
    out = weekly_lost_energy(frame, [-10.0, 50.0, 40.0], "CHF")  # per row after sorting
    # W01 at -10 CHF/MWh: money band swaps ends: low = 2.7222 * -10, high = 1.7222 * -10
    assert out["lost_money"][0] == pytest.approx(-22.2222, abs=1e-4)
    assert out["lost_money_low"][0] == pytest.approx(-27.2222, abs=1e-4)
    assert out["lost_money_high"][0] == pytest.approx(-17.2222, abs=1e-4)
    assert out["lost_money"][1] == pytest.approx(25.0)
    assert frame["week"][0] == "2026-W02"  # the input frame is not modified
    with pytest.raises(KeyError):
        weekly_lost_energy(frame.drop(columns="relative_loss_low"), 50.0, "EUR")


def test_weekly_generated_energy_in_plant_weeks_and_with_drift() -> None:
    zone = "Europe/Zurich"
    # 2026-01-04 23:30 UTC is Monday 00:30 in Zurich (W02) but Sunday in UTC (W01)
    ts = pd.to_datetime(["2026-01-04 22:30", "2026-01-04 23:30", "2026-01-05 10:00",
                         "2026-01-06 10:00"], utc=True)
    energy = mwh_to_j(np.array([10.0, 20.0, 30.0, np.nan]))
    weekly = weekly_generated_energy(ts, energy, zone)
    assert list(weekly["week"]) == ["2026-W01", "2026-W02"]
    assert j_to_mwh(weekly["generated_energy_j"]).tolist() == pytest.approx([10.0, 50.0])
    # end to end with weekly_drift: 12 steady windows in W02 at eta_i 0.90, eta_ref 0.92
    steady = pd.date_range("2026-01-05 06:00", periods=12, freq="4h", tz="UTC")
    d = np.full(12, 0.90 - 0.92)
    r = np.full(12, 0.92 / 0.90 - 1.0)
    level = weekly_drift(steady, np.full(12, 3600.0), d, r, zone)
    merged = level.merge(weekly, on=["week", "week_start_utc"], how="left")
    out = weekly_lost_energy(merged, 60.0, "EUR")
    # 50 MWh * 0.02222 = 1.1111 MWh; constant data -> the bootstrap band is a point
    assert out["lost_mwh"][0] == pytest.approx(1.11111, abs=1e-5)
    assert out["lost_mwh_low"][0] == pytest.approx(out["lost_mwh_high"][0])
    assert out["lost_money"][0] == pytest.approx(66.6667, abs=1e-4)
