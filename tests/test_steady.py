"""Steady-state windows: synthetic cases with hand-computed expectations, slot alignment.

The tolerance defaults follow IEC 60041:1991 4.4 (power +-1.5 %, head +-1 %, speed
+-0.5 %; from memory) and common practice (opening, load, coverage, gap); the cases below
are synthetic and every expected value is hand arithmetic written beside it.
"""

from __future__ import annotations

import time

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from analytics.steady import (
    SteadyTolerances,
    UnsteadyReason,
    decode_reason,
    steady_windows,
)

RATED = 100e6  # [W]
T0 = 1_704_067_200  # 2024-01-01T00:00:00Z, a multiple of 1800 s
W = 1800


def _unit(n: int, *, start: int = T0, power: float = 0.6 * RATED, head: float = 100.0,
          opening: float = 0.7, speed: float = 15.708) -> tuple[np.ndarray, dict]:
    ts = start + np.arange(n, dtype=np.int64)
    signals = {"power": np.full(n, power), "head": np.full(n, head),
               "opening": np.full(n, opening), "speed": np.full(n, speed),
               "wk_differential_pressure": np.full(n, 4.0e4)}
    return ts, signals


def _run(ts, signals, **kw) -> pd.DataFrame:
    kw.setdefault("sample_interval", 1.0)
    return steady_windows(ts, signals, rated_power=RATED, **kw)


def test_defaults_are_locked() -> None:
    assert SteadyTolerances() == SteadyTolerances(
        window_s=1800, power=0.015, head=0.01, opening=0.01, speed=0.005, min_load=0.2,
        min_coverage=0.8, max_gap_s=None)
    assert [f.value for f in UnsteadyReason] == [1, 2, 4, 8, 16, 32, 64, 128]


def test_constant_operation_gives_full_steady_aligned_windows() -> None:
    ts, sig = _unit(3 * W)
    f = _run(ts, sig)
    assert list(f.window_start) == [T0, T0 + W, T0 + 2 * W]
    assert (f.window_start % W == 0).all()
    assert list(f.n_samples) == [W] * 3 and list(f.duration_s) == [1800.0] * 3
    assert f.steady.all() and (f.reason == 0).all()
    assert list(f.max_gap_s) == [1.0] * 3  # full slot: every gap is one interval
    # energy = 60 MW * 1800 s = 1.08e11 J
    np.testing.assert_allclose(f.energy_j, 0.6 * RATED * 1800.0, rtol=1e-12)
    np.testing.assert_allclose(f.mean_wk_differential_pressure, 4.0e4, rtol=1e-12)


def test_step_in_power_breaks_the_window() -> None:
    ts, sig = _unit(2 * W)
    sig["power"][W + 900:] = 0.65 * RATED  # half of slot 2 at 60 MW, half at 65 MW
    f = _run(ts, sig)
    assert list(f.steady) == [True, False]
    # mean 62.5 MW, largest deviation 2.5 MW = 2.5 % of rated > 1.5 %
    assert f.mean_power[1] == pytest.approx(62.5e6, rel=1e-12)
    assert f.max_dev_power[1] == pytest.approx(2.5e6, rel=1e-9)
    assert decode_reason(f.reason[1]) == ["POWER"]
    # energy of the broken slot: 60 MW * 900 s + 65 MW * 900 s = 1.125e11 J
    assert f.energy_j[1] == pytest.approx(1.125e11, rel=1e-12)


def test_slow_ramp_within_band_passes_and_a_steeper_one_fails() -> None:
    ts, sig = _unit(W)
    ramp = np.linspace(-0.5, 0.5, W)
    sig["power"] = 0.6 * RATED + 0.02 * RATED * ramp  # 2 % of rated over 30 min
    f = _run(ts, sig)
    # a linear ramp of total rise r deviates r/2 from its mean: 1 % <= 1.5 %
    assert f.max_dev_power[0] == pytest.approx(0.01 * RATED, rel=1e-9)
    assert bool(f.steady[0])
    sig["power"] = 0.6 * RATED + 0.04 * RATED * ramp  # 4 % rise: 2 % > 1.5 %
    assert decode_reason(_run(ts, sig).reason[0]) == ["POWER"]
    # head ramp of 1.5 % of 100 m: 0.75 % <= 1 % passes; 3 % (1.5 %) fails
    ts, sig = _unit(W)
    sig["head"] = 100.0 + 1.5 * ramp
    assert bool(_run(ts, sig).steady[0])
    sig["head"] = 100.0 + 3.0 * ramp
    assert decode_reason(_run(ts, sig).reason[0]) == ["HEAD"]


def test_opening_and_speed_bands() -> None:
    ts, sig = _unit(W)
    sig["opening"][1000:] = 0.73  # mean 0.7133, deviation 0.0167 > 0.01 absolute
    sig["speed"][1000:] = 15.708 * 1.012  # deviation about 0.53 % of the mean > 0.5 %
    f = _run(ts, sig)
    assert decode_reason(f.reason[0]) == ["OPENING", "SPEED"]
    assert f.max_dev_opening[0] == pytest.approx(0.03 * 1000 / 1800, rel=1e-9)


def test_gaps_and_coverage() -> None:
    ts, sig = _unit(3 * W)
    # slot 1: a 300 s hole -> gap 301 s > 3 s, coverage 1500/1800 = 0.83 >= 0.8
    # slot 2: a 600 s hole -> gap and coverage 1200/1800 = 0.67 < 0.8
    keep = np.ones(3 * W, dtype=bool)
    keep[600:900] = False
    keep[W + 600:W + 1200] = False
    # slot 3: only the last 1000 s -> leading gap 800 + 1 s, coverage 0.56
    keep[2 * W:2 * W + 800] = False
    f = _run(ts[keep], {k: v[keep] for k, v in sig.items()})
    assert list(f.n_samples) == [1500, 1200, 1000]
    assert list(f.duration_s) == [1500.0, 1200.0, 1000.0]
    assert list(f.max_gap_s) == [301.0, 601.0, 801.0]
    assert decode_reason(f.reason[0]) == ["GAP"]
    assert decode_reason(f.reason[1]) == ["COVERAGE", "GAP"]
    assert decode_reason(f.reason[2]) == ["COVERAGE", "GAP"]
    # energy over the covered time only: 60 MW * 1500 s
    assert f.energy_j[0] == pytest.approx(0.6 * RATED * 1500.0, rel=1e-12)
    # a gap tolerance set by hand
    g = _run(ts[keep], {k: v[keep] for k, v in sig.items()},
             tolerances=SteadyTolerances(max_gap_s=400.0))
    assert bool(g.steady[0]) and decode_reason(g.reason[1]) == ["COVERAGE", "GAP"]


def test_slot_end_is_not_overrun_by_sparse_samples() -> None:
    # 15-min sampling: samples at 0 and 900 s of each slot hold for 900 s each
    ts = T0 + np.arange(0, 3 * W, 900, dtype=np.int64)
    sig = {"power": np.full(ts.size, 0.6 * RATED), "head": np.full(ts.size, 100.0)}
    f = steady_windows(ts, sig, rated_power=RATED)  # interval inferred: 900 s
    assert list(f.n_samples) == [2, 2, 2] and list(f.duration_s) == [1800.0] * 3
    assert f.steady.all()
    # declared 600 s interval: each sample holds 600 s -> 1200 s covered; the 900 s gaps
    # pass (<= 3 * 600 s), the coverage 2 * 600 / 1800 = 0.67 < 0.8 fails
    g = steady_windows(ts, sig, rated_power=RATED, sample_interval=600.0)
    assert list(g.duration_s) == [1200.0] * 3
    assert all(decode_reason(r) == ["COVERAGE"] for r in g.reason)


def test_nan_in_checked_signal_makes_unsteady_but_extra_signal_nan_does_not() -> None:
    ts, sig = _unit(2 * W)
    sig["head"][100] = np.nan
    sig["wk_differential_pressure"][W + 5:W + 10] = np.nan
    sig["wk_differential_pressure"][W + 10] = 4.0e4 + 1795.0  # mean over the 1795 finite ones
    f = _run(ts, sig)
    assert decode_reason(f.reason[0]) == ["MISSING"]
    assert f.mean_head[0] == pytest.approx(100.0)  # the mean skips the NaN
    assert bool(f.steady[1])
    assert f.mean_wk_differential_pressure[1] == pytest.approx(4.0e4 + 1.0, rel=1e-12)


def test_all_nan_power_and_low_load() -> None:
    ts, sig = _unit(2 * W)
    sig["power"][:W] = np.nan
    sig["power"][W:] = 0.1 * RATED
    f = _run(ts, sig)
    assert np.isnan(f.mean_power[0]) and np.isnan(f.energy_j[0])
    assert decode_reason(f.reason[0]) == ["MISSING", "LOW_LOAD"]
    assert decode_reason(f.reason[1]) == ["LOW_LOAD"]  # 10 % of rated < 20 %
    assert bool(_run(ts, sig, tolerances=SteadyTolerances(min_load=0.05)).steady[1])


def test_optional_signals_may_be_absent_required_may_not() -> None:
    ts, sig = _unit(W)
    f = _run(ts, {"power": sig["power"], "head": sig["head"]})
    assert bool(f.steady[0]) and "max_dev_opening" not in f.columns
    with pytest.raises(ValueError, match=r"required signals missing: \['head'\]"):
        _run(ts, {"power": sig["power"]})


def test_input_validation() -> None:
    ts, sig = _unit(10)
    with pytest.raises(ValueError, match="strictly increasing; index 5"):
        _run(np.concatenate((ts[:5], ts[4:9])), sig)
    with pytest.raises(TypeError, match="int64 UTC epoch seconds"):
        _run(ts.astype(float), sig)
    with pytest.raises(ValueError, match="microseconds"):
        _run(ts * 1_000_000, sig)
    with pytest.raises(ValueError, match="shape"):
        _run(ts, {**sig, "head": sig["head"][:5]})
    with pytest.raises(ValueError, match="rated_power"):
        steady_windows(ts, sig, rated_power=0.0)
    with pytest.raises(ValueError, match="window_s"):
        SteadyTolerances(window_s=0)
    with pytest.raises(ValueError, match="power"):
        SteadyTolerances(power=-0.1)


def test_empty_input_and_datetime_input() -> None:
    ts, sig = _unit(0)
    f = _run(ts, sig)
    assert f.empty and {"window_start", "steady", "reason", "energy_j",
                        "mean_power"} <= set(f.columns)
    ts, sig = _unit(W)
    as_dt = ts.astype("datetime64[s]")
    pd.testing.assert_frame_equal(_run(as_dt, sig), _run(ts, sig))


def test_alignment_before_1970() -> None:
    ts, sig = _unit(W, start=-3600 + 60)  # slot [-3600, -1800) holds 1740 samples
    f = _run(ts, sig)
    assert list(f.window_start) == [-3600, -1800] and list(f.n_samples) == [1740, 60]


def test_sparse_samples_over_a_long_span() -> None:
    # more slots in the span than samples (the per-sample slot path): three samples over
    # ten days with 60 s slots land in three slots, each aligned on the minute
    ts = np.array([T0 + 5, T0 + 86_400 + 59, T0 + 10 * 86_400 + 60], dtype=np.int64)
    sig = {"power": np.full(3, 0.6 * RATED), "head": np.full(3, 100.0)}
    f = _run(ts, sig, tolerances=SteadyTolerances(window_s=60))
    assert list(f.window_start) == [T0, T0 + 86_400, T0 + 10 * 86_400 + 60]
    assert list(f.n_samples) == [1, 1, 1] and list(f.duration_s) == [1.0, 1.0, 1.0]
    assert all(decode_reason(r) == ["COVERAGE", "GAP"] for r in f.reason)


@settings(max_examples=60, deadline=None)
@given(seed=st.integers(0, 2**32 - 1), n=st.integers(2, 4000),
       window_s=st.sampled_from([60, 300, 1800]), cut_fraction=st.floats(0.0, 1.0))
def test_split_at_any_slot_boundary_gives_identical_windows(
        seed: int, n: int, window_s: int, cut_fraction: float) -> None:
    # Incremental recompute: processing [.., b) and [b, ..) for a slot boundary b gives the
    # same frame as one pass.
    rng = np.random.default_rng(seed)
    ts = T0 + 7 + np.cumsum(rng.choice([1, 1, 1, 2, 5, 400], size=n)).astype(np.int64)
    sig = {"power": 0.6 * RATED + rng.normal(0, 0.004 * RATED, n) * (rng.random(n) < 0.9),
           "head": 100.0 + rng.normal(0, 0.3, n),
           "opening": 0.7 + rng.normal(0, 0.002, n),
           "flow_rate": np.where(rng.random(n) < 0.05, np.nan, 90.0 + rng.normal(0, 1, n))}
    sig["head"][rng.random(n) < 0.01] = np.nan
    tol = SteadyTolerances(window_s=window_s)
    whole = _run(ts, sig, tolerances=tol)
    first_slot, last_slot = ts[0] // window_s, ts[-1] // window_s
    boundary = (first_slot + round(cut_fraction * (last_slot - first_slot + 1))) * window_s
    left = ts < boundary
    parts = [_run(ts[m], {k: v[m] for k, v in sig.items()}, tolerances=tol)
             for m in (left, ~left) if m.any()]
    joined = pd.concat(parts, ignore_index=True)
    pd.testing.assert_frame_equal(joined, whole, check_exact=False, rtol=1e-12, atol=0.0)
    assert joined.reason.tolist() == whole.reason.tolist()


@pytest.mark.slow
def test_ten_million_samples_in_a_couple_of_seconds() -> None:
    n = 10_000_000
    ts = T0 + np.arange(n, dtype=np.int64)
    phase = np.arange(n) * 1e-3
    sig = {"power": 0.6 * RATED * (1.0 + 0.005 * np.sin(phase)),
           "head": 100.0 + 0.2 * np.cos(phase), "opening": np.full(n, 0.7),
           "speed": np.full(n, 15.708), "wk_differential_pressure": 4e4 + np.sin(phase),
           "water_temperature": np.full(n, 283.15)}
    _run(ts[:100_000], {k: v[:100_000] for k, v in sig.items()})  # warm the allocator
    start = time.perf_counter()
    f = _run(ts, sig)
    elapsed = time.perf_counter() - start
    print(f"steady_windows: {n} samples, {len(sig)} signals, {len(f)} windows: {elapsed:.2f} s")
    assert len(f) == n // W + 1 and f.n_samples.sum() == n
    # the brief asks for "a couple of seconds" on 2 cores; measured about 0.7-1.9 s here.
    # 5 s leaves room for a loaded test machine.
    assert elapsed < 5.0
