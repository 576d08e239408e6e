"""Detection: baselines, events, event_history, notes, maintenance.

Revision ID: d001
Revises: 0001
Create Date: 2026-12-02
"""

import sqlalchemy as sa
from alembic import op

# Registers the detection models on the store's declarative base, so the schema the models
# describe (Base.metadata) includes these tables wherever migrations run. To be dropped once
# rimewatch.store imports rimewatch.store.events itself (asked of the store's owner).
import rimewatch.store.events  # noqa: F401

revision = "d001"
down_revision = "0001"
branch_labels = None
depends_on = None


def upgrade() -> None:
    op.create_table(
        "baselines",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("unit_id", sa.Integer(), nullable=False),
        sa.Column("created_ms", sa.BigInteger(), nullable=False),
        sa.Column("train_start_ms", sa.BigInteger(), nullable=False),
        sa.Column("train_end_ms", sa.BigInteger(), nullable=False),
        sa.Column("models_json", sa.Text(), nullable=False),
        sa.Column("active", sa.Boolean(), nullable=False),
        sa.ForeignKeyConstraint(["unit_id"], ["units.id"], name="fk_baselines_unit_id_units"),
        sa.PrimaryKeyConstraint("id", name="pk_baselines"),
    )
    op.create_index("ix_baselines_unit_id", "baselines", ["unit_id"])
    op.create_table(
        "events",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("unit_id", sa.Integer(), nullable=False),
        sa.Column("code", sa.String(40), nullable=False),
        sa.Column("detail", sa.String(200), nullable=False),
        sa.Column("start_ms", sa.BigInteger(), nullable=False),
        sa.Column("end_ms", sa.BigInteger(), nullable=True),
        sa.Column("detected_ms", sa.BigInteger(), nullable=False),
        sa.Column("last_seen_ms", sa.BigInteger(), nullable=False),
        sa.Column("severity", sa.Float(), nullable=False),
        sa.Column("confidence", sa.Float(), nullable=False),
        sa.Column("impact_json", sa.Text(), nullable=False),
        sa.Column("ranking_json", sa.Text(), nullable=False),
        sa.Column("evidence", sa.Text(), nullable=False),
        sa.Column("suppressed", sa.Boolean(), nullable=False),
        sa.Column("acknowledged_ms", sa.BigInteger(), nullable=True),
        sa.Column("acknowledged_by", sa.String(200), nullable=True),
        sa.ForeignKeyConstraint(["unit_id"], ["units.id"], name="fk_events_unit_id_units"),
        sa.PrimaryKeyConstraint("id", name="pk_events"),
        sa.UniqueConstraint("unit_id", "code", "detail", "start_ms", name="uq_events_unit_id"),
    )
    op.create_index("ix_events_unit_id", "events", ["unit_id"])
    op.create_table(
        "event_history",
        sa.Column("event_id", sa.Integer(), nullable=False),
        sa.Column("hour_ms", sa.BigInteger(), autoincrement=False, nullable=False),
        sa.Column("severity", sa.Float(), nullable=False),
        sa.Column("confidence", sa.Float(), nullable=False),
        sa.ForeignKeyConstraint(
            ["event_id"], ["events.id"], name="fk_event_history_event_id_events"
        ),
        sa.PrimaryKeyConstraint("event_id", "hour_ms", name="pk_event_history"),
    )
    op.create_table(
        "notes",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("event_id", sa.Integer(), nullable=False),
        sa.Column("created_ms", sa.BigInteger(), nullable=False),
        sa.Column("author", sa.String(200), nullable=False),
        sa.Column("text", sa.Text(), nullable=False),
        sa.ForeignKeyConstraint(["event_id"], ["events.id"], name="fk_notes_event_id_events"),
        sa.PrimaryKeyConstraint("id", name="pk_notes"),
    )
    op.create_index("ix_notes_event_id", "notes", ["event_id"])
    op.create_table(
        "maintenance",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("unit_id", sa.Integer(), nullable=False),
        sa.Column("start_ms", sa.BigInteger(), nullable=False),
        sa.Column("end_ms", sa.BigInteger(), nullable=True),
        sa.Column("note", sa.Text(), nullable=False),
        sa.ForeignKeyConstraint(["unit_id"], ["units.id"], name="fk_maintenance_unit_id_units"),
        sa.PrimaryKeyConstraint("id", name="pk_maintenance"),
    )
    op.create_index("ix_maintenance_unit_id", "maintenance", ["unit_id"])


def downgrade() -> None:
    op.drop_index("ix_maintenance_unit_id", table_name="maintenance")
    op.drop_table("maintenance")
    op.drop_index("ix_notes_event_id", table_name="notes")
    op.drop_table("notes")
    op.drop_table("event_history")
    op.drop_index("ix_events_unit_id", table_name="events")
    op.drop_table("events")
    op.drop_index("ix_baselines_unit_id", table_name="baselines")
    op.drop_table("baselines")
