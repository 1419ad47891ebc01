"""Commands that move records in and out: import, export, events import, demo."""

from __future__ import annotations

from pathlib import Path
from typing import TYPE_CHECKING

import typer

from exposhift.cli.common import print_json, settings, user_errors
from exposhift.cli.helptext import Group

if TYPE_CHECKING:
    from exposhift.services.importing import ImportReport

#: where ``exposhift demo`` writes without --db (as exposhift.services.demo.DEMO_DB)
DEMO_FILE = "demo/evidence-demo.db"

#: imports with more rows than this show a progress bar (on stderr)
PROGRESS_ABOVE = 5000


class _Bar:
    """A rich progress bar on stderr, started on the first report of a large stage."""

    def __init__(self) -> None:
        self.progress = None
        self.tasks: dict[str, int] = {}

    def __call__(self, stage: str, done: int, total: int) -> None:
        if total <= PROGRESS_ABOVE:
            return
        if self.progress is None:
            from rich.console import Console
            from rich.progress import BarColumn, MofNCompleteColumn, Progress, TextColumn

            self.progress = Progress(
                TextColumn("writing {task.description}"),
                BarColumn(),
                MofNCompleteColumn(),
                console=Console(stderr=True),
            )
            self.progress.start()
        if stage not in self.tasks:
            self.tasks[stage] = self.progress.add_task(stage, total=total)
        self.progress.update(self.tasks[stage], completed=done)

    def close(self) -> None:
        if self.progress is not None:
            self.progress.stop()


def _print_report(report: ImportReport) -> None:
    if report.dry_run:
        typer.echo(
            f"dry run: nothing was written. Importing {report.file} into {report.url} would give:"
        )
    else:
        typer.echo(f"imported {report.file} into {report.url} ({report.rows} rows)")
    width = max(len(k) for k in report.counts)
    typer.echo(f"  {'':<{width}}  {'added':>8}  {'updated':>8}  {'unchanged':>9}")
    for name, c in report.counts.items():
        typer.echo(f"  {name:<{width}}  {c.added:>8,}  {c.updated:>8,}  {c.unchanged:>9,}")
    for note in report.notes:
        typer.echo(f"note: {note}")
    if not report.dry_run and not report.changed:
        typer.echo("nothing changed: every record was already in the evidence base")


def _run_import(
    ctx: typer.Context,
    file: Path,
    *,
    events_only: bool,
    dry_run: bool,
    encoding: str | None,
    ignore_extra: bool,
    as_json: bool,
    quiet: bool,
    delimiter: str | None = None,
    sheet: str | None = None,
    replace: bool = False,
    rubric: Path | None = None,
) -> None:
    from exposhift.services.importing import import_file

    s = settings(ctx)
    bar = None if (as_json or quiet) else _Bar()
    try:
        report = import_file(
            file,
            db=s.db,
            user=s.user,
            events_only=events_only,
            dry_run=dry_run,
            encoding=encoding,
            ignore_extra=ignore_extra,
            progress=bar,
            delimiter=delimiter,
            sheet=sheet,
            replace=replace,
            rubric_path=rubric,
        )
    finally:
        if bar is not None:
            bar.close()
    note = (
        f"one-run override: rubric from {rubric} for the archive's appraisals; nothing of it "
        "was stored"
        if rubric is not None
        else None
    )
    if as_json:
        out = report.to_dict()
        print_json({**out, "one_run_override": [note]} if note else out)
    elif not quiet:
        if note:
            typer.echo(note)
        _print_report(report)
    for w in report.warnings:  # after the report, on standard error (as export's warnings),
        typer.echo(f"warning: {w}", err=True)  # even with --quiet


_FILE = typer.Argument(
    ..., help="Extraction sheet (.csv, .xlsx) or exposhift archive (.json).", show_default=False
)
_DRY = typer.Option(
    False,
    "--dry-run",
    help="Check the file and report what would be added, updated and left "
    "unchanged; write nothing.",
)
_ENCODING = typer.Option(
    None, "--encoding", help="Text encoding of a CSV file that is not UTF-8 (e.g. latin-1, cp1252)."
)
_EXTRA = typer.Option(
    False,
    "--ignore-extra-columns",
    help="Skip columns exposhift does not know instead of refusing the file.",
)
_DELIMITER = typer.Option(
    None,
    "--delimiter",
    help="Cell delimiter of a CSV file: ',', ';', '|' or tab (default: "
    "detected from the header row).",
)
_SHEET = typer.Option(
    None,
    "--sheet",
    help="Worksheet of an .xlsx workbook to read (default: the first with "
    "extraction-sheet columns).",
)
_JSON = typer.Option(False, "--json", help="Print the result as a JSON object.")
_QUIET = typer.Option(False, "--quiet", "-q", help="Print nothing on success.")
_REPLACE = typer.Option(
    False,
    "--replace",
    help="Archive only: let it replace appraisals the evidence base holds "
    "with other content (an administrator's decision; each replacement is "
    "recorded in the audit trail).",
)
_RUBRIC = typer.Option(
    None,
    "--rubric",
    help="Archive only, one-run override: the rubric its appraisals are checked against "
    "(default: the archive's rubric, else the evidence base's; exposhift method show).",
)


@user_errors
def import_cmd(
    ctx: typer.Context,
    file: Path = _FILE,
    dry_run: bool = _DRY,
    encoding: str | None = _ENCODING,
    delimiter: str | None = _DELIMITER,
    sheet: str | None = _SHEET,
    ignore_extra: bool = _EXTRA,
    as_json: bool = _JSON,
    quiet: bool = _QUIET,
    replace: bool = _REPLACE,
    rubric: Path | None = _RUBRIC,
) -> None:
    """Import studies, events and estimates from a sheet, or a whole archive (.json).

    Every problem in the file is reported at once (row, column, what to do) and nothing is
    written until the file is clean. The import is one transaction; importing the same file
    again changes nothing, and a changed row updates its record (with an audit entry). The
    format is described in docs/extraction-sheet.md. An archive's appraisals pass the same rules
    as 'appraise import'.

    Example: exposhift import extraction.xlsx --dry-run
    """
    _run_import(
        ctx,
        file,
        events_only=False,
        dry_run=dry_run,
        encoding=encoding,
        ignore_extra=ignore_extra,
        as_json=as_json,
        quiet=quiet,
        delimiter=delimiter,
        sheet=sheet,
        replace=replace,
        rubric=rubric,
    )


@user_errors
def events_import_cmd(
    ctx: typer.Context,
    file: Path = typer.Argument(..., help="Events sheet (.csv or .xlsx).", show_default=False),
    dry_run: bool = _DRY,
    encoding: str | None = _ENCODING,
    delimiter: str | None = _DELIMITER,
    sheet: str | None = _SHEET,
    ignore_extra: bool = _EXTRA,
    as_json: bool = _JSON,
    quiet: bool = _QUIET,
) -> None:
    """Register exposure-change events that no study has evaluated yet (event columns + demo).

    Example: exposhift events import registered-events.csv
    """
    _run_import(
        ctx,
        file,
        events_only=True,
        dry_run=dry_run,
        encoding=encoding,
        ignore_extra=ignore_extra,
        as_json=as_json,
        quiet=quiet,
        delimiter=delimiter,
        sheet=sheet,
    )


@user_errors
def export_cmd(
    ctx: typer.Context,
    file: Path = typer.Argument(
        ...,
        help="Target: .json (whole evidence base), .csv or .xlsx (extraction sheet).",
        show_default=False,
    ),
    exposure: str | None = typer.Option(
        None, "--exposure", help="Only the records of this exposure."
    ),
    outcome: str | None = typer.Option(
        None, "--outcome", help="Only the estimates of this outcome (and their studies and events)."
    ),
    with_appraisals: bool = typer.Option(
        False,
        "--with-appraisals",
        help="Add the consensus appraisal levels (overall and per domain) to a .csv/.xlsx sheet.",
    ),
    events: bool = typer.Option(
        False,
        "--events",
        help="Write the events sheet (every event, with or "
        "without studies) instead of the estimates.",
    ),
    as_json: bool = _JSON,
) -> None:
    """Export the evidence base, or the part of one exposure (and outcome): a lossless archive
    (.json) or an extraction sheet (.csv/.xlsx).

    Text cells that a spreadsheet would run as a formula are written with a leading quote. A
    filtered archive holds every study, event, outcome and appraisal its estimates need, so it
    imports cleanly elsewhere.

    Example: exposhift export vellium.xlsx --exposure vellium --with-appraisals
    """
    from exposhift.services.exporting import export_file

    result = export_file(
        file,
        db=settings(ctx).db,
        events_only=events,
        exposure=exposure,
        outcome=outcome,
        with_appraisals=with_appraisals,
        user=settings(ctx).user,
    )
    for warning in result.warnings:
        typer.echo(f"warning: {warning}", err=True)
    if as_json:
        print_json(
            {
                "file": result.path,
                "format": result.format,
                "what": result.what,
                "counts": result.counts,
                "warnings": result.warnings,
            }
        )
        return
    counts = ", ".join(f"{n:,} {k}" for k, n in result.counts.items())
    part = ""
    if exposure or outcome:
        part = " of " + " x ".join(x for x in (exposure, outcome) if x)
    typer.echo(f"wrote {result.path} ({result.what}{part}: {counts})")
    if with_appraisals:
        typer.echo(
            "note: the consensus_* columns are for reading; importing the sheet again "
            "needs --ignore-extra-columns"
        )


@user_errors
def demo_cmd(
    ctx: typer.Context,
    db: Path | None = typer.Option(
        None,
        "--db",
        help=f"SQLite file for the demo (default: the "
        f"global --db, else {DEMO_FILE}). A file holding "
        "anything the demo does not generate is refused.",
    ),
    seed: Path | None = typer.Option(
        None,
        "--seed",
        help="Directory with the demo records (default: the repository's seed_records/).",
    ),
    force: bool = typer.Option(
        False,
        "--force",
        help="Replace the file even if it holds records of your "
        "own; a backup copy is kept beside it.",
    ),
) -> None:
    """Build a fresh demo evidence base from the invented scenario and show what it holds.

    Your own evidence base is never touched: the demo lives in its own file, and a file that
    holds anything the demo does not generate (your appraisals, events, edits) is replaced only
    with --force, after a backup copy.

    Example: exposhift --db demo.db demo
    """
    from exposhift.cli.tables import summary_table
    from exposhift.services.demo import build_demo
    from exposhift.services.summary import SUMMARY_CAUTION

    s = settings(ctx)
    target = db if db is not None else (s.db if s.db_given else None)
    r = build_demo(target, seed, s.user, force=force)
    c = r.counts
    if r.backup:
        typer.echo(f"kept a backup of the replaced file: {r.backup}")
    typer.echo(f"demo evidence base {r.path} (built from {r.seed})")
    typer.echo(
        f"  {c['studies']} studies, {c['estimates']} estimates, {c['events']} "
        f"exposure-change events ({c['events_without_study']} without a study yet), "
        f"{c['countries']} countries, {c['designs']} designs, {c['appraisals']} "
        "appraisals"
    )
    typer.echo(f"  {r.appraisals}")
    if r.directions:
        typer.echo(f"  {r.directions} (other exposure x outcome cells have none)")
    if r.judgements:
        typer.echo(f"  {r.judgements} ('exposhift evidence-table --exposure dravonil' shows them)")
    if not r.summary.empty:
        typer.echo(
            "\nwhat the evidence says (independent events, replication status, pooled "
            "effect of an exposure increase in the largest comparable stratum):"
        )
        typer.echo(summary_table(r.summary))
        typer.echo(f"note: {SUMMARY_CAUTION}")
    typer.echo(
        "every record is invented and flagged demo; it shows how exposhift works and is "
        "no evidence about any real agent."
    )
    typer.echo("next:")
    for line in _next_commands(r):
        typer.echo(f"  {line}")


def _next_commands(r) -> list[str]:
    """Commands worth trying on the demo: pool and replication on the busiest pair."""
    db = f"exposhift --db {r.path}"
    out = [f"{db} info", f"{db} list exposures"]
    if not r.grid.empty:
        exposure, outcome = r.grid.stack().idxmax()
        pick = f'--exposure {exposure} --outcome "{outcome}"'
        out += [f"{db} pool {pick}", f"{db} replication {pick}"]
    out += [f"{db} gaps", f"{db} export demo-archive.json"]
    return out


def register(app: typer.Typer) -> None:
    app.command("import")(import_cmd)
    app.command("export")(export_cmd)
    app.command("demo")(demo_cmd)
    events = typer.Typer(
        help="Exposure-change events registered without studies.\n\n"
        "Example: exposhift events import registered-events.csv",
        no_args_is_help=True,
        cls=Group,
    )
    events.command("import")(events_import_cmd)
    app.add_typer(events, name="events")
