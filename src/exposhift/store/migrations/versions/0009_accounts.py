"""accounts: people who sign in, their sessions, and sign-in attempts

Revision ID: 0009_accounts
Revises: 0005_series
Create Date: 2026-12-03
"""

import sqlalchemy as sa
import sqlmodel
from alembic import op

revision = "0009_accounts"
down_revision = "0008_certainty"
branch_labels = None
depends_on = None

_TEXT = sqlmodel.sql.sqltypes.AutoString


def upgrade() -> None:
    op.create_table(
        "account",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("name", _TEXT(), nullable=False),
        sa.Column("role", _TEXT(), nullable=False),
        sa.Column("password_hash", _TEXT(), nullable=False),
        sa.Column("disabled", sa.Boolean(), nullable=False),
        sa.Column("version", sa.Integer(), nullable=False),
        sa.Column("created_at", _TEXT(), nullable=False),
        sa.Column("updated_at", _TEXT(), nullable=False),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_account")),
        sa.UniqueConstraint("name", name=op.f("uq_account_name")),
    )
    op.create_table(
        "account_session",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("token_hash", _TEXT(), nullable=False),
        sa.Column("account_id", sa.Integer(), nullable=False),
        sa.Column("created_at", _TEXT(), nullable=False),
        sa.Column("last_seen_at", _TEXT(), nullable=False),
        sa.Column("expires_at", _TEXT(), nullable=False),
        sa.Column("ended_at", _TEXT(), nullable=True),
        sa.ForeignKeyConstraint(
            ["account_id"],
            ["account.id"],
            name=op.f("fk_account_session_account_id_account"),
            ondelete="CASCADE",
        ),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_account_session")),
        sa.UniqueConstraint("token_hash", name=op.f("uq_account_session_token_hash")),
    )
    with op.batch_alter_table("account_session", schema=None) as batch_op:
        batch_op.create_index(
            batch_op.f("ix_account_session_account_id"), ["account_id"], unique=False
        )
    op.create_table(
        "sign_in_attempt",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("name", _TEXT(), nullable=False),
        sa.Column("at", _TEXT(), nullable=False),
        sa.Column("outcome", _TEXT(), nullable=False),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_sign_in_attempt")),
    )
    with op.batch_alter_table("sign_in_attempt", schema=None) as batch_op:
        batch_op.create_index(batch_op.f("ix_sign_in_attempt_at"), ["at"], unique=False)
        batch_op.create_index(batch_op.f("ix_sign_in_attempt_name"), ["name"], unique=False)


def downgrade() -> None:
    op.drop_table("sign_in_attempt")
    op.drop_table("account_session")
    op.drop_table("account")
