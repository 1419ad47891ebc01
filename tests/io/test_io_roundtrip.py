"""Round trips over generated evidence bases (hypothesis).

- sheet -> import -> JSON archive -> import into an empty database -> archive: byte-identical;
- the archive -> CSV sheet -> import into an empty database -> the same archive and the same CSV;
- the same through an Excel workbook;
- archives carrying appraisals and ratings come back unchanged.

Outside references: the sheet is written with Python's ``csv`` module, the expected numbers are
Python floats (``float.__repr__`` round-trips every double exactly), and the exported CSV is read
back with ``csv`` and the workbook with openpyxl.
"""

from __future__ import annotations

import csv
import datetime as dt
import json
import re
import shutil
from pathlib import Path

import pycountry
import pytest
from hypothesis import HealthCheck, assume, given, settings
from hypothesis import strategies as st
from io_helpers import write_sheet

from exposhift.appraisal.rubric import load_rubric
from exposhift.appraisal.scoring import score_appraisal
from exposhift.services.exporting import export_store
from exposhift.services.importing import import_into
from exposhift.services.setup import init_database, open_current
from exposhift.vocab import CHANGE_KINDS, DESIGNS, DIRECTIONS, ESTIMATE_KINDS

COUNTRIES = sorted(c.alpha_3 for c in pycountry.countries)
RATIOS = ("RR", "OR", "HR", "IRR")

_chars = st.characters(categories=("L", "N", "P", "S"), exclude_characters="|")
plain = (
    st.text(alphabet=st.one_of(_chars, st.just(" ")), min_size=1, max_size=10)
    .map(str.strip)
    .filter(bool)
)
# text a spreadsheet would run as a formula, and text that already starts with quotes
risky = st.builds(lambda p, t: p + t, st.sampled_from(["=", "+", "-", "@", "'=", "''-"]), plain)
text = st.one_of(plain, risky)
maybe = lambda s: st.one_of(st.none(), s)  # noqa: E731


def _f(lo, hi):
    return st.floats(lo, hi, allow_nan=False, allow_infinity=False)


@st.composite
def estimate_values(draw):
    measure = draw(st.sampled_from(["RR", "OR", "HR", "IRR", "pct_change", "RD", "MD", "SMD"]))
    lo, hi = (
        (1e-6, 1e6)
        if measure in RATIOS
        else (-99.9, 1e4)
        if measure == "pct_change"
        else (-1e9, 1e9)
    )
    a, b, c = sorted(draw(st.lists(_f(lo, hi), min_size=3, max_size=3)))
    assume(a < c)
    kind = draw(st.sampled_from(list(ESTIMATE_KINDS)))
    has_ci = draw(st.booleans())
    se = draw(maybe(_f(1e-9, 1e3).filter(lambda x: x > 0)))
    p = draw(maybe(_f(1e-12, 1.0).filter(lambda x: x > 0)))
    assume(has_ci or se is not None or p is not None)
    return {
        "measure": measure,
        "estimate_kind": kind,
        "estimate": b,
        "ci_low": a if has_ci else None,
        "ci_high": c if has_ci else None,
        "ci_level": draw(maybe(st.sampled_from([0.9, 0.95, 0.99, 0.8413]))) if has_ci else None,
        "se": se,
        "p_value": p,
        "per_unit": draw(_f(1e-3, 1e3)) if kind == "per-unit" else draw(maybe(_f(1e-3, 1e3))),
        "baseline_risk": draw(maybe(_f(1e-4, 0.9999))),
        "subgroup": draw(maybe(plain)),
        "time_window": draw(maybe(plain)),
        "primary": draw(st.booleans()),
    }


@st.composite
def events(draw):
    date = draw(st.dates(dt.date(1000, 1, 1), dt.date(2999, 12, 31)))
    shown = draw(st.sampled_from([date.strftime("%Y"), date.strftime("%Y-%m"), date.isoformat()]))
    return {
        "event_id": draw(plain),
        "exposure": draw(text),
        "change_kind": draw(st.sampled_from(list(CHANGE_KINDS))),
        "change_direction": draw(st.sampled_from(list(DIRECTIONS))),
        "change_size": draw(maybe(_f(0, 1e6))),
        "change_unit": draw(maybe(text)),
        "country": draw(st.sampled_from(COUNTRIES)),
        "area": draw(maybe(text)),
        "change_date": f"{int(shown[:4]):04d}{shown[4:]}",
        "family": draw(maybe(text)),
    }


@st.composite
def studies(draw):
    return {
        "study_id": draw(plain),
        "citation": draw(text),
        "year": draw(st.integers(1800, 2100)),
        "doi": draw(maybe(text)),
        "design": draw(st.sampled_from(list(DESIGNS))),
        "comparison": draw(maybe(text)),
        "population": draw(maybe(text)),
        "data_source": draw(maybe(text)),
        "assignment_grade": draw(maybe(st.integers(0, 3))),
        "pre_points": draw(maybe(st.integers(0, 500))),
        "post_points": draw(maybe(st.integers(0, 500))),
        "checks": draw(
            maybe(
                st.lists(
                    st.sampled_from(["pre-trends", "placebo-date", "placebo-place"]),
                    min_size=1,
                    unique=True,
                ).map(";".join)
            )
        ),
        "demo": draw(st.booleans()),
    }


@st.composite
def evidence(draw):
    evs = draw(st.lists(events(), min_size=1, max_size=3, unique_by=lambda e: e["event_id"]))
    sts = draw(st.lists(studies(), min_size=1, max_size=3, unique_by=lambda s: s["study_id"]))
    outcomes = draw(st.dictionaries(plain, maybe(text), min_size=1, max_size=3))
    rows, keys = [], set()
    for _ in range(draw(st.integers(1, 6))):
        s, e = draw(st.sampled_from(sts)), draw(st.sampled_from(evs))
        outcome = draw(st.sampled_from(sorted(outcomes)))
        est = draw(estimate_values())
        key = "|".join(
            str(x or "")
            for x in (
                s["study_id"],
                e["event_id"],
                outcome,
                est["measure"],
                est["estimate_kind"],
                est["subgroup"],
                est["time_window"],
            )
        )
        if key in keys:
            continue
        keys.add(key)
        rows.append({**s, **e, "outcome": outcome, "outcome_group": outcomes[outcome], **est})
    return rows


def _cell(v) -> str:
    if v is None:
        return ""
    if isinstance(v, bool):
        return "yes" if v else "no"
    if isinstance(v, float):
        return repr(v)
    return str(v)


def _neutral(v):
    """What a reviewer types for text that starts like a formula: one quote in front (the rule
    in docs/extraction-sheet.md: quotes, then one of = + - @)."""
    if isinstance(v, str) and re.match(r"'*[=+\-@]", v) and not _number(v):
        return "'" + v
    return v


def _number(v: str) -> bool:
    try:
        float(v)
        return v.strip() == v and not v.lower().lstrip("+-").startswith(("inf", "nan"))
    except ValueError:
        return False


@pytest.fixture(scope="module")
def template(tmp_path_factory) -> Path:
    path = tmp_path_factory.mktemp("template") / "empty.db"
    init_database(str(path), "tester")
    return path


class Fresh:
    """Fresh SQLite evidence bases copied from an initialised template (fast)."""

    def __init__(self, template: Path, root: Path):
        self.template, self.root, self.n, self.stores = template, root, 0, []

    def __call__(self):
        self.n += 1
        path = self.root / f"db{self.n}.db"
        shutil.copy(self.template, path)
        store = open_current(str(path), "tester")
        self.stores.append(store)
        return store

    def close(self):
        for s in self.stores:
            s.dispose()


def _dir(tmp_path_factory) -> Path:
    return tmp_path_factory.mktemp("rt")


SETTINGS = settings(
    max_examples=15,
    deadline=None,
    suppress_health_check=[HealthCheck.function_scoped_fixture, HealthCheck.too_slow],
)


@SETTINGS
@given(rows=evidence())
def test_sheet_archive_and_csv_round_trips(rows, template, tmp_path_factory):
    root = _dir(tmp_path_factory)
    fresh = Fresh(template, root)
    try:
        cells = [{k: _cell(_neutral(v)) for k, v in r.items()} for r in rows]
        sheet = write_sheet(root / "in.csv", cells)
        db1 = fresh()
        import_into(db1, sheet)
        export_store(db1, root / "a1.json")
        export_store(db1, root / "c1.csv")
        # archive -> empty database -> archive: the same bytes
        db2 = fresh()
        import_into(db2, root / "a1.json")
        export_store(db2, root / "a2.json")
        assert (root / "a1.json").read_bytes() == (root / "a2.json").read_bytes()
        # the exported sheet rebuilds the same evidence base, and exports to the same sheet
        db3 = fresh()
        import_into(db3, root / "c1.csv")
        export_store(db3, root / "a3.json")
        export_store(db3, root / "c3.csv")
        assert (root / "a3.json").read_bytes() == (root / "a1.json").read_bytes()
        assert (root / "c3.csv").read_bytes() == (root / "c1.csv").read_bytes()
        # the archive holds exactly the generated values (Python floats, texts as typed)
        doc = json.loads((root / "a1.json").read_text(encoding="utf-8"))
        by_key = {e["key"]: e for e in doc["estimates"]}
        assert len(by_key) == len(rows)
        for r in rows:
            key = "|".join(
                str(r[k] or "")
                for k in (
                    "study_id",
                    "event_id",
                    "outcome",
                    "measure",
                    "estimate_kind",
                    "subgroup",
                    "time_window",
                )
            )
            e = by_key[key]
            assert (e["point"], e["ci_low"], e["ci_high"], e["se"], e["p_value"]) == (
                r["estimate"],
                r["ci_low"],
                r["ci_high"],
                r["se"],
                r["p_value"],
            )
            assert (e["subgroup"], e["primary"]) == (r["subgroup"], r["primary"])
        studies_out = {s["key"]: s for s in doc["studies"]}
        for r in rows:
            s = studies_out[r["study_id"]]
            assert (s["citation"], s["year"], s["comparison"], s["checks"]) == (
                r["citation"],
                r["year"],
                r["comparison"],
                r["checks"],
            )
        # the CSV as a spreadsheet reads it: formula-like text is quoted, numbers are numbers
        with open(root / "c1.csv", encoding="utf-8", newline="") as fh:
            for rec in csv.DictReader(fh):
                assert not rec["citation"].startswith(("=", "+", "-", "@")) or _number(
                    rec["citation"]
                )
                float(rec["estimate"])  # a plain number, never quoted
    finally:
        fresh.close()


@settings(
    max_examples=6,
    deadline=None,
    suppress_health_check=[HealthCheck.function_scoped_fixture, HealthCheck.too_slow],
)
@given(rows=evidence())
def test_excel_round_trip(rows, template, tmp_path_factory):
    from openpyxl import load_workbook

    # openpyxl writes numbers with 16 significant digits ("%.16g"), Excel shows 15: the
    # workbook round trip is exact for numbers as reviewers type them (here <= 15 digits);
    # JSON and CSV are exact for every double
    rows = [
        {k: float(f"{v:.15g}") if isinstance(v, float) else v for k, v in r.items()} for r in rows
    ]
    assume(all(r["ci_low"] is None or r["ci_low"] < r["ci_high"] for r in rows))
    root = _dir(tmp_path_factory)
    fresh = Fresh(template, root)
    try:
        cells = [{k: _cell(_neutral(v)) for k, v in r.items()} for r in rows]
        db1 = fresh()
        import_into(db1, write_sheet(root / "in.csv", cells))
        export_store(db1, root / "a1.json")
        export_store(db1, root / "x1.xlsx")
        db2 = fresh()
        import_into(db2, root / "x1.xlsx")
        export_store(db2, root / "a2.json")
        assert (root / "a2.json").read_bytes() == (root / "a1.json").read_bytes()
        # reference reader: openpyxl sees numeric cells for the numbers
        ws = load_workbook(root / "x1.xlsx", read_only=True).worksheets[0]
        header, *body = list(ws.iter_rows(values_only=True))
        col = header.index("estimate")
        assert all(isinstance(r[col], (int, float)) and not isinstance(r[col], bool) for r in body)
    finally:
        fresh.close()


RUBRIC = load_rubric()


def _appraisal(draw, key, reviewer, stage):
    levels = {d: draw(st.integers(0, 3)) for d in RUBRIC.domain_keys}
    return {
        "study": key,
        "reviewer": reviewer,
        "stage": stage,
        "rubric_id": RUBRIC.rubric_id,
        "rubric_hash": RUBRIC.content_hash,
        "overall": score_appraisal(levels, RUBRIC).overall,
        # every rating justified, so any level is a valid departure from a suggestion
        "ratings": [
            {
                "domain": d,
                "level": lv,
                "reporting": draw(maybe(st.sampled_from([r.key for r in RUBRIC.reporting]))),
                "justification": draw(text),
                "suggested_level": draw(maybe(st.integers(0, 3))),
                "suggestion_reason": draw(maybe(text)),
            }
            for d, lv in levels.items()
        ],
    }


@st.composite
def appraisals(draw, study_keys):
    """Appraisals that pass the rules of 'appraise import' (the archive door applies them)."""
    out = []
    for key in study_keys:
        reviewers = draw(st.lists(plain, max_size=2, unique=True))
        out += [_appraisal(draw, key, r, "independent") for r in reviewers]
        if len(reviewers) == 2 and draw(st.booleans()):
            out.append(_appraisal(draw, key, draw(plain), "consensus"))
    return out


@SETTINGS
@given(data=st.data())
def test_archive_with_appraisals_round_trip(data, template, tmp_path_factory):
    rows = data.draw(evidence())
    root = _dir(tmp_path_factory)
    fresh = Fresh(template, root)
    try:
        cells = [{k: _cell(_neutral(v)) for k, v in r.items()} for r in rows]
        db1 = fresh()
        import_into(db1, write_sheet(root / "in.csv", cells))
        export_store(db1, root / "a1.json")
        doc = json.loads((root / "a1.json").read_text(encoding="utf-8"))
        apps = data.draw(appraisals(sorted({r["study_id"] for r in rows})))
        doc["appraisals"] = apps
        doc["vocabularies"]["exposures"][0]["agent_class"] = data.draw(maybe(text))
        (root / "edited.json").write_text(json.dumps(doc, indent=3), encoding="utf-8")
        db2 = fresh()
        import_into(db2, root / "edited.json")
        export_store(db2, root / "a2.json")
        back = json.loads((root / "a2.json").read_text(encoding="utf-8"))
        want = sorted(apps, key=lambda a: (a["study"], a["reviewer"], a["stage"]))
        for a in want:
            a["ratings"] = sorted(a["ratings"], key=lambda r: r["domain"])
        assert back["appraisals"] == want
        assert back["vocabularies"] == doc["vocabularies"]
        db3 = fresh()
        import_into(db3, root / "a2.json")
        export_store(db3, root / "a3.json")
        assert (root / "a3.json").read_bytes() == (root / "a2.json").read_bytes()
    finally:
        fresh.close()
