"""method in force: the versions of the rubric and the settings, stored in the evidence base

Revision ID: 0006_method
Revises: 0005_series
Create Date: 2026-12-03

An evidence base that already holds records gets the method it would have used until now:
commands read ``./evidence/rubric.toml`` and ``./evidence/replication.toml`` of the folder they
were run from, and the usual layout keeps the database in that same folder
(``evidence/evidence.db``). So for a SQLite file, each method part's file next to the database
(``rubric.toml``, ``replication.toml``) is stored when present, else the packaged default; a
PostgreSQL base and a new base get the packaged defaults. A file next to the database that does
not pass the checks stops the upgrade with an error naming its line; nothing is changed.
Every stored version gets an audit entry, linked into the audit chain.
"""

from pathlib import Path

import sqlalchemy as sa
import sqlmodel
from alembic import context, op

revision = "0006_method"
down_revision = "0005_series"
branch_labels = None
depends_on = None

_TEXT = sqlmodel.sql.sqltypes.AutoString


def upgrade() -> None:
    op.create_table(
        "method_version",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("part", _TEXT(), nullable=False),
        sa.Column("number", sa.Integer(), nullable=False),
        sa.Column("text", _TEXT(), nullable=False),
        sa.Column("content_hash", _TEXT(), nullable=False),
        sa.Column("declared", _TEXT(), nullable=False),
        sa.Column("source", _TEXT(), nullable=False),
        sa.Column("created_by", _TEXT(), nullable=False),
        sa.Column("created_at", _TEXT(), nullable=False),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_method_version")),
        sa.UniqueConstraint("part", "number", name=op.f("uq_method_version_part")),
    )
    with op.batch_alter_table("method_version", schema=None) as batch_op:
        batch_op.create_index(batch_op.f("ix_method_version_part"), ["part"], unique=False)
    _record_method_in_use()


def _record_method_in_use() -> None:
    from exposhift.method.parts import METHOD_PARTS
    from exposhift.store.method_records import add_method_version

    conn = op.get_bind()
    user = context.config.attributes.get("user") or "exposhift init"
    folder = _sqlite_folder(conn)
    has_records = bool(conn.exec_driver_sql("SELECT COUNT(*) FROM audit_entry").scalar())
    for part in METHOD_PARTS.values():
        near = folder / part.filename if folder is not None and has_records else None
        if near is not None and near.is_file():
            data = near.read_bytes()
            source = f"{near.name} next to the database when it was upgraded (migration 0006)"
            part.parse(data, str(near))
        else:
            data = part.packaged_bytes()
            source = "packaged default"
        add_method_version(
            conn,
            user,
            part.name,
            data,
            part.declared_version(part.parse(data, f"{part.name} ({source})")),
            source,
        )


def _sqlite_folder(conn) -> Path | None:
    if conn.dialect.name != "sqlite":
        return None
    database = conn.engine.url.database
    if not database or database == ":memory:" or database.startswith("file:"):
        return None
    return Path(database).resolve().parent


def downgrade() -> None:
    op.drop_table("method_version")
