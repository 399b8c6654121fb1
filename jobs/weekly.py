"""Weekly roll-up of a unit's efficiency windows into ``weekly_drift`` rows.

A week is an ISO week in the plant's time zone. Each row holds the week's level (median
deviation with its bootstrap interval), the trend and the last change point over the
reference epoch's weeks *up to and including* that week (so a row says what was known at
the end of its week and does not move when later weeks arrive), and the lost energy.
"""

from __future__ import annotations

from datetime import datetime

import numpy as np
import pandas as pd
from sqlalchemy import delete, select
from sqlalchemy.orm import Session

from analytics.drift import (
    MIN_SEGMENT_WEEKS,
    change_points,
    iso_week,
    robust_noise_sigma,
    theil_sen_trend,
    weekly_drift,
)
from analytics.energy import j_to_mwh, weekly_lost_energy
from hydrodrift import __version__
from hydrodrift.settings import Settings
from store.models import EfficiencyWindow, Plant, Unit, WeeklyDrift

#: Fewest weeks with a level before a trend is stated.
MIN_TREND_WEEKS = 8
#: Floor of the week-to-week noise of the weekly median deviation (fraction; 0.1 point).
#: The bootstrap noise of a week's median is a few hundredths of a point, but systematic
#: effects (head and water-temperature seasons, dispatch patterns, the reference's own
#: interpolation) move a healthy unit's weekly level by about a tenth of a point; without
#: the floor these would be reported as change points (common practice for index tests:
#: their repeatability is a few tenths of a point).
WEEKLY_SIGMA_FLOOR = 0.001
#: Smallest level shift reported as a change point (fraction; 0.25 point, common practice:
#: below it an index test cannot tell a shift from its repeatability).
MIN_REPORTED_SHIFT = 0.0025


def _windows(session: Session, unit: Unit, since: datetime | None) -> pd.DataFrame:
    query = select(EfficiencyWindow.start, EfficiencyWindow.duration_s,
                   EfficiencyWindow.steady, EfficiencyWindow.energy_j,
                   EfficiencyWindow.generator_power, EfficiencyWindow.deviation,
                   EfficiencyWindow.relative_loss, EfficiencyWindow.reference_model_id
                   ).where(EfficiencyWindow.unit_id == unit.id)
    if since is not None:
        query = query.where(EfficiencyWindow.start >= since)
    frame = pd.DataFrame(session.execute(query.order_by(EfficiencyWindow.start)).all(),
                         columns=["start", "duration_s", "steady", "energy_j", "power",
                                  "deviation", "relative_loss", "reference_model_id"])
    frame["start"] = pd.to_datetime(frame["start"], utc=True)
    return frame


def refresh_weeks(session: Session, settings: Settings, plant: Plant, unit: Unit,
                  changed_from: datetime) -> int:
    """Recompute the weekly rows of ``unit`` from the week containing ``changed_from`` on.

    Returns the number of rows written.
    """
    session.flush()
    _, first_week_start = iso_week(pd.DatetimeIndex([pd.Timestamp(changed_from)]),
                                   plant.timezone)
    since = pd.Timestamp(first_week_start[0]).to_pydatetime()
    recent = _windows(session, unit, since)
    if recent.empty:
        return 0
    steady = recent[recent["steady"] & recent["deviation"].notna()]
    stats = weekly_drift(steady["start"], steady["duration_s"].to_numpy(),
                         steady["deviation"].to_numpy(), steady["relative_loss"].to_numpy(),
                         plant.timezone, n_boot=settings.bootstrap_resamples,
                         confidence=settings.confidence, seed=unit.id)
    labels, starts = iso_week(pd.DatetimeIndex(recent["start"]), plant.timezone)
    recent = recent.assign(week=np.asarray(labels), week_start=pd.DatetimeIndex(starts))
    running = recent[recent["power"] > 0]
    energy = running.groupby("week").agg(
        week_start=("week_start", "first"), generated_j=("energy_j", "sum"),
        running_s=("duration_s", "sum"), reference_model_id=("reference_model_id", "last"))
    all_weeks = recent.groupby("week").agg(week_start=("week_start", "first"),
                                           reference_model_id=("reference_model_id", "last"))
    stats = stats.set_index("week").drop(columns=["week_start_utc"], errors="ignore")
    table = all_weeks.join(energy[["generated_j", "running_s"]], how="left").join(
        stats, how="left")
    table = table.reset_index().sort_values("week_start")
    table["generated_energy_j"] = table["generated_j"].fillna(0.0)
    table["running_s"] = table["running_s"].fillna(0.0)
    for column in ("relative_loss_median", "relative_loss_low", "relative_loss_high"):
        if column not in table:
            table[column] = np.nan
    table = weekly_lost_energy(table, settings.energy_price, settings.currency)

    earlier = pd.DataFrame(session.execute(
        select(WeeklyDrift.week, WeeklyDrift.week_start, WeeklyDrift.deviation_median,
               WeeklyDrift.reference_model_id, WeeklyDrift.lost_mwh)
        .where(WeeklyDrift.unit_id == unit.id, WeeklyDrift.week_start < since)
        .order_by(WeeklyDrift.week_start)).all(),
        columns=["week", "week_start", "deviation_median", "reference_model_id", "lost_mwh"])
    earlier["week_start"] = pd.to_datetime(earlier["week_start"], utc=True)
    session.execute(delete(WeeklyDrift).where(WeeklyDrift.unit_id == unit.id,
                                              WeeklyDrift.week_start >= since))
    rows = []
    # per reference epoch, the weeks known so far: (labels, starts, medians, lost MWh)
    epochs: dict[int, tuple[list, list, list, list]] = {}
    for old in earlier.itertuples(index=False):
        known = epochs.setdefault(int(old.reference_model_id), ([], [], [], []))
        for column, value in zip(known, (old.week, old.week_start, _f(old.deviation_median),
                                         _f(old.lost_mwh)), strict=True):
            column.append(value)
    for rec in table.itertuples(index=False):
        weeks, starts, medians, losses = epochs.setdefault(int(rec.reference_model_id),
                                                           ([], [], [], []))
        weeks.append(rec.week)
        starts.append(rec.week_start)
        medians.append(_f(rec.deviation_median))
        losses.append(_f(rec.lost_mwh))
        series_t = starts
        series_v = np.asarray(medians, dtype=float)
        lost = np.asarray(losses, dtype=float)
        trend = theil_sen_trend(pd.DatetimeIndex(series_t), series_v,
                                confidence=settings.confidence, min_points=MIN_TREND_WEEKS)
        cp_week, cp_size = None, None
        if np.isfinite(series_v).sum() >= 2 * MIN_SEGMENT_WEEKS:
            sigma = max(robust_noise_sigma(series_v), WEEKLY_SIGMA_FLOOR)
            cps = change_points(series_v, sigma=sigma, weeks=list(weeks))
            cps = cps[cps["size"].abs() >= MIN_REPORTED_SHIFT]
            if len(cps):
                cp_week, cp_size = str(cps["week"].iloc[-1]), float(cps["size"].iloc[-1])
        row = dict(
            unit_id=unit.id, week=rec.week,
            week_start=pd.Timestamp(rec.week_start).to_pydatetime(),
            n_windows=int(_f(rec.n_windows, 0)), steady_hours=float(_f(rec.steady_hours, 0)),
            running_hours=float(rec.running_s) / 3600.0,
            generated_mwh=j_to_mwh(float(rec.generated_energy_j)),
            deviation_median=_opt(rec.deviation_median), deviation_low=_opt(rec.deviation_low),
            deviation_high=_opt(rec.deviation_high),
            loss_median=_opt(rec.relative_loss_median), loss_low=_opt(rec.relative_loss_low),
            loss_high=_opt(rec.relative_loss_high),
            trend_points_per_year=_opt(trend.slope), trend_low=_opt(trend.low),
            trend_high=_opt(trend.high), change_point_week=cp_week, change_point_size=cp_size,
            lost_mwh=_opt(rec.lost_mwh), lost_mwh_low=_opt(rec.lost_mwh_low),
            lost_mwh_high=_opt(rec.lost_mwh_high),
            cumulative_lost_mwh=float(np.nansum(lost)),
            energy_price=settings.energy_price, currency=settings.currency,
            reference_model_id=int(rec.reference_model_id), code_version=__version__,
        )
        rows.append(row)
    if rows:
        session.execute(WeeklyDrift.__table__.insert(), rows)
    return len(rows)


def _f(value: object, default: float = np.nan) -> float:
    try:
        out = float(value)  # type: ignore[arg-type]
    except (TypeError, ValueError):
        return default
    return out if np.isfinite(out) else default


def _opt(value: object) -> float | None:
    out = _f(value)
    return None if np.isnan(out) else out

