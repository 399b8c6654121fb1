"""Shared fixtures: a migrated database on SQLite and on PostgreSQL.

PostgreSQL tests use a schema of their own per test session (``hd_test_<pid>_<rand>``),
dropped at the end, so concurrent runs never collide. Without a reachable server they
skip with the reason; under ``CI=true`` a missing server fails the run instead.
"""

from __future__ import annotations

import os
import secrets
from collections.abc import Iterator
from pathlib import Path

import pytest
from sqlalchemy import Engine, text

from store.engine import drop_schema, make_engine
from store.migrate import upgrade
from store.models import Base

PG_URL = os.environ.get(
    "HYDRODRIFT_TEST_PG_URL", "postgresql+psycopg://postgres@127.0.0.1:5432/test"
)
TEST_DATA = Path(__file__).resolve().parent / "data"


def _pg_unavailable_reason() -> str | None:
    try:
        engine = make_engine(PG_URL)
        with engine.connect() as conn:
            conn.execute(text("SELECT 1"))
        engine.dispose()
    except Exception as exc:  # any failure to connect means: no server here
        return f"PostgreSQL not reachable at {PG_URL}: {type(exc).__name__}: {exc}"
    return None


@pytest.fixture(scope="session")
def pg_schema_engine() -> Iterator[Engine]:
    """An engine on a fresh, migrated PostgreSQL schema for this test session."""
    reason = _pg_unavailable_reason()
    if reason is not None:
        if os.environ.get("CI", "").lower() in ("1", "true", "yes"):
            pytest.fail(f"CI=true but {reason}", pytrace=False)
        pytest.skip(reason)
    schema = f"hd_test_{os.getpid()}_{secrets.token_hex(3)}"
    engine = make_engine(PG_URL, schema=schema)
    engine.info_schema = schema  # type: ignore[attr-defined]  # for subprocess tests
    upgrade(engine)
    try:
        yield engine
    finally:
        engine.dispose()
        drop_schema(make_engine(PG_URL), schema)


def _truncate_all(engine: Engine) -> None:
    tables = [t.name for t in reversed(Base.metadata.sorted_tables)]
    with engine.begin() as conn:
        if engine.dialect.name == "postgresql":
            conn.execute(text(f"TRUNCATE {', '.join(tables)} RESTART IDENTITY CASCADE"))
        else:
            for name in tables:
                conn.execute(text(f"DELETE FROM {name}"))


@pytest.fixture(params=["sqlite", "postgresql"])
def engine(request: pytest.FixtureRequest, tmp_path: Path) -> Iterator[Engine]:
    """A migrated, empty database; the same test runs once on each dialect."""
    if request.param == "sqlite":
        sqlite_engine = make_engine(f"sqlite:///{tmp_path / 'store.sqlite3'}")
        upgrade(sqlite_engine)
        yield sqlite_engine
        sqlite_engine.dispose()
    else:
        pg_engine: Engine = request.getfixturevalue("pg_schema_engine")
        _truncate_all(pg_engine)
        yield pg_engine


@pytest.fixture
def engine_env(engine: Engine, tmp_path: Path) -> dict[str, str]:
    """Environment for a ``hydrodrift`` subprocess that uses the same database as ``engine``."""
    env = {k: v for k, v in os.environ.items() if not k.startswith("HYDRODRIFT_")}
    env["HYDRODRIFT_DATA_DIR"] = str(tmp_path / "data")
    if engine.dialect.name == "sqlite":
        env["HYDRODRIFT_DATABASE_URL"] = engine.url.render_as_string(hide_password=False)
    else:
        env["HYDRODRIFT_DATABASE_URL"] = PG_URL
        env["HYDRODRIFT_DATABASE_SCHEMA"] = engine.info_schema  # type: ignore[attr-defined]
    return env
