"""Detector wiring: window features, training on a declared baseline, scoring, episodes.

* Features per steady window (SI or fractions): ``deviation`` (eta_i - eta_ref), ``load``
  (P / P_rated), ``opening``, ``sigma_margin`` (sigma_p / sigma_c), ``hf_vibration``,
  ``pulsation_excess`` (draft-tube pulsation over rho g H above
  :data:`PULSATION_HEALTHY_RATIO`), and the vibration and bearing-temperature-rise
  residuals against the baseline's straight line in load, so that a loaded unit is
  compared with itself at like load, also at loads its baseline did not visit.
* Training: the unit's steady windows of a declared healthy period (default: the first
  ``DEFAULT_BASELINE_DAYS`` of its reference epoch); the fitted estimator, its features,
  load-band table and training period are stored as a new ``detector_models`` version.
  Retraining (``hydrodrift detector train``) adds a version; past scores keep theirs.
* Scoring: windows not yet scored by the unit's newest detector; scores are replaced for the
  recomputed range only.
* Episodes: :func:`jobs.episodes.reconcile` over the newest detector's flagged windows.
"""

from __future__ import annotations

from datetime import datetime, timedelta

import numpy as np
import pandas as pd
from sqlalchemy import delete, func, select
from sqlalchemy.orm import Session

from analytics.detector import WindowAnomalyDetector
from analytics.signatures import pulsation_ratio, temperature_rise
from hydrodrift import __version__
from hydrodrift.settings import Settings
from ingest.plant_file import UnitSpec
from jobs.episodes import reconcile
from store.models import (
    DetectorModel,
    EfficiencyWindow,
    Plant,
    ReferenceModel,
    Unit,
    UnitConfigVersion,
    WindowScore,
)

#: Default healthy baseline of a detector: the first 8 weeks of a reference epoch's steady
#: windows (common practice: long enough to see the unit's load range, short enough that a
#: slow drift has not set in).
DEFAULT_BASELINE_DAYS = 56.0
#: Draft-tube pulsation (peak-to-peak over rho g H) a healthy unit may show at part load
#: (common practice: a few tenths of a per cent; a developed rope gives several per cent).
#: Only the excess above it is a feature, so that healthy part-load operation the baseline
#: did not visit is not an anomaly.
PULSATION_HEALTHY_RATIO = 0.01
#: Features the service's detectors use, in order.
DETECTOR_FEATURES = ("deviation", "load", "opening", "sigma_margin", "hf_vibration",
                     "pulsation_excess", "shaft_vibration_residual",
                     "bearing_vibration_residual", "guide_bearing_rise_residual",
                     "thrust_bearing_rise_residual")
#: Quantities compared against their baseline line in load.
BAND_QUANTITIES = ("shaft_vibration", "bearing_vibration", "guide_bearing_rise",
                   "thrust_bearing_rise")

_WINDOW_COLUMNS = ("start", "duration_s", "generator_power", "net_head", "opening",
                   "water_density", "deviation", "sigma_margin", "hf_vibration",
                   "draft_tube_pulsation", "shaft_vibration", "bearing_vibration",
                   "guide_bearing_temperature", "thrust_bearing_temperature",
                   "cooling_water_temperature")


class DetectorError(ValueError):
    """A detector cannot be trained or used (too few baseline windows, no unit...)."""


def steady_windows_frame(session: Session, unit: Unit, *, since: datetime | None = None,
                         until: datetime | None = None) -> pd.DataFrame:
    """The unit's steady windows that have a deviation, as a frame indexed by start."""
    columns = [getattr(EfficiencyWindow, c) for c in _WINDOW_COLUMNS]
    query = select(*columns).where(EfficiencyWindow.unit_id == unit.id,
                                   EfficiencyWindow.steady.is_(True),
                                   EfficiencyWindow.deviation.is_not(None))
    if since is not None:
        query = query.where(EfficiencyWindow.start >= since)
    if until is not None:
        query = query.where(EfficiencyWindow.start < until)
    frame = pd.DataFrame(session.execute(query.order_by(EfficiencyWindow.start)).all(),
                         columns=list(_WINDOW_COLUMNS))
    frame["start"] = pd.to_datetime(frame["start"], utc=True)
    for name in _WINDOW_COLUMNS[1:]:
        frame[name] = pd.to_numeric(frame[name], errors="coerce").astype(float)
    return frame.set_index("start")


def raw_quantities(windows: pd.DataFrame, spec: UnitSpec, gravity: float) -> pd.DataFrame:
    """Per-window quantities before the load-band comparison."""
    load = windows["generator_power"] / spec.rated_power
    out = pd.DataFrame(index=windows.index)
    out["deviation"] = windows["deviation"]
    out["load"] = load
    out["opening"] = windows["opening"]
    out["sigma_margin"] = windows["sigma_margin"]
    out["hf_vibration"] = windows["hf_vibration"]
    ratio = np.asarray(pulsation_ratio(
        windows["draft_tube_pulsation"].to_numpy(), windows["net_head"].to_numpy(),
        windows["water_density"].to_numpy(), gravity), dtype=float)
    out["pulsation_excess"] = np.maximum(ratio - PULSATION_HEALTHY_RATIO, 0.0)
    out["shaft_vibration"] = windows["shaft_vibration"]
    out["bearing_vibration"] = windows["bearing_vibration"]
    out["guide_bearing_rise"] = np.asarray(temperature_rise(
        windows["guide_bearing_temperature"].to_numpy(),
        windows["cooling_water_temperature"].to_numpy()), dtype=float)
    out["thrust_bearing_rise"] = np.asarray(temperature_rise(
        windows["thrust_bearing_temperature"].to_numpy(),
        windows["cooling_water_temperature"].to_numpy()), dtype=float)
    return out


def load_lines(raw: pd.DataFrame) -> dict[str, list[float] | None]:
    """Per band quantity, the baseline's least-squares line ``value = a + b * load``.

    A straight line in load (bearing losses and vibration grow roughly linearly with load
    over the operating range; common practice) extrapolates to loads the baseline did not
    visit, where a table of load bands would have no value.
    """
    lines: dict[str, list[float] | None] = {}
    for name in BAND_QUANTITIES:
        ok = np.isfinite(raw[name].to_numpy()) & np.isfinite(raw["load"].to_numpy())
        if ok.sum() < 10 or np.ptp(raw["load"].to_numpy()[ok]) < 0.05:
            lines[name] = None
            continue
        b, a = np.polyfit(raw["load"].to_numpy()[ok], raw[name].to_numpy()[ok], 1)
        lines[name] = [float(a), float(b)]
    return lines


def features(raw: pd.DataFrame, lines: dict[str, list[float] | None]) -> pd.DataFrame:
    """Detector features: raw quantities with the band quantities as residuals."""
    out = raw.drop(columns=list(BAND_QUANTITIES))
    load = raw["load"].to_numpy()
    for name in BAND_QUANTITIES:
        line = lines.get(name)
        values = raw[name].to_numpy()
        out[f"{name}_residual"] = (values - (line[0] + line[1] * load)
                                   if line is not None else np.full(len(raw), np.nan))
    return out


def _spec(session: Session, unit: Unit) -> UnitSpec:
    version = session.scalar(select(UnitConfigVersion).where(UnitConfigVersion.unit_id == unit.id)
                             .order_by(UnitConfigVersion.version.desc()).limit(1))
    return UnitSpec.model_validate(version.config)


def _gravity(plant: Plant) -> float:
    from analytics.site import local_gravity

    return float(local_gravity(plant.latitude_deg, plant.elevation_m))


def train_detector(session: Session, plant: Plant, unit: Unit, *, since: datetime,
                   until: datetime, random_state: int = 0) -> DetectorModel:
    """Train and store a new detector version on the unit's steady windows in the period."""
    spec = _spec(session, unit)
    windows = steady_windows_frame(session, unit, since=since, until=until)
    if len(windows) == 0:
        raise DetectorError(f"{plant.code}/{unit.code}: no steady windows with a deviation "
                            f"between {since:%Y-%m-%d} and {until:%Y-%m-%d}")
    raw = raw_quantities(windows, spec, _gravity(plant))
    lines = load_lines(raw)
    X = features(raw, lines)
    detector = WindowAnomalyDetector(features=[c for c in DETECTOR_FEATURES if c in X],
                                     random_state=random_state)
    try:
        detector.fit(X)
    except ValueError as exc:
        raise DetectorError(f"{plant.code}/{unit.code}: {exc}") from None
    meta = detector.metadata()
    newest = session.scalar(select(func.max(DetectorModel.version))
                            .where(DetectorModel.unit_id == unit.id)) or 0
    row = DetectorModel(
        unit_id=unit.id, version=newest + 1, trained_from=since, trained_to=until,
        n_windows=int(meta["n_windows"]), features=list(meta["features"]),
        params=meta["params"], threshold=float(meta["threshold"]),
        baseline={"features": meta["baseline"], "guard_threshold": meta["guard_threshold"],
                  "load_lines": lines},
        blob=detector.to_bytes(), code_version=__version__)
    session.add(row)
    session.flush()
    return row


def newest_detector(session: Session, unit: Unit) -> DetectorModel | None:
    """The unit's newest detector version, or None."""
    return session.scalar(select(DetectorModel).where(DetectorModel.unit_id == unit.id)
                          .order_by(DetectorModel.version.desc()).limit(1))


def baseline_period(session: Session, unit: Unit) -> tuple[datetime, datetime] | None:
    """Default training period: the first DEFAULT_BASELINE_DAYS of the newest reference
    epoch's steady windows with a deviation; None until the data reach past its end."""
    reference = session.scalar(select(ReferenceModel).where(ReferenceModel.unit_id == unit.id)
                               .order_by(ReferenceModel.version.desc()).limit(1))
    if reference is None or reference.index_constant is None:
        return None
    first = session.scalar(select(func.min(EfficiencyWindow.start)).where(
        EfficiencyWindow.unit_id == unit.id, EfficiencyWindow.reference_model_id == reference.id,
        EfficiencyWindow.steady.is_(True), EfficiencyWindow.deviation.is_not(None)))
    last = session.scalar(select(func.max(EfficiencyWindow.start)).where(
        EfficiencyWindow.unit_id == unit.id))
    if first is None or last is None:
        return None
    end = first + timedelta(days=DEFAULT_BASELINE_DAYS)
    return (first, end) if last >= end else None


def detect_unit(session: Session, settings: Settings, plant: Plant, unit: Unit,
                changed_from: datetime) -> dict[str, int]:
    """Train once the baseline is in, score new windows, reconcile episodes."""
    counts = {"trained": 0, "scored": 0, "flagged": 0, "events": 0}
    row = newest_detector(session, unit)
    if row is None:
        period = baseline_period(session, unit)
        if period is None:
            return counts
        try:
            row = train_detector(session, plant, unit, since=period[0], until=period[1])
        except DetectorError:
            return counts  # too thin a baseline: retried on the next run
        counts["trained"] = 1
        changed_from = min(changed_from, period[0])
    scored = score_windows(session, plant, unit, row, since=changed_from)
    counts["scored"] = len(scored)
    counts["flagged"] = int(scored["flagged"].sum()) if len(scored) else 0
    events = reconcile_unit(session, settings, plant, unit, row)
    counts["events"] = len(events)
    return counts


def score_windows(session: Session, plant: Plant, unit: Unit, row: DetectorModel, *,
                  since: datetime) -> pd.DataFrame:
    """Score the unit's steady windows from ``since`` with detector ``row``; store them."""
    spec = _spec(session, unit)
    windows = steady_windows_frame(session, unit, since=since)
    session.execute(delete(WindowScore).where(WindowScore.unit_id == unit.id,
                                              WindowScore.detector_model_id == row.id,
                                              WindowScore.start >= since))
    if windows.empty:
        return pd.DataFrame(columns=["flagged"])
    raw = raw_quantities(windows, spec, _gravity(plant))
    X = features(raw, row.baseline["load_lines"])
    detector = WindowAnomalyDetector.from_bytes(row.blob)
    frame, explanation = detector.assess(X)
    flagged_pos = np.flatnonzero(frame["flagged"].to_numpy())
    explained = dict(zip(flagged_pos.tolist(), explanation.records(flagged_pos, top=3),
                         strict=True))
    rows = []
    for i, (start, rec) in enumerate(frame.iterrows()):
        rows.append({
            "unit_id": unit.id, "start": start.to_pydatetime(), "detector_model_id": row.id,
            "score": float(rec["score"]), "flagged": bool(rec["flagged"]),
            "signature": rec["signature"] if rec["flagged"] else None,
            "explanation": explained.get(i, {}),
        })
    if rows:
        session.execute(WindowScore.__table__.insert(), rows)
    return frame


def reconcile_unit(session: Session, settings: Settings, plant: Plant, unit: Unit,
                   row: DetectorModel) -> list:
    """Episodes of the unit from every flagged window of detector ``row``."""
    flags = pd.DataFrame(session.execute(
        select(WindowScore.start, EfficiencyWindow.duration_s, WindowScore.signature,
               WindowScore.score, EfficiencyWindow.sigma_margin, WindowScore.explanation)
        .join(EfficiencyWindow, (EfficiencyWindow.unit_id == WindowScore.unit_id)
              & (EfficiencyWindow.start == WindowScore.start))
        .where(WindowScore.unit_id == unit.id, WindowScore.detector_model_id == row.id,
               WindowScore.flagged.is_(True))).all(),
        columns=["start", "duration_s", "signature", "score", "sigma_margin", "explanation"])
    flags["start"] = pd.to_datetime(flags["start"], utc=True)
    flags["lead"] = [(e or {}).get("features", [{}])[0].get("name") if (e or {}).get("features")
                     else None for e in flags.pop("explanation")]
    last = session.execute(select(EfficiencyWindow.start, EfficiencyWindow.duration_s)
                           .where(EfficiencyWindow.unit_id == unit.id)
                           .order_by(EfficiencyWindow.start.desc()).limit(1)).first()
    if last is None:
        return []
    data_end = last[0] + timedelta(seconds=float(last[1]))
    return reconcile(session, settings, plant, unit, flags, data_end)
