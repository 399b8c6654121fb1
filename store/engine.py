"""Engine and session set-up for SQLite (embedded default) and PostgreSQL."""

from __future__ import annotations

import re
from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path
from typing import Any

from sqlalchemy import Engine, create_engine, event, text
from sqlalchemy.engine import make_url
from sqlalchemy.orm import Session, sessionmaker

_SCHEMA_NAME = re.compile(r"^[a-z_][a-z0-9_]{0,62}$")


def make_engine(url: str, *, schema: str | None = None, echo: bool = False) -> Engine:
    """Create the engine for ``url``.

    SQLite gets WAL journaling (readers never block the one writer), foreign keys and a
    busy timeout; its folder is created. PostgreSQL gets ``search_path`` set to
    ``schema`` when one is given (tests and benchmarks use a schema of their own), and
    the schema is created if missing.
    """
    parsed = make_url(url)
    kwargs: dict[str, Any] = {"echo": echo, "future": True}
    if parsed.get_backend_name() == "sqlite":
        if parsed.database and parsed.database != ":memory:":
            Path(parsed.database).parent.mkdir(parents=True, exist_ok=True)
        kwargs["connect_args"] = {"timeout": 30}
        engine = create_engine(url, **kwargs)
        event.listen(engine, "connect", _sqlite_pragmas)
        return engine
    if parsed.get_backend_name() == "postgresql":
        if schema is not None:
            if not _SCHEMA_NAME.match(schema):
                raise ValueError(
                    f"schema name {schema!r}: expected lower-case letters, digits, underscore"
                )
            kwargs["connect_args"] = {"options": f"-csearch_path={schema}"}
        kwargs["pool_pre_ping"] = True
        engine = create_engine(url, **kwargs)
        if schema is not None:
            with engine.begin() as conn:
                conn.execute(text(f'CREATE SCHEMA IF NOT EXISTS "{schema}"'))
        return engine
    raise ValueError(
        f"database URL {parsed.render_as_string(hide_password=True)!r}: expected "
        "sqlite:///PATH or postgresql+psycopg://USER@HOST/DB"
    )


def _sqlite_pragmas(dbapi_connection: Any, _record: Any) -> None:
    cursor = dbapi_connection.cursor()
    cursor.execute("PRAGMA journal_mode=WAL")
    cursor.execute("PRAGMA synchronous=NORMAL")
    cursor.execute("PRAGMA foreign_keys=ON")
    cursor.execute("PRAGMA busy_timeout=30000")
    cursor.close()


def session_factory(engine: Engine) -> sessionmaker[Session]:
    """A session factory bound to ``engine`` (objects stay usable after commit)."""
    return sessionmaker(engine, expire_on_commit=False)


@contextmanager
def session_scope(engine: Engine) -> Iterator[Session]:
    """A session in one transaction: committed on success, rolled back on any error."""
    with session_factory(engine)() as session, session.begin():
        yield session


def drop_schema(engine: Engine, schema: str) -> None:
    """Drop a PostgreSQL schema and all it holds (tests and benchmarks clean up with it)."""
    if not _SCHEMA_NAME.match(schema):
        raise ValueError(f"schema name {schema!r}: expected lower-case letters, digits, _")
    with engine.begin() as conn:
        conn.execute(text(f'DROP SCHEMA IF EXISTS "{schema}" CASCADE'))
