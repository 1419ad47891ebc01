"""No blinded rating learnt by importing a guess (issue 13: blinding by identity).

The probe: import a guessed appraisal under another reviewer's name and read the answer; were
it "unchanged" for a right guess and "conflict" for a wrong one, the import would tell the
blinded rating. For every viewer of the invented scenario (``tests/blinding_scenario.py``) and
every independent appraisal the hand-written ``VISIBLE`` table hides from her, two guesses (the
stored ratings, and other ratings) are imported through ``appraise import`` (service and
command line) and through a JSON archive (``exposhift import``, dry run and real): the answers
must be byte-identical and nothing written. The visible ones are still compared as before (an
identical appraisal is "unchanged", a different one refused), so the check is not a blanket
refusal.
"""

from __future__ import annotations

import json

import argon2
import pandas as pd
import pytest
from sqlalchemy import select
from typer.testing import CliRunner

from blinding_scenario import DOMAINS, INDEPENDENT, ROLES, VISIBLE, build, marker
from exposhift.appraisal.scoring import score_appraisal
from exposhift.cli.main import app
from exposhift.errors import ExposhiftError, InputFileError
from exposhift.services import accounts
from exposhift.services.appraising import import_appraisals, rubric_in_force
from exposhift.services.exporting import export_store
from exposhift.services.importing import import_into
from exposhift.services.setup import open_current
from exposhift.store.models import Appraisal, AuditEntry, Rating

runner = CliRunner()
PAIRS = sorted((s, r) for s, rs in INDEPENDENT.items() for r in rs)
#: the stored level of each reviewer's ratings in the scenario (blinding_scenario.appraisal_rows)
STORED = {"ana": 2}


@pytest.fixture(autouse=True)
def _cheap(monkeypatch):
    monkeypatch.setattr(
        accounts, "_HASHER", argon2.PasswordHasher.from_parameters(argon2.profiles.CHEAPEST)
    )
    accounts._dummy_hash.cache_clear()


@pytest.fixture
def base(store, tmp_path):
    build(store, tmp_path)
    root = open_current(store.url, user="root")
    try:
        export_store(root, tmp_path / "whole.json")
    finally:
        root.dispose()
    return store


def table_dump(store) -> dict[str, list[tuple]]:
    """Every appraisal, rating and audit entry, for 'nothing written' comparisons."""
    out = {}
    with store.read() as conn:
        for model in (Appraisal, Rating, AuditEntry):
            t = model.__table__
            out[t.name] = [tuple(r) for r in conn.execute(select(t).order_by(t.c.id))]
    return out


def _dir(tmp_path, right: bool):
    d = tmp_path / ("right" if right else "wrong")
    d.mkdir(exist_ok=True)
    return d


def _level(reviewer: str, right: bool) -> int:
    stored = STORED.get(reviewer, 3)
    return stored if right else 5 - stored  # 2 <-> 3: both allowed for these studies


def _sheet(tmp_path, study, reviewer, right: bool):
    row = {"study_id": study, "reviewer": reviewer, "stage": "independent"}
    row.update({d: str(_level(reviewer, right)) for d in DOMAINS})
    row["origin_why"] = marker(study, reviewer)
    path = _dir(tmp_path, right) / "guess.csv"  # one file name: the answers may quote it
    pd.DataFrame([row]).to_csv(path, index=False)
    return path


def _archive(tmp_path, store, study, reviewer, right: bool):
    doc = json.loads((tmp_path / "whole.json").read_text(encoding="utf-8"))
    [rec] = [
        a
        for a in doc["appraisals"]
        if (a["study"], a["reviewer"], a["stage"]) == (study, reviewer, "independent")
    ]
    level = _level(reviewer, right)
    for r in rec["ratings"]:
        r["level"] = level
    rubric = rubric_in_force(store)
    rec["overall"] = score_appraisal({r["domain"]: level for r in rec["ratings"]}, rubric).overall
    doc["appraisals"] = [rec]
    path = _dir(tmp_path, right) / "guess.json"
    path.write_text(json.dumps(doc), encoding="utf-8")
    return path


def _answer(call) -> tuple[str, str]:
    try:
        got = call()
    except ExposhiftError as exc:
        return type(exc).__name__, str(exc)
    return "ok", repr(got)


def _service_answers(base, tmp_path, name, study, reviewer) -> dict[str, list]:
    s = open_current(base.url, user=name)
    out: dict[str, list] = {"sheet": [], "archive": [], "archive dry run": [], "cli": []}
    try:
        for right in (True, False):
            sheet = _sheet(tmp_path, study, reviewer, right)
            archive = _archive(tmp_path, base, study, reviewer, right)
            out["sheet"].append(_answer(lambda p=sheet: import_appraisals(s, p)))
            out["archive dry run"].append(
                _answer(lambda p=archive: import_into(s, p, dry_run=True).counts["appraisals"])
            )
            out["archive"].append(_answer(lambda p=archive: import_into(s, p).counts["appraisals"]))
            cli = runner.invoke(
                app, ["--db", base.url, "--user", name, "appraise", "import", str(sheet)]
            )
            out["cli"].append((cli.exit_code, cli.output))
    finally:
        s.dispose()
    return out


@pytest.mark.parametrize("name", sorted(n for n in ROLES if ROLES[n] != "admin"))
def test_both_guesses_of_a_hidden_appraisal_get_byte_identical_answers(base, tmp_path, name):
    before = table_dump(base)
    hidden = [p for p in PAIRS if p not in VISIBLE[name] and p[1] != name]
    assert hidden  # every non-admin of the scenario has some appraisal hidden from her
    for study, reviewer in hidden:
        answers = _service_answers(base, tmp_path, name, study, reviewer)
        for door, (right, wrong) in answers.items():
            assert right == wrong, (name, study, reviewer, door)
            assert right[0] != "ok" and right[0] != 0, (name, door)  # refused, not imported
        if ROLES[name] == "editor":  # the refusal of the new rule, not a comparison
            text = answers["sheet"][0][1]
            assert f"may not import '{reviewer}''s independent appraisal" in text
            assert "column 'reviewer'" in text
            assert "unchanged" not in text and "other ratings" not in text
    assert table_dump(base) == before  # nothing written by any of the attempts


def test_visible_appraisals_are_still_compared(base, tmp_path):
    """The chair (editor) sees B1's appraisals: a right guess is unchanged, a wrong one is a
    conflict (the ordinary answers; the check refuses only what would leak)."""
    s = open_current(base.url, user="ed")
    try:
        assert ("B1", "ana") in VISIBLE["ed"]
        right = import_appraisals(s, _sheet(tmp_path, "B1", "ana", True))
        assert (right.added, right.unchanged) == (0, 1)
        with pytest.raises(InputFileError, match="other ratings"):
            import_appraisals(s, _sheet(tmp_path, "B1", "ana", False))
        c = import_into(s, _archive(tmp_path, base, "B1", "ana", True)).counts["appraisals"]
        assert (c.added, c.updated, c.unchanged) == (0, 0, 1)
        with pytest.raises(InputFileError, match="with other content"):
            import_into(s, _archive(tmp_path, base, "B1", "ana", False))
    finally:
        s.dispose()


def test_a_reviewer_imports_her_own_and_an_admin_any(base, tmp_path):
    ana = open_current(base.url, user="ana")
    root = open_current(base.url, user="root")
    try:
        assert import_appraisals(ana, _sheet(tmp_path, "B0", "ana", True)).unchanged == 1
        with pytest.raises(InputFileError, match="other ratings"):
            import_appraisals(ana, _sheet(tmp_path, "B0", "ana", False))
        assert import_appraisals(root, _sheet(tmp_path, "B0", "ana", True)).unchanged == 1
        with pytest.raises(InputFileError, match="other ratings"):
            import_appraisals(root, _sheet(tmp_path, "B0", "ana", False))
    finally:
        ana.dispose()
        root.dispose()


def test_an_editor_may_not_enter_an_independent_appraisal_under_an_absent_name(base, tmp_path):
    """cy has not appraised B0: an editor's appraisal under cy's name is refused with the same
    message as a blinded one (it would also unblind ana's, as the second one in)."""
    s = open_current(base.url, user="ed")
    try:
        with pytest.raises(InputFileError, match="may not import 'cy''s independent appraisal"):
            import_appraisals(s, _sheet(tmp_path, "B0", "cy", True))
    finally:
        s.dispose()
