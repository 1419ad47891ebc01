"""Accounts, sign-in, sessions and the acting identity: one function per user action.

- **Passwords** are hashed with Argon2id (argon2-cffi's ``PasswordHasher`` defaults, the
  RFC 9106 second recommended option: 64 MiB, 3 passes); the password is never stored or
  logged. A name that has no account is checked against a dummy hash, so a wrong name and a
  wrong password take the same time and get the same message.
- **Rate limit**: after ``FAILED_SIGN_INS_ALLOWED`` failed sign-ins for one name within
  ``RATE_WINDOW`` (since its last success) further attempts for that name are refused without
  checking the password until the window has passed. Names with and without an account are
  limited alike (no hint whether one exists). Five tries in fifteen minutes is common practice,
  not a sourced value; NIST SP 800-63B 5.2.2 allows up to 100 consecutive failures.
- **Sessions** end ``SESSION_IDLE`` after their last use and ``SESSION_MAX`` after the sign-in
  (``EXPOSHIFT_SESSION_IDLE_MINUTES``, ``EXPOSHIFT_SESSION_MAX_HOURS``), at sign-out, and when
  the account is disabled. Tokens are random (``secrets.token_urlsafe``); only their SHA-256 is
  stored.
- **Audit**: every account change, sign-in, sign-out and failed or refused sign-in is an entry
  in the hash-chained audit trail (table ``account``; the hash never appears there).

Every function takes ``now`` (an aware UTC datetime) for tests; by default the clock.
"""

from __future__ import annotations

import functools
import hashlib
import os
import secrets
from dataclasses import dataclass
from datetime import UTC, datetime, timedelta

from argon2 import PasswordHasher
from argon2.exceptions import InvalidHashError, VerificationError, VerifyMismatchError

from exposhift.access import LOCAL, AccessError, Identity, SignInError, check_role
from exposhift.errors import ConfigError, ConflictError, NotFoundError
from exposhift.store import accounts as db
from exposhift.store.database import Store
from exposhift.store.writer import Writer

FAILED_SIGN_INS_ALLOWED = 5
RATE_WINDOW = timedelta(minutes=15)
PASSWORD_MIN, PASSWORD_MAX = 8, 1024  # NIST SP 800-63B 5.1.1.2: at least 8 characters
NAME_MAX = 64
#: names the dashboard and the tools use for themselves; no account may take them
RESERVED_NAMES = ("dashboard",)

WRONG = "sign-in failed: the name or the password is wrong"
EXPIRED = "your session has expired or was ended; sign in again"

_HASHER = PasswordHasher()


@functools.cache
def _dummy_hash() -> str:
    """A hash to check a password against when the name has no account (same cost)."""
    return _HASHER.hash(secrets.token_urlsafe(16))


def _minutes_env(var: str, default: float) -> float:
    raw = os.environ.get(var)
    if raw is None or raw == "":
        return default
    try:
        value = float(raw)
    except ValueError:
        value = -1
    if not value > 0:
        raise ConfigError(f"{var}={raw!r} is not a positive number; unset it or give e.g. 60")
    return value


def session_idle() -> timedelta:
    return timedelta(minutes=_minutes_env("EXPOSHIFT_SESSION_IDLE_MINUTES", 60))


def session_max() -> timedelta:
    return timedelta(hours=_minutes_env("EXPOSHIFT_SESSION_MAX_HOURS", 12))


def _stamp(when: datetime) -> str:
    return when.astimezone(UTC).strftime("%Y-%m-%dT%H:%M:%S.%fZ")


def _parse(text: str) -> datetime:
    return datetime.strptime(text, "%Y-%m-%dT%H:%M:%S.%fZ").replace(tzinfo=UTC)


def _now(now: datetime | None) -> datetime:
    return now if now is not None else datetime.now(UTC)


def _token_hash(token: str) -> str:
    return hashlib.sha256(token.encode("utf-8")).hexdigest()


# ------------------------------------------------------------------------------ accounts
@dataclass(frozen=True)
class AccountView:
    name: str
    role: str
    disabled: bool
    created_at: str
    updated_at: str
    version: int


def _view(row: dict) -> AccountView:
    return AccountView(
        row["name"],
        row["role"],
        bool(row["disabled"]),
        row["created_at"],
        row["updated_at"],
        row["version"],
    )


def check_name(name: str) -> str:
    """An account name: 1-64 printable characters, no spaces at either end, not reserved."""
    if not name or name != name.strip():
        raise ConfigError(f"account name {name!r} is empty or has spaces at its ends; give a name")
    if len(name) > NAME_MAX:
        raise ConfigError(f"account name is {len(name)} characters; give at most {NAME_MAX}")
    if not name.isprintable() or "|" in name:
        raise ConfigError(
            f"account name {name!r} holds a control character or '|'; use letters, digits, "
            "spaces, '.', '-', '_' or '@'"
        )
    if name.casefold() in RESERVED_NAMES:
        raise ConfigError(f"'{name}' is reserved for the tool itself; choose another name")
    return name


def check_password(password: str) -> str:
    if len(password) < PASSWORD_MIN:
        raise ConfigError(
            f"the password has {len(password)} characters; give at least {PASSWORD_MIN} "
            "(a passphrase of several words is easiest to remember)"
        )
    if len(password) > PASSWORD_MAX:
        raise ConfigError(
            f"the password is longer than {PASSWORD_MAX} characters; give a shorter one"
        )
    return password


def _admin(store: Store) -> None:
    Identity(store.user, store.role).require("accounts")


def add_account(store: Store, name: str, role: str, password: str) -> AccountView:
    """Create an account (needs an admin, or nobody named by an account: see docs)."""
    _admin(store)
    check_name(name)
    check_role(role)
    check_password(password)
    hashed = _HASHER.hash(password)
    with store.write() as conn:
        clash = db.account_folded(conn, name)
        if clash is not None:
            raise ConflictError(
                f"an account '{clash['name']}' exists already (names match without regard to "
                "case); nothing was changed. Use 'exposhift users set-role' to change its role"
            )
        w = Writer(conn, store.user)
        db.insert_account(w, name, role, hashed)
        w.flush()
        row = db.account_row(conn, name)
    return _view(row)


def list_accounts(store: Store) -> list[AccountView]:
    with store.read() as conn:
        return [_view(r) for r in db.account_rows(conn)]


def accounts_exist(store: Store) -> bool:
    with store.read() as conn:
        return db.count_accounts(conn) > 0


def _change(store: Store, name: str, now: datetime | None, **changes) -> AccountView:
    _admin(store)
    stamp = _stamp(_now(now))
    with store.write() as conn:
        row = db.account_row(conn, name)
        if row is None:
            raise NotFoundError(f"no account '{name}'; 'exposhift users list' lists them")
        if all(row[k] == v for k, v in changes.items() if k != "password_hash"):
            if "password_hash" not in changes:
                return _view(row)
        demoted = changes.get("role", row["role"]) != "admin" or changes.get("disabled")
        if row["role"] == "admin" and not row["disabled"] and demoted:
            admins = [
                a for a in db.account_rows(conn) if a["role"] == "admin" and not a["disabled"]
            ]
            if len(admins) == 1:
                raise AccessError(
                    f"'{name}' is the last active admin account; nothing was changed. Give "
                    "another account the role admin first, so someone can still manage accounts "
                    "from the dashboard"
                )
        w = Writer(conn, store.user, now=stamp)
        db.update_account(w, name, row["version"], changes)
        if changes.get("disabled") or "password_hash" in changes:
            db.end_sessions_of(conn, row["id"], stamp)
        w.flush()
        return _view(db.account_row(conn, name))


def set_role(store: Store, name: str, role: str, *, now: datetime | None = None) -> AccountView:
    """Give ``name`` another role (takes effect on the next page of an open session)."""
    return _change(store, name, now, role=check_role(role))


def disable_account(store: Store, name: str, *, now: datetime | None = None) -> AccountView:
    """Disable ``name``: no more sign-ins, and its open sessions end."""
    return _change(store, name, now, disabled=True)


def enable_account(store: Store, name: str, *, now: datetime | None = None) -> AccountView:
    return _change(store, name, now, disabled=False)


def set_password(
    store: Store, name: str, password: str, *, now: datetime | None = None
) -> AccountView:
    """Replace the password of ``name``; its open sessions end."""
    return _change(store, name, now, password_hash=_HASHER.hash(check_password(password)))


# ------------------------------------------------------------------------------ sign-in
@dataclass(frozen=True)
class SignedIn:
    token: str  # keep it in the session; only its hash is stored
    identity: Identity
    expires_at: str


def _failed(store: Store, typed: str, stamp: str, outcome: str, why: str) -> None:
    with store.write(bookkeeping=True) as conn:
        db.record_attempt(conn, typed.casefold(), stamp, outcome)
        w = Writer(conn, typed, now=stamp)
        w.note("account", typed, "sign-in refused", None, {"reason": why})
        w.flush()


def sign_in(store: Store, name: str, password: str, *, now: datetime | None = None) -> SignedIn:
    """Check a name and password; on success a new session token. Every refusal is audited."""
    when = _now(now)
    stamp = _stamp(when)
    typed = (name or "").strip()[: NAME_MAX + 1]
    with store.read() as conn:
        fails = db.failures_since(conn, typed.casefold(), _stamp(when - RATE_WINDOW))
        row = db.account_folded(conn, typed) if typed else None
    if fails >= FAILED_SIGN_INS_ALLOWED:
        _failed(store, typed, stamp, "limited", "rate limited")
        minutes = int(RATE_WINDOW.total_seconds() // 60)
        raise SignInError(
            f"sign-in refused: {fails} failed attempts for this name in the last {minutes} "
            "minutes; wait a while and try again, or ask an administrator"
        )
    ok = _verify(row["password_hash"] if row else _dummy_hash(), password or "")
    if not ok or row is None:
        _failed(store, typed, stamp, "failed", "wrong name or password")
        raise SignInError(WRONG)
    if row["disabled"]:
        _failed(store, typed, stamp, "failed", "account disabled")
        raise SignInError(
            f"the account '{row['name']}' is disabled; ask an administrator to enable it"
        )
    token = secrets.token_urlsafe(32)
    expires = _stamp(when + session_max())
    with store.write(bookkeeping=True) as conn:
        db.record_attempt(conn, typed.casefold(), stamp, "ok")
        db.insert_session(conn, _token_hash(token), row["id"], stamp, expires)
        if _HASHER.check_needs_rehash(row["password_hash"]):
            w0 = Writer(conn, row["name"], now=stamp)
            db.update_account(
                w0, row["name"], row["version"], {"password_hash": _HASHER.hash(password)}
            )
            w0.flush()
        w = Writer(conn, row["name"], now=stamp)
        w.note("account", row["name"], "sign-in", None, {"role": row["role"]})
        w.flush()
    return SignedIn(token, Identity(row["name"], row["role"], signed_in=True), expires)


def _verify(hashed: str, password: str) -> bool:
    try:
        return _HASHER.verify(hashed, password)
    except (VerifyMismatchError, VerificationError, InvalidHashError):
        return False


def session_identity(store: Store, token: str, *, now: datetime | None = None) -> Identity:
    """The identity of an open session; :class:`SignInError` once it has expired or ended.

    The role is read afresh from the account on every call, so a role change applies at once.
    """
    when = _now(now)
    with store.read() as conn:
        row = db.session_with_account(conn, _token_hash(token or ""))
    if row is None or row["ended_at"] is not None:
        raise SignInError(EXPIRED)
    idle = when - _parse(row["last_seen_at"])
    if when >= _parse(row["expires_at"]) or idle >= session_idle():
        with store.write(bookkeeping=True) as conn:
            db.end_session(conn, row["id"], _stamp(when))
            w = Writer(conn, row["name"], now=_stamp(when))
            w.note("account", row["name"], "session expired", None, None)
            w.flush()
        raise SignInError(EXPIRED)
    if row["disabled"]:
        raise SignInError(f"the account '{row['name']}' is disabled; ask an administrator")
    if idle >= timedelta(minutes=1):  # one bookkeeping write a minute at most
        with store.write(bookkeeping=True) as conn:
            db.touch_session(conn, row["id"], _stamp(when))
    return Identity(row["name"], row["role"], signed_in=True)


def sign_out(store: Store, token: str, *, now: datetime | None = None) -> None:
    """End the session of ``token`` (audited); an unknown or ended token changes nothing."""
    stamp = _stamp(_now(now))
    with store.write(bookkeeping=True) as conn:
        row = db.session_with_account(conn, _token_hash(token or ""))
        if row is None or row["ended_at"] is not None:
            return
        db.end_session(conn, row["id"], stamp)
        w = Writer(conn, row["name"], now=stamp)
        w.note("account", row["name"], "sign-out", None, None)
        w.flush()


# ------------------------------------------------------------------------------ acting identity
def store_identity(store: Store) -> Identity:
    """The identity a store acts as (its audit user and role)."""
    return Identity(store.user, store.role)


def acting_store(store: Store, identity: Identity) -> Store:
    """A view of ``store`` that writes as ``identity`` (audit user and role checks).

    The dashboard passes its signed-in identity here before calling a write service; a
    ``reader`` view refuses every write with a clear error.
    """
    if identity.name is None:
        if identity.role != LOCAL.role:
            raise AccessError("nobody is signed in; sign in first")
        return store.acting(store.user, identity.role)
    return store.acting(identity.name, identity.role)


def viewer_of(store: Store, viewer: Identity | str | None) -> Identity:
    """The identity blinding is applied for: an :class:`Identity` as given; a name, with the
    role of its account (else the store's role); None, the store's own identity."""
    if isinstance(viewer, Identity):
        return viewer
    if viewer is None:
        return store_identity(store)
    with store.read() as conn:
        row = db.account_row(conn, viewer) if db.count_accounts(conn) else None
    return Identity(viewer, row["role"] if row else store.role)


LOOPBACK = ("127.0.0.1", "localhost", "::1", "[::1]")


def is_loopback(address: str | None) -> bool:
    """True when a server listening on ``address`` is reachable from this machine only.

    ``None`` or ``""`` (Streamlit's default: every interface) and ``0.0.0.0`` are not.
    """
    if not address:
        return False
    return address.strip().lower() in LOOPBACK or address.strip().startswith("127.")


def sign_in_required(store: Store, address: str | None) -> bool:
    """The dashboard asks for a sign-in when the evidence base has accounts, and always when it
    listens on anything but loopback."""
    return not is_loopback(address) or accounts_exist(store)


def dashboard_target(db: str | None, address: str) -> dict:
    """What ``exposhift dashboard`` serves (:func:`~exposhift.services.setup.database_info`),
    refused when it would listen beyond this machine on an evidence base without accounts
    (nobody could sign in)."""
    from exposhift.services.setup import database_info, open_current

    info = database_info(db)
    if not is_loopback(address):
        store = open_current(db)
        try:
            has = accounts_exist(store)
        finally:
            store.dispose()
        if not has:
            raise ConfigError(
                f"--host {address} serves the dashboard to other machines, where everyone "
                "signs in, but this evidence base has no accounts yet; add one first with "
                "'exposhift users add NAME --role admin'"
            )
    return info
