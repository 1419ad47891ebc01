"""Who may do what: roles, the acting identity, and the blinding rule (pure, no database).

Four roles, each holding every right of the ones before it (``ROLES`` order):

- ``reader``: reads the evidence base; sees **consensus** appraisals only; writes nothing.
- ``reviewer``: also records her own independent appraisals. She sees another reviewer's
  independent appraisal of a study only once both have submitted theirs (she is one of the
  independent reviewers of a study with two or more), or once the consensus is recorded.
- ``editor``: also imports and edits records and records the consensus. As the chair who
  settles a consensus, an editor sees the independent appraisals of a study once two are in.
- ``admin``: also manages accounts, exports the whole evidence base, blinded appraisals
  included, and imports any reviewer's independent appraisal (anyone else imports another
  reviewer's only where the base already shows it to her: ``services/blind_imports.py``).

These names are the generic ones of shared editing tools; the rules above are this project's
own (see ``docs/accounts.md``). A person always sees her own appraisals.
"""

from __future__ import annotations

from collections.abc import Collection
from dataclasses import dataclass

from exposhift.errors import ExposhiftError

ROLES = ("reader", "reviewer", "editor", "admin")

#: what each action needs (the lowest role that may do it) and how a refusal names it
ACTIONS: dict[str, tuple[str, str]] = {
    "write": ("reviewer", "change the evidence base"),
    "appraise": ("reviewer", "record an independent appraisal"),
    "appraise-others": ("editor", "record an appraisal under another reviewer's name"),
    "consensus": ("editor", "record a consensus appraisal"),
    "edit": ("editor", "import or edit studies, events, estimates and directions"),
    "accounts": ("admin", "manage accounts"),
    "replace": ("admin", "replace stored appraisals from an archive (--replace)"),
    "export-blinded": ("admin", "export appraisals that are still blinded"),
}

#: independent appraisals of a study before the chair (editor, admin) sees them
REVIEWERS_BEFORE_UNBLINDING = 2


class AccessError(ExposhiftError):
    """The acting identity may not do this (its role is too low, or nobody is signed in)."""

    exit_code = 7


class SignInError(ExposhiftError):
    """A sign-in was refused (wrong name or password, disabled, rate limited, expired)."""

    exit_code = 7


def check_role(role: str, *, where: str = "role") -> str:
    """``role`` if it is one of ``ROLES``; else an error that lists them."""
    if role not in ROLES:
        raise AccessError(f"{where} '{role}' is not a role; accepted: {', '.join(ROLES)}")
    return role


@dataclass(frozen=True)
class Identity:
    """The person acting: ``name`` (None when nobody is named), ``role`` and whether the name
    was proven by a sign-in (``signed_in``) or taken from the command line / OS user."""

    name: str | None
    role: str
    signed_in: bool = False

    def __post_init__(self) -> None:
        check_role(self.role)

    def may(self, role: str) -> bool:
        """True when this identity holds ``role`` or a higher one (``ROLES`` order)."""
        return ROLES.index(self.role) >= ROLES.index(check_role(role))

    def may_do(self, action: str) -> bool:
        return self.may(ACTIONS[action][0])

    def require(self, action: str) -> None:
        """Raise :class:`AccessError` unless this identity may do ``action``."""
        needed, what = ACTIONS[action]
        if not self.may(needed):
            who = f"'{self.name}'" if self.name else "this session"
            raise AccessError(
                f"{who} has the role {self.role} and may not {what} (needs {needed} or "
                "higher); nothing was changed. Ask an administrator to change the role with "
                "'exposhift users set-role'"
            )


#: the identity of a caller that names nobody (a local, single-user evidence base)
LOCAL = Identity(None, "admin")


def may_see_independent(
    viewer: Identity,
    reviewer: str,
    independent_reviewers: Collection[str],
    has_consensus: bool,
) -> bool:
    """May ``viewer`` see ``reviewer``'s independent appraisal of a study whose independent
    reviewers are ``independent_reviewers`` (``has_consensus``: a consensus is recorded)?

    The rule of the module docstring: one's own always; a reader never another's; a reviewer
    once she and at least one other have submitted, or after the consensus; an editor or
    admin once two are in, or after the consensus.
    """
    if viewer.name is not None and viewer.name == reviewer:
        return True
    if not viewer.may("reviewer"):
        return False
    if has_consensus:
        return True
    enough = len(set(independent_reviewers)) >= REVIEWERS_BEFORE_UNBLINDING
    if viewer.may("editor"):
        return enough
    return enough and viewer.name in set(independent_reviewers)


def hidden_reason(viewer: Identity) -> str:
    """Why an independent appraisal is hidden from ``viewer`` (shown in its place)."""
    if not viewer.may("reviewer"):
        return "hidden: readers see consensus appraisals only"
    if viewer.may("editor"):
        return "hidden until both independent appraisals are in"
    return "hidden until you and another reviewer have both submitted, or the consensus is in"


def require(store, action: str) -> None:
    """Raise :class:`AccessError` unless the person a store acts for (its ``user`` and
    ``role``) may do ``action``: the check every write service makes before writing."""
    Identity(store.user, store.role).require(action)
