"""Fuzzing the import doors (hypothesis): sheets and archives, hand-made by an adversary.

Every input either imports or raises the project's own error (ExposhiftError); no other
exception escapes, and an input that is refused leaves every table, audit trail included,
exactly as it was. The sheets mix real column names with junk, and cells with control
characters, quotes, separators, long text and odd numbers; the archives are a valid export
with random parts replaced by random JSON values.
"""

from __future__ import annotations

import copy
import json

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from io_helpers import BASE, row, table_dump, write_sheet

from exposhift.errors import ExposhiftError
from exposhift.io.columns import COLUMN_NAMES
from exposhift.services.appraising import import_appraisals
from exposhift.services.exporting import export_store
from exposhift.services.importing import import_into

FUZZ = settings(
    max_examples=40,
    deadline=None,
    suppress_health_check=[HealthCheck.function_scoped_fixture, HealthCheck.too_slow],
)

cell = st.one_of(
    st.text(max_size=12),
    st.sampled_from(
        [
            "",
            "NaN",
            "inf",
            "-0",
            "1e400",
            "0x10",
            "yes",
            "=1+1",
            '"',
            ",",
            ";",
            "\x00",
            "a\x1bb",
            "\ud7ff",
            "2001-02-30",
            "NLD",
            "RR",
            "ban",
        ]
    ),
    st.builds(str, st.floats(allow_nan=True, allow_infinity=True)),
    st.builds(str, st.integers(-(10**20), 10**20)),
    st.just("x" * 200_001),
)
header = st.lists(
    st.one_of(st.sampled_from(COLUMN_NAMES), st.text(max_size=8)), min_size=1, max_size=12
)


def _try(store, path, **kw):
    before = table_dump(store)
    try:
        import_into(store, path, **kw)
    except ExposhiftError:
        assert table_dump(store) == before
        return False
    return True


@FUZZ
@given(data=st.data())
def test_fuzzed_sheets_import_or_raise_our_error(data, sqlite_store, tmp_path):
    columns = data.draw(header)
    rows = data.draw(st.lists(st.fixed_dictionaries({c: cell for c in columns}), max_size=4))
    base = data.draw(st.booleans())
    if base:  # mostly valid rows with a few fuzzed cells, to get past the header checks
        rows = [{**BASE, **r} for r in rows] or [row()]
        columns = list(dict.fromkeys([*BASE, *columns]))
    path = tmp_path / "fuzz.csv"
    try:
        write_sheet(path, rows, columns)
    except UnicodeEncodeError:  # lone surrogates cannot be written as UTF-8: raw bytes instead
        path.write_bytes(b"study_id,citation\n\xed\xa0\x80,x\n")
    if data.draw(st.booleans()):  # sometimes junk bytes in the middle of the file
        raw = path.read_bytes()
        at = data.draw(st.integers(0, len(raw)))
        path.write_bytes(raw[:at] + data.draw(st.binary(max_size=6)) + raw[at:])
    _try(sqlite_store, path, ignore_extra=data.draw(st.booleans()))
    if data.draw(st.booleans()):  # the same bytes through the appraisal door
        before = table_dump(sqlite_store)
        try:
            import_appraisals(sqlite_store, path)
        except ExposhiftError:
            assert table_dump(sqlite_store) == before


def _containers(inner):
    """Lists and objects of ``inner`` values (a named function: Hypothesis reads a lambda's
    source to check that it recurses, which fails on a lambda split over several lines)."""
    return st.one_of(
        st.lists(inner, max_size=3), st.dictionaries(st.text(max_size=6), inner, max_size=3)
    )


json_value = st.recursive(
    st.one_of(
        st.none(),
        st.booleans(),
        st.integers(-(10**30), 10**30),
        st.floats(allow_nan=False),
        st.text(max_size=10),
        st.sampled_from(["\x00", "\ud800", "S1", "E1", "independent", "consensus"]),
    ),
    _containers,
    max_leaves=8,
)


def _paths(node, prefix=()):
    yield prefix
    if isinstance(node, dict):
        for k, v in node.items():
            yield from _paths(v, (*prefix, k))
    elif isinstance(node, list):
        for i, v in enumerate(node):
            yield from _paths(v, (*prefix, i))


@pytest.fixture
def archive(sqlite_store, tmp_path):
    """A valid archive with two studies and appraisals (made through 'appraise import')."""
    from test_io_archive_door import _source_archive

    path, doc = _source_archive(tmp_path)
    return doc


@FUZZ
@given(data=st.data())
def test_fuzzed_archives_import_or_raise_our_error(data, archive, sqlite_store, tmp_path):
    doc = copy.deepcopy(archive)
    for _ in range(data.draw(st.integers(1, 3))):
        paths = [p for p in _paths(doc) if p]
        target = data.draw(st.sampled_from(paths))
        parent = doc
        for k in target[:-1]:
            parent = parent[k]
        if data.draw(st.booleans()) and isinstance(parent, dict):
            del parent[target[-1]]
        else:
            parent[target[-1]] = data.draw(json_value)
    path = tmp_path / "fuzz.json"
    path.write_text(json.dumps(doc), encoding="utf-8", errors="surrogatepass")
    if _try(sqlite_store, path, replace=data.draw(st.booleans())):
        export_store(sqlite_store, tmp_path / "back.json")  # what was stored can be exported
        export_store(sqlite_store, tmp_path / "back.xlsx")
