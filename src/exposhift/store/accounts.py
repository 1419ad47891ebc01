"""Accounts, sessions and sign-in attempts in the evidence base (store side).

Account rows are versioned and audited through :class:`~exposhift.store.writer.Writer` notes
that never carry the password hash (``password_hash`` appears in the audit trail only as
``"(set)"``). Sessions and attempts are bookkeeping: they are written in the same transaction
as the audit note that records the sign-in, sign-out or failure, and are not audited row by row.
"""

from __future__ import annotations

from typing import TYPE_CHECKING, Any

from sqlalchemy import Connection, func, insert, select, update

from exposhift.errors import ConflictError, NotFoundError
from exposhift.store.models import Account, AccountSession, SignInAttempt

if TYPE_CHECKING:  # the CLI's start-up path (open_current) imports this module
    from exposhift.store.writer import Writer

ACCOUNT = Account.__table__
SESSION = AccountSession.__table__
ATTEMPT = SignInAttempt.__table__

#: account fields shown to users and written to the audit trail (never the hash)
PUBLIC_FIELDS = ("name", "role", "disabled", "version", "created_at", "updated_at")


def _audit_view(values: dict[str, Any]) -> dict[str, Any]:
    out = {k: values[k] for k in ("name", "role", "disabled", "version") if k in values}
    if "password_hash" in values:
        out["password"] = "(set)"
    return out


# ------------------------------------------------------------------------------ accounts
def count_accounts(conn: Connection) -> int:
    return int(conn.execute(select(func.count()).select_from(ACCOUNT)).scalar_one())


def account_row(conn: Connection, name: str) -> dict[str, Any] | None:
    """The account named ``name`` exactly (with its hash), or None."""
    row = conn.execute(select(ACCOUNT).where(ACCOUNT.c.name == name)).mappings().first()
    return dict(row) if row else None


def account_folded(conn: Connection, name: str) -> dict[str, Any] | None:
    """The account whose name equals ``name`` regardless of case, or None."""
    row = (
        conn.execute(select(ACCOUNT).where(func.lower(ACCOUNT.c.name) == name.lower()))
        .mappings()
        .first()
    )
    return dict(row) if row else None


def account_rows(conn: Connection) -> list[dict[str, Any]]:
    """Every account, by name, without the hash."""
    cols = [ACCOUNT.c[f] for f in PUBLIC_FIELDS]
    return [dict(r) for r in conn.execute(select(*cols).order_by(ACCOUNT.c.name)).mappings()]


def insert_account(w: Writer, name: str, role: str, password_hash: str) -> None:
    vals = {
        "name": name,
        "role": role,
        "password_hash": password_hash,
        "disabled": False,
        "version": 1,
        "created_at": w.now,
        "updated_at": w.now,
    }
    w.conn.execute(insert(ACCOUNT).values(**vals))
    w.note("account", name, "insert", None, _audit_view(vals))


def update_account(w: Writer, name: str, expected_version: int, changes: dict[str, Any]) -> int:
    """Change an account if it is still at ``expected_version``; returns the new version."""
    before = account_row(w.conn, name)
    if before is None:
        raise NotFoundError(f"no account '{name}'; 'exposhift users list' lists them")
    vals = dict(changes, version=expected_version + 1, updated_at=w.now)
    result = w.conn.execute(
        update(ACCOUNT)
        .where(ACCOUNT.c.id == before["id"], ACCOUNT.c.version == expected_version)
        .values(**vals)
    )
    if result.rowcount != 1:
        raise ConflictError(
            f"account '{name}' was changed by someone else since it was read (version "
            f"{expected_version}, now {before['version']}); nothing was changed. Run the "
            "command again"
        )
    old = {k: before[k] for k in changes}
    old["version"] = expected_version
    w.note("account", name, "update", _audit_view(old), _audit_view(vals))
    return expected_version + 1


# ------------------------------------------------------------------------------ sessions
def insert_session(
    conn: Connection, token_hash: str, account_id: int, now: str, expires_at: str
) -> None:
    conn.execute(
        insert(SESSION).values(
            token_hash=token_hash,
            account_id=account_id,
            created_at=now,
            last_seen_at=now,
            expires_at=expires_at,
            ended_at=None,
        )
    )


def session_with_account(conn: Connection, token_hash: str) -> dict[str, Any] | None:
    """The session of ``token_hash`` with its account's name, role and disabled flag."""
    row = (
        conn.execute(
            select(
                SESSION.c.id,
                SESSION.c.created_at,
                SESSION.c.last_seen_at,
                SESSION.c.expires_at,
                SESSION.c.ended_at,
                ACCOUNT.c.name,
                ACCOUNT.c.role,
                ACCOUNT.c.disabled,
            )
            .join(ACCOUNT, ACCOUNT.c.id == SESSION.c.account_id)
            .where(SESSION.c.token_hash == token_hash)
        )
        .mappings()
        .first()
    )
    return dict(row) if row else None


def touch_session(conn: Connection, session_id: int, now: str) -> None:
    conn.execute(update(SESSION).where(SESSION.c.id == session_id).values(last_seen_at=now))


def end_session(conn: Connection, session_id: int, now: str) -> None:
    conn.execute(
        update(SESSION)
        .where(SESSION.c.id == session_id, SESSION.c.ended_at.is_(None))
        .values(ended_at=now)
    )


def end_sessions_of(conn: Connection, account_id: int, now: str) -> int:
    """End every open session of an account (disabled, role changed); returns how many."""
    result = conn.execute(
        update(SESSION)
        .where(SESSION.c.account_id == account_id, SESSION.c.ended_at.is_(None))
        .values(ended_at=now)
    )
    return int(result.rowcount or 0)


# ------------------------------------------------------------------------------ attempts
def record_attempt(conn: Connection, name: str, at: str, outcome: str) -> None:
    conn.execute(insert(ATTEMPT).values(name=name, at=at, outcome=outcome))


def failures_since(conn: Connection, name: str, since: str) -> int:
    """Failed attempts for ``name`` at or after ``since`` and after its last success."""
    last_ok = conn.execute(
        select(func.max(ATTEMPT.c.at)).where(ATTEMPT.c.name == name, ATTEMPT.c.outcome == "ok")
    ).scalar_one()
    start = max(since, last_ok) if last_ok else since
    return int(
        conn.execute(
            select(func.count())
            .select_from(ATTEMPT)
            .where(ATTEMPT.c.name == name, ATTEMPT.c.outcome == "failed", ATTEMPT.c.at >= start)
        ).scalar_one()
    )


def apply_account_role(store) -> None:
    """Give ``store`` the role of the account named like its user (the CLI's ``--user``).

    No such account: the store keeps its role (admin: whoever holds the database URL or file
    administers the evidence base; see ``docs/accounts.md``). A disabled account is refused.
    """
    from exposhift.access import AccessError

    with store.read() as conn:
        row = account_row(conn, store.user) if count_accounts(conn) else None
    if row is None:
        return
    if row["disabled"]:
        raise AccessError(
            f"the account '{store.user}' is disabled; nothing was done. Ask an administrator "
            "to enable it ('exposhift users enable')"
        )
    store.role = row["role"]
