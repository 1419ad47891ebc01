"""The method's versions in the evidence base: add one (audited), read the ones in force.

The table is :class:`~exposhift.store.models.MethodVersion`. Versions are only ever added: a
part's versions are numbered 1, 2, ... and the highest is the one in force. Each addition writes
an audit entry (row key ``<part> <number>``) in the same transaction, linked into the chain.
What a part's text means is not known here (the parsers are in :mod:`exposhift.method.parts`).
"""

from __future__ import annotations

import hashlib
from dataclasses import dataclass
from typing import Any

from sqlalchemy import Connection, func, select

from exposhift.store.models import MethodVersion
from exposhift.store.writer import Writer

TABLE = MethodVersion.__table__

__all__ = [
    "StoredVersion",
    "add_method_version",
    "latest_versions",
    "method_versions",
    "row_key",
]


@dataclass(frozen=True)
class StoredVersion:
    part: str
    number: int
    text: str
    content_hash: str
    declared: str
    source: str
    created_by: str
    created_at: str

    def to_dict(self, *, with_text: bool = True) -> dict[str, Any]:
        out = {
            "part": self.part,
            "number": self.number,
            "content_hash": self.content_hash,
            "declared": self.declared,
            "source": self.source,
            "created_by": self.created_by,
            "created_at": self.created_at,
        }
        if with_text:
            out["text"] = self.text
        return out


def row_key(part: str, number: int) -> str:
    """The audit trail's name of a method version: ``rubric 2``."""
    return f"{part} {number}"


def _normalise(data: bytes) -> bytes:
    if data.startswith(b"\xef\xbb\xbf"):
        data = data[3:]
    return data.replace(b"\r\n", b"\n").replace(b"\r", b"\n")


def add_method_version(
    conn: Connection,
    user: str,
    part: str,
    data: bytes,
    declared: str,
    source: str,
    *,
    created_at: str | None = None,
) -> StoredVersion:
    """Store ``data`` (already checked by the part's parser) as the next version of ``part``.

    The text is stored with its byte-order mark dropped and LF line endings, and
    ``content_hash`` is the sha256 of exactly those bytes. ``created_at`` keeps the time of a
    version restored from an archive; new versions get the current time.
    """
    data = _normalise(data)
    text = data.decode("utf-8")
    number = (
        int(
            conn.execute(
                select(func.coalesce(func.max(TABLE.c.number), 0)).where(TABLE.c.part == part)
            ).scalar_one()
        )
        + 1
    )
    writer = Writer(conn, user, now=created_at)
    values = {
        "part": part,
        "number": number,
        "text": text,
        "content_hash": hashlib.sha256(data).hexdigest(),
        "declared": declared,
        "source": source,
        "created_by": user,
        "created_at": writer.now,
    }
    writer.insert(TABLE, values, row_key=row_key(part, number))
    writer.flush()
    return StoredVersion(**values)


def method_versions(conn: Connection, part: str | None = None) -> list[StoredVersion]:
    """Every stored version (of one part, or all), by part then number."""
    stmt = select(TABLE).order_by(TABLE.c.part, TABLE.c.number)
    if part is not None:
        stmt = stmt.where(TABLE.c.part == part)
    return [_version(r) for r in conn.execute(stmt).mappings()]


def latest_versions(conn: Connection) -> dict[str, StoredVersion]:
    """The version in force of each stored part (its highest number)."""
    newest = (
        select(TABLE.c.part, func.max(TABLE.c.number).label("number"))
        .group_by(TABLE.c.part)
        .subquery()
    )
    stmt = select(TABLE).join(
        newest, (TABLE.c.part == newest.c.part) & (TABLE.c.number == newest.c.number)
    )
    return {r["part"]: _version(r) for r in conn.execute(stmt).mappings()}


def _version(row: Any) -> StoredVersion:
    return StoredVersion(
        part=row["part"],
        number=int(row["number"]),
        text=row["text"],
        content_hash=row["content_hash"],
        declared=row["declared"],
        source=row["source"],
        created_by=row["created_by"],
        created_at=row["created_at"],
    )
