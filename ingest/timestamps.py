"""Timestamps of export files: parsing, UTC offsets and plant-local wall time with DST.

Pure, vectorised functions (no I/O). Instants are handled as ``int64`` nanoseconds since
the Unix epoch in UTC, with :data:`NAT` (``numpy.iinfo(int64).min``) for "no instant".

Three time bases are supported (``ExportFormat.time_basis``):

- ``utc``: naive times are UTC; a time that carries an offset is converted with it.
- ``offset``: every time must carry its UTC offset (``Z``, ``+01:00``, ``+0100``); a naive
  time is rejected.
- ``local``: naive plant-local wall time with daylight-saving time. Two wall-clock
  hazards exist once a year each:

  * the gap (spring forward): wall times such as 02:30 on 2026-03-29 in Europe/Oslo do
    not exist. ``nonexistent="reject"`` rejects them; ``"shift_forward"`` reads them with
    the UTC offset in force *before* the gap (02:30 CET = 01:30 UTC, which is 03:30 CEST),
    i.e. a clock that had not been moved on yet. This keeps distinct samples distinct,
    unlike snapping them all to the end of the gap.
  * the fold (fall back): wall times such as 02:30 on 2026-10-25 in Europe/Oslo happen
    twice. ``ambiguous="earliest"`` takes the first (summer-time) instant, ``"latest"``
    the second (standard-time) one, ``"reject"`` rejects the row, and ``"infer"`` uses the
    file order: the first occurrence of a wall time (per series: per tag in a long
    export) is the summer-time instant, the second the standard-time one. A fold time
    seen only once in the whole file cannot be inferred and is rejected by the caller at
    the end of the file (:meth:`FoldState.seen_once`). :class:`FoldState` carries the
    counts across chunks.

References
----------
IANA time zone database (via Python's :mod:`zoneinfo` and pandas); ISO 8601-1:2019
for the text forms of date and time with a UTC offset.
"""

from __future__ import annotations

import re
from collections import Counter
from dataclasses import dataclass, field
from typing import Literal

import numpy as np
import pandas as pd

#: The "no instant" value of int64 nanosecond arrays (the same as pandas' NaT).
NAT: int = int(np.iinfo(np.int64).min)

#: Status codes of :func:`localize_wall_times`, one per row.
OK = 0  #: an unambiguous wall time, or a row that had an instant already
AMBIGUOUS_RESOLVED = 1  #: in a DST fold, resolved by the configured rule
AMBIGUOUS_REJECTED = 2  #: in a DST fold, rejected (``ambiguous="reject"``)
GAP_REJECTED = 3  #: in a DST gap, rejected (``nonexistent="reject"``)
GAP_SHIFTED = 4  #: in a DST gap, read with the offset before the gap
AMBIGUOUS_FIRST = 5  #: in a fold, first occurrence under ``infer``: provisionally summer time

_OFFSET_RE = re.compile(
    r"\d{2}:\d{2}(?::\d{2}(?:[.,]\d+)?)?\s*(?:[zZ]|[+-]\d{2}(?::?\d{2})?)\s*$"
)

Basis = Literal["utc", "offset", "local"]
Ambiguous = Literal["infer", "earliest", "latest", "reject"]
Nonexistent = Literal["reject", "shift_forward"]


def format_has_offset(fmt: str) -> bool | None:
    """Whether times in ``fmt`` carry an offset: True, False, or None (ISO 8601: per row)."""
    if fmt.upper() == "ISO8601":
        return None
    return "%z" in fmt or "%Z" in fmt


def has_utc_offset(text: pd.Series) -> np.ndarray:
    """True where the time text ends in a UTC offset (``Z``, ``+01:00``, ``-0500``).

    Parameters
    ----------
    text : Series of str
        Time texts, e.g. ``"2026-03-29T01:30:00+01:00"``. A date alone never counts as
        carrying an offset (``"2026-03-29"`` ends in ``-29``, which is the day).
    """
    matched = text.str.contains(_OFFSET_RE, regex=True, na=False)
    return matched.to_numpy(dtype=bool, na_value=False)


def parse_timestamps(text: pd.Series, fmt: str) -> np.ndarray:
    """Parse time texts to int64 nanoseconds, reading naive times as if they were UTC.

    Parameters
    ----------
    text : Series of str
        Time texts, already stripped of surrounding blanks; missing values allowed.
    fmt : str
        ``"ISO8601"`` or a :func:`time.strptime` format such as ``"%d.%m.%Y %H:%M"``.

    Returns
    -------
    numpy.ndarray of int64 [ns since 1970-01-01 UTC]
        :data:`NAT` where the text is missing or does not match ``fmt``. A time with an
        offset gives its instant; a naive one gives its wall time read as UTC (callers
        re-interpret those for ``time_basis = "local"``).
    """
    parsed = pd.to_datetime(
        text, format="ISO8601" if fmt.upper() == "ISO8601" else fmt, utc=True, errors="coerce"
    )
    values = pd.DatetimeIndex(parsed).as_unit("ns").asi8
    return np.asarray(values, dtype=np.int64)


@dataclass
class FoldState:
    """How often each (series, wall time) in a DST fold has been seen so far in a file.

    Only fold times are kept, so the state stays small (at most one hour of samples per
    series and year).
    """

    counts: Counter[tuple[int, int]] = field(default_factory=Counter)

    def occurrences(self, series: np.ndarray, wall: np.ndarray) -> np.ndarray:
        """Occurrence number (0 = first) of each row in file order, updating the counts.

        Parameters
        ----------
        series : int64 array
            Series key per row (tag code in a long export; all zeros in a wide one).
        wall : int64 array [ns]
            Wall times (as naive nanoseconds) of the rows, all inside a fold.
        """
        if len(wall) == 0:
            return np.zeros(0, dtype=np.int64)
        frame = pd.DataFrame({"s": series, "w": wall})
        within = frame.groupby(["s", "w"], sort=False).cumcount().to_numpy(dtype=np.int64)
        keys = list(zip(series.tolist(), wall.tolist(), strict=True))
        prior = np.fromiter((self.counts[k] for k in keys), dtype=np.int64, count=len(keys))
        self.counts.update(keys)
        return prior + within

    def seen_once(self, series: np.ndarray, wall: np.ndarray) -> np.ndarray:
        """True for rows whose (series, wall time) has been seen exactly once so far."""
        keys = zip(series.tolist(), wall.tolist(), strict=True)
        return np.fromiter((self.counts[k] == 1 for k in keys), dtype=bool, count=len(wall))


@dataclass
class Localized:
    """Result of :func:`localize_wall_times`.

    Attributes
    ----------
    utc : int64 array [ns]
        The instant of each row, :data:`NAT` where rejected or unparsed.
    status : int8 array
        One of the status codes (:data:`OK`, :data:`AMBIGUOUS_RESOLVED`, ...).
    """

    utc: np.ndarray
    status: np.ndarray


def localize_wall_times(
    wall: np.ndarray,
    zone: str,
    *,
    ambiguous: Ambiguous = "infer",
    nonexistent: Nonexistent = "reject",
    fold_state: FoldState | None = None,
    series: np.ndarray | None = None,
) -> Localized:
    """Turn plant-local wall times into UTC instants, with the DST rules of ``zone``.

    Parameters
    ----------
    wall : int64 array [ns]
        Wall times as naive nanoseconds (as given by :func:`parse_timestamps` for naive
        texts); :data:`NAT` passes through.
    zone : str
        IANA time zone, e.g. ``"Europe/Oslo"``.
    ambiguous : {"infer", "earliest", "latest", "reject"}
        Rule for wall times in a fold (see the module docstring).
    nonexistent : {"reject", "shift_forward"}
        Rule for wall times in a gap (see the module docstring).
    fold_state : FoldState, optional
        Occurrence counts carried across chunks for ``ambiguous="infer"``; a fresh one is
        used when omitted (then inference only sees this call's rows).
    series : int64 array, optional
        Series key per row for the occurrence counting (tag code in a long export).

    Returns
    -------
    Localized
        Instants and per-row status. Under ``infer`` the first occurrence of a fold time
        gets :data:`AMBIGUOUS_FIRST` and its summer-time instant; the caller rejects it
        at the end of the file if :meth:`FoldState.seen_once` is still true for it.
    """
    wall = np.asarray(wall, dtype=np.int64)
    n = len(wall)
    status = np.zeros(n, dtype=np.int8)
    index = pd.DatetimeIndex(wall.view("M8[ns]"))
    as_summer = index.tz_localize(zone, ambiguous=np.ones(n, dtype=bool), nonexistent="NaT")
    as_winter = index.tz_localize(zone, ambiguous=np.zeros(n, dtype=bool), nonexistent="NaT")
    summer = np.asarray(as_summer.asi8, dtype=np.int64)
    winter = np.asarray(as_winter.asi8, dtype=np.int64)
    present = wall != NAT
    gap = present & (summer == NAT)
    fold = present & ~gap & (summer != winter)
    utc = summer.copy()

    if gap.any():
        if nonexistent == "shift_forward":
            before = index[gap].tz_localize(zone, nonexistent="shift_backward")
            offset_before = (np.asarray(before.tz_localize(None).asi8, dtype=np.int64)
                             - np.asarray(before.asi8, dtype=np.int64))
            utc[gap] = wall[gap] - offset_before
            status[gap] = GAP_SHIFTED
        else:
            utc[gap] = NAT
            status[gap] = GAP_REJECTED

    if fold.any():
        if ambiguous == "reject":
            utc[fold] = NAT
            status[fold] = AMBIGUOUS_REJECTED
        elif ambiguous == "earliest":
            status[fold] = AMBIGUOUS_RESOLVED
        elif ambiguous == "latest":
            utc[fold] = winter[fold]
            status[fold] = AMBIGUOUS_RESOLVED
        else:
            state = fold_state if fold_state is not None else FoldState()
            keys = (np.zeros(n, dtype=np.int64) if series is None
                    else np.asarray(series, dtype=np.int64))
            where = np.flatnonzero(fold)
            occurrence = state.occurrences(keys[where], wall[where])
            first = occurrence == 0
            utc[where[~first]] = winter[where[~first]]
            status[where] = np.where(first, AMBIGUOUS_FIRST, AMBIGUOUS_RESOLVED)
    return Localized(utc=utc, status=status)


def wall_text(wall_ns: int) -> str:
    """``2026-03-29 02:30:00`` for a naive wall time in nanoseconds (for messages)."""
    return str(pd.Timestamp(wall_ns))
