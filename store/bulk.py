"""Bulk loading of canonical plant data into ``samples``: idempotent, exact, fast.

One entry point, :func:`load_samples`, with a fast path per dialect:

- **PostgreSQL** (psycopg 3): the frame is written as CSV by pyarrow (C++, shortest
  round-trip float text) and streamed with ``COPY``. When the store holds no row of the
  frame's units inside the frame's time span, ``COPY`` goes straight into ``samples``
  (every row is new). Otherwise it goes into a temporary staging table and is merged by
  one ``UPDATE ... FROM`` (changed rows only) and one ``INSERT ... WHERE NOT EXISTS``;
  the two row counts are the revised and new counts. A transaction-scoped advisory lock
  per unit serialises two loaders of the same unit.
- **SQLite**: one ``INSERT ... ON CONFLICT (unit_id, ts) DO UPDATE ... WHERE <changed>``
  run by ``executemany`` straight into ``samples``, its rows built from numpy columns in
  blocks (no per-row Python beyond the driver's own binding). New rows are the growth of
  the row count in the frame's key range; revised rows are the connection's change count
  minus the new ones (SQLite counts an upsert whose ``WHERE`` is false as no change).

Merge rules (a revised re-export replaces what it provides, nothing else)
-------------------------------------------------------------------------
A cell of an incoming row is *provided* when its value is not NULL/NaN, or when its
signal's bit is set in the row's ``flagged_signals`` (a sentinel or non-numeric cell,
stored as NULL with its flag). For each row, ``provided_mask`` is the bitmask of its
provided cells (a subset of the bits of ``provided_signals``). Against a stored row:

- provided cells overwrite the stored value (a provided NULL sets NULL); other cells,
  and every signal not in ``provided_signals``, keep the stored value;
- ``flagged_signals := (old & ~provided_mask) | new``: the flags of kept cells stay;
- ``quality := new`` or, when any old flag bit survives (``old & ~provided_mask != 0``),
  ``new | old``. This is an approximation: ``quality`` is one set of bits per row, not per
  cell, so when a kept cell carries an old flag all of the old row's quality kinds are
  kept, possibly including a kind that only applied to a replaced cell;
- ``source_file_id := new`` whenever the row changes.

A row whose provided cells all equal the stored ones (NULL equals NULL, exact float
comparison) and whose resulting ``flagged_signals`` and ``quality`` equal the stored ones
is *unchanged* and not written; any other existing row is *revised*; a row without a
stored ``(unit_id, ts)`` is *new*.

``provided_mask`` is per row rather than the file's whole ``provided_signals`` mask so
that a blank cell (kept value) also keeps that value's flag; with the file-wide mask a
kept value could lose the flag that explains it.
"""

from __future__ import annotations

from collections.abc import Iterator, Sequence
from dataclasses import dataclass
from datetime import datetime
from itertools import repeat
from typing import Any

import numpy as np
import pandas as pd
from psycopg.copy import QueuedLibpqWriter
from sqlalchemy import Connection, bindparam, text

from store.signals import SIGNAL_BIT, SIGNAL_NAMES
from store.types import from_epoch_us

__all__ = ["ADVISORY_LOCK_CLASS", "LoadCounts", "load_samples"]

#: First key of ``pg_advisory_xact_lock(class, unit_id)`` taken per unit while loading
#: (the ASCII bytes "HDsm"); any other use of advisory locks in the project must pick
#: another class.
ADVISORY_LOCK_CLASS = 0x4844736D

#: Rows per ``executemany`` call on SQLite (bounds the Python objects alive at once).
SQLITE_BLOCK_ROWS = 50_000

#: Rows per CSV block written to ``COPY`` on PostgreSQL (bounds the text buffer).
COPY_BLOCK_ROWS = 100_000

_STAGE_TABLE = "hd_stage_samples"


@dataclass(frozen=True)
class LoadCounts:
    """How the rows of one load met the store.

    Attributes
    ----------
    new : rows whose (unit_id, ts) was not stored, inserted
    unchanged : rows equal to the stored ones under the merge rules, not written
    revised : stored rows changed by the load
    """

    new: int
    unchanged: int
    revised: int

    @property
    def total(self) -> int:
        """All rows of the load."""
        return self.new + self.unchanged + self.revised


@dataclass(frozen=True)
class _Columns:
    """The frame as validated numpy columns, sorted by (unit_id, ts)."""

    unit_id: np.ndarray  # int64
    ts_us: np.ndarray  # int64, microseconds since the epoch, UTC
    signals: dict[str, np.ndarray]  # float64, NaN = no value
    quality: np.ndarray  # int64
    flagged: np.ndarray  # int64
    provided_mask: np.ndarray  # int64

    def __len__(self) -> int:
        return len(self.unit_id)

    def unit_ranges(self) -> Iterator[tuple[int, int, int]]:
        """``(unit_id, first ts [us], last ts [us])`` per unit in the frame."""
        starts = np.flatnonzero(np.r_[True, self.unit_id[1:] != self.unit_id[:-1]])
        ends = np.r_[starts[1:], len(self.unit_id)] - 1
        for start, end in zip(starts.tolist(), ends.tolist(), strict=True):
            yield int(self.unit_id[start]), int(self.ts_us[start]), int(self.ts_us[end])


def load_samples(
    conn: Connection,
    frame: pd.DataFrame,
    *,
    provided_signals: Sequence[str],
    source_file_id: int | None,
) -> LoadCounts:
    """Merge canonical rows into ``samples`` inside the caller's open transaction.

    The function never commits or rolls back: the caller owns the transaction, so a file
    loads all or nothing. See the module docstring for the merge rules.

    Parameters
    ----------
    conn : a connection of the store, in a transaction (SQLite or PostgreSQL)
    frame : columns ``unit_id`` (int), ``ts`` (tz-aware datetime64, any resolution down
        to [us]), one column per name in ``provided_signals`` (float [SI units], NaN =
        no value), ``quality`` (int, :class:`store.signals.Quality` bits) and
        ``flagged_signals`` (int, bits of :data:`store.signals.SIGNAL_BIT`). Other columns
        are ignored. ``(unit_id, ts)`` must be unique.
    provided_signals : the signals this source carries; no other column is touched
    source_file_id : ``ingested_files.id`` recorded on every written row, or None

    Returns
    -------
    LoadCounts
        exact counts of new, unchanged and revised rows

    Raises
    ------
    ValueError
        for a frame that breaks the contract above (missing column, unknown signal,
        naive or sub-microsecond timestamps, repeated keys, infinite values, flag bits
        outside ``provided_signals``); nothing is written then.
    """
    signals = _check_signals(provided_signals)
    columns = _validated_columns(frame, signals)
    if len(columns) == 0:
        return LoadCounts(0, 0, 0)
    dialect = conn.dialect.name
    if dialect not in ("postgresql", "sqlite"):
        raise ValueError(f"database dialect {dialect!r}: expected 'postgresql' or 'sqlite'")
    _check_units_exist(conn, columns)
    if dialect == "postgresql":
        return _load_postgresql(conn, columns, source_file_id)
    return _load_sqlite(conn, columns, source_file_id)


def _check_units_exist(conn: Connection, columns: _Columns) -> None:
    """Refuse unit ids absent from ``units`` with one query, before writing anything."""
    wanted = sorted({unit for unit, _, _ in columns.unit_ranges()})
    query = text("SELECT id FROM units WHERE id IN :ids").bindparams(
        bindparam("ids", expanding=True))
    known = set(conn.execute(query, {"ids": wanted}).scalars())
    missing = [unit for unit in wanted if unit not in known]
    if missing:
        raise ValueError(f"frame column 'unit_id': unit id(s) {missing} not in table units; "
                         "import the plant file first")


# --------------------------------------------------------------------------- validation


def _check_signals(provided_signals: Sequence[str]) -> tuple[str, ...]:
    if isinstance(provided_signals, str):
        raise ValueError(f"provided_signals={provided_signals!r}: expected a sequence of names")
    unknown = [name for name in provided_signals if name not in SIGNAL_BIT]
    if unknown:
        raise ValueError(f"provided_signals: unknown signal(s) {', '.join(map(repr, unknown))}; "
                         f"expected names from {', '.join(SIGNAL_NAMES)}")
    if len(set(provided_signals)) != len(provided_signals):
        raise ValueError(f"provided_signals {list(provided_signals)!r} repeats a name")
    # Keep the canonical order: the SQL text (and its plan cache) is then one per set.
    return tuple(name for name in SIGNAL_NAMES if name in provided_signals)


def _int_column(frame: pd.DataFrame, name: str) -> np.ndarray:
    column = frame[name]
    if column.isna().any():
        row = frame.index[column.isna().to_numpy()][0]
        raise ValueError(f"frame column {name!r}, row {row!r}: missing value; expected an integer")
    values = column.to_numpy()
    if not np.issubdtype(values.dtype, np.integer):
        raise ValueError(f"frame column {name!r}: dtype {column.dtype}; expected integers")
    return values.astype(np.int64, copy=False)


def _ts_microseconds(frame: pd.DataFrame) -> np.ndarray:
    ts = frame["ts"]
    if not isinstance(ts.dtype, pd.DatetimeTZDtype):
        raise ValueError(f"frame column 'ts': dtype {ts.dtype}; expected tz-aware "
                         "datetime64 in UTC (the store keeps UTC)")
    if ts.isna().any():
        row = frame.index[ts.isna().to_numpy()][0]
        raise ValueError(f"frame column 'ts', row {row!r}: missing timestamp")
    naive = ts.dt.tz_convert("UTC").dt.tz_localize(None).to_numpy()
    unit, _ = np.datetime_data(naive.dtype)
    if unit in ("s", "ms", "us"):
        return naive.astype("datetime64[us]").view(np.int64).copy()
    if unit != "ns":
        raise ValueError(f"frame column 'ts': resolution {unit!r}; expected s, ms, us or ns")
    raw = naive.view(np.int64)
    fine = np.flatnonzero(raw % 1000)
    if fine.size:
        row = frame.index[fine[0]]
        raise ValueError(f"frame column 'ts', row {row!r}: {ts.iloc[fine[0]]} has a "
                         "sub-microsecond part; the store keeps microseconds")
    return raw // 1000


def _validated_columns(frame: pd.DataFrame, signals: tuple[str, ...]) -> _Columns:
    needed = ["unit_id", "ts", *signals, "quality", "flagged_signals"]
    missing = [name for name in needed if name not in frame.columns]
    if missing:
        raise ValueError(f"frame lacks column(s) {', '.join(map(repr, missing))}; expected "
                         f"{', '.join(needed)}")
    unit_id = _int_column(frame, "unit_id")
    ts_us = _ts_microseconds(frame)
    quality = _int_column(frame, "quality")
    flagged = _int_column(frame, "flagged_signals")
    allowed = 0
    for name in signals:
        allowed |= SIGNAL_BIT[name]
    stray = np.flatnonzero(flagged & ~np.int64(allowed))
    if stray.size:
        row = frame.index[stray[0]]
        raise ValueError(f"frame column 'flagged_signals', row {row!r}: bits "
                         f"{int(flagged[stray[0]]) & ~allowed:#x} are of signals not in "
                         "provided_signals")
    values: dict[str, np.ndarray] = {}
    provided_mask = flagged.copy()
    for name in signals:
        try:
            column = frame[name].to_numpy(dtype=np.float64, na_value=np.nan)
        except (TypeError, ValueError) as exc:
            raise ValueError(f"frame column {name!r}: dtype {frame[name].dtype}; expected "
                             f"float64 in SI units ({exc})") from exc
        infinite = np.flatnonzero(np.isinf(column))
        if infinite.size:
            row = frame.index[infinite[0]]
            raise ValueError(f"frame column {name!r}, row {row!r}: {column[infinite[0]]} is "
                             "not finite; expected a number, or NaN with its flag")
        values[name] = column
        provided_mask |= np.where(np.isnan(column), 0, SIGNAL_BIT[name]).astype(np.int64)

    order = _key_order(unit_id, ts_us)
    if order is not None:
        unit_id, ts_us, quality, flagged, provided_mask = (
            a[order] for a in (unit_id, ts_us, quality, flagged, provided_mask))
        values = {name: column[order] for name, column in values.items()}
    duplicate = np.flatnonzero((unit_id[1:] == unit_id[:-1]) & (ts_us[1:] == ts_us[:-1]))
    if duplicate.size:
        i = int(duplicate[0])
        raise ValueError(f"frame repeats the key unit_id={int(unit_id[i])}, "
                         f"ts={from_epoch_us(int(ts_us[i])).isoformat()}; expected (unit_id, "
                         "ts) unique")
    return _Columns(unit_id, ts_us, values, quality, flagged, provided_mask)


def _key_order(unit_id: np.ndarray, ts_us: np.ndarray) -> np.ndarray | None:
    """None when already sorted by (unit_id, ts), else the sorting permutation."""
    if len(unit_id) < 2:
        return None
    step_unit = np.diff(unit_id)
    ordered = (step_unit > 0) | ((step_unit == 0) & (np.diff(ts_us) >= 0))
    if bool(ordered.all()):
        return None
    return np.lexsort((ts_us, unit_id))


# --------------------------------------------------------------------------- SQL pieces


def _merged_flags(old: str, mask: str, new_flags: str) -> str:
    return f"(({old}.flagged_signals & ~{mask}) | {new_flags})"


def _merged_quality(old: str, mask: str, new_quality: str) -> str:
    return (f"({new_quality} | CASE WHEN ({old}.flagged_signals & ~{mask}) <> 0 "
            f"THEN {old}.quality ELSE 0 END)")


# --------------------------------------------------------------------------- SQLite


def _merge_clauses(signals: tuple[str, ...], *, old: str, new: str, mask: str,
                   differs: str) -> tuple[list[str], list[str]]:
    """SET assignments and "something changed" tests of the merge, for either dialect.

    ``old`` / ``new`` are the stored and incoming row's aliases, ``mask`` the SQL of the
    incoming row's provided mask, ``differs`` the dialect's NULL-safe inequality.
    """
    sets = [f"{name} = CASE WHEN ({mask} & {SIGNAL_BIT[name]}) <> 0 "
            f"THEN {new}.{name} ELSE {old}.{name} END" for name in signals]
    flags = _merged_flags(old, mask, f"{new}.flagged_signals")
    quality = _merged_quality(old, mask, f"{new}.quality")
    sets += [f"flagged_signals = {flags}", f"quality = {quality}"]
    changed = [f"(({mask} & {SIGNAL_BIT[name]}) <> 0 AND {old}.{name} {differs} {new}.{name})"
               for name in signals]
    changed += [f"{old}.flagged_signals <> {flags}", f"{old}.quality <> {quality}"]
    return sets, changed


def _sqlite_upsert_sql(signals: tuple[str, ...]) -> str:
    """The upsert; parameters ?1..?n are the row's columns, ?(n+1) its provided mask."""
    columns = ["unit_id", "ts", *signals, "quality", "flagged_signals", "source_file_id"]
    sets, changed = _merge_clauses(signals, old="samples", new="excluded",
                                   mask=f"?{len(columns) + 1}", differs="IS NOT")
    sets.append("source_file_id = excluded.source_file_id")
    placeholders = ", ".join(f"?{i}" for i in range(1, len(columns) + 1))
    return (f"INSERT INTO samples ({', '.join(columns)}) VALUES ({placeholders}) "
            "ON CONFLICT (unit_id, ts) DO UPDATE SET " + ", ".join(sets) +
            " WHERE " + " OR ".join(changed))


def _sqlite_count(cursor: Any, columns: _Columns) -> int:
    total = 0
    for unit, first, last in columns.unit_ranges():
        cursor.execute("SELECT count(*) FROM samples WHERE unit_id = ? AND ts BETWEEN ? AND ?",
                       (unit, first, last))
        total += int(cursor.fetchone()[0])
    return total


def _load_sqlite(conn: Connection, columns: _Columns, source_file_id: int | None) -> LoadCounts:
    raw = conn.connection.driver_connection
    if raw is None:
        raise RuntimeError("the SQLite connection has no DB-API connection")
    if not raw.in_transaction:
        # pysqlite opens its transaction lazily at the first write; take the write lock
        # now so that nobody writes between the count below and the upsert.
        raw.execute("BEGIN IMMEDIATE")
    cursor = raw.cursor()
    try:
        before = _sqlite_count(cursor, columns)
        changes_before = raw.total_changes
        sql = _sqlite_upsert_sql(tuple(columns.signals))
        arrays = [columns.unit_id, columns.ts_us, *columns.signals.values(),
                  columns.quality, columns.flagged]
        for start in range(0, len(columns), SQLITE_BLOCK_ROWS):
            stop = min(start + SQLITE_BLOCK_ROWS, len(columns))
            # NaN binds as NULL in SQLite (sqlite3_bind_double stores NULL for NaN).
            lists = [array[start:stop].tolist() for array in arrays]
            cursor.executemany(sql, zip(*lists, repeat(source_file_id, stop - start),
                                        columns.provided_mask[start:stop].tolist(), strict=True))
        changes = raw.total_changes - changes_before
        new = _sqlite_count(cursor, columns) - before
    finally:
        cursor.close()
    revised = changes - new
    return LoadCounts(new=new, unchanged=len(columns) - new - revised, revised=revised)


# --------------------------------------------------------------------------- PostgreSQL


#: PostgreSQL's binary timestamps count microseconds from 2000-01-01 00:00 UTC.
_PG_EPOCH_US = 946_684_800 * 1_000_000
_COPY_HEADER = b"PGCOPY\n\xff\r\n\x00" + (0).to_bytes(4, "big") + (0).to_bytes(4, "big")
_COPY_TRAILER = (-1).to_bytes(2, "big", signed=True)


def _copy_fields(columns: _Columns, start: int, stop: int, source_file_id: int | None,
                 with_mask: bool) -> list[tuple[np.ndarray, str]]:
    """``(values, big-endian numpy type)`` per COPY field, in the order of the column list."""
    fields: list[tuple[np.ndarray, str]] = [
        (columns.unit_id[start:stop], ">i4"),
        (columns.ts_us[start:stop] - _PG_EPOCH_US, ">i8"),
    ]
    fields += [(values[start:stop], ">f8") for values in columns.signals.values()]
    fields += [(columns.quality[start:stop], ">i4"), (columns.flagged[start:stop], ">i8")]
    if source_file_id is not None:
        fields.append((np.full(stop - start, source_file_id, np.int64), ">i4"))
    if with_mask:
        fields.append((columns.provided_mask[start:stop], ">i8"))
    return fields


def _binary_rows(fields: list[tuple[np.ndarray, str]]) -> bytes:
    """Rows in PostgreSQL's binary COPY format, built with numpy only.

    Each tuple is an int16 field count, then per field an int32 byte length (-1 for
    NULL) and the value in network byte order. A NULL field has no value bytes, so rows
    with different NULL cells differ in layout: the rows are grouped by their pattern of
    NULL cells (NaN floats) and each group is one packed numpy record array. COPY does not
    care about row order; within a group the rows keep their order.
    """
    n = len(fields[0][0])
    pattern = np.zeros(n, np.int64)
    for j, (values, kind) in enumerate(fields):
        if kind == ">f8":
            pattern |= np.isnan(values).astype(np.int64) << j
    order = np.argsort(pattern, kind="stable")
    sorted_pattern = pattern[order]
    cuts = np.flatnonzero(np.r_[True, sorted_pattern[1:] != sorted_pattern[:-1], True])
    parts: list[bytes] = []
    for first, last in zip(cuts[:-1].tolist(), cuts[1:].tolist(), strict=True):
        code = int(sorted_pattern[first])
        whole = first == 0 and last == n  # one layout: no gather needed
        rows = slice(None) if whole else order[first:last]
        layout: list[tuple[str, str]] = [("count", ">i2")]
        for j, (_, kind) in enumerate(fields):
            layout.append((f"l{j}", ">i4"))
            if not code >> j & 1:
                layout.append((f"v{j}", kind))
        records = np.empty(last - first, dtype=np.dtype(layout))
        records["count"] = len(fields)
        for j, (values, kind) in enumerate(fields):
            if code >> j & 1:
                records[f"l{j}"] = -1
            else:
                records[f"l{j}"] = np.dtype(kind).itemsize
                records[f"v{j}"] = values[rows]
        parts.append(records.tobytes())
    return b"".join(parts)


def _copy(conn: Connection, table: str, columns: _Columns, source_file_id: int | None,
          with_mask: bool) -> None:
    """Stream the rows into ``table`` with binary COPY, block by block.

    Binary COPY sends the IEEE-754 bits of each float, so the stored value is the
    frame's value exactly; it also spares formatting and parsing ~16 numbers per row as
    text (measured: pyarrow's CSV writer alone took about 3 s per million 13-column rows
    here, longer than the whole binary path).
    """
    target = ["unit_id", "ts", *columns.signals, "quality", "flagged_signals"]
    if source_file_id is not None:
        target.append("source_file_id")
    if with_mask:
        target.append("provided_mask")
    _check_int32("unit_id", columns.unit_id)
    _check_int32("quality", columns.quality)
    if source_file_id is not None:
        _check_int32("source_file_id", np.array([source_file_id]))
    raw = conn.connection.driver_connection
    sql = f"COPY {table} ({', '.join(target)}) FROM STDIN (FORMAT binary)"
    with raw.cursor() as cursor, cursor.copy(sql, writer=QueuedLibpqWriter(cursor)) as copy:
        # The queued writer sends from a worker thread while the next block is encoded.
        copy.write(_COPY_HEADER)
        for start in range(0, len(columns), COPY_BLOCK_ROWS):
            stop = min(start + COPY_BLOCK_ROWS, len(columns))
            copy.write(_binary_rows(_copy_fields(columns, start, stop, source_file_id,
                                                 with_mask)))
        copy.write(_COPY_TRAILER)


def _check_int32(name: str, values: np.ndarray) -> None:
    """Binary COPY writes 4 bytes for an ``integer`` column: refuse what does not fit."""
    if values.size and (int(values.min()) < -(2**31) or int(values.max()) > 2**31 - 1):
        raise ValueError(f"{name}: values outside the 32-bit integer range of its column")


def _pg_overlaps(conn: Connection, columns: _Columns) -> bool:
    raw = conn.connection.driver_connection
    with raw.cursor() as cursor:
        for unit, first, last in columns.unit_ranges():
            cursor.execute(
                "SELECT EXISTS (SELECT 1 FROM samples WHERE unit_id = %s "
                "AND ts BETWEEN %s AND %s)",
                (unit, _dt(first), _dt(last)))
            row = cursor.fetchone()
            if row is not None and row[0]:
                return True
    return False


def _dt(ts_us: int) -> datetime:
    return from_epoch_us(ts_us)


def _pg_merge_sql(signals: tuple[str, ...]) -> tuple[str, str]:
    """``(UPDATE, INSERT)`` from the staging table; parameter %(sfid)s is the file id."""
    sets, changed = _merge_clauses(signals, old="t", new="st", mask="st.provided_mask",
                                   differs="IS DISTINCT FROM")
    sets.append("source_file_id = CAST(%(sfid)s AS integer)")
    update = (f"UPDATE samples AS t SET {', '.join(sets)} FROM {_STAGE_TABLE} AS st "
              "WHERE t.unit_id = st.unit_id AND t.ts = st.ts AND (" +
              " OR ".join(changed) + ")")
    names = ["unit_id", "ts", *signals, "quality", "flagged_signals"]
    insert = (f"INSERT INTO samples ({', '.join(names)}, source_file_id) "
              f"SELECT {', '.join('st.' + n for n in names)}, CAST(%(sfid)s AS integer) "
              f"FROM {_STAGE_TABLE} AS st WHERE NOT EXISTS (SELECT 1 FROM samples AS t "
              "WHERE t.unit_id = st.unit_id AND t.ts = st.ts)")
    return update, insert


def _pg_stage_ddl() -> str:
    signals = ", ".join(f"{name} double precision" for name in SIGNAL_NAMES)
    return (f"CREATE TEMP TABLE IF NOT EXISTS {_STAGE_TABLE} (unit_id integer NOT NULL, "
            f"ts timestamptz NOT NULL, {signals}, quality integer NOT NULL, "
            "flagged_signals bigint NOT NULL, provided_mask bigint NOT NULL) ON COMMIT DROP")


def _load_postgresql(conn: Connection, columns: _Columns,
                     source_file_id: int | None) -> LoadCounts:
    raw = conn.connection.driver_connection
    with raw.cursor() as cursor:
        for unit in np.unique(columns.unit_id).tolist():  # sorted: no lock-order deadlock
            cursor.execute("SELECT pg_advisory_xact_lock(%s, %s)",
                           (ADVISORY_LOCK_CLASS, int(unit)))
    if not _pg_overlaps(conn, columns):
        _copy(conn, "samples", columns, source_file_id, with_mask=False)
        return LoadCounts(new=len(columns), unchanged=0, revised=0)

    update, insert = _pg_merge_sql(tuple(columns.signals))
    with raw.cursor() as cursor:
        cursor.execute(_pg_stage_ddl())
        cursor.execute(f"TRUNCATE {_STAGE_TABLE}")
    _copy(conn, _STAGE_TABLE, columns, None, with_mask=True)
    with raw.cursor() as cursor:
        cursor.execute(f"ANALYZE {_STAGE_TABLE}")
        cursor.execute(update, {"sfid": source_file_id})
        revised = cursor.rowcount
        cursor.execute(insert, {"sfid": source_file_id})
        new = cursor.rowcount
        cursor.execute(f"TRUNCATE {_STAGE_TABLE}")
    return LoadCounts(new=new, unchanged=len(columns) - new - revised, revised=revised)
