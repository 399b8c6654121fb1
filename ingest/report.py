"""What ingestion found in a file: problems with their place, and the canonical chunks.

These types are the contract between the readers (``ingest.readers``), the bulk loader
(``store.bulk``) and the pipeline (``ingest.pipeline``).
"""

from __future__ import annotations

from collections import Counter
from dataclasses import dataclass, field
from typing import Any, Literal

import pandas as pd

Severity = Literal["error", "warning"]

#: At most this many problems of one kind are kept word for word; the rest are counted.
MAX_PROBLEMS_PER_KIND = 50


@dataclass(frozen=True)
class Problem:
    """One thing wrong with an export, and where.

    ``severity`` "error" means the row (or cell) was rejected or nulled; "warning" means
    the data were kept and the point is noted (e.g. rows out of order, an unmapped column).
    """

    kind: str
    message: str
    line: int | None = None
    column: str | None = None
    severity: Severity = "error"

    def where(self, filename: str) -> str:
        """``FILE:LINE, column COL`` as far as known."""
        place = filename
        if self.line is not None:
            place += f":{self.line}"
        if self.column is not None:
            place += f", column {self.column!r}"
        return place

    def as_dict(self) -> dict[str, Any]:
        return {"kind": self.kind, "message": self.message, "line": self.line,
                "column": self.column, "severity": self.severity}


class ExportFormatError(ValueError):
    """The file as a whole cannot be read as the plant's export format.

    Raised by readers for problems no row-level rejection can cure: empty file, wrong
    delimiter, undecodable bytes, a header without the timestamp column, no mapped tag.
    """

    def __init__(self, message: str, *, line: int | None = None,
                 column: str | None = None, kind: str = "format") -> None:
        self.problem = Problem(kind=kind, message=message, line=line, column=column)
        super().__init__(message)


@dataclass
class FileReport:
    """Problems found while reading one file, kept with bounded memory."""

    filename: str
    problems: list[Problem] = field(default_factory=list)
    counts: Counter[str] = field(default_factory=Counter)
    rows_read: int = 0  #: data lines seen in the file
    rows_rejected: int = 0  #: data lines not loaded at all (bad timestamp, truncated, ...)
    cells_flagged: int = 0  #: cells that carry a quality flag

    def add(self, problem: Problem, count: int = 1) -> None:
        """Record ``problem`` (standing for ``count`` occurrences)."""
        key = f"{problem.severity}:{problem.kind}"
        if self.counts[key] < MAX_PROBLEMS_PER_KIND:
            self.problems.append(problem)
        self.counts[key] += count

    @property
    def errors(self) -> list[Problem]:
        return [p for p in self.problems if p.severity == "error"]

    @property
    def warnings(self) -> list[Problem]:
        return [p for p in self.problems if p.severity == "warning"]

    def lines(self) -> list[str]:
        """Each kept problem as ``FILE:LINE, column 'C': message`` for people to read."""
        out = [f"{p.where(self.filename)}: {p.severity}: {p.message}" for p in self.problems]
        for key, total in sorted(self.counts.items()):
            if total > MAX_PROBLEMS_PER_KIND:
                out.append(f"{self.filename}: ... and {total - MAX_PROBLEMS_PER_KIND} more "
                           f"{key.split(':', 1)[1]} {key.split(':', 1)[0]}s")
        return out

    def as_dict(self) -> dict[str, Any]:
        return {
            "filename": self.filename,
            "rows_read": self.rows_read,
            "rows_rejected": self.rows_rejected,
            "cells_flagged": self.cells_flagged,
            "counts": dict(self.counts),
            "problems": [p.as_dict() for p in self.problems],
        }


@dataclass
class CanonicalChunk:
    """A block of plant data in canonical form, ready to load.

    ``frame`` columns:

    - ``unit``: unit code (str)
    - ``ts``: ``datetime64[ns, UTC]``
    - one float64 column per signal in ``provided_signals``, in SI units, NaN = no value
    - ``quality``: int64, :class:`store.signals.Quality` bits of the row
    - ``flagged_signals``: int64, one bit per flagged signal (``store.signals.SIGNAL_BIT``)
    - ``line``: int64, the file line the row came from (first line for long exports)

    ``(unit, ts)`` is unique across all chunks of one file. Rows are sorted by unit, ts.
    """

    frame: pd.DataFrame
    provided_signals: tuple[str, ...]
    data_lines: int  #: file data lines this chunk consumed (for progress)
