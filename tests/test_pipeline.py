"""The whole ingestion path on SQLite and PostgreSQL: idempotent, atomic, revisions, quarantine."""

from __future__ import annotations

import os
import signal
import subprocess
import sys
import time
from datetime import UTC, datetime, timedelta
from pathlib import Path

import pytest
from sqlalchemy import Engine, func, select

from hydrodrift.settings import Settings
from ingest.pipeline import ingest_file
from ingest.registry import import_plant_file
from store.engine import session_scope
from store.models import IngestedFile, QuarantinedFile, Sample, Unit
from store.signals import SIGNAL_BIT, Quality
from tests.conftest import TEST_DATA

PLANT = TEST_DATA / "plants" / "test_wide.toml"
HEADER = "timestamp,P1,DP1,GV1,P2,DP2,GV2,HW,TW,TWAT"
START = datetime(2026, 3, 2, tzinfo=UTC)


def _row(i: int, *, p1: float | None = None) -> str:
    ts = (START + timedelta(minutes=10 * i)).isoformat()
    p1 = 40.0 + (i % 7) * 0.5 if p1 is None else p1
    # values move from row to row so that no sensor looks stuck
    return (f"{ts},{p1},{80 + i % 5 * 0.3:.2f},{70 + i % 3:.1f},{41 + i % 4 * 0.25},"
            f"{81 + i % 6 * 0.2:.2f},{71 + i % 2:.1f},{785.0 + i % 9 * 0.01:.2f},"
            f"{601.5 + i % 4 * 0.01:.2f},{6.5 + i % 3 * 0.1:.1f}")


def _export(path: Path, rows: list[str]) -> Path:
    path.write_text(HEADER + "\n" + "\n".join(rows) + "\n")
    return path


def _settings(tmp_path: Path, **kw: object) -> Settings:
    return Settings(_env_file=None, data_dir=tmp_path / "data", **kw)


def _samples(engine: Engine) -> int:
    with session_scope(engine) as session:
        return session.scalar(select(func.count()).select_from(Sample))


@pytest.fixture
def plant(engine: Engine) -> Engine:
    import_plant_file(engine, PLANT)
    return engine


def test_load_converts_to_si_and_records_the_file(plant: Engine, tmp_path: Path) -> None:
    export = _export(tmp_path / "day1.csv", [_row(i) for i in range(48)])
    outcome = ingest_file(plant, export, settings=_settings(tmp_path))
    assert outcome.status == "loaded", outcome
    assert (outcome.rows_new, outcome.rows_unchanged, outcome.rows_revised) == (96, 0, 0)
    assert _samples(plant) == 96  # 48 rows x 2 units
    with session_scope(plant) as session:
        u1 = session.scalar(select(Unit).where(Unit.code == "U1"))
        first = session.scalar(select(Sample).where(Sample.unit_id == u1.id)
                               .order_by(Sample.ts).limit(1))
        assert first.ts == START
        assert first.active_power == pytest.approx(40.0e6)  # MW -> W
        assert first.wk_differential_pressure == pytest.approx(80.0e3)  # kPa -> Pa
        assert first.gate_opening == pytest.approx(0.70)  # percent -> fraction
        assert first.headwater_level == pytest.approx(785.0)  # plant-wide tag on each unit
        assert first.water_temperature == pytest.approx(6.5 + 273.15)  # degC -> K
        record = session.scalar(select(IngestedFile))
        assert record.status == "loaded" and record.rows_new == 96
        assert record.first_ts == START
        assert record.last_ts == START + timedelta(minutes=10 * 47)


def test_reingesting_the_same_file_changes_nothing(plant: Engine, tmp_path: Path) -> None:
    export = _export(tmp_path / "day1.csv", [_row(i) for i in range(48)])
    settings = _settings(tmp_path)
    ingest_file(plant, export, settings=settings)
    again = ingest_file(plant, export, settings=settings)
    assert again.status == "already" and "nothing changed" in again.message
    with session_scope(plant) as session:
        assert session.scalar(select(func.count()).select_from(IngestedFile)) == 1
    assert _samples(plant) == 96


def test_revised_reexport_replaces_values_and_counts(plant: Engine, tmp_path: Path) -> None:
    settings = _settings(tmp_path)
    ingest_file(plant, _export(tmp_path / "a.csv", [_row(i) for i in range(48)]),
                settings=settings)
    revised_rows = [_row(i, p1=55.5 if i == 10 else None) for i in range(48)]
    revised_rows += [_row(i) for i in range(48, 60)]  # and 12 more rows
    outcome = ingest_file(plant, _export(tmp_path / "a_rev.csv", revised_rows),
                          settings=settings)
    assert outcome.status == "loaded"
    # row 10 changed for U1 only; 12 new rows for each of two units
    assert (outcome.rows_new, outcome.rows_revised, outcome.rows_unchanged) == (24, 1, 95)
    with session_scope(plant) as session:
        u1 = session.scalar(select(Unit).where(Unit.code == "U1"))
        value = session.scalar(select(Sample.active_power).where(
            Sample.unit_id == u1.id, Sample.ts == START + timedelta(minutes=100)))
    assert value == pytest.approx(55.5e6)
    assert _samples(plant) == 120


def test_sentinel_and_text_are_flagged_not_lost(plant: Engine, tmp_path: Path) -> None:
    rows = [_row(i) for i in range(48)]
    parts = rows[7].split(",")
    parts[4] = "n/a"  # P2
    rows[7] = ",".join(parts)
    parts = rows[5].split(",")
    parts[1] = "-9999"  # P1 sentinel
    rows[5] = ",".join(parts)
    outcome = ingest_file(plant, _export(tmp_path / "f.csv", rows), settings=_settings(tmp_path))
    assert outcome.status == "loaded" and outcome.rows_rejected == 0
    assert _samples(plant) == 96
    with session_scope(plant) as session:
        u1 = session.scalar(select(Unit).where(Unit.code == "U1"))
        u2 = session.scalar(select(Unit).where(Unit.code == "U2"))
        s5 = session.scalar(select(Sample).where(Sample.unit_id == u1.id,
                                                 Sample.ts == START + timedelta(minutes=50)))
        s7 = session.scalar(select(Sample).where(Sample.unit_id == u2.id,
                                                 Sample.ts == START + timedelta(minutes=70)))
    assert s5.active_power is None and s5.quality & Quality.SENTINEL
    assert s5.flagged_signals & SIGNAL_BIT["active_power"]
    assert s7.active_power is None and s7.quality & Quality.NOT_A_NUMBER
    assert s5.headwater_level is not None  # the rest of the row is kept


def test_too_many_bad_rows_quarantine_the_whole_file(plant: Engine, tmp_path: Path) -> None:
    rows = [_row(i) for i in range(100)]
    for i in range(0, 100, 5):  # 20 % of the timestamps unreadable
        rows[i] = "not-a-time" + rows[i][rows[i].index(","):]
    export = _export(tmp_path / "bad.csv", rows)
    settings = _settings(tmp_path, quarantine_bad_row_fraction=0.05, quarantine_min_bad_rows=5)
    outcome = ingest_file(plant, export, settings=settings)
    assert outcome.status == "quarantined", outcome
    assert "20 of 100 data rows rejected" in outcome.message
    assert _samples(plant) == 0
    with session_scope(plant) as session:
        q = session.scalar(select(QuarantinedFile))
        assert q is not None and Path(q.stored_path).read_bytes() == export.read_bytes()
        record = session.get(IngestedFile, q.ingested_file_id)
        assert record.status == "quarantined"
        lines = [p["line"] for p in record.report["problems"] if p["kind"] == "bad_timestamp"]
        assert lines[:3] == [2, 7, 12]  # header is line 1, rows 0, 5, 10 -> lines 2, 7, 12
    assert ingest_file(plant, export, settings=settings).status == "already"


def test_empty_file_and_marker(plant: Engine, tmp_path: Path) -> None:
    settings = _settings(tmp_path)
    empty = tmp_path / "empty.csv"
    empty.write_bytes(b"")
    outcome = ingest_file(plant, empty, settings=settings)
    assert outcome.status == "quarantined" and "file is empty" in outcome.message
    marker = tmp_path / "day1.csv.ready"
    marker.write_bytes(b"")
    skipped = ingest_file(plant, marker, settings=settings)
    assert skipped.status == "skipped" and "completion marker for 'day1.csv'" in skipped.message
    assert _samples(plant) == 0


def test_a_file_no_plant_knows_is_quarantined(plant: Engine, tmp_path: Path) -> None:
    export = tmp_path / "other.csv"
    export.write_text("timestamp,XX,YY\n2026-03-02T00:00:00+00:00,1,2\n")
    outcome = ingest_file(plant, export, settings=_settings(tmp_path))
    assert outcome.status == "quarantined" and "no plant matches" in outcome.message


def _big_export(path: Path, rows: int) -> Path:
    with path.open("w") as handle:
        handle.write(HEADER + "\n")
        for i in range(rows):
            handle.write(_row(i) + "\n")
    return path


@pytest.mark.slow
def test_killed_ingest_leaves_nothing_then_rerun_completes(
    plant: Engine, tmp_path: Path, engine_env: dict[str, str]
) -> None:
    export = _big_export(tmp_path / "big.csv", 60_000)
    env = engine_env | {"HYDRODRIFT_INGEST_CHUNK_ROWS": "5000"}
    cmd = [sys.executable, "-m", "hydrodrift.cli", "ingest", str(export)]
    proc = subprocess.Popen(cmd, env=env, stdout=subprocess.PIPE, stderr=subprocess.PIPE,
                            text=True)
    assert proc.stderr is not None
    deadline = time.monotonic() + 120
    seen = ""
    while time.monotonic() < deadline:
        line = proc.stderr.readline()
        seen += line
        if "big.csv: " in line and "rows (" in line:  # a chunk has been loaded, not committed
            break
        if not line and proc.poll() is not None:
            pytest.fail(f"ingest ended before it could be killed: {seen}")
    os.kill(proc.pid, signal.SIGKILL)
    proc.wait(timeout=30)
    assert proc.returncode == -signal.SIGKILL
    assert _samples(plant) == 0
    with session_scope(plant) as session:
        assert session.scalar(select(func.count()).select_from(IngestedFile)) == 0

    rerun = subprocess.run(cmd, env=env, capture_output=True, text=True, timeout=300)
    assert rerun.returncode == 0, rerun.stderr
    assert _samples(plant) == 120_000
    with session_scope(plant) as session:
        record = session.scalar(select(IngestedFile))
        assert record.status == "loaded" and record.rows_new == 120_000
