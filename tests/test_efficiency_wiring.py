"""jobs.efficiency: the window chain from means to index efficiency, checked by hand.

Each expected value is recomputed here from its definition (IEC 60041: E = gH, net head
between the two reference sections, eta = P_turbine / (rho g Q H)) with the reference
library for water (iapws, IAPWS-97) rather than the project's own water module.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from iapws import IAPWS97

from analytics.site import atmospheric_pressure
from hydrodrift.demofleet import write_plant_files
from hydrodrift.demofleet.physics import unit_physics
from hydrodrift.demofleet.scenario import DEFAULT_START
from jobs.efficiency import sample_interval, window_efficiency


@pytest.fixture(scope="module")
def glf(tmp_path_factory: pytest.TempPathFactory):
    written = write_plant_files(tmp_path_factory.mktemp("plants"), DEFAULT_START)
    return next(pf for _, pf in written if pf.plant.code == "GLF")


def _frame(power: float, gross: float, dp: float, temperature_k: float) -> pd.DataFrame:
    return pd.DataFrame({
        "window_start": [0], "duration_s": [1800.0], "n_samples": [3], "steady": [True],
        "reason": [0], "energy_j": [power * 1800.0], "mean_power": [power],
        "mean_head": [gross], "mean_wk_differential_pressure": [dp],
        "mean_water_temperature": [temperature_k],
    })


def test_window_efficiency_follows_the_definitions(glf, tmp_path: Path) -> None:
    spec = glf.unit("MG2")
    chart = unit_physics("GLF", "MG2").chart
    g = 9.8035
    p_gen, gross, dp, t_k = 70e6, 505.0, 1.3e5, 278.15
    f = window_efficiency(_frame(p_gen, gross, dp, t_k), spec=spec, plant_elevation=1480.0,
                          gravity=g, chart=chart, index_constant=None,
                          flow_basis="winter_kennedy")
    k, n = spec.winter_kennedy_coefficient, spec.winter_kennedy_exponent
    q = k * dp**n  # Winter-Kennedy, IEC 60041 index method
    h = gross - spec.penstock_loss_coefficient * q**2
    p_mean = atmospheric_pressure(1480.0) + 0.5 * 1000.0 * g * h
    rho = IAPWS97(T=t_k, P=p_mean / 1e6).rho  # reference library (IAPWS-IF97)
    curve = spec.generator_efficiency
    eta_gen = np.interp(p_gen, [c.power for c in curve], [c.efficiency for c in curve])
    eta = (p_gen / eta_gen) / (rho * g * q * h)
    assert f["flow"].iat[0] == pytest.approx(q, rel=1e-12)
    assert f["net_head"].iat[0] == pytest.approx(h, rel=1e-12)
    assert f["rho"].iat[0] == pytest.approx(rho, rel=1e-6)
    assert f["eta_raw"].iat[0] == pytest.approx(eta, rel=1e-6)
    assert f["eta_ref"].iat[0] == pytest.approx(
        float(chart.efficiency_at_power(p_gen / eta_gen, h)), rel=1e-12)
    assert np.isnan(f["deviation"].iat[0])  # no index constant yet: no deviation

    k_idx = 1.004
    g2 = window_efficiency(_frame(p_gen, gross, dp, t_k), spec=spec, plant_elevation=1480.0,
                           gravity=g, chart=chart, index_constant=k_idx,
                           flow_basis="winter_kennedy")
    assert g2["eta_index"].iat[0] == pytest.approx(eta / k_idx, rel=1e-6)
    assert g2["deviation"].iat[0] == pytest.approx(eta / k_idx - g2["eta_ref"].iat[0], abs=1e-9)
    assert g2["relative_loss"].iat[0] == pytest.approx(
        g2["eta_ref"].iat[0] / (eta / k_idx) - 1.0, rel=1e-9)


def test_outlet_velocity_head_comes_off_the_net_head(glf) -> None:
    spec = glf.unit("MG2")
    chart = unit_physics("GLF", "MG2").chart
    area = 3.2  # [m2], a draft-tube outlet of this size (invented for the check)
    with_area = spec.model_copy(update={"outlet_section_area": area})
    args = dict(plant_elevation=1480.0, gravity=9.81, chart=chart, index_constant=None,
                flow_basis="winter_kennedy")
    plain = window_efficiency(_frame(70e6, 505.0, 1.3e5, 280.0), spec=spec, **args)
    less = window_efficiency(_frame(70e6, 505.0, 1.3e5, 280.0), spec=with_area, **args)
    q = plain["flow"].iat[0]
    v = q / area
    assert plain["net_head"].iat[0] - less["net_head"].iat[0] == pytest.approx(
        v**2 / (2 * 9.81), rel=1e-9)


def test_unsteady_windows_get_no_efficiency(glf) -> None:
    frame = _frame(70e6, 505.0, 1.3e5, 280.0)
    frame["steady"] = False
    f = window_efficiency(frame, spec=glf.unit("MG2"), plant_elevation=1480.0, gravity=9.81,
                          chart=unit_physics("GLF", "MG2").chart, index_constant=1.0,
                          flow_basis="winter_kennedy")
    assert f[["eta_raw", "eta_ref", "eta_index", "deviation"]].isna().all(axis=None)
    assert f["energy_j"].iat[0] == 70e6 * 1800.0  # energy still counts


def test_sample_interval_is_the_median_spacing() -> None:
    ts = np.cumsum(np.r_[0, np.full(500, 600), [1200], np.full(500, 600)])
    assert sample_interval(ts) == 600.0
    assert sample_interval(np.array([0, 600])) == 600.0  # too short: the fallback
