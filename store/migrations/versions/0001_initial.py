"""Initial schema: sites, units, points, readings, quarantine.

Revision ID: 0001
Revises:
Create Date: 2025-06-01
"""

import sqlalchemy as sa
from alembic import op

revision = "0001"
down_revision = None
branch_labels = None
depends_on = None


def upgrade() -> None:
    op.create_table(
        "sites",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("name", sa.String(200), nullable=False),
        sa.Column("timezone", sa.String(64), nullable=False),
        sa.Column("elevation_m", sa.Float(), nullable=False),
        sa.Column("display_units", sa.String(8), nullable=False),
        sa.PrimaryKeyConstraint("id", name="pk_sites"),
        sa.UniqueConstraint("name", name="uq_sites_name"),
    )
    op.create_table(
        "units",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("site_id", sa.Integer(), nullable=False),
        sa.Column("key", sa.String(100), nullable=False),
        sa.Column("name", sa.String(200), nullable=False),
        sa.Column("kind", sa.String(40), nullable=False),
        sa.Column("refrigerant", sa.String(40), nullable=False),
        sa.Column("description", sa.Text(), nullable=False),
        sa.Column("retired", sa.Boolean(), nullable=False),
        sa.ForeignKeyConstraint(["site_id"], ["sites.id"], name="fk_units_site_id_sites"),
        sa.PrimaryKeyConstraint("id", name="pk_units"),
        sa.UniqueConstraint("site_id", "key", name="uq_units_site_id"),
    )
    op.create_table(
        "points",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("unit_id", sa.Integer(), nullable=False),
        sa.Column("role", sa.String(60), nullable=False),
        sa.Column("measurement_unit", sa.String(20), nullable=False),
        sa.Column("mqtt_topic", sa.Text(), nullable=True),
        sa.Column("csv_column", sa.Text(), nullable=True),
        sa.Column("retired", sa.Boolean(), nullable=False),
        sa.ForeignKeyConstraint(["unit_id"], ["units.id"], name="fk_points_unit_id_units"),
        sa.PrimaryKeyConstraint("id", name="pk_points"),
        sa.UniqueConstraint("unit_id", "role", name="uq_points_unit_id"),
    )
    op.create_table(
        "readings",
        sa.Column("point_id", sa.Integer(), nullable=False),
        sa.Column("ts_ms", sa.BigInteger(), autoincrement=False, nullable=False),
        sa.Column("value", sa.Float(), nullable=False),
        sa.ForeignKeyConstraint(["point_id"], ["points.id"], name="fk_readings_point_id_points"),
        sa.PrimaryKeyConstraint("point_id", "ts_ms", name="pk_readings"),
        sqlite_with_rowid=False,
    )
    op.create_table(
        "quarantine",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("source", sa.String(16), nullable=False),
        sa.Column("origin", sa.Text(), nullable=False),
        sa.Column("line", sa.Integer(), nullable=True),
        sa.Column("payload", sa.LargeBinary(), nullable=False),
        sa.Column("reason", sa.Text(), nullable=False),
        sa.Column("received_ms", sa.BigInteger(), nullable=False),
        sa.Column("site_id", sa.Integer(), nullable=True),
        sa.Column("reprocessed", sa.Boolean(), nullable=False),
        sa.Column("reprocessed_ms", sa.BigInteger(), nullable=True),
        sa.ForeignKeyConstraint(["site_id"], ["sites.id"], name="fk_quarantine_site_id_sites"),
        sa.PrimaryKeyConstraint("id", name="pk_quarantine"),
    )
    op.create_index("ix_quarantine_reprocessed_source", "quarantine", ["reprocessed", "source"])


def downgrade() -> None:
    op.drop_index("ix_quarantine_reprocessed_source", table_name="quarantine")
    for table in ("quarantine", "readings", "points", "units", "sites"):
        op.drop_table(table)
