"""How the fictional plants run: load, unit commitment, levels, temperatures, sensor noise.

Everything here is invented behaviour meant to look like plant data, vectorised with numpy:

- Glimmerfels (storage): demand with a daily double peak, quieter weekends, more winter
  generation and must-run around the clock during the snowmelt (May-July); the reservoir
  is drawn down over the winter and refills in summer; tailwater rises with plant flow.
- Lantern Bend (run-of-river): river flow with a spring freshet, a late-summer low and a
  few storm events; the plant turns the available flow into power with a little daily
  pondage; tailwater rises with the river flow, so the head falls in floods.
- Both: hourly set points shared between the online units in proportion to their rating,
  units started and stopped with hysteresis, minimum loads, head-limited capacity,
  planned outages, water temperature with the seasons, bearings warming with a lag.
- Signature episodes (:data:`scenario.SIGNATURES`): a tailwater drawdown and a unit held
  at high load (cavitation), a unit held at part load (vortex rope), a fouled bearing
  cooler; :class:`SignatureState` carries their intensities into the signals.

All quantities are SI (W, m, m3/s, Pa, rad/s, K).
"""

from __future__ import annotations

import zlib
from collections.abc import Sequence
from dataclasses import dataclass, field
from datetime import datetime, timedelta

import numpy as np
import pandas as pd
from numpy.typing import NDArray
from scipy.signal import lfilter

from analytics.site import atmospheric_pressure, local_gravity
from analytics.water import density
from hydrodrift.demofleet.hydraulics import (
    OperatingPoint,
    operating_point,
    wk_differential_pressure,
)
from hydrodrift.demofleet.physics import (
    CAM_FOLLOWING,
    REFERENCE_G,
    cam_angle,
    reference_rho,
    unit_physics,
)
from hydrodrift.demofleet.scenario import (
    CONDITIONS,
    OUTAGES,
    SAMPLE_SECONDS,
    SIGNATURES,
    YEAR_SECONDS,
    PlantDesign,
    Signature,
    UnitDesign,
)
from ingest.plant_file import PlantFile, UnitSpec

SAMPLES_PER_HOUR = 3600 // SAMPLE_SECONDS
ZERO_CELSIUS_K = 273.15  # the Celsius scale's zero in kelvin (definition)
#: First-order time constant of bearing metal temperatures [s] (invented, tens of minutes).
BEARING_TAU_S = 2700.0


def rng_for(seed: int, *keys: str) -> np.random.Generator:
    """An independent, reproducible random stream for ``seed`` and a few name keys."""
    return np.random.default_rng([seed, *(zlib.crc32(k.encode()) for k in keys)])


def ar1(rng: np.random.Generator, n: int, phi: float, sigma: float) -> NDArray:
    """Stationary AR(1) noise of standard deviation ``sigma`` and lag-one correlation ``phi``."""
    innovations = rng.standard_normal(n) * sigma * np.sqrt(1.0 - phi**2)
    x0 = rng.standard_normal() * sigma
    out, _ = lfilter([1.0], [1.0, -phi], innovations, zi=[phi * x0])
    return out


def first_order_lag(u: NDArray, tau_s: float) -> NDArray:
    """Discrete first-order lag of ``u`` sampled every SAMPLE_SECONDS, starting settled."""
    alpha = 1.0 - np.exp(-SAMPLE_SECONDS / tau_s)
    out, _ = lfilter([alpha], [1.0, -(1.0 - alpha)], u, zi=[(1.0 - alpha) * u[0]])
    return out


def _bump(day_of_year: NDArray, centre: float, width: float) -> NDArray:
    """Gaussian bump over the day of year, wrapping at the year's end."""
    d = (day_of_year - centre + 182.625) % 365.25 - 182.625
    return np.exp(-((d / width) ** 2))


@dataclass
class Calendar:
    """The sample times and their plant-local calendar (arrays of one length)."""

    times: pd.DatetimeIndex  # UTC
    local_hour: NDArray  # fractional hour of the local day
    weekday: NDArray  # 0 = Monday, local
    day_of_year: NDArray  # fractional, local
    seconds: NDArray  # since the start [s]

    @property
    def hourly(self) -> slice:
        """Every hour's first sample."""
        return slice(None, None, SAMPLES_PER_HOUR)


def calendar(start: datetime, days: int, timezone: str) -> Calendar:
    """Sample times from ``start`` (UTC) over ``days`` days, with the local calendar."""
    times = pd.date_range(start, periods=days * 24 * SAMPLES_PER_HOUR,
                          freq=f"{SAMPLE_SECONDS}s", tz="UTC")
    local = times.tz_convert(timezone)
    hour = local.hour.to_numpy() + local.minute.to_numpy() / 60.0
    return Calendar(
        times=times, local_hour=hour, weekday=local.day_of_week.to_numpy(),
        day_of_year=local.day_of_year.to_numpy() - 1 + hour / 24.0,
        seconds=(times - times[0]).total_seconds().to_numpy(),
    )


def degradation(plant: str, unit: str, times: pd.DatetimeIndex) -> NDArray:
    """Efficiency lost by ``unit`` at ``times`` under :data:`scenario.CONDITIONS` (fraction)."""
    lost = np.zeros(len(times))
    seconds = _seconds(times)
    for c in CONDITIONS:
        if (c.plant, c.unit) != (plant, unit):
            continue
        since = c.since.timestamp()
        if c.kind == "gradual":
            lost += c.rate_points_per_year / 100.0 * np.maximum(seconds - since, 0.0) / YEAR_SECONDS
        else:
            lost += np.where(seconds >= since, c.step_points / 100.0, 0.0)
    return lost


def availability(plant: str, unit: str, times: pd.DatetimeIndex) -> NDArray:
    """False while ``unit`` is in a planned outage."""
    ok = np.ones(len(times), dtype=bool)
    for o in OUTAGES:
        if (o.plant, o.unit) == (plant, unit):
            ok &= ~((times >= o.start) & (times < o.start + o.duration))
    return ok


def _seconds(times: pd.DatetimeIndex) -> NDArray:
    return times.as_unit("ns").asi8 / 1e9  # resolution-safe (pandas 3 may hold s or us)


def _mine(signatures: Sequence[Signature], plant: str, kind: str,
          unit: str | None = None) -> list[Signature]:
    return [s for s in signatures if s.plant == plant and s.signature == kind
            and (unit is None or s.unit == unit)]


def episode_mask(signature: Signature, times: pd.DatetimeIndex) -> NDArray:
    """True at ``times`` inside the episode's ``[start, end)``."""
    t = _seconds(times)
    return (t >= signature.start.timestamp()) & (t < signature.end.timestamp())


def _trapezoid(times: pd.DatetimeIndex, signature: Signature, ramp_s: float) -> NDArray:
    """0 outside the episode, linear ramps of ``ramp_s`` inside its two ends, 1 between."""
    t = _seconds(times)
    rise = np.clip((t - signature.start.timestamp()) / ramp_s, 0.0, 1.0)
    fall = np.clip((signature.end.timestamp() - t) / ramp_s, 0.0, 1.0)
    return np.minimum(rise, fall)


def drawdown_share(plant: str, times: pd.DatetimeIndex,
                   signatures: Sequence[Signature] = SIGNATURES) -> tuple[NDArray, NDArray]:
    """Tailwater drawdown [m] of the plant's cavitation episodes and its share of full (0..1)."""
    depth, share = np.zeros(len(times)), np.zeros(len(times))
    for s in _mine(signatures, plant, "cavitation"):
        m = s.magnitude
        shape = _trapezoid(times, s, m["drawdown_ramp_s"])
        depth += m["tailwater_drawdown_m"] * shape
        share = np.maximum(share, shape)
    return depth, share


@dataclass
class SignatureState:
    """What the planted episodes do to one unit, per sample (zeros outside them).

    cavitation : intensity 0..1 (drawdown share x load ramp, online only)
    efficiency_deficit : turbine efficiency lost to cavitation (fraction)
    hf_vibration_rise : [m/s2] added RMS acceleration
    rope : vortex-rope intensity 0..1 (episode x Gaussian in load, online only)
    pulsation_rise_of_head : added pulsation peak to peak, as a fraction of rho g H
    bearing_rise_factor : fraction added to the guide bearing's rise over cooling water
    """

    cavitation: NDArray
    efficiency_deficit: NDArray
    hf_vibration_rise: NDArray
    rope: NDArray
    pulsation_rise_of_head: NDArray
    bearing_rise_factor: NDArray


def signature_state(plant: str, unit: str, times: pd.DatetimeIndex, load: NDArray,
                    online: NDArray,
                    signatures: Sequence[Signature] = SIGNATURES) -> SignatureState:
    """The episodes of :data:`scenario.SIGNATURES` on ``unit`` at ``times``.

    Parameters
    ----------
    load : generator power / rated power (the dispatched set point)
    online : bool, the unit runs
    """
    n = len(times)
    state = SignatureState(*(np.zeros(n) for _ in range(6)))
    _, share = drawdown_share(plant, times, signatures)
    for s in _mine(signatures, plant, "cavitation", unit):
        m = s.magnitude
        ramp = np.clip((load - m["onset_load_fraction"])
                       / (m["full_load_fraction"] - m["onset_load_fraction"]), 0.0, 1.0)
        here = np.where(online & episode_mask(s, times), share * ramp, 0.0)
        state.cavitation += here
        state.efficiency_deficit += m["efficiency_deficit_fraction"] * here
        state.hf_vibration_rise += m["hf_vibration_rise_m_s2"] * here
    for s in _mine(signatures, plant, "vortex_rope", unit):
        m = s.magnitude
        rope = np.exp(-(((load - m["rope_load_fraction"]) / m["rope_load_width_fraction"])
                        ** 2))
        here = np.where(online & episode_mask(s, times), rope, 0.0)
        state.rope += here
        state.pulsation_rise_of_head += m["pulsation_rise_of_head"] * here
    for s in _mine(signatures, plant, "bearing", unit):
        m = s.magnitude
        fouling = np.where(episode_mask(s, times), np.clip(
            (_seconds(times) - s.start.timestamp()) / m["ramp_s"], 0.0, 1.0), 0.0)
        state.bearing_rise_factor += m["rise_factor"] * fouling
    return state


def _hold_loads(design: PlantDesign, cal: Calendar, demand: NDArray, power: NDArray,
                rated: NDArray, min_load: NDArray, capacity: NDArray, available: NDArray,
                priority: NDArray, signatures: Sequence[Signature]) -> NDArray:
    """Hourly set points during cavitation and vortex-rope episodes: the episode's unit is
    held in its load band, the others share what is left of the demand, up to the
    episode's cap (a cap of 0: they stand by). Hours outside the episodes keep the normal
    commitment."""
    hours = cal.times[cal.hourly]
    codes = [u.code for u in design.units]
    power = power.copy()
    for s in signatures:
        if s.plant != design.code or s.signature not in ("cavitation", "vortex_rope"):
            continue
        k = codes.index(s.unit)
        window = episode_mask(s, hours) & available[k]
        if not window.any():
            continue
        m = s.magnitude
        low, high = m["unit_load_min_fraction"], m["unit_load_max_fraction"]
        if s.signature == "cavitation":
            target = np.clip(demand[window] / rated[k], low, high)
            cap_others = m["other_units_load_max_fraction"]
        else:  # a slow daily swing through the part-load band (invented)
            hour_of_day = cal.local_hour[cal.hourly][window]
            target = low + (high - low) * (0.5 + 0.5 * np.sin(2 * np.pi * hour_of_day / 24.0))
            cap_others = 1.0
        held = np.minimum(target * rated[k], capacity[k, window])
        others = np.array([u for u in range(len(codes)) if u != k])
        order = priority[window]
        remap = np.full(len(codes), -1)
        remap[others] = np.arange(others.size)
        sub_priority = remap[order[order != k].reshape(order.shape[0], -1)]
        cells = (others[:, None], np.flatnonzero(window)[None, :])
        if cap_others <= 0.0:  # the other units stand by
            power[cells] = 0.0
        else:
            sub_capacity = np.minimum(capacity[others][:, window],
                                      cap_others * rated[others, None])
            power[cells] = commit_units(
                np.maximum(demand[window] - held, 0.0), rated[others], min_load[others],
                sub_capacity, available[others][:, window], sub_priority)
        power[k, window] = held
    return power


def commit_units(demand: NDArray, rated: NDArray, min_load: NDArray, capacity: NDArray,
                 available: NDArray, priority: NDArray, *, start_margin: float = 0.92,
                 stop_margin: float = 0.78) -> NDArray:
    """Hourly unit commitment and load sharing.

    Parameters
    ----------
    demand : (hours,) [W] plant set point
    rated : (units,) [W] rated power
    min_load : (units,) fraction of rated power
    capacity : (units, hours) [W] head-limited maximum power
    available : (units, hours) bool
    priority : (hours, units) unit indices, first started first
    start_margin, stop_margin : a unit starts when demand passes ``start_margin`` of the
        online capacity; one stops only when demand falls below ``stop_margin`` of the
        capacity without it (hysteresis against hourly start-stop cycling)

    Returns
    -------
    (units, hours) [W] generator power set points, 0 when stopped.
    """
    n_units, n_hours = capacity.shape
    power = np.zeros((n_units, n_hours))
    count = 0
    for h in range(n_hours):
        d = demand[h]
        order = [u for u in priority[h] if available[u, h]]
        if d <= 0.0 or not order:
            count = 0
            continue
        caps = np.cumsum(capacity[order, h])
        need = min(int(np.searchsorted(caps * start_margin, d)) + 1, len(order))
        keep = min(count, len(order))
        if need < keep and d > stop_margin * caps[keep - 2]:
            need = keep
        if d < 0.5 * min_load[order[0]] * rated[order[0]]:
            need = 0
        chosen = order[:need]
        if chosen:
            share = d / rated[chosen].sum()
            for u in chosen:
                power[u, h] = np.clip(share * rated[u], min_load[u] * rated[u], capacity[u, h])
        count = need
    return power


@dataclass
class PlantSimulation:
    """Noise-free truth and measured signals of one plant over the span."""

    design: PlantDesign
    plant: PlantFile
    cal: Calendar
    headwater: NDArray  # [m]
    tailwater: NDArray  # [m]
    water_temperature: NDArray  # [K]
    river_flow: NDArray | None  # [m3/s], run-of-river plant only
    #: ``degradation`` of each operating point includes the cavitation deficit, which
    #: ``signatures[code].efficiency_deficit`` gives on its own
    units: dict[str, OperatingPoint] = field(default_factory=dict)
    signatures: dict[str, SignatureState] = field(default_factory=dict)  # by unit code
    clean: dict[str, NDArray] = field(default_factory=dict)  # noise-free, SI, by tag
    measured: dict[str, NDArray] = field(default_factory=dict)  # with sensor noise, by tag


def _hourly(x: NDArray) -> NDArray:
    return np.repeat(x, SAMPLES_PER_HOUR)


def _capacity(spec: UnitSpec, gross_head: NDArray) -> NDArray:
    """Head-limited maximum power: rated power times (H/H_rated)^1.5, at most rated."""
    return spec.rated_power * np.minimum(1.0, (np.maximum(gross_head, 0.0) /
                                               spec.rated_head) ** 1.5)


def _priority(cal: Calendar, n_units: int) -> NDArray:
    """Start order rotating every week of the span (balances running hours)."""
    week = (cal.seconds[cal.hourly] // (7 * 86400.0)).astype(int)
    base = np.arange(n_units)
    return np.array([np.roll(base, -(w % n_units)) for w in week])


def _dispatch(design: PlantDesign, plant: PlantFile, cal: Calendar, demand: NDArray,
              gross_head_h: dict[str, NDArray], interleave: tuple[int, ...],
              signatures: Sequence[Signature]) -> NDArray:
    specs = plant.units
    rated = np.array([u.rated_power for u in specs])
    min_load = np.array([u.min_load for u in design.units])
    capacity = np.array([_capacity(s, gross_head_h[s.code]) for s in specs])
    available = np.array([availability(design.code, s.code, cal.times[cal.hourly])
                          for s in specs])
    priority = np.asarray(interleave)[_priority(cal, len(specs))]
    power = commit_units(demand, rated, min_load, capacity, available, priority)
    return _hold_loads(design, cal, demand, power, rated, min_load, capacity, available,
                       priority, signatures)


def _glimmerfels(design: PlantDesign, plant: PlantFile, cal: Calendar, seed: int,
                 signatures: Sequence[Signature]) -> tuple[NDArray, NDArray, NDArray, NDArray]:
    """Headwater, tailwater, water temperature [K] and unit power (units, samples) [W]."""
    n = len(cal.times)
    doy = cal.day_of_year
    headwater = (1986.5 + 18.0 * np.cos(2 * np.pi * (doy - 280.0) / 365.25)
                 + ar1(rng_for(seed, "GLF", "headwater"), n, 0.999, 0.15))
    sl = cal.hourly
    melt = _bump(doy[sl], 170.0, 28.0)
    season = 0.40 + 0.15 * np.cos(2 * np.pi * (doy[sl] - 15.0) / 365.25) + 0.32 * melt
    h = cal.local_hour[sl]
    daily = np.minimum(1.0, 0.45 + 0.55 * (np.exp(-(((h - 9.0) / 2.5) ** 2))
                                           + 0.85 * np.exp(-(((h - 19.0) / 2.0) ** 2))))
    weekly = np.array([1.0, 1.0, 1.0, 1.0, 1.0, 0.85, 0.70])[cal.weekday[sl]]
    shape = (daily * weekly) ** (1.0 - 0.8 * melt)  # snowmelt: must-run, flatter days
    noise = 1.0 + ar1(rng_for(seed, "GLF", "demand"), season.size, 0.9, 0.12)
    capacity_w = sum(u.rated_power for u in plant.units)
    fraction = np.clip(1.6 * season * shape * noise, 0.0, 0.97)
    fraction[fraction < 0.06] = 0.0
    demand = fraction * capacity_w

    gross_h = {}
    for spec in plant.units:
        low = spec.runner_reference_elevation if spec.runner_type == "pelton" else 1479.0
        gross_h[spec.code] = headwater[sl] - low
    power_h = _dispatch(design, plant, cal, demand, gross_h, interleave=(0, 2, 1, 3),
                        signatures=signatures)
    power = np.array([_hourly(p) for p in power_h])
    # Tailwater in the outlet basin rises with plant flow (invented rating: +1 m at 55 m3/s).
    flow_est = power.sum(axis=0) / (reference_rho() * REFERENCE_G * 500.0 * 0.9)
    tailwater = 1478.0 + 0.09 * flow_est**0.6 - drawdown_share("GLF", cal.times, signatures)[0]
    water_c = (5.5 - 2.5 * np.cos(2 * np.pi * (doy - 45.0) / 365.25)
               + ar1(rng_for(seed, "GLF", "water"), n, 0.995, 0.1))
    return headwater, tailwater, water_c + ZERO_CELSIUS_K, power


def _lantern(design: PlantDesign, plant: PlantFile, cal: Calendar, seed: int,
             signatures: Sequence[Signature]
             ) -> tuple[NDArray, NDArray, NDArray, NDArray, NDArray]:
    """Headwater, tailwater, water temperature [K], river flow [m3/s], unit power [W]."""
    n = len(cal.times)
    doy = cal.day_of_year
    rng = rng_for(seed, "LBD", "storms")
    log_q = (np.log(320.0) + 0.75 * _bump(doy, 105.0, 40.0) - 0.75 * _bump(doy, 245.0, 45.0)
             + ar1(rng_for(seed, "LBD", "river"), n, 0.9995, 0.18))
    days = cal.seconds / 86400.0
    span_days = n / (24 * SAMPLES_PER_HOUR)
    for _ in range(rng.poisson(6.0 * span_days / 365.25) + 1):
        t0 = rng.uniform(0.0, span_days)
        amplitude = rng.lognormal(np.log(0.5), 0.3)
        age = days - t0
        log_q += np.where(age > 0, amplitude * (1 - np.exp(-age / 0.7)) * np.exp(-age / 5.0),
                          0.0)
    river = np.exp(log_q)
    h = cal.local_hour
    headwater = (182.0 + 0.10 * np.sin(2 * np.pi * (h - 7.0) / 24.0)
                 - 0.25 * np.clip((river - 900.0) / 1500.0, 0.0, 1.0)
                 + ar1(rng_for(seed, "LBD", "pool"), n, 0.99, 0.02))
    # Invented tailwater rating: depth ~ Q^0.4 (a wide channel), 163.5 m at 550 m3/s; less
    # any drawdown of the downstream pool (cavitation episodes)
    tailwater = 159.76 + 0.30 * river**0.4 - drawdown_share("LBD", cal.times, signatures)[0]
    sl = cal.hourly
    gross = headwater - tailwater
    available_flow = np.maximum(river - 15.0, 0.0)  # 15 m3/s stay in the fish pass
    pondage = 1.0 + 0.07 * np.sin(2 * np.pi * (h[sl] - 10.0) / 24.0)
    demand = (reference_rho() * REFERENCE_G * available_flow[sl] * gross[sl] * 0.90 * 0.975
              * pondage)
    gross_h = {s.code: gross[sl] for s in plant.units}
    power_h = _dispatch(design, plant, cal, demand, gross_h, interleave=(0, 1, 2),
                        signatures=signatures)
    power = np.array([_hourly(p) for p in power_h])
    water_c = (10.0 - 8.0 * np.cos(2 * np.pi * (doy - 30.0) / 365.25)
               + 0.3 * np.sin(2 * np.pi * (h - 15.0) / 24.0)
               + ar1(rng_for(seed, "LBD", "water"), n, 0.995, 0.2))
    return headwater, tailwater, np.maximum(water_c, 0.5) + ZERO_CELSIUS_K, river, power


#: HF vibration of a stopped unit: the accelerometer chain's floor [m/s2] (invented).
HF_VIBRATION_STOPPED_M_S2 = 0.02
#: Width in load of the healthy part-load pulsation hump (fraction of rated power, invented).
PULSATION_HUMP_WIDTH = 0.12


def _unit_signals(design: UnitDesign, spec: UnitSpec, op: OperatingPoint,
                  tailwater: NDArray, water_k: NDArray, plant_code: str,
                  blade_error: NDArray | None, state: SignatureState) -> dict[str, NDArray]:
    """Noise-free signals of one unit, by canonical signal name (SI).

    Condition-monitoring levels (all invented): HF vibration RMS
    ``a (0.35 + 0.65 load)`` plus the cavitation rise; draft-tube pulsation peak to peak
    ``(base + hump exp(-((load - at) / 0.12)^2) + rope rise) rho g H`` with ``H`` the net
    head (pressure fluctuations are scaled by the specific hydraulic energy as in IEC 60193);
    guide-bearing rise over cooling water ``g0 running + g1 load`` times ``1 + f`` during a
    fouled-cooler episode, every term through the bearing's first-order lag.
    """
    on = op.online
    load = op.generator_power / spec.rated_power
    out: dict[str, NDArray] = {"active_power": op.generator_power}
    out["wk_differential_pressure"] = wk_differential_pressure(spec, op.flow)
    out["gate_opening"] = np.where(on, op.opening, 0.0)
    if blade_error is not None:
        start_position = np.deg2rad(-8.0)  # blades parked flat at standstill (invented)
        physics = unit_physics(plant_code, spec.code)
        out["blade_angle"] = np.where(on, cam_angle(physics, op.opening, op.net_head)
                                      + blade_error, start_position)
    out["rotational_speed"] = np.where(on, spec.rated_speed, 0.0)
    if design.outlet_area_m2 > 0:
        velocity = op.flow / design.outlet_area_m2
        # Cone pressure: hydrostatic below tailwater less the recovered velocity head
        # (recovery 0.7, invented).
        submergence = tailwater - spec.runner_reference_elevation
        out["draft_tube_pressure"] = (op.rho * op.g * submergence
                                      - 0.7 * op.rho * velocity**2 / 2.0)
        base, hump, at = design.pulsation_of_head
        ratio = (base + hump * np.exp(-(((load - at) / PULSATION_HUMP_WIDTH) ** 2))
                 + state.pulsation_rise_of_head)
        out["draft_tube_pulsation"] = np.where(on, ratio * op.rho * op.g * op.net_head, 0.0)
    out["hf_vibration"] = np.where(on, design.hf_vibration_m_s2 * (0.35 + 0.65 * load)
                                   + state.hf_vibration_rise, HF_VIBRATION_STOPPED_M_S2)
    rough = np.exp(-(((load - design.rough_zone_load) / 0.12) ** 2))
    out["shaft_vibration"] = np.where(
        on, design.shaft_vibration_m * (1 + 0.1 * load) + design.rough_zone_vibration_m * rough,
        3e-6)
    out["bearing_vibration"] = np.where(
        on, design.bearing_vibration_m_s * (1 + 0.1 * load + 0.8 * rough
                                            * design.rough_zone_vibration_m
                                            / design.shaft_vibration_m), 0.05e-3)
    running = first_order_lag(on.astype(float), BEARING_TAU_S)
    loaded = first_order_lag(np.where(on, load, 0.0), BEARING_TAU_S)
    cooling = water_k + 0.4 + 0.6 * running
    out["cooling_water_temperature"] = cooling
    g0, g1 = design.guide_bearing_rise_k
    t0, t1 = design.thrust_bearing_rise_k
    # a fouled cooler: the extra heat input passes through the same lag (zero when healthy)
    fouled = first_order_lag(state.bearing_rise_factor * np.where(on, g0 + g1 * load, 0.0),
                             BEARING_TAU_S)
    out["guide_bearing_temperature"] = cooling + 2.0 + g0 * running + g1 * loaded + fouled
    out["thrust_bearing_temperature"] = cooling + 2.0 + t0 * running + t1 * loaded
    out["water_temperature"] = water_k
    if design.flow_meter:
        out["flow_rate"] = op.flow
    return out


#: Sensor noise per signal: (relative to the reading, absolute in SI) standard deviations.
#: Invented, of the order of transmitter accuracy classes (common practice: 0.1-0.5 %).
SENSOR_NOISE: dict[str, tuple[float, float]] = {
    "wk_differential_pressure": (0.003, 50.0),
    "gate_opening": (0.0, 0.001),
    "blade_angle": (0.0, np.deg2rad(0.05)),
    "draft_tube_pressure": (0.0, 400.0),
    "shaft_vibration": (0.03, 0.5e-6),
    "bearing_vibration": (0.03, 0.01e-3),
    "hf_vibration": (0.05, 0.005),
    "draft_tube_pulsation": (0.05, 30.0),
    "guide_bearing_temperature": (0.0, 0.05),
    "thrust_bearing_temperature": (0.0, 0.05),
    "cooling_water_temperature": (0.0, 0.05),
    "water_temperature": (0.0, 0.03),
    "flow_rate": (0.003, 0.005),
    "headwater_level": (0.0, 0.01),
    "tailwater_level": (0.0, 0.012),
}
POWER_NOISE_OF_RATED = 0.001  # active power transducer, 0.1 % of rated (invented)
SPEED_NOISE = 2e-4  # grid frequency wander, relative (order of +-10 mHz at 50 Hz)


def _noisy(signal: str, clean: NDArray, rng: np.random.Generator, spec: UnitSpec | None,
           online: NDArray | None) -> NDArray:
    """``clean`` plus sensor noise; stopped machines read exact zeros for P, speed, opening."""
    z = rng.standard_normal(clean.size)
    if signal == "active_power":
        assert spec is not None and online is not None
        return np.where(online, clean + z * POWER_NOISE_OF_RATED * spec.rated_power, 0.0)
    if signal == "rotational_speed":
        return clean * (1.0 + SPEED_NOISE * z)
    if signal == "gate_opening":
        assert online is not None
        return np.where(online, np.clip(clean + 0.001 * z, 0.0, 1.0), 0.0)
    relative, absolute = SENSOR_NOISE[signal]
    noisy = clean + z * np.hypot(relative * clean, absolute)
    if signal in ("shaft_vibration", "bearing_vibration", "hf_vibration",
                  "draft_tube_pulsation"):
        noisy = np.abs(noisy)
    return noisy


def simulate_plant(design: PlantDesign, plant: PlantFile, *, start: datetime, days: int,
                   seed: int, signatures: Sequence[Signature] = SIGNATURES) -> PlantSimulation:
    """Run one plant over the span: dispatch, hydraulics, signals, sensor noise.

    Parameters
    ----------
    design : the scenario's plant design
    plant : the same plant as read back from its plant file (the physics uses this)
    start : aware datetime, first sample (UTC)
    days : int, length of the span [d]
    seed : int, the scenario's random seed
    signatures : the episodes to plant (default :data:`scenario.SIGNATURES`; an empty
        tuple gives the same span without them, for comparison)
    """
    cal = calendar(start, days, design.timezone)
    river = None
    if design.code == "GLF":
        headwater, tailwater, water_k, power = _glimmerfels(design, plant, cal, seed,
                                                            signatures)
    else:
        headwater, tailwater, water_k, river, power = _lantern(design, plant, cal, seed,
                                                               signatures)
    sim = PlantSimulation(design=design, plant=plant, cal=cal, headwater=headwater,
                          tailwater=tailwater, water_temperature=water_k, river_flow=river)
    g = float(local_gravity(design.latitude, design.elevation_m))
    by_unit_signal: dict[tuple[str, str], NDArray] = {
        ("*", "headwater_level"): headwater, ("*", "tailwater_level"): tailwater}
    for i, (unit_design, spec) in enumerate(zip(design.units, plant.units, strict=True)):
        low = (np.maximum(spec.runner_reference_elevation, tailwater)
               if spec.runner_type == "pelton" else tailwater)
        physics = unit_physics(design.code, spec.code)
        # water density at the mean pressure of the inlet and outlet sections (IAPWS-IF97)
        pressure = atmospheric_pressure(design.elevation_m) + 0.5 * physics.rho * g * (
            headwater - low)
        rho = density(water_k, pressure)
        blade_error = None
        if spec.runner_type == "kaplan":
            sigma_deg, phi = CAM_FOLLOWING
            blade_error = np.deg2rad(ar1(rng_for(seed, design.code, spec.code, "cam"),
                                         len(cal.times), phi, sigma_deg))
        state = signature_state(design.code, spec.code, cal.times,
                                power[i] / spec.rated_power, power[i] > 0.0, signatures)
        op = operating_point(spec, physics, power[i], headwater - low,
                             degradation(design.code, spec.code, cal.times)
                             + state.efficiency_deficit, rho=rho, g=g,
                             blade_error=blade_error)
        sim.units[spec.code] = op
        sim.signatures[spec.code] = state
        offset = rng_for(seed, design.code, spec.code, "water-sensor").normal(0.0, 0.05)
        signals = _unit_signals(unit_design, spec, op, tailwater, water_k + offset,
                                design.code, blade_error, state)
        for name, values in signals.items():
            by_unit_signal[(spec.code, name)] = values
    for tag, mapping in plant.tags.items():
        clean = by_unit_signal[(mapping.unit, mapping.signal)]
        spec = plant.unit(mapping.unit) if mapping.unit != "*" else None
        online = sim.units[mapping.unit].online if spec is not None else None
        sim.clean[tag] = clean
        sim.measured[tag] = _noisy(mapping.signal, clean, rng_for(seed, design.code, tag),
                                   spec, online)
    return sim


def span_end(start: datetime, days: int) -> datetime:
    """The end of the span (exclusive)."""
    return start + timedelta(days=days)
