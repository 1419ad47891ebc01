"""``exposhift dashboard``: options, refusal of an unusable database, the streamlit command.

The command itself is run for real (it replaces itself with ``streamlit run``) by the browser
tests in test_app_browser.py; here only what can be checked in-process.
"""

from __future__ import annotations

from dashboard_helpers import ENTRY
from typer.testing import CliRunner

from exposhift.cli.dashboard_cmds import app_path, streamlit_command
from exposhift.cli.main import app

runner = CliRunner()


def test_help_lists_options():
    result = runner.invoke(app, ["dashboard", "--help"])
    assert result.exit_code == 0
    for option in ("--port", "--db", "--address"):
        assert option in result.output


def test_missing_database_is_one_error_line(tmp_path):
    missing = tmp_path / "nowhere" / "evidence.db"
    result = runner.invoke(app, ["dashboard", "--db", str(missing), "--port", "8599"])
    assert result.exit_code != 0
    lines = [ln for ln in result.output.splitlines() if ln.strip()]
    assert len(lines) == 1 and lines[0].startswith("error: ")
    assert "evidence.db" in lines[0]


def test_global_db_option_is_used(tmp_path):
    missing = tmp_path / "other.db"
    result = runner.invoke(app, ["--db", str(missing), "dashboard"])
    assert result.exit_code != 0
    assert "other.db" in result.output


def test_streamlit_command_serves_static_files_headless():
    assert app_path() == ENTRY and ENTRY.is_file()
    cmd = streamlit_command(ENTRY, 8123, "127.0.0.1")
    assert cmd[1:4] == ["-m", "streamlit", "run"] and cmd[4] == str(ENTRY)
    opts = dict(zip(cmd[5::2], cmd[6::2], strict=True))
    assert opts["--server.port"] == "8123"
    assert opts["--server.address"] == "127.0.0.1"
    assert opts["--server.headless"] == "true"
    assert opts["--server.enableStaticServing"] == "true"  # the vendored map topology
    assert opts["--browser.gatherUsageStats"] == "false"  # nothing sent anywhere
