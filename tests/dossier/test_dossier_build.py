"""The dossier service: reproducible fingerprint and tables, what changed, bad input, demo."""

from __future__ import annotations

import json
from pathlib import Path

import pytest

from exposhift.dossier.bundle import BundleError
from exposhift.errors import ConfigError, NotFoundError
from exposhift.services.dossier import build_dossier, diff_dossier, gather
from exposhift.services.pooling import pool_evidence
from exposhift.services.replicating import replication_for
from exposhift.store import records
from exposhift.store.writer import Writer

DEMO_EXPOSURES = ("corvane", "dravonil", "quorinate", "trelomene", "vellium")


def _edit(store, entity: str, key: str, changes: dict) -> None:
    with store.write() as conn:
        w = Writer(conn, "tester")
        row = records.get(conn, entity, key)
        records.update(w, entity, key, row["version"], changes)
        w.flush()


def _bundle_bytes(out: Path) -> dict[str, bytes]:
    return {p.name: p.read_bytes() for p in sorted((out / "bundle").iterdir())}


def test_same_evidence_same_fingerprint_and_bytes(demo_store, tmp_path):
    a = build_dossier(
        demo_store, "dravonil", out=tmp_path / "a", formats="html,bundle", as_of="2026-01-31"
    )
    b = build_dossier(
        demo_store, "dravonil", out=tmp_path / "b", formats="html,bundle", as_of="2026-01-31"
    )
    assert a.fingerprint == b.fingerprint and len(a.fingerprint) == 64
    assert _bundle_bytes(tmp_path / "a") == _bundle_bytes(tmp_path / "b")
    assert (tmp_path / "a/dossier.html").read_bytes() == (tmp_path / "b/dossier.html").read_bytes()
    m = json.loads((tmp_path / "a/bundle/manifest.json").read_text())
    assert m["fingerprint"] == a.fingerprint and m["made_at"] == "2026-01-31T00:00:00Z"
    assert m["exposhift_version"] and m["records"]
    # every estimate, study and consensus appraisal used is named with its version
    assert all(isinstance(v, int) and v >= 1 for v in m["records"].values())
    kinds = {k.split(":")[0] for k in m["records"]}
    assert kinds == {"exposure", "outcome", "event", "study", "estimate", "appraisal"}


def test_source_date_epoch_pins_the_date(demo_store, tmp_path, monkeypatch):
    monkeypatch.setenv("SOURCE_DATE_EPOCH", "1767225600")  # 2026-01-01T00:00:00Z
    r = build_dossier(demo_store, "quorinate", out=tmp_path / "q", formats="bundle")
    assert r.made_at == "2026-01-01T00:00:00Z"


def test_numbers_are_the_services_numbers(demo_store):
    """The dossier shows what pool_evidence and replication_for return, nothing of its own."""
    d = gather(demo_store, "dravonil", ["preterm birth"]).dossier
    s = d.sections[0]
    pooled = pool_evidence(demo_store, "dravonil", "preterm birth").groups
    assert [g.k for g in s.pooled] == [g["k"] for g in pooled]
    assert s.pooled[0].estimate == pytest.approx(
        pooled[0]["back_transformed"]["estimate"], rel=1e-12
    )
    rep = replication_for(demo_store, "dravonil", "preterm birth")
    assert s.replication.status == rep.status and s.replication.rule == rep.rule
    assert s.certainty.rating == "limited"  # recorded by the demo committee (judgements.csv)
    assert s.certainty.rated and s.certainty.row["certainty"] == "limited"


def test_edit_changes_fingerprint_and_diff_names_it(demo_copy, tmp_path):
    old = build_dossier(
        demo_copy, "dravonil", out=tmp_path / "old", formats="bundle", as_of="2026-01-01"
    )
    # an edit of another exposure's record leaves this fingerprint alone
    other = next(e for e in gather(demo_copy, "corvane").records["estimate"])
    _edit(demo_copy, "estimate", other["key"], {"point": other["point"] * 1.5})
    same = build_dossier(
        demo_copy, "dravonil", out=tmp_path / "same", formats="bundle", as_of="2026-01-01"
    )
    assert same.fingerprint == old.fingerprint
    # a one-field edit of a record used changes it
    g = gather(demo_copy, "dravonil", ["preterm birth"])
    used = g.dossier.sections[0].pooled[0].estimates[0]
    rec = next(e for e in g.records["estimate"] if e["key"] == used)
    _edit(demo_copy, "estimate", used, {"point": rec["point"] * 1.3})
    new = build_dossier(
        demo_copy, "dravonil", out=tmp_path / "new", formats="bundle", as_of="2026-02-01"
    )
    assert new.fingerprint != old.fingerprint
    for diff in (
        diff_dossier(None, tmp_path / "old", tmp_path / "new"),
        diff_dossier(demo_copy, tmp_path / "old"),
    ):
        changed = diff.of_kind("record-changed")
        assert [(c.key, c.field) for c in changed] == [(f"estimate:{used}", "point")]
        assert changed[0].old == str(rec["point"])
        assert not diff.of_kind("record-added") and not diff.of_kind("record-removed")
        moved = diff.of_kind("pooled-moved")
        assert moved and all(c.key.startswith("preterm birth |") for c in moved)
        assert {c.key for c in moved} >= {"preterm birth | overall | ratio · change"}


def test_since_puts_the_changes_first(demo_copy, tmp_path):
    build_dossier(
        demo_copy, "trelomene", out=tmp_path / "old", formats="bundle", as_of="2026-01-01"
    )
    study = gather(demo_copy, "trelomene").records["study"][0]
    _edit(demo_copy, "study", study["key"], {"population": "an edited population"})
    r = build_dossier(
        demo_copy,
        "trelomene",
        out=tmp_path / "new",
        formats="html",
        since=tmp_path / "old",
        as_of="2026-02-01",
    )
    assert [(c.kind, c.key, c.field) for c in r.changes.changes] == [
        ("record-changed", f"study:{study['key']}", "population")
    ]
    html = (tmp_path / "new/dossier.html").read_text()
    assert html.index('id="changes"') < html.index('id="question"')
    assert "an edited population" in html


@pytest.mark.parametrize("exposure", DEMO_EXPOSURES)
def test_every_demo_exposure_builds(demo_store, tmp_path, exposure):
    r = build_dossier(
        demo_store, exposure, out=tmp_path / exposure, formats="html,bundle", zip_bundle=True
    )
    assert r.demo
    html = (tmp_path / exposure / "dossier.html").read_text()
    sections = html.count('<section class="page"')
    # the demo flag on every page: once at the top and once in each section
    assert html.count('<p class="demo">DEMO') == sections >= 6
    assert "support, never replace, expert judgement" in html
    assert (tmp_path / exposure / "bundle.zip").is_file()
    assert diff_dossier(None, tmp_path / exposure / "bundle.zip", tmp_path / exposure).changes == []


def test_exposure_without_poolable_estimate(sqlite_store, tmp_path):
    with sqlite_store.write() as conn:
        w = Writer(conn, "tester")
        exp = records.ensure_vocab(w, "exposure", "lonely agent")
        records.create(
            w,
            "event",
            {
                "key": "L1",
                "exposure_id": exp,
                "change_kind": "ban",
                "change_direction": "decrease",
                "country": "FRA",
                "change_date": "2010",
            },
        )
        w.flush()
    r = build_dossier(sqlite_store, "lonely agent", out=tmp_path / "l", formats="html,bundle")
    html = (tmp_path / "l/dossier.html").read_text()
    assert "No outcome has an estimate for this exposure." in html
    assert "L1" in html  # the registered event is an opportunity
    assert not r.demo


def test_bad_input(demo_store, tmp_path):
    with pytest.raises(NotFoundError, match="did you mean 'dravonil'"):
        build_dossier(demo_store, "dravonill", out=tmp_path / "x")
    with pytest.raises(NotFoundError, match="no outcome 'preterm birthh'.*'preterm birth'"):
        build_dossier(demo_store, "dravonil", outcomes=["preterm birthh"], out=tmp_path / "x")
    with pytest.raises(ConfigError, match="unknown --format 'pdfx'"):
        build_dossier(demo_store, "dravonil", formats="html,pdfx", out=tmp_path / "x")
    with pytest.raises(ConfigError, match="--as-of 'yesterday'"):
        build_dossier(demo_store, "dravonil", as_of="yesterday", out=tmp_path / "x")
    busy = tmp_path / "busy"
    busy.mkdir()
    (busy / "notes.txt").write_text("mine")
    with pytest.raises(ConfigError, match=r"notes\.txt.*--force"):
        build_dossier(demo_store, "quorinate", out=busy, formats="bundle")
    assert sorted(p.name for p in busy.iterdir()) == ["notes.txt"]  # nothing written
    build_dossier(demo_store, "quorinate", out=busy, formats="bundle", force=True)
    assert (busy / "notes.txt").read_text() == "mine"  # never deleted
    assert (busy / "bundle/manifest.json").is_file()
    # writing again into a folder holding only its own files needs no --force
    build_dossier(demo_store, "quorinate", out=tmp_path / "own", formats="bundle")
    build_dossier(demo_store, "quorinate", out=tmp_path / "own", formats="bundle,html")


def test_diff_refuses_a_bad_bundle(tmp_path):
    with pytest.raises(BundleError, match="no such bundle"):
        diff_dossier(None, tmp_path / "nowhere", tmp_path / "nowhere")
    (tmp_path / "empty").mkdir()
    with pytest.raises(BundleError, match="no manifest.json"):
        diff_dossier(None, tmp_path / "empty", tmp_path / "empty")
    bad = tmp_path / "bad"
    bad.mkdir()
    (bad / "manifest.json").write_text("{not json")
    with pytest.raises(BundleError, match="not valid JSON"):
        diff_dossier(None, bad, bad)
    (bad / "manifest.json").write_text('{"format": "something else"}')
    with pytest.raises(BundleError, match="not a dossier bundle manifest"):
        diff_dossier(None, bad, bad)
