"""Run the Alembic migrations from code (``hydrodrift db upgrade`` and at start-up)."""

from __future__ import annotations

from pathlib import Path

from alembic import command
from alembic.config import Config
from alembic.runtime.migration import MigrationContext
from alembic.script import ScriptDirectory
from sqlalchemy import Engine

MIGRATIONS_DIR = Path(__file__).resolve().parent / "migrations"


def alembic_config(engine: Engine) -> Config:
    """An Alembic config that runs against ``engine`` (no ini file needed)."""
    config = Config()
    config.set_main_option("script_location", str(MIGRATIONS_DIR))
    config.attributes["engine"] = engine
    return config


def upgrade(engine: Engine, revision: str = "head") -> None:
    """Bring the schema to ``revision`` (default: the newest)."""
    command.upgrade(alembic_config(engine), revision)


def current_revision(engine: Engine) -> str | None:
    """The schema's revision, or None for an empty database."""
    with engine.connect() as conn:
        return MigrationContext.configure(conn).get_current_revision()


def head_revision() -> str | None:
    """The newest revision shipped with this code."""
    return ScriptDirectory(str(MIGRATIONS_DIR)).get_current_head()


def ensure_schema(engine: Engine) -> None:
    """Upgrade when the database is behind this code; do nothing when current."""
    if current_revision(engine) != head_revision():
        upgrade(engine)
