"""Schema creation and upgrades through Alembic, and the revision check done on every open."""

from __future__ import annotations

from pathlib import Path

from alembic import command
from alembic.config import Config
from alembic.runtime.migration import MigrationContext
from alembic.script import ScriptDirectory
from sqlalchemy import Connection, inspect

from exposhift.errors import DatabaseError
from exposhift.store.database import Store

MIGRATIONS = Path(__file__).with_name("migrations")


def alembic_config(connection: Connection | None = None) -> Config:
    cfg = Config()
    cfg.set_main_option("script_location", str(MIGRATIONS))
    if connection is not None:
        cfg.attributes["connection"] = connection
    return cfg


def head_revision() -> str:
    heads = ScriptDirectory.from_config(alembic_config()).get_heads()
    return heads[0]


def known_revisions() -> set[str]:
    script = ScriptDirectory.from_config(alembic_config())
    return {rev.revision for rev in script.walk_revisions()}


def current_revision(conn: Connection) -> str | None:
    return MigrationContext.configure(conn).get_current_revision()


def _refuse_unknown(store: Store, revision: str | None) -> None:
    if revision is not None and revision not in known_revisions():
        raise DatabaseError(
            f"database {store.masked_url} is at schema revision {revision}, which is newer than "
            f"this exposhift knows (up to {head_revision()}); nothing was written. Upgrade "
            "exposhift to a version that knows it"
        )


def upgrade(store: Store) -> tuple[str | None, str]:
    """Create or upgrade the schema to the newest revision. Returns (before, after)."""
    with store.write() as conn:
        before = current_revision(conn)
        _refuse_unknown(store, before)
        if before is None and _has_foreign_tables(conn):
            raise DatabaseError(
                f"database {store.masked_url} holds tables but no exposhift schema revision; "
                "refusing to touch it. Choose an empty database or file with --db"
            )
        cfg = alembic_config(conn)
        cfg.attributes["user"] = store.user  # named in the audit entries a migration writes
        command.upgrade(cfg, "head")
        after = current_revision(conn)
    return before, after or head_revision()


def _has_foreign_tables(conn: Connection) -> bool:
    names = set(inspect(conn).get_table_names()) - {"alembic_version"}
    return bool(names)


def require_current(store: Store) -> str:
    """Refuse to work on a database that is uninitialised, older or newer than this code."""
    with store.read() as conn:
        rev = current_revision(conn)
    if rev is None:
        raise DatabaseError(
            f"database {store.masked_url} has no exposhift schema; run 'exposhift init' first"
        )
    _refuse_unknown(store, rev)
    if rev != head_revision():
        raise DatabaseError(
            f"database {store.masked_url} is at schema revision {rev}, older than this "
            f"exposhift ({head_revision()}); run 'exposhift init' to upgrade it (no data is lost)"
        )
    return rev
