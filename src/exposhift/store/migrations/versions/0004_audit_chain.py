"""audit hash chain: prev_hash and entry_hash on every audit entry

Revision ID: 0004_audit_chain
Revises: 0003_p_bound
Create Date: 2026-12-03

Existing entries are chained in id order when the columns are added, so an upgraded evidence
base verifies from its first entry. The hash is the one of exposhift.store.audit_chain, repeated
here so that this migration keeps computing what it computed when it was written.
"""

import hashlib
import json

import sqlalchemy as sa
import sqlmodel
from alembic import op

revision = "0004_audit_chain"
down_revision = "0003_p_bound"
branch_labels = None
depends_on = None

GENESIS = "0" * 64
HASHED = ("at", "user", "table_name", "row_key", "action", "before", "after")


def _hash(prev: str, row) -> str:
    payload = json.dumps(
        [prev, *(row[f] for f in HASHED)], ensure_ascii=False, separators=(",", ":")
    )
    return hashlib.sha256(payload.encode("utf-8")).hexdigest()


def upgrade() -> None:
    with op.batch_alter_table("audit_entry", schema=None) as batch_op:
        batch_op.add_column(
            sa.Column("prev_hash", sqlmodel.sql.sqltypes.AutoString(), nullable=True)
        )
        batch_op.add_column(
            sa.Column("entry_hash", sqlmodel.sql.sqltypes.AutoString(), nullable=True)
        )
    bind = op.get_bind()
    audit = sa.table(
        "audit_entry",
        sa.column("id", sa.Integer),
        *(sa.column(f) for f in HASHED),
        sa.column("prev_hash"),
        sa.column("entry_hash"),
    )
    rows = bind.execute(sa.select(audit).order_by(audit.c.id)).mappings().all()
    prev = GENESIS
    updates = []
    for row in rows:
        h = _hash(prev, row)
        updates.append({"b_id": row["id"], "p": prev, "h": h})
        prev = h
    if updates:
        bind.execute(
            sa.update(audit)
            .where(audit.c.id == sa.bindparam("b_id"))
            .values(prev_hash=sa.bindparam("p"), entry_hash=sa.bindparam("h")),
            updates,
        )


def downgrade() -> None:
    with op.batch_alter_table("audit_entry", schema=None) as batch_op:
        batch_op.drop_column("entry_hash")
        batch_op.drop_column("prev_hash")
