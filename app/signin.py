"""The sign-in form and the sidebar's "signed in as" box with its sign-out button.

``gate()`` is called by ``exposhift_app.py`` before the sidebar and the pages: when the session
must sign in (accounts exist, or the dashboard listens beyond loopback) and nobody has, it shows
the form and returns False; the app then stops, so no page, table or download is reached.
"""

from __future__ import annotations

import identity
import streamlit as st

import data
from exposhift.access import SignInError
from exposhift.services import accounts


def gate() -> bool:
    """True when this session may see the pages; otherwise the sign-in form is shown."""
    if not identity.sign_in_required() or identity.who().signed_in:
        return True
    _form()
    return False


def _form() -> None:
    store = data.store(data.db_target())
    st.title("Sign in to exposhift")
    st.caption(f"Evidence base: `{data.db_label(data.db_target())}`")
    notice = st.session_state.pop(identity.NOTICE_KEY, None)
    if notice:
        st.warning(notice)
    if not accounts.accounts_exist(store):
        st.warning(
            "This dashboard is served beyond this machine, so everyone signs in, but the "
            "evidence base has no accounts yet. An administrator adds them with "
            "`exposhift users add NAME --role ROLE`."
        )
    with st.form("signin_form", clear_on_submit=False):
        name = st.text_input("Name", key="signin_name")
        password = st.text_input("Password", type="password", key="signin_password")
        submitted = st.form_submit_button("Sign in")
    if submitted:
        try:
            signed = accounts.sign_in(store, name, password)
        except SignInError as exc:
            st.error(str(exc))
            return
        st.session_state[identity.TOKEN_KEY] = signed.token
        st.session_state.pop("signin_password", None)
        st.rerun()
    idle = accounts.session_idle().total_seconds() / 60
    most = accounts.session_max().total_seconds() / 3600
    st.caption(
        f"Sessions end after {idle:g} minutes without use, {most:g} hours after signing in, "
        "or when you sign out. Failed sign-ins are recorded in the audit trail."
    )


def sidebar_box() -> None:
    """Who this session is, and the sign-out button (in the sidebar)."""
    who = identity.who()
    if who.signed_in:
        st.caption(f"Signed in as **{who.name}** ({who.role})")
        if st.button("Sign out", key="signout"):
            token = st.session_state.pop(identity.TOKEN_KEY, None)
            accounts.sign_out(data.store(data.db_target()), token or "")
            st.session_state[identity.NOTICE_KEY] = "You have signed out."
            st.rerun()
    else:
        st.caption(
            f"Local session as **{who.name}** (no accounts in this evidence base; it is "
            "served to this machine only)"
        )
