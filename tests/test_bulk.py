"""store.bulk.load_samples on SQLite and PostgreSQL: merge rules, exact counts, atomicity.

The expected values are worked out by hand from the merge rules in the brief of
``store.bulk`` (its module docstring); none is read back from the code under test.
"""

from __future__ import annotations

import threading
import time
from collections.abc import Sequence

import numpy as np
import pandas as pd
import pytest
from sqlalchemy import Connection, Engine, func, insert, select, text

from store.bulk import LoadCounts, load_samples
from store.models import Plant, Sample, Unit
from store.signals import SIGNAL_BIT, Quality

POWER, HEAD, TAIL = "active_power", "headwater_level", "tailwater_level"
SIGNALS = (POWER, HEAD, TAIL)
T0 = pd.Timestamp("2024-05-01T00:00:00Z")


def _add_units(engine: Engine, *unit_ids: int) -> None:
    with engine.begin() as conn:
        conn.execute(insert(Plant), [dict(id=1, code="FJELL", name="Fjell (fictional)",
                                          latitude_deg=61.0, elevation_m=300.0,
                                          timezone="Europe/Oslo")])
        conn.execute(insert(Unit), [dict(id=u, plant_id=1, code=f"G{u}", runner_type="francis")
                                    for u in unit_ids])


@pytest.fixture
def store(engine: Engine) -> Engine:
    """The migrated empty store with one plant and units 1 and 2."""
    _add_units(engine, 1, 2)
    return engine


def _frame(rows: Sequence[tuple], signals: Sequence[str] = SIGNALS) -> pd.DataFrame:
    """rows: (unit_id, seconds after T0, *signal values, quality, flagged_signals)."""
    columns = ["unit_id", "seconds", *signals, "quality", "flagged_signals"]
    frame = pd.DataFrame.from_records(list(rows), columns=columns)
    frame["ts"] = T0 + pd.to_timedelta(frame.pop("seconds"), unit="s")
    frame["ts"] = frame["ts"].astype("datetime64[ns, UTC]")
    for name in signals:
        frame[name] = frame[name].astype("float64")
    for name in ("unit_id", "quality", "flagged_signals"):
        frame[name] = frame[name].astype("int64")
    return frame


def _load(engine: Engine, frame: pd.DataFrame, file_id: int | None,
          signals: Sequence[str] = SIGNALS) -> LoadCounts:
    with engine.begin() as conn:
        return load_samples(conn, frame, provided_signals=signals, source_file_id=file_id)


def _stored(engine: Engine) -> dict[tuple[int, float], dict]:
    """Stored rows keyed by (unit_id, seconds after T0)."""
    with engine.connect() as conn:
        table = Sample.__table__
        rows = conn.execute(select(table).order_by(table.c.unit_id, table.c.ts)).mappings()
        out = {}
        for row in rows:
            key = (row["unit_id"], (row["ts"] - T0.to_pydatetime()).total_seconds())
            out[key] = {name: row[name] for name in
                        (*SIGNALS, "water_temperature", "quality", "flagged_signals",
                         "source_file_id")}
        return out


def _count(engine: Engine) -> int:
    with engine.connect() as conn:
        return int(conn.execute(select(func.count()).select_from(Sample)).scalar_one())


BIT_P, BIT_H, BIT_T = SIGNAL_BIT[POWER], SIGNAL_BIT[HEAD], SIGNAL_BIT[TAIL]
NAN = float("nan")
FIRST = [
    (1, 0, 100e6, 410.0, 12.0, 0, 0),
    (1, 1, 101e6, 410.5, 12.1, 0, 0),
    (1, 2, 102e6, 411.0, 12.2, 0, 0),
    (1, 3, 103e6, NAN, 12.3, 0, 0),
    (1, 4, 104e6, 412.0, 12.4, 0, 0),
]


def test_new_rows_are_inserted_with_their_values(store: Engine) -> None:
    assert _load(store, _frame(FIRST), 1) == LoadCounts(new=5, unchanged=0, revised=0)
    stored = _stored(store)
    assert len(stored) == 5
    assert stored[(1, 1.0)] == {POWER: 101e6, HEAD: 410.5, TAIL: 12.1, "water_temperature": None,
                                "quality": 0, "flagged_signals": 0, "source_file_id": 1}
    assert stored[(1, 3.0)][HEAD] is None  # NaN, not flagged: no value
    if store.dialect.name == "sqlite":  # NaN must bind as SQL NULL, not as a REAL NaN
        with store.connect() as conn:
            kinds = conn.execute(text("SELECT typeof(headwater_level) FROM samples "
                                      "ORDER BY ts")).scalars().all()
        assert kinds == ["real", "real", "real", "null", "real"]


def test_reloading_the_same_frame_changes_nothing(store: Engine) -> None:
    _load(store, _frame(FIRST), 1)
    before = _stored(store)
    assert _load(store, _frame(FIRST), 2) == LoadCounts(new=0, unchanged=5, revised=0)
    assert _stored(store) == before  # not written: source_file_id is still 1


def test_mixed_revision_counts_and_cells(store: Engine) -> None:
    _load(store, _frame(FIRST), 1)
    second = _frame([
        (1, 0, 100e6, 410.0, 12.0, 0, 0),                  # identical: unchanged
        (1, 1, 101.5e6, 410.5, 12.1, 0, 0),                # power changed: revised
        (1, 2, 102e6, NAN, 12.2, 0, 0),                    # NaN not flagged: kept, unchanged
        (1, 3, 103e6, NAN, NAN, Quality.SENTINEL, BIT_T),  # sentinel tailwater: nulled
        (1, 5, 105e6, 413.0, 12.5, 0, 0),                  # new
        (2, 0, 50e6, 410.0, 12.0, 0, 0),                   # new (other unit, same instant)
    ])
    assert _load(store, second, 2) == LoadCounts(new=2, unchanged=2, revised=2)
    stored = _stored(store)
    assert len(stored) == 7
    assert stored[(1, 0.0)]["source_file_id"] == 1
    assert stored[(1, 1.0)][POWER] == 101.5e6 and stored[(1, 1.0)]["source_file_id"] == 2
    assert stored[(1, 2.0)][HEAD] == 411.0 and stored[(1, 2.0)]["source_file_id"] == 1
    assert stored[(1, 3.0)] == {POWER: 103e6, HEAD: None, TAIL: None, "water_temperature": None,
                                "quality": int(Quality.SENTINEL), "flagged_signals": BIT_T,
                                "source_file_id": 2}
    assert stored[(1, 5.0)][TAIL] == 12.5 and stored[(2, 0.0)][POWER] == 50e6
    # Re-loading the revision is now a no-op.
    assert _load(store, second, 3) == LoadCounts(new=0, unchanged=6, revised=0)


def test_signals_not_provided_are_never_touched(store: Engine) -> None:
    _load(store, _frame(FIRST), 1)
    # A second source carries only the tailwater level. Its frame also holds a power
    # column, which must be ignored since power is not in provided_signals.
    other = _frame([(1, 0, 1.0, NAN, 11.0, 0, 0)], signals=SIGNALS)
    assert _load(store, other, 2, signals=(TAIL,)) == LoadCounts(0, 0, 1)
    row = _stored(store)[(1, 0.0)]
    assert (row[POWER], row[HEAD], row[TAIL]) == (100e6, 410.0, 11.0)


def test_flags_of_kept_cells_survive_and_quality_is_merged(store: Engine) -> None:
    flagged = [(1, 0, 900e6, 410.0, 12.0, Quality.OUT_OF_RANGE, BIT_P),  # value kept, flagged
               (1, 1, 101e6, 410.5, 12.1, Quality.SPIKE, BIT_H)]
    _load(store, _frame(flagged), 1)
    revision = _frame([
        # power blank (kept with its flag), head revised: old flag outside this row's
        # provided cells survives, quality = new | old.
        (1, 0, NAN, 409.0, 12.0, 0, 0),
        # head provided again without flag: its old flag is replaced, quality = new only.
        (1, 1, 101e6, 410.5, 12.1, 0, 0),
    ])
    assert _load(store, revision, 2) == LoadCounts(new=0, unchanged=0, revised=2)
    stored = _stored(store)
    assert stored[(1, 0.0)][POWER] == 900e6 and stored[(1, 0.0)][HEAD] == 409.0
    assert stored[(1, 0.0)]["flagged_signals"] == BIT_P
    assert stored[(1, 0.0)]["quality"] == int(Quality.OUT_OF_RANGE)
    assert stored[(1, 1.0)]["flagged_signals"] == 0 and stored[(1, 1.0)]["quality"] == 0


def test_a_new_flag_alone_is_a_revision(store: Engine) -> None:
    _load(store, _frame(FIRST[:2]), 1)
    same_values_new_flag = _frame([(1, 0, 100e6, 410.0, 12.0, Quality.STUCK, BIT_H),
                                   (1, 1, 101e6, 410.5, 12.1, 0, 0)])
    assert _load(store, same_values_new_flag, 2) == LoadCounts(new=0, unchanged=1, revised=1)
    row = _stored(store)[(1, 0.0)]
    assert row[HEAD] == 410.0 and row["flagged_signals"] == BIT_H
    assert row["quality"] == int(Quality.STUCK) and row["source_file_id"] == 2


def test_rollback_leaves_the_table_unchanged(store: Engine) -> None:
    _load(store, _frame(FIRST), 1)
    before = _stored(store)
    revision = _frame([(1, 0, 1.0, 2.0, 3.0, 0, 0), (1, 9, 1.0, 2.0, 3.0, 0, 0)])
    fresh = _frame([(2, 100, 1.0, 2.0, 3.0, 0, 0)])  # direct COPY path on PostgreSQL
    with pytest.raises(RuntimeError, match="crash after load"), store.begin() as conn:
        assert load_samples(conn, revision, provided_signals=SIGNALS,
                            source_file_id=2) == LoadCounts(new=1, unchanged=0, revised=1)
        assert load_samples(conn, fresh, provided_signals=SIGNALS,
                            source_file_id=2) == LoadCounts(new=1, unchanged=0, revised=0)
        raise RuntimeError("crash after load")
    assert _stored(store) == before


def test_several_loads_in_one_transaction(store: Engine) -> None:
    """The pipeline loads a file chunk by chunk in one transaction (staging reused)."""
    with store.begin() as conn:
        counts = [load_samples(conn, _frame(rows), provided_signals=SIGNALS, source_file_id=1)
                  for rows in (FIRST[:3], FIRST[2:], FIRST[1:], FIRST)]
    assert counts == [LoadCounts(3, 0, 0), LoadCounts(2, 1, 0),
                      LoadCounts(0, 4, 0), LoadCounts(0, 5, 0)]
    assert _count(store) == 5


def test_unsorted_frame_of_two_units(store: Engine) -> None:
    rng = np.random.default_rng(7)
    rows = [(u, s, 1e6 * s, 400.0 + s, 10.0, 0, 0) for u in (1, 2) for s in range(50)]
    frame = _frame(rows).iloc[rng.permutation(100)].reset_index(drop=True)
    assert _load(store, frame, 1) == LoadCounts(100, 0, 0)
    stored = _stored(store)
    assert stored[(2, 37.0)][HEAD] == 437.0 and stored[(1, 12.0)][POWER] == 12e6
    assert _load(store, frame, 2) == LoadCounts(0, 100, 0)


def test_exact_float_round_trip(store: Engine) -> None:
    """Stored doubles equal the frame's bit for bit (random bit patterns, all magnitudes)."""
    rng = np.random.default_rng(20240501)
    bits = rng.integers(0, 2**63, size=3000, dtype=np.int64) * rng.choice([1, -1], 3000)
    values = bits.view(np.float64)
    values = values[np.isfinite(values) & (values != 0.0)]
    specials = np.array([1 / 3, 0.1, 5e-324, 2.2250738585072014e-308, 1.7976931348623157e308,
                         -123456789.123456789, 1e22, np.nextafter(1.0, 2.0)])
    values = np.concatenate([specials, values])[:2400]
    n = len(values) // 3
    frame = pd.DataFrame({
        "unit_id": np.ones(n, np.int64),
        "ts": T0 + pd.to_timedelta(np.arange(n) * 123_457, unit="us"),
        POWER: values[:n], HEAD: values[n:2 * n], TAIL: values[2 * n:3 * n],
        "quality": np.zeros(n, np.int64), "flagged_signals": np.zeros(n, np.int64),
    })
    assert _load(store, frame, None) == LoadCounts(n, 0, 0)
    with store.connect() as conn:
        rows = conn.execute(select(Sample.ts, Sample.active_power, Sample.headwater_level,
                                   Sample.tailwater_level).order_by(Sample.ts)).all()
    stored = np.array([r[1:] for r in rows], dtype=np.float64)
    expected = np.column_stack([values[:n], values[n:2 * n], values[2 * n:3 * n]])
    assert np.array_equal(stored.view(np.int64), expected.view(np.int64))
    assert [pd.Timestamp(r[0]) for r in rows] == list(frame["ts"])  # microseconds kept
    assert _load(store, frame, None) == LoadCounts(0, n, 0)  # equal under SQL comparison


@pytest.mark.parametrize(("change", "message"), [
    (lambda f: pd.concat([f, f.iloc[[1]]], ignore_index=True), "repeats the key"),
    (lambda f: f.assign(ts=f["ts"].dt.tz_localize(None)), "tz-aware"),
    (lambda f: f.assign(flagged_signals=SIGNAL_BIT["water_temperature"]), "not in provided"),
    (lambda f: f.assign(unit_id=99), "not in table units"),
    (lambda f: f.assign(active_power=np.inf), "not finite"),
    (lambda f: f.assign(ts=f["ts"] + pd.Timedelta(1, "ns")), "sub-microsecond"),
    (lambda f: f.drop(columns=["quality"]), "lacks column"),
])
def test_bad_frames_are_refused_and_nothing_is_written(store: Engine, change, message) -> None:
    with pytest.raises(ValueError, match=message):
        _load(store, change(_frame(FIRST)), 1)
    assert _count(store) == 0


def test_unknown_signal_is_refused(store: Engine) -> None:
    with pytest.raises(ValueError, match="unknown signal"):
        _load(store, _frame(FIRST), 1, signals=(*SIGNALS, "power_factor"))


def test_two_loaders_of_one_unit_serialise(store: Engine) -> None:
    """A second loader of the same unit waits for the first, then sees its rows.

    Without the lock (PostgreSQL: advisory lock per unit; SQLite: BEGIN IMMEDIATE) the
    second loader would not see the first one's uncommitted rows, count them as new and
    fail on the primary key once the first commits.
    """
    frame = _frame(FIRST)
    outcome: dict[str, object] = {}

    def second_loader() -> None:
        try:
            outcome["counts"] = _load(store, frame, 2)
        except Exception as exc:  # reported by the assertion below
            outcome["error"] = exc

    with store.connect() as first:
        first.begin()
        assert _loaded(first, frame) == LoadCounts(5, 0, 0)
        worker = threading.Thread(target=second_loader)
        worker.start()
        time.sleep(0.5)
        assert worker.is_alive(), f"second loader did not wait: {outcome}"
        first.commit()
    worker.join(timeout=30)
    assert not worker.is_alive()
    assert outcome == {"counts": LoadCounts(new=0, unchanged=5, revised=0)}


def _loaded(conn: Connection, frame: pd.DataFrame) -> LoadCounts:
    return load_samples(conn, frame, provided_signals=SIGNALS, source_file_id=1)
