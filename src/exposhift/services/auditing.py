"""``exposhift audit verify`` and ``exposhift audit show``: reading the audit trail.

The chain itself (hashes, what it protects against) is :mod:`exposhift.store.audit_chain`;
``docs/audit-trail.md`` explains it for users.
"""

from __future__ import annotations

import datetime as dt
from dataclasses import dataclass

from exposhift.access import Identity, hidden_reason, may_see_independent
from exposhift.errors import ConfigError
from exposhift.services.setup import open_current
from exposhift.store.appraisals import review_states
from exposhift.store.audit_chain import ChainHead, ChainReport, find_entries, verify_chain
from exposhift.store.database import Store


@dataclass(frozen=True)
class AuditView:
    url: str
    entries: list[dict]
    total_matching: int


def verify_audit(
    db: str | None = None, *, entries: int | None = None, head: str | None = None
) -> ChainReport:
    """Walk the whole chain; with ``entries`` and ``head`` (a head recorded earlier, e.g. in a
    dossier) also check that the chain still passes through it."""
    if (entries is None) != (head is None):
        raise ConfigError(
            "give both --entries N and --head HASH (a chain head recorded earlier), or neither"
        )
    if entries is not None and entries < 0:
        raise ConfigError(
            f"--entries {entries} is negative; give the entry count recorded "
            "with the head (0 or more)"
        )
    expected = None if entries is None else ChainHead(entries, head.strip().lower(), None, None)
    store = open_current(db)
    try:
        with store.read() as conn:
            return verify_chain(conn, expected)
    finally:
        store.dispose()


def parse_since(text: str) -> str:
    """``YYYY-MM-DD`` or an ISO-8601 time as the audit trail's ``...Z`` text, for ``at >=``."""
    raw = text.strip()
    try:
        if len(raw) == 10:
            when = dt.datetime.combine(dt.date.fromisoformat(raw), dt.time(), dt.UTC)
        else:
            when = dt.datetime.fromisoformat(raw.replace("Z", "+00:00"))
            if when.tzinfo is None:
                when = when.replace(tzinfo=dt.UTC)
    except ValueError:
        raise ConfigError(
            f"--since {text!r} is not a date; give YYYY-MM-DD (UTC) or an "
            "ISO-8601 time such as 2026-12-01T09:30:00Z"
        ) from None
    return when.astimezone(dt.UTC).strftime("%Y-%m-%dT%H:%M:%S.%fZ")


def show_audit(
    db: str | None = None,
    *,
    record: str | None = None,
    user: str | None = None,
    since: str | None = None,
    limit: int | None = 200,
    viewer: str | None = None,
    store: Store | None = None,
) -> AuditView:
    """Audit entries filtered by record key, user and time (the newest ``limit`` of them).

    ``viewer`` (``--user``, a name or an :class:`~exposhift.access.Identity`; default the
    store's own identity): the values of appraisal and rating entries that are blinded for
    the viewer are replaced by ``hidden`` (an administrator sees every entry). ``store``: an
    open store to read (the dashboard's) instead of opening ``db``.
    """
    from exposhift.services.accounts import viewer_of

    if limit is not None and limit < 1:
        raise ConfigError(f"--limit {limit} is not allowed; give 1 or more")
    start = parse_since(since) if since is not None else None
    own = store is None
    if own:
        store = open_current(db, viewer if isinstance(viewer, str) else None)
    try:
        ident = viewer_of(store, viewer)
        with store.read() as conn:
            rows = find_entries(conn, row_key=record, user=user, since=start)
            states = None if ident.may_do("export-blinded") else review_states(conn)
    finally:
        if own:
            store.dispose()
    shown = rows[-limit:] if limit is not None else rows
    if states is not None:
        shown = [_blinded_entry(e, ident, states) for e in shown]
    return AuditView(store.masked_url, shown, len(rows))


def _blinded_entry(entry: dict, viewer: Identity, states: dict) -> dict:
    """``entry``, with its values hidden when it records an independent appraisal (or one of
    its ratings) that ``viewer`` may not see."""
    if entry["table_name"] not in ("appraisal", "rating"):
        return entry
    parts = entry["row_key"].split("|")
    if len(parts) < 3 or parts[2] != "independent":
        return entry
    study, reviewer = parts[0], parts[1]
    reviewers, has_consensus = states.get(study, (set(), False))
    if may_see_independent(viewer, reviewer, reviewers, has_consensus):
        return entry
    return dict(entry, before=None, after=None, hidden=hidden_reason(viewer))
