"""Services for creating, upgrading and describing an evidence base."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

from exposhift.store.accounts import apply_account_role
from exposhift.store.database import Store, open_store
from exposhift.store.migrate import current_revision, head_revision, require_current, upgrade
from exposhift.store.records import TABLES

#: the tables counted by ``info`` and the names users see
COUNTED = {
    "studies": "study",
    "events": "event",
    "estimates": "estimate",
    "appraisals": "appraisal",
    "exposures": "exposure",
    "outcomes": "outcome",
    "expected_directions": "expected_direction",
    "certainty_judgements": "certainty_judgement",
    "audit_entries": "audit_entry",
}


@dataclass(frozen=True)
class InitResult:
    url: str
    before: str | None
    after: str
    method: Any = None  # the MethodInForce now recorded (services.workspace)


def init_database(db: str | None = None, user: str | None = None) -> InitResult:
    """Create the database (or upgrade it to the newest schema) without losing data, and
    record the packaged default of every method part it does not hold yet."""
    from exposhift.services.workspace import method_in_force, record_missing_parts

    store = open_store(db, user, create=True)
    try:
        before, after = upgrade(store)
        record_missing_parts(store)
        return InitResult(
            url=store.masked_url, before=before, after=after, method=method_in_force(store)
        )
    finally:
        store.dispose()


def open_current(db: str | None = None, user: str | None = None) -> Store:
    """Open a database that is initialised at the newest schema revision.

    The store acts with the role of the account named like ``user`` (``--user``), if there is
    one; otherwise as an administrator (see :func:`exposhift.store.accounts.apply_account_role`).
    """
    store = open_store(db, user)
    try:
        require_current(store)
        apply_account_role(store)
    except Exception:
        store.dispose()
        raise
    return store


@dataclass(frozen=True)
class DatabaseInfo:
    """What an evidence base holds: counts per table, its masked URL and schema revision."""

    url: str
    backend: str
    revision: str | None
    newest_revision: str | None
    counts: dict[str, int]

    def to_dict(self) -> dict:
        """What ``exposhift info --json`` prints: the counts, the URL and the revision."""
        return {**self.counts, "url": self.url, "revision": self.revision}


def database_info(db: str | None = None) -> DatabaseInfo:
    """Counts per table, masked URL and schema revision."""
    store = open_current(db)
    try:
        from exposhift.store.models import AuditEntry

        tables = dict(TABLES, audit_entry=AuditEntry.__table__)
        with store.read() as conn:
            counts = {name: store.count(conn, tables[t]) for name, t in COUNTED.items()}
            rev = current_revision(conn)
        return DatabaseInfo(
            url=store.masked_url,
            backend=store.engine.dialect.name,
            revision=rev,
            newest_revision=head_revision(),
            counts=counts,
        )
    finally:
        store.dispose()
