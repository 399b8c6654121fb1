"""Steady-state windows of one unit's time series, as the runs of an index test.

Time is cut into clock-aligned slots ``[k w, (k+1) w)`` of ``w = window_s`` seconds of UTC
epoch time. A slot's result depends only on the samples inside it, so recomputing any time
range (the service recomputes only new data) gives the same windows as one pass over all of
it. Per slot: sample count, covered duration, the mean of every signal, the largest
deviation from the mean of each checked signal, the steady verdict with a bitmask of the
tests that failed, and the energy produced.

The work is a handful of numpy segment reductions (``np.add.reduceat``,
``np.fmax.reduceat``, ``np.fmin.reduceat``) over the sorted samples: no loop and no group-by
per window.

Steadiness here selects the operating points an efficiency is computed on; it says nothing
about whether an operating state is acceptable for the machine. The service advises; the
unit's operating limits, protection settings, local codes and licensed practice prevail.
"""

from __future__ import annotations

import enum
from collections.abc import Mapping
from dataclasses import dataclass

import numpy as np
import numpy.typing as npt
import pandas as pd

#: Signals whose fluctuation decides the verdict. ``power`` and ``head`` must be present;
#: ``opening`` and ``speed`` are checked when present (a Pelton export may lack an opening).
REQUIRED_SIGNALS = ("power", "head")
CHECKED_SIGNALS = ("power", "head", "opening", "speed")
#: Timestamps above this are taken for milli- or microseconds, not epoch seconds (1e11 s is
#: the year 5138).
MAX_EPOCH_SECONDS = 100_000_000_000


class UnsteadyReason(enum.IntFlag):
    """Why a window is not steady; ``steady`` windows have reason 0."""

    COVERAGE = 1  # fewer samples than min_coverage of the expected count
    GAP = 2  # a gap between samples (or at the slot edges) longer than max_gap_s
    MISSING = 4  # NaN in a checked signal
    LOW_LOAD = 8  # mean power below min_load of rated power
    POWER = 16  # power fluctuated beyond its band
    HEAD = 32
    OPENING = 64
    SPEED = 128


@dataclass(frozen=True)
class SteadyTolerances:
    """Tolerances of a steady window; every field may be overridden per unit.

    Attributes
    ----------
    window_s : int [s], default 1800
        Slot length. Common practice for SCADA data: 30 min holds enough samples at 1 s to
        1 min sampling for a stable mean and is short against the drift of reservoir level.
        Index-test runs themselves are a few minutes long.
    power : float [-], default 0.015
        Largest allowed ``|P - mean P|`` as a fraction of rated power. The +-1.5 % band is
        the permissible fluctuation of power during a run in IEC 60041:1991, 4.4 (from
        memory; not checked against the text). Relative to rated power (not to the mean) so
        that the band does not shrink to nothing at low load.
    head : float [-], default 0.01
        Largest ``|H - mean H|`` as a fraction of ``mean H``; IEC 60041:1991, 4.4 allows
        about +-1 % of the specific hydraulic energy during a run (from memory).
    opening : float [-], default 0.01
        Largest ``|a - mean a|`` of the opening (fraction 0..1), absolute. Common practice:
        a governor at a fixed set point holds the gate within a fraction of a per cent; a
        1 % move is a load change.
    speed : float [-], default 0.005
        Largest ``|n - mean n|`` as a fraction of ``mean n``; +-0.5 % is the usual speed
        band of a run (IEC 60041 / ASME PTC 18, from memory). A grid-connected unit holds it
        easily; the check removes start-ups, run-downs and island operation.
    min_load : float [-], default 0.2
        Lowest mean power as a fraction of rated power. Common practice: below about 20 %
        the Winter-Kennedy differential pressure is small (so its relative error large) and
        most reaction units run in their rough zone; spinning reserve at no load is dropped.
    min_coverage : float [-], default 0.8
        Fewest samples as a fraction of ``window_s / sample_interval``. Common practice.
    max_gap_s : float or None [s], default None
        Longest allowed gap between consecutive samples, the slot edges counted (a slot
        fully sampled at interval ``dt`` has gaps of exactly ``dt``). None means three
        sample intervals (common practice): one or two lost samples are tolerated, a hole
        in which a transient could hide is not.
    """

    window_s: int = 1800
    power: float = 0.015
    head: float = 0.01
    opening: float = 0.01
    speed: float = 0.005
    min_load: float = 0.2
    min_coverage: float = 0.8
    max_gap_s: float | None = None

    def __post_init__(self) -> None:
        if int(self.window_s) != self.window_s or self.window_s <= 0:
            raise ValueError(f"SteadyTolerances.window_s must be a positive whole number of "
                             f"seconds, got {self.window_s!r}")
        for name in ("power", "head", "opening", "speed", "min_load", "min_coverage"):
            value = getattr(self, name)
            if not np.isfinite(value) or value < 0.0:
                raise ValueError(f"SteadyTolerances.{name} must be finite and >= 0, "
                                 f"got {value!r}")
        if self.max_gap_s is not None and not self.max_gap_s > 0.0:
            raise ValueError(f"SteadyTolerances.max_gap_s must be > 0 or None, "
                             f"got {self.max_gap_s!r}")


#: Beyond this many slots with a missing value, a signal takes the full-copy path (faster
#: then than repairing slot by slot).
MAX_SLOTS_REPAIRED = 2_000


def decode_reason(reason: int) -> list[str]:
    """Names of the failed tests in a reason bitmask, e.g. ``['POWER', 'HEAD']``."""
    return [flag.name for flag in UnsteadyReason if int(reason) & flag.value and flag.name]


def _timestamps(ts: npt.ArrayLike) -> npt.NDArray[np.int64]:
    arr = np.asarray(ts)
    if arr.ndim != 1:
        raise ValueError(f"steady_windows: ts must be 1-D, got shape {arr.shape}")
    if np.issubdtype(arr.dtype, np.datetime64):
        return arr.astype("datetime64[s]").astype(np.int64)
    if not np.issubdtype(arr.dtype, np.integer):
        raise TypeError(f"steady_windows: ts must be int64 UTC epoch seconds (or datetime64), "
                        f"got dtype {arr.dtype}")
    arr = arr.astype(np.int64, copy=False)
    if arr.size and max(int(arr.max()), -int(arr.min())) > MAX_EPOCH_SECONDS:
        raise ValueError("steady_windows: ts must be epoch seconds; values above 1e11 look "
                         "like milli- or microseconds")
    return arr


def _empty_frame(names: list[str], checked: list[str]) -> pd.DataFrame:
    columns: dict[str, npt.NDArray] = {
        "window_start": np.empty(0, np.int64), "duration_s": np.empty(0),
        "n_samples": np.empty(0, np.int64)}
    columns.update({f"mean_{n}": np.empty(0) for n in names})
    columns.update({f"max_dev_{n}": np.empty(0) for n in checked})
    columns.update({"max_gap_s": np.empty(0), "energy_j": np.empty(0),
                    "steady": np.empty(0, bool), "reason": np.empty(0, np.int64)})
    return pd.DataFrame(columns)


def _slots(t: npt.NDArray[np.int64], w: int
           ) -> tuple[npt.NDArray[np.intp], npt.NDArray[np.int64]]:
    """Index of each non-empty slot's first sample and the slot's start [s]."""
    first, last = int(t[0]) // w, int(t[-1]) // w  # floor: aligned also before 1970
    if last - first + 1 <= t.size:
        # few slots: binary search of the slot edges, no n-long temporary
        edges = (first + np.arange(last - first + 2, dtype=np.int64)) * w
        index = np.searchsorted(t, edges)
        occupied = index[1:] > index[:-1]
        return index[:-1][occupied], edges[:-1][occupied]
    slot = t // w  # sparse samples over a long span: one slot number per sample
    starts = np.flatnonzero(np.concatenate(([True], slot[1:] != slot[:-1])))
    return starts, slot[starts] * w


def steady_windows(ts: npt.ArrayLike, signals: Mapping[str, npt.ArrayLike], *,
                   rated_power: float, tolerances: SteadyTolerances | None = None,
                   sample_interval: float | None = None) -> pd.DataFrame:
    """Cut one unit's samples into clock-aligned slots and judge each slot's steadiness.

    Parameters
    ----------
    ts : array of int64 [s]
        UTC epoch seconds, strictly increasing, one unit. ``datetime64`` is accepted and
        floored to seconds.
    signals : mapping name -> float array [SI units]
        Same length as ``ts``. ``power`` [W] and ``head`` [m] are required; ``opening``
        [fraction 0..1] and ``speed`` [rad/s] are checked when present; any other signal
        (``wk_differential_pressure`` [Pa], ``flow_rate`` [m3/s], ``water_temperature``
        [K], ``blade_angle`` [rad], ...) is only averaged. Means skip NaN samples.
    rated_power : float [W]
        The unit's rated power, the base of the power band and of the minimum load.
    tolerances : SteadyTolerances, optional
        Defaults to ``SteadyTolerances()``.
    sample_interval : float [s], optional
        Nominal sampling interval ``dt``. If None it is the median spacing of ``ts`` in this
        call, which depends on the data passed: give it explicitly when windows are
        recomputed incrementally, so that every call judges a slot the same way.

    Returns
    -------
    pandas.DataFrame
        One row per slot holding at least one sample, ordered in time:

        - ``window_start`` [s, int64]: slot start, a multiple of ``window_s``
        - ``duration_s`` [s]: covered time; each sample holds until the next sample, at
          most ``dt``, and not past the slot end
        - ``n_samples``: samples in the slot
        - ``mean_<signal>``: mean over the slot's non-NaN samples (NaN if none)
        - ``max_dev_<signal>``: ``max |x - mean|`` of each checked signal present
        - ``max_gap_s`` [s]: longest gap, slot edges included
        - ``energy_j`` [J]: ``mean_power * duration_s``
        - ``steady`` (bool) and ``reason`` (int, :class:`UnsteadyReason` bits, 0 if steady)

        Unsteady slots stay in the frame: the service needs the running time and energy of
        all of them; select ``frame[frame.steady]`` for efficiency points.

    Notes
    -----
    A slot is steady when it has enough samples and no long gap, no NaN in a checked
    signal, mean power at or above ``min_load * rated_power``, and every checked signal
    within its band: ``max|P - mean P| <= tol_P P_rated``, ``max|H - mean H| <= tol_H mean H``,
    ``max|a - mean a| <= tol_a``, ``max|n - mean n| <= tol_n mean n``. The largest deviation
    is ``max(max x - mean, mean - min x)``.

    References
    ----------
    IEC 60041:1991, 4.4 (stability of operating conditions and permissible fluctuations
    during a run) and ASME PTC 18-2002, section 3 (test runs); clause numbers and band
    values from memory, see :class:`SteadyTolerances`.
    """
    tol = tolerances if tolerances is not None else SteadyTolerances()
    if not (np.isfinite(rated_power) and rated_power > 0.0):
        raise ValueError(f"steady_windows: rated_power must be > 0 W, got {rated_power!r}")
    t = _timestamps(ts)
    n = t.size
    arrays: dict[str, npt.NDArray[np.float64]] = {}
    for name, values in signals.items():
        arr = np.asarray(values, dtype=np.float64)
        if arr.shape != t.shape:
            raise ValueError(f"steady_windows: signal {name!r} has shape {arr.shape}, "
                             f"ts has {t.shape}")
        arrays[name] = arr
    missing = [s for s in REQUIRED_SIGNALS if s not in arrays]
    if missing:
        raise ValueError(f"steady_windows: required signals missing: {missing}; "
                         f"got {sorted(arrays)}")
    names = list(arrays)
    checked = [s for s in CHECKED_SIGNALS if s in arrays]
    if n == 0:
        return _empty_frame(names, checked)

    # One n-long work array for the spacing; the last slot is padded so that reduceat has a
    # segment for every slot. Big temporaries are avoided: first-touch of fresh memory is
    # most of the cost at 1e7 samples.
    step = np.empty(n, dtype=np.int64)
    np.subtract(t[1:], t[:-1], out=step[:-1])
    step[-1] = 1
    if step.min() <= 0:
        bad = int(np.argmax(step <= 0)) + 1
        raise ValueError(f"steady_windows: ts must be strictly increasing; index {bad} "
                         f"({int(t[bad])}) does not follow {int(t[bad - 1])}")
    if sample_interval is None:
        if n < 2:
            raise ValueError("steady_windows: one sample gives no interval; pass "
                             "sample_interval")
        dt = float(np.median(step[:-1]))
    else:
        dt = float(sample_interval)
        if not (np.isfinite(dt) and dt > 0.0):
            raise ValueError(f"steady_windows: sample_interval must be > 0 s, got {dt!r}")
    w = int(tol.window_s)
    max_gap = tol.max_gap_s if tol.max_gap_s is not None else 3.0 * dt

    starts, window_start = _slots(t, w)
    last = np.concatenate((starts[1:] - 1, [n - 1]))
    window_end = window_start + w
    n_samples = np.diff(np.concatenate((starts, [n])))

    # Each sample holds until the next one, at most dt; inside a slot the next sample is
    # always before the slot end, so only a slot's last sample needs clipping to it.
    hold = np.minimum(step, dt)
    hold[last] = np.minimum(dt, window_end - t[last])
    duration = np.add.reduceat(hold, starts)
    del hold

    # Longest gap: the spacings inside the slot, and the edges, measured as if virtual
    # samples sat one interval before the slot start and at the slot end (a full slot then
    # has every gap equal to dt).
    step[last] = 0  # the spacings that cross into the next slot, and the pad
    max_gap_s = np.maximum.reduceat(step, starts).astype(np.float64)
    del step
    np.maximum(max_gap_s, t[starts] - window_start + dt, out=max_gap_s)
    np.maximum(max_gap_s, window_end - t[last], out=max_gap_s)

    columns: dict[str, npt.NDArray] = {"window_start": window_start, "duration_s": duration,
                                       "n_samples": n_samples}
    means: dict[str, npt.NDArray[np.float64]] = {}
    deviations: dict[str, npt.NDArray[np.float64]] = {}
    any_missing = np.zeros(starts.size, dtype=bool)
    for name in names:
        x = arrays[name]
        with np.errstate(invalid="ignore"):
            total = np.add.reduceat(x, starts)  # NaN (or inf) where a slot misses a value
        count = n_samples
        clean = x
        bad = np.flatnonzero(~np.isfinite(total))
        if bad.size > MAX_SLOTS_REPAIRED:
            finite = np.isfinite(x)
            count = np.add.reduceat(finite, starts, dtype=np.int64)
            clean = np.where(finite, x, np.nan)  # +-inf counts as missing, like NaN
            total = np.add.reduceat(np.where(finite, x, 0.0), starts)
        elif bad.size:
            # few slots hold a missing value: recount only those, no full-length copies
            count = n_samples.copy()
            for k in bad:
                part = x[starts[k]:last[k] + 1]
                ok = np.isfinite(part)
                count[k] = int(ok.sum())
                total[k] = float(part[ok].sum())
        with np.errstate(invalid="ignore", divide="ignore"):
            mean = np.where(count > 0, total / count, np.nan)
        means[name] = mean
        if name in checked:
            high = np.fmax.reduceat(clean, starts)
            low = np.fmin.reduceat(clean, starts)
            if clean is x and bad.size:
                # fmax/fmin skip NaN but not inf: a slot with inf is judged on its finite part
                for k in bad:
                    part = x[starts[k]:last[k] + 1]
                    part = part[np.isfinite(part)]
                    high[k] = part.max() if part.size else np.nan
                    low[k] = part.min() if part.size else np.nan
            deviations[name] = np.maximum(high - mean, mean - low)
            any_missing |= count < n_samples
    columns.update({f"mean_{name}": means[name] for name in names})
    columns.update({f"max_dev_{name}": deviations[name] for name in checked})

    reason = np.zeros(starts.size, dtype=np.int64)

    def flag(mask: npt.NDArray[np.bool_], bit: UnsteadyReason) -> None:
        reason[mask] |= int(bit)

    flag(n_samples * dt < tol.min_coverage * w, UnsteadyReason.COVERAGE)
    flag(max_gap_s > max_gap, UnsteadyReason.GAP)
    flag(any_missing, UnsteadyReason.MISSING)
    flag(~(means["power"] >= tol.min_load * rated_power), UnsteadyReason.LOW_LOAD)
    flag(deviations["power"] > tol.power * rated_power, UnsteadyReason.POWER)
    flag(deviations["head"] > tol.head * np.abs(means["head"]), UnsteadyReason.HEAD)
    if "opening" in deviations:
        flag(deviations["opening"] > tol.opening, UnsteadyReason.OPENING)
    if "speed" in deviations:
        flag(deviations["speed"] > tol.speed * np.abs(means["speed"]), UnsteadyReason.SPEED)

    columns["max_gap_s"] = max_gap_s.astype(np.float64)
    columns["energy_j"] = means["power"] * duration
    columns["steady"] = reason == 0
    columns["reason"] = reason
    return pd.DataFrame(columns)
