"""The dossier as a Word file (python-docx): the HTML's sections, with Word heading styles, real
Word tables and the figures as PNG images (rendered offline by :mod:`exposhift.dossier.images`).

Headings use the built-in "Heading 1/2/3" styles, so a consultant can restyle the document and
insert a table of contents; tables use the built-in "Table Grid" style. When any record used is
demo, the page header of every page says so.
"""

from __future__ import annotations

import io
import struct
from datetime import datetime

from docx import Document
from docx.enum.section import WD_ORIENT
from docx.shared import Cm, Pt, RGBColor

from exposhift.dossier.content import Dossier, Pooled
from exposhift.dossier.html import number, percent

FIG_WIDTH = Cm(17.0)
MAX_FIG_HEIGHT = Cm(23.0)
A4_WIDTH, A4_HEIGHT = Cm(21.0), Cm(29.7)


def _table(
    doc,
    header: list[str],
    rows: list[list[str]],
    *,
    size: float = 8.5,
    widths: list[float] | None = None,
):
    """A real Word table (style "Table Grid"), header row repeated on every page; ``widths``
    in cm per column."""
    t = doc.add_table(rows=1, cols=len(header))
    t.style = "Table Grid"
    t.autofit = widths is None
    for cell, text in zip(t.rows[0].cells, header, strict=True):
        cell.text = ""
        run = cell.paragraphs[0].add_run(text)
        run.bold = True
        run.font.size = Pt(size)
    _repeat_header(t.rows[0])
    for r in rows:
        cells = t.add_row().cells
        for cell, text in zip(cells, r, strict=True):
            cell.text = ""
            lines = str(text).split("\n")
            para = cell.paragraphs[0]
            for i, line in enumerate(lines):
                run = para.add_run(line)
                run.font.size = Pt(size if i == 0 else size - 1)
                if i < len(lines) - 1:
                    run.add_break()
    for row in t.rows:
        _keep_row(row)
    if widths:
        for col, w in zip(t.columns, widths, strict=True):
            col.width = Cm(w)
        for row in t.rows:
            for cell, w in zip(row.cells, widths, strict=True):
                cell.width = Cm(w)
    doc.add_paragraph()
    return t


def _row_flag(row, name: str) -> None:
    from docx.oxml import OxmlElement
    from docx.oxml.ns import qn

    el = OxmlElement(name)
    el.set(qn("w:val"), "true")
    row._tr.get_or_add_trPr().append(el)


def _repeat_header(row) -> None:
    _row_flag(row, "w:tblHeader")


def _keep_row(row) -> None:
    """A row is never split across two pages."""
    _row_flag(row, "w:cantSplit")


def _pooled_rows(groups: list[Pooled]) -> tuple[list[str], list[list[str]]]:
    extra = sorted({k for g in groups for k in g.extra})
    header = [
        "stratum",
        "events",
        "measure",
        "pooled",
        "CI",
        "prediction interval",
        "τ²",
        "I²",
        "method",
        *extra,
    ]
    rows = []
    for g in groups:
        pi = "-" if g.pi_lower is None else f"{number(g.pi_lower)} to {number(g.pi_upper)}"
        rows.append(
            [
                g.label,
                str(g.k),
                g.measure + (" (ratio)" if g.scale == "log" else ""),
                number(g.estimate),
                f"{number(g.ci_lower)} to {number(g.ci_upper)}",
                pi,
                number(g.tau2),
                percent(g.i2),
                f"{g.method.upper()}, {g.ci_method.upper()}",
                *[str(g.extra.get(k, "")) for k in extra],
            ]
        )
    return header, rows


def _figure(doc, images: dict[str, bytes | None], name: str, what: str, width=FIG_WIDTH):
    """The figure's image, or a line saying why it is missing."""
    if name not in images:
        return
    png = images[name]
    if png is None:
        p = doc.add_paragraph(
            f"[{what} not rendered: no image renderer (Chromium) was "
            "available; see the HTML dossier for this figure]"
        )
        p.runs[0].italic = True
        return
    w_px, h_px = struct.unpack(">II", png[16:24])  # PNG IHDR: width, height
    if h_px * width > w_px * MAX_FIG_HEIGHT:  # taller than a page: fit the height instead
        doc.add_picture(io.BytesIO(png), height=MAX_FIG_HEIGHT)
    else:
        doc.add_picture(io.BytesIO(png), width=width)


def _demo_header(doc, d: Dossier) -> None:
    for section in doc.sections:
        p = section.header.paragraphs[0]
        p.text = ""
        run = p.add_run(f"DEMO — {d.demo_note}" if d.demo else f"Evidence dossier: {d.exposure}")
        run.bold = d.demo
        run.font.size = Pt(8)
        if d.demo:
            run.font.color.rgb = RGBColor(0x5C, 0x45, 0x00)


def render_docx(d: Dossier, images: dict[str, bytes | None]) -> bytes:
    """The Word file of a dossier, as bytes."""
    doc = Document()
    doc.styles["Normal"].font.size = Pt(10)
    first = doc.sections[0]
    first.page_width, first.page_height = A4_WIDTH, A4_HEIGHT
    first.left_margin = first.right_margin = Cm(2.0)
    cp = doc.core_properties
    cp.title = f"Evidence dossier: {d.exposure}"
    cp.author = f"exposhift {d.provenance.software_version}"
    cp.comments = f"fingerprint {d.provenance.fingerprint}"
    made = datetime.fromisoformat(d.provenance.made_at.replace("Z", "+00:00"))
    cp.created = cp.modified = made.replace(tzinfo=None)

    doc.add_heading(f"Evidence dossier: {d.exposure}", level=0)
    doc.add_paragraph(
        f"Outcomes: {', '.join(d.outcomes) or 'none recorded'} · made "
        f"{d.provenance.made_at} · fingerprint {d.provenance.fingerprint}"
    )
    doc.add_paragraph(d.cautions[0], style="Intense Quote")
    for w in d.warnings:
        doc.add_paragraph(f"warning: {w}")

    if d.changes is not None:
        doc.add_heading("What changed since the previous dossier", level=1)
        doc.add_paragraph(
            f"Previous dossier made {d.changes.old_made_at} (fingerprint "
            f"{d.changes.old_fingerprint[:16]})."
        )
        if d.changes.changes:
            _table(
                doc,
                ["change", "record or result", "field", "before", "now"],
                [[c.kind, c.key, c.field, c.old, c.new] for c in d.changes.changes],
            )
        else:
            doc.add_paragraph("Nothing changed.")

    doc.add_heading("The question, framed as the trial one would have run", level=1)
    doc.add_paragraph(
        "Each part as the studies recorded it (target-trial framing: Hernán & Robins 2016)."
    )
    for s in d.sections:
        doc.add_heading(f"{d.exposure} and {s.outcome}", level=2)
        q = s.question
        _table(
            doc,
            ["part", "as recorded"],
            [
                ["Population", "; ".join(q.population) or "not recorded"],
                ["Exposure change", "; ".join(q.exposure_change) or "not recorded"],
                ["Comparison", "; ".join(q.comparison) or "not recorded"],
                ["Outcome", q.outcome + (f" ({s.outcome_group})" if s.outcome_group else "")],
                ["Time zero", "; ".join(q.time_zero) or "not recorded"],
                ["Follow-up", "; ".join(q.follow_up) or "not recorded"],
            ],
            size=9,
            widths=[3.5, 13.5],
        )

    doc.add_heading("Summary per outcome", level=1)
    doc.add_paragraph(
        "Effects of an exposure increase, on the natural scale (ratios back-transformed)."
    )
    for s in d.sections:
        rep = s.replication
        doc.add_heading(s.outcome, level=2)
        doc.add_paragraph(
            f"Independent events: {rep.independent_events} · replication status "
            f"{rep.status}" + (f" ({rep.meaning})" if rep.meaning else "")
        )
        doc.add_paragraph(f"Rule: {rep.rule}")
        if rep.triangulation:
            doc.add_paragraph(f"Across designs: {rep.triangulation}")
        for k, v in rep.extra.items():
            doc.add_paragraph(f"{k}: {v}")
        if s.pooled:
            _table(doc, *_pooled_rows(s.pooled))
        else:
            doc.add_paragraph(s.note or "No poolable estimate.")
        doc.add_heading(f"Certainty of the evidence: {s.certainty.rating}", level=3)
        doc.add_paragraph(s.certainty.explanation)
        for dom, rating, why in s.certainty.reasons:
            doc.add_paragraph(f"{dom}: {rating} — {why}")

    _studies(doc, d)
    _figures(doc, d, images)
    _gaps(doc, d)
    _provenance(doc, d)
    doc.add_heading("Cautions", level=1)
    for c in d.cautions:
        doc.add_paragraph(c)
    _demo_header(doc, d)
    buf = io.BytesIO()
    doc.save(buf)
    return buf.getvalue()


def _studies(doc, d: Dossier) -> None:
    # the study table is wide: a landscape section of its own
    sec = doc.add_section()
    sec.orientation = WD_ORIENT.LANDSCAPE
    sec.page_width, sec.page_height = A4_HEIGHT, A4_WIDTH
    doc.add_heading("The studies", level=1)
    doc.add_paragraph(
        "Consensus appraisal levels per domain (0 = fatal … 3 = strong); the "
        "overall level decides pooling."
    )
    keys = [k for k, _ in d.domains]
    rows = []
    for st in d.studies:
        rows.append(
            [
                f"{st.study_id}\n{st.citation}",
                f"{st.design} ({st.design_family})",
                st.places,
                st.change_dates,
                st.assignment_grade,
                *[st.domains.get(k, "-") for k in keys],
                st.overall,
                str(len(st.used)),
                str(len(st.left_out)),
            ]
        )
    codes = [f"D{i}" for i in range(1, len(keys) + 1)]
    _table(
        doc,
        [
            "study",
            "design (family)",
            "place",
            "date of change",
            "grade",
            *codes,
            "overall",
            "used",
            "left out",
        ],
        rows,
        size=7,
        widths=[4.6, 2.8, 1.4, 1.8, 1.2, *[0.85] * len(keys), 1.5, 1.1, 1.3],
    )
    doc.add_paragraph(
        "Domains: "
        + "; ".join(f"{c} {k}" for c, k in zip(codes, keys, strict=True))
        + f". Levels: {', '.join(d.level_names)}; n/a = no consensus appraisal; "
        "- = no rating in that domain. Grade = assignment grade."
    )
    doc.add_heading("Estimates used and left out", level=2)
    est = []
    for st in d.studies:
        est += [[uid, "used", ""] for uid in st.used]
        est += [[uid, "left out", why] for uid, why in st.left_out]
    _table(doc, ["estimate", "", "why left out"], est, size=7, widths=[11.0, 1.6, 11.0])
    sec = doc.add_section()
    sec.orientation = WD_ORIENT.PORTRAIT
    sec.page_width, sec.page_height = A4_WIDTH, A4_HEIGHT


def _figures(doc, d: Dossier, images: dict[str, bytes | None]) -> None:
    doc.add_heading("Figures", level=1)
    doc.add_heading("Places", level=2)
    if "map" not in images:
        doc.add_paragraph("[map not drawn: the map shapes were not found]")
    _figure(doc, images, "map", "map of places")
    for i, s in enumerate(d.sections):
        doc.add_heading(s.outcome, level=2)
        if not s.pooled:
            doc.add_paragraph("[forest plot not drawn: no poolable estimate]")
        for j in range(len(s.pooled)):
            _figure(doc, images, f"forest-{i}-{j}", "forest plot")
        _figure(doc, images, f"timeline-{i}", "replication timeline")
        _figure(doc, images, f"sensitivity-{i}", "sensitivity analyses")
        if s.sensitivity:
            for n in s.sensitivity.notes:
                doc.add_paragraph(n)


def _gaps(doc, d: Dossier) -> None:
    doc.add_heading("Gaps and opportunities", level=1)
    if d.gaps:
        _table(
            doc,
            ["outcome group", "state", "events", "studies", "unevaluated events", "rule"],
            [
                [
                    c.outcome_group,
                    c.state,
                    str(c.events),
                    str(c.studies),
                    str(c.unevaluated_events),
                    c.state_rule,
                ]
                for c in d.gaps
            ],
        )
    doc.add_heading("Registered exposure changes nobody has evaluated yet", level=2)
    if d.opportunities:
        _table(
            doc,
            ["event", "place", "date", "change", "family", "what an evaluation would need"],
            [
                [o.event_id, o.country, o.change_date, o.change, o.family, o.needs]
                for o in d.opportunities
            ],
        )
    else:
        doc.add_paragraph("None registered for this exposure.")


def _provenance(doc, d: Dossier) -> None:
    p = d.provenance
    doc.add_heading("Methods and provenance", level=1)
    rows = [
        ["rubric", f"{p.rubric_id} {p.rubric_version}, content hash {p.rubric_hash}"],
        ["overall level rule", p.rubric_rule],
    ]
    rows += [[k, str(v)] for k, v in p.estimators.items()]
    rows += [[k, str(v)] for k, v in p.thresholds.items()]
    rows += [
        ["software", f"exposhift {p.software_version}"],
        ["records used", str(p.records)],
        ["fingerprint (SHA-256)", p.fingerprint],
        ["audit chain head", p.audit_head or "not recorded"],
        ["made", p.made_at],
    ]
    _table(doc, ["item", "value"], rows, size=9, widths=[5.0, 12.0])
    doc.add_paragraph(
        "The fingerprint is a SHA-256 hash over exactly the records used (each "
        "with its version), the rubric hash, the settings above and the software "
        "version: the same evidence base gives the same fingerprint."
    )
