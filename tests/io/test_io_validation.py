"""Every validation rule of the extraction sheet, each with a bad row: the problem names the file,
the spreadsheet row (header = row 1) and the column, and says what to do.

Outside references: ISO 3166-1 alpha-3 codes come from pycountry (the ISO 3166 data it ships);
calendar validity is checked against Python's ``datetime.date`` (proleptic Gregorian calendar);
the ratio/percent-change bounds follow from the log scale these measures are analysed on
(docs/methods.md: ln of a value <= 0, ln(1 + p/100) for p <= -100 are undefined).
"""

from __future__ import annotations

import datetime as dt

import numpy as np
import pandas as pd
import pycountry
import pytest
from io_helpers import row, two_rows

from exposhift.errors import InputFileError
from exposhift.io import cells
from exposhift.io.problems import ProblemLog
from exposhift.services.importing import read_input


def problems_of(path, **kw) -> list:
    with pytest.raises(InputFileError) as info:
        read_input(path, **kw)
    return info.value.problems


def only(problems, column):
    found = [p for p in problems if p.column == column]
    assert found, f"no problem in column {column}: {[str(p) for p in problems]}"
    return found


# (bad cell values of row 3, column expected in the problem, words of the message)
RULES = [
    ({"country": "XXX"}, "country", "unknown ISO 3166-1 alpha-3"),
    ({"country": "Netherlands"}, "country", "did you mean NLD"),
    ({"estimate": "0.5"}, "estimate", "outside its confidence interval"),
    (
        {"measure": "OR", "estimate": "0", "ci_low": "", "ci_high": "", "se": "0.1"},
        "estimate",
        "must be positive",
    ),
    (
        {"measure": "HR", "estimate": "0.5", "ci_low": "-0.1", "ci_high": "0.9"},
        "ci_low",
        "lower limit must be positive",
    ),
    (
        {"measure": "pct_change", "estimate": "-100", "ci_low": "", "ci_high": "", "se": "1"},
        "estimate",
        "above -100",
    ),
    (
        {"measure": "pct_change", "estimate": "-20", "ci_low": "-100", "ci_high": "5"},
        "ci_low",
        "above -100",
    ),
    ({"ci_low": "", "ci_high": "", "se": "0"}, "se", "not positive"),
    ({"ci_low": "", "ci_high": "", "se": "-0.2"}, "se", "not positive"),
    ({"ci_level": "95"}, "ci_level", "outside (0, 1)"),
    ({"ci_level": "0"}, "ci_level", "outside (0, 1)"),
    ({"change_date": "2001-02-29"}, "change_date", "not a real calendar date"),
    ({"change_date": "1900-02-29"}, "change_date", "not a real calendar date"),
    ({"change_date": "2001-13"}, "change_date", "not a real calendar date"),
    ({"change_date": "05/2001"}, "change_date", "YYYY, YYYY-MM or YYYY-MM-DD"),
    ({"change_date": "2001-5"}, "change_date", "YYYY, YYYY-MM or YYYY-MM-DD"),
    ({"ci_low": "", "ci_high": ""}, "ci_low", "no uncertainty given"),
    ({"ci_high": ""}, "ci_high", "give both limits or neither"),
    ({"ci_low": "0.95", "ci_high": "0.7", "estimate": "0.8"}, "ci_low", "not below ci_high"),
    ({"design": "itss"}, "design", "accepted: before-after, its"),
    ({"change_kind": "banned"}, "change_kind", "accepted: ban, restriction"),
    ({"change_direction": "down"}, "change_direction", "accepted: decrease, increase"),
    ({"measure": "ratio"}, "measure", "accepted: RR, OR"),
    ({"estimate_kind": "overall"}, "estimate_kind", "accepted: change, level"),
    ({"citation": ""}, "citation", "required value missing"),
    ({"outcome": ""}, "outcome", "required value missing"),
    ({"estimate": "0,8"}, "estimate", "decimal point"),
    ({"ci_high": "abc"}, "ci_high", "is not a number"),
    ({"year": "MMV"}, "year", "not a whole number"),
    ({"year": "1500"}, "year", "outside 1800-2100"),
    ({"pre_points": "-1"}, "pre_points", "cannot be negative"),
    ({"assignment_grade": "5"}, "assignment_grade", "not 0, 1, 2 or 3"),
    ({"primary": "maybe"}, "primary", "not yes or no"),
    ({"demo": "perhaps"}, "demo", "not yes or no"),
    ({"p_value": "0", "ci_low": "", "ci_high": ""}, "p_value", "not above 0"),
    ({"p_value": "1.5", "ci_low": "", "ci_high": ""}, "p_value", "not above 0"),
    ({"baseline_risk": "1.5"}, "baseline_risk", "between 0 and 1"),
    ({"change_size": "-3"}, "change_size", "positive number"),
    ({"estimate_kind": "per-unit"}, "per_unit", "needs per_unit"),
    ({"per_unit": "0"}, "per_unit", "must be positive"),
    ({"study_id": "S|2"}, "study_id", "must not contain '|'"),
    ({"subgroup": "men|women"}, "subgroup", "must not contain '|'"),
]


@pytest.mark.parametrize(
    "bad,column,words", RULES, ids=[f"{c}:{'/'.join(b.values())}" for b, c, _ in RULES]
)
def test_rule_reports_file_row_column(sheet, bad, column, words):
    problems = problems_of(sheet(two_rows(**bad), name="extraction.csv"))
    found = only(problems, column)
    assert any(words in p.message for p in found), [str(p) for p in found]
    p = found[0]
    assert (p.file, p.row) == ("extraction.csv", 3)
    assert str(p).startswith(f"extraction.csv, row 3, column '{column}': ")
    assert all(q.row == 3 for q in problems), "the valid row 2 must not be reported"


def test_valid_rows_pass(sheet):
    _, frames = read_input(sheet(two_rows()))
    assert len(frames.estimates) == 2 and len(frames.studies) == 2 and len(frames.events) == 2


def test_every_problem_in_one_pass(sheet):
    rows = [
        row(),
        row(study_id="S2", event_id="E2", outcome="a", country="XXX"),
        row(study_id="S3", event_id="E3", outcome="b", se="-1", ci_low="", ci_high=""),
        row(study_id="S4", event_id="E4", outcome="c", design="nope", estimate="abc"),
    ]
    problems = problems_of(sheet(rows))
    assert [(p.row, p.column) for p in problems] == [
        (3, "country"),
        (4, "se"),
        (5, "design"),
        (5, "estimate"),
    ]


def test_unknown_vocabulary_lists_every_accepted_code(sheet):
    from exposhift.vocab import DESIGNS

    (p,) = problems_of(sheet(two_rows(design="natural")))
    assert p.message.endswith("accepted: " + ", ".join(DESIGNS))


def test_codes_forgive_case_spaces_and_underscores(sheet):
    _, frames = read_input(
        sheet(
            two_rows(
                design="Synthetic_Control",
                measure="rr",
                change_kind="Policy Removal",
                country="swe",
            )
        )
    )
    s2 = frames.studies.set_index("key").loc["S2"]
    e2 = frames.events.set_index("key").loc["E2"]
    assert s2["design"] == "synthetic-control"
    assert e2["change_kind"] == "policy-removal" and e2["country"] == "SWE"
    assert set(frames.estimates["measure"]) == {"RR"}


def test_study_fields_disagreeing_between_rows(sheet):
    rows = [row(), row(outcome="asthma", citation="Someone else 2005")]
    (p,) = problems_of(sheet(rows))
    assert (p.row, p.column) == (3, "citation")
    assert "study 'S1'" in p.message and "in row 2" in p.message


def test_event_fields_disagreeing_between_rows(sheet):
    rows = [row(), row(study_id="S2", outcome="asthma", country="BEL")]
    (p,) = problems_of(sheet(rows))
    assert (p.row, p.column) == (3, "country")
    assert "event 'E1'" in p.message and "'NLD' in row 2" in p.message


def test_blank_versus_value_is_a_disagreement(sheet):
    rows = [row(), row(outcome="asthma", doi="10.1/x")]
    (p,) = problems_of(sheet(rows))
    assert (p.row, p.column) == (3, "doi") and "blank in row 2" in p.message


def test_outcome_group_disagreeing(sheet):
    rows = [row(), row(study_id="S2", outcome_group="airways")]
    (p,) = problems_of(sheet(rows))
    assert (p.row, p.column) == (3, "outcome_group")


def test_duplicate_estimate_keys(sheet):
    rows = [row(), row(estimate="0.85", ci_low="0.7", ci_high="0.95")]
    (p,) = problems_of(sheet(rows, name="dups.csv"))
    assert (p.file, p.row, p.column) == ("dups.csv", 3, None)
    assert "duplicate estimate" in p.message and "row 2" in p.message
    # the same estimate in another subgroup is a different estimate
    _, frames = read_input(sheet([row(), row(subgroup="women")], name="ok.csv"))
    assert len(frames.estimates) == 2


def test_missing_required_column(sheet):
    r = row()
    del r["country"]
    problems = problems_of(sheet([r]))
    (p,) = only(problems, "country")
    assert p.row == 1 and "required column 'country' is missing" in p.message


def test_unknown_column_is_an_error_unless_ignored(sheet):
    path = sheet([row(colour="red", notes="x")])
    problems = problems_of(path)
    assert {(p.row, p.column) for p in problems} == {(1, "colour"), (1, "notes")}
    assert "did you mean 'country'" in only(problems, "colour")[0].message
    assert "--ignore-extra-columns" in problems[0].message
    _, frames = read_input(path, ignore_extra=True)
    assert frames.notes == ["ignored columns: colour, notes"]


def test_duplicate_header(tmp_path):
    path = tmp_path / "dup.csv"
    path.write_text("study_id,study_id\nS1,S1\n", encoding="utf-8")
    problems = problems_of(path)
    assert problems[0].row == 1 and "appears twice" in problems[0].message


def test_blank_rows_still_count_in_row_numbers(tmp_path, sheet):
    path = sheet(two_rows(country="XXX"))
    lines = path.read_text(encoding="utf-8").splitlines()
    path.write_text("\n".join([lines[0], lines[1], ",,,", lines[2]]) + "\n", encoding="utf-8")
    (p,) = problems_of(path)
    assert (p.row, p.column) == (4, "country")


def test_row_with_too_many_cells(tmp_path, sheet):
    path = sheet(two_rows())
    lines = path.read_text(encoding="utf-8").splitlines()
    path.write_text("\n".join([lines[0], lines[1] + ",extra", lines[2]]) + "\n", encoding="utf-8")
    (p,) = problems_of(path)
    assert p.row == 2 and "cells but the header has" in p.message


def test_headers_match_without_case_or_spaces(sheet):
    r = row()
    path = sheet([r], columns=[f" {c.upper()} " for c in r])
    path.write_text(path.read_text(encoding="utf-8"), encoding="utf-8")
    # the header was written from the upper-cased names but the values from the real keys
    lines = path.read_text(encoding="utf-8").splitlines()
    values = ",".join(f'"{v}"' for v in r.values())
    path.write_text(lines[0] + "\n" + values + "\n", encoding="utf-8")
    _, frames = read_input(path)
    assert frames.studies["key"].tolist() == ["S1"]


def test_checks_are_normalised(sheet):
    _, frames = read_input(sheet([row(checks=" Pre trends ; placebo_date;PLACEBO-DATE;; ")]))
    assert frames.studies["checks"].tolist() == ["pre-trends;placebo-date"]


@pytest.mark.parametrize(
    "text,value",
    [
        ("yes", True),
        ("No", False),
        ("TRUE", True),
        ("false", False),
        ("1", True),
        ("0", False),
        ("", False),
    ],
)
def test_booleans(sheet, text, value):
    _, frames = read_input(sheet([row(primary=text)]))
    assert frames.estimates["primary"].tolist() == [value]


def test_date_precision_is_kept(sheet):
    rows = [
        row(event_id="E1", change_date="2001"),
        row(event_id="E2", change_date="2001-05", outcome="a"),
        row(event_id="E3", change_date="2000-02-29", outcome="b"),
    ]
    _, frames = read_input(sheet(rows))
    ev = frames.events.set_index("key")
    assert ev["change_date"].to_dict() == {"E1": "2001", "E2": "2001-05", "E3": "2000-02-29"}
    assert ev["date_precision"].to_dict() == {"E1": "year", "E2": "month", "E3": "day"}


def test_uncertainty_by_se_or_p_alone_is_enough(sheet):
    rows = [
        row(ci_low="", ci_high="", se="0.1"),
        row(outcome="a", ci_low="", ci_high="", p_value="0.04"),
    ]
    _, frames = read_input(sheet(rows))
    assert len(frames.estimates) == 2


def test_iso_codes_agree_with_pycountry():
    # reference: ISO 3166-1 as shipped by pycountry; every official alpha-3 code is accepted,
    # alpha-2 codes and names are refused with a pointer to the alpha-3 code
    codes = [c.alpha_3 for c in pycountry.countries]
    log = ProblemLog("f.csv", np.arange(len(codes) + 2) + 2)
    out = cells.parse_country(pd.Series([*codes, "NL", "Xyz"], dtype="str"), "country", log)
    assert out.tolist()[:-2] == codes
    assert [p.row for p in log.problems] == [len(codes) + 2, len(codes) + 3]
    assert "did you mean NLD (Netherlands)" in log.problems[0].message


def test_calendar_agrees_with_datetime():
    # reference: Python's datetime.date (proleptic Gregorian), over every day-of-month 1..31
    # for every month of 1899-1901 and 1999-2001 (two century rules: 1900 no leap, 2000 leap)
    texts, valid = [], []
    for year in (1899, 1900, 1901, 1999, 2000, 2001):
        for month in range(0, 14):
            for day in range(0, 32):
                texts.append(f"{year:04d}-{month:02d}-{day:02d}")
                try:
                    dt.date(year, month, day)
                    valid.append(True)
                except ValueError:
                    valid.append(False)
    log = ProblemLog("f.csv", np.arange(len(texts)) + 2)
    date, _ = cells.parse_date(pd.Series(texts, dtype="str"), "change_date", log)
    assert date.notna().tolist() == valid
    assert len(log.problems) == valid.count(False)


def test_numbers_parse_exactly_as_python_float():
    # reference: Python's float() (correctly rounded decimal -> binary conversion)
    rng = np.random.default_rng(7)
    values = np.concatenate(
        [rng.standard_normal(2000) * 10.0 ** rng.integers(-30, 30, 2000), rng.random(2000)]
    )
    texts = [repr(float(v)) for v in values] + ["1e5", "+0.5", ".5", "5.", "-0"]
    log = ProblemLog("f.csv", np.arange(len(texts)) + 2)
    parsed = cells.parse_float(pd.Series(texts, dtype="str"), "estimate", log)
    assert not log.problems
    assert parsed.tolist() == [float(t) + 0.0 for t in texts]
