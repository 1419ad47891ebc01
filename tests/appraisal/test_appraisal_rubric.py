"""The shipped rubric file: content, packaged copy, hash stability, default location.

Expected contents come from the design notes (RUBRIC.md, METHODS.md §1-2) and issue 5: the
eleven domain keys, the four core domains, the cap rule (0 in a non-core domain other than
applicability caps the overall at 1), falsification never lifting, applicability apart, fatal
overall excluded from pooling. The hash checks use hashlib directly as the outside reference.
"""

from __future__ import annotations

import hashlib

import pytest
from appraisal_helpers import PACKAGED_FILE, RUBRIC_FILE, edited, write

from exposhift.appraisal.checks import CHECKS
from exposhift.appraisal.rubric import (
    DOMAIN_KEYS,
    load_rubric,
    normalise_bytes,
    packaged_rubric_path,
    rubric_hash,
)
from exposhift.errors import RubricError
from exposhift.vocab import DESIGNS

ISSUE_DOMAINS = (
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
)


def test_domains_and_summary_rule_match_the_design_notes(rubric):
    assert rubric.domain_keys == ISSUE_DOMAINS
    assert set(DOMAIN_KEYS) == set(ISSUE_DOMAINS)
    assert rubric.core_domains == (
        "origin",
        "counterfactual",
        "design_checks",
        "concurrent_changes",
    )
    assert [d.key for d in rubric.domains if d.core] == list(rubric.core_domains)
    assert rubric.apart_domains == ("applicability",)
    assert rubric.domain("applicability").apart
    assert rubric.cap_trigger == 0 and rubric.cap_at == 1
    assert set(rubric.cap_domains) == set(ISSUE_DOMAINS) - set(rubric.core_domains) - {
        "applicability"
    }
    assert rubric.never_lifts == ("falsification",)
    assert rubric.exclude_from_pooling == (0,)


def test_every_domain_has_a_question_and_criteria_for_each_level(rubric):
    for d in rubric.domains:
        assert d.question.endswith("?"), d.key
        assert [lv for lv, _ in d.levels] == [3, 2, 1, 0]
        for lv in range(4):
            assert d.criteria(lv), (d.key, lv)
    with pytest.raises(RubricError, match="outside 0-3"):
        rubric.domain("origin").criteria(4)


def test_scale_and_reporting_keys(rubric):
    assert [(s.level, s.key) for s in rubric.scale] == [
        (3, "strong"),
        (2, "adequate"),
        (1, "weak"),
        (0, "fatal"),
    ]
    assert rubric.level_name(1) == "weak"
    # reporting: reported / partly reported / not reported, under our own keys
    assert [r.label for r in rubric.reporting] == ["reported", "partly reported", "not reported"]
    assert len({r.key for r in rubric.reporting}) == 3


def test_design_specific_criteria_use_known_designs_and_checks(rubric):
    seen = set()
    for d in rubric.domains:
        for dc in d.designs:
            assert dc.design in DESIGNS
            assert all(c in CHECKS for c in dc.checks)
            seen.add((d.key, dc.design))
    # design_checks has a minimum set for every design in METHODS.md §1
    assert {design for key, design in seen if key == "design_checks"} == set(DESIGNS)
    iv = rubric.domain("design_checks").for_design("iv")
    assert iv is not None and "first-stage-f" in iv.checks
    assert any("10" in m for m in iv.minimum)  # Staiger & Stock (1997) threshold
    assert rubric.domain("timing").for_design("iv") is None


def test_packaged_copy_is_identical_to_the_workspace_rubric():
    assert PACKAGED_FILE.read_bytes() == RUBRIC_FILE.read_bytes()
    assert packaged_rubric_path().resolve() == PACKAGED_FILE.resolve()


def test_hash_is_sha256_of_the_file_bytes(rubric):
    # reference: hashlib on the raw bytes (the shipped file has LF endings and no BOM)
    raw = RUBRIC_FILE.read_bytes()
    assert b"\r" not in raw
    assert rubric.content_hash == hashlib.sha256(raw).hexdigest()
    assert rubric_hash(raw) == rubric.content_hash
    assert load_rubric(RUBRIC_FILE).content_hash == rubric.content_hash  # same bytes, same hash


def test_crlf_cr_and_bom_give_the_same_hash(tmp_path, rubric_text, rubric):
    lf = rubric_text.encode("utf-8")
    crlf = tmp_path / "crlf.toml"
    crlf.write_bytes(lf.replace(b"\n", b"\r\n"))
    cr = tmp_path / "cr.toml"
    cr.write_bytes(lf.replace(b"\n", b"\r"))
    bom = tmp_path / "bom.toml"
    bom.write_bytes(b"\xef\xbb\xbf" + lf)
    for path in (crlf, cr, bom):
        loaded = load_rubric(path)
        assert loaded.content_hash == rubric.content_hash, path.name
        assert loaded.domain_keys == rubric.domain_keys
    assert normalise_bytes(b"a\r\nb\rc\n") == b"a\nb\nc\n"


def test_any_other_change_gives_a_new_hash(tmp_path, rubric_text, rubric):
    reworded = edited(
        rubric_text, 'criteria = ["one null test"]', 'criteria = ["exactly one null test"]'
    )
    changed = load_rubric(write(tmp_path, reworded))
    assert changed.content_hash != rubric.content_hash
    assert changed.version == rubric.version  # a forgotten version bump is caught by the hash
    trailing = load_rubric(write(tmp_path, rubric_text + " ", "trailing.toml"))
    assert trailing.content_hash != rubric.content_hash


def test_new_version_and_new_hash_while_the_old_rubric_keeps_its_own(tmp_path, rubric_text, rubric):
    old_hash = rubric.content_hash
    bumped = edited(rubric_text, 'version = "1.0"', 'version = "1.1"')
    bumped = edited(bumped, "cap_at = 1\n", "cap_at = 2\n")
    new = load_rubric(write(tmp_path, bumped))
    assert (new.version, rubric.version) == ("1.1", "1.0")
    assert new.content_hash != old_hash and new.cap_at == 2
    assert load_rubric(RUBRIC_FILE).content_hash == old_hash
    assert new.label.startswith("exposhift-natural-experiments 1.1 (")


def test_default_ignores_the_working_folder(tmp_path, monkeypatch, rubric_text, rubric):
    # the method lives in the evidence base: a rubric.toml in ./evidence is never read
    (tmp_path / "evidence").mkdir()
    local = edited(rubric_text, 'version = "1.0"', 'version = "committee-2"')
    write(tmp_path / "evidence", local)
    monkeypatch.chdir(tmp_path)
    loaded = load_rubric()
    assert loaded.version == rubric.version
    assert loaded.path.resolve() == PACKAGED_FILE.resolve()


def test_default_falls_back_to_the_packaged_copy(tmp_path, monkeypatch, rubric):
    monkeypatch.chdir(tmp_path)
    loaded = load_rubric(None)
    assert loaded.path.resolve() == PACKAGED_FILE.resolve()
    assert loaded.content_hash == rubric.content_hash


def test_missing_file_is_a_rubric_error(tmp_path):
    with pytest.raises(RubricError, match="rubric file not found: .*nope.toml"):
        load_rubric(tmp_path / "nope.toml")


def test_summary_rule_in_words(rubric):
    assert rubric.summary_text == (
        "overall = lowest of origin, counterfactual, design_checks, concurrent_changes; a "
        "rating of 0 (fatal) or lower in falsification, timing, exposure_shift, outcome_data, "
        "inference, transparency caps it at 1 (weak); falsification never lifts a weak core; "
        "applicability reported apart; overall 0 (fatal) left out of pooled estimates by default"
    )
    assert "never replaces" in rubric.caution
