"""Commands ``certainty`` (suggestions and recorded judgement), ``certainty record FILE`` and
``evidence-table`` (the summary-of-evidence table of one exposure).

Services are imported inside each command, so that ``exposhift --help`` stays fast.
"""

from __future__ import annotations

from pathlib import Path
from typing import Any

import typer

from exposhift.cli.common import (
    fail,
    method_line,
    print_json,
    user_errors,
    with_method,
    workspace,
)
from exposhift.cli.helptext import Group

certainty_app = typer.Typer(
    help="How certain the evidence is, per exposure x outcome: the tool's suggestion per domain "
    "with its reason and numbers, the E-value, the sensitivity table and the committee's "
    "recorded judgement.\n\nExample: exposhift certainty --exposure dravonil --outcome "
    '"preterm birth"',
    invoke_without_command=True,
    no_args_is_help=False,
    cls=Group,
)


def register(app: typer.Typer) -> None:
    app.add_typer(certainty_app, name="certainty")
    app.command("evidence-table")(evidence_table_cmd)


def _n(x: Any, digits: int = 3) -> str:
    return "n/a" if x is None else f"{x:.{digits}g}"


def _span(lo: Any, hi: Any) -> str:
    """``lo to hi``; "n/a" when the interval does not exist (e.g. a PI with fewer than 3
    events)."""
    return "n/a" if lo is None and hi is None else f"{_n(lo)} to {_n(hi)}"


SETTINGS_HELP = (
    "One-run override: a certainty settings TOML used instead of the evidence base's "
    "(exposhift method show certainty; method set certainty FILE stores one)."
)


@certainty_app.callback(invoke_without_command=True)
@user_errors
def certainty(
    ctx: typer.Context,
    exposure: str | None = typer.Option(None, "--exposure", help="Exposure agent."),
    outcome: str | None = typer.Option(
        None, "--outcome", help="Outcome (default: every outcome with evidence)."
    ),
    settings_file: Path | None = typer.Option(None, "--certainty", help=SETTINGS_HELP),
    as_json: bool = typer.Option(False, "--json", help="Print everything as JSON."),
) -> None:
    """The certainty suggestions with their reasons, the E-value, the sensitivity table and
    the recorded judgement of one exposure (one outcome or all).

    Example: exposhift certainty --exposure dravonil --outcome "preterm birth" --json
    """
    if ctx.invoked_subcommand is not None:
        return
    if not exposure:
        fail("name the exposure with --exposure (or run 'exposhift certainty record FILE')", 2)
    from exposhift.services.certainty import certainty_for

    with workspace(ctx, as_json=as_json, certainty=settings_file) as ws:
        store, cs = ws.store, ws.method["certainty"]
        rep = certainty_for(store, exposure, outcome, settings=cs)
    if as_json:
        print_json(with_method(rep.to_dict(), ws))
        return
    from exposhift.cli.tables import render
    from exposhift.replication.status import status_label

    for c in rep.to_dict()["outcomes"]:
        p = c["pooled"]
        nat = p["natural"]
        typer.echo(f"{c['exposure']} x {c['outcome']}")
        typer.echo(
            f"  pooled ({p['evidence_set']}): {p['k_events']} events, {p['k_estimates']} "
            f"estimates, {p['measure']} {_n(nat.get('estimate'))} (CI "
            f"{_span(nat.get('ci_lower'), nat.get('ci_upper'))}; PI "
            f"{_span(nat.get('pi_lower'), nat.get('pi_upper'))}); status "
            + status_label(c["status"], c["provisional"], c.get("imprecise", False))
        )
        typer.echo(f"  starts at {c['start']['level']}: {c['start']['why']}")
        rows = []
        for d in c["domains"]:
            rec = c["recorded"].get(d["domain"])
            rows.append(
                [
                    d["domain"],
                    d["rating"],
                    "-"
                    if rec is None
                    else rec["rating"] + (" (override)" if rec["overrides"] else ""),
                    d["reason"],
                ]
            )
        typer.echo(render(rows, ["domain", "suggested", "recorded", "reason"]))
        fin = c["recorded"].get("certainty")
        typer.echo(f"  suggested certainty: {c['suggested_level']} ({c['suggested_level_reason']})")
        if fin:
            typer.echo(
                f"  recorded certainty: {fin['rating']} by {fin['decided_by']} on "
                f"{fin['decided_at'][:10]} (version {fin['version']}): {fin['why']}"
            )
        else:
            typer.echo("  recorded certainty: none yet ('exposhift certainty record FILE')")
        typer.echo(f"  {c['e_value']['words']}")
        if c["sensitivity"]:
            srows = [
                [
                    r["analysis"],
                    str(r["k_events"]),
                    _n(r["estimate"]),
                    _span(r["ci_lower"], r["ci_upper"]),
                    _n(r["change"]),
                    r["note"],
                ]
                for r in c["sensitivity"]
            ]
            kind = "ratio to main" if p["scale"] == "log" else "difference from main"
            typer.echo("  sensitivity (natural scale):")
            typer.echo(
                render(srows, ["analysis", "events", "estimate", "95% CI", kind, "note"], "    ")
            )
        typer.echo("")
    typer.echo(f"settings: {rep.settings.source} (fingerprint {rep.settings.fingerprint()[:16]})")
    typer.echo(method_line(ws))
    typer.echo(f"note: {rep.caution}")


@certainty_app.command("record")
@user_errors
def certainty_record(
    ctx: typer.Context,
    file: str = typer.Argument(
        ..., help="CSV or XLSX: exposure, outcome, domain, rating, why, decided_by[, decided_at]."
    ),
    settings_file: Path | None = typer.Option(None, "--certainty", help=SETTINGS_HELP),
    encoding: str | None = typer.Option(None, "--encoding", help="Text encoding of a CSV."),
    dry_run: bool = typer.Option(False, "--dry-run", help="Check the file; write nothing."),
    as_json: bool = typer.Option(False, "--json", help="Print the result as JSON."),
) -> None:
    """Record the committee's certainty judgements (versioned, audited; all or nothing).

    A rating that departs from the suggestion needs a reason in 'why'.

    Example: exposhift certainty record judgements.csv --dry-run
    """
    from exposhift.services.certainty import record_judgements

    with workspace(ctx, as_json=as_json, certainty=settings_file) as ws:
        store, cs = ws.store, ws.method["certainty"]
        res = record_judgements(store, file, settings=cs, encoding=encoding, dry_run=dry_run)
    if as_json:
        print_json(with_method(res.to_dict(), ws))
        return
    if res.dry_run:
        typer.echo(
            f"checked {res.file}: valid; would add {res.added}, update {res.updated}, leave "
            f"{res.unchanged} unchanged ({res.overrides} overriding the suggestion); nothing "
            "written"
        )
        return
    typer.echo(
        f"recorded {res.file}: {res.added} added, {res.updated} updated, {res.unchanged} "
        f"unchanged ({res.overrides} overriding the suggestion, each with its reason)"
    )


@user_errors
def evidence_table_cmd(
    ctx: typer.Context,
    exposure: str = typer.Option(..., "--exposure", help="Exposure agent."),
    settings_file: Path | None = typer.Option(None, "--certainty", help=SETTINGS_HELP),
    as_json: bool = typer.Option(False, "--json", help="Print the table as JSON."),
    as_csv: bool = typer.Option(False, "--csv", help="Print the table as CSV."),
) -> None:
    """The summary-of-evidence table of one exposure: per outcome, events, pooled effect with
    CI and PI, status, certainty, reasons and E-value.

    Example: exposhift evidence-table --exposure dravonil --csv
    """
    if as_json and as_csv:
        fail("choose one of --json and --csv", 2)
    from exposhift.services.certainty import evidence_table

    with workspace(ctx, as_json=as_json, certainty=settings_file) as ws:
        store, cs = ws.store, ws.method["certainty"]
        tab = evidence_table(store, exposure, settings=cs)
    if as_json:
        print_json(with_method(tab.to_dict(), ws))
        return
    if as_csv:
        import sys

        tab.rows.to_csv(sys.stdout, index=False, lineterminator="\n", float_format="%.6g")
        return
    from exposhift.cli.tables import render

    rows = [
        [
            r["outcome"],
            str(r["events"]),
            f"{r['measure']} {_n(r['effect'])}" if r["effect"] is not None else "not pooled",
            _span(r["ci_lower"], r["ci_upper"]),
            _span(r["pi_lower"], r["pi_upper"]),
            r["status"],
            r["certainty"],
            r["reasons"],
            _n(r["e_value"])
            + (f" (CI {_n(r['e_value_ci'])})" if r["e_value_ci"] is not None else ""),
        ]
        for r in tab.to_dict()["rows"]
    ]
    typer.echo(f"summary of evidence: {tab.exposure} (effects of an exposure increase)")
    if tab.evidence_set:
        typer.echo(f"evidence set: {tab.evidence_set}")
    typer.echo(
        render(
            rows,
            [
                "outcome",
                "events",
                "effect",
                "95% CI",
                "95% PI",
                "status",
                "certainty",
                "reasons",
                "E-value",
            ],
        )
    )
    typer.echo(method_line(ws))
    typer.echo(f"note: {tab.caution}")
