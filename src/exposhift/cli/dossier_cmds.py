"""Commands ``dossier`` (write one exposure's dossier) and ``dossier diff`` (what changed).

Services are imported inside each command, so that ``exposhift --help`` stays fast.
"""

from __future__ import annotations

from pathlib import Path

import typer

from exposhift.cli.common import fail, print_json, user_errors, workspace
from exposhift.cli.helptext import Group

dossier_app = typer.Typer(
    help="The hazard dossier of one exposure (HTML, Word, data bundle), "
    "and what changed since an earlier one.\n\nExample: exposhift "
    "dossier --exposure dravonil --format html",
    invoke_without_command=True,
    no_args_is_help=False,
    cls=Group,
)


@dossier_app.callback(invoke_without_command=True)
@user_errors
def dossier(
    ctx: typer.Context,
    exposure: str | None = typer.Option(None, "--exposure", help="Exposure agent."),
    outcome: list[str] = typer.Option(
        [], "--outcome", help="Outcome (repeat; default: every outcome of the exposure)."
    ),
    out: str | None = typer.Option(
        None, "--out", help="Output folder (default dossiers/<exposure>/)."
    ),
    fmt: str = typer.Option(
        "html,docx,bundle",
        "--format",
        help="Any of html, docx, bundle, pdf (pdf needs LibreOffice), separated by commas.",
    ),
    zip_bundle: bool = typer.Option(False, "--zip", help="Also write bundle.zip."),
    as_of: str | None = typer.Option(
        None, "--as-of", help="The date printed (ISO date); default SOURCE_DATE_EPOCH or now."
    ),
    force: bool = typer.Option(
        False, "--force", help="Write into a folder holding other files (they are never deleted)."
    ),
    since: str | None = typer.Option(
        None, "--since", help="An earlier bundle: its changes become the first section."
    ),
    rubric: Path | None = typer.Option(
        None, "--rubric", help="One-run override: a rubric file instead of the base's rubric."
    ),
    settings_file: Path | None = typer.Option(
        None,
        "--settings",
        help="One-run override: a settings file instead of the base's settings.",
    ),
) -> None:
    """Write the dossier of one exposure: question, summary, studies, figures, gaps, methods.

    Example: exposhift dossier --exposure dravonil --format html,docx --as-of 2026-12-01
    """
    if ctx.invoked_subcommand is not None:
        return
    if not exposure:
        fail("name the exposure with --exposure (or run 'exposhift dossier diff OLD_BUNDLE')", 2)
    from exposhift.services.dossier import build_dossier

    with workspace(ctx, rubric=rubric, settings=settings_file) as ws:
        res = build_dossier(
            ws.store,
            exposure,
            outcomes=outcome or None,
            out=out,
            formats=fmt,
            zip_bundle=zip_bundle,
            as_of=as_of,
            force=force,
            since=since,
            method=ws.method,
        )
    typer.echo(
        f"dossier of {exposure} written to {res.out}/ (fingerprint "
        f"{res.fingerprint[:16]}, made {res.made_at})"
    )
    for f in res.files:
        if "/bundle/" not in f:
            typer.echo(f"  {f}")
    if any("/bundle/" in f for f in res.files):
        typer.echo(f"  {res.out}/bundle/ (manifest.json, records.json, tables as CSV and JSON)")
    if res.changes is not None:
        typer.echo(
            f"  first section: {len(res.changes.changes)} change(s) since {res.changes.old_made_at}"
        )
    for w in res.warnings:
        typer.echo(f"warning: {w}", err=True)
    if res.demo:
        typer.echo("note: records flagged demo are used; every page of the dossier says so")


@dossier_app.command("diff")
@user_errors
def diff(
    ctx: typer.Context,
    old: str = typer.Argument(..., help="The earlier bundle (folder or bundle.zip)."),
    new: str | None = typer.Argument(None, help="A later bundle (default: the evidence base now)."),
    as_json: bool = typer.Option(False, "--json", help="Print JSON."),
) -> None:
    """What changed: records added, removed and changed; pooled estimates that moved; statuses, certainty ratings and new opportunities.

    Example: exposhift dossier diff dossiers/dravonil/bundle
    """  # noqa: E501
    from exposhift.services.dossier import diff_dossier

    if new is None:
        with workspace(ctx) as ws:
            result = diff_dossier(ws.store, old, new)
    else:
        result = diff_dossier(None, old, new)
    if as_json:
        print_json(result.to_dict())
        return
    typer.echo(
        f"from {result.old_made_at} ({result.old_fingerprint[:16]}) to "
        f"{result.new_made_at or 'now'} ({result.new_fingerprint[:16]})"
    )
    if not result.changes:
        typer.echo("  nothing changed")
    for c in result.changes:
        detail = f" {c.field}: {c.old} -> {c.new}" if c.field else ""
        typer.echo(f"  {c.kind:18} {c.key}{detail}")


def register(app: typer.Typer) -> None:
    app.add_typer(dossier_app, name="dossier")
