"""Commands ``method show`` and ``method set``: the method the evidence base records."""

from __future__ import annotations

from pathlib import Path

import typer

from exposhift.cli.common import print_json, user_errors, workspace
from exposhift.cli.helptext import Group

method_app = typer.Typer(
    help="The method in force (appraisal rubric, replication and pooling settings): stored "
    "in the evidence base, versioned and audited.\n\nExample: exposhift method show",
    no_args_is_help=True,
    cls=Group,
)


@method_app.command("show")
@user_errors
def method_show(
    ctx: typer.Context,
    part: str | None = typer.Argument(
        None, help="Print the full text of this part (rubric, settings)."
    ),
    history: bool = typer.Option(False, "--history", help="List every stored version."),
    as_json: bool = typer.Option(False, "--json", help="Print JSON (with the full texts)."),
) -> None:
    """Show the method this evidence base records: each part's version, hash, source, who
    stored it and when; with a part name, its full text.

    Example: exposhift method show rubric
    """
    from exposhift.services.workspace import CAUTION, method_history

    with workspace(ctx) as ws:
        versions = method_history(ws.store)
    method = ws.method
    if part is not None and part not in method.parts:
        from exposhift.errors import ConfigError

        raise ConfigError(f"unknown method part '{part}'; the parts are: {', '.join(method.parts)}")
    if as_json:
        parts = {n: p.to_dict() for n, p in method.parts.items() if part in (None, n)}
        texts = {v.part: v.text for v in versions}  # the newest text of each part
        for n, d in parts.items():
            d["text"] = texts.get(n)
        out = {"parts": parts, "caution": CAUTION}
        if history:
            out["history"] = [v.to_dict(with_text=False) for v in versions]
        print_json(out)
        return
    if part is not None:
        text = next((v.text for v in reversed(versions) if v.part == part), None)
        typer.echo(text if text is not None else f"{part}: not stored (packaged default in use)")
        return
    typer.echo(f"method in force in {ws.store.masked_url}:")
    for name, p in method.parts.items():
        declared = f" {p.declared}" if p.declared else ""
        num = f"version {p.number}" if p.number is not None else "not stored"
        typer.echo(f"  {name:<9} {num}{declared}  hash {p.content_hash[:12]}")
        typer.echo(
            f"  {'':<9} {p.source}"
            + (f"; stored by {p.created_by} at {p.created_at}" if p.created_by else "")
        )
    if history:
        typer.echo("history:")
        for v in versions:
            typer.echo(
                f"  {v.part:<9} {v.number:>3}  {v.content_hash[:12]}  {v.created_at}  "
                f"{v.created_by}  {v.source}"
            )
    typer.echo(f"note: {CAUTION}")


@method_app.command("set")
@user_errors
def method_set(
    ctx: typer.Context,
    part: str = typer.Argument(..., help="rubric or settings."),
    file: Path = typer.Argument(..., help="The TOML file to store as the part's next version."),
    as_json: bool = typer.Option(False, "--json", help="Print JSON."),
) -> None:
    """Check a rubric or settings file and store it as the next version of the method (audited;
    nothing is stored when the file has a problem). Appraisals keep the rubric they were made
    with.

    Example: exposhift --user ana method set rubric committee-rubric.toml
    """
    from exposhift.services.workspace import set_method_part

    with workspace(ctx) as ws:
        result = set_method_part(ws.store, part, file)
    v = result.version
    if as_json:
        print_json(
            {
                "stored": not result.unchanged,
                "version": v.to_dict(with_text=False),
                "previous": result.previous.to_dict(with_text=False) if result.previous else None,
            }
        )
        return
    if result.unchanged:
        typer.echo(
            f"{part}: {file} is the text of version {v.number} already in force (hash "
            f"{v.content_hash[:12]}); nothing was stored"
        )
        return
    was = f" (was version {result.previous.number})" if result.previous else ""
    declared = f" {v.declared}" if v.declared else ""
    typer.echo(f"stored {part} version {v.number}{declared} (hash {v.content_hash[:12]}){was}")
    if part == "rubric":
        typer.echo(
            "note: appraisals keep the rubric they were made with; a consensus made under an "
            "older rubric is marked as such where appraisals are shown"
        )


def register(app: typer.Typer) -> None:
    app.add_typer(method_app, name="method")
