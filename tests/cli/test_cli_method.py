"""The method lives in the evidence base: two bases, two rubrics, any working folder.

Outside references: the levels of record are read back with Python's ``sqlite3`` module (not
through exposhift), and the content hash is recomputed with ``hashlib.sha256`` (FIPS 180-4).
Which levels a rubric leaves out of pooling is the rubric's own ``exclude_from_pooling``
(docs/method.md); the demo scenario is invented.
"""

from __future__ import annotations

import hashlib
import json
import sqlite3
from pathlib import Path

import pytest
from typer.testing import CliRunner

from exposhift.appraisal.rubric import packaged_rubric_path
from exposhift.cli.main import app
from exposhift.store.migrate import head_revision

runner = CliRunner()
PAIR = ("--exposure", "trelomene", "--outcome", "elevated liver enzymes")


def run(*args: str, code: int = 0):
    result = runner.invoke(app, list(args))
    assert result.exit_code == code, result.output
    return result


def strict_rubric(tmp: Path) -> Path:
    """The packaged rubric leaving weak (1) studies out of pooling too, renamed."""
    text = packaged_rubric_path().read_text(encoding="utf-8")
    assert "exclude_from_pooling = [0]" in text and 'version = "1.0"' in text
    text = text.replace("exclude_from_pooling = [0]", "exclude_from_pooling = [0, 1]")
    text = text.replace('version = "1.0"', 'version = "committee-2"', 1)
    path = tmp / "strict-rubric.toml"
    path.write_text(text, encoding="utf-8")
    return path


def copy_db(src: str, dst: Path) -> str:
    with sqlite3.connect(src) as a, sqlite3.connect(dst) as b:
        a.backup(b)
    return str(dst)


@pytest.fixture(scope="module")
def demo_db(tmp_path_factory) -> str:
    path = tmp_path_factory.mktemp("demo") / "demo.db"
    run("demo", "--db", str(path))
    return str(path)


@pytest.fixture
def two_bases(demo_db, tmp_path, monkeypatch):
    """Base A (packaged rubric) and base B (strict rubric stored), run from a folder whose
    ./evidence/rubric.toml would leave every level out if anything read it."""
    a = copy_db(demo_db, tmp_path / "a.db")
    b = copy_db(demo_db, tmp_path / "b.db")
    run("--db", b, "--user", "committee", "method", "set", "rubric", str(strict_rubric(tmp_path)))
    trap = tmp_path / "elsewhere" / "evidence"
    trap.mkdir(parents=True)
    text = packaged_rubric_path().read_text(encoding="utf-8")
    (trap / "rubric.toml").write_text(
        text.replace("exclude_from_pooling = [0]", "exclude_from_pooling = [0, 1, 2, 3]"),
        encoding="utf-8",
    )
    (trap / "replication.toml").write_text("[thresholds]\nmin_level = 3\n", encoding="utf-8")
    monkeypatch.chdir(trap.parent)
    return a, b


def levels_of_record(db: str) -> dict[str, int]:
    """study key -> consensus overall level, read with sqlite3 (outside exposhift)."""
    with sqlite3.connect(db) as con:
        rows = con.execute(
            "SELECT s.key, a.overall FROM appraisal a JOIN study s ON s.id = a.study_id "
            "WHERE a.stage = 'consensus'"
        ).fetchall()
    return dict(rows)


def excluded_for_level(text: str) -> set[str]:
    """Studies the text output of ``pool`` lists as left out for their level of record."""
    return {
        line.strip().split("|", 1)[0] for line in text.splitlines() if "appraisal of record" in line
    }


def test_each_base_pools_with_its_own_rubric_from_any_folder(two_bases):
    a, b = two_bases
    left_a = excluded_for_level(run("--db", a, "pool", *PAIR).stdout)
    left_b = excluded_for_level(run("--db", b, "pool", *PAIR).stdout)
    levels = levels_of_record(b)
    # base A leaves out level 0 only, base B levels 0 and 1; the trap folder's rubric (every
    # level left out) and thresholds (min_level 3) are never read
    assert left_a == {s for s in left_b if levels[s] == 0} and left_a
    assert {levels[s] for s in left_b} == {0, 1}
    out_a = json.loads(run("--db", a, "pool", *PAIR, "--json").stdout)
    out_b = json.loads(run("--db", b, "pool", *PAIR, "--json").stdout)
    assert out_a["groups"]  # the trap rubric would have left everything out
    assert "overall 0, 1" in out_b["evidence_set"] and "fatal" in out_a["evidence_set"]
    assert "one_run_override" not in out_a and "one_run_override" not in out_b
    rep = json.loads(run("--db", a, "replication", *PAIR, "--json").stdout)
    assert "level ≥ 2" in rep["rule"]  # the base's min_level, not the trap folder's 3


def test_one_run_override_says_so_and_stores_nothing(two_bases, tmp_path):
    a, _b = two_bases
    strict = strict_rubric(tmp_path)
    text = run("--db", a, "pool", *PAIR, "--rubric", str(strict)).stdout
    assert text.startswith("one-run override: rubric from ")
    assert {levels_of_record(a)[s] for s in excluded_for_level(text)} == {0, 1}
    out = json.loads(run("--db", a, "pool", *PAIR, "--rubric", str(strict), "--json").stdout)
    assert out["one_run_override"] and "strict-rubric.toml" in out["one_run_override"][0]
    assert "overall 0, 1" in out["evidence_set"]
    shown = json.loads(run("--db", a, "method", "show", "--json", "--history").stdout)
    assert [v["number"] for v in shown["history"] if v["part"] == "rubric"] == [1]
    settings = tmp_path / "s.toml"
    settings.write_text("[thresholds]\nmin_level = 3\n", encoding="utf-8")
    rep = json.loads(
        run("--db", a, "replication", *PAIR, "--settings", str(settings), "--json").stdout
    )
    assert "level ≥ 3" in rep["rule"] and rep["one_run_override"]


def test_method_show_and_set_record_versions_with_audit(two_bases, tmp_path):
    _a, b = two_bases
    shown = json.loads(run("--db", b, "method", "show", "--json", "--history").stdout)
    rubric = shown["parts"]["rubric"]
    strict = strict_rubric(tmp_path).read_bytes()
    assert rubric["number"] == 2 and rubric["created_by"] == "committee"
    assert rubric["content_hash"] == hashlib.sha256(strict).hexdigest()
    assert rubric["text"] == strict.decode("utf-8")
    assert rubric["declared"] == "exposhift-natural-experiments committee-2"
    audit = run("--db", b, "audit", "show", "--user", "committee").stdout
    assert "method_version" in audit and "rubric 2" in audit
    # the same text again is not a new version
    again = run("--db", b, "method", "set", "rubric", str(strict_rubric(tmp_path)))
    assert "nothing was stored" in again.stdout
    # an appraisal made under version 1 is marked as older where appraisals are shown
    study = next(s for s, lv in levels_of_record(b).items() if lv == 1)
    view = json.loads(run("--db", b, "appraise", "show", study, "--json").stdout)
    assert "consensus made under an older rubric: rubric version 1" in view["older_rubric"]
    assert "older rubric" in run("--db", b, "appraise", "show", study).stdout


@pytest.mark.parametrize(
    ("part", "edit", "line_text", "words"),
    [
        ("rubric", ("[rubric]", "[rubric\n"), "[rubric", "syntax"),
        (
            "rubric",
            ('version = "1.0"', 'version = "1.0"\ncolour = "red"'),
            'colour = "red"',
            "colour",
        ),
        ("rubric", ("level = 3\n", "level = 4\n"), "level = 4", "0-3"),
        ("settings", ("min_level = 2", 'min_level = "two"'), 'min_level = "two"', "min_level"),
        ("settings", ("min_places = 2", "min_place = 2"), "min_place = 2", "unknown setting"),
        ("settings", ("alpha = 0.05", "alpha = 5"), "alpha = 5", "between 0 and 1"),
    ],
)
def test_bad_method_file_names_its_line_and_stores_nothing(
    two_bases, tmp_path, part, edit, line_text, words
):
    a, _b = two_bases
    source = packaged_rubric_path()
    if part == "settings":
        source = source.with_name("replication.toml")
    text = source.read_text(encoding="utf-8")
    assert edit[0] in text
    bad = text.replace(edit[0], edit[1], 1)
    path = tmp_path / f"bad-{part}.toml"
    path.write_text(bad, encoding="utf-8")
    want = next(i for i, ln in enumerate(bad.splitlines(), start=1) if ln.startswith(line_text))
    before = run("--db", a, "audit", "verify").stdout
    result = run("--db", a, "method", "set", part, str(path), code=2)
    assert f"line {want}" in result.output and words in result.output
    assert run("--db", a, "audit", "verify").stdout == before  # nothing written
    shown = json.loads(run("--db", a, "method", "show", "--json").stdout)
    assert shown["parts"][part]["number"] == 1


def test_archive_carries_the_method_and_restores_it(two_bases, tmp_path):
    _a, b = two_bases
    first, second = tmp_path / "one.json", tmp_path / "two.json"
    run("--db", b, "export", str(first))
    doc = json.loads(first.read_text(encoding="utf-8"))
    assert [(m["part"], m["number"]) for m in doc["method"]] == [
        ("certainty", 1),
        ("rubric", 1),
        ("rubric", 2),
        ("settings", 1),
    ]
    fresh = str(tmp_path / "fresh.db")
    run("--db", fresh, "init")
    run("--db", fresh, "import", str(first))
    run("--db", fresh, "export", str(second))
    assert first.read_bytes() == second.read_bytes()
    shown = json.loads(run("--db", fresh, "method", "show", "--json").stdout)
    assert shown["parts"]["rubric"]["number"] == 2
    assert shown["parts"]["rubric"]["declared"].endswith("committee-2")


def test_archive_with_another_method_history_is_refused(two_bases, tmp_path):
    a, b = two_bases
    archive = tmp_path / "b.json"
    run("--db", b, "export", str(archive))
    other = tmp_path / "other.toml"
    other.write_text(
        packaged_rubric_path().read_text(encoding="utf-8").replace("1.0", "other", 1),
        encoding="utf-8",
    )
    run("--db", a, "method", "set", "rubric", str(other))
    before = run("--db", a, "audit", "verify").stdout
    result = run("--db", a, "import", str(archive), code=2)
    assert "rubric version 2" in result.output and "nothing was imported" in result.output
    assert run("--db", a, "audit", "verify").stdout == before


def test_archive_with_an_edited_method_text_is_refused(two_bases, tmp_path):
    _a, b = two_bases
    archive = tmp_path / "b.json"
    run("--db", b, "export", str(archive))
    text = archive.read_text(encoding="utf-8")
    doc = json.loads(text)
    edited = next(m for m in doc["method"] if (m["part"], m["number"]) == ("rubric", 2))
    edited["text"] = edited["text"].replace("committee-2", "committee-3")
    archive.write_text(json.dumps(doc), encoding="utf-8")
    fresh = str(tmp_path / "fresh.db")
    run("--db", fresh, "init")
    result = run("--db", fresh, "import", str(archive), code=2)
    assert "content_hash" in result.output and "does not match" in result.output
    shown = json.loads(run("--db", fresh, "method", "show", "--json").stdout)
    assert shown["parts"]["rubric"]["number"] == 1  # nothing was restored


def test_newer_schema_is_refused_naming_both_versions(tmp_path):
    db = str(tmp_path / "new.db")
    run("--db", db, "init")
    with sqlite3.connect(db) as con:
        con.execute("UPDATE alembic_version SET version_num = 'f00dfeed9999'")
    result = run("--db", db, "method", "show", code=3)
    assert "f00dfeed9999" in result.output and head_revision() in result.output
    assert "nothing was written" in result.output
