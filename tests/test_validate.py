"""Quality masks (ingest.validate): each check must flag its case and spare a clean one."""

from __future__ import annotations

import numpy as np
import pandas as pd

from ingest import validate as v
from store.signals import SIGNAL_BIT, Quality

MIN = 60 * 10**9  # one minute [ns]


def test_out_of_range_flags_and_spares() -> None:
    lower, upper = v.PHYSICAL_RANGE["water_temperature"]
    assert (lower, upper) == (273.15, 313.15)  # 0..40 degC, from the brief (common practice)
    mask = v.out_of_range(np.array([280.0, 250.0, 400.0, np.nan, 313.15]), lower, upper)
    assert list(mask) == [False, True, True, False, False]


def test_power_range_scales_with_rating() -> None:
    # -0.1 .. 1.6 x rated (common practice, module constant)
    assert v.physical_range("active_power", rated_power=100e6) == (-10e6, 160e6)
    assert v.physical_range("active_power") == v.PHYSICAL_RANGE["active_power"]


def test_stuck_values_needs_count_and_duration() -> None:
    times = np.arange(10, dtype=np.int64) * 15 * MIN  # 15-minute samples
    flat = np.array([1.0, 2.0] + [5.0] * 7 + [6.0])  # 7 samples over 90 min
    mask = v.stuck_values(flat, times, min_samples=6, min_duration=3600.0)
    assert list(mask) == [False, False] + [True] * 7 + [False]
    # same count but only 6 minutes long: not stuck
    short = v.stuck_values(flat, times // 15, min_samples=6, min_duration=3600.0)
    assert not short.any()
    noisy = v.stuck_values(np.linspace(0, 1, 10), times)
    assert not noisy.any()


def test_stuck_zero_is_normal_and_prior_run() -> None:
    times = np.arange(8, dtype=np.int64) * 15 * MIN
    zeros = np.zeros(8)
    assert v.stuck_values(zeros, times).all()
    assert not v.stuck_values(zeros, times, zero_is_normal=True).any()
    # a run of 4 carried from the previous chunk plus 3 here qualifies (7 >= 6, 135 min)
    prior = v.RunState(value=3.0, start=-4 * 15 * MIN, count=4)
    mask = v.stuck_values(np.array([3.0, 3.0, 3.0, 4.0]), times[:4], prior=prior)
    assert list(mask) == [True, True, True, False]


def test_spikes_flags_isolated_jump_only() -> None:
    rng = np.random.default_rng(0)
    x = 300.0 + rng.normal(0.0, 0.01, 60)
    clean = v.spikes(x, floor=0.5)
    assert not clean.any()
    x[40] += 3.0  # a 3 m jump in one sample of a headwater level
    mask = v.spikes(x, floor=0.5)
    assert list(np.flatnonzero(mask)) == [40]
    # the floor keeps a small jump unflagged even in a very quiet window
    y = np.full(30, 100.0)
    y[20] = 100.2
    assert not v.spikes(y, floor=0.5).any()


def test_a_step_is_not_a_spike() -> None:
    # a unit start or set-point change: power jumps and stays (from the demo's false alarms)
    x = np.r_[np.full(30, 0.0), np.full(30, 60e6)] + np.random.default_rng(1).normal(0, 1e4, 60)
    assert not v.spikes(x, floor=8e6).any()
    x[45] += 40e6  # but an isolated excursion on the new level is one
    assert list(np.flatnonzero(v.spikes(x, floor=8e6))) == [45]


def test_spikes_use_prior_tail() -> None:
    tail = np.full(15, 50.0)
    values = np.array([80.0, 50.0, 50.0])
    assert list(v.spikes(values, floor=5.0, prior=tail)) == [True, False, False]
    assert not v.spikes(values, floor=5.0).any()  # without the tail: too few samples


def _frame(ts: np.ndarray, values: np.ndarray, first_line: int) -> pd.DataFrame:
    return pd.DataFrame({"ts": ts, "line": np.arange(len(ts)) + first_line,
                         "active_power": values, "quality": 0, "flagged_signals": 0})


def test_series_validator_stuck_run_across_chunks() -> None:
    validator = v.SeriesValidator(signals=("active_power",),
                                  ranges={"active_power": (-10e6, 160e6)},
                                  floors={"active_power": 10e6})
    ts = np.arange(20, dtype=np.int64) * 15 * MIN
    values = 50e6 + np.arange(20) * 1e5  # moving
    values[8:16] = 61e6  # frozen for 8 samples (105 min), across the boundary at 12
    first = validator.push(_frame(ts[:12], values[:12], 2))
    second = validator.push(_frame(ts[12:], values[12:], 14), final=True)
    out = pd.concat([first, second], ignore_index=True)
    assert len(out) == 20 and list(out["ts"]) == list(ts)
    stuck = (out["quality"] & int(Quality.STUCK)) != 0
    assert list(np.flatnonzero(stuck)) == list(range(8, 16))
    assert ((out["flagged_signals"][stuck] & SIGNAL_BIT["active_power"]) != 0).all()
    assert validator.flags[("active_power", "stuck")].count == 8
    assert validator.flags[("active_power", "stuck")].first_line == 10
