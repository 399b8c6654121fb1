"""Timestamp parsing and DST handling (ingest.timestamps).

The 2026 transition dates are not typed from memory: each test first finds them by
stepping through 2026 with zoneinfo (IANA tz database) and asserts where they fall.
"""

from __future__ import annotations

from datetime import UTC, datetime, timedelta
from zoneinfo import ZoneInfo

import numpy as np
import pandas as pd
import pytest

from ingest import timestamps as tsm


def _transitions(zone: str, year: int) -> list[tuple[datetime, timedelta, timedelta]]:
    """(UTC instant, offset before, offset after) of each offset change in ``year``."""
    info = ZoneInfo(zone)
    out = []
    t = datetime(year, 1, 1, tzinfo=UTC)
    previous = t.astimezone(info).utcoffset()
    while t.year == year:
        offset = t.astimezone(info).utcoffset()
        if offset != previous:
            out.append((t, previous, offset))
        previous = offset
        t += timedelta(minutes=30)
    return out


def _wall(text: str) -> np.ndarray:
    return np.array([pd.Timestamp(text).value], dtype=np.int64)


def _ns(text: str) -> int:
    return pd.Timestamp(text).value


@pytest.mark.parametrize("zone, spring_utc, fall_utc", [
    # computed with zoneinfo in _transitions; asserted here so a tz database change shows
    ("Europe/Oslo", "2026-03-29T01:00:00+00:00", "2026-10-25T01:00:00+00:00"),
    ("America/Chicago", "2026-03-08T08:00:00+00:00", "2026-11-01T07:00:00+00:00"),
])
def test_2026_transitions_from_zoneinfo(zone: str, spring_utc: str, fall_utc: str) -> None:
    found = _transitions(zone, 2026)
    assert [t.isoformat() for t, _, _ in found] == [spring_utc, fall_utc]
    assert found[0][2] - found[0][1] == timedelta(hours=1)  # spring forward one hour


def _gap_and_fold_walls(zone: str) -> tuple[str, str]:
    """A wall time inside the 2026 gap and one inside the 2026 fold of ``zone``."""
    (spring, before, _), (fall, before_fall, _) = _transitions(zone, 2026)
    gap = (spring + before + timedelta(minutes=30)).replace(tzinfo=None)
    fold = (fall + before_fall - timedelta(minutes=30)).replace(tzinfo=None)
    return gap.isoformat(sep=" "), fold.isoformat(sep=" ")


@pytest.mark.parametrize("zone", ["Europe/Oslo", "America/Chicago"])
def test_gap_rejected_or_shifted(zone: str) -> None:
    gap, _ = _gap_and_fold_walls(zone)
    rejected = tsm.localize_wall_times(_wall(gap), zone, nonexistent="reject")
    assert rejected.status[0] == tsm.GAP_REJECTED and rejected.utc[0] == tsm.NAT
    shifted = tsm.localize_wall_times(_wall(gap), zone, nonexistent="shift_forward")
    assert shifted.status[0] == tsm.GAP_SHIFTED
    # read with the standard offset in force before the gap: instant = wall - offset
    (_, before, _), _ = _transitions(zone, 2026)
    expected = pd.Timestamp(gap).value - int(before.total_seconds() * 1e9)
    assert shifted.utc[0] == expected


@pytest.mark.parametrize("zone", ["Europe/Oslo", "America/Chicago"])
def test_fold_rules(zone: str) -> None:
    _, fold = _gap_and_fold_walls(zone)
    (_, _, _), (_, summer, winter) = _transitions(zone, 2026)
    wall_ns = pd.Timestamp(fold).value
    summer_instant = wall_ns - int(summer.total_seconds() * 1e9)
    winter_instant = wall_ns - int(winter.total_seconds() * 1e9)
    assert winter_instant - summer_instant == 3600 * 10**9
    early = tsm.localize_wall_times(_wall(fold), zone, ambiguous="earliest")
    late = tsm.localize_wall_times(_wall(fold), zone, ambiguous="latest")
    rej = tsm.localize_wall_times(_wall(fold), zone, ambiguous="reject")
    assert early.utc[0] == summer_instant and early.status[0] == tsm.AMBIGUOUS_RESOLVED
    assert late.utc[0] == winter_instant and late.status[0] == tsm.AMBIGUOUS_RESOLVED
    assert rej.utc[0] == tsm.NAT and rej.status[0] == tsm.AMBIGUOUS_REJECTED


def test_infer_uses_file_order_across_chunks() -> None:
    zone = "Europe/Oslo"
    state = tsm.FoldState()
    first = tsm.localize_wall_times(_wall("2026-10-25 02:30"), zone, fold_state=state)
    assert first.status[0] == tsm.AMBIGUOUS_FIRST
    assert first.utc[0] == _ns("2026-10-25T00:30Z")  # CEST, UTC+2
    assert state.seen_once(np.zeros(1, np.int64), _wall("2026-10-25 02:30"))[0]
    second = tsm.localize_wall_times(_wall("2026-10-25 02:30"), zone, fold_state=state)
    assert second.status[0] == tsm.AMBIGUOUS_RESOLVED
    assert second.utc[0] == _ns("2026-10-25T01:30Z")  # CET, UTC+1
    assert not state.seen_once(np.zeros(1, np.int64), _wall("2026-10-25 02:30"))[0]


def test_infer_counts_per_series() -> None:
    zone = "Europe/Oslo"
    walls = np.array([_ns("2026-10-25 02:30")] * 4, dtype=np.int64)
    series = np.array([0, 0, 1, 1])  # a tag-sorted long file: each tag's pair in turn
    out = tsm.localize_wall_times(walls, zone, series=series)
    assert list(out.utc) == [_ns("2026-10-25T00:30Z"), _ns("2026-10-25T01:30Z")] * 2


def test_ordinary_times_untouched() -> None:
    out = tsm.localize_wall_times(_wall("2026-07-01 12:00"), "Europe/Oslo")
    assert out.status[0] == tsm.OK and out.utc[0] == _ns("2026-07-01T10:00Z")


def test_parse_iso_and_strptime() -> None:
    text = pd.Series(["2026-03-29T01:30:00+01:00", "2026-03-29 00:30:00", "junk", None])
    parsed = tsm.parse_timestamps(text, "ISO8601")
    assert parsed[0] == _ns("2026-03-29T00:30Z") and parsed[1] == _ns("2026-03-29T00:30Z")
    assert parsed[2] == tsm.NAT and parsed[3] == tsm.NAT
    custom = tsm.parse_timestamps(pd.Series(["29.03.2026 01:30"]), "%d.%m.%Y %H:%M")
    assert custom[0] == _ns("2026-03-29T01:30Z")


def test_has_utc_offset() -> None:
    text = pd.Series(["2026-03-29T01:30:00Z", "2026-03-29T01:30:00+0100",
                      "2026-03-29T01:30:00-05:00", "2026-03-29T01:30:00", "2026-03-29"])
    assert list(tsm.has_utc_offset(text)) == [True, True, True, False, False]
