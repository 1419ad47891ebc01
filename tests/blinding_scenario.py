"""An invented review in progress, for the blinding and sign-in tests (not demo evidence).

Four studies, each independent appraisal with a unique marker in its justification, so any
output can be searched for a rating that should not be there:

- ``B0``: only ana has submitted;
- ``B1``: ana and ben have submitted;
- ``B2``: ana and ben have submitted and the chair (ed) recorded the consensus;
- ``B3``: ben and cy have submitted (ana is not one of its reviewers).

Accounts: ana, ben, cy (reviewer), rita (reader), ed (editor), root (admin); every password is
``PASSWORDS[name]``.

``VISIBLE`` is the expected visibility written out by hand from the rule of issue 13 ("a
reviewer sees another reviewer's independent appraisal of a study only after both have
submitted theirs, or after the consensus; readers see consensus appraisals only"), with the
chair (editor, admin) seeing them once two are in; the tests compare the services with it.
"""

from __future__ import annotations

from pathlib import Path

import pandas as pd

from exposhift.store import records
from exposhift.store.writer import Writer

DOMAINS = [
    "origin",
    "counterfactual",
    "design_checks",
    "falsification",
    "timing",
    "concurrent_changes",
    "exposure_shift",
    "outcome_data",
    "inference",
    "transparency",
    "applicability",
]
ROLES = {
    "ana": "reviewer",
    "ben": "reviewer",
    "cy": "reviewer",
    "rita": "reader",
    "ed": "editor",
    "root": "admin",
}
PASSWORDS = {name: f"long-pass-of-{name}" for name in ROLES}
INDEPENDENT = {"B0": ["ana"], "B1": ["ana", "ben"], "B2": ["ana", "ben"], "B3": ["ben", "cy"]}
CONSENSUS = {"B2": "ed"}

_ALL = {(s, r) for s, rs in INDEPENDENT.items() for r in rs}
_CHAIR = {(s, r) for s, r in _ALL if s != "B0"}
VISIBLE: dict[str, set[tuple[str, str]]] = {
    "ana": {("B0", "ana"), ("B1", "ana"), ("B1", "ben"), ("B2", "ana"), ("B2", "ben")},
    "ben": {
        ("B1", "ana"),
        ("B1", "ben"),
        ("B2", "ana"),
        ("B2", "ben"),
        ("B3", "ben"),
        ("B3", "cy"),
    },
    "cy": {("B2", "ana"), ("B2", "ben"), ("B3", "ben"), ("B3", "cy")},
    "rita": set(),
    "ed": _CHAIR,
    "root": _CHAIR,
}


def marker(study: str, reviewer: str) -> str:
    """The justification text that identifies one independent appraisal in any output."""
    return f"why-{study}-{reviewer}-marker"


CONSENSUS_MARKER = "why-B2-consensus-marker"


def _row(study: str, reviewer: str, stage: str, why: str, level: int = 2) -> dict:
    row = {"study_id": study, "reviewer": reviewer, "stage": stage}
    row.update({d: str(level) for d in DOMAINS})
    row["origin_why"] = why
    return row


def appraisal_rows() -> list[dict]:
    rows = [
        _row(s, r, "independent", marker(s, r), 2 if r == "ana" else 3)
        for s, rs in INDEPENDENT.items()
        for r in rs
    ]
    rows += [_row(s, who, "consensus", CONSENSUS_MARKER) for s, who in CONSENSUS.items()]
    return rows


def build(store, tmp_path: Path) -> None:
    """Studies, appraisals and accounts of the scenario in ``store`` (an admin store)."""
    from exposhift.services.accounts import add_account
    from exposhift.services.appraising import import_appraisals

    with store.write() as conn:
        w = Writer(conn, "tester")
        exp = records.ensure_vocab(w, "exposure", "invented-agent")
        out = records.ensure_vocab(w, "outcome", "invented-outcome")
        ev = records.create(
            w,
            "event",
            {
                "key": "BE",
                "exposure_id": exp,
                "change_kind": "ban",
                "change_direction": "decrease",
                "country": "FRA",
                "change_date": "2000",
            },
        )
        for s in INDEPENDENT:
            sid = records.create(
                w,
                "study",
                {
                    "key": s,
                    "citation": f"Invented study {s}",
                    "year": 2005,
                    "design": "did",
                    "comparison": "unexposed regions",
                    "checks": "pre-trends; placebo-date; negative-control-outcome",
                    "demo": True,
                },
            )
            records.create(
                w,
                "estimate",
                {
                    "key": f"{s}|BE|invented-outcome|RR|change||",
                    "study_id": sid,
                    "event_id": ev,
                    "outcome_id": out,
                    "measure": "RR",
                    "point": 0.9,
                    "ci_low": 0.8,
                    "ci_high": 1.0,
                },
            )
        w.flush()
    path = tmp_path / "scenario-appraisals.csv"
    pd.DataFrame(appraisal_rows()).to_csv(path, index=False)
    import_appraisals(store, path)
    for name, role in ROLES.items():
        add_account(store, name, role, PASSWORDS[name])


def every_marker() -> set[str]:
    return {marker(s, r) for s, r in _ALL}


def hidden_markers(viewer: str) -> set[str]:
    """Markers of the independent appraisals ``viewer`` may not see."""
    return {marker(s, r) for s, r in _ALL - VISIBLE[viewer]}


def visible_markers(viewer: str) -> set[str]:
    return {marker(s, r) for s, r in VISIBLE[viewer]}
