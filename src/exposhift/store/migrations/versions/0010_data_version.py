"""data version: one counter moved in the same transaction as every write

Revision ID: 0010_data_version
Revises: 0005_series
Create Date: 2026-12-03

The row starts at version 1 (any evidence base upgraded here may already hold records).
"""

import sqlalchemy as sa
import sqlmodel
from alembic import op

revision = "0010_data_version"
down_revision = "0009_accounts"
branch_labels = None
depends_on = None


def upgrade() -> None:
    table = op.create_table(
        "data_version",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("version", sa.Integer(), nullable=False),
        sa.Column("changed_at", sqlmodel.sql.sqltypes.AutoString(), nullable=True),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_data_version")),
    )
    op.bulk_insert(table, [{"id": 1, "version": 1, "changed_at": None}])


def downgrade() -> None:
    op.drop_table("data_version")
