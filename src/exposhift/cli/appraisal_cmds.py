"""Commands for dual independent appraisal: import, show, agreement."""

from __future__ import annotations

from pathlib import Path

import typer

from exposhift.cli.common import print_json, user_errors, with_method, workspace
from exposhift.cli.helptext import Group
from exposhift.cli.numbers import is_missing, number

appraise_app = typer.Typer(
    help="Record and read appraisals (two independent reviewers, "
    "then a consensus).\n\nExample: exposhift appraise import "
    "appraisals.csv",
    no_args_is_help=True,
    cls=Group,
)

LEVEL_NAMES = {3: "strong", 2: "adequate", 1: "weak", 0: "fatal"}


@appraise_app.command("import")
@user_errors
def appraise_import(
    ctx: typer.Context,
    file: Path = typer.Argument(
        ...,
        help="CSV or XLSX: study_id, reviewer, stage, one column "
        "per domain (0-3), optional <domain>_why.",
    ),
    encoding: str | None = typer.Option(
        None, "--encoding", help="Text encoding of a CSV file (default UTF-8, with or without BOM)."
    ),
    rubric: Path | None = typer.Option(
        None,
        "--rubric",
        help="One-run override: a rubric file used instead of the evidence base's rubric "
        "(exposhift method show; method set rubric FILE stores one).",
    ),
    dry_run: bool = typer.Option(False, "--dry-run", help="Check and report; write nothing."),
) -> None:
    """Import appraisals; every problem is reported at once and nothing is written on error.

    Example: exposhift --user ana appraise import appraisals.csv --dry-run
    """
    from exposhift.services.appraising import import_appraisals

    with workspace(ctx, rubric=rubric) as ws:
        summary = import_appraisals(
            ws.store, file, encoding=encoding, rubric_path=rubric, dry_run=dry_run
        )
    verb = "would add" if dry_run else "added"
    stages = ", ".join(f"{n} {stage}" for stage, n in sorted(summary.by_stage.items()))
    typer.echo(
        f"{verb} {summary.added} appraisals ({stages or 'none'}); "
        f"{summary.unchanged} unchanged; rubric {summary.rubric}"
    )


@appraise_app.command("show")
@user_errors
def appraise_show(
    ctx: typer.Context,
    study_id: str = typer.Argument(..., help="The study's key."),
    rubric: Path | None = typer.Option(
        None,
        "--rubric",
        help="One-run override: a rubric file used instead of the evidence base's rubric "
        "(exposhift method show; method set rubric FILE stores one).",
    ),
    as_json: bool = typer.Option(False, "--json", help="Print JSON."),
) -> None:
    """Show a study's appraisals as the global --user sees them (blinding by identity: a
    reviewer sees another's ratings once both are in or after the consensus; a reader sees the
    consensus only).

    Example: exposhift --user ana appraise show Example2004
    """
    from exposhift.services.appraising import show_appraisals

    with workspace(ctx, as_json=as_json, rubric=rubric) as ws:
        data = show_appraisals(ws.store, study_id, None, rubric)
    if as_json:
        print_json(with_method(data.to_dict(), ws))
        return
    typer.echo(f"{data['study_id']}  {data['citation']}  [{data['design']}]")
    if not data["appraisals"]:
        typer.echo("  not appraised yet")
    for v in data["appraisals"]:
        head = f"  {v.stage:<11} {v.reviewer:<16}"
        if v.blinded:
            typer.echo(f"{head} {v.reason}")
            continue
        overall = "-" if v.overall is None else f"{v.overall} {LEVEL_NAMES[v.overall]}"
        typer.echo(f"{head} overall {overall}  ({v.reason}; rubric {v.rubric})")
        for d in data["domains"]:
            if v.ratings and d in v.ratings:
                line = f"      {d:<20} {v.ratings[d]}"
                if d in v.suggestions:
                    lim, why = v.suggestions[d]
                    line += f"   suggested <= {lim}: {why}"
                if d in v.justifications:
                    line += f"   why: {v.justifications[d]}"
                typer.echo(line)
    if data.get("older_rubric"):
        typer.echo(f"note: {data['older_rubric']}")
    typer.echo(f"note: {data['caution']}")


@user_errors
def agreement_cmd(
    ctx: typer.Context,
    as_json: bool = typer.Option(False, "--json", help="Print JSON."),
) -> None:
    """Agreement between independent reviewers per domain, over all domains and on the overall
    level: percent agreement and weighted kappa.

    Example: exposhift agreement --json
    """
    from exposhift.services.appraising import agreement

    with workspace(ctx) as ws:
        store = ws.store
        table = agreement(store)
    if as_json:
        print_json(table.to_dict(orient="records"))
        return
    typer.echo(f"{'domain':<20} {'n':>4} {'agree %':>8} {'kappa lin':>10} {'kappa quad':>11}")

    def fmt(x: float) -> str:
        return number(x, 2, missing="   n/a")

    def pct(x: float) -> str:
        return "    n/a" if is_missing(x) else number(x, 1) + "%"

    for rec in table.to_dict(orient="records"):
        if rec["domain"] in ("all domains", "overall level"):
            typer.echo("-" * 57)
        typer.echo(
            f"{rec['domain']:<20} {rec['n']:>4} {pct(rec['percent_agreement']):>8} "
            f"{fmt(rec['kappa_linear']):>10} {fmt(rec['kappa_quadratic']):>11}"
        )
    typer.echo(
        "n: studies rated by both reviewers; 'all domains' pools every study x domain "
        "pair (n = pairs); 'overall level' compares the two reviewers' overall levels "
        "(n = studies)."
    )
    typer.echo(
        "kappa: Cohen's weighted kappa (1968); linear and quadratic weights over levels 0-3."
    )
    if table.attrs.get("blinded_note"):
        typer.echo(f"note: {table.attrs['blinded_note']}")
    typer.echo(f"note: {table.attrs.get('caution', '')}")


def register(app: typer.Typer) -> None:
    app.add_typer(appraise_app, name="appraise")
    app.command("agreement")(agreement_cmd)
