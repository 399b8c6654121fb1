"""SQLAlchemy 2 models of the store.

Configuration is append-only: a plant or unit changes by a new row in
``plant_config_versions`` / ``unit_config_versions`` with its ``effective_from`` instant,
so results computed against an old configuration can always name it.
"""

from __future__ import annotations

from datetime import UTC, datetime
from typing import Any

from sqlalchemy import (
    JSON,
    BigInteger,
    Boolean,
    Float,
    ForeignKey,
    Integer,
    LargeBinary,
    String,
    Text,
    UniqueConstraint,
)
from sqlalchemy.dialects.postgresql import JSONB
from sqlalchemy.orm import DeclarativeBase, Mapped, mapped_column, relationship

from store.signals import SIGNAL_NAMES
from store.types import UtcDateTime

JsonType = JSON().with_variant(JSONB(), "postgresql")


def utc_now() -> datetime:
    """The current instant, aware, in UTC."""
    return datetime.now(UTC)


class Base(DeclarativeBase):
    """Declarative base of every model."""


class Plant(Base):
    """A power plant: its site (for gravity, air pressure, local weeks) and its units."""

    __tablename__ = "plants"

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    code: Mapped[str] = mapped_column(String(32), unique=True)
    name: Mapped[str] = mapped_column(String(200))
    latitude_deg: Mapped[float] = mapped_column(Float)
    elevation_m: Mapped[float] = mapped_column(Float)
    timezone: Mapped[str] = mapped_column(String(64))
    created_at: Mapped[datetime] = mapped_column(UtcDateTime, default=utc_now)

    units: Mapped[list[Unit]] = relationship(back_populates="plant", order_by="Unit.code")
    config_versions: Mapped[list[PlantConfigVersion]] = relationship(
        back_populates="plant", order_by="PlantConfigVersion.version"
    )


class PlantConfigVersion(Base):
    """One imported version of a plant's site data, export format and tag map."""

    __tablename__ = "plant_config_versions"
    __table_args__ = (UniqueConstraint("plant_id", "version"),)

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    plant_id: Mapped[int] = mapped_column(ForeignKey("plants.id"), index=True)
    version: Mapped[int] = mapped_column(Integer)
    effective_from: Mapped[datetime] = mapped_column(UtcDateTime)
    imported_at: Mapped[datetime] = mapped_column(UtcDateTime, default=utc_now)
    source_path: Mapped[str] = mapped_column(Text)
    content_sha256: Mapped[str] = mapped_column(String(64))
    config: Mapped[dict[str, Any]] = mapped_column(JsonType)

    plant: Mapped[Plant] = relationship(back_populates="config_versions")


class Unit(Base):
    """A turbine-generator unit of a plant."""

    __tablename__ = "units"
    __table_args__ = (UniqueConstraint("plant_id", "code"),)

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    plant_id: Mapped[int] = mapped_column(ForeignKey("plants.id"), index=True)
    code: Mapped[str] = mapped_column(String(32))
    runner_type: Mapped[str] = mapped_column(String(16))
    created_at: Mapped[datetime] = mapped_column(UtcDateTime, default=utc_now)

    plant: Mapped[Plant] = relationship(back_populates="units")
    config_versions: Mapped[list[UnitConfigVersion]] = relationship(
        back_populates="unit", order_by="UnitConfigVersion.version"
    )


class UnitConfigVersion(Base):
    """One version of a unit's configuration (ratings, geometry, reference data), in SI."""

    __tablename__ = "unit_config_versions"
    __table_args__ = (UniqueConstraint("unit_id", "version"),)

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    unit_id: Mapped[int] = mapped_column(ForeignKey("units.id"), index=True)
    version: Mapped[int] = mapped_column(Integer)
    effective_from: Mapped[datetime] = mapped_column(UtcDateTime)
    imported_at: Mapped[datetime] = mapped_column(UtcDateTime, default=utc_now)
    content_sha256: Mapped[str] = mapped_column(String(64))
    config: Mapped[dict[str, Any]] = mapped_column(JsonType)

    unit: Mapped[Unit] = relationship(back_populates="config_versions")


class IngestedFile(Base):
    """One export file seen by ingestion, known by its content hash."""

    __tablename__ = "ingested_files"

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    sha256: Mapped[str] = mapped_column(String(64), unique=True)
    source: Mapped[str] = mapped_column(Text)
    filename: Mapped[str] = mapped_column(Text)
    size_bytes: Mapped[int] = mapped_column(BigInteger)
    plant_id: Mapped[int | None] = mapped_column(ForeignKey("plants.id"), nullable=True)
    plant_config_version: Mapped[int | None] = mapped_column(Integer, nullable=True)
    status: Mapped[str] = mapped_column(String(16))  # loaded | empty | quarantined
    rows_total: Mapped[int] = mapped_column(Integer, default=0)
    rows_new: Mapped[int] = mapped_column(Integer, default=0)
    rows_unchanged: Mapped[int] = mapped_column(Integer, default=0)
    rows_revised: Mapped[int] = mapped_column(Integer, default=0)
    rows_rejected: Mapped[int] = mapped_column(Integer, default=0)
    rows_flagged: Mapped[int] = mapped_column(Integer, default=0)
    first_ts: Mapped[datetime | None] = mapped_column(UtcDateTime, nullable=True)
    last_ts: Mapped[datetime | None] = mapped_column(UtcDateTime, nullable=True)
    report: Mapped[dict[str, Any]] = mapped_column(JsonType, default=dict)
    started_at: Mapped[datetime] = mapped_column(UtcDateTime, default=utc_now)
    finished_at: Mapped[datetime | None] = mapped_column(UtcDateTime, nullable=True)
    code_version: Mapped[str] = mapped_column(String(40))


class QuarantinedFile(Base):
    """A file held back whole because too much of it was unreadable; kept for review."""

    __tablename__ = "quarantined_files"

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    ingested_file_id: Mapped[int] = mapped_column(ForeignKey("ingested_files.id"), unique=True)
    sha256: Mapped[str] = mapped_column(String(64))
    original_path: Mapped[str] = mapped_column(Text)
    stored_path: Mapped[str] = mapped_column(Text)
    reason: Mapped[str] = mapped_column(Text)
    quarantined_at: Mapped[datetime] = mapped_column(UtcDateTime, default=utc_now)
    released_at: Mapped[datetime | None] = mapped_column(UtcDateTime, nullable=True)


def _sample_columns() -> dict[str, Any]:
    columns: dict[str, Any] = {
        "__tablename__": "samples",
        # SQLite: a clustered (unit_id, ts) key; range scans by unit and time read in order.
        "__table_args__": {"sqlite_with_rowid": False},
        "__doc__": (
            "Plant data, wide: one row per unit and UTC instant, canonical signals in SI.\n\n"
            "``quality`` holds :class:`store.signals.Quality` bits; ``flagged_signals`` one "
            "bit per signal in the order of :data:`store.signals.SIGNALS`."
        ),
        # No foreign key to units on purpose: on PostgreSQL it cost more than the COPY
        # itself (bench/ingest.py). store.bulk.load_samples checks the unit ids of every
        # load against `units` in one query, and units are never deleted.
        "unit_id": mapped_column(Integer, primary_key=True),
        "ts": mapped_column(UtcDateTime, primary_key=True),
        "quality": mapped_column(Integer, default=0, nullable=False),
        "flagged_signals": mapped_column(BigInteger, default=0, nullable=False),
        "source_file_id": mapped_column(Integer, nullable=True),
        "__annotations__": {
            "unit_id": Mapped[int],
            "ts": Mapped[datetime],
            "quality": Mapped[int],
            "flagged_signals": Mapped[int],
            "source_file_id": Mapped[int | None],
        },
    }
    for name in SIGNAL_NAMES:
        columns[name] = mapped_column(Float, nullable=True)
        columns["__annotations__"][name] = Mapped[float | None]
    return columns


Sample = type("Sample", (Base,), _sample_columns())


class ReferenceModel(Base):
    """A calibrated reference of one unit: model coefficients, hill chart, index constant.

    Versioned per unit and never rewritten in its physics: a new unit configuration (a
    refurbishment, new acceptance tests) makes a new version, and results computed against
    an old version keep naming it. The index constant is the one field set after creation,
    once, when the baseline period of the epoch has been computed (IEC 60041 index method).
    """

    __tablename__ = "reference_models"
    __table_args__ = (UniqueConstraint("unit_id", "version"),)

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    unit_id: Mapped[int] = mapped_column(ForeignKey("units.id"), index=True)
    version: Mapped[int] = mapped_column(Integer)
    unit_config_version: Mapped[int] = mapped_column(Integer)
    effective_from: Mapped[datetime] = mapped_column(UtcDateTime)
    runner_type: Mapped[str] = mapped_column(String(16))
    coefficients: Mapped[dict[str, Any]] = mapped_column(JsonType)
    calibration: Mapped[dict[str, Any]] = mapped_column(JsonType)
    hill_chart: Mapped[dict[str, Any]] = mapped_column(JsonType)
    best_efficiency_point: Mapped[dict[str, Any]] = mapped_column(JsonType)
    flow_basis: Mapped[str] = mapped_column(String(24))  # flow_meter | winter_kennedy
    baseline_start: Mapped[datetime | None] = mapped_column(UtcDateTime, nullable=True)
    baseline_end: Mapped[datetime | None] = mapped_column(UtcDateTime, nullable=True)
    index_constant: Mapped[float | None] = mapped_column(Float, nullable=True)
    index_constant_detail: Mapped[dict[str, Any]] = mapped_column(JsonType, default=dict)
    code_version: Mapped[str] = mapped_column(String(40))
    created_at: Mapped[datetime] = mapped_column(UtcDateTime, default=utc_now)


class EfficiencyWindow(Base):
    """One clock-aligned window of a unit: averages, steady verdict, efficiency, deviation.

    Every window with samples is kept (steady or not) because the week's generated energy
    counts all of them; efficiency and deviation are set only for steady windows.
    Efficiencies are fractions; ``deviation`` = eta_index - eta_ref (0.01 = one point).
    """

    __tablename__ = "efficiency_windows"

    unit_id: Mapped[int] = mapped_column(Integer, primary_key=True)
    start: Mapped[datetime] = mapped_column(UtcDateTime, primary_key=True)
    duration_s: Mapped[float] = mapped_column(Float)
    n_samples: Mapped[int] = mapped_column(Integer)
    steady: Mapped[bool] = mapped_column(Boolean)
    unsteady_reasons: Mapped[int] = mapped_column(Integer, default=0)
    energy_j: Mapped[float] = mapped_column(Float)
    generator_power: Mapped[float | None] = mapped_column(Float, nullable=True)
    net_head: Mapped[float | None] = mapped_column(Float, nullable=True)
    flow: Mapped[float | None] = mapped_column(Float, nullable=True)
    opening: Mapped[float | None] = mapped_column(Float, nullable=True)
    blade_angle: Mapped[float | None] = mapped_column(Float, nullable=True)
    water_temperature: Mapped[float | None] = mapped_column(Float, nullable=True)
    water_density: Mapped[float | None] = mapped_column(Float, nullable=True)
    generator_efficiency: Mapped[float | None] = mapped_column(Float, nullable=True)
    eta_index_raw: Mapped[float | None] = mapped_column(Float, nullable=True)
    eta_index: Mapped[float | None] = mapped_column(Float, nullable=True)
    eta_reference: Mapped[float | None] = mapped_column(Float, nullable=True)
    deviation: Mapped[float | None] = mapped_column(Float, nullable=True)
    relative_loss: Mapped[float | None] = mapped_column(Float, nullable=True)
    reference_model_id: Mapped[int | None] = mapped_column(Integer, nullable=True)
    code_version: Mapped[str] = mapped_column(String(40))
    # condition signals, window means in SI (issue 4): for signatures and the detector
    tailwater_level: Mapped[float | None] = mapped_column(Float, nullable=True)
    draft_tube_pressure: Mapped[float | None] = mapped_column(Float, nullable=True)
    draft_tube_pulsation: Mapped[float | None] = mapped_column(Float, nullable=True)
    shaft_vibration: Mapped[float | None] = mapped_column(Float, nullable=True)
    bearing_vibration: Mapped[float | None] = mapped_column(Float, nullable=True)
    hf_vibration: Mapped[float | None] = mapped_column(Float, nullable=True)
    guide_bearing_temperature: Mapped[float | None] = mapped_column(Float, nullable=True)
    thrust_bearing_temperature: Mapped[float | None] = mapped_column(Float, nullable=True)
    cooling_water_temperature: Mapped[float | None] = mapped_column(Float, nullable=True)
    sigma_plant: Mapped[float | None] = mapped_column(Float, nullable=True)
    sigma_margin: Mapped[float | None] = mapped_column(Float, nullable=True)


class WeeklyDrift(Base):
    """A unit's ISO week (in the plant's time zone): drift level, trend, change, lost energy.

    Fractions for deviations and losses (0.01 = one point), points per year for the trend,
    MWh for energy, the configured currency for money.
    """

    __tablename__ = "weekly_drift"

    unit_id: Mapped[int] = mapped_column(Integer, primary_key=True)
    week: Mapped[str] = mapped_column(String(8), primary_key=True)  # 'YYYY-Www'
    week_start: Mapped[datetime] = mapped_column(UtcDateTime)
    n_windows: Mapped[int] = mapped_column(Integer)
    steady_hours: Mapped[float] = mapped_column(Float)
    running_hours: Mapped[float] = mapped_column(Float)
    generated_mwh: Mapped[float] = mapped_column(Float)
    deviation_median: Mapped[float | None] = mapped_column(Float, nullable=True)
    deviation_low: Mapped[float | None] = mapped_column(Float, nullable=True)
    deviation_high: Mapped[float | None] = mapped_column(Float, nullable=True)
    loss_median: Mapped[float | None] = mapped_column(Float, nullable=True)
    loss_low: Mapped[float | None] = mapped_column(Float, nullable=True)
    loss_high: Mapped[float | None] = mapped_column(Float, nullable=True)
    trend_points_per_year: Mapped[float | None] = mapped_column(Float, nullable=True)
    trend_low: Mapped[float | None] = mapped_column(Float, nullable=True)
    trend_high: Mapped[float | None] = mapped_column(Float, nullable=True)
    change_point_week: Mapped[str | None] = mapped_column(String(8), nullable=True)
    change_point_size: Mapped[float | None] = mapped_column(Float, nullable=True)
    lost_mwh: Mapped[float | None] = mapped_column(Float, nullable=True)
    lost_mwh_low: Mapped[float | None] = mapped_column(Float, nullable=True)
    lost_mwh_high: Mapped[float | None] = mapped_column(Float, nullable=True)
    cumulative_lost_mwh: Mapped[float | None] = mapped_column(Float, nullable=True)
    energy_price: Mapped[float] = mapped_column(Float)
    currency: Mapped[str] = mapped_column(String(8))
    reference_model_id: Mapped[int] = mapped_column(Integer)
    code_version: Mapped[str] = mapped_column(String(40))
    computed_at: Mapped[datetime] = mapped_column(UtcDateTime, default=utc_now)


class ComputedFile(Base):
    """An ingested file whose samples ``hydrodrift compute`` has processed."""

    __tablename__ = "computed_files"

    ingested_file_id: Mapped[int] = mapped_column(ForeignKey("ingested_files.id"),
                                                  primary_key=True)
    computed_at: Mapped[datetime] = mapped_column(UtcDateTime, default=utc_now)
    code_version: Mapped[str] = mapped_column(String(40))


class DetectorModel(Base):
    """A trained anomaly detector of one unit: versioned, never rewritten.

    ``blob`` holds the fitted estimator (joblib); ``features`` its ordered feature names;
    ``baseline`` per-feature location and scale of the training windows (for explanations).
    """

    __tablename__ = "detector_models"
    __table_args__ = (UniqueConstraint("unit_id", "version"),)

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    unit_id: Mapped[int] = mapped_column(ForeignKey("units.id"), index=True)
    version: Mapped[int] = mapped_column(Integer)
    trained_from: Mapped[datetime] = mapped_column(UtcDateTime)
    trained_to: Mapped[datetime] = mapped_column(UtcDateTime)
    n_windows: Mapped[int] = mapped_column(Integer)
    features: Mapped[list[str]] = mapped_column(JsonType)
    params: Mapped[dict[str, Any]] = mapped_column(JsonType)
    threshold: Mapped[float] = mapped_column(Float)
    baseline: Mapped[dict[str, Any]] = mapped_column(JsonType)
    blob: Mapped[bytes] = mapped_column(LargeBinary)
    code_version: Mapped[str] = mapped_column(String(40))
    created_at: Mapped[datetime] = mapped_column(UtcDateTime, default=utc_now)


class WindowScore(Base):
    """A detector's verdict on one steady window (kept per detector version)."""

    __tablename__ = "window_scores"

    unit_id: Mapped[int] = mapped_column(Integer, primary_key=True)
    start: Mapped[datetime] = mapped_column(UtcDateTime, primary_key=True)
    detector_model_id: Mapped[int] = mapped_column(Integer, primary_key=True)
    score: Mapped[float] = mapped_column(Float)
    flagged: Mapped[bool] = mapped_column(Boolean)
    signature: Mapped[str | None] = mapped_column(String(24), nullable=True)
    explanation: Mapped[dict[str, Any]] = mapped_column(JsonType, default=dict)


class AlertEpisode(Base):
    """One episode of a signature on a unit: opens, updates, closes after a quiet period.

    ``status``: open | acknowledged | closed | resolved. At most one episode per unit and
    signature is not closed/resolved at any time.
    """

    __tablename__ = "alert_episodes"

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    unit_id: Mapped[int] = mapped_column(ForeignKey("units.id"), index=True)
    signature: Mapped[str] = mapped_column(String(24))
    severity: Mapped[str] = mapped_column(String(16))  # info | warning | critical
    status: Mapped[str] = mapped_column(String(16))
    opened_at: Mapped[datetime] = mapped_column(UtcDateTime)
    updated_at: Mapped[datetime] = mapped_column(UtcDateTime)
    closed_at: Mapped[datetime | None] = mapped_column(UtcDateTime, nullable=True)
    first_window: Mapped[datetime] = mapped_column(UtcDateTime)
    last_window: Mapped[datetime] = mapped_column(UtcDateTime)
    n_windows: Mapped[int] = mapped_column(Integer)
    peak: Mapped[float] = mapped_column(Float)
    summary: Mapped[dict[str, Any]] = mapped_column(JsonType, default=dict)
    acknowledged_by: Mapped[str | None] = mapped_column(String(120), nullable=True)
    acknowledged_at: Mapped[datetime | None] = mapped_column(UtcDateTime, nullable=True)
    resolved_by: Mapped[str | None] = mapped_column(String(120), nullable=True)
    resolved_at: Mapped[datetime | None] = mapped_column(UtcDateTime, nullable=True)
    note: Mapped[str | None] = mapped_column(Text, nullable=True)


class OutboxMessage(Base):
    """A message to deliver to one channel target, written in the transaction of its event.

    ``channel``: webhook | mqtt; ``status``: pending | delivered | dead. ``idempotency_key``
    is sent with every attempt so receivers can drop repeats (at-least-once delivery).
    """

    __tablename__ = "outbox"

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    idempotency_key: Mapped[str] = mapped_column(String(64), unique=True)
    episode_id: Mapped[int | None] = mapped_column(Integer, nullable=True, index=True)
    event: Mapped[str] = mapped_column(String(32))
    channel: Mapped[str] = mapped_column(String(16))
    target: Mapped[str] = mapped_column(Text)
    payload: Mapped[dict[str, Any]] = mapped_column(JsonType)
    status: Mapped[str] = mapped_column(String(16), index=True)
    attempts: Mapped[int] = mapped_column(Integer, default=0)
    next_attempt_at: Mapped[datetime] = mapped_column(UtcDateTime)
    last_error: Mapped[str | None] = mapped_column(Text, nullable=True)
    created_at: Mapped[datetime] = mapped_column(UtcDateTime, default=utc_now)
    delivered_at: Mapped[datetime | None] = mapped_column(UtcDateTime, nullable=True)
