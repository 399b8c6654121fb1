"""Service settings, read from the environment (prefix ``HYDRODRIFT_``) or a ``.env`` file.

Nothing here is read at import time: call :func:`get_settings` when the process starts.
"""

from __future__ import annotations

from functools import lru_cache
from pathlib import Path

from pydantic import Field, field_validator
from pydantic_settings import BaseSettings, SettingsConfigDict


class Settings(BaseSettings):
    """Every setting of the service, with its default.

    The defaults run the embedded setup: a SQLite file under ``data_dir``. Set
    ``HYDRODRIFT_DATABASE_URL=postgresql+psycopg://user@host/db`` for PostgreSQL.
    """

    model_config = SettingsConfigDict(
        env_prefix="HYDRODRIFT_", env_file=".env", env_file_encoding="utf-8", extra="ignore"
    )

    data_dir: Path = Field(
        default=Path("data"), description="Folder for the embedded database, quarantine, demo."
    )
    database_url: str = Field(
        default="",
        description="SQLAlchemy URL; empty means sqlite:///<data_dir>/hydrodrift.sqlite3.",
    )
    database_schema: str | None = Field(
        default=None,
        description="PostgreSQL schema to use (tests give each run its own); None = default.",
    )
    quarantine_bad_row_fraction: float = Field(
        default=0.05,
        ge=0.0,
        le=1.0,
        description="A file whose rejected rows exceed this fraction of its rows is quarantined.",
    )
    quarantine_min_bad_rows: int = Field(
        default=10,
        ge=0,
        description="A file is never quarantined for fewer rejected rows than this.",
    )
    ingest_chunk_rows: int = Field(
        default=200_000, ge=1_000, description="Rows read, checked and loaded per chunk."
    )
    stable_seconds: float = Field(
        default=5.0,
        ge=0.0,
        description="Drop folder: a file is read only after size and mtime held this long.",
    )
    marker_suffix: str = Field(
        default=".ready",
        description="Drop folder: a 0-byte file NAME+suffix marks NAME as complete.",
    )
    http_retries: int = Field(default=4, ge=0, description="HTTP pull: retries after a failure.")
    http_backoff_s: float = Field(
        default=1.0, ge=0.0, description="HTTP pull: first backoff, doubled per retry."
    )
    energy_price: float = Field(
        default=60.0, ge=0.0, description="Price of lost energy, per MWh, in `currency`."
    )
    currency: str = Field(default="EUR", min_length=1, max_length=8)
    baseline_days: float = Field(
        default=28.0, gt=0.0,
        description="Index constant: days of steady windows, from the first one of a "
        "reference epoch, over which the index efficiency is matched to the reference.",
    )
    baseline_min_hours: float = Field(
        default=24.0, gt=0.0,
        description="Index constant: fewest steady hours the baseline needs; it is extended "
        "week by week until it has them.",
    )
    bootstrap_resamples: int = Field(
        default=1000, ge=100, description="Weekly drift: bootstrap resamples of the median."
    )
    confidence: float = Field(
        default=0.90, gt=0.5, lt=1.0, description="Weekly drift: level of the intervals."
    )
    episode_open_windows: int = Field(
        default=3, ge=1, description="Alerts: flagged windows of one signature that open an "
        "episode."
    )
    episode_quiet_hours: float = Field(
        default=6.0, gt=0.0, description="Alerts: an episode closes after this long without "
        "a flagged window of its signature (hysteresis)."
    )
    webhook_urls: list[str] = Field(
        default_factory=list, description="Alerts: webhook receivers (JSON list in the env)."
    )
    webhook_secret: str | None = Field(
        default=None, description="Alerts: HMAC-SHA256 key of the webhook signature header."
    )
    delivery_max_attempts: int = Field(
        default=8, ge=1, description="Alerts: attempts before a message is a dead letter."
    )
    delivery_backoff_s: float = Field(
        default=2.0, gt=0.0, description="Alerts: first retry delay, doubled per attempt "
        "(with jitter)."
    )
    delivery_backoff_max_s: float = Field(
        default=900.0, gt=0.0, description="Alerts: longest retry delay."
    )
    delivery_timeout_s: float = Field(
        default=10.0, gt=0.0, description="Alerts: timeout of one delivery attempt."
    )
    mqtt_host: str | None = Field(default=None, description="Alerts: MQTT broker host.")
    mqtt_port: int = Field(default=1883, ge=1, le=65535)
    mqtt_topic: str = Field(default="hydrodrift/alerts",
                            description="Alerts: MQTT topic prefix (…/PLANT/UNIT).")

    @field_validator("data_dir")
    @classmethod
    def _expand(cls, value: Path) -> Path:
        return value.expanduser()

    @property
    def effective_database_url(self) -> str:
        """The database URL in force: the configured one or the embedded SQLite file."""
        if self.database_url:
            return self.database_url
        return f"sqlite:///{(self.data_dir / 'hydrodrift.sqlite3').resolve()}"

    @property
    def quarantine_dir(self) -> Path:
        """Where quarantined files are copied, named by their content hash."""
        return self.data_dir / "quarantine"


@lru_cache(maxsize=1)
def get_settings() -> Settings:
    """The process's settings, read once on first call."""
    return Settings()
