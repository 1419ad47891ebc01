"""The ``exposhift`` command line: thin commands that call one service each.

Command modules import their services inside each command, so ``exposhift --help`` and
``--version`` load no pandas, scipy, SQLAlchemy or Alembic.
"""

from __future__ import annotations

import typer

from exposhift import __version__
from exposhift.cli import (
    appraisal_cmds,
    audit_cmds,
    browse_cmds,
    certainty_cmds,
    dashboard_cmds,
    direction_cmds,
    dossier_cmds,
    io_cmds,
    method_cmds,
    replication_cmds,
    series_cmds,
    store_cmds,
    synthesis_cmds,
    user_cmds,
)
from exposhift.cli.common import Settings
from exposhift.cli.helptext import Group, use_plain_help

app = typer.Typer(
    name="exposhift",
    help=(
        "Evidence base for natural-experiment studies of environmental exposures: record, "
        "appraise, pool, check replication, map gaps.\n\n"
        "Example: exposhift demo, then the commands it prints."
    ),
    no_args_is_help=True,
    pretty_exceptions_enable=False,
    add_completion=False,
    cls=Group,
)


def _version(value: bool) -> None:
    if value:
        typer.echo(f"exposhift {__version__}")
        raise typer.Exit()


@app.callback()
def main(
    ctx: typer.Context,
    db: str | None = typer.Option(
        None,
        "--db",
        envvar="EXPOSHIFT_DB",
        help="Database URL or SQLite file (default: evidence/evidence.db).",
    ),
    user: str | None = typer.Option(
        None,
        "--user",
        envvar="EXPOSHIFT_USER",
        help="Name recorded in the audit trail (default: the OS user); an account of "
        "that name lends its role (reader, reviewer, editor, admin).",
    ),
    version: bool = typer.Option(
        False, "--version", callback=_version, is_eager=True, help="Show the version and exit."
    ),
) -> None:
    source = ctx.get_parameter_source("db")
    given = source is not None and source.name == "COMMANDLINE"
    ctx.obj = Settings(db=db, user=user, db_given=given)


app.command("init")(store_cmds.init)
app.command("info")(store_cmds.info)


for _module in (
    io_cmds,
    browse_cmds,
    synthesis_cmds,
    appraisal_cmds,
    replication_cmds,
    dashboard_cmds,
    direction_cmds,
    audit_cmds,
    series_cmds,
    dossier_cmds,
    user_cmds,
    method_cmds,
    certainty_cmds,
):
    _module.register(app)

use_plain_help(app)
