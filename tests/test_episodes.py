"""Alert episodes: opening after N flagged windows, hysteresis, one per signature, outbox.

The rules are the service's own (jobs/episodes.py docstring); these tests pin them on
hand-made flag sequences (synthetic by design: they test the bookkeeping, not physics).
"""

from __future__ import annotations

from datetime import UTC, datetime, timedelta
from pathlib import Path

import pandas as pd
import pytest
from sqlalchemy import Engine, func, select

from hydrodrift.settings import Settings
from jobs.episodes import find_runs, reconcile, set_status, severity
from store.engine import session_scope
from store.models import AlertEpisode, OutboxMessage, Plant, Unit

T0 = datetime(2026, 3, 2, tzinfo=UTC)
HALF_HOUR = 1800.0


def _flags(spec: list[tuple[float, str]], score: float = 1.0) -> pd.DataFrame:
    """Flagged windows at ``T0 + hours`` with their signature."""
    return pd.DataFrame({
        "start": pd.DatetimeIndex([T0 + timedelta(hours=h) for h, _ in spec]),
        "duration_s": HALF_HOUR, "signature": [s for _, s in spec], "score": score,
        "sigma_margin": float("nan"),
    })


def test_runs_need_n_windows_and_split_at_the_quiet_gap() -> None:
    quiet = timedelta(hours=6)
    # two flags, a 10-h gap, then four flags: only the second group is an episode (N = 3)
    flags = _flags([(0, "bearing"), (0.5, "bearing"), (10.5, "bearing"), (11, "bearing"),
                    (11.5, "bearing"), (14, "bearing")])
    runs = find_runs(flags, open_windows=3, quiet=quiet)
    assert len(runs) == 1
    run = runs[0]
    assert run.first_window == T0 + timedelta(hours=10.5)
    assert run.n_windows == 4
    # it opens at the end of its third flagged window
    assert run.opened_at == T0 + timedelta(hours=11.5, minutes=30)
    assert run.flagged_hours == pytest.approx(2.0)
    assert severity(run) == "warning"


def test_signatures_are_separate_and_a_long_run_is_critical() -> None:
    spec = [(h / 2, "cavitation") for h in range(50)] + [(1, "vortex_rope"), (2, "vortex_rope"),
                                                         (3, "vortex_rope")]
    runs = {r.signature: r for r in find_runs(_flags(spec), open_windows=3,
                                              quiet=timedelta(hours=6))}
    assert set(runs) == {"cavitation", "vortex_rope"}
    assert runs["cavitation"].flagged_hours == pytest.approx(25.0)
    assert severity(runs["cavitation"]) == "critical"  # >= 24 h of flagged windows
    assert severity(runs["vortex_rope"]) == "warning"


@pytest.fixture
def unit_in_store(engine: Engine) -> tuple[Engine, int, int]:
    with session_scope(engine) as session:
        plant = Plant(code="TST", name="test plant (fictional)", latitude_deg=46.0,
                      elevation_m=500.0, timezone="Europe/Zurich")
        session.add(plant)
        session.flush()
        unit = Unit(plant_id=plant.id, code="U1", runner_type="francis")
        session.add(unit)
        session.flush()
        return engine, plant.id, unit.id


def _settings(tmp_path: Path) -> Settings:
    return Settings(_env_file=None, data_dir=tmp_path, webhook_urls=["http://127.0.0.1:9/h"],
                    webhook_secret="s3cret", episode_open_windows=3, episode_quiet_hours=6)


def _reconcile(engine: Engine, settings: Settings, plant_id: int, unit_id: int,
               flags: pd.DataFrame, data_end: datetime) -> list[str]:
    with session_scope(engine) as session:
        plant = session.get(Plant, plant_id)
        unit = session.get(Unit, unit_id)
        return [e for e, _ in reconcile(session, settings, plant, unit, flags, data_end)]


def test_episode_lifecycle_in_the_store(unit_in_store, tmp_path: Path) -> None:
    engine, plant_id, unit_id = unit_in_store
    settings = _settings(tmp_path)
    flags = _flags([(0, "cavitation"), (0.5, "cavitation"), (1, "cavitation")])
    # data up to 2 h: the episode is open
    assert _reconcile(engine, settings, plant_id, unit_id, flags,
                      T0 + timedelta(hours=2)) == ["episode.opened"]
    # the same data again: nothing new (no storm)
    assert _reconcile(engine, settings, plant_id, unit_id, flags,
                      T0 + timedelta(hours=2)) == []
    # more flags extend the same episode; no event unless the severity rises
    more = _flags([(h / 2, "cavitation") for h in range(6)])
    assert _reconcile(engine, settings, plant_id, unit_id, more,
                      T0 + timedelta(hours=4)) == []
    with session_scope(engine) as session:
        episodes = list(session.scalars(select(AlertEpisode)))
        assert len(episodes) == 1 and episodes[0].n_windows == 6
        assert episodes[0].status == "open"
        set_status(session, settings, episodes[0].id, action="ack", who="operator A",
                   note="inspection booked")
    # data reach 6 h past the last flagged window's end: closed, the acknowledgement kept
    assert _reconcile(engine, settings, plant_id, unit_id, more,
                      T0 + timedelta(hours=9.5)) == ["episode.closed"]
    with session_scope(engine) as session:
        episode = session.scalars(select(AlertEpisode)).one()
        assert episode.status == "closed" and episode.acknowledged_by == "operator A"
        assert episode.closed_at == T0 + timedelta(hours=3) + timedelta(hours=6)
        set_status(session, settings, episode.id, action="resolve", who="engineer B")
        events = session.scalars(select(OutboxMessage.event).order_by(OutboxMessage.id)).all()
        assert events == ["episode.opened", "episode.acknowledged", "episode.closed",
                          "episode.resolved"]
        keys = session.scalars(select(OutboxMessage.idempotency_key)).all()
        assert len(set(keys)) == len(keys)
        with pytest.raises(ValueError, match="resolved already"):
            set_status(session, settings, episode.id, action="ack", who="x")
    # new flags after a resolved episode make a new one
    later = _flags([(30, "cavitation"), (30.5, "cavitation"), (31, "cavitation")])
    both = pd.concat([more, later], ignore_index=True)
    assert _reconcile(engine, settings, plant_id, unit_id, both,
                      T0 + timedelta(hours=32)) == ["episode.opened"]
    with session_scope(engine) as session:
        assert session.scalar(select(func.count()).select_from(AlertEpisode)) == 2
