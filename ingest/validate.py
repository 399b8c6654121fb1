"""Quality checks of canonical signals: boolean masks that flag, never delete.

Each check is a pure function on arrays in SI units and returns a boolean mask named
after the check (:func:`out_of_range`, :func:`stuck_values`, :func:`spikes`). Thresholds
are module-level constants, each with its source, and every function takes them as
arguments so callers can override them. :class:`SeriesValidator` applies the checks to a
unit's stream of chunks, carrying the tail of the previous chunk so that a stuck run or a
spike at a chunk boundary is still found.

Sources: the bounds and floors below are engineering judgement for hydro turbine-generator
units ("common practice", written from general knowledge of the trade, not from a
standard); the spike test is the Hampel identifier (rolling median and median absolute
deviation), see Pearson, R. K. (2002), "Outliers in process modeling and identification",
IEEE Trans. Control Systems Technology 10(1), 55-63; the constant 1.4826 makes the MAD a
consistent estimator of the standard deviation of normal data (Rousseeuw & Croux 1993,
JASA 88(424), 1273-1283).
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd

#: Physical range per canonical signal in SI units, ``(lower, upper)``; common practice.
PHYSICAL_RANGE: dict[str, tuple[float, float]] = {
    "active_power": (-50e6, 2000e6),  # [W] generic; per unit: RATED_POWER_RANGE x rated
    "headwater_level": (-500.0, 6000.0),  # [m] above sea level (Dead Sea .. high Andes)
    "tailwater_level": (-500.0, 6000.0),  # [m]
    "wk_differential_pressure": (-1e4, 2e6),  # [Pa] a few % of head, heads up to ~2000 m
    "flow_rate": (-50.0, 2000.0),  # [m3/s] generic; per unit: RATED_FLOW_RANGE x rated
    "gate_opening": (-0.05, 1.10),  # [fraction] a little beyond 0..1 for calibration slack
    "blade_angle": (-0.7, 0.7),  # [rad] about +-40 deg of Kaplan blade travel
    "rotational_speed": (0.0, 500.0),  # [rad/s] generic; per unit: RATED_SPEED_RANGE x rated
    "spiral_case_pressure": (-1e5, 2.5e7),  # [Pa] gauge; 2000 m head plus surge
    "draft_tube_pressure": (-1.0e5, 1.0e6),  # [Pa] gauge; full vacuum is -1 atm
    "draft_tube_pulsation": (0.0, 1.0e6),  # [Pa] peak to peak
    "shaft_vibration": (0.0, 2e-3),  # [m] peak to peak; 2 mm is far past any trip level
    "bearing_vibration": (0.0, 0.1),  # [m/s] RMS; 100 mm/s is far past any trip level
    "hf_vibration": (0.0, 1000.0),  # [m/s2] RMS
    "guide_bearing_temperature": (233.15, 423.15),  # [K] -40 .. 150 degC
    "thrust_bearing_temperature": (233.15, 423.15),  # [K] -40 .. 150 degC
    "cooling_water_temperature": (273.15, 313.15),  # [K] 0 .. 40 degC
    "water_temperature": (273.15, 313.15),  # [K] 0 .. 40 degC
}

#: Range of power as multiples of the unit's rated power (common practice: motoring
#: losses below zero, overload capability well below 1.6).
RATED_POWER_RANGE: tuple[float, float] = (-0.1, 1.6)
#: Range of speed as multiples of the rated speed (runaway of a Kaplan can reach ~3x).
RATED_SPEED_RANGE: tuple[float, float] = (0.0, 3.0)
#: Range of flow as multiples of the rated flow, where a rated flow is known.
RATED_FLOW_RANGE: tuple[float, float] = (-0.1, 2.0)

#: Stuck-value test: at least this many identical consecutive samples ... (common practice)
STUCK_MIN_SAMPLES: int = 6
#: ... lasting at least this long [s] (common practice).
STUCK_MIN_DURATION: float = 3600.0
#: Longer durations for slow signals [s]: a large reservoir or a bearing at steady load
#: can legitimately repeat a value at the exporter's resolution for hours (judgement).
STUCK_MIN_DURATION_BY_SIGNAL: dict[str, float] = {
    "headwater_level": 6 * 3600.0,
    "tailwater_level": 6 * 3600.0,
    "guide_bearing_temperature": 4 * 3600.0,
    "thrust_bearing_temperature": 4 * 3600.0,
    "cooling_water_temperature": 4 * 3600.0,
    "water_temperature": 6 * 3600.0,
}
#: Signals that normally move and are tested for stuck values. Not tested: gate opening
#: and blade angle (they sit at a limit, fully open or closed, for hours by design) and
#: rotational speed (held constant by the grid when the unit is synchronised).
STUCK_SIGNALS: frozenset[str] = frozenset({
    "active_power", "headwater_level", "tailwater_level", "wk_differential_pressure",
    "flow_rate", "spiral_case_pressure", "draft_tube_pressure", "draft_tube_pulsation",
    "shaft_vibration", "bearing_vibration", "hf_vibration", "guide_bearing_temperature",
    "thrust_bearing_temperature", "cooling_water_temperature", "water_temperature",
})
#: Signals that read exactly zero for days when the unit stands still: runs of 0.0 are
#: not stuck for these (common practice).
STUCK_ZERO_IS_NORMAL: frozenset[str] = frozenset({
    "active_power", "flow_rate", "wk_differential_pressure", "draft_tube_pulsation",
    "shaft_vibration", "bearing_vibration", "hf_vibration",
})

#: Spike test: samples in the preceding window (Hampel identifier; common choice 7..25).
SPIKE_WINDOW: int = 15
#: ... at least this many valid samples in the window before a sample is tested.
SPIKE_MIN_PERIODS: int = 5
#: ... departure larger than this many robust sigmas (Pearson 2002 uses 3; 6 keeps
#: ordinary plant noise and fast load changes unflagged, judgement).
SPIKE_K: float = 6.0
#: Absolute floor of the spike threshold per signal, in SI (judgement: about the
#: smallest jump in one sample that is not plausible for the process).
SPIKE_FLOOR: dict[str, float] = {
    "active_power": 10e6,  # [W] generic; per unit SPIKE_FLOOR_RATED_POWER x rated
    "headwater_level": 0.5,  # [m]
    "tailwater_level": 0.5,  # [m]
    "wk_differential_pressure": 20e3,  # [Pa]
    "flow_rate": 20.0,  # [m3/s]
    "gate_opening": 0.15,  # [fraction]
    "blade_angle": 0.1,  # [rad]
    "rotational_speed": 5.0,  # [rad/s] generic; per unit SPIKE_FLOOR_RATED_SPEED x rated
    "spiral_case_pressure": 100e3,  # [Pa]
    "draft_tube_pressure": 50e3,  # [Pa]
    "draft_tube_pulsation": 50e3,  # [Pa]
    "shaft_vibration": 100e-6,  # [m]
    "bearing_vibration": 5e-3,  # [m/s]
    "hf_vibration": 20.0,  # [m/s2]
    "guide_bearing_temperature": 5.0,  # [K]
    "thrust_bearing_temperature": 5.0,  # [K]
    "cooling_water_temperature": 3.0,  # [K]
    "water_temperature": 2.0,  # [K]
}
#: Spike floor of power and speed as a fraction of the rated value (judgement).
SPIKE_FLOOR_RATED_POWER: float = 0.10
SPIKE_FLOOR_RATED_SPEED: float = 0.10

#: Consistency constant of the MAD for normal data (Rousseeuw & Croux 1993).
MAD_TO_SIGMA: float = 1.4826


def out_of_range(values: np.ndarray, lower: float, upper: float) -> np.ndarray:
    """Mask of values outside ``[lower, upper]``.

    Parameters
    ----------
    values : array [SI unit of the signal]
    lower, upper : float [same unit]

    Returns
    -------
    numpy.ndarray of bool
        True where a value is below ``lower`` or above ``upper``; NaN is never flagged.
    """
    values = np.asarray(values, dtype=np.float64)
    with np.errstate(invalid="ignore"):
        return (values < lower) | (values > upper)


def physical_range(signal: str, *, rated_power: float | None = None,
                   rated_speed: float | None = None,
                   rated_flow: float | None = None) -> tuple[float, float]:
    """The ``(lower, upper)`` range [SI] of ``signal``, scaled to the unit's ratings if given.

    Parameters
    ----------
    signal : str
        Canonical signal name.
    rated_power : float, optional [W]
    rated_speed : float, optional [rad/s]
    rated_flow : float, optional [m3/s]
    """
    if signal == "active_power" and rated_power:
        return RATED_POWER_RANGE[0] * rated_power, RATED_POWER_RANGE[1] * rated_power
    if signal == "rotational_speed" and rated_speed:
        return RATED_SPEED_RANGE[0] * rated_speed, RATED_SPEED_RANGE[1] * rated_speed
    if signal == "flow_rate" and rated_flow:
        return RATED_FLOW_RANGE[0] * rated_flow, RATED_FLOW_RANGE[1] * rated_flow
    return PHYSICAL_RANGE[signal]


def spike_floor(signal: str, *, rated_power: float | None = None,
                rated_speed: float | None = None) -> float:
    """The absolute floor [SI] of the spike threshold of ``signal``."""
    if signal == "active_power" and rated_power:
        return SPIKE_FLOOR_RATED_POWER * rated_power
    if signal == "rotational_speed" and rated_speed:
        return SPIKE_FLOOR_RATED_SPEED * rated_speed
    return SPIKE_FLOOR[signal]


@dataclass(frozen=True)
class RunState:
    """The run of identical values at the end of the data seen so far.

    Attributes
    ----------
    value : float
        The repeated value (NaN: no run).
    start : int [ns]
        Time of the run's first sample.
    count : int
        Samples in the run so far.
    """

    value: float = float("nan")
    start: int = 0
    count: int = 0


def _runs(values: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Start index, length and value of each run of equal, non-NaN values."""
    n = len(values)
    if n == 0:
        empty = np.zeros(0, dtype=np.int64)
        return empty, empty, np.zeros(0)
    change = np.ones(n, dtype=bool)
    change[1:] = values[1:] != values[:-1]  # NaN != NaN: NaN never joins a run
    starts = np.flatnonzero(change)
    lengths = np.diff(np.append(starts, n))
    return starts, lengths, values[starts]


def stuck_values(
    values: np.ndarray,
    times: np.ndarray,
    *,
    min_samples: int = STUCK_MIN_SAMPLES,
    min_duration: float = STUCK_MIN_DURATION,
    zero_is_normal: bool = False,
    prior: RunState | None = None,
) -> np.ndarray:
    """Mask of samples in a run of identical values that is long in count and in time.

    Parameters
    ----------
    values : array [any unit]
        Samples in time order; NaN breaks a run.
    times : int64 array [ns]
        Sample times, same length, non-decreasing.
    min_samples : int
        A run needs at least this many samples ...
    min_duration : float [s]
        ... and its first and last samples at least this far apart.
    zero_is_normal : bool
        Never flag runs of exactly 0.0 (a unit at standstill).
    prior : RunState, optional
        The run at the end of the previous chunk; if the first values continue it, its
        samples and start time count towards this run.

    Returns
    -------
    numpy.ndarray of bool
        True for every sample of a qualifying run (in this call's samples).

    Notes
    -----
    Exact equality is used: a live analogue signal always carries some noise in its
    last digits, a frozen one repeats the identical number.
    """
    values = np.asarray(values, dtype=np.float64)
    times = np.asarray(times, dtype=np.int64)
    mask = np.zeros(len(values), dtype=bool)
    starts, lengths, run_values = _runs(values)
    if len(starts) == 0:
        return mask
    counts = lengths.copy()
    first_times = times[starts].copy()
    if prior is not None and prior.count and run_values[0] == prior.value:
        counts[0] += prior.count
        first_times[0] = prior.start
    last_times = times[starts + lengths - 1]
    qualifies = (counts >= min_samples) & (
        (last_times - first_times) >= round(min_duration * 1e9)
    )
    qualifies &= ~np.isnan(run_values)
    if zero_is_normal:
        qualifies &= run_values != 0.0
    for start, length in zip(starts[qualifies], lengths[qualifies], strict=True):
        mask[start:start + length] = True
    return mask


def trailing_run(values: np.ndarray, times: np.ndarray,
                 prior: RunState | None = None) -> RunState:
    """The :class:`RunState` at the end of ``values`` (continuing ``prior`` if it runs on)."""
    values = np.asarray(values, dtype=np.float64)
    if len(values) == 0:
        return prior if prior is not None else RunState()
    starts, lengths, run_values = _runs(values)
    last = run_values[-1]
    if np.isnan(last):
        return RunState()
    count = int(lengths[-1])
    start = int(times[starts[-1]])
    if len(starts) == 1 and prior is not None and prior.count and prior.value == last:
        count += prior.count
        start = prior.start
    return RunState(value=float(last), start=start, count=count)


def spikes(
    values: np.ndarray,
    *,
    window: int = SPIKE_WINDOW,
    k: float = SPIKE_K,
    floor: float = 0.0,
    min_periods: int = SPIKE_MIN_PERIODS,
    prior: np.ndarray | None = None,
) -> np.ndarray:
    """Mask of samples far from the median of the preceding window (Hampel identifier).

    Parameters
    ----------
    values : array [any unit]
        Samples in time order.
    window : int
        Number of preceding samples the median and MAD are taken over.
    k : float
        Threshold in robust sigmas.
    floor : float [unit of values]
        Absolute floor added to the threshold, so that a perfectly flat window does not
        make every small step a spike.
    min_periods : int
        Valid samples needed in the window; fewer: not tested.
    prior : array, optional
        The last samples of the previous chunk (up to ``window``), so that the first
        samples of this chunk are tested too.

    Returns
    -------
    numpy.ndarray of bool

    Notes
    -----
    ``spike_i = |x_i - m_i| > k * 1.4826 * MAD_i + floor`` with ``m_i`` the median and
    ``MAD_i`` the median absolute deviation of ``x_{i-window} .. x_{i-1}``, and, so that
    a genuine step change (start, stop, set-point change) is not taken for a spike, the
    next sample must be back, nearer the median than half the excursion:
    ``|x_{i+1} - m_i| < |x_i - m_i| / 2`` (a step stays out, whatever its size). Only
    isolated one-sample excursions are flagged; a sample whose successor is not yet known
    (the last of a chunk) is not.

    Only candidates are evaluated exactly: since ``m_i`` lies between the window's minimum
    and maximum, ``|x_i - m_i| > floor`` needs ``x_i - min > floor`` or
    ``max - x_i > floor``; rolling min and max are cheap, so the costly medians are taken
    only where a spike is possible.

    References
    ----------
    Pearson, R. K. (2002), IEEE Trans. Control Systems Technology 10(1), 55-63.
    """
    values = np.asarray(values, dtype=np.float64)
    n = len(values)
    head = np.zeros(0) if prior is None else np.asarray(prior, dtype=np.float64)[-window:]
    full = np.concatenate([head, values])
    offset = len(head)
    if n == 0 or len(full) <= min_periods:
        return np.zeros(n, dtype=bool)
    low, high = _preceding_min_max(full, window)
    with np.errstate(invalid="ignore"):
        candidate = ((full - low) > floor) | ((high - full) > floor)
    candidate[:offset] = False
    where = np.flatnonzero(candidate)
    mask = np.zeros(len(full), dtype=bool)
    if len(where):
        padded = np.concatenate([np.full(window, np.nan), full])
        # windows of the `window` samples before each candidate, from the padded array
        idx = where[:, None] + np.arange(window)[None, :]
        windows = padded[idx]
        enough = np.count_nonzero(~np.isnan(windows), axis=1) >= min_periods
        where, windows = where[enough], windows[enough]
        if len(where):
            median = np.nanmedian(windows, axis=1)
            mad = np.nanmedian(np.abs(windows - median[:, None]), axis=1)
            threshold = k * MAD_TO_SIGMA * mad + floor
            departs = np.abs(full[where] - median) > threshold
            # A spike goes out and comes back: the next sample is back more than halfway.
            # A step (set-point change, start, stop, load rejection) stays out. The last
            # sample has no successor yet: it is not flagged (at a chunk boundary this
            # misses at most one spike per signal).
            following = np.append(full, np.nan)[where + 1]
            returns = np.abs(following - median) < 0.5 * np.abs(full[where] - median)
            mask[where] = departs & returns
    return mask[offset:]


def _preceding_min_max(values: np.ndarray, window: int) -> tuple[np.ndarray, np.ndarray]:
    """Bounds ``low <= min`` and ``high >= max`` of the ``window`` samples before each sample.

    The window ``i-window .. i-1`` lies within the block of ``i-1`` and the block before
    it (blocks of ``window`` samples), so the extremes of those two blocks bound it. The
    bounds may be wider than the exact rolling extremes, which only adds candidates; it
    costs two reshaped reductions instead of a rolling filter. NaN is ignored; ``+inf`` /
    ``-inf`` where no valid sample precedes.
    """
    n = len(values)
    blocks = -(-n // window)
    padded = np.full(blocks * window, np.nan)
    padded[:n] = values
    nan = np.isnan(padded)
    block_min = np.where(nan, np.inf, padded).reshape(blocks, window).min(axis=1)
    block_max = np.where(nan, -np.inf, padded).reshape(blocks, window).max(axis=1)
    pair_min = block_min.copy()
    pair_max = block_max.copy()
    pair_min[1:] = np.minimum(block_min[1:], block_min[:-1])
    pair_max[1:] = np.maximum(block_max[1:], block_max[:-1])
    low = np.full(n, np.inf)
    high = np.full(n, -np.inf)
    block_of_previous = (np.arange(1, n) - 1) // window
    low[1:] = pair_min[block_of_previous]
    high[1:] = pair_max[block_of_previous]
    return low, high


@dataclass
class FlagCounts:
    """Cells flagged per check for one signal: count and the first line."""

    count: int = 0
    first_line: int | None = None
    first_value: float | None = None


@dataclass
class SeriesValidator:
    """Range, stuck and spike checks of one unit's signals over a stream of chunks.

    Frames pushed in must be sorted by ``ts`` (int64 ns column) and carry one float64
    column per signal. :meth:`push` returns the rows that are final: rows at the end that
    are in a run of identical values that may still turn into a stuck run are held back
    (at most ``max_held`` rows) and returned with the next push, so that the whole run is
    flagged even when it straddles a chunk boundary. The last ``window`` released values
    of each signal are kept for the spike test of the next chunk.

    Parameters
    ----------
    signals : tuple of str
    ranges, floors : dict signal -> (lower, upper) [SI] / floor [SI]
    """

    signals: tuple[str, ...]
    ranges: dict[str, tuple[float, float]]
    floors: dict[str, float]
    max_held: int = 200_000
    window: int = SPIKE_WINDOW
    k: float = SPIKE_K
    min_samples: int = STUCK_MIN_SAMPLES
    durations: dict[str, float] = field(default_factory=dict)
    held: pd.DataFrame | None = None
    tails: dict[str, np.ndarray] = field(default_factory=dict)
    runs: dict[str, RunState] = field(default_factory=dict)
    flags: dict[tuple[str, str], FlagCounts] = field(default_factory=dict)

    def _note(self, signal: str, check: str, mask: np.ndarray, frame: pd.DataFrame) -> None:
        hits = np.flatnonzero(mask)
        if not len(hits):
            return
        entry = self.flags.setdefault((signal, check), FlagCounts())
        entry.count += len(hits)
        line = int(frame["line"].to_numpy()[hits].min())
        if entry.first_line is None or line < entry.first_line:
            entry.first_line = line
            entry.first_value = float(frame[signal].to_numpy()[hits[0]])

    def push(self, frame: pd.DataFrame, *, final: bool = False) -> pd.DataFrame:
        """Check ``frame`` (with any held rows before it) and return the final rows.

        The returned frame has its ``quality`` and ``flagged_signals`` columns updated
        with :class:`store.signals.Quality` OUT_OF_RANGE, STUCK and SPIKE bits.
        """
        from store.signals import SIGNAL_BIT, Quality

        work = frame if self.held is None else pd.concat([self.held, frame],
                                                          ignore_index=True)
        self.held = None
        n = len(work)
        if n == 0:
            return work
        times = work["ts"].to_numpy(dtype=np.int64)
        quality = work["quality"].to_numpy(dtype=np.int64).copy()
        flagged = work["flagged_signals"].to_numpy(dtype=np.int64).copy()
        masks: dict[str, tuple[np.ndarray, np.ndarray, np.ndarray]] = {}
        release = n
        for signal in self.signals:
            values = work[signal].to_numpy(dtype=np.float64)
            lower, upper = self.ranges[signal]
            rng = out_of_range(values, lower, upper)
            spk = spikes(values, window=self.window, k=self.k, floor=self.floors[signal],
                         prior=self.tails.get(signal))
            if signal in STUCK_SIGNALS:
                duration = self.durations.get(
                    signal, STUCK_MIN_DURATION_BY_SIGNAL.get(signal, STUCK_MIN_DURATION))
                prior = self.runs.get(signal)
                stk = stuck_values(values, times, min_samples=self.min_samples,
                                   min_duration=duration,
                                   zero_is_normal=signal in STUCK_ZERO_IS_NORMAL,
                                   prior=prior)
                if not final:
                    starts, _, run_values = _runs(values)
                    if len(starts) and not np.isnan(run_values[-1]) and not stk[-1]:
                        release = min(release, int(starts[-1]))
            else:
                stk = np.zeros(n, dtype=bool)
            masks[signal] = (rng, stk, spk)
        if n - release > self.max_held:
            release = n - self.max_held
        if release == 0 and not final and n <= self.max_held:
            self.held = work
            return work.iloc[:0]
        out = work.iloc[:release].copy()
        for signal, (rng, stk, spk) in masks.items():
            bit = SIGNAL_BIT[signal]
            rng, stk, spk = rng[:release], stk[:release], spk[:release]
            quality[:release][rng] |= int(Quality.OUT_OF_RANGE)
            quality[:release][stk] |= int(Quality.STUCK)
            quality[:release][spk] |= int(Quality.SPIKE)
            flagged[:release][rng | stk | spk] |= bit
            self._note(signal, "out_of_range", rng, out)
            self._note(signal, "stuck", stk, out)
            self._note(signal, "spike", spk, out)
            values = out[signal].to_numpy(dtype=np.float64)
            tail = np.concatenate([self.tails.get(signal, np.zeros(0)), values])
            self.tails[signal] = tail[-self.window:]
            self.runs[signal] = trailing_run(values, times[:release], self.runs.get(signal))
        out["quality"] = quality[:release]
        out["flagged_signals"] = flagged[:release]
        if release < n:
            self.held = work.iloc[release:].reset_index(drop=True)
        return out
