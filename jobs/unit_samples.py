"""Read a unit's samples from the store as SI arrays, with flagged cells blanked out."""

from __future__ import annotations

from datetime import datetime

import numpy as np
import pandas as pd
from sqlalchemy import Connection, select

from store.models import Sample
from store.signals import SIGNAL_BIT

#: Signals the efficiency computation reads.
COMPUTE_SIGNALS: tuple[str, ...] = (
    "active_power", "headwater_level", "tailwater_level", "wk_differential_pressure",
    "flow_rate", "gate_opening", "blade_angle", "rotational_speed", "water_temperature",
    # condition signals, averaged per window for the signatures and the detector
    "draft_tube_pressure", "draft_tube_pulsation", "shaft_vibration", "bearing_vibration",
    "hf_vibration", "guide_bearing_temperature", "thrust_bearing_temperature",
    "cooling_water_temperature",
)

#: Condition signals kept as window means (same names in efficiency_windows).
CONDITION_SIGNALS: tuple[str, ...] = COMPUTE_SIGNALS[9:]


def read_unit_samples(conn: Connection, unit_id: int, start: datetime, end: datetime,
                      signals: tuple[str, ...] = COMPUTE_SIGNALS) -> pd.DataFrame:
    """Samples of ``unit_id`` with ``start <= ts < end``, sorted by time.

    Returns a frame with ``ts_us`` (int64 UTC epoch microseconds) and one float column per
    signal in SI; a cell that ingestion flagged (range, sentinel, stuck, spike, source
    quality, not-a-number) is NaN here, so no flagged value reaches an efficiency.
    """
    columns = [getattr(Sample, name) for name in signals]
    rows = conn.execute(
        select(Sample.ts, Sample.flagged_signals, *columns)
        .where(Sample.unit_id == unit_id, Sample.ts >= start, Sample.ts < end)
        .order_by(Sample.ts)
    ).all()
    frame = pd.DataFrame(rows, columns=["ts", "flagged", *signals])
    if frame.empty:
        frame["ts_us"] = pd.Series(dtype="int64")
        return frame.drop(columns=["ts", "flagged"])
    ts = pd.to_datetime(frame.pop("ts"), utc=True)
    frame.insert(0, "ts_us", ts.astype("datetime64[us, UTC]").astype("int64"))
    flagged = frame.pop("flagged").to_numpy(dtype=np.int64)
    for name in signals:
        values = frame[name].to_numpy(dtype=float, na_value=np.nan)
        bad = (flagged & SIGNAL_BIT[name]) != 0
        frame[name] = np.where(bad, np.nan, values)
    return frame

