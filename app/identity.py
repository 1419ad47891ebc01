"""Who is using this dashboard session: the one seam every page asks.

Pages never read a typed name or a session key themselves; they call :func:`who` and pass the
identity to the services, which apply blinding and permissions (``data.appraisals(db, study,
who())``; for a write, ``data.acting(db, who())`` is the store to pass to the service).

- The evidence base has accounts, or the dashboard listens on anything but loopback: the
  person who signed in (``signin.py`` shows the form), with the role of her account, read
  afresh on every page; nobody before the sign-in or after the session expired.
- No accounts, on loopback (a single-user laptop): the operating-system user, with every role.
"""

from __future__ import annotations

import streamlit as st

import data
from exposhift.access import LOCAL, ROLES, Identity, SignInError
from exposhift.services import accounts
from exposhift.store.database import default_user

__all__ = ["ROLES", "Identity", "who", "sign_in_required", "TOKEN_KEY", "NOTICE_KEY"]

#: session_state keys: the session token (never shown), a notice for the sign-in form
TOKEN_KEY = "_exposhift_session_token"
NOTICE_KEY = "_exposhift_signin_notice"

#: the identity of a session in which nobody has signed in (reads consensus appraisals only)
NOBODY = Identity(None, "reader")


def listening_address() -> str | None:
    """The address this dashboard listens on (``exposhift dashboard --host``)."""
    return st.get_option("server.address")


def sign_in_required() -> bool:
    """True when this session must sign in: accounts exist, or the address is not loopback."""
    return accounts.sign_in_required(data.store(data.db_target()), listening_address())


def who() -> Identity:
    """The identity of this session (see the module docstring)."""
    token = st.session_state.get(TOKEN_KEY)
    store = data.store(data.db_target())
    if token:
        try:
            return accounts.session_identity(store, token)
        except SignInError as exc:
            st.session_state.pop(TOKEN_KEY, None)
            st.session_state[NOTICE_KEY] = str(exc)
            return NOBODY
    if sign_in_required():
        return NOBODY
    return Identity(default_user(), LOCAL.role)
