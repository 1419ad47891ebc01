"""certainty judgements: the committee's rating per exposure x outcome x certainty domain

Revision ID: 0008_certainty
Revises: 0005_series
Create Date: 2026-12-03

The new table starts empty.
"""

import sqlalchemy as sa
import sqlmodel
from alembic import op

revision = "0008_certainty"
down_revision = "0006_method"
branch_labels = None
depends_on = None

_TEXT = sqlmodel.sql.sqltypes.AutoString


def upgrade() -> None:
    op.create_table(
        "certainty_judgement",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("exposure_id", sa.Integer(), nullable=False),
        sa.Column("outcome_id", sa.Integer(), nullable=False),
        sa.Column("domain", _TEXT(), nullable=False),
        sa.Column("rating", _TEXT(), nullable=False),
        sa.Column("why", _TEXT(), nullable=False),
        sa.Column("suggested", _TEXT(), nullable=False),
        sa.Column("suggestion_reason", _TEXT(), nullable=False),
        sa.Column("overrides", sa.Boolean(), nullable=False),
        sa.Column("numbers", _TEXT(), nullable=False),
        sa.Column("settings_hash", _TEXT(), nullable=False),
        sa.Column("decided_by", _TEXT(), nullable=False),
        sa.Column("decided_at", _TEXT(), nullable=False),
        sa.Column("version", sa.Integer(), nullable=False),
        sa.Column("created_at", _TEXT(), nullable=False),
        sa.Column("updated_at", _TEXT(), nullable=False),
        sa.ForeignKeyConstraint(
            ["exposure_id"],
            ["exposure.id"],
            name=op.f("fk_certainty_judgement_exposure_id_exposure"),
            ondelete="RESTRICT",
        ),
        sa.ForeignKeyConstraint(
            ["outcome_id"],
            ["outcome.id"],
            name=op.f("fk_certainty_judgement_outcome_id_outcome"),
            ondelete="RESTRICT",
        ),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_certainty_judgement")),
        sa.UniqueConstraint(
            "exposure_id",
            "outcome_id",
            "domain",
            name=op.f("uq_certainty_judgement_exposure_id"),
        ),
    )
    with op.batch_alter_table("certainty_judgement", schema=None) as batch_op:
        batch_op.create_index(
            batch_op.f("ix_certainty_judgement_exposure_id"), ["exposure_id"], unique=False
        )
        batch_op.create_index(
            batch_op.f("ix_certainty_judgement_outcome_id"), ["outcome_id"], unique=False
        )


def downgrade() -> None:
    with op.batch_alter_table("certainty_judgement", schema=None) as batch_op:
        batch_op.drop_index(batch_op.f("ix_certainty_judgement_outcome_id"))
        batch_op.drop_index(batch_op.f("ix_certainty_judgement_exposure_id"))
    op.drop_table("certainty_judgement")
