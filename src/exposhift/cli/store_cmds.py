"""Commands that create and describe the evidence base."""

from __future__ import annotations

import typer

from exposhift.cli.common import print_json, settings, user_errors


@user_errors
def init(ctx: typer.Context) -> None:
    """Create the evidence base, or upgrade it to the newest schema without losing data, and
    record the method (rubric, settings) it uses: the packaged defaults in a new base.

    Example: exposhift --db evidence/evidence.db init
    """
    from exposhift.services.setup import init_database

    s = settings(ctx)
    result = init_database(s.db, s.user)
    if result.before is None:
        typer.echo(f"created evidence base {result.url} (schema {result.after})")
    elif result.before == result.after:
        typer.echo(f"evidence base {result.url} is up to date (schema {result.after})")
    else:
        typer.echo(f"upgraded {result.url} from schema {result.before} to {result.after}")
    typer.echo("method recorded in this evidence base (it changes results; every command uses it):")
    for name, p in result.method.parts.items():
        declared = f" {p.declared}" if p.declared else ""
        typer.echo(
            f"  {name:<9} version {p.number}{declared} (hash {p.content_hash[:12]}; {p.source})"
        )
    typer.echo(
        "  to change it: exposhift method set rubric FILE.toml / method set settings FILE.toml "
        "(exposhift method show prints the text in force)"
    )


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
