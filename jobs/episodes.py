"""Alert episodes from flagged windows: open, update, close with hysteresis; no storms.

Rules (settings ``episode_open_windows`` N and ``episode_quiet_hours`` Q):

* The flagged windows of one unit and signature are cut into runs wherever two flagged
  windows are Q or more apart. A run with at least N flagged windows is an episode.
* It opens at the end of its N-th flagged window, is updated while flagged windows keep
  coming, and closes Q after the end of its last flagged window, measured in data time
  (the newest computed window of the unit), so a rerun on the same data gives the same
  episodes.
* One episode per unit and signature at a time, by construction (runs do not overlap).
* Severity: ``warning``; ``critical`` once the run holds 24 h of flagged windows or, for
  cavitation, when the plant sigma falls below the critical sigma (margin < 1).
* Acknowledgement and resolution are the operator's (``hydrodrift alerts ack|resolve``) and
  are never undone by a recompute. A resolved episode stays resolved; new flagged windows
  after it make a new episode.

Every change that matters to a receiver (opened, severity raised, closed) enqueues an
outbox message in the same transaction (:mod:`jobs.outbox`): a crash loses none.
"""

from __future__ import annotations

import itertools
from dataclasses import dataclass
from datetime import datetime, timedelta

import pandas as pd
from sqlalchemy import select
from sqlalchemy.orm import Session

from hydrodrift.settings import Settings
from store.models import AlertEpisode, Plant, Unit, utc_now

#: Flagged time that makes an episode critical [h].
CRITICAL_HOURS = 24.0

SEVERITY_RANK = {"info": 0, "warning": 1, "critical": 2}


@dataclass(frozen=True)
class Run:
    """A run of flagged windows of one signature (times aware UTC)."""

    signature: str
    first_window: datetime
    last_window: datetime
    last_end: datetime
    opened_at: datetime
    n_windows: int
    flagged_hours: float
    peak: float
    min_margin: float | None
    features: tuple[str, ...] = ()


def find_runs(flags: pd.DataFrame, *, open_windows: int, quiet: timedelta) -> list[Run]:
    """Runs of flagged windows that qualify as episodes.

    Parameters
    ----------
    flags : one row per flagged window with ``start`` (aware UTC), ``duration_s``,
        ``signature``, ``score`` (higher = more anomalous) and optional ``sigma_margin``
    open_windows : N, flagged windows that open an episode
    quiet : Q, the gap that separates runs (and closes an episode)
    """
    runs: list[Run] = []
    if flags.empty:
        return runs
    for signature, group in flags.sort_values("start").groupby("signature", sort=True):
        starts = pd.DatetimeIndex(group["start"])
        ends = starts + pd.to_timedelta(group["duration_s"].to_numpy(), unit="s")
        gap = starts[1:] - ends[:-1]
        cut = [0, *(i + 1 for i, g in enumerate(gap) if g >= quiet), len(group)]
        for a, b in itertools.pairwise(cut):
            if b - a < open_windows:
                continue
            part = group.iloc[a:b]
            margin = part["sigma_margin"].min() if "sigma_margin" in part else None
            leads = (tuple(part["lead"].dropna().value_counts().index[:3])
                     if "lead" in part else ())
            runs.append(Run(
                signature=str(signature), first_window=starts[a].to_pydatetime(),
                last_window=starts[b - 1].to_pydatetime(), last_end=ends[b - 1].to_pydatetime(),
                opened_at=ends[a + open_windows - 1].to_pydatetime(), n_windows=b - a,
                flagged_hours=float(part["duration_s"].sum()) / 3600.0,
                peak=float(part["score"].max()),
                min_margin=None if margin is None or pd.isna(margin) else float(margin),
                features=tuple(str(f) for f in leads)))
    return runs


def severity(run: Run) -> str:
    """The run's severity by the module's rules."""
    if run.flagged_hours >= CRITICAL_HOURS:
        return "critical"
    if run.signature == "cavitation" and run.min_margin is not None and run.min_margin < 1.0:
        return "critical"
    return "warning"


def episode_payload(plant: Plant, unit: Unit, episode: AlertEpisode) -> dict:
    """The ``episode`` part of an alert message (docs/alert-payload.md)."""
    from jobs.outbox import episode_body

    return episode_body(episode, plant=plant.code, unit=unit.code)


def reconcile(session: Session, settings: Settings, plant: Plant, unit: Unit,
              flags: pd.DataFrame, data_end: datetime) -> list[tuple[str, AlertEpisode]]:
    """Bring the unit's episodes in line with its flagged windows; return (event, episode).

    ``flags`` must hold every flagged window from at least ``episode_quiet_hours`` before
    the earliest changed window (the caller passes the unit's whole detector epoch when in
    doubt); ``data_end`` is the end of the newest computed window of the unit.
    """
    from jobs.outbox import enqueue

    quiet = timedelta(hours=settings.episode_quiet_hours)
    runs = find_runs(flags, open_windows=settings.episode_open_windows, quiet=quiet)
    existing = {(e.signature, e.first_window): e for e in session.scalars(
        select(AlertEpisode).where(AlertEpisode.unit_id == unit.id))}
    events: list[tuple[str, AlertEpisode]] = []
    for run in runs:
        closed = data_end >= run.last_end + quiet
        level = severity(run)
        summary = {"flagged_hours": round(run.flagged_hours, 2),
                   "min_sigma_margin": run.min_margin, "features": list(run.features)}
        episode = existing.get((run.signature, run.first_window))
        if episode is None:
            episode = AlertEpisode(
                unit_id=unit.id, signature=run.signature, severity=level, status="open",
                opened_at=run.opened_at, updated_at=run.last_end, first_window=run.first_window,
                last_window=run.last_window, n_windows=run.n_windows, peak=run.peak,
                summary=summary)
            session.add(episode)
            session.flush()
            events.append(("episode.opened", episode))
            if closed:
                _close(episode, run, quiet)
                events.append(("episode.closed", episode))
            continue
        if episode.status == "resolved":
            continue
        raised = SEVERITY_RANK[level] > SEVERITY_RANK[episode.severity]
        episode.last_window = run.last_window
        episode.n_windows = run.n_windows
        episode.peak = run.peak
        episode.updated_at = run.last_end
        episode.summary = summary
        if raised:
            episode.severity = level
            events.append(("episode.updated", episode))
        if closed and episode.status in ("open", "acknowledged"):
            _close(episode, run, quiet)
            events.append(("episode.closed", episode))
    for event, episode in events:
        enqueue(session, event=event, payload={"episode": episode_payload(plant, unit, episode)},
                episode_id=episode.id, settings=settings)
    return events


def _close(episode: AlertEpisode, run: Run, quiet: timedelta) -> None:
    episode.status = "closed"
    episode.closed_at = run.last_end + quiet


def set_status(session: Session, settings: Settings, episode_id: int, *, action: str,
               who: str, note: str | None = None) -> AlertEpisode:
    """Acknowledge or resolve an episode (who and when recorded); enqueues the event."""
    from jobs.outbox import enqueue

    episode = session.get(AlertEpisode, episode_id)
    if episode is None:
        raise KeyError(f"no alert episode {episode_id}")
    now = utc_now()
    if action == "ack":
        if episode.status == "resolved":
            raise ValueError(f"episode {episode_id} is resolved already")
        episode.acknowledged_by, episode.acknowledged_at = who, now
        if episode.status == "open":
            episode.status = "acknowledged"
        event = "episode.acknowledged"
    elif action == "resolve":
        episode.resolved_by, episode.resolved_at = who, now
        episode.status = "resolved"
        event = "episode.resolved"
    else:
        raise ValueError(f"unknown action {action!r}: expected ack or resolve")
    if note:
        episode.note = note
    unit = session.get(Unit, episode.unit_id)
    plant = session.get(Plant, unit.plant_id)
    session.flush()
    enqueue(session, event=event, payload={"episode": episode_payload(plant, unit, episode)},
            episode_id=episode.id, settings=settings)
    return episode
