"""Commands ``list`` (the names to type into the other commands) and ``show`` (one study)."""

from __future__ import annotations

import math
from typing import Any

import typer

from exposhift.cli.common import print_json, user_errors, workspace
from exposhift.cli.tables import render

LIST_CHOICES = ("exposures", "outcomes", "studies", "events")
LEVEL_NAMES = {3: "strong", 2: "adequate", 1: "weak", 0: "fatal"}


def _cell(value: Any) -> str:
    if value is None or (isinstance(value, float) and math.isnan(value)):
        return "-"
    if isinstance(value, float) and value.is_integer():
        return str(int(value))
    if isinstance(value, bool):
        return "yes" if value else "no"
    return str(value)


@user_errors
def list_cmd(
    ctx: typer.Context,
    what: str = typer.Argument(
        ..., help="exposures, outcomes, studies or events.", show_default=False
    ),
    exposure: str | None = typer.Option(
        None, "--exposure", help="Only the records of this exposure."
    ),
    as_json: bool = typer.Option(False, "--json", help="Print the listing as JSON."),
) -> None:
    """List the exposures, outcomes, studies or events of the evidence base, with counts: the
    names to give to pool, replication and export (names match without regard to case).

    Example: exposhift list outcomes --exposure vellium
    """
    from exposhift.services.listing import list_records

    with workspace(ctx) as ws:
        store = ws.store
        table = list_records(store, what.lower(), exposure)
    if as_json:
        print_json(table.to_dict(orient="records"))
        return
    if table.empty:
        typer.echo(
            f"no {what.lower()} in the evidence base"
            + (f" for exposure {exposure}" if exposure else "")
        )
        return
    rows = [[_cell(v) for v in r] for r in table.itertuples(index=False)]
    typer.echo(render(rows, [c.replace("_", " ") for c in table.columns], indent=""))
    typer.echo(f"{len(table)} {what.lower()}")


@user_errors
def show_cmd(
    ctx: typer.Context,
    study_id: str = typer.Argument(
        ..., help="The study's key (study_id in the sheet).", show_default=False
    ),
    as_json: bool = typer.Option(False, "--json", help="Print the record as JSON."),
) -> None:
    """Show one study: its record, the exposure-change events it analyses, its estimates and
    its appraisal of record (the consensus; independent ratings stay hidden until both are in).

    Example: exposhift show Example2004
    """
    from exposhift.services.listing import study_record

    with workspace(ctx) as ws:
        store = ws.store
        rec = study_record(store, study_id, store.user)
    if as_json:
        print_json(rec.to_dict())
        return
    st = rec.study
    typer.echo(
        f"{st['study_id']}  {st['citation']}  ({st['year']})"
        + ("  [demo: invented]" if st["demo"] else "")
    )
    for k in (
        "doi",
        "design",
        "comparison",
        "population",
        "data_source",
        "assignment_grade",
        "pre_points",
        "post_points",
        "checks",
    ):
        if st[k] not in (None, ""):
            typer.echo(f"  {k.replace('_', ' '):<17} {st[k]}")
    typer.echo(f"\nevents ({len(rec.events)})")
    if len(rec.events):
        rows = [[_cell(v) for v in r] for r in rec.events.itertuples(index=False)]
        typer.echo(render(rows, [c.replace("_", " ") for c in rec.events.columns]))
    typer.echo(f"\nestimates ({len(rec.estimates)})")
    if len(rec.estimates):
        shown = rec.estimates.drop(columns=["estimate_uid"])  # --json gives the key
        rows = [[_cell(v) for v in r] for r in shown.itertuples(index=False)]
        typer.echo(render(rows, [c.replace("_", " ") for c in shown.columns]))
    ap = rec.appraisals
    record = ap["of_record"]
    typer.echo("\nappraisal of record")
    if record is None:
        states = ", ".join(f"{v.stage} by {v.reviewer}" for v in ap["appraisals"]) or "none"
        typer.echo(f"  no consensus yet (appraisals: {states})")
    else:
        lvl = "-" if record.overall is None else f"{record.overall} {LEVEL_NAMES[record.overall]}"
        typer.echo(
            f"  consensus by {record.reviewer}: overall {lvl} ({record.reason}; rubric "
            f"{record.rubric})"
        )
        for d in ap["domains"]:
            if record.ratings and d in record.ratings:
                typer.echo(f"    {d:<20} {record.ratings[d]}")
    if ap.get("older_rubric"):
        typer.echo(f"note: {ap['older_rubric']}")
    typer.echo(f"note: {ap['caution']}")


def register(app: typer.Typer) -> None:
    app.command("list")(list_cmd)
    app.command("show")(show_cmd)
