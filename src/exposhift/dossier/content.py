"""What a dossier says, as typed dataclasses: filled by the dossier service, read by the renderers.

Nothing here computes. Numbers come from the pooling and replication services through
:mod:`exposhift.dossier.evidence`; records come from the store. The HTML and Word renderers and
the bundle writer all read one :class:`Dossier`, so the three outputs say the same.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any


@dataclass(frozen=True)
class Question:
    """One outcome's question, framed as the trial one would have run (target-trial framing:
    Hernán & Robins 2016, Am J Epidemiol 183:758), each part as recorded in the studies."""

    population: list[str]
    exposure_change: list[str]  # kind, direction, size and unit of each recorded change
    comparison: list[str]
    outcome: str
    time_zero: list[str]  # dates of change
    follow_up: list[str]  # time windows and post-change time points as recorded


@dataclass(frozen=True)
class Pooled:
    """One pooled group as the pooling service returned it, on the natural scale."""

    label: str
    k: int
    measure: str
    scale: str  # "log" (ratios, shown back-transformed) or "identity"
    estimate: float | None
    ci_lower: float | None
    ci_upper: float | None
    pi_lower: float | None
    pi_upper: float | None
    tau2: float | None
    i2: float | None
    q: float | None
    q_pvalue: float | None
    method: str
    ci_method: str
    estimates: tuple[str, ...]
    #: keys of the service result this adapter does not know (shown as they are)
    extra: dict[str, Any] = field(default_factory=dict)


@dataclass(frozen=True)
class Replication:
    status: str
    meaning: str
    rule: str
    expected: str
    independent_events: int
    triangulation: str
    extra: dict[str, Any] = field(default_factory=dict)


@dataclass(frozen=True)
class Certainty:
    """The certainty of one outcome's evidence (``rated``: a committee level is recorded)."""

    rated: bool
    rating: str
    explanation: str
    #: (domain, rating with who gave it, why) per certainty domain
    reasons: list[tuple[str, str, str]] = field(default_factory=list)
    #: the outcome's row of the summary-of-evidence table (exposhift.certainty.table.COLUMNS)
    row: dict[str, Any] = field(default_factory=dict)


@dataclass(frozen=True)
class EstimateRow:
    """One estimate as plotted: natural-scale value and interval (Wald, from the service)."""

    estimate_uid: str
    group: str
    scale: str
    study_id: str
    event_id: str
    country: str
    change_date: str
    design_family: str
    level: str
    estimate: float
    ci_lower: float
    ci_upper: float
    weight: float | None


@dataclass(frozen=True)
class TimelinePoint:
    scale: str
    event_id: str
    study_id: str
    country: str
    change_date: str
    design_family: str
    estimate: float
    ci_lower: float
    ci_upper: float
    concordant: bool | None


@dataclass(frozen=True)
class SensitivityStep:
    """One row of a sensitivity table: a leave-one-out omission, a cumulative step or a level."""

    label: str
    estimate: float | None
    ci_lower: float | None
    ci_upper: float | None
    k: int | None = None


@dataclass(frozen=True)
class Sensitivity:
    group: str
    scale: str
    leave_one_out: list[SensitivityStep]
    cumulative: list[SensitivityStep]
    by_level: list[SensitivityStep]
    notes: list[str]


@dataclass(frozen=True)
class OutcomeSection:
    outcome: str
    outcome_group: str
    question: Question
    pooled: list[Pooled]
    by_design_family: list[Pooled]
    replication: Replication
    certainty: Certainty
    forest: list[EstimateRow]
    timeline: list[TimelinePoint]
    sensitivity: Sensitivity | None
    excluded: list[dict[str, str]]
    note: str = ""  # e.g. "no poolable estimate"


@dataclass(frozen=True)
class StudyRow:
    study_id: str
    citation: str
    year: int | None
    design: str
    design_family: str
    places: str
    change_dates: str
    assignment_grade: str
    domains: dict[str, str]  # domain key -> consensus level ("0".."3")
    overall: str  # overall consensus level, "n/a" when not appraised
    used: list[str]
    left_out: list[tuple[str, str]]  # (estimate key, reason)
    demo: bool


@dataclass(frozen=True)
class Opportunity:
    event_id: str
    country: str
    change_date: str
    change: str
    family: str
    needs: str


@dataclass(frozen=True)
class GapCell:
    outcome_group: str
    state: str
    state_rule: str
    events: int
    studies: int
    unevaluated_events: int


@dataclass(frozen=True)
class Provenance:
    rubric_id: str
    rubric_version: str
    rubric_hash: str
    rubric_rule: str
    estimators: dict[str, Any]
    thresholds: dict[str, Any]
    software_version: str
    fingerprint: str
    made_at: str
    records: int
    audit_head: str | None  # head of the audit hash chain, None = not recorded
    #: the method parts used: part -> stored version number, hash, declared version, source,
    #: one-run override (services.workspace.MethodInForce.to_dict)
    method: dict[str, Any] = field(default_factory=dict)


@dataclass(frozen=True)
class Change:
    """One line of the 'what changed' list."""

    kind: str  # record-added, record-removed, record-changed, pooled-moved, status-changed, ...
    key: str
    field: str = ""
    old: str = ""
    new: str = ""


@dataclass(frozen=True)
class DossierDiff:
    old_fingerprint: str
    new_fingerprint: str
    old_made_at: str
    new_made_at: str
    changes: list[Change]

    def of_kind(self, kind: str) -> list[Change]:
        return [c for c in self.changes if c.kind == kind]

    def to_dict(self) -> dict[str, Any]:
        return {
            "old": {"fingerprint": self.old_fingerprint, "made_at": self.old_made_at},
            "new": {"fingerprint": self.new_fingerprint, "made_at": self.new_made_at},
            "changes": [c.__dict__ for c in self.changes],
        }


@dataclass(frozen=True)
class Dossier:
    exposure: str
    outcomes: list[str]
    sections: list[OutcomeSection]
    studies: list[StudyRow]
    domains: list[tuple[str, str]]  # (key, title) in rubric order
    level_names: list[str]  # "0 fatal", ... (the rubric's scale)
    gaps: list[GapCell]
    opportunities: list[Opportunity]
    provenance: Provenance
    demo: bool
    demo_note: str
    cautions: list[str]
    changes: DossierDiff | None = None
    warnings: list[str] = field(default_factory=list)
