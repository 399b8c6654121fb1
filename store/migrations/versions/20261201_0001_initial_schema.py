"""initial schema

Revision ID: 20261201_0001
Revises: (none)
Create Date: 2026-12-01 22:12:45.344072
"""

from __future__ import annotations

import sqlalchemy as sa
from alembic import op
from sqlalchemy.dialects import postgresql

from store.types import UtcDateTime

revision = "20261201_0001"
down_revision = None
branch_labels = None
depends_on = None


def upgrade() -> None:

    op.create_table(
        "plants",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("code", sa.String(length=32), nullable=False),
        sa.Column("name", sa.String(length=200), nullable=False),
        sa.Column("latitude_deg", sa.Float(), nullable=False),
        sa.Column("elevation_m", sa.Float(), nullable=False),
        sa.Column("timezone", sa.String(length=64), nullable=False),
        sa.Column("created_at", UtcDateTime(), nullable=False),
        sa.PrimaryKeyConstraint("id"),
        sa.UniqueConstraint("code"),
    )
    op.create_table(
        "ingested_files",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("sha256", sa.String(length=64), nullable=False),
        sa.Column("source", sa.Text(), nullable=False),
        sa.Column("filename", sa.Text(), nullable=False),
        sa.Column("size_bytes", sa.BigInteger(), nullable=False),
        sa.Column("plant_id", sa.Integer(), nullable=True),
        sa.Column("plant_config_version", sa.Integer(), nullable=True),
        sa.Column("status", sa.String(length=16), nullable=False),
        sa.Column("rows_total", sa.Integer(), nullable=False),
        sa.Column("rows_new", sa.Integer(), nullable=False),
        sa.Column("rows_unchanged", sa.Integer(), nullable=False),
        sa.Column("rows_revised", sa.Integer(), nullable=False),
        sa.Column("rows_rejected", sa.Integer(), nullable=False),
        sa.Column("rows_flagged", sa.Integer(), nullable=False),
        sa.Column("first_ts", UtcDateTime(), nullable=True),
        sa.Column("last_ts", UtcDateTime(), nullable=True),
        sa.Column(
            "report",
            sa.JSON().with_variant(postgresql.JSONB(astext_type=sa.Text()), "postgresql"),
            nullable=False,
        ),
        sa.Column("started_at", UtcDateTime(), nullable=False),
        sa.Column("finished_at", UtcDateTime(), nullable=True),
        sa.Column("code_version", sa.String(length=40), nullable=False),
        sa.ForeignKeyConstraint(
            ["plant_id"],
            ["plants.id"],
        ),
        sa.PrimaryKeyConstraint("id"),
        sa.UniqueConstraint("sha256"),
    )
    op.create_table(
        "plant_config_versions",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("plant_id", sa.Integer(), nullable=False),
        sa.Column("version", sa.Integer(), nullable=False),
        sa.Column("effective_from", UtcDateTime(), nullable=False),
        sa.Column("imported_at", UtcDateTime(), nullable=False),
        sa.Column("source_path", sa.Text(), nullable=False),
        sa.Column("content_sha256", sa.String(length=64), nullable=False),
        sa.Column(
            "config",
            sa.JSON().with_variant(postgresql.JSONB(astext_type=sa.Text()), "postgresql"),
            nullable=False,
        ),
        sa.ForeignKeyConstraint(
            ["plant_id"],
            ["plants.id"],
        ),
        sa.PrimaryKeyConstraint("id"),
        sa.UniqueConstraint("plant_id", "version"),
    )
    with op.batch_alter_table("plant_config_versions", schema=None) as batch_op:
        batch_op.create_index(
            batch_op.f("ix_plant_config_versions_plant_id"), ["plant_id"], unique=False
        )

    op.create_table(
        "units",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("plant_id", sa.Integer(), nullable=False),
        sa.Column("code", sa.String(length=32), nullable=False),
        sa.Column("runner_type", sa.String(length=16), nullable=False),
        sa.Column("created_at", UtcDateTime(), nullable=False),
        sa.ForeignKeyConstraint(
            ["plant_id"],
            ["plants.id"],
        ),
        sa.PrimaryKeyConstraint("id"),
        sa.UniqueConstraint("plant_id", "code"),
    )
    with op.batch_alter_table("units", schema=None) as batch_op:
        batch_op.create_index(batch_op.f("ix_units_plant_id"), ["plant_id"], unique=False)

    op.create_table(
        "quarantined_files",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("ingested_file_id", sa.Integer(), nullable=False),
        sa.Column("sha256", sa.String(length=64), nullable=False),
        sa.Column("original_path", sa.Text(), nullable=False),
        sa.Column("stored_path", sa.Text(), nullable=False),
        sa.Column("reason", sa.Text(), nullable=False),
        sa.Column("quarantined_at", UtcDateTime(), nullable=False),
        sa.Column("released_at", UtcDateTime(), nullable=True),
        sa.ForeignKeyConstraint(
            ["ingested_file_id"],
            ["ingested_files.id"],
        ),
        sa.PrimaryKeyConstraint("id"),
        sa.UniqueConstraint("ingested_file_id"),
    )
    op.create_table(
        "samples",
        sa.Column("unit_id", sa.Integer(), nullable=False),
        sa.Column("ts", UtcDateTime(), nullable=False),
        sa.Column("quality", sa.Integer(), nullable=False),
        sa.Column("flagged_signals", sa.BigInteger(), nullable=False),
        sa.Column("source_file_id", sa.Integer(), nullable=True),
        sa.Column("active_power", sa.Float(), nullable=True),
        sa.Column("headwater_level", sa.Float(), nullable=True),
        sa.Column("tailwater_level", sa.Float(), nullable=True),
        sa.Column("wk_differential_pressure", sa.Float(), nullable=True),
        sa.Column("flow_rate", sa.Float(), nullable=True),
        sa.Column("gate_opening", sa.Float(), nullable=True),
        sa.Column("blade_angle", sa.Float(), nullable=True),
        sa.Column("rotational_speed", sa.Float(), nullable=True),
        sa.Column("spiral_case_pressure", sa.Float(), nullable=True),
        sa.Column("draft_tube_pressure", sa.Float(), nullable=True),
        sa.Column("draft_tube_pulsation", sa.Float(), nullable=True),
        sa.Column("shaft_vibration", sa.Float(), nullable=True),
        sa.Column("bearing_vibration", sa.Float(), nullable=True),
        sa.Column("hf_vibration", sa.Float(), nullable=True),
        sa.Column("guide_bearing_temperature", sa.Float(), nullable=True),
        sa.Column("thrust_bearing_temperature", sa.Float(), nullable=True),
        sa.Column("cooling_water_temperature", sa.Float(), nullable=True),
        sa.Column("water_temperature", sa.Float(), nullable=True),
        sa.PrimaryKeyConstraint("unit_id", "ts"),
        sqlite_with_rowid=False,
    )
    op.create_table(
        "unit_config_versions",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("unit_id", sa.Integer(), nullable=False),
        sa.Column("version", sa.Integer(), nullable=False),
        sa.Column("effective_from", UtcDateTime(), nullable=False),
        sa.Column("imported_at", UtcDateTime(), nullable=False),
        sa.Column("content_sha256", sa.String(length=64), nullable=False),
        sa.Column(
            "config",
            sa.JSON().with_variant(postgresql.JSONB(astext_type=sa.Text()), "postgresql"),
            nullable=False,
        ),
        sa.ForeignKeyConstraint(
            ["unit_id"],
            ["units.id"],
        ),
        sa.PrimaryKeyConstraint("id"),
        sa.UniqueConstraint("unit_id", "version"),
    )
    with op.batch_alter_table("unit_config_versions", schema=None) as batch_op:
        batch_op.create_index(
            batch_op.f("ix_unit_config_versions_unit_id"), ["unit_id"], unique=False
        )


def downgrade() -> None:

    with op.batch_alter_table("unit_config_versions", schema=None) as batch_op:
        batch_op.drop_index(batch_op.f("ix_unit_config_versions_unit_id"))

    op.drop_table("unit_config_versions")
    op.drop_table("samples")
    op.drop_table("quarantined_files")
    with op.batch_alter_table("units", schema=None) as batch_op:
        batch_op.drop_index(batch_op.f("ix_units_plant_id"))

    op.drop_table("units")
    with op.batch_alter_table("plant_config_versions", schema=None) as batch_op:
        batch_op.drop_index(batch_op.f("ix_plant_config_versions_plant_id"))

    op.drop_table("plant_config_versions")
    op.drop_table("ingested_files")
    op.drop_table("plants")
