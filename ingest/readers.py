"""Export readers: wide and long CSV files of a plant, streamed into canonical chunks.

:func:`iter_canonical_chunks` reads one export file as the plant file's ``[export]``
section describes it (layout, delimiter, decimal comma, thousands separator, encoding,
preamble lines, time basis), maps its tags to units and canonical signals, converts the
values to SI (``si = a * raw + b`` from :meth:`TagMapping.to_si`), stamps UTC instants,
flags quality (:class:`store.signals.Quality`) and yields :class:`CanonicalChunk` objects.

Assumptions and behaviour, in brief:

- **One record per physical line.** Line numbers in problems are 1-based physical file
  lines: the header is line ``skip_lines + 1``. A quoted field with an embedded line
  break is not supported (it would shift the line numbers).
- **Whole-file checks first, cheaply:** the file is decoded incrementally (1 MiB blocks)
  with the declared encoding before anything is parsed, so an undecodable byte is
  reported with its line and character position and nothing is loaded.
- **Rows rejected** (not loaded, counted in ``report.rows_rejected``): unparseable or
  empty timestamp (``bad_timestamp``), a naive time under ``time_basis = "offset"``
  (``naive_timestamp``), a DST gap or an unresolvable fold time (``dst_gap``,
  ``dst_ambiguous``), the cut-short last line of a file that does not end with a line
  break (``truncated_line``), a line with more fields than the header
  (``bad_field_count``), a repeated (unit, timestamp) (``duplicate_timestamp``; the first
  is kept). A line shorter than the header elsewhere in the file is read with its
  missing trailing cells empty (the C parser pads it); only the last line is checked.
- **Cells nulled and flagged** (the row is kept): text or non-finite numbers
  (``NOT_A_NUMBER``), the exporter's sentinels compared on the raw value (``SENTINEL``).
- **Cells kept and flagged**: bad source quality code (long layout, ``SOURCE_BAD``),
  out of range, stuck, spike (:mod:`ingest.validate`), fold times resolved by the
  configured rule (``AMBIGUOUS_TIME``, a row flag without signal bits).
- **Plant-wide tags** (unit ``"*"``) feed every unit of the plant. When two tags in one
  file feed the same unit and signal, the unit's own tag wins over a plant-wide one and
  the earlier tag of the plant file wins otherwise; the loser gets a ``duplicate_signal``
  warning and its values are ignored for that unit.
- A unit's row is produced only where at least one of its cells has a value or a flag.
- **Memory:** a wide file is streamed in chunks of ``chunk_rows`` lines; across chunks the
  reader keeps the seen timestamps of the last two chunks while the file is in time
  order, and of every chunk once it is not (8 bytes per row plus a line number, to find
  duplicates), the fold counts, and the validators' tails. Rows are held back only while a
  DST fold time waits for its second occurrence or a run of identical values may still
  become a stuck run (both bounded). A long file is accumulated as compact arrays
  (about 40 bytes per long row) and pivoted at the end, since a tag-sorted file cannot be
  pivoted any earlier.
- Chunks are sorted by (unit, ts) within themselves; (unit, ts) is unique in the file.
"""

from __future__ import annotations

import codecs
import csv
import warnings
from collections.abc import Callable, Iterator, Sequence
from dataclasses import dataclass, field
from datetime import datetime
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from ingest import timestamps as tsm
from ingest.plant_file import ExportFormat, PlantFile, TagMapping, UnitSpec
from ingest.report import (
    MAX_PROBLEMS_PER_KIND,
    CanonicalChunk,
    ExportFormatError,
    FileReport,
    Problem,
)
from ingest.validate import FlagCounts, SeriesValidator, physical_range, spike_floor
from store.signals import SIGNAL_BIT, SIGNAL_NAMES, Quality

#: Delimiters tried when the header does not split with the declared one.
COMMON_DELIMITERS: tuple[str, ...] = (",", ";", "\t", "|")
#: Bytes per block of the whole-file encoding check.
DECODE_BLOCK = 1 << 20
#: Lines read by :func:`detect_plant` from a long export.
DETECT_LINES = 5000

_NAT = tsm.NAT
_ROW_COLUMNS = ("ts", "line", "rowq", "status", "wall")


# ----------------------------------------------------------------------------------------
# whole-file checks


@dataclass(frozen=True)
class FileFacts:
    """What the cheap whole-file pass learned.

    Attributes
    ----------
    encoding : the codec to read with (``utf-8-sig`` where a utf-8 file has a BOM)
    header_line : 1-based physical line of the header
    header : the header's field names, stripped
    total_lines : physical lines in the file
    ends_with_newline : whether the last byte is a line break
    last_line_fields : fields on the last line (0 for an empty last line)
    """

    encoding: str
    header_line: int
    header: tuple[str, ...]
    total_lines: int
    ends_with_newline: bool
    last_line_fields: int


def _split(text: str, delimiter: str) -> list[str]:
    row = next(csv.reader([text], delimiter=delimiter), [])
    return [name.strip() for name in row]


def _encoding_error(path: Path, encoding: str, bad: int, header: tuple[str, ...] | None,
                    delimiter: str) -> ExportFormatError:
    """The error for an undecodable byte at absolute byte offset ``bad``."""
    with open(path, "rb") as fh:
        line = 1
        line_start = 0
        position = 0
        while position < bad:
            block = fh.read(min(DECODE_BLOCK, bad - position))
            if not block:
                break
            line += block.count(b"\n")
            last = block.rfind(b"\n")
            if last >= 0:
                line_start = position + last + 1
            position += len(block)
        fh.seek(line_start)
        before = fh.read(bad - line_start)
        byte = fh.read(1)
    text_before = before.decode(encoding, errors="replace")
    character = len(text_before) + 1
    column = None
    if header:
        field_index = text_before.count(delimiter)
        if field_index < len(header):
            column = header[field_index]
    alternatives = [e for e in ("utf-8", "cp1252", "latin-1") if e != encoding]
    message = (f"byte 0x{byte.hex()} at line {line}, character {character} is not valid "
               f"{encoding}; check the exporter's encoding and set export.encoding "
               f"(e.g. {' or '.join(repr(e) for e in alternatives)})")
    return ExportFormatError(message, line=line, column=column, kind="encoding")


def inspect_file(path: Path, fmt: ExportFormat) -> FileFacts:
    """Check the whole file cheaply and read its header; raise on file-level problems.

    Raises
    ------
    ExportFormatError
        Empty file, undecodable bytes, too few lines for the preamble and header, a
        header that splits with another common delimiter but not the declared one, a
        repeated column name.
    """
    size = path.stat().st_size
    if size == 0:
        raise ExportFormatError("file is empty (0 bytes); expected a header line and data "
                                "lines", kind="empty")
    encoding = fmt.encoding
    with open(path, "rb") as fh:
        start = fh.read(3)
    has_bom = start == codecs.BOM_UTF8
    if has_bom and encoding == "utf-8":
        encoding = "utf-8-sig"
    elif has_bom and encoding in ("latin-1", "cp1252"):
        raise ExportFormatError(
            f"file starts with a UTF-8 byte-order mark but export.encoding is {encoding!r}; "
            "set export.encoding = 'utf-8-sig'", line=1, kind="encoding")

    header_line = fmt.skip_lines + 1
    header: tuple[str, ...] | None = None
    header_text = ""
    with open(path, encoding=encoding, errors="replace", newline="") as fh:
        first_lines = []
        for _ in range(header_line):
            text = fh.readline()
            if not text:
                break
            first_lines.append(text)
    if len(first_lines) < header_line:
        raise ExportFormatError(
            f"file has {len(first_lines)} line(s); expected {fmt.skip_lines} preamble "
            f"line(s) (export.skip_lines) and then the header", line=len(first_lines) or None,
            kind="header")
    header_text = first_lines[-1].rstrip("\r\n")
    header = tuple(_split(header_text, fmt.delimiter))

    decoder = codecs.getincrementaldecoder(encoding)(errors="strict")
    newlines = 0
    offset = 0
    with open(path, "rb") as fh:
        while True:
            block = fh.read(DECODE_BLOCK)
            pending = len(decoder.getstate()[0])
            try:
                decoder.decode(block, final=not block)
            except UnicodeDecodeError as exc:
                raise _encoding_error(path, encoding, offset - pending + exc.start, header,
                                      fmt.delimiter) from exc
            if not block:
                break
            newlines += block.count(b"\n")
            offset += len(block)
        fh.seek(max(0, size - 65536))
        tail = fh.read()
    ends_with_newline = tail.endswith(b"\n")
    total_lines = newlines + (0 if ends_with_newline else 1)
    last_text = tail.rstrip(b"\r\n").rsplit(b"\n", 1)[-1] if not ends_with_newline else b""
    last_fields = len(_split(last_text.decode(encoding, errors="replace"), fmt.delimiter)) \
        if last_text else 0

    if len(header) == 1:
        for other in COMMON_DELIMITERS:
            if other == fmt.delimiter:
                continue
            fields = _split(header_text, other)
            if len(fields) > 1:
                raise ExportFormatError(
                    f"the header splits into 1 column with the declared delimiter "
                    f"{fmt.delimiter!r} but into {len(fields)} columns with {other!r}; "
                    f"set export.delimiter = {other!r} (header: {header_text[:120]!r})",
                    line=header_line, kind="delimiter")
    seen: dict[str, int] = {}
    for index, name in enumerate(header):
        if name in seen:
            raise ExportFormatError(
                f"column {name!r} appears twice in the header (fields {seen[name] + 1} and "
                f"{index + 1}); expected unique column names", line=header_line,
                column=name, kind="header")
        seen[name] = index
    return FileFacts(encoding=encoding, header_line=header_line, header=header,
                     total_lines=total_lines, ends_with_newline=ends_with_newline,
                     last_line_fields=last_fields)


# ----------------------------------------------------------------------------------------
# tag resolution


@dataclass(frozen=True)
class _Target:
    unit: str
    signal: str


def _resolve_targets(plant: PlantFile, present: Sequence[str], report: FileReport,
                     ) -> dict[str, dict[str, str]]:
    """For each unit, ``signal -> tag`` among the tags present in the file."""
    present_set = set(present)
    chosen: dict[str, dict[str, str]] = {u.code: {} for u in plant.units}
    losers: dict[tuple[str, str], list[str]] = {}
    for unit in plant.units:
        for own_first in (True, False):
            for tag, mapping in plant.tags.items():
                if tag not in present_set:
                    continue
                if (mapping.unit == unit.code) != own_first or \
                        (not own_first and mapping.unit != "*"):
                    continue
                if mapping.signal in chosen[unit.code]:
                    losers.setdefault((tag, chosen[unit.code][mapping.signal]), []).append(
                        unit.code)
                else:
                    chosen[unit.code][mapping.signal] = tag
    for (tag, winner), units in losers.items():
        report.add(Problem(
            kind="duplicate_signal", severity="warning", column=tag,
            message=f"tag {tag!r} feeds {plant.tags[tag].signal} of unit(s) "
                    f"{', '.join(units)}, which tag {winner!r} already feeds; its values are "
                    "ignored there"))
    return {code: signals for code, signals in chosen.items() if signals}


# ----------------------------------------------------------------------------------------
# helpers


def _add_rows(report: FileReport, kind: str, lines: np.ndarray,
              message: Callable[[int], str], *, column: str | None,
              severity: str = "error") -> None:
    """One Problem per row, word for word up to the report's cap, counted beyond it."""
    key = f"{severity}:{kind}"
    room = max(0, MAX_PROBLEMS_PER_KIND - report.counts[key])
    shown = min(room, len(lines))
    for i in range(shown):
        report.add(Problem(kind=kind, message=message(i), line=int(lines[i]), column=column,
                           severity=severity))  # type: ignore[arg-type]
    if len(lines) > shown:
        report.counts[key] += len(lines) - shown


def _physical_lines(first_data_line: int, start_row: int, n: int,
                    skipped: np.ndarray) -> np.ndarray:
    """Physical line of each of ``n`` data rows, given the lines pandas skipped."""
    base = first_data_line + start_row + np.arange(n, dtype=np.int64)
    if len(skipped) == 0:
        return base
    shift = np.searchsorted(skipped, base, side="right")
    while True:
        new = np.searchsorted(skipped, base + shift, side="right")
        if np.array_equal(new, shift):
            return base + shift
        shift = new


def _example(fmt: str) -> str:
    if fmt.upper() == "ISO8601":
        return "ISO 8601 such as 2026-03-29T01:30:00+01:00"
    return f"{fmt!r} such as {datetime(2026, 3, 29, 1, 30, 0).strftime(fmt)!r}"


def _iso(ns: int) -> str:
    return pd.Timestamp(ns, tz="UTC").isoformat()


def parse_numbers(column: pd.Series, *, decimal: str, thousands: str,
                  ) -> tuple[np.ndarray, np.ndarray]:
    """Raw float64 values of one CSV column and the mask of not-a-number cells.

    Parameters
    ----------
    column : Series
        As parsed by pandas: float/int when every cell was a number, else text.
    decimal, thousands : str
        The export's decimal mark and thousands separator ("" = none).

    Returns
    -------
    values : float64 array, NaN for empty and not-a-number cells
    not_a_number : bool array, True for cells with text or a non-finite number
    """
    if pd.api.types.is_numeric_dtype(column) and not pd.api.types.is_bool_dtype(column):
        values = column.to_numpy(dtype=np.float64, na_value=np.nan)
        bad = np.isinf(values)
        if bad.any():
            values = np.where(bad, np.nan, values)
        return values, bad
    text = column.astype("str").str.strip()
    empty = (text.isna() | (text == "")).to_numpy(dtype=bool)
    cleaned = text
    if thousands:
        cleaned = cleaned.str.replace(thousands, "", regex=False)
    if decimal != ".":
        cleaned = cleaned.str.replace(decimal, ".", regex=False)
    numbers = pd.to_numeric(cleaned, errors="coerce").to_numpy(dtype=np.float64,
                                                               na_value=np.nan)
    bad = ~empty & ~np.isfinite(numbers)
    values = np.where(bad, np.nan, numbers)
    return values, bad


# ----------------------------------------------------------------------------------------
# the reader


@dataclass
class _SeenRun:
    low: int
    high: int
    ts: np.ndarray  # sorted
    lines: np.ndarray


@dataclass
class _Reader:
    """State of one file's read (shared by the wide and long layouts)."""

    path: Path
    plant: PlantFile
    report: FileReport
    chunk_rows: int
    facts: FileFacts
    fold: tsm.FoldState = field(default_factory=tsm.FoldState)
    seen: list[_SeenRun] = field(default_factory=list)
    #: newest timestamp of the runs let go while the file was in time order (see dedupe_rows)
    released_high: int | None = None
    released_warned: bool = False
    last_ts: int | None = None
    out_of_order_warned: bool = False
    held: list[pd.DataFrame] = field(default_factory=list)
    skipped: list[int] = field(default_factory=list)
    cell_counts: dict[tuple[str, str], FlagCounts] = field(default_factory=dict)
    blank_lines: list[int] = field(default_factory=list)
    blank_count: int = 0
    validators: dict[str, SeriesValidator] = field(default_factory=dict)
    pending_lines: int = 0

    @property
    def fmt(self) -> ExportFormat:
        return self.plant.export

    @property
    def zone(self) -> str:
        return self.plant.plant.timezone

    @property
    def truncated_line(self) -> int | None:
        facts = self.facts
        if (not facts.ends_with_newline and facts.total_lines > facts.header_line
                and facts.last_line_fields < len(facts.header)):
            return facts.total_lines
        return None

    # --- reading CSV chunks ---------------------------------------------------------

    def csv_chunks(self, dtypes: dict[str, str]) -> Iterator[tuple[pd.DataFrame, np.ndarray]]:
        """``(chunk, physical lines)`` of the file's data rows, bad lines reported."""
        fmt = self.fmt
        reader = pd.read_csv(
            self.path, sep=fmt.delimiter, decimal=fmt.decimal,
            thousands=fmt.thousands or None, encoding=self.facts.encoding,
            skiprows=fmt.skip_lines, header=0, dtype=dtypes, keep_default_na=False,
            na_values=[""], skip_blank_lines=False, on_bad_lines="warn",
            chunksize=self.chunk_rows, engine="c",
        )
        first_data_line = self.facts.header_line + 1
        start_row = 0
        header_fields = len(self.facts.header)
        with reader:
            while True:
                with warnings.catch_warnings(record=True) as caught:
                    warnings.simplefilter("always", pd.errors.ParserWarning)
                    try:
                        chunk = next(reader)
                    except StopIteration:
                        chunk = None
                    except pd.errors.EmptyDataError:
                        chunk = None
                self._note_bad_lines(caught, header_fields)
                if chunk is None:
                    return
                lines = _physical_lines(first_data_line, start_row, len(chunk),
                                        np.asarray(sorted(self.skipped), dtype=np.int64))
                start_row += len(chunk)
                chunk.columns = [str(c).strip() for c in chunk.columns]
                yield chunk, lines

    def _note_bad_lines(self, caught: list[warnings.WarningMessage], header_fields: int) -> None:
        found: list[tuple[int, str]] = []
        for item in caught:
            for text in str(item.message).splitlines():
                if not text.startswith("Skipping line "):
                    continue
                # "Skipping line 5: expected 3 fields, saw 4"
                number = int(text.split()[2].rstrip(":"))
                saw = text.rsplit("saw", 1)[-1].strip()
                found.append((number, saw))
        if not found:
            return
        found.sort()
        self.skipped.extend(n for n, _ in found)
        self.report.rows_read += len(found)
        self.report.rows_rejected += len(found)
        self.pending_lines += len(found)
        _add_rows(self.report, "bad_field_count", np.array([n for n, _ in found]),
                  lambda i: f"line has {found[i][1]} fields but the header has "
                            f"{header_fields}; row rejected (check for a stray delimiter)",
                  column=None)

    # --- timestamps -----------------------------------------------------------------

    def times(self, text: pd.Series, lines: np.ndarray, series: np.ndarray | None,
              reject: np.ndarray) -> pd.DataFrame:
        """Parse the timestamp column; reject rows in ``reject`` (updated in place).

        Returns a frame with ``ts``, ``rowq``, ``status``, ``wall`` (int64).
        """
        fmt = self.fmt
        column = fmt.timestamp_column
        report = self.report
        text = text.astype("str").str.strip()
        parsed = tsm.parse_timestamps(text, fmt.timestamp_format)
        empty = (text.isna() | (text == "")).to_numpy(dtype=bool)
        bad = (parsed == _NAT) & ~reject
        n = len(parsed)
        if bad.any():
            where = np.flatnonzero(bad)
            texts = text.iloc[where].tolist()
            expected = _example(fmt.timestamp_format)
            _add_rows(report, "bad_timestamp", lines[where],
                      lambda i: (f"empty timestamp; expected {expected}" if empty[where[i]]
                                 else f"timestamp {texts[i]!r} does not match the format; "
                                      f"expected {expected}"), column=column)
            reject |= bad
        status = np.zeros(n, dtype=np.int8)
        rowq = np.zeros(n, dtype=np.int64)
        wall = np.full(n, _NAT, dtype=np.int64)
        ts = parsed.copy()
        if fmt.time_basis == "utc":
            pass
        else:
            known = tsm.format_has_offset(fmt.timestamp_format)
            if known is None:
                has_offset = tsm.has_utc_offset(text)
            else:
                has_offset = np.full(n, known, dtype=bool)
            naive = ~has_offset & ~reject
            if fmt.time_basis == "offset":
                if naive.any():
                    where = np.flatnonzero(naive)
                    texts = text.iloc[where].tolist()
                    _add_rows(report, "naive_timestamp", lines[where],
                              lambda i: f"timestamp {texts[i]!r} has no UTC offset; "
                                        "time_basis 'offset' expects one on every time, "
                                        "e.g. 2026-03-29T01:30:00+01:00", column=column)
                    reject |= naive
            elif naive.any():
                where = np.flatnonzero(naive)
                keys = None if series is None else series[where]
                local = tsm.localize_wall_times(
                    parsed[where], self.zone, ambiguous=fmt.ambiguous,
                    nonexistent=fmt.nonexistent, fold_state=self.fold, series=keys)
                ts[where] = local.utc
                status[where] = local.status
                wall[where] = parsed[where]
                self._local_rejects(text, lines, status, wall, reject)
        ts[reject] = _NAT
        rowq[(status == tsm.AMBIGUOUS_RESOLVED) | (status == tsm.AMBIGUOUS_FIRST)] = int(
            Quality.AMBIGUOUS_TIME)
        return pd.DataFrame({"ts": ts, "rowq": rowq, "status": status, "wall": wall})

    def _local_rejects(self, text: pd.Series, lines: np.ndarray, status: np.ndarray,
                       wall: np.ndarray, reject: np.ndarray) -> None:
        column = self.fmt.timestamp_column
        zone = self.zone
        gap = status == tsm.GAP_REJECTED
        if gap.any():
            where = np.flatnonzero(gap)
            _add_rows(self.report, "dst_gap", lines[where],
                      lambda i: f"local time {tsm.wall_text(int(wall[where[i]]))} does not "
                                f"exist in {zone}: the clocks skip it (DST gap); expected a "
                                "time outside the gap, or set export.nonexistent = "
                                "'shift_forward'", column=column)
            reject |= gap
        fold = status == tsm.AMBIGUOUS_REJECTED
        if fold.any():
            where = np.flatnonzero(fold)
            _add_rows(self.report, "dst_ambiguous", lines[where],
                      lambda i: f"local time {tsm.wall_text(int(wall[where[i]]))} happens "
                                f"twice in {zone} (DST fold) and export.ambiguous is "
                                "'reject'; expected UTC offsets or another ambiguous rule",
                      column=column)
            reject |= fold

    def reject_unpaired_fold(self, frame: pd.DataFrame, series: np.ndarray | None,
                             *, final: bool) -> tuple[pd.DataFrame, bool]:
        """Resolve first fold occurrences; reject those still alone when ``final``.

        Returns the frame and whether unresolved first occurrences remain (not final).
        """
        first = frame["status"].to_numpy() == tsm.AMBIGUOUS_FIRST
        if not first.any():
            return frame, False
        where = np.flatnonzero(first)
        keys = (np.zeros(len(where), dtype=np.int64) if series is None
                else series[where])
        alone = self.fold.seen_once(keys, frame["wall"].to_numpy()[where])
        status = frame["status"].to_numpy().copy()
        status[where[~alone]] = tsm.AMBIGUOUS_RESOLVED
        frame = frame.assign(status=status)
        if not alone.any():
            return frame, False
        if not final:
            return frame, True
        lonely = where[alone]
        walls = frame["wall"].to_numpy()[lonely]
        zone = self.zone
        _add_rows(self.report, "dst_ambiguous", frame["line"].to_numpy()[lonely],
                  lambda i: f"local time {tsm.wall_text(int(walls[i]))} falls in the DST "
                            f"fold of {zone} (it happens twice) but appears only once in "
                            "the file, so its UTC offset cannot be inferred; expected both "
                            "occurrences, UTC offsets, or export.ambiguous = 'earliest' or "
                            "'latest'", column=self.fmt.timestamp_column)
        self.report.rows_rejected += len(lonely)
        keep = np.ones(len(frame), dtype=bool)
        keep[lonely] = False
        return frame[keep].reset_index(drop=True), False

    # --- duplicates and order (wide: per row) ---------------------------------------

    def dedupe_rows(self, frame: pd.DataFrame) -> pd.DataFrame:
        """Drop (and report) repeated timestamps, warn once about order, sort by ts."""
        if frame.empty:
            return frame
        ts = frame["ts"].to_numpy(dtype=np.int64)
        lines = frame["line"].to_numpy(dtype=np.int64)
        n = len(ts)
        duplicate = np.zeros(n, dtype=bool)
        earlier = np.zeros(n, dtype=np.int64)
        order = np.argsort(ts, kind="stable")
        sorted_ts = ts[order]
        same = np.zeros(n, dtype=bool)
        same[1:] = sorted_ts[1:] == sorted_ts[:-1]
        if same.any():
            group_start = np.maximum.accumulate(np.where(~same, np.arange(n), 0))
            duplicate[order[same]] = True
            earlier[order[same]] = lines[order[group_start[same]]]
        low, high = int(sorted_ts[0]), int(sorted_ts[-1])
        for run in self.seen:
            if run.high < low or run.low > high:
                continue
            pos = np.searchsorted(run.ts, ts)
            pos_clipped = np.minimum(pos, len(run.ts) - 1)
            hit = (run.ts[pos_clipped] == ts) & ~duplicate
            if hit.any():
                duplicate |= hit
                earlier[hit] = run.lines[pos_clipped[hit]]
        if duplicate.any():
            where = np.flatnonzero(duplicate)
            _add_rows(self.report, "duplicate_timestamp", lines[where],
                      lambda i: f"timestamp {_iso(int(ts[where[i]]))} repeats the one at "
                                f"line {int(earlier[where[i]])}; the first (line "
                                f"{int(earlier[where[i]])}) is kept, line "
                                f"{int(lines[where[i]])} rejected",
                      column=self.fmt.timestamp_column)
            self.report.rows_rejected += len(where)
            frame = frame[~duplicate]
            ts, lines = ts[~duplicate], lines[~duplicate]
        if len(ts) == 0:
            return frame
        previous = np.empty(len(ts), dtype=np.int64)
        previous[1:] = ts[:-1]
        previous[0] = ts[0] if self.last_ts is None else self.last_ts
        backwards = ts < previous
        if backwards.any() and not self.out_of_order_warned:
            first = int(np.flatnonzero(backwards)[0])
            self.report.add(Problem(
                kind="out_of_order", severity="warning", line=int(lines[first]),
                column=self.fmt.timestamp_column,
                message=f"timestamp {_iso(int(ts[first]))} is earlier than the row before "
                        "it; rows are kept and sorted (first such line given)"))
            self.out_of_order_warned = True
        self.last_ts = int(ts[-1])
        order = np.argsort(ts, kind="stable")
        if (self.released_high is not None and not self.released_warned
                and int(ts[order[0]]) <= self.released_high):
            self.report.add(Problem(
                kind="out_of_order", severity="warning", line=int(lines[order[0]]),
                column=self.fmt.timestamp_column,
                message="rows reach back more than one chunk into the file; a repeat of an "
                        "instant that far back is merged as a revision, not rejected"))
            self.released_warned = True
        in_order = (not self.out_of_order_warned and self.seen
                    and int(ts[order[0]]) > max(run.high for run in self.seen))
        if in_order:
            # A file in time order cannot repeat an instant of a run before the newest one:
            # let those go, so that memory stays bounded whatever the file's size.
            self.released_high = max(run.high for run in self.seen)
            self.seen = self.seen[-1:]
        self.seen.append(_SeenRun(low=int(ts[order[0]]), high=int(ts[order[-1]]),
                                  ts=ts[order], lines=lines[order]))
        return frame.iloc[order].reset_index(drop=True)

    # --- cells ----------------------------------------------------------------------

    def cells(self, column: pd.Series, lines: np.ndarray, name: str, mapping: TagMapping,
              ) -> tuple[np.ndarray, np.ndarray]:
        """SI values and cell flags of one column (report not-a-number, count sentinels)."""
        fmt = self.fmt
        raw, bad = parse_numbers(column, decimal=fmt.decimal, thousands=fmt.thousands)
        flags = np.zeros(len(raw), dtype=np.int64)
        if bad.any():
            where = np.flatnonzero(bad)
            texts = column.iloc[where].astype("str").tolist()
            _add_rows(self.report, "not_a_number", lines[where],
                      lambda i: f"{texts[i]!r} is not a finite number; expected a number "
                                f"with decimal mark {fmt.decimal!r}; stored as no value, "
                                "flagged not_a_number", column=name)
            flags[bad] |= int(Quality.NOT_A_NUMBER)
        if fmt.sentinels:
            sentinel = np.isin(raw, np.asarray(fmt.sentinels, dtype=np.float64))
            if sentinel.any():
                flags[sentinel] |= int(Quality.SENTINEL)
                raw = np.where(sentinel, np.nan, raw)
                entry = self.cell_counts.setdefault((name, "sentinel"), FlagCounts())
                entry.count += int(sentinel.sum())
                first = int(lines[np.flatnonzero(sentinel)[0]])
                entry.first_line = first if entry.first_line is None else \
                    min(entry.first_line, first)
        a, b = mapping.to_si()
        with np.errstate(over="ignore", invalid="ignore"):
            si = a * raw + b
        overflow = ~np.isfinite(si) & np.isfinite(raw)
        if overflow.any():
            where = np.flatnonzero(overflow)
            raws = raw[where]
            _add_rows(self.report, "not_a_number", lines[where],
                      lambda i: f"{raws[i]:g} {mapping.uom} overflows when converted to SI; "
                                "stored as no value, flagged not_a_number", column=name)
            flags[overflow] |= int(Quality.NOT_A_NUMBER)
            si = np.where(overflow, np.nan, si)
        return si, flags

    # --- units and validation -------------------------------------------------------

    def validator(self, unit: UnitSpec, signals: tuple[str, ...]) -> SeriesValidator:
        if unit.code not in self.validators:
            ranges = {s: physical_range(s, rated_power=unit.rated_power,
                                        rated_speed=unit.rated_speed,
                                        rated_flow=unit.rated_flow) for s in signals}
            floors = {s: spike_floor(s, rated_power=unit.rated_power,
                                     rated_speed=unit.rated_speed) for s in signals}
            self.validators[unit.code] = SeriesValidator(
                signals=signals, ranges=ranges, floors=floors,
                max_held=max(self.chunk_rows, 1000))
        return self.validators[unit.code]

    def finish_problems(self) -> None:
        """Aggregated warnings and errors: sentinels, blank lines, range/stuck/spike."""
        report = self.report
        for (name, _), entry in self.cell_counts.items():
            report.add(Problem(
                kind="sentinel", line=entry.first_line, column=name,
                message=f"{entry.count} cell(s) hold an exporter sentinel "
                        f"({', '.join(f'{s:g}' for s in self.fmt.sentinels)}); stored as no "
                        f"value, flagged sentinel (first at line {entry.first_line})"),
                count=entry.count)
        if self.blank_count:
            report.add(Problem(
                kind="blank_line", severity="warning", line=self.blank_lines[0],
                message=f"{self.blank_count} line(s) without a timestamp or any value were "
                        f"skipped (first at line {self.blank_lines[0]})"),
                count=self.blank_count)
        checks = {"out_of_range": "outside the physical range", "stuck": "stuck (repeated "
                  "identical values)", "spike": "spikes (far from the recent median)"}
        for code, validator in self.validators.items():
            for (signal, check), entry in sorted(validator.flags.items()):
                lower, upper = validator.ranges[signal]
                extra = (f" [{lower:g}, {upper:g}] in SI" if check == "out_of_range" else "")
                report.add(Problem(
                    kind=check, severity="warning", line=entry.first_line, column=signal,
                    message=f"unit {code}: {entry.count} value(s) of {signal} {checks[check]}"
                            f"{extra}; kept and flagged (first at line {entry.first_line}, "
                            f"value {entry.first_value:g} in SI)"),
                    count=entry.count)

    def emit(self, unit_frames: dict[str, pd.DataFrame], signals: dict[str, tuple[str, ...]],
             ) -> Iterator[CanonicalChunk]:
        """Group released unit frames by their signal set and yield chunks."""
        groups: dict[tuple[str, ...], list[pd.DataFrame]] = {}
        for code in sorted(unit_frames):
            frame = unit_frames[code]
            if frame.empty:
                continue
            groups.setdefault(signals[code], []).append(frame.assign(unit=code))
        for provided, frames in groups.items():
            frame = pd.concat(frames, ignore_index=True) if len(frames) > 1 else frames[0]
            flagged = frame["flagged_signals"].to_numpy(dtype=np.int64)
            self.report.cells_flagged += int(np.bitwise_count(flagged).sum())
            out = pd.DataFrame({
                "unit": frame["unit"].astype(object),
                "ts": pd.to_datetime(frame["ts"].to_numpy(dtype=np.int64), unit="ns",
                                     utc=True),
            })
            for signal in provided:
                out[signal] = frame[signal].to_numpy(dtype=np.float64)
            out["quality"] = frame["quality"].to_numpy(dtype=np.int64)
            out["flagged_signals"] = flagged
            out["line"] = frame["line"].to_numpy(dtype=np.int64)
            data_lines, self.pending_lines = self.pending_lines, 0
            yield CanonicalChunk(frame=out, provided_signals=provided, data_lines=data_lines)


# ----------------------------------------------------------------------------------------
# wide layout


def _unit_frame(rows: pd.DataFrame, columns: dict[str, int]) -> pd.DataFrame:
    """The unit's frame from released rows: signal columns, quality, flagged_signals."""
    n = len(rows)
    quality = rows["rowq"].to_numpy(dtype=np.int64).copy()
    flagged = np.zeros(n, dtype=np.int64)
    present = np.zeros(n, dtype=bool)
    data: dict[str, np.ndarray] = {"ts": rows["ts"].to_numpy(dtype=np.int64),
                                   "line": rows["line"].to_numpy(dtype=np.int64)}
    for signal, j in columns.items():
        values = rows[f"v{j}"].to_numpy(dtype=np.float64)
        flags = rows[f"f{j}"].to_numpy(dtype=np.int64)
        quality |= flags
        flagged[flags != 0] |= SIGNAL_BIT[signal]
        present |= ~np.isnan(values) | (flags != 0)
        data[signal] = values
    data["quality"] = quality
    data["flagged_signals"] = flagged
    frame = pd.DataFrame(data)
    return frame if present.all() else frame[present].reset_index(drop=True)


def _iter_wide(reader: _Reader) -> Iterator[CanonicalChunk]:
    fmt = reader.fmt
    plant = reader.plant
    report = reader.report
    header = reader.facts.header
    ts_column = fmt.timestamp_column
    if ts_column not in header:
        raise ExportFormatError(
            f"no timestamp column {ts_column!r} in the header; columns seen: "
            f"{', '.join(repr(h) for h in header)}; set export.timestamp_column",
            line=reader.facts.header_line, column=ts_column, kind="header")
    data_columns = [h for h in header if h != ts_column]
    mapped = [h for h in data_columns if h in plant.tags]
    if not mapped:
        raise ExportFormatError(
            f"no column of the header is a tag of plant {plant.plant.code}; columns seen: "
            f"{', '.join(repr(h) for h in data_columns) or '(none)'}; expected tags such as "
            f"{', '.join(repr(t) for t in list(plant.tags)[:5])}",
            line=reader.facts.header_line, kind="no_mapped_tag")
    for name in data_columns:
        if name not in plant.tags:
            report.add(Problem(kind="unmapped_tag", severity="warning", column=name,
                               line=reader.facts.header_line,
                               message=f"column {name!r} is not in the tag map of plant "
                                       f"{plant.plant.code}; its values are ignored"))
    targets = _resolve_targets(plant, mapped, report)
    column_index = {name: j for j, name in enumerate(mapped)}
    unit_columns = {code: {signal: column_index[tag] for signal, tag in signals.items()}
                    for code, signals in targets.items()}
    unit_signals = {code: tuple(s for s in SIGNAL_NAMES if s in cols)
                    for code, cols in unit_columns.items()}
    used = sorted({j for cols in unit_columns.values() for j in cols.values()})
    dtypes = {ts_column: "str"}
    dtypes.update({h: "str" for h in data_columns if h not in plant.tags})
    truncated = reader.truncated_line
    held: pd.DataFrame | None = None
    max_held = max(2 * reader.chunk_rows, 20_000)

    def release(rows: pd.DataFrame, final: bool) -> Iterator[CanonicalChunk]:
        rows = reader.dedupe_rows(rows)
        frames = {}
        for code, cols in unit_columns.items():
            validator = reader.validator(plant.unit(code), unit_signals[code])
            frames[code] = validator.push(_unit_frame(rows, cols), final=final)
        yield from reader.emit(frames, unit_signals)

    for chunk, lines in reader.csv_chunks(dtypes):
        n = len(chunk)
        text = chunk[ts_column]
        value_missing = np.ones(n, dtype=bool)
        for name in mapped:
            value_missing &= chunk[name].isna().to_numpy(dtype=bool)
        ts_missing = (text.isna() | (text.astype("str").str.strip() == "")).to_numpy(bool)
        blank = ts_missing & value_missing
        if blank.any():
            reader.blank_count += int(blank.sum())
            if len(reader.blank_lines) < 1:
                reader.blank_lines.append(int(lines[np.flatnonzero(blank)[0]]))
        report.rows_read += n - int(blank.sum())
        reader.pending_lines += n
        reject = blank.copy()
        cut = _truncated_rows(report, reader, lines, truncated, len(header))
        reject |= cut
        times = reader.times(text, lines, None, reject)
        columns: dict[str, object] = {}
        for name in mapped:
            j = column_index[name]
            if j not in used:
                continue
            values, flags = reader.cells(chunk[name], lines, name, plant.tags[name])
            columns[f"v{j}"] = values
            columns[f"f{j}"] = flags
        # one concat instead of a column at a time: wide exports have many tags
        rows = pd.concat([times.assign(line=lines),
                          pd.DataFrame(columns, index=times.index)], axis=1)
        keep = ~reject
        report.rows_rejected += int(reject.sum() - blank.sum())
        rows = rows[keep].reset_index(drop=True)
        held = rows if held is None else pd.concat([held, rows], ignore_index=True)
        held, waiting = reader.reject_unpaired_fold(held, None, final=len(held) > max_held)
        if waiting:
            continue
        yield from release(held, final=False)
        held = None
    if held is not None:
        held, _ = reader.reject_unpaired_fold(held, None, final=True)
        yield from release(held, final=True)
    else:
        yield from release(pd.DataFrame({c: pd.Series(dtype=np.int64) for c in _ROW_COLUMNS}
                                        | {f"v{j}": pd.Series(dtype=np.float64) for j in used}
                                        | {f"f{j}": pd.Series(dtype=np.int64) for j in used}),
                           final=True)


# ----------------------------------------------------------------------------------------
# long layout


def _iter_long(reader: _Reader) -> Iterator[CanonicalChunk]:
    fmt = reader.fmt
    plant = reader.plant
    report = reader.report
    header = reader.facts.header
    needed = [fmt.timestamp_column, fmt.tag_column, fmt.value_column]
    if fmt.quality_column:
        needed.append(fmt.quality_column)
    missing = [c for c in needed if c not in header]
    if missing:
        raise ExportFormatError(
            f"long export without column(s) {', '.join(repr(c) for c in missing)}; columns "
            f"seen: {', '.join(repr(h) for h in header)}; expected the timestamp, tag, value"
            f"{' and quality' if fmt.quality_column else ''} columns named in [export]",
            line=reader.facts.header_line, column=missing[0], kind="header")
    tag_names = list(plant.tags)
    tag_code = {tag: i for i, tag in enumerate(tag_names)}
    a_b = np.array([plant.tags[t].to_si() for t in tag_names], dtype=np.float64)
    good = {g.strip().lower() for g in fmt.good_quality}
    dtypes = {fmt.timestamp_column: "str", fmt.tag_column: "str"}
    if fmt.quality_column:
        dtypes[fmt.quality_column] = "str"
    dtypes.update({h: "str" for h in header if h not in needed})
    truncated = reader.truncated_line
    unmapped: dict[str, list[int]] = {}
    parts: list[pd.DataFrame] = []
    sentinels = np.asarray(fmt.sentinels, dtype=np.float64)
    mapped_seen = False

    for chunk, lines in reader.csv_chunks(dtypes):
        n = len(chunk)
        text = chunk[fmt.timestamp_column]
        tags = chunk[fmt.tag_column].astype("str").str.strip()
        tag_missing = (tags.isna() | (tags == "")).to_numpy(bool)
        ts_missing = (text.isna() | (text.astype("str").str.strip() == "")).to_numpy(bool)
        blank = tag_missing & ts_missing & chunk[fmt.value_column].isna().to_numpy(bool)
        if blank.any():
            reader.blank_count += int(blank.sum())
            if not reader.blank_lines:
                reader.blank_lines.append(int(lines[np.flatnonzero(blank)[0]]))
        report.rows_read += n - int(blank.sum())
        reader.pending_lines += n
        codes = tags.map(tag_code).to_numpy(dtype=np.float64, na_value=np.nan)
        mapped_seen = mapped_seen or bool((~np.isnan(codes)).any())
        is_unmapped = np.isnan(codes) & ~blank
        if is_unmapped.any():
            where = np.flatnonzero(is_unmapped)
            counts = pd.Series(lines[where]).groupby(tags.iloc[where].to_numpy()).agg(
                ["size", "min"])
            for tag, row in counts.iterrows():
                entry = unmapped.setdefault(str(tag), [0, int(row["min"])])
                entry[0] += int(row["size"])
        reject = blank | is_unmapped
        cut = _truncated_rows(report, reader, lines, truncated, len(header))
        report.rows_rejected += int((cut & ~reject).sum())
        reject |= cut
        code_int = np.where(np.isnan(codes), -1, codes).astype(np.int64)
        skip_ts = reject.copy()
        times = reader.times(text, lines, code_int, skip_ts)
        report.rows_rejected += int((skip_ts & ~reject).sum())
        raw, bad = parse_numbers(chunk[fmt.value_column], decimal=fmt.decimal,
                                 thousands=fmt.thousands)
        keep = ~skip_ts
        flags = np.zeros(n, dtype=np.int64)
        bad &= keep
        if bad.any():
            where = np.flatnonzero(bad)
            texts = chunk[fmt.value_column].iloc[where].astype("str").tolist()
            names = tags.iloc[where].tolist()
            _add_rows(report, "not_a_number", lines[where],
                      lambda i, texts=texts, names=names: (
                          f"{texts[i]!r} (tag {names[i]!r}) is not a finite number; expected "
                          f"a number with decimal mark {fmt.decimal!r}; stored as no value, "
                          "flagged not_a_number"), column=fmt.value_column)
            flags[bad] |= int(Quality.NOT_A_NUMBER)
        sentinel = np.isin(raw, sentinels) & keep
        if sentinel.any():
            flags[sentinel] |= int(Quality.SENTINEL)
            raw = np.where(sentinel, np.nan, raw)
            entry = reader.cell_counts.setdefault((fmt.value_column, "sentinel"),
                                                  FlagCounts())
            entry.count += int(sentinel.sum())
            first = int(lines[np.flatnonzero(sentinel)[0]])
            entry.first_line = first if entry.first_line is None else \
                min(entry.first_line, first)
        if fmt.quality_column:
            codes_q = chunk[fmt.quality_column].astype("str").str.strip().str.lower()
            is_good = codes_q.isin(good).to_numpy(dtype=bool)
            flags[~is_good & keep] |= int(Quality.SOURCE_BAD)
        safe = np.maximum(code_int, 0)
        values = a_b[safe, 0] * raw + a_b[safe, 1]
        part = pd.DataFrame({
            "code": code_int, "ts": times["ts"].to_numpy(), "wall": times["wall"].to_numpy(),
            "status": times["status"].to_numpy(), "rowq": times["rowq"].to_numpy(),
            "value": values, "flags": flags, "line": lines,
        })
        parts.append(part[keep])

    for tag, (count, first) in unmapped.items():
        report.add(Problem(kind="unmapped_tag", severity="warning", column=tag, line=first,
                           message=f"tag {tag!r} is not in the tag map of plant "
                                   f"{plant.plant.code}; its {count} row(s) are ignored "
                                   f"(first at line {first})"))
    cells = (pd.concat(parts, ignore_index=True) if parts else
             pd.DataFrame({c: pd.Series(dtype=np.int64) for c in
                           ("code", "ts", "wall", "status", "rowq", "flags", "line")}
                          | {"value": pd.Series(dtype=np.float64)}))
    if unmapped and not mapped_seen:
        raise ExportFormatError(
            f"no tag of the file is a tag of plant {plant.plant.code}; tags seen: "
            f"{', '.join(repr(t) for t in list(unmapped)[:10])}; expected tags such as "
            f"{', '.join(repr(t) for t in tag_names[:5])}", kind="no_mapped_tag",
            column=fmt.tag_column)
    cells, _ = reader.reject_unpaired_fold(cells, cells["code"].to_numpy(dtype=np.int64),
                                           final=True)
    cells = _dedupe_cells(reader, cells, tag_names)
    present_tags = [tag_names[c] for c in np.unique(cells["code"].to_numpy())]
    targets = _resolve_targets(plant, present_tags, report)
    unit_signals = {code: tuple(s for s in SIGNAL_NAMES if s in sigs)
                    for code, sigs in targets.items()}
    frames = {code: _pivot_unit(cells, {s: tag_code[t] for s, t in sigs.items()})
              for code, sigs in targets.items()}
    longest = max((len(f) for f in frames.values()), default=0)
    step = max(reader.chunk_rows, 1)
    for start in range(0, max(longest, 1), step):
        final = start + step >= longest
        released = {}
        for code, frame in frames.items():
            validator = reader.validator(plant.unit(code), unit_signals[code])
            released[code] = validator.push(frame.iloc[start:start + step], final=final)
        yield from reader.emit(released, unit_signals)


def _dedupe_cells(reader: _Reader, cells: pd.DataFrame, tag_names: list[str]) -> pd.DataFrame:
    """Long layout: reject repeated (tag, ts), keep the first; warn once about order."""
    if cells.empty:
        return cells
    code = cells["code"].to_numpy(dtype=np.int64)
    ts = cells["ts"].to_numpy(dtype=np.int64)
    lines = cells["line"].to_numpy(dtype=np.int64)
    order = np.lexsort((lines, ts, code))
    same = np.zeros(len(order), dtype=bool)
    same[1:] = (code[order][1:] == code[order][:-1]) & (ts[order][1:] == ts[order][:-1])
    if same.any():
        n = len(order)
        group_start = np.maximum.accumulate(np.where(~same, np.arange(n), 0))
        dup = order[same]
        earlier = lines[order[group_start[same]]]
        by_line = np.argsort(lines[dup], kind="stable")
        dup, earlier = dup[by_line], earlier[by_line]
        _add_rows(reader.report, "duplicate_timestamp", lines[dup],
                  lambda i: f"tag {tag_names[code[dup[i]]]!r} at {_iso(int(ts[dup[i]]))} "
                            f"repeats line {int(earlier[i])}; the first (line "
                            f"{int(earlier[i])}) is kept, line {int(lines[dup[i]])} rejected",
                  column=reader.fmt.timestamp_column)
        reader.report.rows_rejected += len(dup)
        keep = np.ones(len(cells), dtype=bool)
        keep[dup] = False
        cells = cells[keep].reset_index(drop=True)
        code, ts, lines = code[keep], ts[keep], lines[keep]
    by_tag = np.lexsort((lines, code))
    back = np.zeros(len(by_tag), dtype=bool)
    back[1:] = (code[by_tag][1:] == code[by_tag][:-1]) & (ts[by_tag][1:] < ts[by_tag][:-1])
    if back.any():
        first = by_tag[np.flatnonzero(back)]
        first_row = first[np.argmin(lines[first])]
        reader.report.add(Problem(
            kind="out_of_order", severity="warning", line=int(lines[first_row]),
            column=reader.fmt.timestamp_column,
            message=f"tag {tag_names[code[first_row]]!r}: timestamp "
                    f"{_iso(int(ts[first_row]))} is earlier than the tag's row before it; "
                    "rows are kept and sorted (first such line given)"))
    return cells


def _pivot_unit(cells: pd.DataFrame, signal_code: dict[str, int]) -> pd.DataFrame:
    """Long cells of one unit's tags into its wide frame, sorted by ts."""
    code = cells["code"].to_numpy(dtype=np.int64)
    mine = np.isin(code, np.fromiter(signal_code.values(), dtype=np.int64))
    sub = cells[mine]
    ts_all = sub["ts"].to_numpy(dtype=np.int64)
    keys = np.unique(ts_all)
    n = len(keys)
    line = np.full(n, np.iinfo(np.int64).max, dtype=np.int64)
    rowq = np.zeros(n, dtype=np.int64)
    flagged = np.zeros(n, dtype=np.int64)
    quality = np.zeros(n, dtype=np.int64)
    data: dict[str, np.ndarray] = {"ts": keys}
    sub_code = sub["code"].to_numpy(dtype=np.int64)
    for signal, c in signal_code.items():
        rows = sub_code == c
        pos = np.searchsorted(keys, ts_all[rows])
        values = np.full(n, np.nan)
        values[pos] = sub["value"].to_numpy()[rows]
        flags = np.zeros(n, dtype=np.int64)
        flags[pos] = sub["flags"].to_numpy()[rows]
        np.minimum.at(line, pos, sub["line"].to_numpy()[rows])
        np.bitwise_or.at(rowq, pos, sub["rowq"].to_numpy()[rows])
        quality |= flags
        flagged[flags != 0] |= SIGNAL_BIT[signal]
        data[signal] = values
    data["line"] = line
    data["quality"] = quality | rowq
    data["flagged_signals"] = flagged
    return pd.DataFrame(data)


# ----------------------------------------------------------------------------------------
# public entry points


def iter_canonical_chunks(
    path: Path,
    plant: PlantFile,
    report: FileReport,
    *,
    chunk_rows: int = 200_000,
) -> Iterator[CanonicalChunk]:
    """Read one export file of ``plant`` and yield its data in canonical form.

    Parameters
    ----------
    path : Path
        The export file (wide or long CSV as ``plant.export`` describes).
    plant : PlantFile
        Format, tag map, units and time zone of the plant.
    report : FileReport
        Receives row-level problems and the counts (``rows_read``, ``rows_rejected``,
        ``cells_flagged``).
    chunk_rows : int
        Data lines parsed per chunk; bounds the memory of a wide file.

    Yields
    ------
    CanonicalChunk
        Sorted by (unit, ts) within the chunk; (unit, ts) unique across the file.
        Values in SI units (see :mod:`store.signals`).

    Raises
    ------
    ExportFormatError
        File-level problems (empty file, undecodable bytes, wrong delimiter, header
        without the timestamp column, no mapped tag), before any chunk is yielded.
    """
    path = Path(path)
    facts = inspect_file(path, plant.export)
    reader = _Reader(path=path, plant=plant, report=report, chunk_rows=chunk_rows,
                     facts=facts)
    produced = _iter_wide(reader) if plant.export.layout == "wide" else _iter_long(reader)
    yield from produced
    reader.finish_problems()
    if report.rows_read == 0:
        report.add(Problem(kind="no_data", severity="warning", line=facts.header_line,
                           message="the file has a header but no data lines"))


def _truncated_rows(report: FileReport, reader: Any, lines: np.ndarray,
                    truncated: int | None, header_fields: int) -> np.ndarray:
    """Mask of the cut-short last line among ``lines`` (reported), all False if none."""
    cut = np.zeros(len(lines), dtype=bool) if truncated is None else lines == truncated
    if cut.any():
        _add_rows(report, "truncated_line", lines[cut],
                  lambda i: f"last line is cut short ({reader.facts.last_line_fields}"
                            f" of {header_fields} fields, no line break at the end of "
                            "the file; was it still being written?); row rejected",
                  column=None)
    return cut


def detect_plant(path: Path, plants: Sequence[PlantFile]) -> PlantFile | None:
    """The plant whose tag map matches the most tags of ``path`` (None if none matches).

    Reads only the header of a wide export, or the first :data:`DETECT_LINES` lines of a
    long one, each with the candidate plant's own delimiter, encoding and preamble.
    """
    path = Path(path)
    best: PlantFile | None = None
    best_hits: float = 0
    for plant in plants:
        fmt = plant.export
        try:
            with open(path, encoding=fmt.encoding, errors="replace", newline="") as fh:
                lines = []
                limit = fmt.skip_lines + 1 + (DETECT_LINES if fmt.layout == "long" else 0)
                for _ in range(limit):
                    text = fh.readline()
                    if not text:
                        break
                    lines.append(text.lstrip("\ufeff").rstrip("\r\n"))
        except OSError:
            return None
        if len(lines) <= fmt.skip_lines:
            continue
        hits = _tag_hits(lines, fmt, set(plant.tags), fmt.delimiter)
        if hits == 0:
            # A file of this plant written with another delimiter still belongs to it: the
            # reader then says which delimiter it found, instead of "no plant matches".
            hits = max(_tag_hits(lines, fmt, set(plant.tags), other) for other in
                       _OTHER_DELIMITERS if other != fmt.delimiter) * 0.5
        if hits > best_hits:
            best, best_hits = plant, hits
    return best


_OTHER_DELIMITERS = (",", ";", "\t", "|")


def _tag_hits(lines: list[str], fmt: ExportFormat, tags: set[str], delimiter: str) -> int:
    """How many of ``tags`` the first lines name, read with ``delimiter``."""
    header = _split(lines[fmt.skip_lines], delimiter)
    if fmt.layout == "wide":
        return len(set(header) & tags)
    if fmt.tag_column not in header:
        return 0
    column = header.index(fmt.tag_column)
    names = set()
    for row in csv.reader(lines[fmt.skip_lines + 1:], delimiter=delimiter):
        if len(row) > column:
            names.add(row[column].strip())
    return len(names & tags)
