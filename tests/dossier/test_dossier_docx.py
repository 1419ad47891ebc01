"""The Word dossier read back with python-docx: heading styles, real tables (the study table one
row per study with its consensus levels), figures as images; a missing renderer; the PDF."""

from __future__ import annotations

import io
import shutil

import pytest
from docx import Document

from exposhift.services.dossier import build_dossier, gather
from exposhift.store.appraisals import existing_appraisals


@pytest.fixture(scope="module")
def corvane_docx(demo_store, tmp_path_factory):
    out = tmp_path_factory.mktemp("docx") / "corvane"
    result = build_dossier(demo_store, "corvane", out=out, formats="docx")
    return result, Document(str(out / "dossier.docx"))


def _study_table(doc):
    tables = [
        t
        for t in doc.tables
        if t.rows[0].cells[0].text == "study" and t.rows[0].cells[1].text == "design (family)"
    ]
    assert len(tables) == 1
    return tables[0]


def test_study_table_one_row_per_study_with_consensus_levels(corvane_docx, demo_store):
    _, doc = corvane_docx
    table = _study_table(doc)
    header = [c.text for c in table.rows[0].cells]
    rows = [[c.text for c in r.cells] for r in table.rows[1:]]
    studies = gather(demo_store, "corvane").records["study"]
    assert [r[0].split("\n")[0] for r in rows] == [s["key"] for s in studies]
    # the consensus levels as the store holds them (read here with the store's own query)
    with demo_store.read() as conn:
        consensus = {
            k[0]: v["ratings"] for k, v in existing_appraisals(conn).items() if k[2] == "consensus"
        }
    legend = next(p.text for p in doc.paragraphs if p.text.startswith("Domains: "))
    codes = dict(
        part.split(" ", 1) for part in legend[len("Domains: ") :].split(". ")[0].split("; ")
    )
    checked = 0
    for r in rows:
        ratings = consensus.get(r[0].split("\n")[0], {})
        for code, domain in codes.items():
            expected = ratings.get(domain)
            assert r[header.index(code)] == ("-" if expected is None else str(expected))
            checked += expected is not None
    assert checked > 20


def test_headings_tables_and_figures(corvane_docx):
    result, doc = corvane_docx
    styles = [p.style.name for p in doc.paragraphs if p.style.name.startswith("Heading")]
    assert styles.count("Heading 1") >= 6 and "Heading 2" in styles
    titles = [p.text for p in doc.paragraphs if p.style.name == "Heading 1"]
    assert titles[:2] == [
        "The question, framed as the trial one would have run",
        "Summary per outcome",
    ]
    assert "Methods and provenance" in titles and "Cautions" in titles
    assert len(doc.tables) >= 8
    assert len(doc.inline_shapes) >= 5  # map, forest plots, timelines, sensitivity
    assert result.warnings == []
    header = doc.sections[0].header.paragraphs[0].text
    assert header.startswith("DEMO")  # every page of a demo dossier says so
    assert all(s.header.paragraphs[0].text.startswith("DEMO") for s in doc.sections)


def test_missing_renderer_gives_a_line_and_a_warning(demo_store, tmp_path, monkeypatch):
    monkeypatch.setenv("EXPOSHIFT_CHROMIUM", str(tmp_path / "no-chromium-here"))
    r = build_dossier(demo_store, "quorinate", out=tmp_path / "q", formats="docx")
    assert any("no Chromium found" in w for w in r.warnings)
    doc = Document(str(tmp_path / "q" / "dossier.docx"))
    assert len(doc.inline_shapes) == 0
    texts = [p.text for p in doc.paragraphs]
    assert any(t.startswith("warning: figures not rendered") for t in texts)
    lines = [t for t in texts if t.startswith("[") and "not rendered" in t]
    assert lines[0].startswith("[map of places not rendered")
    assert any(t.startswith("[forest plot not rendered") for t in lines)


def test_pdf_through_libreoffice(demo_store, tmp_path):
    if shutil.which("soffice") is None:
        pytest.skip("LibreOffice (soffice) is not installed: the optional PDF cannot be made")
    r = build_dossier(demo_store, "quorinate", out=tmp_path / "p", formats="pdf")
    pdf = (tmp_path / "p" / "dossier.pdf").read_bytes()
    assert pdf.startswith(b"%PDF") and r.warnings == []
    assert not (tmp_path / "p" / "dossier.docx").exists()  # only what was asked


def test_docx_is_a_valid_word_file_in_memory(corvane_docx, tmp_path):
    _, doc = corvane_docx
    buf = io.BytesIO()
    doc.save(buf)
    assert Document(io.BytesIO(buf.getvalue())).tables
