"""The fleet's weekly table: one row per unit for one ISO week, sorted by lost energy."""

from __future__ import annotations

import re
from datetime import UTC, datetime

import pandas as pd
from sqlalchemy import func, select
from sqlalchemy.orm import Session

from analytics.drift import iso_week
from store.models import EfficiencyWindow, Plant, ReferenceModel, Unit, WeeklyDrift

WEEK_PATTERN = re.compile(r"^\d{4}-W(0[1-9]|[1-4]\d|5[0-3])$")

#: Columns of the report frame, in order, with their units.
REPORT_COLUMNS: dict[str, str] = {
    "plant": "", "unit": "", "runner": "", "week": "ISO week, plant time",
    "steady_hours": "h", "deviation_pt": "points", "deviation_low_pt": "points",
    "deviation_high_pt": "points", "trend_pt_per_year": "points/year",
    "change_point_week": "ISO week the new level starts, known at the row's week end",
    "change_point_pt": "points", "generated_mwh": "MWh",
    "lost_mwh": "MWh", "lost_mwh_low": "MWh", "lost_mwh_high": "MWh",
    "lost_money": "the row's currency",
    "cumulative_lost_mwh": "MWh", "currency": "", "reference_version": "",
}


class ReportError(ValueError):
    """The requested week is malformed or has no computed data."""


def latest_complete_week(session: Session) -> str | None:
    """The newest ISO week that has ended (in its plant's zone) before the newest window."""
    best: str | None = None
    for plant in session.scalars(select(Plant)):
        newest = session.scalar(
            select(func.max(EfficiencyWindow.start)).join(
                Unit, Unit.id == EfficiencyWindow.unit_id).where(Unit.plant_id == plant.id))
        if newest is None:
            continue
        end = pd.Timestamp(newest).tz_convert(UTC) if pd.Timestamp(newest).tzinfo else \
            pd.Timestamp(newest, tz=UTC)
        duration = session.scalar(
            select(EfficiencyWindow.duration_s).join(Unit, Unit.id == EfficiencyWindow.unit_id)
            .where(Unit.plant_id == plant.id).order_by(EfficiencyWindow.start.desc()).limit(1))
        end = end + pd.Timedelta(seconds=float(duration or 0.0))
        labels, starts = iso_week(pd.DatetimeIndex([end - pd.Timedelta(microseconds=1)]),
                                  plant.timezone)
        current, current_start = str(labels[0]), pd.Timestamp(starts[0])
        # the week holding the newest data is complete only if the data reach its end
        week_end_local = (current_start.tz_convert(plant.timezone) + pd.DateOffset(days=7))
        complete = end >= week_end_local.tz_convert(UTC)
        if not complete:
            prev_labels, _ = iso_week(
                pd.DatetimeIndex([current_start - pd.Timedelta(microseconds=1)]),
                plant.timezone)
            current = str(prev_labels[0])
        best = current if best is None or current > best else best
    return best


def weekly_report(session: Session, week: str | None = None) -> tuple[str, pd.DataFrame]:
    """The report frame for ``week`` ('YYYY-Www'; default the latest complete week).

    Deviations and trends are in efficiency points (percentage points); energy in MWh;
    money in the configured currency. Sorted by lost energy, largest first.
    """
    if week is None:
        week = latest_complete_week(session)
        if week is None:
            raise ReportError("nothing computed yet: run `hydrodrift compute` first")
    elif not WEEK_PATTERN.match(week):
        raise ReportError(f"week {week!r}: expected an ISO week like 2026-W23")
    rows = session.execute(
        select(Plant.code, Unit.code, Unit.runner_type, WeeklyDrift, ReferenceModel.version)
        .join(Unit, Unit.id == WeeklyDrift.unit_id).join(Plant, Plant.id == Unit.plant_id)
        .join(ReferenceModel, ReferenceModel.id == WeeklyDrift.reference_model_id)
        .where(WeeklyDrift.week == week)).all()
    if not rows:
        known = session.scalars(select(WeeklyDrift.week).distinct()
                                .order_by(WeeklyDrift.week.desc()).limit(3)).all()
        hint = f"; newest computed weeks: {', '.join(known)}" if known else ""
        raise ReportError(f"no weekly drift computed for {week}{hint}")
    records = []
    for plant, unit, runner, w, version in rows:
        def pt(v: float | None) -> float | None:
            return None if v is None else 100.0 * v

        lost_money = None if w.lost_mwh is None else w.lost_mwh * w.energy_price
        records.append({
            "plant": plant, "unit": unit, "runner": runner, "week": w.week,
            "steady_hours": w.steady_hours, "deviation_pt": pt(w.deviation_median),
            "deviation_low_pt": pt(w.deviation_low), "deviation_high_pt": pt(w.deviation_high),
            "trend_pt_per_year": w.trend_points_per_year,
            "change_point_week": w.change_point_week,
            "change_point_pt": pt(w.change_point_size), "generated_mwh": w.generated_mwh,
            "lost_mwh": w.lost_mwh, "lost_mwh_low": w.lost_mwh_low,
            "lost_mwh_high": w.lost_mwh_high, "lost_money": lost_money,
            "cumulative_lost_mwh": w.cumulative_lost_mwh, "currency": w.currency,
            "reference_version": version,
        })
    frame = pd.DataFrame.from_records(records, columns=list(REPORT_COLUMNS))
    frame = frame.sort_values("lost_mwh", ascending=False, na_position="last",
                              kind="stable").reset_index(drop=True)
    return week, frame


def generated_at() -> str:
    """Stamp for report footers."""
    return datetime.now(UTC).strftime("%Y-%m-%d %H:%M UTC")


def render_report(week: str, frame: pd.DataFrame, fmt: str, *, caution: str) -> str:
    """The report as CSV (caution as a trailing comment line) or JSON (caution as a field)."""
    if fmt == "csv":
        return frame.to_csv(index=False, float_format="%.6g") + f"# {caution}\n"
    if fmt == "json":
        import json

        records = json.loads(frame.to_json(orient="records", double_precision=6))
        return json.dumps({"week": week, "units": {k: v for k, v in REPORT_COLUMNS.items()},
                           "rows": records, "caution": caution,
                           "generated_at": generated_at()}, indent=2) + "\n"
    raise ValueError(f"unknown format {fmt!r}")
