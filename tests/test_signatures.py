"""Condition signatures: vortex-rope band (Welch), pulsation ratio, load bands, sensor faults.

Signals here are SYNTHETIC (sinusoids, noise, ramps): the tests check the logic and the
spectral arithmetic against analytic results, not the physics of any machine.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from scipy import signal

from analytics.signatures import (
    VORTEX_ROPE_BAND,
    band_residual,
    by_load_band,
    drifting_signal,
    implausible,
    load_band_index,
    pulsation_ratio,
    stuck_signal,
    temperature_rise,
    vortex_rope_band,
)

FS = 200.0  # [Hz]
F_N = 500.0 / 60.0  # [Hz] runner at 500 rpm
DURATION = 120.0  # [s]


def _pressure(rope_ratio: float | None, rope_amplitude: float, seed: int) -> np.ndarray:
    """Synthetic draft-tube pressure [Pa]: mean, a runner-frequency line, noise, a rope."""
    rng = np.random.default_rng(seed)
    t = np.arange(0.0, DURATION, 1.0 / FS)
    p = 150_000.0 + 3_000.0 * np.sin(2 * np.pi * F_N * t) + rng.normal(0.0, 200.0, t.size)
    if rope_ratio is not None:
        p += rope_amplitude * np.sin(2 * np.pi * rope_ratio * F_N * t + 0.4)
    return p


def test_rope_band_picks_a_component_at_0_3_fn() -> None:
    amplitude = 2_000.0
    p = _pressure(0.3, amplitude, seed=1)
    # Intermediate check, Parseval's theorem (any signal-processing text): the Welch PSD
    # integrates to the variance of the mean-removed record.
    freq, psd = signal.welch(p, fs=FS, nperseg=1024)
    assert np.sum(psd) * (freq[1] - freq[0]) == pytest.approx(np.var(p), rel=0.03)
    out = vortex_rope_band(p, FS, F_N)
    # A sinusoid of amplitude A has RMS A/sqrt(2) (analytic); the white noise in the band
    # adds 200^2 * (0.2 f_n / (fs/2)) = 667 Pa^2 against 2e6 Pa^2: under 0.02 % in RMS.
    assert float(out.rms) == pytest.approx(amplitude / np.sqrt(2.0), rel=0.03)
    # the peak sits within one bin (f_n/40 by default) of 0.3 f_n
    assert abs(float(out.peak_ratio) - 0.3) <= 1.0 / 40.0 + 1e-12
    assert float(out.peak_frequency) == pytest.approx(float(out.peak_ratio) * F_N)
    # total power: runner line 3000^2/2 + rope 2000^2/2 + noise 200^2 -> rope share 0.3056
    expected_fraction = 2e6 / (4.5e6 + 2e6 + 4e4)
    assert float(out.fraction) == pytest.approx(expected_fraction, rel=0.05)


def test_rope_band_ignores_lines_outside_the_band() -> None:
    for ratio in (None, 0.5, 0.1):  # no rope, a line at 0.5 f_n, a line at 0.1 f_n
        out = vortex_rope_band(_pressure(ratio, 2_000.0, seed=2), FS, F_N)
        # left: noise (~26 Pa RMS) and Hann-window leakage; far below the 1414 Pa of a rope
        assert float(out.rms) < 0.05 * 2_000.0 / np.sqrt(2.0), ratio


def test_rope_band_vectorised_over_records_with_own_runner_frequency() -> None:
    with_rope = _pressure(0.3, 2_000.0, seed=3)
    without = _pressure(None, 0.0, seed=4)
    broken = with_rope.copy()
    broken[100] = np.nan
    records = np.vstack([with_rope, without, broken])
    out = vortex_rope_band(records, FS, np.array([F_N, F_N, F_N]))
    assert out.rms.shape == (3,)
    assert out.rms[0] == pytest.approx(2_000.0 / np.sqrt(2.0), rel=0.03)
    assert out.rms[1] < 100.0
    assert np.isnan(out.rms[2]) and np.isnan(out.peak_ratio[2])  # NaN in, NaN out
    # the same rope on a faster runner: 0.3 of 12.5 Hz, band follows each record's f_n
    t = np.arange(0.0, DURATION, 1.0 / FS)
    fast = 1_000.0 * np.sin(2 * np.pi * 0.3 * 12.5 * t)
    out2 = vortex_rope_band(np.vstack([fast, fast]), FS, np.array([12.5, F_N]))
    assert out2.rms[0] == pytest.approx(1_000.0 / np.sqrt(2.0), rel=0.03)
    assert out2.rms[1] < 50.0  # 3.75 Hz lies above 0.4 * 8.33 = 3.33 Hz: outside that band


def test_rope_band_refuses_bad_arguments() -> None:
    p = _pressure(0.3, 1.0, seed=5)
    with pytest.raises(ValueError, match="Nyquist"):
        vortex_rope_band(p, fs=5.0, runner_frequency=F_N)  # 0.4 f_n = 3.3 Hz > 2.5 Hz
    with pytest.raises(ValueError):
        vortex_rope_band(p, FS, 0.0)
    assert VORTEX_ROPE_BAND == (0.2, 0.4)


def test_pulsation_ratio_by_hand() -> None:
    # rho g H = 1000 * 9.81 * 100 = 981,000 Pa; 19,620 Pa of pulsation is 2 % of it
    out = pulsation_ratio(np.array([19_620.0, 1.0, 5.0]), np.array([100.0, 0.0, np.nan]),
                          1000.0, 9.81)
    assert out[0] == pytest.approx(0.02, rel=1e-12)
    assert np.isnan(out[1]) and np.isnan(out[2])


def test_temperature_rise() -> None:
    # 60 degC metal over 25 degC water: 35 K (a difference of temperatures in K)
    out = temperature_rise(np.array([333.15, np.nan]), np.array([298.15, 290.0]))
    assert out[0] == pytest.approx(35.0) and np.isnan(out[1])


def test_load_band_index_edges() -> None:
    edges = (0.0, 0.5, 1.0)
    idx = load_band_index(np.array([-0.1, 0.0, 0.49, 0.5, 1.0, 1.01, np.nan]), edges)
    assert idx.tolist() == [-1, 0, 0, 1, 1, -1, -1]  # last band includes its upper edge


def test_band_baseline_and_residual_compare_at_like_load() -> None:
    rng = np.random.default_rng(7)
    load = rng.uniform(0.3, 1.0, 4_000)
    # synthetic vibration growing with load, 1 + 2*load mm/s, small noise
    vib = 1e-3 * (1.0 + 2.0 * load) + rng.normal(0.0, 1e-5, load.size)
    rise = 20.0 + 10.0 * load + rng.normal(0.0, 0.1, load.size)
    frame = pd.DataFrame({"vib": vib, "rise": rise})
    table = by_load_band(frame, load)
    assert list(table.columns[:3]) == ["low", "high", "n"]
    # bands below 0.3 hold no windows -> no median; the 0.5-0.6 band's median is the
    # value at its mid-load (the relation is linear and the load uniform inside the band)
    assert np.isnan(table.loc[0, "vib"]) and table.loc[0, "n"] == 0
    band5 = table[(table.low == 0.5)].iloc[0]
    assert band5["vib"] == pytest.approx(1e-3 * (1.0 + 2.0 * 0.55), abs=2e-5)
    assert band5["rise"] == pytest.approx(25.5, abs=0.2)
    assert table["n"].sum() == load.size
    # a unit 2 mm/s and 5 K worse at like load shows exactly that residual, +- the band
    # spread (a band is 0.1 wide: +-0.1 mm/s and +-0.5 K from the slope within it)
    later = np.array([0.55, 0.82, 1.3])
    res = band_residual(pd.DataFrame({"vib": 1e-3 * (1 + 2 * later) + 2e-3,
                                      "rise": 20 + 10 * later + 5.0}), later, table)
    assert res["vib"].iloc[0] == pytest.approx(2e-3, abs=2e-5)
    assert res["rise"].iloc[1] == pytest.approx(5.0, abs=0.6)
    assert np.isnan(res["vib"].iloc[2])  # 130 % lies outside the bands
    # 1-D input: column "value", array out
    one = by_load_band(vib, load)
    out = band_residual(np.array([1e-3 * 2.1]), np.array([0.55]), one)
    assert out.shape == (1,) and out[0] == pytest.approx(0.0, abs=2e-5)


def test_band_median_needs_min_windows() -> None:
    load = np.array([0.05] * 5 + [0.55] * 20)
    table = by_load_band(np.arange(25.0), load, min_windows=10)
    assert np.isnan(table.loc[0, "value"]) and table.loc[0, "n"] == 5
    assert table.loc[5, "value"] == pytest.approx(np.median(np.arange(5.0, 25.0)))


def test_stuck_signal_runs() -> None:
    rng = np.random.default_rng(3)
    x = rng.normal(300.0, 0.5, 40)
    x[10:16] = x[10]  # frozen for 6 windows
    x[25:28] = x[25]  # 3 repeats: shorter than min_run=4
    x[33] = np.nan
    flags = stuck_signal(x, min_run=4)
    assert flags.tolist() == [10 <= i < 16 for i in range(40)]
    # a tolerance that covers the noise makes everything "unchanged": the caller's job to
    # keep it below the noise; a NaN still breaks the run and is never stuck
    loose = stuck_signal(x, min_run=4, tolerance=100.0)
    assert not loose[33] and loose[:33].all() and loose[34:].all()


def test_drifting_signal_catches_a_slow_divergence() -> None:
    rng = np.random.default_rng(11)
    n = 1_000
    a = 1_500.0 + np.cumsum(rng.normal(0, 0.01, n))  # a level [m], slowly wandering
    b = a + 0.02 + rng.normal(0.0, 0.01, n)  # redundant sensor, 2 cm offset, 1 cm noise
    b[600:] += 0.001 * np.arange(n - 600)  # from window 600 it drifts 1 mm per window
    flags = drifting_signal(a, b, threshold=0.1, window=48)
    assert not flags[:600].any()
    # |shift| reaches 0.1 m at 100 windows into the ramp; the centred running median sees
    # it about then (+- a few windows for noise); beyond, it stays flagged
    first = int(np.argmax(flags))
    assert 690 <= first <= 710
    assert flags[first:].all()
    # an offset alone (no drift) is learnt by the baseline and never flagged
    assert not drifting_signal(a, a + 0.5 + rng.normal(0, 0.01, n), threshold=0.1).any()


def test_implausible() -> None:
    out = implausible(np.array([-1.0, 0.0, 0.5, 1.0, 1.2, np.nan, np.inf]), 0.0, 1.0)
    assert out.tolist() == [True, False, False, False, True, False, True]
    with pytest.raises(ValueError):
        implausible(np.zeros(2), 1.0, 0.0)
