"""Commands ``direction set/clear/list/import``: the committee's expected directions."""

from __future__ import annotations

from pathlib import Path

import typer

from exposhift.cli.common import print_json, user_errors, workspace
from exposhift.cli.helptext import Group
from exposhift.cli.tables import render

direction_app = typer.Typer(
    help="Pre-specify, per exposure x outcome, whether an exposure increase is expected to "
    "raise or lower the outcome (with a rationale; versioned and audited).\n\nExample: "
    "exposhift direction list",
    no_args_is_help=True,
    cls=Group,
)


def register(app: typer.Typer) -> None:
    app.add_typer(direction_app, name="direction")


@direction_app.command("set")
@user_errors
def direction_set(
    ctx: typer.Context,
    exposure: str = typer.Option(..., "--exposure", help="Exposure name."),
    outcome: str = typer.Option(..., "--outcome", help="Outcome name."),
    expect: str = typer.Option(
        ...,
        "--expect",
        help="raises or lowers: what an exposure increase is expected to do to the outcome.",
    ),
    why: str = typer.Option(..., "--why", help="Rationale (required): mechanism, prior evidence."),
    by: str | None = typer.Option(None, "--by", help="Who decided (default: --user)."),
    at: str | None = typer.Option(
        None, "--at", help="When it was decided: YYYY-MM-DD or a UTC date-time (default: now)."
    ),
    if_version: int | None = typer.Option(
        None,
        "--if-version",
        help="Apply only if the record is still at this version (from 'direction list').",
    ),
    as_json: bool = typer.Option(False, "--json", help="Print the result as JSON."),
) -> None:
    """Set or change the expected direction of one exposure x outcome.

    Example: exposhift direction set --exposure dravonil --outcome "preterm birth" --expect raises --why "known mechanism"
    """  # noqa: E501
    from exposhift.services.directions import set_direction

    with workspace(ctx) as ws:
        store = ws.store
        result = set_direction(
            store,
            exposure,
            outcome,
            expect,
            why,
            decided_by=by,
            decided_at=at,
            expected_version=if_version,
        )
    if as_json:
        print_json(result.to_dict())
        return
    typer.echo(
        f"{result.action}: {result.exposure} x {result.outcome} expected to "
        f"{result.record['direction'][:-1]} (version {result.version})"
    )


@direction_app.command("clear")
@user_errors
def direction_clear(
    ctx: typer.Context,
    exposure: str = typer.Option(..., "--exposure", help="Exposure name."),
    outcome: str = typer.Option(..., "--outcome", help="Outcome name."),
    if_version: int | None = typer.Option(
        None, "--if-version", help="Clear only if the record is still at this version."
    ),
) -> None:
    """Remove the expected direction of one exposure x outcome (the removal is audited).

    Example: exposhift direction clear --exposure dravonil --outcome "preterm birth"
    """
    from exposhift.services.directions import clear_direction

    with workspace(ctx) as ws:
        store = ws.store
        result = clear_direction(store, exposure, outcome, expected_version=if_version)
    typer.echo(
        f"cleared: {result.exposure} x {result.outcome} (was version {result.version}); "
        "its direction will be inferred from the data and its status marked provisional"
    )


@direction_app.command("list")
@user_errors
def direction_list(
    ctx: typer.Context,
    as_json: bool = typer.Option(False, "--json", help="Print a JSON list."),
) -> None:
    """List the pre-specified directions.

    Example: exposhift direction list --json
    """
    from exposhift.services.directions import list_directions

    with workspace(ctx) as ws:
        store = ws.store
        frame = list_directions(store)
    if as_json:
        print_json(frame.to_dict("records"))
        return
    if frame.empty:
        typer.echo(
            "no expected directions are pre-specified; set one with 'exposhift "
            "direction set' or 'exposhift direction import FILE'"
        )
        return
    rows = [
        [r.exposure, r.outcome, r.direction, r.decided_by, r.decided_at, r.version, r.rationale]
        for r in frame.itertuples(index=False)
    ]
    typer.echo(
        render(
            [[str(c) for c in r] for r in rows],
            [
                "exposure",
                "outcome",
                "direction",
                "decided by",
                "decided at",
                "version",
                "rationale",
            ],
            indent="",
        )
    )


@direction_app.command("import")
@user_errors
def direction_import(
    ctx: typer.Context,
    file: Path = typer.Argument(
        ...,
        help="CSV or XLSX with columns exposure, outcome, "
        "direction, rationale, optional decided_by, decided_at.",
    ),
    encoding: str | None = typer.Option(
        None, "--encoding", help="Text encoding of a CSV file (default UTF-8, with or without BOM)."
    ),
    dry_run: bool = typer.Option(False, "--dry-run", help="Check and report; write nothing."),
) -> None:
    """Import expected directions; every problem is reported at once, nothing written on error.

    Example: exposhift direction import directions.csv --dry-run
    """
    from exposhift.services.directions import import_directions

    with workspace(ctx) as ws:
        store = ws.store
        result = import_directions(store, file, encoding=encoding, dry_run=dry_run)
    add, upd = ("would add", "would update") if dry_run else ("added", "updated")
    typer.echo(
        f"{add} {result.added} expected directions, {upd} {result.updated}, "
        f"{result.unchanged} unchanged ({file})"
    )
