"""Condition signatures of steady windows: vortex rope, bearing temperature, load bands, sensors.

Pure functions, vectorised over windows (numpy and pandas in, arrays and frames out, SI
units). They turn raw window signals into the features that :mod:`analytics.detector`
scores and names:

* part-load draft-tube vortex rope: the pressure pulsation in the band 0.2-0.4 of the
  runner's rotational frequency (from a Welch spectrum, for high-rate pressure records),
  and the pulsation amplitude normalised by ``rho g H`` (for window data);
* bearing and thermal trouble: the bearing metal temperature rise over the cooling water;
* like-for-like comparisons: per-load-band baseline medians and the residual of a value
  against its band's baseline, so that vibration and temperature rise are compared at like
  load;
* sensor faults: stuck, drifting and implausible signals, one boolean per window.

The results advise; the service never commands a unit. A vortex-rope, bearing or
vibration finding calls for inspection by qualified staff; the unit's operating limits,
protection settings, local codes and licensed practice prevail.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
import pandas as pd
from numpy.typing import ArrayLike, NDArray
from scipy import signal

#: Band of the part-load vortex rope's precession frequency, as fractions of the runner's
#: rotational frequency f_n. The rope precesses at roughly 0.2-0.4 f_n (Rheingans, 1940,
#: "Power swings in hydroelectric power plants", Trans. ASME 62, gave f ~ f_n/3.6; Nishi,
#: Matsunaga, Kubota & Senoo, 1984, IAHR Symposium, and Dörfler, Sick & Coutu, 2013,
#: "Flow-Induced Pulsation and Vibration in Hydroelectric Machinery", Springer, ch. 2,
#: give the same range; from memory).
VORTEX_ROPE_BAND = (0.2, 0.4)
#: Default spectral resolution of :func:`vortex_rope_band` as a fraction of f_n: 1/40 puts
#: eight Welch bins across the 0.2 f_n wide band (a choice made here).
ROPE_RESOLUTION = 1.0 / 40.0
#: Default load-band edges as fractions of rated power: 10 % bands up to 120 %. Comparing
#: vibration per operating condition follows ISO 20816-5:2018 (hydraulic machine sets; from
#: memory); the 10 % width is common practice.
DEFAULT_LOAD_BANDS = tuple(round(0.1 * k, 1) for k in range(13))
#: Default fewest finite baseline values for a band median in :func:`by_load_band`.
MIN_BAND_WINDOWS = 10
#: Consistency factor of the median absolute deviation for a normal distribution,
#: 1 / Phi^-1(3/4) (Rousseeuw & Croux, 1993, JASA 88, 1273-1283).
MAD_TO_SIGMA = 1.482602218505602


@dataclass(frozen=True)
class RopeBand:
    """Draft-tube pressure pulsation in the vortex-rope band, one value per record.

    Attributes
    ----------
    rms : [Pa] RMS of the pulsation in the band, ``sqrt(integral of the PSD over the band)``
    peak_frequency : [Hz] frequency of the largest PSD bin inside the band
    peak_ratio : [-] ``peak_frequency / f_n``
    fraction : [-] band power over the power of the whole spectrum (mean removed)
    """

    rms: NDArray[np.float64]
    peak_frequency: NDArray[np.float64]
    peak_ratio: NDArray[np.float64]
    fraction: NDArray[np.float64]


def vortex_rope_band(
    pressure: ArrayLike,
    fs: float,
    runner_frequency: ArrayLike,
    *,
    band: tuple[float, float] = VORTEX_ROPE_BAND,
    nperseg: int | None = None,
) -> RopeBand:
    """Pressure pulsation of a high-rate draft-tube record in the band ``band * f_n``.

    Parameters
    ----------
    pressure : array (n_samples,) or (n_records, n_samples) [Pa]
        Draft-tube cone pressure sampled at ``fs`` (absolute or gauge: the mean is removed).
        One row per record (e.g. one per steady window); a NaN in a row makes that row NaN.
    fs : float [Hz]
        Sampling frequency.
    runner_frequency : float or array (n_records,) [Hz]
        Rotational frequency of the runner ``f_n = n / 60`` (n in rpm), i.e. ``omega/(2 pi)``.
    band : (low, high), default (0.2, 0.4)
        Band edges as fractions of ``f_n`` (:data:`VORTEX_ROPE_BAND`).
    nperseg : int, optional
        Welch segment length; default ``ceil(fs / (ROPE_RESOLUTION * min f_n))`` samples
        (bins of ``f_n / 40``), at most the record length.

    Returns
    -------
    RopeBand
        Arrays of shape (n_records,) (shape () for a 1-D record).

    Notes
    -----
    Welch's method: the mean of Hann-windowed periodograms of segments overlapping by half
    (Welch, 1967, IEEE Trans. Audio Electroacoust. 15(2), 70-73), one-sided PSD in Pa^2/Hz
    (``scipy.signal.welch``, ``detrend="constant"``). The band power is the PSD summed over
    the bins with ``low f_n <= f <= high f_n`` times the bin width; by Parseval's theorem a
    sinusoid of amplitude A in the band gives ``rms ~ A / sqrt(2)``.

    The part-load vortex rope forms well below the best-efficiency flow and precesses at
    about 0.2-0.4 f_n (see :data:`VORTEX_ROPE_BAND` for sources). Pulsation in the band is
    evidence, not proof: a hydraulic resonance of the draft tube or penstock may sit there.
    Qualified staff decide; local codes and licensed practice prevail.
    """
    p = np.asarray(pressure, dtype=np.float64)
    if p.ndim not in (1, 2) or p.shape[-1] < 8:
        raise ValueError("pressure must be (n_samples,) or (n_records, n_samples), n >= 8")
    if not fs > 0:
        raise ValueError("fs must be positive")
    low, high = band
    if not 0 <= low < high:
        raise ValueError("band must be (low, high) with 0 <= low < high")
    rows = p.reshape(-1, p.shape[-1])
    fn = np.broadcast_to(np.asarray(runner_frequency, dtype=np.float64), rows.shape[:1])
    if np.any(~(fn > 0)):
        raise ValueError("runner_frequency must be positive")
    if high * fn.max() > fs / 2.0:
        raise ValueError("the band's upper edge lies above the Nyquist frequency fs/2")
    n = rows.shape[1]
    if nperseg is None:
        nperseg = int(np.ceil(fs / (ROPE_RESOLUTION * fn.min())))
    nperseg = int(min(max(nperseg, 8), n))
    freq, psd = signal.welch(rows, fs=fs, window="hann", nperseg=nperseg, detrend="constant",
                             scaling="density", axis=-1)
    df = freq[1] - freq[0]
    in_band = (freq[None, :] >= low * fn[:, None]) & (freq[None, :] <= high * fn[:, None])
    if not np.all(in_band.any(axis=1)):
        raise ValueError("no spectral bin inside the band: lengthen the record or nperseg")
    band_psd = np.where(in_band, psd, 0.0)
    band_power = band_psd.sum(axis=1) * df
    total_power = psd[:, 1:].sum(axis=1) * df  # bin 0 holds only what detrending left
    finite = np.isfinite(psd).all(axis=1)
    peak = freq[np.argmax(np.where(in_band, np.nan_to_num(psd, nan=-1.0), -np.inf), axis=1)]
    with np.errstate(invalid="ignore", divide="ignore"):
        out = RopeBand(
            rms=np.where(finite, np.sqrt(band_power), np.nan),
            peak_frequency=np.where(finite, peak, np.nan),
            peak_ratio=np.where(finite, peak / fn, np.nan),
            fraction=np.where(finite & (total_power > 0), band_power / total_power, np.nan),
        )
    if p.ndim == 1:
        return RopeBand(*(np.asarray(a[0]) for a in (out.rms, out.peak_frequency,
                                                      out.peak_ratio, out.fraction)))
    return out


def pulsation_ratio(pulsation_pa: ArrayLike, net_head: ArrayLike, rho: ArrayLike,
                    g: ArrayLike) -> NDArray[np.float64]:
    """Pressure pulsation amplitude over the specific hydraulic energy, ``dp / (rho g H)``.

    Parameters
    ----------
    pulsation_pa : array [Pa]
        Pulsation amplitude of a window (the canonical ``draft_tube_pulsation`` is peak to
        peak; the ratio keeps whatever amplitude definition the signal has).
    net_head : array [m]
        Net head H (IEC 60041).
    rho : array [kg/m3]
        Water density.
    g : array [m/s2]
        Local acceleration of gravity.

    Returns
    -------
    array [-]
        NaN where the head, density or gravity is not positive, or an input is NaN.

    Notes
    -----
    The usual normalisation of pressure fluctuations by the specific hydraulic energy,
    ``p~_E = p~ / (rho E)`` with ``E = g H`` (IEC 60193:2019, pressure fluctuation
    measurements; from memory). It makes a pulsation comparable across heads.
    """
    dp = np.asarray(pulsation_pa, dtype=np.float64)
    denominator = (np.asarray(rho, dtype=np.float64) * np.asarray(g, dtype=np.float64)
                   * np.asarray(net_head, dtype=np.float64))
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(denominator > 0, dp / denominator, np.nan)


def temperature_rise(bearing_temperature: ArrayLike,
                     cooling_water_temperature: ArrayLike) -> NDArray[np.float64]:
    """Bearing metal temperature rise over the cooling-water inlet temperature.

    Parameters
    ----------
    bearing_temperature : array [K]
    cooling_water_temperature : array [K]

    Returns
    -------
    array [K]
        ``T_bearing - T_cooling``; NaN in, NaN out.

    Notes
    -----
    The rise over the coolant, not the metal temperature, carries the bearing's own heat
    (friction losses over the oil cooler's conductance), so that seasonal changes of the
    cooling water do not read as bearing trouble (common practice). The rise still grows with
    load and speed: compare it per load band (:func:`band_residual`).
    """
    return (np.asarray(bearing_temperature, dtype=np.float64)
            - np.asarray(cooling_water_temperature, dtype=np.float64))


def load_band_index(load_fraction: ArrayLike,
                    bands: Sequence[float] = DEFAULT_LOAD_BANDS) -> NDArray[np.int64]:
    """Index of the load band of each window, ``-1`` outside the bands or for NaN.

    Band ``k`` is ``bands[k] <= load < bands[k+1]``; the last band includes its upper edge.

    Parameters
    ----------
    load_fraction : array [-]
        ``P / P_rated``.
    bands : increasing band edges [-], at least two
    """
    edges = np.asarray(bands, dtype=np.float64)
    if edges.ndim != 1 or edges.size < 2 or np.any(np.diff(edges) <= 0):
        raise ValueError("bands must be at least two strictly increasing edges")
    load = np.asarray(load_fraction, dtype=np.float64)
    index = np.searchsorted(edges, load, side="right") - 1
    index = np.where(load == edges[-1], edges.size - 2, index)
    outside = ~np.isfinite(load) | (index < 0) | (index > edges.size - 2)
    return np.where(outside, -1, index).astype(np.int64)


def by_load_band(values: pd.DataFrame | pd.Series | ArrayLike, load_fraction: ArrayLike,
                 bands: Sequence[float] = DEFAULT_LOAD_BANDS, *,
                 min_windows: int = MIN_BAND_WINDOWS) -> pd.DataFrame:
    """Per-load-band baseline medians of one or more window values.

    Parameters
    ----------
    values : frame (one column per quantity), Series or 1-D array, one row per window
        E.g. bearing vibration [m/s], shaft vibration [m], temperature rise [K], over the
        declared healthy baseline period.
    load_fraction : array [-]
        ``P / P_rated`` of each window.
    bands : increasing band edges [-], default :data:`DEFAULT_LOAD_BANDS`
    min_windows : int, default 10
        A band's median is NaN when it holds fewer finite values of that quantity.

    Returns
    -------
    DataFrame
        One row per band (index = band number): ``low``, ``high``, ``n`` (windows in the
        band), then the median of each quantity (column ``value`` for an unnamed array or
        Series).
    """
    frame = _as_frame(values)
    index = load_band_index(load_fraction, bands)
    if len(index) != len(frame):
        raise ValueError("values and load_fraction differ in length")
    edges = np.asarray(bands, dtype=np.float64)
    n_bands = edges.size - 1
    keep = index >= 0
    groups = frame[keep].groupby(index[keep])
    medians = groups.median().reindex(range(n_bands))
    counts = groups.count().reindex(range(n_bands)).fillna(0)
    medians = medians.where(counts >= min_windows)
    out = pd.DataFrame({"low": edges[:-1], "high": edges[1:],
                        "n": np.bincount(index[keep], minlength=n_bands)})
    return pd.concat([out, medians], axis=1)


def band_residual(values: pd.DataFrame | pd.Series | ArrayLike, load_fraction: ArrayLike,
                  baseline_table: pd.DataFrame) -> pd.DataFrame | NDArray[np.float64]:
    """Value minus its load band's baseline median: a comparison at like load.

    Parameters
    ----------
    values : frame, Series or 1-D array, one row per window (as for :func:`by_load_band`)
    load_fraction : array [-]
        ``P / P_rated`` of each window.
    baseline_table : DataFrame
        The output of :func:`by_load_band` over a healthy baseline (its ``low``/``high``
        edges define the bands; its columns name the quantities).

    Returns
    -------
    DataFrame of the frame's columns (on its index) for a frame, else a 1-D array, in the
    values' units. NaN outside the bands, in bands without a baseline median, or for NaN.
    """
    edges = np.append(baseline_table["low"].to_numpy(float), baseline_table["high"].iat[-1])
    index = load_band_index(load_fraction, edges)
    frame = _as_frame(values)
    if len(index) != len(frame):
        raise ValueError("values and load_fraction differ in length")
    missing = [c for c in frame.columns if c not in baseline_table.columns]
    if missing:
        raise ValueError(f"baseline_table has no column for {missing}")
    table = baseline_table[list(frame.columns)].to_numpy(dtype=np.float64)
    table = np.vstack([table, np.full((1, table.shape[1]), np.nan)])  # row -1: outside
    residual = frame.to_numpy(dtype=np.float64) - table[index]
    if isinstance(values, pd.DataFrame):
        return pd.DataFrame(residual, index=frame.index, columns=frame.columns)
    return residual[:, 0]


def stuck_signal(values: ArrayLike, *, min_run: int = 4, tolerance: float = 0.0) -> NDArray:
    """Windows inside a run of at least ``min_run`` consecutive, unchanged values.

    Parameters
    ----------
    values : array (n_windows,), in time order
        One value per window of one signal (its window mean or its last value).
    min_run : int, default 4
        Shortest run that counts (4 windows of 30 min: 2 h).
    tolerance : float, default 0
        Largest change between consecutive windows that counts as unchanged, in the
        signal's units. 0 catches what a frozen transmitter or a historian repeating its
        last value produces (exact repeats); a live signal's noise makes exact repeats of a
        window mean very unlikely (common practice).

    Returns
    -------
    bool array (n_windows,)
        True for every window of such a run. NaN breaks a run and is never stuck.

    Notes
    -----
    Consecutive differences are compared, so a ramp of steps all below ``tolerance`` counts
    as unchanged: keep ``tolerance`` below the signal's window-to-window noise.
    """
    if min_run < 2:
        raise ValueError("min_run must be at least 2")
    x = np.asarray(values, dtype=np.float64)
    if x.ndim != 1:
        raise ValueError("values must be 1-D")
    if x.size == 0:
        return np.zeros(0, dtype=bool)
    finite = np.isfinite(x)
    with np.errstate(invalid="ignore"):
        same = np.abs(np.diff(x)) <= tolerance  # False where either side is NaN
    new_run = np.concatenate([[True], ~same])
    run_id = np.cumsum(new_run) - 1
    run_length = np.bincount(run_id)
    return finite & (run_length[run_id] >= min_run)


def drifting_signal(signal_a: ArrayLike, signal_b: ArrayLike, *, threshold: float,
                    window: int = 48, baseline: ArrayLike | None = None) -> NDArray:
    """Windows where two redundant or related signals slowly part.

    Parameters
    ----------
    signal_a, signal_b : arrays (n_windows,), in time order, same units
        Two redundant transmitters (two head-water level sensors), or a measured signal and
        its prediction from related ones (generator power against ``rho g Q H eta``).
    threshold : float
        Shift of the running median of ``a - b`` from its baseline that counts as drift,
        in the signals' units. Choose it above the pair's normal disagreement.
    window : int, default 48
        Running-median length in windows (48 windows of 30 min: one day), so that a single
        odd window does not count and a slow divergence does.
    baseline : bool array (n_windows,), optional
        Windows of the healthy baseline that set the normal offset (the median of ``a - b``
        there). Default: the first ``window`` windows.

    Returns
    -------
    bool array (n_windows,)
        True where ``|running median(a - b) - baseline median| > threshold``. The running
        median is centred and needs half its windows finite; elsewhere False.

    Notes
    -----
    Cross-checking redundant or analytically related measurements is the classic
    analytical-redundancy approach to sensor fault detection (Isermann, 2006, "Fault-
    Diagnosis Systems", Springer, ch. 10; from memory). Which of the two signals drifts is
    not decided here.
    """
    if not threshold > 0:
        raise ValueError("threshold must be positive")
    if window < 1:
        raise ValueError("window must be at least 1")
    a = np.asarray(signal_a, dtype=np.float64)
    b = np.asarray(signal_b, dtype=np.float64)
    if a.shape != b.shape or a.ndim != 1:
        raise ValueError("signal_a and signal_b must be 1-D and of one length")
    difference = a - b
    if baseline is None:
        mask = np.zeros(a.size, dtype=bool)
        mask[:window] = True
    else:
        mask = np.asarray(baseline, dtype=bool)
        if mask.shape != a.shape:
            raise ValueError("baseline must be a boolean array of the signals' length")
    reference = difference[mask & np.isfinite(difference)]
    if reference.size == 0:
        raise ValueError("no finite baseline difference to set the offset")
    offset = float(np.median(reference))
    running = pd.Series(difference).rolling(window, center=True,
                                            min_periods=max(1, window // 2)).median()
    shift = np.abs(running.to_numpy() - offset)
    with np.errstate(invalid="ignore"):
        return np.nan_to_num(shift, nan=0.0) > threshold


def implausible(values: ArrayLike, low: float, high: float) -> NDArray:
    """Values outside the physically plausible range ``[low, high]``.

    Parameters
    ----------
    values : array, in the signal's units
    low, high : float
        Plausible range (inclusive) in the same units; ``-inf``/``inf`` for an open side.

    Returns
    -------
    bool array
        True below ``low``, above ``high`` or infinite; False for NaN (missing is not
        implausible: it is missing, and handled as such downstream).
    """
    if not low <= high:
        raise ValueError("low must not exceed high")
    x = np.asarray(values, dtype=np.float64)
    with np.errstate(invalid="ignore"):
        return np.isinf(x) | (x < low) | (x > high)


def _as_frame(values: pd.DataFrame | pd.Series | ArrayLike) -> pd.DataFrame:
    """Values as a float frame (column ``value`` for an unnamed 1-D input)."""
    if isinstance(values, pd.DataFrame):
        return values.astype(np.float64)
    if isinstance(values, pd.Series):
        return values.astype(np.float64).to_frame("value").reset_index(drop=True)
    array = np.asarray(values, dtype=np.float64)
    if array.ndim != 1:
        raise ValueError("values must be a frame, a Series or a 1-D array")
    return pd.DataFrame({"value": array})
