"""Alembic environment: runs against the engine handed over by :mod:`store.migrate`."""

from __future__ import annotations

from alembic import context

from store.models import Base

config = context.config
target_metadata = Base.metadata


def run_migrations_online() -> None:
    engine = config.attributes.get("engine")
    if engine is None:
        from hydrodrift.settings import get_settings
        from store.engine import make_engine

        settings = get_settings()
        engine = make_engine(settings.effective_database_url, schema=settings.database_schema)
    with engine.begin() as connection:
        context.configure(
            connection=connection,
            target_metadata=target_metadata,
            render_as_batch=connection.dialect.name == "sqlite",
            compare_type=True,
        )
        context.run_migrations()


run_migrations_online()
