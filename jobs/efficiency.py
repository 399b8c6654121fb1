"""One unit's samples -> windows with index efficiency, reference efficiency and deviation.

The glue between the store's frames and the pure functions of :mod:`analytics`:

* steadiness on the samples (:func:`analytics.steady.steady_windows`), judged on generator
  power, gross head, opening and speed;
* per steady window, from the window means: flow (flow meter, or the Winter-Kennedy index
  ``k dp^n``), net head (levels minus the penstock loss ``k_p Q^2`` and, where the plant file
  gives the low-pressure section's area, its velocity head; for a Pelton the low reference
  is the jet-circle plane), water density at the window's water temperature and
  the mean pressure of the two reference sections (IAPWS-IF97), generator efficiency,
  index efficiency, and the reference efficiency at the same turbine power and net head
  from the unit's hill chart;
* with the epoch's index constant: index efficiency on the reference scale, deviation and
  relative energy loss.
"""

from __future__ import annotations

from dataclasses import dataclass
from datetime import UTC, datetime

import numpy as np
import pandas as pd

from analytics.cavitation import (
    critical_sigma_correlation,
    critical_sigma_from_curve,
    plant_sigma,
    sigma_margin,
)
from analytics.hillchart import HillChart
from analytics.index_test import (
    deviation,
    generator_efficiency,
    index_efficiency,
    net_head,
    relative_energy_loss,
    turbine_power,
    winter_kennedy_flow,
)
from analytics.similarity import specific_speed_nq
from analytics.site import atmospheric_pressure
from analytics.steady import SteadyTolerances, steady_windows
from analytics.water import density
from ingest.plant_file import UnitSpec
from jobs.unit_samples import CONDITION_SIGNALS

#: Water temperature assumed where a unit has no water-temperature signal [K] (10 degC);
#: 10 K of error moves the density by ~0.1 %, a constant offset the index constant absorbs.
DEFAULT_WATER_TEMPERATURE = 283.15

#: Density used only to estimate the section pressures at which the density is evaluated
#: [kg/m3]; 0.1 % off there moves the IAPWS-IF97 density by ~5e-8.
HYDROSTATIC_DENSITY = 1000.0

#: Nominal sample interval used when a batch is too short to infer one [s].
FALLBACK_SAMPLE_INTERVAL = 600.0


def unit_tolerances(spec: UnitSpec) -> SteadyTolerances:
    """The steady-window tolerances of a unit: its plant-file overrides, else the defaults."""
    overrides = getattr(spec, "steady", None)
    if overrides is None:
        return SteadyTolerances()
    return SteadyTolerances(**overrides.model_dump(exclude_none=True))


def generator_curve(spec: UnitSpec) -> tuple[np.ndarray | None, np.ndarray]:
    """The unit's generator efficiency as (powers [W] or None, efficiencies)."""
    curve = spec.generator_efficiency
    if isinstance(curve, float):
        return None, np.asarray(curve)
    return (np.array([p.power for p in curve], dtype=float),
            np.array([p.efficiency for p in curve], dtype=float))


@dataclass
class WindowResults:
    """Computed windows of one unit (all slots with samples, steady or not)."""

    frame: pd.DataFrame
    window_s: int

    @property
    def count(self) -> int:
        return len(self.frame)

    @property
    def steady(self) -> int:
        return int(self.frame["steady"].sum()) if len(self.frame) else 0

    def rows(self, *, unit_id: int, reference_model_id: int, code_version: str) -> list[dict]:
        """Rows for ``efficiency_windows`` (None for missing values)."""
        f = self.frame
        if f.empty:
            return []
        starts = [datetime.fromtimestamp(int(s), tz=UTC) for s in f["window_start"]]
        cols = {
            "generator_power": "mean_power", "net_head": "net_head", "flow": "flow",
            "opening": "mean_opening", "blade_angle": "mean_blade_angle",
            "water_temperature": "mean_water_temperature", "water_density": "rho",
            "generator_efficiency": "eta_gen", "eta_index_raw": "eta_raw",
            "eta_index": "eta_index", "eta_reference": "eta_ref", "deviation": "deviation",
            "relative_loss": "relative_loss",
            "tailwater_level": "mean_tailwater_level",
            **{name: f"mean_{name}" for name in CONDITION_SIGNALS},
            "sigma_plant": "sigma_plant", "sigma_margin": "sigma_margin",
        }
        values = {k: _none_nan(f[v].to_numpy(dtype=float)) if v in f else [None] * len(f)
                  for k, v in cols.items()}
        out = []
        for i in range(len(f)):
            row = {k: values[k][i] for k in cols}
            row.update(unit_id=unit_id, start=starts[i], duration_s=float(f["duration_s"].iat[i]),
                       n_samples=int(f["n_samples"].iat[i]), steady=bool(f["steady"].iat[i]),
                       unsteady_reasons=int(f["reason"].iat[i]),
                       energy_j=float(np.nan_to_num(f["energy_j"].iat[i])),
                       reference_model_id=reference_model_id, code_version=code_version)
            out.append(row)
        return out


def _none_nan(a: np.ndarray) -> list[float | None]:
    return [None if not np.isfinite(v) else float(v) for v in a]


def sample_interval(ts_s: np.ndarray) -> float:
    """The batch's nominal sample interval [s]: the median spacing, rounded to 1 s.

    The median is taken over at most ~100,000 evenly spread spacings: the same answer for
    any regular export, at a fraction of the cost on long batches.
    """
    if ts_s.size < 3:
        return FALLBACK_SAMPLE_INTERVAL
    spacing = np.diff(ts_s)
    step = max(1, spacing.size // 100_000)
    return float(max(1.0, np.round(np.median(spacing[::step]))))


def unit_windows(samples: pd.DataFrame, *, spec: UnitSpec, plant_elevation: float,
                 gravity: float, chart: HillChart, tolerances: SteadyTolerances,
                 index_constant: float | None, flow_basis: str) -> WindowResults:
    """Windows of one unit from its samples (frame of :func:`jobs.unit_samples.read_unit_samples`).

    Parameters
    ----------
    samples : ``ts_us`` [us] and SI signal columns, sorted by time
    spec : the unit's configuration in force
    plant_elevation : [m] a.s.l., for the atmospheric pressure (ISO 2533)
    gravity : [m/s2] local gravity (IEC 60041)
    chart : the reference hill chart
    tolerances : steady-window tolerances
    index_constant : the epoch's constant, or None while the baseline is open
    flow_basis : "flow_meter" (absolute) or "winter_kennedy" (index)
    """
    if samples.empty:
        return WindowResults(pd.DataFrame(columns=["window_start", "duration_s", "n_samples",
                                                   "steady", "reason", "energy_j"]),
                             tolerances.window_s)
    ts = samples["ts_us"].to_numpy(dtype=np.int64) // 1_000_000
    if spec.runner_type == "pelton":
        low = np.full(ts.shape, spec.runner_reference_elevation)
    else:
        low = samples["tailwater_level"].to_numpy(dtype=float)
    headwater = samples["headwater_level"].to_numpy(dtype=float)
    signals = {
        "power": samples["active_power"].to_numpy(dtype=float),
        "head": headwater - low,
        "opening": samples["gate_opening"].to_numpy(dtype=float),
        "speed": samples["rotational_speed"].to_numpy(dtype=float),
        "wk_differential_pressure": samples["wk_differential_pressure"].to_numpy(dtype=float),
        "flow_rate": samples["flow_rate"].to_numpy(dtype=float),
        "water_temperature": samples["water_temperature"].to_numpy(dtype=float),
        "blade_angle": samples["blade_angle"].to_numpy(dtype=float),
        "tailwater_level": samples["tailwater_level"].to_numpy(dtype=float),
    }
    for name in CONDITION_SIGNALS:
        if name in samples:
            signals[name] = samples[name].to_numpy(dtype=float)
    for name in [n for n in signals if n not in ("power", "head")]:
        if np.isnan(signals[name]).all():
            # not exported for this unit: nothing to average, and for opening and speed no
            # band to check (an all-NaN column would also take the slow NaN path)
            del signals[name]
    frame = steady_windows(ts, signals, rated_power=spec.rated_power, tolerances=tolerances,
                           sample_interval=sample_interval(ts))
    return WindowResults(
        window_efficiency(frame, spec=spec, plant_elevation=plant_elevation, gravity=gravity,
                          chart=chart, index_constant=index_constant, flow_basis=flow_basis),
        tolerances.window_s)


def window_efficiency(frame: pd.DataFrame, *, spec: UnitSpec, plant_elevation: float,
                      gravity: float, chart: HillChart, index_constant: float | None,
                      flow_basis: str) -> pd.DataFrame:
    """Add flow, net head, density, efficiencies and deviation to the steady windows."""
    f = frame.copy()
    steady = f["steady"].to_numpy(dtype=bool)
    p_gen = f["mean_power"].to_numpy(dtype=float)
    gross = f["mean_head"].to_numpy(dtype=float)
    curve_p, curve_eta = generator_curve(spec)
    eta_gen = np.asarray(generator_efficiency(p_gen, curve_p, curve_eta), dtype=float)
    p_turb = np.asarray(turbine_power(p_gen, eta_gen), dtype=float)
    nan = np.full(len(f), np.nan)
    for name in ("mean_flow_rate", "mean_wk_differential_pressure", "mean_water_temperature",
                 "mean_opening", "mean_blade_angle"):
        if name not in f:
            f[name] = nan
    if flow_basis == "flow_meter":
        flow = f["mean_flow_rate"].to_numpy(dtype=float)
        loss_flow = flow
    else:
        dp = f["mean_wk_differential_pressure"].to_numpy(dtype=float)
        k = spec.winter_kennedy_coefficient
        flow = np.asarray(winter_kennedy_flow(dp, 1.0 if k is None else k,
                                              spec.winter_kennedy_exponent), dtype=float)
        # an uncalibrated index is no flow in m3/s: the penstock loss then takes the
        # reference's flow at this power (a few % off at most, on a loss of a few % of H)
        loss_flow = flow if k is not None else chart.flow_at_power(p_turb, gross)
    head = np.asarray(net_head(gross, 0.0, flow=np.nan_to_num(loss_flow),
                               penstock_loss_coefficient=spec.penstock_loss_coefficient,
                               outlet_area=spec.outlet_section_area, g=gravity), dtype=float)
    temperature = f["mean_water_temperature"].to_numpy(dtype=float)
    temperature = np.where(np.isfinite(temperature), temperature, DEFAULT_WATER_TEMPERATURE)
    # density at the mean absolute pressure of the high- and low-pressure sections
    pressure = (atmospheric_pressure(plant_elevation)
                + 0.5 * HYDROSTATIC_DENSITY * gravity * head)
    rho = np.asarray(density(temperature, np.where(np.isfinite(pressure), pressure,
                                                   atmospheric_pressure(0.0))), dtype=float)
    eta_raw = np.asarray(index_efficiency(p_gen, eta_gen, flow, head, rho, gravity), dtype=float)
    f["sigma_plant"], f["sigma_margin"] = window_sigma(
        f, spec=spec, chart=chart, head=head, rho=rho, gravity=gravity,
        plant_elevation=plant_elevation, turbine_power=p_turb)
    eta_ref = chart.efficiency_at_power(p_turb, head)
    f["net_head"] = np.where(steady, head, nan)
    f["flow"] = np.where(steady, flow, nan)
    f["rho"] = np.where(steady, rho, nan)
    f["eta_gen"] = np.where(steady, eta_gen, nan)
    f["eta_raw"] = np.where(steady, eta_raw, nan)
    f["eta_ref"] = np.where(steady, eta_ref, nan)
    if index_constant is not None:
        eta_i = np.where(steady, eta_raw / index_constant, nan)
        f["eta_index"] = eta_i
        f["deviation"] = np.asarray(deviation(eta_i, f["eta_ref"].to_numpy()), dtype=float)
        f["relative_loss"] = np.asarray(relative_energy_loss(eta_i, f["eta_ref"].to_numpy()),
                                        dtype=float)
    else:
        f["eta_index"] = nan
        f["deviation"] = nan
        f["relative_loss"] = nan
    return f


def window_sigma(f: pd.DataFrame, *, spec: UnitSpec, chart: HillChart, head: np.ndarray,
                 rho: np.ndarray, gravity: float, plant_elevation: float,
                 turbine_power: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Plant Thoma sigma and its margin (ratio sigma_p / sigma_c) per window.

    sigma_c comes from the unit's ``sigma_curve`` against load when the plant file gives
    one, else from the published correlation against the specific speed n_q of the
    reference's best-efficiency point (:func:`analytics.cavitation.critical_sigma_correlation`).
    Pelton runners have no Thoma number (NaN): they run above the tailwater in air.
    """
    nan = np.full(len(f), np.nan)
    if spec.runner_type == "pelton" or "mean_tailwater_level" not in f:
        return nan, nan
    temperature = f["mean_water_temperature"].to_numpy(dtype=float)
    temperature = np.where(np.isfinite(temperature), temperature, DEFAULT_WATER_TEMPERATURE)
    sigma_p = np.asarray(plant_sigma(head, f["mean_tailwater_level"].to_numpy(dtype=float),
                                     spec.runner_reference_elevation, temperature,
                                     plant_elevation, rho=rho, g=gravity), dtype=float)
    if spec.sigma_curve:
        curve = np.array(spec.sigma_curve, dtype=float)
        sigma_c = np.asarray(critical_sigma_from_curve(turbine_power / spec.rated_power,
                                                       curve[:, 0], curve[:, 1]), dtype=float)
    else:
        bep = chart.best_efficiency_point(float(np.clip(spec.rated_head, chart.heads[0],
                                                        chart.heads[-1])))
        nq = float(specific_speed_nq(spec.rated_speed, bep.flow, bep.head))
        sigma_c = np.full(len(f), float(critical_sigma_correlation(nq, spec.runner_type)))
    return sigma_p, np.asarray(sigma_margin(sigma_p, sigma_c), dtype=float)
