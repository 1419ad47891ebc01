"""Malformed rubric files: each gives a RubricError naming the file, the line and the problem.

Each case edits one spot of the shipped rubric; the expected line is found independently by
searching the edited text for a marker on the offending line.
"""

from __future__ import annotations

import pytest
from appraisal_helpers import edited, line_of, write

from exposhift.appraisal.rubric import load_rubric
from exposhift.appraisal.toml_lines import TomlLines
from exposhift.errors import ExposhiftError, RubricError

FALSIFICATION_LEVEL_0 = 'level = 0\ncriteria = ["a test finds'

# (case id, old text, new text, marker on the expected line, expected words in the message)
CASES = [
    (
        "syntax-missing-value",
        "cap_at = 1\n",
        "cap_at = \n",
        "cap_at =",
        "TOML syntax error: Invalid value",
    ),
    (
        "syntax-duplicate-key",
        "cap_at = 1\n",
        "cap_at = 1\ncap_at = 2 # again\n",
        "# again",
        "TOML syntax error",
    ),
    (
        "level-4",
        FALSIFICATION_LEVEL_0,
        FALSIFICATION_LEVEL_0.replace("0", "4"),
        "level = 4",
        "level 4 is outside 0-3; accepted levels: 0 (fatal), 1 (weak), 2 (adequate), 3 (strong)",
    ),
    (
        "level-negative",
        "cap_trigger = 0",
        "cap_trigger = -1",
        "cap_trigger = -1",
        "level -1 is outside 0-3",
    ),
    (
        "unknown-key",
        'key = "timing"\n',
        'key = "timing"\nquestoin = "typo"\n',
        "questoin",
        "unknown key 'questoin' in [domain]; accepted keys: key, title, question",
    ),
    (
        "unknown-top-table",
        "[summary]\n",
        "[sumary]\nx = 1\n\n[summary]\n",
        "[sumary]",
        "unknown key 'sumary' in [top level]",
    ),
    (
        "unknown-domain",
        'key = "timing"\n',
        'key = "timeliness"\n',
        'key = "timeliness"',
        "unknown domain 'timeliness'; accepted domains: origin, counterfactual",
    ),
    (
        "duplicate-domain",
        'key = "applicability"\n',
        'key = "inference" # dup\n',
        "# dup",
        "domain 'inference' is defined twice (first at line ",
    ),
    (
        "unknown-design",
        "[domain.design.rd-geo]\nminimum",
        "[domain.design.rd-geography]\nminimum",
        "rd-geography",
        "unknown design 'rd-geography'; accepted designs: before-after",
    ),
    (
        "unknown-check",
        'lacks_all = ["first-stage-f", "weak-iv-robust"]',
        'lacks_all = ["first-stage-F-stat", "weak-iv-robust"]',
        "first-stage-F-stat",
        "unknown check code 'first-stage-F-stat' in 'lacks_all'",
    ),
    (
        "core-flag-disagrees",
        'key = "concurrent_changes"\ntitle = "Concurrent changes and '
        'spillover"\nquestion = "Could something else that changed at the same time, or leakage, '
        'explain the result?"\ncore = true',
        'key = "concurrent_changes"\ntitle = "Concurrent changes and spillover"\nquestion = '
        '"Could something else that changed at the same time, or leakage, explain the result?"\n'
        "core = false # here",
        "core = false # here",
        "domain 'concurrent_changes' says core = false but [summary] core lists it",
    ),
    (
        "version-not-text",
        'version = "1.0"',
        "version = 1.0",
        "version = 1.0",
        "'version' must be text in quotes",
    ),
    ("cap-level-5", "cap_at = 1\n", "cap_at = 5\n", "cap_at = 5", "level 5 is outside 0-3"),
    (
        "summary-unknown-domain",
        'never_lifts = ["falsification"]',
        'never_lifts = ["falsifications"]',
        "falsifications",
        "unknown domain 'falsifications' in 'never_lifts'",
    ),
    (
        "suggest-two-bounds",
        'id = "no-balance"\n',
        'id = "no-balance"\nlevel = 0 # both\n',
        '[[suggest]]\nid = "no-balance"',
        "needs exactly one of level, max_level or max_level_from (found level, max_level)",
    ),
    (
        "suggest-unknown-domain",
        'id = "no-balance"\ndomain = "design_checks"',
        'id = "no-balance"\ndomain = "design-checks"',
        'domain = "design-checks"',
        "unknown domain 'design-checks'",
    ),
]


@pytest.mark.parametrize("case", CASES, ids=[c[0] for c in CASES])
def test_semantic_and_syntax_errors_name_the_line(case, tmp_path, rubric_text):
    _, old, new, marker, words = case
    text = edited(rubric_text, old, new)
    if "\n" in marker:  # a marker spanning lines points at its first line
        first, rest = marker.split("\n", 1)
        start = text.index(marker)
        expected = text[:start].count("\n") + 1
        assert first in text.splitlines()[expected - 1] and rest
    else:
        expected = line_of(text, marker)
    path = write(tmp_path, text)
    with pytest.raises(RubricError) as info:
        load_rubric(path)
    message = str(info.value)
    assert message.startswith(f"{path}, line {expected}"), message
    assert words in message
    assert isinstance(info.value, ExposhiftError) and info.value.exit_code == 2


def _drop_domain(text: str, key: str) -> str:
    start = text.index(f'[[domain]]\nkey = "{key}"')
    end = text.index("[[domain]]", start + 1)
    return text[:start] + text[end:]


def test_missing_domain_names_the_line_where_the_domains_end(tmp_path, rubric_text):
    text = _drop_domain(rubric_text, "timing")
    path = write(tmp_path, text)
    with pytest.raises(RubricError) as info:
        load_rubric(path)
    headers = [i for i, ln in enumerate(text.splitlines(), start=1) if ln == "[[domain]]"]
    message = str(info.value)
    assert message.startswith(f"{path}, line {headers[-1]}: domain 'timing' is missing")
    assert 'add a [[domain]] table with key = "timing"' in message


def test_missing_level_names_the_domain_header(tmp_path, rubric_text):
    text = edited(rubric_text, '[[domain.level]]\nlevel = 2\ncriteria = ["one null test"]\n', "")
    path = write(tmp_path, text)
    start = text.index('[[domain]]\nkey = "falsification"')
    expected = text[:start].count("\n") + 1
    with pytest.raises(
        RubricError,
        match=rf", line {expected}: domain 'falsification' has no "
        r"criteria for level 2",
    ):
        load_rubric(path)


def test_value_left_open_at_the_end_names_where_it_starts(tmp_path, rubric_text):
    text = rubric_text + '\n[extra]\nopen = ["never closed",\n  "still open"\n'
    path = write(tmp_path, text)
    expected = line_of(text, "open = [")
    with pytest.raises(RubricError) as info:
        load_rubric(path)
    assert str(info.value).startswith(f"{path}, line {expected}: TOML syntax error")
    assert "never closed" in str(info.value)


def test_non_utf8_bytes_name_the_line(tmp_path, rubric_text):
    data = rubric_text.encode("utf-8").replace(b"cap_at = 1", b"cap_at = \xff1")
    path = tmp_path / "latin.toml"
    path.write_bytes(data)
    expected = line_of(rubric_text, "cap_at = 1")
    with pytest.raises(RubricError, match=rf"line {expected}: the file is not UTF-8"):
        load_rubric(path)


def test_line_index_handles_arrays_of_tables_and_multiline_values():
    text = (
        "[a]\n"  # 1
        "x = 1\n"  # 2
        "[[t]]\n"  # 3
        "k = '''\n"  # 4
        "y = 'not a key'\n"  # 5  (inside a multi-line string)
        "'''\n"  # 6
        "[[t]]\n"  # 7
        'k = ["[", # ]\n'  # 8  (bracket inside a string, comment after)
        "  2]\n"  # 9
        "[[t.u]]\n"  # 10
        '"quoted key".z = 3\n'  # 11
    )
    lines = TomlLines(text)
    assert lines.line_of(("a", "x")) == 2
    assert lines.line_of(("t", 0, "k")) == 4
    assert ("t", 0, "y") not in lines.lines
    assert lines.line_of(("t", 1, "k")) == 8
    assert lines.line_of(("t", 1, "u", 0)) == 10
    assert lines.line_of(("t", 1, "u", 0, "quoted key", "z")) == 11
    assert lines.line_of(("t", 1, "missing")) == 7  # falls back to the enclosing table
    assert lines.line_of(("nowhere",)) == 1
    assert lines.unclosed_line is None
