"""``exposhift series import FILE`` and ``exposhift series estimate SERIES_ID``.

Services are imported inside each command so that ``exposhift --help`` stays fast.
"""

from __future__ import annotations

import typer

from exposhift.cli.common import print_json, settings, user_errors
from exposhift.cli.helptext import Group
from exposhift.cli.numbers import number

series_app = typer.Typer(
    help="Extracted series: import, re-estimate, falsify.\n\nExample: "
    "exposhift series estimate SERIES_ID --horizon 12",
    no_args_is_help=True,
    cls=Group,
)


def _f(x, digits: int = 3) -> str:
    return number(x, digits)


@series_app.command("import")
@user_errors
def import_cmd(
    ctx: typer.Context,
    file: str = typer.Argument(..., help="Series sheet (.csv or .xlsx), one row per point."),
    encoding: str | None = typer.Option(None, "--encoding", help="CSV encoding."),
    as_json: bool = typer.Option(False, "--json", help="Print the report as JSON."),
) -> None:
    """Import extracted series (long format: docs/series-sheet.md).

    Example: exposhift series import series.csv
    """
    from exposhift.services.series import import_series_file

    s = settings(ctx)
    rep = import_series_file(file, db=s.db, user=s.user, encoding=encoding)
    if as_json:
        print_json(rep.to_dict())
        return
    c = rep.counts
    typer.echo(f"{rep.file}: {rep.series} series, {rep.points} points -> {rep.url}")
    typer.echo(f"  series added {c['added']}, updated {c['updated']}, unchanged {c['unchanged']}")


@series_app.command("estimate")
@user_errors
def estimate_cmd(
    ctx: typer.Context,
    series_id: str = typer.Argument(..., help="The exposed series to re-estimate."),
    horizon: int | None = typer.Option(
        None,
        "--horizon",
        help="Average effect over this many periods after the change (default: the level change).",
    ),
    model: str = typer.Option("auto", "--model", help="auto, gaussian, poisson or negbin."),
    seasonal: str = typer.Option("auto", "--seasonal", help="auto, fourier, month or none."),
    hac_lag: int | None = typer.Option(
        None,
        "--hac-lag",
        help="Newey-West lag (default: "
        "floor(4 (n/100)^(2/9)) when the residuals are "
        "autocorrelated, else model-based SEs).",
    ),
    store: bool = typer.Option(
        False,
        "--store",
        help="Save the effect as a new estimate of the study, flagged re-estimated.",
    ),
    as_json: bool = typer.Option(False, "--json", help="Print JSON."),
) -> None:
    """Fit the series, compare and falsify it; optionally store the effect.

    Example: exposhift series estimate Duarte1999-exposed --horizon 12 --store
    """
    from exposhift.services.series import estimate_series_in

    s = settings(ctx)
    out = estimate_series_in(
        series_id,
        db=s.db,
        user=s.user,
        horizon=horizon,
        model=model,
        seasonal=seasonal,
        hac_lag=hac_lag,
        save=store,
    )
    if as_json:
        print_json(out.to_dict())
        return
    _print(out)


def _print(out) -> None:
    a, its = out.analysis, out.analysis.its
    row = out.series
    typer.echo(
        f"series {a.series} (study {row['study']}, event {row['event']}, "
        f"{row['outcome']}): {its.n_pre} points before, {its.n_post} from {its.change_at}"
    )
    typer.echo(f"  model {a.model} ({a.model_reason}); seasonal {a.seasonal or 'none'}")
    typer.echo(
        f"  standard errors: {its.diagnostics['se_method']}; "
        f"{its.diagnostics['interval']} intervals"
    )
    scale = "log rate ratio" if its.effect_scale == "log" else "difference"
    typer.echo(
        f"  level change {_f(its.level_change, 4)} (SE {_f(its.level_change_se, 4)}), "
        f"slope change {_f(its.slope_change, 4)} (SE {_f(its.slope_change_se, 4)}) "
        f"[{scale}]"
    )
    what = "level change" if its.horizon is None else f"average over {its.horizon} periods"
    lo, hi = its.effect_ci
    if its.ratio is not None:
        r = its.ratio
        typer.echo(f"  effect ({what}): rate ratio {_f(r[0])}  95% CI {_f(r[1])} to {_f(r[2])}")
    else:
        typer.echo(f"  effect ({what}): {_f(its.effect, 4)}  95% CI {_f(lo, 4)} to {_f(hi, 4)}")
    d = its.diagnostics
    typer.echo(
        f"  residuals: Durbin-Watson {_f(d['durbin_watson'], 2)}, Ljung-Box Q "
        f"{_f(d['ljung_box_q'], 2)} ({d['ljung_box_lags']} lags, p {_f(d['ljung_box_p'])})"
        + (f", dispersion {_f(d['dispersion'], 2)}" if d["dispersion"] is not None else "")
    )
    for note in its.notes:
        typer.echo(f"  note: {note}")
    for k, c in a.controlled.items():
        typer.echo(
            f"  controlled by {k}: effect {_f(c.effect, 4)} (SE {_f(c.effect_se, 4)}), "
            f"two-period DiD {_f(c.did, 4)} (SE {_f(c.did_se, 4)}); pre-period slope "
            f"difference {_f(c.pre_slope_diff, 4)} (95% CI {_f(c.pre_slope_diff_ci[0], 4)}"
            f" to {_f(c.pre_slope_diff_ci[1], 4)}): "
            + ("parallel" if c.parallel_pre_trends else "NOT parallel")
        )
    p = a.placebo_dates
    meaning = {
        "passed": "the real effect stands out from the placebo effects",
        "failed": "the real effect does not stand out from the placebo effects",
        "inconclusive": "too few placebo dates to tell",
    }[p.status]
    typer.echo(
        f"  placebo dates: {len(p.effects)} false change dates; the real effect ranks "
        f"{p.rank} of {len(p.effects) + 1} (p {_f(p.p_value)}, passes at p <= "
        f"{p.alpha:g}): {p.status} ({meaning})"
    )
    if p.naive_effects is not None and len(p.naive_effects):
        typer.echo(
            f"    a before-after comparison ignoring trends gives {_f(p.naive_real, 4)} at "
            f"the real date and up to {_f(float(abs(p.naive_effects).max()), 4)} (in "
            "absolute value) at the placebo dates"
        )
    for note in p.notes:
        typer.echo(f"    {note}")
    if a.placebo_places is not None:
        q = a.placebo_places
        typer.echo(
            f"  placebo places: rank {q.rank} of {len(q.effects) + 1} (p "
            f"{_f(q.p_value)}): {q.status}"
        )
    for k, r in a.negative_controls.items():
        from exposhift.series.placebo import negative_control_status

        typer.echo(
            f"  negative control {k}: effect {_f(r.effect, 4)} (95% CI "
            f"{_f(r.effect_ci[0], 4)} to {_f(r.effect_ci[1], 4)}): "
            f"{negative_control_status(r)}"
        )
    if out.stored_estimate:
        typer.echo(f"  stored as estimate {out.stored_estimate} (flagged re-estimated)")
        if out.checks_added:
            typer.echo(f"  checks added to study {row['study']}: {', '.join(out.checks_added)}")
    typer.echo(f"note: {out.caution}")


def register(app: typer.Typer) -> None:
    app.add_typer(series_app, name="series")
