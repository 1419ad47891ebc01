"""Blinding by identity on every way an appraisal leaves the service layer: the study's
appraisals, the study record, reviewer agreement, the JSON archive, the sheet with consensus
levels and the audit trail. The expected visibility is written out by hand in
``tests/blinding_scenario.py`` from the rule stated in issue 13; each output is searched for
the unique marker of every appraisal that must stay hidden."""

from __future__ import annotations

import json

import argon2
import pytest

from blinding_scenario import (
    CONSENSUS_MARKER,
    INDEPENDENT,
    ROLES,
    VISIBLE,
    build,
    every_marker,
    hidden_markers,
    visible_markers,
)
from exposhift.access import Identity, may_see_independent
from exposhift.services import accounts
from exposhift.services.appraising import agreement, show_appraisals
from exposhift.services.auditing import show_audit
from exposhift.services.exporting import export_store
from exposhift.services.listing import study_record
from exposhift.services.setup import open_current

VIEWERS = sorted(ROLES)


@pytest.fixture(autouse=True)
def _cheap(monkeypatch):
    monkeypatch.setattr(
        accounts, "_HASHER", argon2.PasswordHasher.from_parameters(argon2.profiles.CHEAPEST)
    )
    accounts._dummy_hash.cache_clear()


@pytest.fixture
def base(store, tmp_path):
    build(store, tmp_path)
    return store


def _as(store, name):
    return open_current(store.url, user=name)


def test_the_rule_matches_the_hand_written_table():
    """The pure rule against the table of the scenario (written from the issue's sentence)."""
    consensus = {"B2"}
    for name, role in ROLES.items():
        viewer = Identity(name, role)
        got = {
            (s, r)
            for s, rs in INDEPENDENT.items()
            for r in rs
            if may_see_independent(viewer, r, rs, s in consensus)
        }
        assert got == VISIBLE[name], name


@pytest.mark.parametrize("name", VIEWERS)
def test_show_appraisals_and_study_record_hide_exactly_the_blinded(base, name):
    s = _as(base, name)
    try:
        for study in INDEPENDENT:
            for view in (show_appraisals(s, study), study_record(s, study).appraisals):
                for a in view["appraisals"]:
                    if a.stage == "consensus":
                        assert not a.blinded and a.ratings  # everyone sees the consensus
                        continue
                    visible = (study, a.reviewer) in VISIBLE[name]
                    assert a.blinded is not visible, (name, study, a.reviewer)
                    if a.blinded:
                        assert a.ratings is None and a.overall is None and not a.justifications
                        assert a.suggestions == {}
                text = json.dumps([vars(a) for a in view["appraisals"]], default=str)
                assert not hidden_markers(name) & {m for m in every_marker() if m in text}
    finally:
        s.dispose()


@pytest.mark.parametrize("name", VIEWERS)
def test_the_json_archive_holds_only_what_the_viewer_may_see(base, name, tmp_path):
    s = _as(base, name)
    try:
        out = tmp_path / f"{name}.json"
        result = export_store(s, out)
    finally:
        s.dispose()
    text = out.read_text(encoding="utf-8")
    assert CONSENSUS_MARKER in text
    if name == "root":  # the administrator's archive is whole, and says it holds blinded ones
        assert every_marker() <= {m for m in every_marker() if m in text}
        assert any("still blinded" in w for w in result.warnings)
        return
    assert not {m for m in hidden_markers(name) if m in text}
    assert visible_markers(name) == {m for m in every_marker() if m in text}
    n_hidden = len(hidden_markers(name))
    if n_hidden:
        assert any(f"{n_hidden} independent appraisal(s) left out" in w for w in result.warnings)
    assert result.counts["appraisals"] == len(VISIBLE[name]) + 1


@pytest.mark.parametrize("name", VIEWERS)
def test_the_sheet_with_appraisals_carries_consensus_levels_only(base, name, tmp_path):
    s = _as(base, name)
    try:
        out = tmp_path / "sheet.csv"
        export_store(s, out, with_appraisals=True)
    finally:
        s.dispose()
    text = out.read_text(encoding="utf-8")
    assert not {m for m in every_marker() if m in text}


@pytest.mark.parametrize("name", VIEWERS)
def test_the_audit_trail_hides_the_values_of_blinded_appraisals(base, name):
    view = show_audit(base.url, viewer=name, limit=None)
    text = json.dumps(view.entries, default=str)
    if name == "root":
        assert every_marker() <= {m for m in every_marker() if m in text}
        return
    assert not {m for m in hidden_markers(name) if m in text}
    assert visible_markers(name) <= {m for m in every_marker() if m in text}
    hidden = [e for e in view.entries if e.get("hidden")]
    assert all(e["before"] is None and e["after"] is None for e in hidden)
    # each hidden appraisal: its appraisal entry and one entry per rated domain
    keys = {tuple(e["row_key"].split("|")[:2]) for e in hidden}
    all_pairs = {(st, r) for st, rs in INDEPENDENT.items() for r in rs}
    assert keys == all_pairs - VISIBLE[name]


@pytest.mark.parametrize("name", VIEWERS)
def test_agreement_counts_only_studies_the_viewer_may_see_in_full(base, name):
    s = _as(base, name)
    try:
        table = agreement(s)
    finally:
        s.dispose()
    full = {st for st, rs in INDEPENDENT.items() if all((st, r) in VISIBLE[name] for r in rs)}
    assert table.attrs["studies_counted"] == len(full)
    paired = {st for st in full if len(INDEPENDENT[st]) >= 2}
    overall = table[table["domain"] == "overall level"].iloc[0]
    assert int(overall["n"]) == len(paired)
    assert bool(table.attrs["blinded_note"]) is (len(full) < len(INDEPENDENT))


def test_an_explicit_identity_overrides_the_store(base):
    """The dashboard passes the signed-in identity; the store (a reader) does not matter."""
    reader_view = base.acting("dashboard", "reader")
    ben = Identity("ben", "reviewer", signed_in=True)
    got = show_appraisals(reader_view, "B3", ben)
    assert [a.blinded for a in got["appraisals"]] == [False, False]
    nobody = show_appraisals(reader_view, "B3")
    assert all(a.blinded for a in nobody["appraisals"])
    assert nobody["appraisals"][0].reason == "hidden: readers see consensus appraisals only"
