"""Tables of the evidence base (SQLModel).

Conventions (see DEVELOPERS.md):
- every editable row has ``version`` (optimistic locking, checked by :mod:`exposhift.store.writer`);
- natural keys (``key``) are what users and files name; integer ids never leave the store;
- controlled vocabularies are plain strings validated in :mod:`exposhift.vocab` (no native
  enums, so PostgreSQL and SQLite hold the same schema);
- timestamps are ISO-8601 UTC strings with a ``Z`` suffix (timezone-aware, sortable, identical on
  both backends);
- harmonised analysis-scale values are derived at analysis time, never stored.
"""

from __future__ import annotations

from sqlalchemy import Column, ForeignKey, Integer, UniqueConstraint
from sqlmodel import Field, SQLModel

from exposhift.keys import NATURAL_KEY  # noqa: F401  (declared once there; re-exported)

metadata = SQLModel.metadata
metadata.naming_convention = {
    "ix": "ix_%(column_0_label)s",
    "uq": "uq_%(table_name)s_%(column_0_name)s",
    "ck": "ck_%(table_name)s_%(constraint_name)s",
    "fk": "fk_%(table_name)s_%(column_0_name)s_%(referred_table_name)s",
    "pk": "pk_%(table_name)s",
}


def _fk(target: str, *, cascade: bool = False, nullable: bool = False) -> Column:
    return Column(
        Integer,
        ForeignKey(target, ondelete="CASCADE" if cascade else "RESTRICT"),
        nullable=nullable,
        index=True,
    )


class Exposure(SQLModel, table=True):
    """An exposure agent (controlled vocabulary, grows on import)."""

    __tablename__ = "exposure"
    id: int | None = Field(default=None, primary_key=True)
    name: str = Field(unique=True)
    agent_class: str | None = None
    version: int = 1


class Outcome(SQLModel, table=True):
    """An outcome with its group (controlled vocabulary, grows on import)."""

    __tablename__ = "outcome"
    id: int | None = Field(default=None, primary_key=True)
    name: str = Field(unique=True)
    outcome_group: str | None = None
    version: int = 1


class Event(SQLModel, table=True):
    """An exposure-change event. Events exist without studies: that is how gaps are found."""

    __tablename__ = "event"
    id: int | None = Field(default=None, primary_key=True)
    key: str = Field(unique=True)
    exposure_id: int = Field(sa_column=_fk("exposure.id"))
    change_kind: str
    change_direction: str
    change_size: float | None = None
    change_unit: str | None = None
    country: str = Field(index=True)
    area: str | None = None
    change_date: str  # YYYY, YYYY-MM or YYYY-MM-DD: the precision is kept
    date_precision: str
    family: str | None = None
    demo: bool = False
    version: int = 1
    created_at: str
    updated_at: str


class Study(SQLModel, table=True):
    """One evaluated natural experiment as reported in one publication."""

    __tablename__ = "study"
    id: int | None = Field(default=None, primary_key=True)
    key: str = Field(unique=True)
    citation: str
    year: int
    doi: str | None = None
    design: str
    comparison: str | None = None
    population: str | None = None
    data_source: str | None = None
    same_population_as: str | None = None  # ';'-separated study keys (overlapping populations)
    assignment_grade: int | None = None
    pre_points: int | None = None
    post_points: int | None = None
    checks: str | None = None  # ';'-separated, normalised codes
    demo: bool = False
    version: int = 1
    created_at: str
    updated_at: str


class Estimate(SQLModel, table=True):
    """One effect estimate as the paper reported it (study x event x outcome)."""

    __tablename__ = "estimate"
    id: int | None = Field(default=None, primary_key=True)
    key: str = Field(unique=True)  # study|event|outcome|measure|kind|subgroup|window
    study_id: int = Field(sa_column=_fk("study.id"))
    event_id: int = Field(sa_column=_fk("event.id"))
    outcome_id: int = Field(sa_column=_fk("outcome.id"))
    measure: str
    estimate_kind: str = "change"
    per_unit: float | None = None
    point: float
    ci_low: float | None = None
    ci_high: float | None = None
    ci_level: float | None = None
    se: float | None = None
    p_value: float | None = None
    p_bound: bool = False  # the p value was reported as a bound ("p < x")
    baseline_risk: float | None = None
    subgroup: str | None = None
    time_window: str | None = None
    primary: bool = False
    version: int = 1
    created_at: str
    updated_at: str


class Appraisal(SQLModel, table=True):
    """One reviewer's appraisal of one study at one stage (independent or consensus)."""

    __tablename__ = "appraisal"
    __table_args__ = (UniqueConstraint("study_id", "reviewer", "stage"),)
    id: int | None = Field(default=None, primary_key=True)
    study_id: int = Field(sa_column=_fk("study.id"))
    reviewer: str
    stage: str
    rubric_id: str
    rubric_hash: str
    overall: int | None = None
    version: int = 1
    created_at: str
    updated_at: str


class Rating(SQLModel, table=True):
    """One domain rating inside an appraisal."""

    __tablename__ = "rating"
    __table_args__ = (UniqueConstraint("appraisal_id", "domain"),)
    id: int | None = Field(default=None, primary_key=True)
    appraisal_id: int = Field(sa_column=_fk("appraisal.id", cascade=True))
    domain: str
    level: int
    reporting: str | None = None
    justification: str | None = None
    suggested_level: int | None = None
    suggestion_reason: str | None = None


class AuditEntry(SQLModel, table=True):
    """Who changed what, when, with the values before and after (JSON).

    ``prev_hash`` / ``entry_hash`` chain the entries (see :mod:`exposhift.store.audit_chain`).
    """

    __tablename__ = "audit_entry"
    id: int | None = Field(default=None, primary_key=True)
    at: str = Field(index=True)
    user: str
    table_name: str
    row_key: str = Field(index=True)
    action: str  # insert, update, delete
    before: str | None = None
    after: str | None = None
    prev_hash: str | None = None
    entry_hash: str | None = None


#: tables that carry a ``version`` column and a natural key
VERSIONED = {
    "exposure": Exposure,
    "outcome": Outcome,
    "event": Event,
    "study": Study,
    "estimate": Estimate,
    "appraisal": Appraisal,
}

#: the column that names a row for users and in the audit trail


# ---------------------------------------------------------------------- expected directions
class ExpectedDirection(SQLModel, table=True):
    """The committee's pre-specified direction of effect for one exposure x outcome.

    ``direction`` is ``raises`` or ``lowers``: what an exposure *increase* does to the outcome.
    Written only through :mod:`exposhift.store.directions` (versioned, audited).
    """

    __tablename__ = "expected_direction"
    __table_args__ = (UniqueConstraint("exposure_id", "outcome_id"),)
    id: int | None = Field(default=None, primary_key=True)
    exposure_id: int = Field(sa_column=_fk("exposure.id"))
    outcome_id: int = Field(sa_column=_fk("outcome.id"))
    direction: str
    rationale: str
    decided_by: str
    decided_at: str  # ISO-8601 UTC with a Z suffix
    version: int = 1
    created_at: str
    updated_at: str


# ------------------------------------------------------------------------------ series records
class Series(SQLModel, table=True):
    """A series extracted from a study's table or figure, for one event and one outcome.

    ``role``: ``exposed`` (the place that changed), ``comparison`` (a place that did not) or
    ``negative-control`` (an outcome the change cannot plausibly affect, in the exposed place).
    ``change_at`` overrides the first post-change period (default: the period holding the
    event's change date).
    """

    __tablename__ = "series"
    id: int | None = Field(default=None, primary_key=True)
    key: str = Field(unique=True)
    study_id: int = Field(sa_column=_fk("study.id"))
    event_id: int = Field(sa_column=_fk("event.id"))
    outcome_id: int = Field(sa_column=_fk("outcome.id"))
    role: str
    place: str | None = None
    time_unit: str
    value_kind: str
    change_at: str | None = None
    extracted_by: str | None = None
    demo: bool = False
    version: int = 1
    created_at: str
    updated_at: str


class SeriesPoint(SQLModel, table=True):
    """One point of a series: period, value, optional denominator and where it was read."""

    __tablename__ = "series_point"
    __table_args__ = (UniqueConstraint("series_id", "period"),)
    id: int | None = Field(default=None, primary_key=True)
    series_id: int = Field(sa_column=_fk("series.id", cascade=True))
    period: str
    value: float
    denominator: float | None = None
    source: str | None = None


class SeriesFit(SQLModel, table=True):
    """A stored re-estimation: the estimate it wrote, the series, model, options and figures
    (JSON text). An estimate with a row here is flagged ``re-estimated``."""

    __tablename__ = "series_fit"
    id: int | None = Field(default=None, primary_key=True)
    estimate_id: int = Field(
        sa_column=Column(
            Integer, ForeignKey("estimate.id", ondelete="CASCADE"), nullable=False, unique=True
        )
    )
    series_id: int = Field(sa_column=_fk("series.id"))
    model: str
    options: str
    figures: str
    created_at: str


VERSIONED["series"] = Series


VERSIONED["expected_direction"] = ExpectedDirection
# ------------------------------------------------------------------ end expected directions


# ------------------------------------------------------------------------------ accounts
class Account(SQLModel, table=True):
    """A person who may sign in: ``role`` is one of ``exposhift.access.ROLES``.

    ``password_hash`` is an Argon2id hash (argon2-cffi); the password itself is never stored.
    Written only through :mod:`exposhift.store.accounts` (versioned; audited without the hash).
    """

    __tablename__ = "account"
    id: int | None = Field(default=None, primary_key=True)
    name: str = Field(unique=True)
    role: str
    password_hash: str
    disabled: bool = False
    version: int = 1
    created_at: str
    updated_at: str


class AccountSession(SQLModel, table=True):
    """A signed-in session: the SHA-256 of its token (the token is never stored), when it
    started, was last used, expires, and when it was ended by signing out (or None)."""

    __tablename__ = "account_session"
    id: int | None = Field(default=None, primary_key=True)
    token_hash: str = Field(unique=True)
    account_id: int = Field(sa_column=_fk("account.id", cascade=True))
    created_at: str
    last_seen_at: str
    expires_at: str
    ended_at: str | None = None


class SignInAttempt(SQLModel, table=True):
    """One sign-in attempt: the name as typed (case-folded), when, and whether it succeeded.
    Failed attempts within a window rate-limit further attempts for that name."""

    __tablename__ = "sign_in_attempt"
    id: int | None = Field(default=None, primary_key=True)
    name: str = Field(index=True)
    at: str = Field(index=True)
    outcome: str  # "ok", "failed", "limited"


NATURAL_KEY["account"] = "name"


# ------------------------------------------------------------------------------ end accounts
# ------------------------------------------------------------------ method in force
class MethodVersion(SQLModel, table=True):
    """One version of one part of the method (the rubric, the settings, ...): its full text.

    Rows are only ever added (``exposhift init``, ``exposhift method set``, an archive import),
    each with an audit entry; the highest ``number`` of a part is the version in force.
    ``declared`` is the version the text declares itself (the rubric's id and version), "" when
    it declares none. See :mod:`exposhift.store.method_records`.
    """

    __tablename__ = "method_version"
    __table_args__ = (UniqueConstraint("part", "number"),)
    id: int | None = Field(default=None, primary_key=True)
    part: str = Field(index=True)
    number: int
    text: str
    content_hash: str
    declared: str = ""
    source: str
    created_by: str
    created_at: str


# ------------------------------------------------------------------ end method in force


# ------------------------------------------------------------------ certainty judgements
class CertaintyJudgement(SQLModel, table=True):
    """The committee's rating of one certainty domain of one exposure x outcome.

    ``domain`` is a key of :data:`exposhift.certainty.domains.DOMAINS` (``certainty``: the final
    level); ``suggested`` and ``suggestion_reason`` are the tool's suggestion when the rating
    was recorded, ``overrides`` whether the rating departs from it; ``numbers`` (JSON text) the
    numbers the suggestion rested on; ``settings_hash`` the certainty settings it was made with.
    Written only through :mod:`exposhift.store.certainty_records` (versioned, audited).
    """

    __tablename__ = "certainty_judgement"
    __table_args__ = (UniqueConstraint("exposure_id", "outcome_id", "domain"),)
    id: int | None = Field(default=None, primary_key=True)
    exposure_id: int = Field(sa_column=_fk("exposure.id"))
    outcome_id: int = Field(sa_column=_fk("outcome.id"))
    domain: str
    rating: str
    why: str
    suggested: str
    suggestion_reason: str
    overrides: bool = False
    numbers: str
    settings_hash: str
    decided_by: str
    decided_at: str  # ISO-8601 UTC with a Z suffix
    version: int = 1
    created_at: str
    updated_at: str


VERSIONED["certainty_judgement"] = CertaintyJudgement
# ------------------------------------------------------------ end certainty judgements


# ---------------------------------------------------------------------- data version
class DataVersion(SQLModel, table=True):
    """One row (id 1): a counter moved in the same transaction as every write
    (:mod:`exposhift.store.data_version`); caches of computed results are keyed on it."""

    __tablename__ = "data_version"
    id: int | None = Field(default=None, primary_key=True)
    version: int = 0
    changed_at: str | None = None
