"""estimate.p_bound: the p value was reported as a bound ("p < x")

Revision ID: 0003_p_bound
Revises: 0002_event_unit
Create Date: 2026-12-03
"""

import sqlalchemy as sa
from alembic import op

revision = "0003_p_bound"
down_revision = "0002_event_unit"
branch_labels = None
depends_on = None


def upgrade() -> None:
    with op.batch_alter_table("estimate") as batch:
        batch.add_column(
            sa.Column("p_bound", sa.Boolean(), nullable=False, server_default=sa.false())
        )


def downgrade() -> None:
    with op.batch_alter_table("estimate") as batch:
        batch.drop_column("p_bound")
