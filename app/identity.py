"""Who is using this dashboard session: the one seam every page asks.

Pages never read a typed name or a session key themselves; they call :func:`who` and pass the
identity to the services, which apply blinding and permissions. Without accounts in the evidence
base (a single-user laptop) the viewer is the name typed in the sidebar, with every role.
"""

from __future__ import annotations

from dataclasses import dataclass

import streamlit as st

ROLES = ("reader", "reviewer", "editor", "admin")


@dataclass(frozen=True)
class Identity:
    """The person behind this session: ``name`` (None when nobody is named) and ``role``."""

    name: str | None
    role: str
    signed_in: bool = False

    def may(self, role: str) -> bool:
        """True when this identity holds ``role`` or a higher one (``ROLES`` order)."""
        return ROLES.index(self.role) >= ROLES.index(role)


def who() -> Identity:
    """The identity of this session (no accounts: the sidebar's reviewer name, every role)."""
    name = (st.session_state.get("viewer") or "").strip() or None
    return Identity(name=name, role="admin")
