"""series records: extracted series, their points, and stored re-estimations

Revision ID: 0005_series
Revises: 0004_audit_chain
Create Date: 2026-12-03
"""

import sqlalchemy as sa
import sqlmodel
from alembic import op

revision = "0005_series"
down_revision = "0004_audit_chain"
branch_labels = None
depends_on = None

_TEXT = sqlmodel.sql.sqltypes.AutoString


def upgrade() -> None:
    op.create_table(
        "series",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("key", _TEXT(), nullable=False),
        sa.Column("study_id", sa.Integer(), nullable=False),
        sa.Column("event_id", sa.Integer(), nullable=False),
        sa.Column("outcome_id", sa.Integer(), nullable=False),
        sa.Column("role", _TEXT(), nullable=False),
        sa.Column("place", _TEXT(), nullable=True),
        sa.Column("time_unit", _TEXT(), nullable=False),
        sa.Column("value_kind", _TEXT(), nullable=False),
        sa.Column("change_at", _TEXT(), nullable=True),
        sa.Column("extracted_by", _TEXT(), nullable=True),
        sa.Column("demo", sa.Boolean(), nullable=False),
        sa.Column("version", sa.Integer(), nullable=False),
        sa.Column("created_at", _TEXT(), nullable=False),
        sa.Column("updated_at", _TEXT(), nullable=False),
        sa.ForeignKeyConstraint(
            ["event_id"], ["event.id"], name=op.f("fk_series_event_id_event"), ondelete="RESTRICT"
        ),
        sa.ForeignKeyConstraint(
            ["outcome_id"],
            ["outcome.id"],
            name=op.f("fk_series_outcome_id_outcome"),
            ondelete="RESTRICT",
        ),
        sa.ForeignKeyConstraint(
            ["study_id"], ["study.id"], name=op.f("fk_series_study_id_study"), ondelete="RESTRICT"
        ),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_series")),
        sa.UniqueConstraint("key", name=op.f("uq_series_key")),
    )
    with op.batch_alter_table("series", schema=None) as batch_op:
        batch_op.create_index(batch_op.f("ix_series_event_id"), ["event_id"], unique=False)
        batch_op.create_index(batch_op.f("ix_series_outcome_id"), ["outcome_id"], unique=False)
        batch_op.create_index(batch_op.f("ix_series_study_id"), ["study_id"], unique=False)

    op.create_table(
        "series_point",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("series_id", sa.Integer(), nullable=False),
        sa.Column("period", _TEXT(), nullable=False),
        sa.Column("value", sa.Float(), nullable=False),
        sa.Column("denominator", sa.Float(), nullable=True),
        sa.Column("source", _TEXT(), nullable=True),
        sa.ForeignKeyConstraint(
            ["series_id"],
            ["series.id"],
            name=op.f("fk_series_point_series_id_series"),
            ondelete="CASCADE",
        ),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_series_point")),
        sa.UniqueConstraint("series_id", "period", name=op.f("uq_series_point_series_id")),
    )
    with op.batch_alter_table("series_point", schema=None) as batch_op:
        batch_op.create_index(batch_op.f("ix_series_point_series_id"), ["series_id"], unique=False)

    op.create_table(
        "series_fit",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("estimate_id", sa.Integer(), nullable=False),
        sa.Column("series_id", sa.Integer(), nullable=False),
        sa.Column("model", _TEXT(), nullable=False),
        sa.Column("options", _TEXT(), nullable=False),
        sa.Column("figures", _TEXT(), nullable=False),
        sa.Column("created_at", _TEXT(), nullable=False),
        sa.ForeignKeyConstraint(
            ["estimate_id"],
            ["estimate.id"],
            name=op.f("fk_series_fit_estimate_id_estimate"),
            ondelete="CASCADE",
        ),
        sa.ForeignKeyConstraint(
            ["series_id"],
            ["series.id"],
            name=op.f("fk_series_fit_series_id_series"),
            ondelete="RESTRICT",
        ),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_series_fit")),
        sa.UniqueConstraint("estimate_id", name=op.f("uq_series_fit_estimate_id")),
    )
    with op.batch_alter_table("series_fit", schema=None) as batch_op:
        batch_op.create_index(batch_op.f("ix_series_fit_series_id"), ["series_id"], unique=False)


def downgrade() -> None:
    op.drop_table("series_fit")
    op.drop_table("series_point")
    op.drop_table("series")
