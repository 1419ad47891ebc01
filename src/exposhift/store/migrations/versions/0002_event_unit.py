"""overlapping populations (study.same_population_as) and expected directions

Revision ID: 0002_event_unit
Revises: 0001
Create Date: 2026-12-03

Existing studies get NULL in ``same_population_as`` (no overlap declared); the new table
``expected_direction`` starts empty.
"""

import sqlalchemy as sa
import sqlmodel
from alembic import op

revision = "0002_event_unit"
down_revision = "0001"
branch_labels = None
depends_on = None


def upgrade() -> None:
    with op.batch_alter_table("study", schema=None) as batch_op:
        batch_op.add_column(
            sa.Column("same_population_as", sqlmodel.sql.sqltypes.AutoString(), nullable=True)
        )

    op.create_table(
        "expected_direction",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("exposure_id", sa.Integer(), nullable=False),
        sa.Column("outcome_id", sa.Integer(), nullable=False),
        sa.Column("direction", sqlmodel.sql.sqltypes.AutoString(), nullable=False),
        sa.Column("rationale", sqlmodel.sql.sqltypes.AutoString(), nullable=False),
        sa.Column("decided_by", sqlmodel.sql.sqltypes.AutoString(), nullable=False),
        sa.Column("decided_at", sqlmodel.sql.sqltypes.AutoString(), nullable=False),
        sa.Column("version", sa.Integer(), nullable=False),
        sa.Column("created_at", sqlmodel.sql.sqltypes.AutoString(), nullable=False),
        sa.Column("updated_at", sqlmodel.sql.sqltypes.AutoString(), nullable=False),
        sa.ForeignKeyConstraint(
            ["exposure_id"],
            ["exposure.id"],
            name=op.f("fk_expected_direction_exposure_id_exposure"),
            ondelete="RESTRICT",
        ),
        sa.ForeignKeyConstraint(
            ["outcome_id"],
            ["outcome.id"],
            name=op.f("fk_expected_direction_outcome_id_outcome"),
            ondelete="RESTRICT",
        ),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_expected_direction")),
        sa.UniqueConstraint(
            "exposure_id", "outcome_id", name=op.f("uq_expected_direction_exposure_id")
        ),
    )
    with op.batch_alter_table("expected_direction", schema=None) as batch_op:
        batch_op.create_index(
            batch_op.f("ix_expected_direction_exposure_id"), ["exposure_id"], unique=False
        )
        batch_op.create_index(
            batch_op.f("ix_expected_direction_outcome_id"), ["outcome_id"], unique=False
        )


def downgrade() -> None:
    with op.batch_alter_table("expected_direction", schema=None) as batch_op:
        batch_op.drop_index(batch_op.f("ix_expected_direction_outcome_id"))
        batch_op.drop_index(batch_op.f("ix_expected_direction_exposure_id"))
    op.drop_table("expected_direction")
    # plain DROP COLUMN (SQLite >= 3.35, PostgreSQL): batch mode would rebuild the study table,
    # which SQLite refuses while estimates and appraisals refer to it
    op.execute("ALTER TABLE study DROP COLUMN same_population_as")
