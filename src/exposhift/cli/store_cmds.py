"""Commands that create and describe the evidence base."""

from __future__ import annotations

import typer

from exposhift.cli.common import print_json, settings, user_errors


@user_errors
def init(ctx: typer.Context) -> None:
    """Create the evidence base, or upgrade it to the newest schema without losing data, and
    say where the rubric and thresholds in force are and how to adapt them.

    Example: exposhift --db evidence/evidence.db init
    """
    from exposhift.services.methods import methods_in_force
    from exposhift.services.setup import init_database

    s = settings(ctx)
    result = init_database(s.db, s.user)
    if result.before is None:
        typer.echo(f"created evidence base {result.url} (schema {result.after})")
    elif result.before == result.after:
        typer.echo(f"evidence base {result.url} is up to date (schema {result.after})")
    else:
        typer.echo(f"upgraded {result.url} from schema {result.before} to {result.after}")
    typer.echo("method files in force here (they change results and are recorded with them):")
    for m in methods_in_force():
        where = m.path or "built-in defaults"
        kind = (
            "this workspace's copy"
            if m.workspace
            else ("packaged default" if m.path else "no thresholds file here")
        )
        typer.echo(f"  {m.what:<10} {where} ({kind})")
        typer.echo(f"  {'':<10} to change: {m.how_to_change}")


@user_errors
def info(
    ctx: typer.Context,
    as_json: bool = typer.Option(False, "--json", help="Print the counts as a JSON object."),
) -> None:
    """Show what the evidence base holds: counts per table, location, schema revision.

    Example: exposhift --db demo/evidence-demo.db info
    """
    from exposhift.services.setup import database_info

    data = database_info(settings(ctx).db)
    if as_json:
        print_json(data.to_dict())
        return
    typer.echo(f"evidence base  {data.url}")
    typer.echo(f"backend        {data.backend}, schema revision {data.revision}")
    width = max(len(k) for k in data.counts)
    for name, n in data.counts.items():
        typer.echo(f"  {name.replace('_', ' '):<{width}}  {n:>8,}")
