"""``hydrodrift compute``: new samples -> efficiency windows -> weekly drift, incrementally.

What runs, per plant with ingested files not yet computed:

1. The time range those files cover (their first and last timestamps), widened to whole
   windows. Only that range is read and recomputed: the cost of a run follows the new data,
   not the history.
2. Per unit, the reference model in force (calibrated and stored on first need,
   :mod:`jobs.reference`), clock-aligned windows (:func:`analytics.steady.steady_windows`),
   the index efficiency of the steady ones (:mod:`analytics.index_test`), the reference
   efficiency from the stored hill chart, the deviation. The range's windows are replaced in
   one transaction with the files' "computed" marks, so a crash leaves nothing half-done and
   a rerun repeats exactly the same work.
3. The index constant of a reference epoch, once: when the computed windows first reach past
   the baseline period, the constant is fixed from the baseline's steady windows and every
   window of the epoch gets its index efficiency. It is never refitted afterwards.
4. The ISO weeks (plant time zone) the range touches, and every later week of the epoch,
   get their weekly drift row recomputed: median deviation with its bootstrap interval,
   Theil-Sen trend and change points over the epoch's weeks up to that week, lost energy.

A second run with nothing new changes nothing.
"""

from __future__ import annotations

import time
from collections.abc import Callable
from dataclasses import dataclass, field
from datetime import UTC, datetime, timedelta

import numpy as np
import pandas as pd
from sqlalchemy import Engine, delete, select, update
from sqlalchemy.orm import Session

from analytics.site import local_gravity
from hydrodrift import __version__
from hydrodrift.settings import Settings
from ingest.plant_file import UnitSpec
from jobs.detect import detect_unit
from jobs.efficiency import WindowResults, unit_tolerances, unit_windows
from jobs.reference import UnitReferenceError, ensure_reference, reference_chart
from jobs.unit_samples import read_unit_samples
from jobs.weekly import refresh_weeks
from store.engine import session_scope
from store.models import (
    ComputedFile,
    EfficiencyWindow,
    IngestedFile,
    Plant,
    ReferenceModel,
    Unit,
    UnitConfigVersion,
)

Progress = Callable[[str], None]


@dataclass
class ComputeSummary:
    """What one compute run did."""

    files: int = 0
    units: int = 0
    windows: int = 0
    steady_windows: int = 0
    weeks: int = 0
    references_created: list[str] = field(default_factory=list)
    constants_set: list[str] = field(default_factory=list)
    problems: list[str] = field(default_factory=list)
    detectors_trained: list[str] = field(default_factory=list)
    flagged: int = 0
    alert_events: int = 0
    seconds: float = 0.0

    def line(self) -> str:
        """One-line human summary."""
        if self.files == 0 and not self.problems:
            return "compute: nothing new to compute"
        parts = [f"compute: {self.files} file(s), {self.units} unit(s), "
                 f"{self.windows:,} windows ({self.steady_windows:,} steady), "
                 f"{self.weeks} weekly row(s)"]
        if self.references_created:
            parts.append(f"new references: {', '.join(self.references_created)}")
        if self.constants_set:
            parts.append(f"index constants set: {', '.join(self.constants_set)}")
        if self.detectors_trained:
            parts.append(f"detectors trained: {', '.join(self.detectors_trained)}")
        if self.flagged or self.alert_events:
            parts.append(f"{self.flagged:,} flagged window(s), {self.alert_events} alert "
                         "event(s)")
        if self.problems:
            parts.append(f"{len(self.problems)} unit(s) skipped, their files stay pending")
        parts.append(f"{self.seconds:.1f} s")
        return "; ".join(parts)


def pending_files(session: Session, plant_id: int | None = None) -> list[IngestedFile]:
    """Loaded files whose samples have not been computed yet, oldest first."""
    query = (select(IngestedFile)
             .where(IngestedFile.status == "loaded", IngestedFile.first_ts.is_not(None),
                    ~IngestedFile.id.in_(select(ComputedFile.ingested_file_id)))
             .order_by(IngestedFile.id))
    if plant_id is not None:
        query = query.where(IngestedFile.plant_id == plant_id)
    return list(session.scalars(query))


def compute(engine: Engine, settings: Settings, *, plant_code: str | None = None,
            progress: Progress | None = None) -> ComputeSummary:
    """Process every ingested file not yet computed (of one plant, or all). Idempotent."""
    t0 = time.perf_counter()
    summary = ComputeSummary()
    with session_scope(engine) as session:
        plants = list(session.scalars(select(Plant).order_by(Plant.code)))
        if plant_code is not None:
            plants = [p for p in plants if p.code == plant_code]
            if not plants:
                raise KeyError(f"no plant with code {plant_code!r} in the store")
        plan = []
        for plant in plants:
            files = pending_files(session, plant.id)
            if files:
                start = min(f.first_ts for f in files)
                end = max(f.last_ts for f in files)
                plan.append((plant.id, plant.code, [f.id for f in files], start, end))
    for plant_id, code, file_ids, start, end in plan:
        if progress:
            progress(f"{code}: {len(file_ids)} file(s), {start:%Y-%m-%d %H:%M} .. "
                     f"{end:%Y-%m-%d %H:%M} UTC")
        problems_before = len(summary.problems)
        _compute_plant(engine, settings, plant_id, file_ids, start, end, summary, progress)
        if len(summary.problems) == problems_before:
            summary.files += len(file_ids)
    summary.seconds = time.perf_counter() - t0
    return summary


def _compute_plant(engine: Engine, settings: Settings, plant_id: int, file_ids: list[int],
                   start: datetime, end: datetime, summary: ComputeSummary,
                   progress: Progress | None) -> None:
    with session_scope(engine) as session:
        plant = session.get(Plant, plant_id)
        assert plant is not None
        gravity = float(local_gravity(plant.latitude_deg, plant.elevation_m))
        failed = False
        for unit in plant.units:
            try:
                _compute_unit(session, settings, plant, unit, gravity, start, end, summary,
                              progress)
            except UnitReferenceError as exc:
                failed = True
                summary.problems.append(str(exc))
                if progress:
                    progress(f"  {unit.code}: skipped: {exc}")
                continue
            summary.units += 1
        if failed:
            # the files stay pending: once the plant file is fixed, the next run computes
            # every unit of them (the others identically again)
            return
        for file_id in file_ids:
            session.add(ComputedFile(ingested_file_id=file_id, code_version=__version__))


def _compute_unit(session: Session, settings: Settings, plant: Plant, unit: Unit,
                  gravity: float, start: datetime, end: datetime, summary: ComputeSummary,
                  progress: Progress | None) -> None:
    versions = list(session.scalars(
        select(UnitConfigVersion).where(UnitConfigVersion.unit_id == unit.id)
        .order_by(UnitConfigVersion.effective_from, UnitConfigVersion.version)))
    if not versions:
        return
    changed_from: datetime | None = None
    for k, version in enumerate(versions):
        epoch_start = version.effective_from
        epoch_end = versions[k + 1].effective_from if k + 1 < len(versions) else None
        lo = max(start, epoch_start)
        hi = end if epoch_end is None else min(end, epoch_end - timedelta(microseconds=1))
        if lo > hi:
            continue
        spec = UnitSpec.model_validate(version.config)
        reference, created = ensure_reference(session, plant, unit, version, spec,
                                              gravity=gravity)
        if created:
            summary.references_created.append(f"{plant.code}/{unit.code} v{reference.version}")
            if progress:
                progress(f"  {unit.code}: reference v{reference.version} calibrated, RMS "
                         f"{100 * reference.calibration['rms_efficiency']:.2f} points")
        chart = reference_chart(reference)
        results = _window_range(session, plant, unit, spec, reference, chart, gravity, lo, hi)
        summary.windows += results.count
        summary.steady_windows += results.steady
        first = lo
        if reference.index_constant is None and _try_fix_constant(session, settings, unit,
                                                                  reference):
            summary.constants_set.append(f"{plant.code}/{unit.code}")
            first = epoch_start  # every window of the epoch now has its deviation
        changed_from = first if changed_from is None else min(changed_from, first)
    if changed_from is not None:
        summary.weeks += refresh_weeks(session, settings, plant, unit, changed_from)
        counts = detect_unit(session, settings, plant, unit, changed_from)
        if counts["trained"]:
            summary.detectors_trained.append(f"{plant.code}/{unit.code}")
        summary.flagged += counts["flagged"]
        summary.alert_events += counts["events"]


def _window_range(session: Session, plant: Plant, unit: Unit, spec: UnitSpec,
                  reference: ReferenceModel, chart, gravity: float, lo: datetime,
                  hi: datetime) -> WindowResults:
    """Recompute and replace the windows of ``unit`` covering ``lo .. hi``."""
    tolerances = unit_tolerances(spec)
    window = timedelta(seconds=tolerances.window_s)
    first = _floor(lo, window)
    last = _floor(hi, window) + window
    samples = read_unit_samples(session.connection(), unit.id, first, last)
    results = unit_windows(samples, spec=spec, plant_elevation=plant.elevation_m,
                           gravity=gravity, chart=chart, tolerances=tolerances,
                           index_constant=reference.index_constant,
                           flow_basis=reference.flow_basis)
    session.execute(delete(EfficiencyWindow).where(
        EfficiencyWindow.unit_id == unit.id, EfficiencyWindow.start >= first,
        EfficiencyWindow.start < last))
    rows = results.rows(unit_id=unit.id, reference_model_id=reference.id,
                        code_version=__version__)
    if rows:
        session.execute(EfficiencyWindow.__table__.insert(), rows)
    return results


def _floor(instant: datetime, step: timedelta) -> datetime:
    seconds = step.total_seconds()
    epoch = instant.timestamp()
    return datetime.fromtimestamp(np.floor(epoch / seconds) * seconds, tz=UTC)


def _try_fix_constant(session: Session, settings: Settings, unit: Unit,
                      reference: ReferenceModel) -> bool:
    """Fix the epoch's index constant once the baseline period is covered; True if set."""
    from analytics.index_test import index_constant

    windows = pd.DataFrame(session.execute(
        select(EfficiencyWindow.start, EfficiencyWindow.duration_s,
               EfficiencyWindow.eta_index_raw, EfficiencyWindow.eta_reference)
        .where(EfficiencyWindow.unit_id == unit.id,
               EfficiencyWindow.reference_model_id == reference.id,
               EfficiencyWindow.steady.is_(True))
        .order_by(EfficiencyWindow.start)).all(),
        columns=["start", "duration_s", "eta_raw", "eta_ref"])
    if windows.empty:
        return False
    starts = pd.to_datetime(windows["start"], utc=True)
    last_computed = session.scalar(
        select(EfficiencyWindow.start).where(EfficiencyWindow.unit_id == unit.id,
                                             EfficiencyWindow.reference_model_id == reference.id)
        .order_by(EfficiencyWindow.start.desc()).limit(1))
    baseline_start = starts.iloc[0].to_pydatetime()
    baseline_end = baseline_start + timedelta(days=settings.baseline_days)
    usable = windows["eta_raw"].notna() & windows["eta_ref"].notna()
    while True:
        if last_computed is None or last_computed < baseline_end:
            return False
        inside = usable & (starts < pd.Timestamp(baseline_end))
        hours = float(windows.loc[inside, "duration_s"].sum()) / 3600.0
        if hours >= settings.baseline_min_hours:
            break
        baseline_end += timedelta(days=7)
    constant = index_constant(windows.loc[inside, "eta_raw"].to_numpy(),
                              windows.loc[inside, "eta_ref"].to_numpy())
    reference.index_constant = float(constant.value)
    reference.baseline_start = baseline_start
    reference.baseline_end = baseline_end
    reference.index_constant_detail = {
        "estimator": "median of eta_raw / eta_ref over the baseline's steady windows",
        "spread": float(constant.spread), "standard_error": float(constant.standard_error),
        "windows": int(constant.n_used), "excluded": int(constant.n_excluded),
        "steady_hours": hours,
    }
    k = reference.index_constant
    table = EfficiencyWindow.__table__
    session.execute(
        update(EfficiencyWindow)
        .where(EfficiencyWindow.unit_id == unit.id,
               EfficiencyWindow.reference_model_id == reference.id,
               EfficiencyWindow.eta_index_raw.is_not(None))
        .values(eta_index=table.c.eta_index_raw / k,
                deviation=table.c.eta_index_raw / k - table.c.eta_reference,
                relative_loss=table.c.eta_reference / (table.c.eta_index_raw / k) - 1.0))
    session.flush()
    return True
