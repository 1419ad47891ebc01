"""Commands ``replication`` (one exposure × outcome) and ``gaps`` (the evidence-gap map)."""

from __future__ import annotations

import math
from collections.abc import Sequence
from pathlib import Path
from typing import TYPE_CHECKING, Any

import typer

from exposhift.cli.common import method_line, print_json, user_errors, with_method, workspace
from exposhift.cli.numbers import number
from exposhift.cli.tables import render

if TYPE_CHECKING:
    from exposhift.replication.report import ReplicationReport
    from exposhift.services.replicating import GapReport


def register(app: typer.Typer) -> None:
    app.command("replication")(replication)
    app.command("gaps")(gaps)


# --------------------------------------------------------------------------------------------
# formatting


def _fmt(value: Any, digits: int = 3) -> str:
    return number(value, digits, style="significant", missing="-")


def table(rows: Sequence[Sequence[Any]], headers: Sequence[str]) -> str:
    """A plain text table with left-aligned columns (values formatted with ``_fmt``)."""
    return render([[_fmt(c) for c in r] for r in rows], list(headers), indent="")


def _ci(lo: Any, hi: Any) -> str:
    return f"{_fmt(lo)} to {_fmt(hi)}"


def _nat(scale: str, x: Any) -> Any:
    if x is None or (isinstance(x, float) and math.isnan(x)):
        return None
    return math.exp(x) if scale == "log" else x


def _scale_of(group: str) -> str:
    from exposhift.synthesis.harmonise import GROUP_SCALES

    return GROUP_SCALES.get(str(group), "identity")


def render_replication(rep: ReplicationReport) -> str:
    status = rep.label
    basis = {
        "pre-specified": "pre-specified by the committee",
        "settings": "fixed for this run or in the replication settings",
        "inferred": "inferred from these same events: statuses are provisional",
    }
    lines = [
        f"{rep.exposure} x {rep.outcome}",
        "",
        f"status    {status}",
        f"rule      {rep.rule}",
        f"expected  {rep.expected_words} [{basis.get(rep.expected_source, rep.expected_source)}]",
    ]
    h = rep.headline
    if h.get("k_events"):
        word = "ratio" if h["scale"] == "log" else "difference"
        lines.append(
            f"pooled    {word} {_fmt(h['estimate'])} (95% CI "
            f"{_ci(h['ci_lower'], h['ci_upper'])}; prediction "
            f"{_ci(h.get('pi_lower'), h.get('pi_upper'))}) from {h['k_events']} "
            f"event(s), {h['k_estimates']} estimate(s): {h['evidence_set']} "
            f"({h['stratum']}; {h['method']})"
        )
    for f in rep.families:
        lines.append(
            f"family    {f['family']}: {f['events']} event(s) in "
            f"{len(f['places'])} place(s), {f['first_year']}-{f['last_year']}"
        )
    lines.append("")
    ev = rep.events
    if len(ev):
        lines.append(
            "independent estimates (ratio or difference, aligned to an exposure "
            "increase; * = sets its event's stratum)"
        )
        rows = [
            [
                ("*" if r.represents_event else " ") + str(r.event_id),
                r.country,
                r.change_date,
                r.direction,
                r.design,
                r.level,
                _nat(_scale_of(r.measure_group), r.estimate),
                _ci(
                    _nat(_scale_of(r.measure_group), r.ci_lower),
                    _nat(_scale_of(r.measure_group), r.ci_upper),
                ),
                r.concordant,
            ]
            for r in ev.itertuples(index=False)
        ]
        ci = f"{100 * (1 - rep.settings.alpha):g}% CI"
        lines.append(
            table(
                rows,
                [
                    "event",
                    "country",
                    "date",
                    "change",
                    "design",
                    "level",
                    "effect",
                    ci,
                    "expected way",
                ],
            )
        )
        lines.append("")
    st = rep.sign_test
    if st.get("n"):
        lines.append(
            f"sign test: {st['k_expected']} of {st['n']} events at level >= "
            f"{rep.settings.min_level} in the expected direction, exact two-sided "
            f"p = {_fmt(st['p'])} (the smallest p possible with {st['n']} events is "
            f"{_fmt(st.get('min_attainable_p'))})"
        )
    fam = rep.by_design_family
    if len(fam):
        lines += [
            "",
            "pooled by design family (events at level >= "
            f"{rep.settings.min_level}; {rep.settings.pool_method}, {rep.settings.pool_ci};"
            " ratio or difference)",
        ]
        rows = []
        for r in fam.itertuples(index=False):
            sc = _scale_of(r.measure_group)
            rows.append(
                [
                    r.design_family,
                    f"{r.measure_group}/{r.estimate_kind}"
                    + (f" {r.increment}" if r.increment else ""),
                    r.k,
                    _nat(sc, r.estimate),
                    _ci(_nat(sc, r.ci_lower), _nat(sc, r.ci_upper)),
                    r.tau2,
                    None if r.i2 is None or r.i2 != r.i2 else f"{100 * r.i2:.0f}%",
                    _ci(_nat(sc, r.pi_lower), _nat(sc, r.pi_upper)),
                    "main" if r.main else "",
                ]
            )
        lines.append(
            table(
                rows,
                [
                    "design family",
                    "stratum",
                    "events",
                    "effect",
                    "CI",
                    "tau2",
                    "I2",
                    "prediction interval",
                    "",
                ],
            )
        )
    lines += ["", f"triangulation: {rep.triangulation.get('statement', '')}"]
    for seq in rep.temporal:
        order = ", ".join(
            f"{e['event_id']} ({e['direction']}, "
            + (f"period {e['period']})" if e["counts"] else "does not count)")
            for e in seq["events"]
        )
        lines.append(f"in {seq['place']}: {order}")
    for r in rep.reversals:
        moved = "outcome moved back" if r["outcome_moved_back"] else "outcome did not move back"
        lines.append(
            f"reversal in {r['place']}: {r['decrease_event']} then "
            f"{r['increase_event']}: {moved}{' (counts)' if r['counts'] else ''}"
        )
    dr = rep.dose_response
    lines += ["", "dose-response: " + (dr.interpretation if dr.run else dr.reason)]
    if len(rep.excluded):
        lines.append(
            f"{len(rep.excluded)} estimate(s) set aside as not independent "
            "(--json lists them with the reason)"
        )
    lines += ["", f"caution: {rep.caution}"]
    return "\n".join(lines)


def render_gaps(rep: GapReport) -> str:
    from exposhift.replication.gaps import GAP_STATES
    from exposhift.replication.status import status_label

    cells = rep.cells
    counts = cells["state"].value_counts()
    summary = ", ".join(f"{counts.get(s, 0)} {s}" for s in GAP_STATES)
    lines = [f"gap map: {len(cells)} cells (exposure x outcome group): {summary}", ""]
    rows = [
        [
            r.exposure,
            r.outcome_group,
            r.events,
            r.studies,
            None if math.isnan(r.best_level) else int(r.best_level),
            status_label(r.status, r.provisional, r.imprecise),
            r.state,
            r.not_yet,
        ]
        for r in cells.itertuples(index=False)
    ]
    lines.append(
        table(
            rows,
            [
                "exposure",
                "outcome group",
                "events",
                "studies",
                "best level",
                "status",
                "state",
                "not yet replicated",
            ],
        )
    )
    opp = rep.opportunities
    lines += ["", f"opportunities: {len(opp)} registered exposure change(s) never evaluated"]
    if len(opp):
        rows = [
            [
                r.event_id,
                r.exposure,
                r.country,
                r.change_date,
                r.family_events_evaluated,
                r.outcomes_studied_elsewhere or "-",
            ]
            for r in opp.itertuples(index=False)
        ]
        lines.append(
            table(
                rows,
                [
                    "event",
                    "exposure",
                    "country",
                    "date",
                    "family events evaluated",
                    "outcomes studied elsewhere",
                ],
            )
        )
        lines.append(
            "an evaluation needs: outcome data before and after the change (>= 3 points "
            "each side, 12 preferred), a comparison without the change, and exposure "
            "measurements showing the shift (--json gives this per event)"
        )
    lines += ["", f"caution: {rep.caution}"]
    return "\n".join(lines)


# --------------------------------------------------------------------------------------------
# commands

_EXPECTED_HELP = (
    "Expected direction: 'pooled' (sign of the combined z of the good events, default), "
    "'raises' or 'lowers' (an exposure increase raises/lowers the outcome)."
)


@user_errors
def replication(
    ctx: typer.Context,
    exposure: str = typer.Option(..., "--exposure", help="Exposure agent (as in the sheet)."),
    outcome: str = typer.Option(..., "--outcome", help="Outcome (as in the sheet)."),
    as_json: bool = typer.Option(False, "--json", help="Print the report as JSON."),
    expected: str | None = typer.Option(None, "--expected", help=_EXPECTED_HELP),
    family: str | None = typer.Option(
        None,
        "--family",
        help="Only events of this family of change (the event's family key, "
        "or 'exposure / change kind').",
    ),
    settings_file: Path | None = typer.Option(
        None,
        "--settings",
        help="One-run override: a settings file used instead of the evidence base's settings "
        "(exposhift method show; method set settings FILE stores one).",
    ),
) -> None:
    """Has the effect of this exposure on this outcome been shown again in other places, at
    other times and by other designs? Prints the replication status and the rule behind it.

    Example: exposhift replication --exposure dravonil --outcome "preterm birth"
    """
    from exposhift.replication.settings import EXPECTED_CHOICES
    from exposhift.services.replicating import replication_for

    if expected is not None and expected not in EXPECTED_CHOICES:
        from exposhift.errors import ConfigError

        raise ConfigError(f"--expected must be one of {', '.join(EXPECTED_CHOICES)}")
    with workspace(ctx, as_json=as_json, settings=settings_file) as ws:
        rep = replication_for(
            ws.store,
            exposure,
            outcome,
            settings=ws.method.settings,
            expected=expected,
            family=family,
        )
    if as_json:
        print_json(with_method(rep.to_dict(), ws))
    else:
        typer.echo(render_replication(rep))
        typer.echo(method_line(ws))


def _split(values: list[str] | None) -> tuple[str, ...]:
    out: list[str] = []
    for v in values or []:
        out += [x.strip() for x in v.split(",") if x.strip()]
    return tuple(out)


@user_errors
def gaps(
    ctx: typer.Context,
    as_json: bool = typer.Option(False, "--json", help="Print cells and opportunities as JSON."),
    design_family: list[str] | None = typer.Option(
        None, "--design-family", help="Keep only these design families (repeat or comma-separate)."
    ),
    region: list[str] | None = typer.Option(
        None,
        "--region",
        help="Keep only events in these regions (UN M49 continents or the "
        "regions table of the settings in force: exposhift method show).",
    ),
    country: list[str] | None = typer.Option(
        None, "--country", help="Keep only events in these countries (ISO alpha-3)."
    ),
    year_from: int | None = typer.Option(None, "--from", help="Changes from this year on."),
    year_to: int | None = typer.Option(None, "--to", help="Changes up to this year."),
    min_level: int | None = typer.Option(
        None, "--min-level", help="Keep only studies appraised at this overall level or above."
    ),
    stale_after: int | None = typer.Option(
        None, "--stale-after", help="Mark cells with no evaluated change after YEAR as stale."
    ),
    studied_only: bool = typer.Option(
        False, "--studied-only", help="Leave out the no-study cells (the listing can be long)."
    ),
    settings_file: Path | None = typer.Option(
        None,
        "--settings",
        help="One-run override: a settings file used instead of the evidence base's settings "
        "(exposhift method show; method set settings FILE stores one).",
    ),
) -> None:
    """The evidence-gap map: exposure x outcome group, with replication status and state, and
    the registered exposure changes that nobody has evaluated.

    Example: exposhift gaps --studied-only --region Europe
    """
    from exposhift.services.replicating import GapFilters, gap_report

    filters = GapFilters(
        design_families=_split(design_family),
        regions=_split(region),
        countries=_split(country),
        year_from=year_from,
        year_to=year_to,
        min_level=min_level,
        stale_after=stale_after,
        studied_only=studied_only,
    )
    with workspace(ctx, as_json=as_json, settings=settings_file) as ws:
        rep = gap_report(ws.store, filters, settings=ws.method.settings)
    if as_json:
        print_json(with_method(rep.to_dict(), ws))
    else:
        typer.echo(render_gaps(rep))
        typer.echo(method_line(ws))
