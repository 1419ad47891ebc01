"""The tamper-evident audit trail: every audit entry carries a hash chained to the one before.

``entry_hash = SHA-256(canonical JSON of [prev_hash, at, user, table_name, row_key, action,
before, after])`` (FIPS 180-4 SHA-256 as :mod:`hashlib` provides it), where ``prev_hash`` is the
``entry_hash`` of the entry written just before (by id) and :data:`GENESIS` for the first entry.
A change to any entry's content changes its hash; a deleted, inserted or reordered entry breaks
the link of the entry after it. :func:`verify_chain` walks the chain in id order and names the
first entry that does not fit.

What this protects against, and what not (docs/audit-trail.md says the same for users):

- It detects an UPDATE or DELETE of audit rows, or an INSERT between them, done with plain SQL
  by anyone who does not recompute every later hash.
- It does **not** stop someone with write access to the database from rewriting the entries and
  rebuilding the whole chain: the hashes are unkeyed and the code is open. Only a chain head
  kept elsewhere (:func:`audit_chain_head`, e.g. printed into a dossier, sent to a committee
  secretary) shows such a rebuild, by no longer matching.
- Removing entries at the end of the chain leaves a valid shorter chain; again only a head kept
  elsewhere (its entry count and hash) reveals it.

Writers keep the chain linear: SQLite write transactions start with ``BEGIN IMMEDIATE`` and
PostgreSQL write transactions take one advisory lock (:mod:`exposhift.store.database`), so the
previous hash read inside a write transaction is the last one committed.
"""

from __future__ import annotations

import hashlib
import json
from collections.abc import Iterable, Mapping
from dataclasses import dataclass
from json.encoder import encode_basestring as _encode_str
from typing import Any

from sqlalchemy import Connection, select

from exposhift.store.models import AuditEntry

AUDIT = AuditEntry.__table__
GENESIS = "0" * 64
#: the content fields of an entry, in the order they are hashed
HASHED = ("at", "user", "table_name", "row_key", "action", "before", "after")


def _enc(value: Any) -> str:
    if value is None:
        return "null"
    if type(value) is str:
        return _encode_str(value)
    return json.dumps(value, ensure_ascii=False)


def hash_values(prev_hash: str, *values: Any) -> str:
    """SHA-256 (hex) of ``[prev_hash, *values]`` as compact JSON (UTF-8): the same text as
    ``json.dumps(..., ensure_ascii=False, separators=(",", ":"))``, built faster."""
    payload = "[" + ",".join([_encode_str(prev_hash), *map(_enc, values)]) + "]"
    return hashlib.sha256(payload.encode("utf-8", "surrogatepass")).hexdigest()


def entry_hash(prev_hash: str, entry: Mapping[str, Any]) -> str:
    """SHA-256 (hex) of ``[prev_hash, *entry[HASHED]]`` as compact JSON (UTF-8)."""
    return hash_values(prev_hash, *(entry.get(f) for f in HASHED))


def link(entries: Iterable[dict[str, Any]], prev_hash: str) -> str:
    """Set ``prev_hash`` and ``entry_hash`` on each entry in order; returns the new head."""
    for e in entries:
        e["prev_hash"] = prev_hash
        prev_hash = e["entry_hash"] = entry_hash(prev_hash, e)
    return prev_hash


def last_hash(conn: Connection) -> str:
    """The hash of the newest entry (by id), or :data:`GENESIS` when there is none."""
    h = conn.execute(
        select(AUDIT.c.entry_hash).order_by(AUDIT.c.id.desc()).limit(1)
    ).scalar_one_or_none()
    return h or GENESIS


@dataclass(frozen=True)
class ChainHead:
    """The state of the chain at one moment: how many entries and the newest hash."""

    entries: int
    head: str
    last_id: int | None
    last_at: str | None

    def to_dict(self) -> dict[str, Any]:
        return {
            "entries": self.entries,
            "head": self.head,
            "last_id": self.last_id,
            "last_at": self.last_at,
        }


@dataclass(frozen=True)
class ChainReport:
    """The result of :func:`verify_chain`: ``ok``, or the first entry that does not fit."""

    ok: bool
    checked: int
    head: ChainHead
    bad_id: int | None = None
    problem: str | None = None


def _describe(row: Mapping[str, Any]) -> str:
    return (
        f"entry {row['id']} ({row['at']}, {row['user']}, {row['action']} "
        f"{row['table_name']} '{row['row_key']}')"
    )


def verify_chain(conn: Connection, expected: ChainHead | None = None) -> ChainReport:
    """Walk every entry in id order and recompute the chain.

    With ``expected`` (a head recorded earlier), also check that the chain still contains that
    head at that position, which reveals a rebuilt chain or entries cut off the end.
    """
    prev, n, last = GENESIS, 0, None
    seen_expected = expected is None or expected.entries == 0
    stmt = select(AUDIT).order_by(AUDIT.c.id).execution_options(yield_per=5000)
    for row in conn.execute(stmt).mappings():
        n += 1
        if row["entry_hash"] is None or row["prev_hash"] is None:
            return _bad(n - 1, prev, last, row, "has no hash: it was written outside exposhift")
        if row["prev_hash"] != prev:
            what = (
                "the entry before it was deleted, or it was inserted or moved out of order"
                if n > 1
                else "entries before it were deleted, or it was inserted"
            )
            return _bad(n - 1, prev, last, row, f"does not follow the entry before it ({what})")
        if entry_hash(prev, row) != row["entry_hash"]:
            return _bad(
                n - 1,
                prev,
                last,
                row,
                "was changed after it was written (its content no longer matches its hash)",
            )
        prev, last = row["entry_hash"], row
        if not seen_expected and n == expected.entries:
            if prev != expected.head:
                return ChainReport(
                    False,
                    n,
                    _head(n, prev, last),
                    row["id"],
                    f"{_describe(row)} is not the recorded head "
                    f"{expected.head[:16]}...: the chain was rebuilt",
                )
            seen_expected = True
    head = _head(n, prev, last)
    if not seen_expected:
        return ChainReport(
            False,
            n,
            head,
            None,
            f"the chain has {n} entries but the recorded head was entry "
            f"{expected.entries}: entries were removed from the end",
        )
    return ChainReport(True, n, head)


def _head(n: int, prev: str, last: Mapping[str, Any] | None) -> ChainHead:
    return ChainHead(
        n, prev, None if last is None else int(last["id"]), None if last is None else last["at"]
    )


def _bad(checked: int, prev: str, last, row, problem: str) -> ChainReport:
    return ChainReport(
        False, checked, _head(checked, prev, last), int(row["id"]), f"{_describe(row)} {problem}"
    )


def chain_head(conn: Connection) -> ChainHead:
    """The current head without verifying (entry count, newest hash, its id and time)."""
    from sqlalchemy import func

    n = int(conn.execute(select(func.count()).select_from(AUDIT)).scalar_one())
    row = conn.execute(
        select(AUDIT.c.id, AUDIT.c.at, AUDIT.c.entry_hash).order_by(AUDIT.c.id.desc()).limit(1)
    ).first()
    if row is None:
        return ChainHead(0, GENESIS, None, None)
    return ChainHead(n, row.entry_hash or GENESIS, int(row.id), row.at)


def audit_chain_head(store) -> ChainHead:
    """The chain head of ``store`` now: what a dossier records in its provenance."""
    with store.read() as conn:
        return chain_head(conn)


def find_entries(
    conn: Connection,
    *,
    row_key: str | None = None,
    user: str | None = None,
    since: str | None = None,
    limit: int | None = None,
) -> list[dict[str, Any]]:
    """Audit entries in the order written, filtered by record key (exact, or the key as the
    first part of an appraisal/rating key ``study|...``), user and time (``at >= since``);
    with ``limit``, only the newest ``limit`` of them."""
    stmt = select(AUDIT).order_by(AUDIT.c.id.desc())
    if row_key is not None:
        stmt = stmt.where(
            (AUDIT.c.row_key == row_key)
            | AUDIT.c.row_key.startswith(row_key + "|", autoescape=True)
        )
    if user is not None:
        stmt = stmt.where(AUDIT.c.user == user)
    if since is not None:
        stmt = stmt.where(AUDIT.c.at >= since)
    if limit is not None:
        stmt = stmt.limit(limit)
    return [dict(r) for r in conn.execute(stmt).mappings()][::-1]
