"""One export file into the store: hash, recognise, read, check, load, record; all or nothing.

A file is known by the SHA-256 of its bytes. Each file loads in one database transaction
together with its ``ingested_files`` record, so a crash or kill at any point leaves the
store as it was and a rerun completes the load; a file already recorded is a no-op. A
file too damaged to trust (more rejected rows than the settings allow, or unreadable as
the plant's export format) is quarantined whole: copied aside, recorded with its report,
and nothing of it is loaded.
"""

from __future__ import annotations

import hashlib
import queue
import shutil
import threading
import time
from collections.abc import Callable, Iterator
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, TypeVar

import pandas as pd
from sqlalchemy import Connection, Engine, insert, select, update
from sqlalchemy.exc import IntegrityError

from hydrodrift import __version__
from hydrodrift.settings import Settings
from ingest.plant_file import PlantFile
from ingest.readers import detect_plant, iter_canonical_chunks
from ingest.registry import stored_plant_file
from ingest.report import ExportFormatError, FileReport, Problem
from store.bulk import LoadCounts, load_samples
from store.engine import session_scope
from store.models import IngestedFile, Plant, QuarantinedFile, utc_now

#: progress(data_lines_done, data_lines_total_estimate)
ProgressCallback = Callable[[int, int], None]

_HASH_BLOCK = 1 << 20
_T = TypeVar("_T")
_DONE = object()


def prefetch(items: Iterator[_T], depth: int = 2) -> Iterator[_T]:
    """Run ``items`` in a background thread, at most ``depth`` ahead of the consumer.

    Reading and checking the next chunk (pandas and numpy, mostly outside the GIL) then
    overlaps with loading the current one (the database's work), on two cores about
    halving a file's time. Memory stays bounded by ``depth`` chunks. An exception in the
    producer is raised in the consumer; a consumer that stops early stops the producer.
    """
    buffer: queue.Queue[Any] = queue.Queue(maxsize=depth)
    stop = threading.Event()

    def produce() -> None:
        try:
            for item in items:
                while not stop.is_set():
                    try:
                        buffer.put(item, timeout=0.1)
                        break
                    except queue.Full:
                        continue
                if stop.is_set():
                    return
            buffer.put(_DONE)
        except BaseException as exc:  # handed to the consumer, which re-raises it
            buffer.put(exc)

    worker = threading.Thread(target=produce, name="ingest-reader", daemon=True)
    worker.start()
    try:
        while True:
            item = buffer.get()
            if item is _DONE:
                return
            if isinstance(item, BaseException):
                raise item
            yield item
    finally:
        stop.set()
        while worker.is_alive():
            try:
                buffer.get_nowait()
            except queue.Empty:
                worker.join(timeout=0.05)


@dataclass
class FileOutcome:
    """What ingesting one file did."""

    path: Path
    status: str  # loaded | empty | quarantined | already | skipped
    message: str
    file_id: int | None = None
    plant_code: str | None = None
    rows_total: int = 0
    rows_new: int = 0
    rows_unchanged: int = 0
    rows_revised: int = 0
    rows_rejected: int = 0
    cells_flagged: int = 0
    seconds: float = 0.0
    problems: list[str] = field(default_factory=list)


@dataclass(frozen=True)
class FileFingerprint:
    """Content hash, size and an estimate of the data lines, from one pass over the bytes."""

    sha256: str
    size_bytes: int
    newlines: int


def fingerprint(path: Path) -> FileFingerprint:
    """SHA-256, size and newline count of ``path`` (one streaming pass, constant memory)."""
    digest = hashlib.sha256()
    size = newlines = 0
    with path.open("rb") as handle:
        while block := handle.read(_HASH_BLOCK):
            digest.update(block)
            size += len(block)
            newlines += block.count(b"\n")
    return FileFingerprint(digest.hexdigest(), size, newlines)


def is_marker(path: Path, settings: Settings) -> bool:
    """A drop-folder completion marker (``NAME.ready``), not an export."""
    return path.name.endswith(settings.marker_suffix)


class _TooManyBadRows(Exception):
    def __init__(self, reason: str) -> None:
        super().__init__(reason)
        self.reason = reason


def _plants_in_store(engine: Engine) -> list[tuple[Plant, PlantFile, int]]:
    with session_scope(engine) as session:
        plants = list(session.scalars(select(Plant).order_by(Plant.code)))
        out = []
        for plant in plants:
            plant_file, version = stored_plant_file(session, plant)
            out.append((plant, plant_file, version))
        return out


def ingest_file(
    engine: Engine,
    path: Path | str,
    *,
    settings: Settings,
    plant_code: str | None = None,
    source: str | None = None,
    progress: ProgressCallback | None = None,
) -> FileOutcome:
    """Ingest one export file; see the module docstring for the guarantees.

    Parameters
    ----------
    engine : the store
    path : the export file
    settings : thresholds (quarantine), chunk size, quarantine folder
    plant_code : the plant the file belongs to; None = recognise it from its tags
    source : where the file came from (drop folder, URL), recorded; default: its path
    progress : called after each chunk with (data lines done, data lines expected)
    """
    path = Path(path)
    started = time.perf_counter()
    source = source or str(path.resolve())

    def outcome(status: str, message: str, **kw: Any) -> FileOutcome:
        return FileOutcome(path=path, status=status, message=message,
                           seconds=time.perf_counter() - started, **kw)

    if is_marker(path, settings):
        target = path.name[: -len(settings.marker_suffix)]
        return outcome("skipped", f"completion marker for {target!r}, not an export")
    try:
        print_ = fingerprint(path)
    except OSError as exc:
        return outcome("skipped", f"cannot read: {exc.strerror}")

    with session_scope(engine) as session:
        known = session.scalar(select(IngestedFile).where(IngestedFile.sha256 == print_.sha256))
        if known is not None:
            return outcome(
                "already",
                f"already ingested as file #{known.id} ({known.status}, "
                f"{known.filename}, {known.started_at:%Y-%m-%d %H:%M} UTC); nothing changed",
                file_id=known.id,
            )

    report = FileReport(filename=path.name)
    plants = _plants_in_store(engine)
    chosen: tuple[Plant, PlantFile, int] | None = None
    if plant_code is not None:
        chosen = next((p for p in plants if p[0].code == plant_code), None)
        if chosen is None:
            known_codes = ", ".join(p[0].code for p in plants) or "none imported yet"
            return outcome("skipped", f"unknown plant {plant_code!r} (plants: {known_codes})")
    elif print_.size_bytes > 0:
        try:
            match = detect_plant(path, [p[1] for p in plants])
        except ExportFormatError:
            match = None
        chosen = next((p for p in plants if match is not None and p[1] is match), None)

    if print_.size_bytes == 0:
        empty = Problem(kind="empty_file",
                        message="file is empty (0 bytes); expected a header line and data")
        report.add(empty)
        return _quarantine(engine, path, print_, report, settings, source, chosen,
                           empty.message, started)
    if chosen is None:
        report.add(Problem(kind="unknown_plant",
                           message="no imported plant's tag map matches this file's tags; "
                           "import its plant file or pass --plant"))
        return _quarantine(engine, path, print_, report, settings, source, None,
                           "no plant matches the file's tags", started)

    plant, plant_file, plant_version = chosen
    unit_ids = {u.code: u.id for u in plant.units}
    expected_lines = max(print_.newlines - plant_file.export.skip_lines - 1, 0)
    counts = LoadCounts(0, 0, 0)
    lines_done = 0
    try:
        with engine.begin() as conn:
            file_id = conn.execute(
                insert(IngestedFile).returning(IngestedFile.id),
                [dict(sha256=print_.sha256, source=source, filename=path.name,
                      size_bytes=print_.size_bytes, plant_id=plant.id,
                      plant_config_version=plant_version, status="loading", report={},
                      started_at=utc_now(), code_version=__version__)],
            ).scalar_one()
            first_ts = last_ts = None
            chunks = iter_canonical_chunks(path, plant_file, report,
                                           chunk_rows=settings.ingest_chunk_rows)
            for chunk in prefetch(chunks):
                _check_bad_rows(report, settings, final=False)
                frame = chunk.frame
                lines_done += chunk.data_lines
                if len(frame):
                    loaded = _load_chunk(conn, frame, chunk.provided_signals, unit_ids, file_id)
                    counts = LoadCounts(new=counts.new + loaded.new,
                                        unchanged=counts.unchanged + loaded.unchanged,
                                        revised=counts.revised + loaded.revised)
                    lo, hi = frame["ts"].min(), frame["ts"].max()
                    first_ts = lo if first_ts is None else min(first_ts, lo)
                    last_ts = hi if last_ts is None else max(last_ts, hi)
                if progress is not None:
                    progress(lines_done, max(expected_lines, lines_done))
            _check_bad_rows(report, settings, final=True)
            total = counts.new + counts.unchanged + counts.revised
            status = "loaded" if total else "empty"
            conn.execute(
                update(IngestedFile).where(IngestedFile.id == file_id).values(
                    status=status, rows_total=report.rows_read, rows_new=counts.new,
                    rows_unchanged=counts.unchanged, rows_revised=counts.revised,
                    rows_rejected=report.rows_rejected, rows_flagged=report.cells_flagged,
                    first_ts=_py_ts(first_ts), last_ts=_py_ts(last_ts),
                    report=report.as_dict(), finished_at=utc_now(),
                )
            )
    except ExportFormatError as exc:
        report.add(exc.problem)
        return _quarantine(engine, path, print_, report, settings, source, chosen,
                           exc.problem.message, started)
    except _TooManyBadRows as exc:
        return _quarantine(engine, path, print_, report, settings, source, chosen,
                           exc.reason, started)
    except IntegrityError:
        # Another process recorded the same content first (sha256 is unique): a no-op here.
        return outcome("already", "ingested concurrently by another process; nothing changed")

    message = (f"{counts.new} new, {counts.unchanged} unchanged, {counts.revised} revised, "
               f"{report.rows_rejected} rejected rows; {report.cells_flagged} flagged cells")
    if status == "empty":
        message = "no data rows loaded; " + message
    return outcome(status, message, file_id=file_id, plant_code=plant.code,
                   rows_total=report.rows_read, rows_new=counts.new,
                   rows_unchanged=counts.unchanged, rows_revised=counts.revised,
                   rows_rejected=report.rows_rejected, cells_flagged=report.cells_flagged,
                   problems=report.lines())


def _py_ts(value: pd.Timestamp | None) -> Any:
    return None if value is None else value.to_pydatetime()


def _check_bad_rows(report: FileReport, settings: Settings, *, final: bool) -> None:
    """Raise when the rejected rows exceed the quarantine threshold.

    During the read the fraction is judged against the rows read so far once enough rows
    are in, so that a hopeless file stops early instead of loading to the end.
    """
    bad, seen = report.rows_rejected, report.rows_read
    if bad < max(settings.quarantine_min_bad_rows, 1) or seen == 0:
        return
    if not final and seen < 10 * settings.quarantine_min_bad_rows:
        return
    fraction = bad / seen
    if fraction > settings.quarantine_bad_row_fraction:
        raise _TooManyBadRows(
            f"{bad} of {seen} data rows rejected ({fraction:.1%}), more than the "
            f"{settings.quarantine_bad_row_fraction:.1%} allowed (HYDRODRIFT_QUARANTINE_"
            "BAD_ROW_FRACTION)"
        )


def _load_chunk(conn: Connection, frame: pd.DataFrame, provided: tuple[str, ...],
                unit_ids: dict[str, int], file_id: int) -> LoadCounts:
    unknown = set(frame["unit"].unique()) - set(unit_ids)
    if unknown:  # the readers only emit units of the plant file; this is a programming error
        raise RuntimeError(f"reader produced units not in the store: {sorted(unknown)}")
    loadable = frame.drop(columns=["line"]).assign(unit_id=frame["unit"].map(unit_ids))
    loadable = loadable.drop(columns=["unit"])
    return load_samples(conn, loadable, provided_signals=provided, source_file_id=file_id)


def _quarantine(engine: Engine, path: Path, print_: FileFingerprint, report: FileReport,
                settings: Settings, source: str,
                chosen: tuple[Plant, PlantFile, int] | None, reason: str,
                started: float) -> FileOutcome:
    """Copy the file aside and record it, with its report; load nothing of it."""
    settings.quarantine_dir.mkdir(parents=True, exist_ok=True)
    stored = settings.quarantine_dir / f"{print_.sha256[:16]}_{path.name}"
    if not stored.exists():
        partial = stored.with_name(stored.name + ".partial")
        shutil.copyfile(path, partial)
        partial.replace(stored)
    plant = chosen[0] if chosen else None
    try:
        with engine.begin() as conn:
            file_id = conn.execute(
                insert(IngestedFile).returning(IngestedFile.id),
                [dict(sha256=print_.sha256, source=source, filename=path.name,
                      size_bytes=print_.size_bytes, plant_id=plant.id if plant else None,
                      plant_config_version=chosen[2] if chosen else None,
                      status="quarantined", rows_total=report.rows_read,
                      rows_rejected=report.rows_rejected, rows_flagged=report.cells_flagged,
                      report=report.as_dict() | {"quarantine_reason": reason},
                      started_at=utc_now(), finished_at=utc_now(), code_version=__version__)],
            ).scalar_one()
            conn.execute(insert(QuarantinedFile), [dict(
                ingested_file_id=file_id, sha256=print_.sha256, original_path=source,
                stored_path=str(stored.resolve()), reason=reason, quarantined_at=utc_now())])
    except IntegrityError:
        return FileOutcome(path=path, status="already",
                           message="recorded concurrently by another process; nothing changed",
                           seconds=time.perf_counter() - started)
    return FileOutcome(
        path=path, status="quarantined", message=f"quarantined: {reason}; copy at {stored}",
        file_id=file_id, plant_code=plant.code if plant else None,
        rows_total=report.rows_read, rows_rejected=report.rows_rejected,
        cells_flagged=report.cells_flagged, problems=report.lines(),
        seconds=time.perf_counter() - started,
    )
