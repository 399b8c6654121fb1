"""Anomaly detector of one unit's steady windows, with explanations and signature names.

:class:`WindowAnomalyDetector` is a scikit-learn style estimator around an isolation forest
(Liu, Ting & Zhou, 2008, "Isolation Forest", Proc. IEEE ICDM, 413-422; scikit-learn's
``IsolationForest``). It is trained on the steady-window features of a declared healthy
baseline period of one unit and then scores new windows:

1. Every feature is standardised robustly against the baseline, ``z = (x - median) / s``
   with ``s = 1.4826 MAD`` (Rousseeuw & Croux, 1993, JASA 88, 1273-1283); NaN features
   (a sensor the window lacks, a sigma margin without tailwater) are imputed with the
   baseline median (``z = 0``) and reported as imputed.
2. The forest's ``score_samples`` (scikit-learn's sign: lower is more abnormal) is compared
   with ``threshold_``, a low quantile of the baseline's own scores.
3. A window is also flagged when its largest ``|z|`` exceeds ``guard_threshold_``: the
   ``1 - threshold_quantile`` quantile of the baseline's largest ``|z|``, but at least
   ``guard_z``. An isolation forest cannot score a value beyond the range of its training
   sample as more isolated than that sample's extreme (its splits are drawn inside the
   training range), and a tree's few splits fall on one given feature only now and then,
   so a single feature far outside the baseline can score like an ordinary window:
   measured on the synthetic frames of ``tests/test_detector.py``, a planted 20-z shaft
   vibration scored -0.42 against a threshold of -0.56, and a planted cavitation (three
   features at 5 to 7 z) -0.55. The guard closes that gap.
4. :meth:`WindowAnomalyDetector.explain` ranks each window's features by ``|z|`` (which
   features, how far from baseline, which sign), and :func:`name_signatures` names each
   flag by documented rules: ``drift``, ``cavitation``, ``vortex_rope``, ``bearing``,
   ``sensor_fault`` or ``unexplained``.

Window features (the lead's window frame; any subset, NaN allowed): ``deviation`` (eta_i -
eta_ref, fraction), ``load`` (P/P_rated), ``sigma_margin`` (sigma_p/sigma_c), ``hf_vibration``
[m/s2], ``pulsation_ratio`` [-], ``shaft_vibration_residual`` [m],
``bearing_vibration_residual`` [m/s], ``guide_bearing_rise_residual`` and
``thrust_bearing_rise_residual`` [K] (residuals against the load-band baseline, see
:mod:`analytics.signatures`), and ``opening`` [-].

A flag advises; it never commands a unit. Cavitation, vortex-rope and bearing signatures
call for inspection by qualified staff; operating limits, protection settings, local codes
and licensed practice prevail.
"""

from __future__ import annotations

import io
from collections.abc import Collection, Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any, Self

import joblib
import numpy as np
import pandas as pd
import sklearn
from numpy.typing import ArrayLike, NDArray
from sklearn.base import BaseEstimator, OutlierMixin
from sklearn.ensemble import IsolationForest
from sklearn.utils.validation import check_is_fitted

#: Window features the detector uses by default, in this order, when present in the frame.
FEATURES = (
    "deviation", "load", "sigma_margin", "hf_vibration", "pulsation_ratio",
    "shaft_vibration_residual", "bearing_vibration_residual",
    "guide_bearing_rise_residual", "thrust_bearing_rise_residual", "opening",
)
#: The names a flag can get.
SIGNATURES = ("drift", "cavitation", "vortex_rope", "bearing", "sensor_fault", "unexplained")
#: Default quantile of the baseline scores below which a window is flagged. 0.5 %: on a
#: year of 30-min windows (17,520) about 88 baseline windows lie below it, enough to place it
#: stably; and one healthy window in 200 flagged is one every four days or more per unit
#: (at most 48 steady windows a day), which the episode rule (several flagged windows before
#: an episode opens) absorbs. The baseline's own flagged share is at most 2 q (forest and
#: guard, see GUARD_Z).
#: A choice made here, not a published value.
THRESHOLD_QUANTILE = 0.005
#: Default floor of the guard threshold on a window's largest |z| (module notes, point 3).
#: For a normal feature P(|z| > 5) = 5.7e-7, so over ten features a healthy window passes it
#: about once in 2 x 10^5: negligible against the forest's 0.5 %; a heavy-tailed baseline raises
#: the guard to its own quantile instead (a choice made here).
GUARD_Z = 5.0
#: Fewest baseline windows to train on: with fewer, the threshold quantile rests on a
#: handful of scores (a choice made here).
MIN_WINDOWS = 200
#: Consistency factor of the MAD for a normal distribution, 1 / Phi^-1(3/4).
MAD_TO_SIGMA = 1.482602218505602
#: Relative floor of a feature's scale where the baseline barely varies, so that z stays
#: finite (a constant baseline feature that moves is then maximally notable).
_SCALE_FLOOR = 1e-6

#: Broad plausibility limits of the window features, in their units. Chosen here, not from a
#: standard: wider than anything a healthy or a failing machine shows in a steady window, so
#: a value outside means a measurement or computation fault (a sensor_fault).
PLAUSIBLE_RANGES: Mapping[str, tuple[float, float]] = {
    "deviation": (-0.5, 0.2),  # eta_i - eta_ref beyond this is a bad index test or signal
    "load": (-0.1, 1.5),
    "sigma_margin": (0.0, 100.0),
    "hf_vibration": (0.0, 2_000.0),  # [m/s2] RMS, about 200 g
    "pulsation_ratio": (0.0, 1.0),  # a pulsation of the whole head
    "pulsation_excess": (0.0, 1.0),
    "shaft_vibration_residual": (-0.005, 0.005),  # [m], 5 mm
    "bearing_vibration_residual": (-0.05, 0.05),  # [m/s], 50 mm/s RMS
    "guide_bearing_rise_residual": (-50.0, 100.0),  # [K]
    "thrust_bearing_rise_residual": (-50.0, 100.0),  # [K]
    "opening": (-0.05, 1.2),
}


@dataclass(frozen=True)
class SignatureRules:
    """Thresholds of :func:`name_signatures` (all overridable per unit).

    Attributes
    ----------
    z_raise : float, default 3.5
        |z| from which a feature counts as raised (or lowered). 3.5 is Iglewicz & Hoaglin's
        cut-off for the modified z-score ``0.6745 (x - median) / MAD``, which equals the
        robust z used here (Iglewicz & Hoaglin, 1993, "How to Detect and Handle Outliers",
        ASQC; from memory).
    sigma_margin_low : float, default 1.1
        Plant-to-critical sigma ratio below which the margin counts as low (common practice:
        a plant sigma near the critical one leaves no margin for the level's swings).
    high_load : float, default 0.75
        ``P/P_rated`` from which an efficiency deficit counts as a high-load deficit
        (cavitation on Francis runners grows above the best-efficiency point; common
        practice).
    part_load_max : float, default 0.7
        ``P/P_rated`` up to which draft-tube pulsation counts as a part-load vortex rope
        (the rope forms at roughly 50-85 % of the best-efficiency flow; Dörfler, Sick &
        Coutu, 2013, ch. 2; from memory; BEP power is typically 80-90 % of rated).
    plausible_ranges : feature -> (low, high), default :data:`PLAUSIBLE_RANGES`
    """

    z_raise: float = 3.5
    sigma_margin_low: float = 1.1
    high_load: float = 0.75
    part_load_max: float = 0.7
    plausible_ranges: Mapping[str, tuple[float, float]] = field(
        default_factory=lambda: dict(PLAUSIBLE_RANGES))


DEFAULT_RULES = SignatureRules()


@dataclass(frozen=True)
class Explanation:
    """Per-window robust z-scores of the features against the baseline, ranked.

    Attributes
    ----------
    z : DataFrame (windows x features) of ``(x - median) / scale``; 0 where imputed
    values : DataFrame of the raw feature values (NaN kept)
    imputed : DataFrame of bool: the value was NaN or infinite and the baseline median
        took its place
    order : int array (windows, features): feature positions by descending ``|z|``
    location, scale : Series per feature: the baseline median and robust scale
    """

    z: pd.DataFrame
    values: pd.DataFrame
    imputed: pd.DataFrame
    order: NDArray[np.int64]
    location: pd.Series
    scale: pd.Series

    def ranked(self, top: int | None = None) -> pd.DataFrame:
        """Long frame: one row per window and rank (1 = farthest from the baseline).

        Columns ``window`` (the input's index label), ``rank``, ``feature``, ``z``,
        ``value``, ``baseline`` (median), ``scale`` and ``imputed``. ``top`` keeps that many
        ranks per window (all by default).
        """
        k = self.order.shape[1] if top is None else min(int(top), self.order.shape[1])
        order = self.order[:, :k]
        names = np.asarray(self.z.columns)[order]
        n = len(self.z)
        return pd.DataFrame({
            "window": np.repeat(self.z.index.to_numpy(), k),
            "rank": np.tile(np.arange(1, k + 1), n),
            "feature": names.ravel(),
            "z": np.take_along_axis(self.z.to_numpy(), order, axis=1).ravel(),
            "value": np.take_along_axis(self.values.to_numpy(), order, axis=1).ravel(),
            "baseline": self.location.to_numpy()[order].ravel(),
            "scale": self.scale.to_numpy()[order].ravel(),
            "imputed": np.take_along_axis(self.imputed.to_numpy(), order, axis=1).ravel(),
        })

    def records(self, positions: ArrayLike, top: int = 3) -> list[dict[str, Any]]:
        """JSON-ready explanations of the windows at ``positions`` (for storage).

        Each: ``features`` (the ``top`` ranked: name, z, value, baseline, scale, sign
        ``"+"``/``"-"``) and ``imputed`` (features filled with the baseline median).
        """
        pos = np.asarray(positions, dtype=np.int64)
        sub = Explanation(self.z.iloc[pos], self.values.iloc[pos], self.imputed.iloc[pos],
                          self.order[pos], self.location, self.scale)
        long = sub.ranked(top)
        imputed = sub.imputed.to_numpy()
        columns = np.asarray(sub.imputed.columns)
        k = min(top, self.order.shape[1])
        out = []
        for i in range(len(pos)):  # one dict per flagged window, for the JSON column
            rows = long.iloc[i * k:(i + 1) * k]
            out.append({
                "features": [
                    {"name": str(r.feature), "z": _json_float(r.z), "value": _json_float(r.value),
                     "baseline": _json_float(r.baseline), "scale": _json_float(r.scale),
                     "sign": "+" if r.z >= 0 else "-"}
                    for r in rows.itertuples(index=False)],
                "imputed": [str(c) for c in columns[imputed[i]]],
            })
        return out


class WindowAnomalyDetector(OutlierMixin, BaseEstimator):
    """Isolation-forest detector of one unit's anomalous steady windows.

    Parameters
    ----------
    features : sequence of str, optional
        Feature columns, in order. Default: those of :data:`FEATURES` present in the
        training frame.
    n_estimators : int, default 100
        Trees of the forest (Liu et al., 2008, found path lengths converge well before 100).
    max_samples : int, float or "auto", default "auto"
        Sub-sample per tree (``"auto"``: min(256, n), the paper's recommendation).
    threshold_quantile : float, default :data:`THRESHOLD_QUANTILE` (0.005)
        Quantile of the baseline's scores that becomes ``threshold_``.
    guard_z : float, default :data:`GUARD_Z` (5)
        Floor of ``guard_threshold_``: a window with a feature beyond it is flagged whatever
        its forest score (``inf`` turns the guard off).
    random_state : int, default 0
        Seed of the forest; an int is required so that a model can be retrained exactly.
    min_windows : int, default :data:`MIN_WINDOWS` (200)
        Fewest baseline windows that :meth:`fit` accepts.
    n_jobs : int, optional
        Passed to ``IsolationForest`` (scores do not depend on it).

    Attributes
    ----------
    features_ : list of str, the features used, in order
    dropped_features_ : list of str, requested features that were all NaN in the baseline
    location_, scale_ : float arrays per feature: baseline median and ``1.4826 MAD``
        (the standard deviation where the MAD is 0, floored at 1e-6 of |median| or 1e-12)
    forest_ : the fitted ``IsolationForest`` (trained on the robust z-scores)
    threshold_ : float, the ``threshold_quantile`` of the baseline's ``score_samples``
    guard_threshold_ : float, ``max(guard_z, 1 - threshold_quantile quantile of the
        baseline's largest |z| per window)``
    n_windows_ : int, baseline windows trained on
    training_period_ : (first, last) window start of the baseline, or None
    """

    def __init__(self, features: Sequence[str] | None = None, *, n_estimators: int = 100,
                 max_samples: int | float | str = "auto",
                 threshold_quantile: float = THRESHOLD_QUANTILE, guard_z: float = GUARD_Z,
                 random_state: int = 0, min_windows: int = MIN_WINDOWS,
                 n_jobs: int | None = None) -> None:
        self.features = features
        self.n_estimators = n_estimators
        self.max_samples = max_samples
        self.threshold_quantile = threshold_quantile
        self.guard_z = guard_z
        self.random_state = random_state
        self.min_windows = min_windows
        self.n_jobs = n_jobs

    # ------------------------------------------------------------------ training
    def fit(self, X: pd.DataFrame, y: Any = None) -> Self:
        """Train on the steady windows of a declared healthy baseline period.

        Parameters
        ----------
        X : DataFrame, one row per steady baseline window, named feature columns. Its
            index, when a ``DatetimeIndex``, or else a ``start`` column gives the training
            period (``training_period_``).
        y : ignored
        """
        del y
        if not isinstance(X, pd.DataFrame):
            raise TypeError("X must be a pandas DataFrame with named feature columns")
        if not isinstance(self.random_state, int | np.integer):
            raise ValueError("random_state must be an int: a detector must be reproducible")
        if not 0.0 < self.threshold_quantile < 0.5:
            raise ValueError("threshold_quantile must lie in (0, 0.5)")
        if len(X) < self.min_windows:
            raise ValueError(f"{len(X)} baseline windows; at least {self.min_windows} needed")
        requested = (list(self.features) if self.features is not None
                     else [f for f in FEATURES if f in X.columns])
        if not requested:
            raise ValueError("no feature column found in X")
        missing = [f for f in requested if f not in X.columns]
        if missing:
            raise ValueError(f"X lacks the feature columns {missing}")
        raw = _finite_or_nan(X[requested].to_numpy(dtype=np.float64))
        usable = np.isfinite(raw).any(axis=0)
        self.dropped_features_ = [f for f, ok in zip(requested, usable, strict=True) if not ok]
        self.features_ = [f for f, ok in zip(requested, usable, strict=True) if ok]
        if not self.features_:
            raise ValueError("every feature is NaN over the baseline")
        raw = raw[:, usable]
        location = np.nanmedian(raw, axis=0)
        scale = MAD_TO_SIGMA * np.nanmedian(np.abs(raw - location), axis=0)
        scale = np.where(scale > 0, scale, np.nanstd(raw, axis=0))
        floor = np.maximum(_SCALE_FLOOR * np.abs(location), 1e-12)
        self.location_ = location
        self.scale_ = np.maximum(np.nan_to_num(scale, nan=0.0), floor)
        z, _ = self._standardise(raw)
        self.forest_ = IsolationForest(
            n_estimators=self.n_estimators, max_samples=self.max_samples,
            contamination="auto", random_state=int(self.random_state), n_jobs=self.n_jobs,
        ).fit(z)
        baseline_scores = self.forest_.score_samples(z)
        self.threshold_ = float(np.quantile(baseline_scores, self.threshold_quantile))
        largest = np.abs(z).max(axis=1)
        self.guard_threshold_ = float(max(self.guard_z,
                                          np.quantile(largest, 1.0 - self.threshold_quantile)))
        self.n_windows_ = len(X)
        self.training_period_ = _period(X)
        self.feature_names_in_ = np.asarray(self.features_, dtype=object)
        self.n_features_in_ = len(self.features_)
        return self

    # ------------------------------------------------------------------ scoring
    def score_samples(self, X: pd.DataFrame) -> NDArray[np.float64]:
        """The forest's score of each window (scikit-learn's sign: lower = more abnormal)."""
        z, _ = self._standardise(self._raw(X))
        return self.forest_.score_samples(z)

    def decision_function(self, X: pd.DataFrame) -> NDArray[np.float64]:
        """``score_samples - threshold_``: negative below the forest's threshold."""
        return self.score_samples(X) - self.threshold_

    def flagged(self, X: pd.DataFrame) -> NDArray[np.bool_]:
        """True where the forest score is below ``threshold_`` or a feature's |z| exceeds
        ``guard_threshold_``."""
        z, _ = self._standardise(self._raw(X))
        return self._flags(z, self.forest_.score_samples(z))

    def predict(self, X: pd.DataFrame) -> NDArray[np.int64]:
        """-1 for flagged windows, +1 for the others (scikit-learn's outlier convention)."""
        return np.where(self.flagged(X), -1, 1)

    def explain(self, X: pd.DataFrame) -> Explanation:
        """Robust z-scores of every window's features against the baseline, ranked by |z|."""
        raw = self._raw(X)
        z, imputed = self._standardise(raw)
        order = np.argsort(-np.abs(z), axis=1, kind="stable")
        index = X.index
        return Explanation(
            z=pd.DataFrame(z, index=index, columns=self.features_),
            values=pd.DataFrame(raw, index=index, columns=self.features_),
            imputed=pd.DataFrame(imputed, index=index, columns=self.features_),
            order=order,
            location=pd.Series(self.location_, index=self.features_),
            scale=pd.Series(self.scale_, index=self.features_),
        )

    def assess(self, X: pd.DataFrame, *, sensor_fault: ArrayLike | None = None,
               rules: SignatureRules = DEFAULT_RULES) -> tuple[pd.DataFrame, Explanation]:
        """Score, flag, explain and name every window.

        Parameters
        ----------
        X : DataFrame of window features (as for :meth:`fit`)
        sensor_fault : bool array (windows,), optional
            Windows the caller found faulty (:func:`analytics.signatures.stuck_signal`,
            ``drifting_signal``, ...): flagged and named ``sensor_fault``.
        rules : SignatureRules

        Returns
        -------
        (frame, explanation)
            ``frame`` on X's index: ``raw_score`` (``score_samples``), ``score``
            (``threshold_ - raw_score``: higher is more anomalous, > 0 below the forest's
            threshold), ``max_abs_z``, ``flagged`` (forest, guard, implausible value or
            ``sensor_fault``), ``signature`` (None where not flagged), ``lead_feature`` and
            ``lead_z`` (the feature farthest from baseline).
        """
        explanation = self.explain(X)
        z = explanation.z.to_numpy()
        raw_score = self.forest_.score_samples(z)
        values = _values_frame(X, self.features_)
        faults = _sensor_faults(values, sensor_fault, rules)
        flagged = self._flags(z, raw_score) | faults
        names = name_signatures(explanation.z, values, sensor_fault=faults, rules=rules)
        lead = explanation.order[:, 0]
        frame = pd.DataFrame({
            "raw_score": raw_score,
            "score": self.threshold_ - raw_score,
            "max_abs_z": np.abs(z).max(axis=1),
            "flagged": flagged,
            "signature": np.where(flagged, names, None),
            "lead_feature": np.asarray(self.features_, dtype=object)[lead],
            "lead_z": np.take_along_axis(z, lead[:, None], axis=1)[:, 0],
        }, index=X.index)
        return frame, explanation

    # ------------------------------------------------------------------ storage
    def metadata(self) -> dict[str, Any]:
        """JSON-ready description of the fitted model, for the ``detector_models`` row."""
        check_is_fitted(self, "forest_")
        start, end = self.training_period_ or (None, None)
        return {
            "features": list(self.features_),
            "dropped_features": list(self.dropped_features_),
            "params": {k: _json_param(v) for k, v in self.get_params().items()},
            "threshold": self.threshold_,
            "guard_threshold": _json_param(self.guard_threshold_),
            "n_windows": self.n_windows_,
            "trained_from": None if start is None else pd.Timestamp(start).isoformat(),
            "trained_to": None if end is None else pd.Timestamp(end).isoformat(),
            "baseline": {f: {"median": float(m), "scale": float(s)}
                         for f, m, s in zip(self.features_, self.location_, self.scale_,
                                            strict=True)},
            "sklearn_version": sklearn.__version__,
        }

    def to_bytes(self) -> bytes:
        """The fitted estimator as joblib bytes (zlib level 3).

        Pickle-based: load only bytes this service wrote (:meth:`from_bytes` runs code on
        load), and with the scikit-learn version named in :meth:`metadata`; retrain rather
        than load across versions.
        """
        check_is_fitted(self, "forest_")
        buffer = io.BytesIO()
        joblib.dump(self, buffer, compress=("zlib", 3))
        return buffer.getvalue()

    @classmethod
    def from_bytes(cls, blob: bytes) -> WindowAnomalyDetector:
        """Load an estimator written by :meth:`to_bytes` (trusted bytes only)."""
        model = joblib.load(io.BytesIO(blob))
        if not isinstance(model, cls):
            raise TypeError(f"the bytes hold a {type(model).__name__}, not a {cls.__name__}")
        return model

    # ------------------------------------------------------------------ internals
    def _raw(self, X: pd.DataFrame) -> NDArray[np.float64]:
        check_is_fitted(self, "forest_")
        if not isinstance(X, pd.DataFrame):
            raise TypeError("X must be a pandas DataFrame with named feature columns")
        missing = [f for f in self.features_ if f not in X.columns]
        if missing:
            raise ValueError(f"X lacks the feature columns {missing}")
        return X[self.features_].to_numpy(dtype=np.float64)

    def _standardise(self, raw: NDArray[np.float64]) -> tuple[NDArray, NDArray]:
        """Robust z-scores, with non-finite values imputed by the baseline median (z = 0)."""
        imputed = ~np.isfinite(raw)
        z = (raw - self.location_) / self.scale_
        z[imputed] = 0.0
        return z, imputed

    def _flags(self, z: NDArray, raw_score: NDArray) -> NDArray[np.bool_]:
        return (raw_score < self.threshold_) | (np.abs(z).max(axis=1) > self.guard_threshold_)


def name_signatures(z: pd.DataFrame, values: pd.DataFrame, *,
                    sensor_fault: ArrayLike | None = None,
                    rules: SignatureRules = DEFAULT_RULES) -> NDArray[np.object_]:
    """Name each window's anomaly from its robust z-scores and raw feature values.

    Parameters
    ----------
    z : DataFrame (windows x features) of robust z-scores (:meth:`WindowAnomalyDetector.
        explain`), 0 for imputed values; a feature the frame lacks counts as 0.
    values : DataFrame of the raw feature values on the same rows (NaN allowed); ``load``
        and ``sigma_margin`` are read from it.
    sensor_fault : bool array (windows,), optional; windows known to be faulty
    rules : SignatureRules

    Returns
    -------
    object array of str, one of :data:`SIGNATURES` per window.

    Notes
    -----
    With ``T = rules.z_raise``, "raised" meaning ``z >= T`` and "low" ``z <= -T``, the first
    rule that holds names the window:

    1. ``sensor_fault``: a raw value outside ``rules.plausible_ranges`` (or infinite), or
       the caller's ``sensor_fault`` mask. Bad data would make any other name unfounded.
    2. ``cavitation``: a low sigma margin (``sigma_margin < rules.sigma_margin_low`` or its
       z low) together with raised ``hf_vibration`` and/or a low ``deviation`` at
       ``load >= rules.high_load``; without a sigma margin (NaN), both raised
       ``hf_vibration`` and the high-load deficit (domain primer, section 5).
    3. ``vortex_rope``: ``load <= rules.part_load_max`` with raised ``pulsation_excess``
       (or ``pulsation_ratio`` where the frame has no excess).
    4. ``bearing``: raised ``guide_bearing_rise_residual`` or
       ``thrust_bearing_rise_residual`` (temperature rise over the cooling water, at like
       load), or raised ``shaft_vibration_residual`` / ``bearing_vibration_residual``
       (vibration at like load): the mechanical family.
    5. ``drift``: ``|z(deviation)| >= T`` while every other feature stays within ``T``: the
       efficiency alone moved (wear, leakage, fouling, a shifted index constant).
    6. ``unexplained``: anything else.

    The rules are a first screen, not a diagnosis: each name calls for a look by qualified
    staff; local codes and licensed practice prevail.
    """
    n = len(z)
    if len(values) != n:
        raise ValueError("z and values differ in length")
    t = rules.z_raise

    def zs(name: str) -> NDArray[np.float64]:
        return z[name].to_numpy(dtype=np.float64) if name in z.columns else np.zeros(n)

    def raw(name: str) -> NDArray[np.float64]:
        if name not in values.columns:
            return np.full(n, np.nan)
        return values[name].to_numpy(dtype=np.float64)

    faults = _sensor_faults(values, sensor_fault, rules)
    load, margin = raw("load"), raw("sigma_margin")
    with np.errstate(invalid="ignore"):
        high_load = load >= rules.high_load
        part_load = load <= rules.part_load_max
        margin_low = (margin < rules.sigma_margin_low) | (zs("sigma_margin") <= -t)
    margin_unknown = ~np.isfinite(margin)
    hf_raised = zs("hf_vibration") >= t
    deficit_high_load = (zs("deviation") <= -t) & high_load
    cavitation = ((margin_low & (hf_raised | deficit_high_load))
                  | (margin_unknown & hf_raised & deficit_high_load))
    # the excess over a healthy level is the physical feature where the caller gives it
    rope_feature = "pulsation_excess" if "pulsation_excess" in z.columns else "pulsation_ratio"
    vortex_rope = part_load & (zs(rope_feature) >= t)
    bearing = np.zeros(n, dtype=bool)
    for name in ("guide_bearing_rise_residual", "thrust_bearing_rise_residual",
                 "shaft_vibration_residual", "bearing_vibration_residual"):
        bearing |= zs(name) >= t
    others = [c for c in z.columns if c != "deviation"]
    others_quiet = (np.abs(z[others].to_numpy(dtype=np.float64)).max(axis=1) < t
                    if others else np.ones(n, dtype=bool))
    drift = (np.abs(zs("deviation")) >= t) & others_quiet
    return np.select(
        [faults, cavitation, vortex_rope, bearing, drift],
        ["sensor_fault", "cavitation", "vortex_rope", "bearing", "drift"],
        default="unexplained",
    ).astype(object)


def name_signature(z: Mapping[str, float], values: Mapping[str, float] | None = None, *,
                   sensor_fault: bool = False, rules: SignatureRules = DEFAULT_RULES) -> str:
    """:func:`name_signatures` for one window.

    Parameters
    ----------
    z : feature -> robust z-score of the window (e.g. one row of ``Explanation.z``)
    values : feature -> raw value (``load`` and ``sigma_margin`` at least, where known)
    sensor_fault : the window is known to be faulty
    rules : SignatureRules
    """
    z_frame = pd.DataFrame({k: [float(v)] for k, v in z.items()})
    v_frame = pd.DataFrame({k: [float(v)] for k, v in (values or {}).items()})
    if v_frame.empty:
        v_frame = pd.DataFrame(index=[0])
    return str(name_signatures(z_frame, v_frame, sensor_fault=np.array([sensor_fault]),
                               rules=rules)[0])


def _sensor_faults(values: pd.DataFrame, sensor_fault: ArrayLike | None,
                   rules: SignatureRules) -> NDArray[np.bool_]:
    """Caller's fault mask OR any feature outside its plausible range (or infinite)."""
    n = len(values)
    faults = (np.zeros(n, dtype=bool) if sensor_fault is None
              else np.asarray(sensor_fault, dtype=bool).reshape(n).copy())
    for name in values.columns:
        x = values[name].to_numpy(dtype=np.float64)
        low, high = rules.plausible_ranges.get(name, (-np.inf, np.inf))
        with np.errstate(invalid="ignore"):
            faults |= np.isinf(x) | (x < low) | (x > high)
    return faults


def _values_frame(X: pd.DataFrame, features: Collection[str]) -> pd.DataFrame:
    """The raw feature values, plus ``load`` and ``sigma_margin`` when X has them."""
    names = list(features) + [c for c in ("load", "sigma_margin")
                              if c in X.columns and c not in features]
    return X[names].astype(np.float64)


def _finite_or_nan(a: NDArray[np.float64]) -> NDArray[np.float64]:
    return np.where(np.isfinite(a), a, np.nan)


def _period(X: pd.DataFrame) -> tuple[pd.Timestamp, pd.Timestamp] | None:
    """(first, last) window start from a DatetimeIndex or a ``start`` column."""
    if isinstance(X.index, pd.DatetimeIndex) and len(X.index):
        return X.index.min(), X.index.max()
    if "start" in X.columns and len(X):
        start = pd.to_datetime(X["start"], utc=True)
        return start.min(), start.max()
    return None


def _json_param(v: Any) -> Any:
    """A constructor parameter as strict JSON (tuples as lists, inf and NaN as text)."""
    if isinstance(v, tuple | list):
        return list(v)
    if isinstance(v, float) and not np.isfinite(v):
        return str(v)
    return v


def _json_float(x: float) -> float | None:
    return float(x) if np.isfinite(x) else None
