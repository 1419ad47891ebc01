"""Numeric and code options are range-checked and name the values they accept.

Defects reproduced: ``gaps --stale-after -3`` and an unknown ``--country`` were accepted
silently; ``dashboard --port -1`` failed with a traceback in the child process. Port range:
RFC 6335 (0-65535, 0 reserved); country codes: ISO 3166-1 alpha-3 as pycountry lists them.
"""

from __future__ import annotations

import pytest
from typer.testing import CliRunner

from exposhift.cli.main import app


@pytest.fixture
def base(sqlite_store, monkeypatch):
    """The evidence base; a dashboard that got past its checks must not start a server here."""
    import exposhift.cli.dashboard_cmds as dash

    def _no_server(*args, **kwargs):
        raise AssertionError("the dashboard was started despite a bad option")

    monkeypatch.setattr(dash.os, "execve", _no_server)
    monkeypatch.setattr(dash.subprocess, "call", _no_server)
    return sqlite_store.url


@pytest.mark.parametrize(
    "args, message",
    [
        (
            ["gaps", "--stale-after", "-3"],
            "--stale-after -3 is not a year exposhift records; give a year from 1800 to 2100",
        ),
        (["gaps", "--from", "20000"], "--from 20000 is not a year"),
        (
            ["gaps", "--country", "NLD,XXX"],
            "--country: unknown ISO 3166-1 alpha-3 country code 'XXX'",
        ),
        (["gaps", "--country", "Germany"], "did you mean DEU, Germany?"),
        (["dashboard", "--port", "-1"], "--port -1 is not a port; give a number from 1 to 65535"),
        (["dashboard", "--port", "65536"], "--port 65536 is not a port"),
        (["audit", "show", "--limit", "0"], "--limit 0 is not allowed; give 1 or more"),
        (["audit", "verify", "--entries", "-1", "--head", "ab"], "--entries -1 is negative"),
    ],
)
def test_bad_option_is_one_error_line(base, args, message):
    result = CliRunner().invoke(app, ["--db", base, *args])
    assert result.exit_code == 2, result.output
    lines = result.output.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("error: ") and message in lines[0]


def test_good_country_and_year_are_accepted(base):
    result = CliRunner().invoke(
        app, ["--db", base, "gaps", "--country", "nld", "--stale-after", "2010"]
    )
    assert result.exit_code == 0, result.output
