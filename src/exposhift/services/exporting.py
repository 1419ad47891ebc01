"""Export the evidence base: the JSON archive (lossless) or the extraction sheet (CSV/Excel).

The evidence base is read as frames by :func:`exposhift.store.evidence_frames.load_evidence`.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path

from exposhift.errors import ConfigError
from exposhift.io.archive import archive_text
from exposhift.io.exporter import (
    SHEET_WRITERS,
    events_sheet_frame,
    sheet_frame,
    write_text,
)
from exposhift.io.frames import EvidenceFrames
from exposhift.services.setup import open_current
from exposhift.store.database import Store
from exposhift.store.evidence_frames import load_evidence


@dataclass(frozen=True)
class ExportResult:
    path: str
    format: str  # "json", "csv", "xlsx"
    what: str  # "evidence base", "estimates", "events"
    counts: dict[str, int]
    warnings: list[str] = field(default_factory=list)


#: independent appraisals of a study stay blinded until it has this many (services.appraising)
_UNBLINDED_AT = 2


def blinded_warning(frames: EvidenceFrames) -> list[str]:
    """A warning when the archive carries independent appraisals that are still blinded.

    Only an administrator's export holds them (:func:`blind_frames` leaves them out of
    everyone else's); the warning says who may be given the file.
    """
    apps = frames.appraisals
    if apps.empty:
        return []
    indep = apps[apps["stage"] == "independent"]
    per_study = indep.groupby("study").size()
    blinded = per_study[per_study < _UNBLINDED_AT]
    if blinded.empty:
        return []
    studies = sorted(blinded.index.astype(str))
    shown = ", ".join(studies[:5]) + (f" and {len(studies) - 5} more" if len(studies) > 5 else "")
    return [
        f"the archive holds {int(blinded.sum())} independent appraisal(s) still blinded "
        f"(the second reviewer has not appraised {len(studies)} stud"
        f"{'y' if len(studies) == 1 else 'ies'}: {shown}); anyone who reads the file sees "
        "them. Give it only to people who may see every reviewer's ratings"
    ]


def blind_frames(frames: EvidenceFrames, viewer) -> tuple[EvidenceFrames, int]:
    """``frames`` without the appraisals (and their ratings) that ``viewer`` may not see
    (:func:`exposhift.access.may_see_independent`), and how many were left out. An admin's
    export keeps every appraisal."""
    from dataclasses import replace

    from exposhift.access import may_see_independent

    apps = frames.appraisals
    if apps.empty or viewer.may_do("export-blinded"):
        return frames, 0
    indep = apps[apps["stage"] == "independent"]
    reviewers = indep.groupby("study")["reviewer"].agg(set).to_dict()
    consensus = set(apps.loc[apps["stage"] == "consensus", "study"])

    def visible(study, reviewer, stage) -> bool:
        if stage != "independent":
            return True
        return may_see_independent(
            viewer, reviewer, reviewers.get(study, set()), study in consensus
        )

    keep = [visible(*t) for t in apps[["study", "reviewer", "stage"]].itertuples(index=False)]
    kept = apps[keep]
    keys = set(kept[["study", "reviewer", "stage"]].itertuples(index=False, name=None))
    ratings = frames.ratings
    rkeep = [
        t in keys
        for t in ratings[["study", "reviewer", "stage"]].itertuples(index=False, name=None)
    ]
    out = replace(
        frames,
        appraisals=kept.reset_index(drop=True),
        ratings=ratings[rkeep].reset_index(drop=True),
    )
    return out, int(len(apps) - len(kept))


def left_out_warning(n: int, viewer) -> list[str]:
    if not n:
        return []
    return [
        f"{n} independent appraisal(s) left out: they are blinded for "
        f"{viewer.name or 'this session'} ({viewer.role}); this archive is not the whole "
        "evidence base (an administrator's export holds every appraisal)"
    ]


EXPORT_SUFFIXES = (".json", ".csv", ".xlsx")


def export_store(
    store: Store,
    path: str | Path,
    *,
    events_only: bool = False,
    exposure: str | None = None,
    outcome: str | None = None,
    with_appraisals: bool = False,
    viewer=None,
) -> ExportResult:
    """Write ``path``: ``.json`` archive, or ``.csv``/``.xlsx`` sheet (or events sheet).

    ``exposure`` / ``outcome`` keep only their records (:func:`~exposhift.services.subset.
    subset_frames`); ``with_appraisals`` adds the consensus levels to a sheet export.
    ``viewer`` (an :class:`~exposhift.access.Identity`, a name, or None for the store's own
    identity): appraisals blinded for the viewer are left out, and the result says so.
    """
    from exposhift.services.accounts import viewer_of
    from exposhift.services.subset import subset_frames, with_consensus_levels

    ident = viewer_of(store, viewer)

    path = Path(path)
    suffix = path.suffix.lower()
    if suffix not in EXPORT_SUFFIXES:
        raise ConfigError(
            f"cannot export to '{path.name}'; name a .json (whole evidence base), "
            ".csv or .xlsx file (extraction sheet)"
        )
    if events_only and suffix == ".json":
        raise ConfigError("--events writes an events sheet; name a .csv or .xlsx file")
    if with_appraisals and (suffix == ".json" or events_only):
        raise ConfigError(
            "--with-appraisals adds consensus levels to an estimates sheet; name a "
            ".csv or .xlsx file (a .json archive holds every appraisal already)"
        )
    if outcome is not None and events_only:
        raise ConfigError("--outcome does not apply to the events sheet; use --exposure alone")
    with store.read() as conn:
        frames = subset_frames(load_evidence(conn), exposure, outcome)
    frames, left_out = blind_frames(frames, ident)
    counts = {
        "events": len(frames.events),
        "studies": len(frames.studies),
        "estimates": len(frames.estimates),
        "appraisals": len(frames.appraisals),
    }
    if suffix == ".json":
        write_text(archive_text(frames), path)
        warnings = left_out_warning(left_out, ident) + blinded_warning(frames)
        return ExportResult(str(path), "json", "evidence base", counts, warnings)
    if events_only:
        SHEET_WRITERS[suffix](events_sheet_frame(frames), path)
        return ExportResult(str(path), suffix[1:], "events", {"events": counts["events"]})
    sheet = sheet_frame(frames)
    if with_appraisals:
        from exposhift.services.workspace import stored_rubric

        sheet = with_consensus_levels(sheet, frames, stored_rubric(store).domain_keys)
    SHEET_WRITERS[suffix](sheet, path)
    return ExportResult(
        str(path),
        suffix[1:],
        "estimates",
        {k: counts[k] for k in ("studies", "events", "estimates")},
    )


def export_file(
    path: str | Path,
    *,
    db: str | None = None,
    events_only: bool = False,
    exposure: str | None = None,
    outcome: str | None = None,
    with_appraisals: bool = False,
    user: str | None = None,
) -> ExportResult:
    """Open the evidence base named by ``db`` and export it (or a part) to ``path`` as
    ``user`` (``--user``: blinding by the role of its account, if any)."""
    store = open_current(db, user)
    try:
        return export_store(
            store,
            path,
            events_only=events_only,
            exposure=exposure,
            outcome=outcome,
            with_appraisals=with_appraisals,
        )
    finally:
        store.dispose()
