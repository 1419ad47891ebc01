"""The ``dossier`` actions: gather one exposure's evidence, render it, write it; compare bundles.

Every number in a dossier comes from the pooling and replication services (``pool_evidence``,
``pool_view``, ``replication_for``, ``gap_report``), read through the one adapter
:mod:`exposhift.dossier.evidence`. The dossier's own part is the record list with versions (for
the fingerprint), the framing of the question from the recorded fields, and the rendering.
The sensitivity figures use :func:`exposhift.synthesis.sensitivity.leave_one_out` and
:func:`~exposhift.synthesis.sensitivity.cumulative` on exactly the rows the pooling service
pooled, with the same options.
"""

from __future__ import annotations

import dataclasses
import os
import re
import shutil
import subprocess
import tempfile
from dataclasses import dataclass, field
from datetime import UTC, date, datetime
from pathlib import Path
from typing import Any

from exposhift import __version__, cautions
from exposhift.dossier import evidence as ev
from exposhift.dossier.bundle import (
    Bundle,
    check_out_dir,
    read_bundle,
    sha256_text,
    write_outputs,
    zip_bytes,
)
from exposhift.dossier.certainty import certainty_of
from exposhift.dossier.content import (
    Dossier,
    DossierDiff,
    OutcomeSection,
    Provenance,
    Question,
    Sensitivity,
    StudyRow,
)
from exposhift.dossier.diff import diff_bundles
from exposhift.dossier.manifest import (
    MANIFEST,
    RECORDS,
    bundle_tables,
    fingerprint,
    manifest,
    pretty_json,
    table_csv,
)
from exposhift.errors import ConfigError
from exposhift.replication.status import STATUSES
from exposhift.services.browse import DEMO_NOTE, pool_view
from exposhift.services.certainty import cell_certainty
from exposhift.services.lookup import require_name
from exposhift.services.pooling import pool_evidence
from exposhift.services.replicating import gap_report, replication_for
from exposhift.services.snapshot import EvidenceSnapshot, take_snapshot
from exposhift.store.database import Store
from exposhift.store.dossier_records import outcomes_of_exposure, records_used
from exposhift.synthesis.harmonise import GROUP_SCALES
from exposhift.synthesis.pooling import CAUTION
from exposhift.synthesis.sensitivity import cumulative, leave_one_out
from exposhift.vocab import DESIGNS

FORMATS = ("html", "docx", "bundle", "pdf")
DEFAULT_FORMATS = ("html", "docx", "bundle")
HAZARD_CAUTION = cautions.HAZARD


@dataclass(frozen=True)
class PoolOptions:
    """The pooling options in force for every number of a dossier (the pool command's)."""

    method: str = "reml"
    ci: str = "hksj"
    align_to: str = "increase"
    alpha: float = 0.05
    include_fatal: bool = False
    hksj_floor: bool = True


@dataclass(frozen=True)
class Gathered:
    dossier: Dossier
    records: dict[str, list[dict]]
    settings: dict[str, Any]


@dataclass(frozen=True)
class DossierResult:
    out: str
    files: list[str]
    fingerprint: str
    made_at: str
    demo: bool
    warnings: list[str] = field(default_factory=list)
    changes: DossierDiff | None = None


def slug(name: str) -> str:
    """A folder name for an exposure: lower case, runs of other characters as '-'."""
    s = re.sub(r"[^a-z0-9]+", "-", name.lower()).strip("-")
    return s or "exposure"


def made_at(as_of: str | None = None) -> str:
    """The one date printed: ``as_of`` (ISO date or date-time), else ``SOURCE_DATE_EPOCH``
    (seconds since 1970, reproducible-builds.org convention), else now; ISO-8601 UTC, ``Z``."""
    if as_of:
        try:
            if len(as_of) == 10:
                stamp = datetime.combine(date.fromisoformat(as_of), datetime.min.time(), UTC)
            else:
                stamp = datetime.fromisoformat(as_of.replace("Z", "+00:00"))
                stamp = stamp.replace(tzinfo=UTC) if stamp.tzinfo is None else stamp
        except ValueError as exc:
            raise ConfigError(
                f"--as-of '{as_of}' is not an ISO date (YYYY-MM-DD) or date-time "
                "(YYYY-MM-DDTHH:MM:SSZ)"
            ) from exc
    elif os.environ.get("SOURCE_DATE_EPOCH"):
        raw = os.environ["SOURCE_DATE_EPOCH"]
        if not raw.isdigit():
            raise ConfigError(f"SOURCE_DATE_EPOCH '{raw}' is not a whole number of seconds")
        stamp = datetime.fromtimestamp(int(raw), UTC)
    else:
        stamp = datetime.now(UTC)
    return stamp.astimezone(UTC).strftime("%Y-%m-%dT%H:%M:%SZ")


def _uniq(values) -> list[str]:
    return sorted({str(v) for v in values if v not in (None, "") and str(v) != "nan"})


def _question(outcome: str, records: dict[str, list[dict]]) -> Question:
    ests = [e for e in records["estimate"] if e["outcome"] == outcome]
    studies = {s["key"]: s for s in records["study"]}
    events = {e["key"]: e for e in records["event"]}
    used_st = [studies[e["study"]] for e in ests if e["study"] in studies]
    used_ev = [events[e["event"]] for e in ests if e["event"] in events]
    change = []
    for e in used_ev:
        size = (
            f", {e['change_size']:g} {e.get('change_unit') or ''}".rstrip()
            if e.get("change_size") is not None
            else ""
        )
        change.append(f"{e['change_kind']} ({e['change_direction']}{size})")
    follow = [e.get("time_window") for e in ests]
    follow += [
        f"{s['post_points']} time points after the change"
        for s in used_st
        if s.get("post_points") is not None
    ]
    return Question(
        population=_uniq(s.get("population") for s in used_st),
        exposure_change=_uniq(change),
        comparison=_uniq(s.get("comparison") for s in used_st),
        outcome=outcome,
        time_zero=_uniq(f"{e['country']} {e['change_date']}" for e in used_ev),
        follow_up=_uniq(follow),
    )


def _g(x: Any) -> str:
    return "-" if x is None else f"{float(x):.3g}"


def _sensitivity(pool, by_level, opts: PoolOptions) -> Sensitivity | None:
    groups = ev.pooled_groups(pool.groups)
    if not groups:
        return None
    main = max(groups, key=lambda g: g.k)
    if main.k < 2:
        return None
    gi, raw = next(
        (i, g) for i, g in enumerate(pool.groups) if tuple(g["estimates"]) == main.estimates
    )
    notes = []
    sens = raw.get("sensitivity") or {}
    if raw.get("tau2_ci"):
        t = raw["tau2_ci"]
        notes.append(f"τ² interval ({t['method']}): {_g(t['lower'])} to {_g(t['upper'])}.")
    if sens.get("small_study"):
        s = sens["small_study"]
        notes.append(
            f"Egger test: intercept {_g(s['intercept'])}, p {_g(s['pvalue'])}."
            if s["run"]
            else f"Egger test not run: {s['reason']}."
        )
    levels = [
        g for g in ev.pooled_groups(by_level.groups) if set(g.estimates) <= set(main.estimates)
    ]
    # the event-level rows that were pooled: leave one *event* out, cumulative by event
    rows = pool.pooled_rows[pool.pooled_rows["group"] == gi].sort_values("event_id")
    y, v = rows["y"].to_numpy(float), rows["v"].to_numpy(float)
    kw = dict(method=opts.method, ci=opts.ci, alpha=opts.alpha, hksj_floor=opts.hksj_floor)
    studies = rows["study_ids"] if "study_ids" in rows.columns else rows["study_id"]
    labels = (rows["event_id"].astype(str) + " (" + studies.astype(str) + ")").to_numpy()
    loo = ev.steps(leave_one_out(y, v, labels=labels, **kw), "omitted", main.scale)
    dates = rows["change_date"].astype(str).to_numpy()
    cum = ev.steps(cumulative(y, v, dates, labels=labels, **kw), "added", main.scale)
    return Sensitivity(
        group=main.label,
        scale=main.scale,
        leave_one_out=loo,
        cumulative=cum,
        by_level=ev.level_steps(levels),
        notes=notes,
    )


def _section(
    store: Store,
    exposure: str,
    outcome: str,
    records,
    settings,
    opts: PoolOptions,
    rubric=None,
    snapshot: EvidenceSnapshot | None = None,
):
    """One outcome's section. The estimates are read from ``snapshot`` (one read for the whole
    dossier), prepared once for pooling (harmonised, independent) and pooled three ways: in
    full with the details, by design family (forest plot) and by level (sensitivity)."""
    kw = dict(dataclasses.asdict(opts), rubric=rubric)
    group = next(
        (o.get("outcome_group") or "" for o in records["outcome"] if o["name"] == outcome), ""
    )
    rep = replication_for(store, exposure, outcome, settings=settings, snapshot=snapshot)
    replication = ev.replication(rep, STATUSES)
    question = _question(outcome, records)
    certainty = certainty_of(exposure, outcome, cell_certainty(store, exposure, outcome))
    if not any(e["outcome"] == outcome for e in records["estimate"]):
        return OutcomeSection(
            outcome,
            group,
            question,
            [],
            [],
            replication,
            certainty,
            [],
            [],
            None,
            [],
            note="no estimate of this exposure for this outcome",
        ), None
    pool = pool_evidence(store, exposure, outcome, details=True, snapshot=snapshot, **kw)
    again = dict(snapshot=snapshot, prepared=pool, light=True, **kw)
    view = pool_view(store, exposure, outcome, by=["design-family"], **again)
    by_level = pool_evidence(store, exposure, outcome, by=["level"], **again)
    section = OutcomeSection(
        outcome=outcome,
        outcome_group=group,
        question=question,
        pooled=ev.pooled_groups(pool.groups),
        by_design_family=ev.pooled_groups(view.output.groups),
        replication=replication,
        certainty=certainty,
        forest=ev.forest_rows(view),
        timeline=ev.timeline(rep, GROUP_SCALES),
        sensitivity=_sensitivity(pool, by_level, opts),
        excluded=ev.excluded_rows(pool.excluded),
        note=""
        if pool.groups
        else "no poolable estimate: every estimate was left out (see the study table for why)",
    )
    return section, pool


def _study_rows(records, sections, rubric) -> list[StudyRow]:
    events = {e["key"]: e for e in records["event"]}
    apps = {a["study"]: a for a in records["appraisal"]}
    used = {uid for s in sections for g in s.pooled for uid in g.estimates}
    left = {e["estimate"]: e["reason"] for s in sections for e in s.excluded}
    out = []
    for st in records["study"]:
        ests = [e for e in records["estimate"] if e["study"] == st["key"]]
        evs = [events[e["event"]] for e in ests if e["event"] in events]
        app = apps.get(st["key"])
        domains = {}
        if app:
            for r in app["ratings"]:
                domains[r["domain"]] = str(r["level"])
        overall = "n/a" if not app or app.get("overall") is None else str(app["overall"])
        grade = st.get("assignment_grade")
        out.append(
            StudyRow(
                study_id=st["key"],
                citation=st["citation"],
                year=st.get("year"),
                design=st["design"],
                design_family=DESIGNS.get(st["design"], ("",))[0],
                places=", ".join(_uniq(e["country"] for e in evs)),
                change_dates=", ".join(_uniq(e["change_date"] for e in evs)),
                assignment_grade="not graded" if grade is None else str(grade),
                domains=domains,
                overall=overall,
                used=sorted(e["key"] for e in ests if e["key"] in used),
                left_out=sorted(
                    (e["key"], left.get(e["key"], "not pooled"))
                    for e in ests
                    if e["key"] not in used
                ),
                demo=bool(st.get("demo")),
            )
        )
    return out


def gather(
    store: Store,
    exposure: str,
    outcomes: list[str] | None = None,
    *,
    as_of: str | None = None,
    opts: PoolOptions | None = None,
    method=None,
) -> Gathered:
    """Everything a dossier says, without rendering it.

    ``method`` (a :class:`~exposhift.services.workspace.MethodInForce`) defaults to the method
    the evidence base records; its parts' hashes enter the fingerprint, and the manifest names
    each part's stored version (and any one-run override).
    """
    from exposhift.services.workspace import method_in_force

    opts = opts or PoolOptions()
    method = method if method is not None else method_in_force(store)
    stamp = made_at(as_of)
    with store.read() as conn:
        exposure = require_name(conn, "exposure", exposure)
        if outcomes:
            outcomes = sorted({require_name(conn, "outcome", o) for o in outcomes})
        else:
            outcomes = outcomes_of_exposure(conn, exposure)
        records = records_used(conn, exposure, outcomes)
    rubric = method.rubric
    rep_settings = method.settings
    thresholds = {
        k: (list(v) if isinstance(v, tuple) else v)
        for k, v in dataclasses.asdict(rep_settings).items()
        if k != "regions"
    }
    settings = {
        "pooling": dataclasses.asdict(opts),
        "replication": thresholds,
        "regions": {k: list(v) for k, v in sorted(rep_settings.regions.items())},
        "outcomes": list(outcomes),
        "rubric_id": rubric.rubric_id,
        "method": {
            name: {"content_hash": p.content_hash, "declared": p.declared}
            for name, p in method.parts.items()
        },
    }
    snapshot = take_snapshot(store)  # one read of the evidence base for every section
    sections = [
        _section(store, exposure, o, records, rep_settings, opts, rubric, snapshot)[0]
        for o in outcomes
    ]
    gaps = gap_report(store, settings=rep_settings, snapshot=snapshot)
    fp = fingerprint(records, rubric.content_hash, settings, __version__)
    demo = any(bool(r.get("demo")) for kind in ("study", "event") for r in records[kind])
    provenance = Provenance(
        rubric_id=rubric.rubric_id,
        rubric_version=rubric.version,
        rubric_hash=rubric.content_hash,
        rubric_rule=rubric.summary_text,
        estimators={
            "τ² estimator": opts.method.upper(),
            "interval": opts.ci.upper(),
            "alpha": opts.alpha,
            "effects expressed for an exposure": opts.align_to,
            "fatal studies": "kept" if opts.include_fatal else "left out",
            "HKSJ floor": "on" if opts.hksj_floor else "off",
        },
        thresholds={f"replication: {k}": v for k, v in thresholds.items()},
        software_version=__version__,
        fingerprint=fp,
        made_at=stamp,
        records=sum(len(v) for v in records.values()),
        audit_head=ev.audit_chain_head(store),
        method=method.to_dict(),
    )
    d = Dossier(
        exposure=exposure,
        outcomes=list(outcomes),
        sections=sections,
        studies=_study_rows(records, sections, rubric),
        domains=[(dm.key, dm.title) for dm in rubric.domains],
        level_names=[f"{lv.level} {lv.key}" for lv in rubric.scale],
        gaps=ev.gap_cells(gaps, exposure),
        opportunities=ev.opportunities(gaps, exposure),
        provenance=provenance,
        demo=demo,
        demo_note=DEMO_NOTE,
        cautions=[CAUTION, HAZARD_CAUTION, rubric.caution],
    )
    return Gathered(d, records, settings)


def _bundle_files(g: Gathered) -> dict[str, str]:
    files: dict[str, str] = {RECORDS: pretty_json(g.records)}
    for name, rows in bundle_tables(g.dossier).items():
        files[f"{name}.csv"] = table_csv(rows)
        files[f"{name}.json"] = pretty_json(rows)
    digests = {n: sha256_text(t) for n, t in sorted(files.items())}
    files[MANIFEST] = pretty_json(manifest(g.dossier, g.records, g.settings, digests))
    return files


def _as_bundle(g: Gathered, source: str) -> Bundle:
    return Bundle(
        source,
        {"fingerprint": g.dossier.provenance.fingerprint, "made_at": g.dossier.provenance.made_at},
        g.records,
        bundle_tables(g.dossier),
    )


def _pdf(docx: bytes) -> tuple[bytes | None, str | None]:
    soffice = shutil.which("soffice")
    if soffice is None:
        return None, "no PDF: LibreOffice (soffice) is not installed"
    with tempfile.TemporaryDirectory() as tmp:
        src = Path(tmp) / "dossier.docx"
        src.write_bytes(docx)
        try:
            subprocess.run(
                [
                    soffice,
                    f"-env:UserInstallation=file://{tmp}/profile",
                    "--headless",
                    "--convert-to",
                    "pdf",
                    "--outdir",
                    tmp,
                    str(src),
                ],
                check=True,
                capture_output=True,
                timeout=300,
            )
        except (subprocess.SubprocessError, OSError) as exc:
            return None, f"no PDF: LibreOffice failed ({type(exc).__name__})"
        pdf = Path(tmp) / "dossier.pdf"
        return (
            (pdf.read_bytes(), None)
            if pdf.is_file()
            else (None, "no PDF: LibreOffice wrote nothing")
        )


def parse_formats(formats: list[str] | str | None) -> tuple[str, ...]:
    if not formats:
        return DEFAULT_FORMATS
    items = (
        formats.split(",")
        if isinstance(formats, str)
        else [x for f in formats for x in f.split(",")]
    )
    items = [x.strip().lower() for x in items if x.strip()]
    bad = [x for x in items if x not in FORMATS]
    if bad:
        raise ConfigError(
            f"unknown --format {', '.join(map(repr, bad))}; use any of "
            f"{', '.join(FORMATS)} separated by commas"
        )
    return tuple(dict.fromkeys(items))


def build_dossier(
    store: Store,
    exposure: str,
    *,
    outcomes: list[str] | None = None,
    out: str | Path | None = None,
    formats: list[str] | str | None = None,
    zip_bundle: bool = False,
    as_of: str | None = None,
    force: bool = False,
    since: str | Path | None = None,
    opts: PoolOptions | None = None,
    method=None,
) -> DossierResult:
    """Gather, render and write one exposure's dossier (see :mod:`exposhift.dossier`)."""
    from exposhift.dossier.figures import dossier_figures

    fmts = parse_formats(formats)
    old = read_bundle(since) if since is not None else None
    g = gather(store, exposure, outcomes, as_of=as_of, opts=opts, method=method)
    target = Path(out) if out else Path("dossiers") / slug(g.dossier.exposure)
    check_out_dir(target, force)
    warnings: list[str] = []
    d = g.dossier
    if old is not None:
        d = dataclasses.replace(d, changes=diff_bundles(old, _as_bundle(g, "this dossier")))
    figs = dossier_figures(d) if {"html", "docx", "pdf"} & set(fmts) else {}
    if figs and "map" not in figs:
        warnings.append(
            "map not drawn: the map shapes (exposhift/data/maps) are missing from this install"
        )
    files: dict[str, bytes | str] = {}
    if "html" in fmts:
        from exposhift.dossier.html import render_html

        files["dossier.html"] = render_html(dataclasses.replace(d, warnings=warnings), figs)
    if "docx" in fmts or "pdf" in fmts:
        from exposhift.dossier.docx import render_docx
        from exposhift.dossier.images import render_png

        rendered = render_png(figs)
        warnings += rendered.warnings
        docx = render_docx(dataclasses.replace(d, warnings=warnings), rendered.images)
        if "docx" in fmts:
            files["dossier.docx"] = docx
        if "pdf" in fmts:
            pdf, why = _pdf(docx)
            if pdf is not None:
                files["dossier.pdf"] = pdf
            else:
                warnings.append(why)
    if "bundle" in fmts or zip_bundle:
        bundle = _bundle_files(g)
        if "bundle" in fmts:
            files.update({f"bundle/{n}": t for n, t in bundle.items()})
        if zip_bundle:
            files["bundle.zip"] = zip_bytes(bundle)
    written = write_outputs(target, files)
    return DossierResult(
        out=str(target),
        files=written.files,
        fingerprint=d.provenance.fingerprint,
        made_at=d.provenance.made_at,
        demo=d.demo,
        warnings=warnings,
        changes=d.changes,
    )


def diff_dossier(
    store: Store | None, old: str | Path, new: str | Path | None = None
) -> DossierDiff:
    """What changed from bundle ``old`` to bundle ``new`` (or to the evidence base now, for the
    exposure and outcomes ``old`` was made for)."""
    a = read_bundle(old)
    if new is not None:
        return diff_bundles(a, read_bundle(new))
    if store is None:
        raise ConfigError("dossier diff needs an evidence base or a second bundle")
    g = gather(store, str(a.manifest["exposure"]), list(a.manifest.get("outcomes") or []))
    return diff_bundles(a, _as_bundle(g, "evidence base now"))
