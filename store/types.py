"""Column types shared by the models."""

from __future__ import annotations

from datetime import UTC, datetime

from sqlalchemy import BigInteger, DateTime
from sqlalchemy.engine import Dialect
from sqlalchemy.types import TypeDecorator, TypeEngine

_EPOCH = datetime(1970, 1, 1, tzinfo=UTC)


def to_epoch_us(value: datetime) -> int:
    """Microseconds since 1970-01-01 UTC of an aware datetime."""
    if value.tzinfo is None:
        raise ValueError(f"naive datetime {value!r}: the store keeps UTC, give a timezone")
    delta = value - _EPOCH
    return (delta.days * 86_400 + delta.seconds) * 1_000_000 + delta.microseconds


def from_epoch_us(value: int) -> datetime:
    """The aware UTC datetime of microseconds since the epoch."""
    seconds, micros = divmod(int(value), 1_000_000)
    return datetime.fromtimestamp(seconds, tz=UTC).replace(microsecond=micros)


class UtcDateTime(TypeDecorator[datetime]):
    """An instant in UTC.

    PostgreSQL keeps it as ``timestamp with time zone``; SQLite, which has no time type,
    as an integer count of microseconds since the epoch (compact, exact, and sortable,
    and what the SQLite bulk path writes directly). Naive datetimes are refused: every
    timestamp in the store is UTC, and a naive one is a bug at the caller.
    """

    impl = DateTime(timezone=True)
    cache_ok = True

    def load_dialect_impl(self, dialect: Dialect) -> TypeEngine[object]:
        if dialect.name == "sqlite":
            return dialect.type_descriptor(BigInteger())
        return dialect.type_descriptor(DateTime(timezone=True))

    def process_bind_param(self, value: datetime | None, dialect: Dialect) -> object:
        if value is None:
            return None
        if value.tzinfo is None:
            raise ValueError(f"naive datetime {value!r}: the store keeps UTC, give a timezone")
        if dialect.name == "sqlite":
            return to_epoch_us(value)
        return value.astimezone(UTC)

    def process_result_value(self, value: object, dialect: Dialect) -> datetime | None:
        if value is None:
            return None
        if dialect.name == "sqlite":
            return from_epoch_us(int(value))  # type: ignore[arg-type]
        assert isinstance(value, datetime)
        return value.astimezone(UTC)
