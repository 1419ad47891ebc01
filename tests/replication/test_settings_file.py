"""Settings files: every problem named by its line, all problems at once; the packaged copy.

Outside reference for the syntax errors: Python's ``tomllib`` (TOML 1.0) reports the line and
column itself; the line numbers of the other checks are counted here from the text.
"""

from __future__ import annotations

from pathlib import Path

import pytest

from exposhift.errors import ConfigError
from exposhift.method.parts import packaged_data
from exposhift.replication.settings import DEFAULTS, load_settings
from exposhift.replication.settings_file import settings_from_bytes

REPO = Path(__file__).resolve().parents[2]


def line_of(text: str, start: str) -> int:
    return next(i for i, ln in enumerate(text.splitlines(), start=1) if ln.startswith(start))


def test_packaged_and_repository_copies_equal_the_defaults():
    packaged = packaged_data("replication.toml")
    assert load_settings(packaged) == DEFAULTS
    assert packaged.read_bytes() == (REPO / "evidence" / "replication.toml").read_bytes()


def test_every_problem_is_reported_with_its_line():
    text = (
        "[thresholds]\n"
        "min_level = 'two'\n"
        "alpha = 5\n"
        "min_place = 3\n"
        "min_years_apart = 1\n"
        "supporting_families = 'uncontrolled'\n"
        "[regions]\n"
        "nordic = ['DNK', 'SWEDEN']\n"
        "[threshold]\n"
    )
    with pytest.raises(ConfigError) as exc:
        settings_from_bytes(text.encode(), "r.toml")
    msg = str(exc.value)
    for start, words in [
        ("min_level", "min_level must be a whole number"),
        ("alpha", "alpha must be between 0 and 1"),
        ("min_place", "unknown setting 'min_place'"),
        ("min_years_apart", "setting min_years_apart was replaced; use min_months_apart"),
        ("supporting_families", "supporting_families must be a list"),
        ("nordic", "region 'nordic' must be a list of ISO alpha-3"),
        ("[threshold]", "unknown table or key 'threshold'"),
    ]:
        assert f"r.toml, line {line_of(text, start)}: {words}" in msg
    assert msg.endswith("nothing was stored or used")


def test_syntax_error_names_line_and_column():
    text = "[thresholds]\nmin_level = 2\nalpha = = 0.05\n"
    with pytest.raises(ConfigError, match=r"r\.toml, line 3, column \d+: TOML syntax error"):
        settings_from_bytes(text.encode(), "r.toml")


def test_a_valid_file_with_windows_line_endings_and_bom_reads():
    text = "\ufeff[thresholds]\r\nmin_places = 3\r\n[regions]\r\nNordic = ['dnk', 'SWE']\r\n"
    s = settings_from_bytes(text.encode("utf-8"), "r.toml")
    assert s.min_places == 3 and s.regions["nordic"] == ("DNK", "SWE")
    assert s.min_level == DEFAULTS.min_level


def test_the_working_folder_is_never_read(tmp_path, monkeypatch):
    (tmp_path / "evidence").mkdir()
    (tmp_path / "evidence" / "replication.toml").write_text("[thresholds]\nmin_level = 3\n")
    monkeypatch.chdir(tmp_path)
    assert load_settings() == DEFAULTS
