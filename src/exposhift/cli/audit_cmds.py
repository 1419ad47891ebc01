"""``exposhift audit verify`` and ``exposhift audit show``."""

from __future__ import annotations

import json

import typer

from exposhift.cli.common import fail, print_json, settings, user_errors
from exposhift.cli.helptext import Group

audit_app = typer.Typer(
    help="The audit trail: verify its hash chain, show its entries.\n\n"
    "Example: exposhift audit verify",
    no_args_is_help=True,
    cls=Group,
)


@audit_app.command("verify")
@user_errors
def verify(
    ctx: typer.Context,
    entries: int | None = typer.Option(
        None, "--entries", help="Entry count of a chain head recorded earlier (with --head)."
    ),
    head: str | None = typer.Option(
        None,
        "--head",
        help="A chain head recorded earlier "
        "(e.g. in a dossier): the chain must still pass through it.",
    ),
    as_json: bool = typer.Option(False, "--json", help="Print the result as a JSON object."),
) -> None:
    """Recompute the audit trail's hash chain and name the first entry that was changed,
    deleted, or inserted out of order. Exits with 7 when the chain is broken.

    Example: exposhift audit verify --entries 1200 --head HASH
    """
    from exposhift.services.auditing import verify_audit

    report = verify_audit(settings(ctx).db, entries=entries, head=head)
    if as_json:
        print_json(
            {
                "ok": report.ok,
                "checked": report.checked,
                "head": report.head.to_dict(),
                "bad_entry": report.bad_id,
                "problem": report.problem,
            }
        )
    elif report.ok:
        typer.echo(
            f"audit trail intact: {report.checked:,} entries; chain head "
            f"{report.head.head} (keep it elsewhere to detect a rebuilt chain)"
        )
    if not report.ok:
        fail(f"audit trail broken after {report.checked:,} intact entries: {report.problem}", 7)


def _change(e: dict) -> str:
    if e.get("hidden"):
        return f"({e['hidden']})"
    before = json.loads(e["before"]) if e["before"] else {}
    after = json.loads(e["after"]) if e["after"] else {}
    if e["action"] == "update":
        parts = [
            f"{k}: {before.get(k)!r} -> {after.get(k)!r}" for k in sorted(after) if k != "version"
        ]
        return "; ".join(parts) or "(version only)"
    shown = after or before or {}
    return ", ".join(f"{k}={v!r}" for k, v in sorted(shown.items()))[:160]


@audit_app.command("show")
@user_errors
def show(
    ctx: typer.Context,
    record: str | None = typer.Option(
        None,
        "--record",
        help="A record's key (study, event, estimate key, exposure or outcome name).",
    ),
    user: str | None = typer.Option(None, "--user", help="Only entries written by this user."),
    since: str | None = typer.Option(
        None,
        "--since",
        help="Only entries at or after this date (YYYY-MM-DD, UTC) or ISO-8601 time.",
    ),
    limit: int = typer.Option(200, "--limit", help="Show at most this many (the newest)."),
    as_json: bool = typer.Option(False, "--json", help="Print the entries as JSON."),
) -> None:
    """Show audit entries: who changed what and when, with the values before and after.

    Example: exposhift audit show --record DRV-SWE-1988 --since 2026-01-01
    """
    from exposhift.services.auditing import show_audit

    s = settings(ctx)
    view = show_audit(s.db, record=record, user=user, since=since, limit=limit, viewer=s.user)
    if as_json:
        print_json({"matching": view.total_matching, "entries": view.entries})
        return
    if not view.entries:
        typer.echo("no audit entries match")
        return
    if view.total_matching > len(view.entries):
        typer.echo(
            f"showing the newest {len(view.entries):,} of {view.total_matching:,} "
            "matching entries (--limit)"
        )
    for e in view.entries:
        typer.echo(
            f"{e['id']:>7}  {e['at']}  {e['user']}  {e['action']} {e['table_name']} "
            f"'{e['row_key']}'  {_change(e)}"
        )


def register(app: typer.Typer) -> None:
    app.add_typer(audit_app, name="audit")
