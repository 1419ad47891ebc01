"""``exposhift dashboard``: serve the Streamlit dashboard on this machine (offline)."""

from __future__ import annotations

import importlib.util
import os
import subprocess
import sys
from pathlib import Path

import typer

from exposhift.cli.common import fail, settings, user_errors

APP_FILE = "exposhift_app.py"


def app_path() -> Path:
    """The dashboard's entry script: ``app/exposhift_app.py`` next to ``src/``."""
    import exposhift

    return Path(exposhift.__file__).resolve().parents[2] / "app" / APP_FILE


def streamlit_command(app: Path, port: int, address: str) -> list[str]:
    """The ``streamlit run`` command line: headless, no usage statistics, static files served
    (the vendored map shapes), viewer toolbar."""
    return [
        sys.executable,
        "-m",
        "streamlit",
        "run",
        str(app),
        "--server.port",
        str(port),
        "--server.address",
        address,
        "--server.headless",
        "true",
        "--server.enableStaticServing",
        "true",
        "--browser.gatherUsageStats",
        "false",
        "--client.toolbarMode",
        "viewer",
        "--theme.base",
        "light",
    ]


@user_errors
def dashboard(
    ctx: typer.Context,
    port: int = typer.Option(8501, "--port", help="Port to serve on."),
    db: str | None = typer.Option(
        None,
        "--db",
        help="Database URL or SQLite file (default: the global --db, "
        "EXPOSHIFT_DB or evidence/evidence.db).",
    ),
    address: str = typer.Option(
        "127.0.0.1",
        "--host",
        "--address",
        help="Address to listen on (127.0.0.1: this machine only; any other address asks "
        "everyone to sign in, so the evidence base needs accounts).",
    ),
) -> None:
    """Serve the dashboard (studies, pooling, replication across place and time, gap map) at
    http://HOST:PORT. Needs no internet connection. With accounts in the evidence base, or on
    any address but this machine's, everyone signs in.

    Example: exposhift --db demo/evidence-demo.db dashboard --port 8502
    """
    from exposhift.services.accounts import dashboard_target
    from exposhift.services.options import check_port

    check_port(port)
    target = db or settings(ctx).db
    if importlib.util.find_spec("streamlit") is None:
        fail("the dashboard needs Streamlit and plotly: pip install 'exposhift[dashboard]'")
    app = app_path()
    if not app.is_file():
        fail(
            f"dashboard files not found at {app}; run exposhift from a checkout of the "
            "repository (app/ next to src/)"
        )
    info = dashboard_target(target, address)  # refuse a missing or outdated base first
    env = dict(os.environ)
    if target:
        env["EXPOSHIFT_DB"] = target
    typer.echo(f"exposhift dashboard for {info.url}: http://{address}:{port}  (Ctrl+C stops)")
    cmd = streamlit_command(app, port, address)
    if os.name == "posix":
        sys.stdout.flush()
        os.execve(sys.executable, cmd, env)
    raise typer.Exit(subprocess.call(cmd, env=env))


def register(app: typer.Typer) -> None:
    app.command("dashboard")(dashboard)
