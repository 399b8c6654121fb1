"""Detector benchmark: scoring 1,000,000 feature windows and training 100 units on a year each.

Run ``python bench/detect.py`` (full) or ``python bench/detect.py --quick`` (100,000 windows
scored, 10 units trained). Progress goes to stderr; the last line of stdout is one JSON
object (keys in ``bench/README.md``), with ``score_windows_per_s`` and ``train_s_per_unit``.

What is synthesised (INVENTED, loosely plausible, not engineering data): steady 30-min
windows of fictional units, each with its own slopes, the feature set of
:data:`analytics.detector.FEATURES`: load uniform in 40-100 % of rated, the sigma margin
falling with load, hf vibration and part-load pulsation growing with load and with part
load, load-band residuals of vibration and bearing temperature rise centred on zero, and
the opening following the load, each with noise; 2 % of sigma margins are NaN (no
tailwater level). The scored frame holds 0.5 % planted anomalies (an efficiency drop of
10 baseline sigmas) to check that the scores mean something.

What is timed, in this process, each against a bare baseline measured in the same run:

``train``  per unit, ``WindowAnomalyDetector(...).fit`` on 17,520 windows (a year of 30-min
           windows): robust scaling, the forest, the baseline scores and both thresholds.
           Baseline: ``sklearn.ensemble.IsolationForest(...).fit`` on the same float array
           plus ``score_samples`` of it (what any threshold from the baseline needs).
``score``  one unit's fitted detector on 1,000,000 windows: ``score_samples`` (robust
           scaling with imputation, then the forest), best of ``--repeats``. Baseline: the
           fitted forest's ``score_samples`` on the already-scaled array.
``assess`` (reported, not in the headline) the service's full verdict: score, flags,
           explanation, signature names.
"""

from __future__ import annotations

import argparse
import json
import os
import platform
import resource
import sys
import time
from pathlib import Path
from typing import Any

import numpy as np

_REPO = Path(__file__).resolve().parent.parent
if str(_REPO) not in sys.path:
    sys.path.insert(0, str(_REPO))

import pandas as pd  # noqa: E402
import sklearn  # noqa: E402
from sklearn.ensemble import IsolationForest  # noqa: E402

from analytics.detector import WindowAnomalyDetector  # noqa: E402

SEED = 20261202
FULL = {"windows": 1_000_000, "units": 100}
QUICK = {"windows": 100_000, "units": 10}
#: A year of 30-min windows (365 days * 48).
WINDOWS_PER_YEAR = 17_520
#: Trees per forest: scikit-learn's default, the paper's (Liu et al., 2008) recommendation.
N_ESTIMATORS = 100
#: Share of the scored windows with a planted efficiency drop, and its size in sigmas.
PLANTED_SHARE, PLANTED_SIGMAS = 0.005, 10.0
#: Share of NaN sigma margins (a window without tailwater level).
NAN_SIGMA_SHARE = 0.02


def _peak_rss_mb() -> float:
    """Peak resident set size [MB] (``VmHWM``; ``ru_maxrss`` off Linux; see bench/ingest.py)."""
    try:
        with open("/proc/self/status", encoding="ascii") as status:
            for line in status:
                if line.startswith("VmHWM:"):
                    return int(line.split()[1]) / 1024.0
    except OSError:
        pass
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0


def _reset_peak_rss() -> bool:
    """Reset ``VmHWM`` to the current RSS (Linux >= 4.0), so each phase reports its own."""
    try:
        with open("/proc/self/clear_refs", "w", encoding="ascii") as handle:
            handle.write("5")
    except OSError:
        return False
    return True


def _say(message: str) -> None:
    print(message, file=sys.stderr, flush=True)


def unit_windows(n: int, unit: int, *, seed: int = SEED, planted: float = 0.0,
                 start: str = "2025-01-01") -> tuple[pd.DataFrame, np.ndarray]:
    """Synthetic steady windows of one fictional unit, and the planted-anomaly mask."""
    slope = np.random.default_rng([SEED, unit]).uniform(0.8, 1.2, 4)  # the unit's own
    rng = np.random.default_rng([seed, unit, 1])  # this frame's noise
    load = rng.uniform(0.4, 1.0, n)
    sigma_dev = 0.002
    frame = pd.DataFrame({
        "deviation": rng.normal(0.0, sigma_dev, n),
        "load": load,
        "sigma_margin": 1.6 + 0.6 * slope[0] * (1.0 - load) + rng.normal(0.0, 0.03, n),
        "hf_vibration": 2.0 + 3.0 * slope[1] * load + rng.normal(0.0, 0.3, n),
        "pulsation_ratio": 0.01 + 0.02 * slope[2] * (1.0 - load) + rng.normal(0.0, 0.002, n),
        "shaft_vibration_residual": rng.normal(0.0, 5e-6, n),
        "bearing_vibration_residual": rng.normal(0.0, 1e-4, n),
        "guide_bearing_rise_residual": rng.normal(0.0, 0.5, n),
        "thrust_bearing_rise_residual": rng.normal(0.0, 0.5, n),
        "opening": 0.1 + 0.85 * slope[3] * load + rng.normal(0.0, 0.01, n),
    }, index=pd.date_range(start, periods=n, freq="30min", tz="UTC"))
    frame.loc[rng.random(n) < NAN_SIGMA_SHARE, "sigma_margin"] = np.nan
    mask = rng.random(n) < planted
    frame.loc[mask, "deviation"] -= PLANTED_SIGMAS * sigma_dev
    return frame, mask


def bench_train(units: int, n_estimators: int) -> dict[str, Any]:
    """Fit one detector per unit on a year of windows; bare forest fit + score alongside."""
    wrapped, bare = [], []
    for unit in range(units):
        frame, _ = unit_windows(WINDOWS_PER_YEAR, unit)
        t0 = time.perf_counter()
        WindowAnomalyDetector(n_estimators=n_estimators, random_state=unit).fit(frame)
        t1 = time.perf_counter()
        array = np.nan_to_num(frame.to_numpy(dtype=np.float64))  # bare: no scaling, no NaN
        t2 = time.perf_counter()
        forest = IsolationForest(n_estimators=n_estimators, random_state=unit).fit(array)
        forest.score_samples(array)
        t3 = time.perf_counter()
        wrapped.append(t1 - t0)
        bare.append(t3 - t2)
        if unit % 10 == 9 or unit == units - 1:
            _say(f"train: {unit + 1}/{units} units, {np.mean(wrapped):.3f} s/unit "
                 f"(bare {np.mean(bare):.3f})")
    return {"train_s_per_unit": float(np.mean(wrapped)),
            "train_bare_s_per_unit": float(np.mean(bare)),
            "train_s_total": float(np.sum(wrapped)),
            "train_s_per_unit_max": float(np.max(wrapped))}


def bench_score(windows: int, n_estimators: int, repeats: int) -> dict[str, Any]:
    """Score ``windows`` windows with one unit's detector; bare forest on scaled input."""
    baseline, _ = unit_windows(WINDOWS_PER_YEAR, 0)
    detector = WindowAnomalyDetector(n_estimators=n_estimators, random_state=0).fit(baseline)
    frame, planted = unit_windows(windows, 0, seed=SEED + 1, planted=PLANTED_SHARE,
                                  start="2026-01-01")
    raw = frame[detector.features_].to_numpy(dtype=np.float64)
    # the bare path gets its input scaled and imputed beforehand, untimed
    z = np.nan_to_num((raw - detector.location_) / detector.scale_, nan=0.0)
    _say(f"score: {windows:,} windows synthesised, {n_estimators} trees")
    times, bare_times = [], []
    for r in range(repeats):
        t0 = time.perf_counter()
        scores = detector.score_samples(frame)
        t1 = time.perf_counter()
        detector.forest_.score_samples(z)
        t2 = time.perf_counter()
        times.append(t1 - t0)
        bare_times.append(t2 - t1)
        _say(f"score: run {r + 1}/{repeats}: {t1 - t0:.2f} s (bare {t2 - t1:.2f} s)")
    t0 = time.perf_counter()
    verdict, _ = detector.assess(frame)
    assess_s = time.perf_counter() - t0
    _say(f"assess: {assess_s:.2f} s")
    flagged = verdict["flagged"].to_numpy()
    best, best_bare = min(times), min(bare_times)
    return {
        "score_windows_per_s": windows / best, "score_s": best, "score_runs_s": times,
        "score_bare_windows_per_s": windows / best_bare, "score_bare_s": best_bare,
        "score_ratio_vs_bare": best / best_bare,
        "assess_windows_per_s": windows / assess_s, "assess_s": assess_s,
        "healthy_flagged_share": float(flagged[~planted].mean()),
        "planted_flagged_share": float(flagged[planted].mean()) if planted.any() else None,
        "planted_named_drift_share": (float((verdict["signature"].to_numpy()[planted]
                                             == "drift").mean()) if planted.any() else None),
        "score_mean": float(np.mean(scores)),
        "model_bytes": len(detector.to_bytes()),
    }


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="100,000 windows, 10 units")
    parser.add_argument("--windows", type=int, help="windows scored")
    parser.add_argument("--units", type=int, help="units trained")
    parser.add_argument("--n-estimators", type=int, default=N_ESTIMATORS)
    parser.add_argument("--repeats", type=int, default=3, help="scoring runs (best counts)")
    args = parser.parse_args(argv)
    mode = QUICK if args.quick else FULL
    windows = args.windows or mode["windows"]
    units = args.units or mode["units"]
    wall = time.perf_counter()
    result: dict[str, Any] = {"mode": "quick" if args.quick else "full", "windows": windows,
                              "units": units, "windows_per_unit": WINDOWS_PER_YEAR,
                              "n_estimators": args.n_estimators,
                              "sklearn_version": sklearn.__version__,
                              "cpus": os.cpu_count(), "python": platform.python_version(),
                              "errors": []}
    peaks: dict[str, float] = {}
    per_phase = _reset_peak_rss()
    try:
        result.update(bench_train(units, args.n_estimators))
    except Exception as exc:  # report and go on to the other phase
        result["errors"].append(f"train: {exc!r}")
    peaks["train"] = _peak_rss_mb()
    _reset_peak_rss()
    try:
        result.update(bench_score(windows, args.n_estimators, args.repeats))
    except Exception as exc:
        result["errors"].append(f"score: {exc!r}")
    peaks["score"] = _peak_rss_mb()
    result.update(peak_rss_mb=max(peaks.values()), peak_rss_mb_by_phase=peaks,
                  peak_is_per_phase=per_phase, wall_s=time.perf_counter() - wall)
    for key in ("score_windows_per_s", "score_bare_windows_per_s", "assess_windows_per_s"):
        if key in result:
            _say(f"{key}: {result[key]:,.0f}")
    print(json.dumps(result))
    return 1 if result["errors"] else 0


if __name__ == "__main__":
    sys.exit(main())
