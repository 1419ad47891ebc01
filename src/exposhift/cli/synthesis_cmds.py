"""The ``pool`` command: random-effects meta-analysis of comparable estimates."""

from __future__ import annotations

import typer

from exposhift.cli.common import print_json, settings, user_errors

#: the --by choices (the keys of exposhift.services.pooling.STRATA; a test checks they agree)
_BY_HELP = "Stratify: design-family, level, design, country, outcome-group."


def _fmt(x, digits=3):
    return "  n/a" if x is None else f"{x:.{digits}f}"


@user_errors
def pool_cmd(
    ctx: typer.Context,
    exposure: str = typer.Option(..., "--exposure", help="Exposure agent."),
    outcome: str = typer.Option(..., "--outcome", help="Outcome."),
    method: str = typer.Option("reml", "--method", help="tau^2 estimator: reml, dl, pm or fe."),
    ci: str = typer.Option("hksj", "--ci", help="Interval: hksj (t, k-1 df) or wald (z)."),
    by: list[str] = typer.Option([], "--by", help=_BY_HELP),
    include_fatal: bool = typer.Option(False, "--include-fatal",
                                       help="Keep studies appraised fatal overall."),
    align: str = typer.Option("increase", "--align", help="Express every effect for an "
                              "exposure 'increase' or 'decrease'."),
    hksj_floor: bool = typer.Option(False, "--hksj-floor", help="Never let the HKSJ interval "
                                    "be narrower than the Wald interval."),
    details: bool = typer.Option(False, "--details", help="Add sensitivity: tau^2 interval "
                                 "(Q-profile), leave-one-out, small-study test."),
    as_json: bool = typer.Option(False, "--json", help="Print JSON: one object per group."),
) -> None:
    """Pool comparable estimates of one exposure and one outcome.

    Example: exposhift pool --exposure vellium --outcome "mean birth weight" --details
    """
    from exposhift.services.pooling import STRATA, pool_evidence
    from exposhift.services.setup import open_current

    s = settings(ctx)
    store = open_current(s.db, s.user)
    try:
        out = pool_evidence(store, exposure, outcome, method=method, ci=ci, by=by,
                            include_fatal=include_fatal, align_to=align, hksj_floor=hksj_floor,
                            details=details)
    finally:
        store.dispose()
    if as_json:
        print_json(out.groups)
        return
    typer.echo(f"{out.exposure} -> {out.outcome}: effects of an exposure {out.align_to}, "
               f"{method.upper()} tau^2, {ci.upper()} interval")
    if not out.groups:
        typer.echo("  nothing left to pool")
    for g in out.groups:
        strata = ", ".join(f"{k}={g[k]}" for k in g if g[k] != "" and k in (
            "measure_group", "estimate_kind", "increment", *STRATA.values()))
        typer.echo(f"\n  [{strata}]  k={g['k']}  measure {g['measure']} ({g['scale']} scale)")
        if g["scale"] == "log":
            b = g["back_transformed"]
            typer.echo(f"    pooled ratio {_fmt(b['estimate'])}  95% CI {_fmt(b['ci_lower'])} to "
                       f"{_fmt(b['ci_upper'])}  prediction {_fmt(b['pi_lower'])} to "
                       f"{_fmt(b['pi_upper'])}")
        i2 = "n/a" if g["i2"] is None else f"{100 * g['i2']:.0f}%"
        typer.echo(f"    analysis scale {_fmt(g['estimate'], 4)} (SE {_fmt(g['se'], 4)}), "
                   f"tau^2 {_fmt(g['tau2'], 4)}, I^2 {i2}, "
                   f"Q {_fmt(g['q'], 2)} (p {_fmt(g['q_pvalue'], 3)})")
        if "sensitivity" in g:
            _print_sensitivity(g["sensitivity"])
        if g["sign_flipped"]:
            typer.echo(f"    {g['sign_flipped']} estimate(s) from changes in the other "
                       "direction had their sign flipped")
    if out.excluded:
        typer.echo(f"\n  left out ({len(out.excluded)}):")
        for e in out.excluded:
            typer.echo(f"    {e['estimate_uid']}: {e['reason']}")
    typer.echo(f"\nnote: {out.caution}")


def _print_sensitivity(sens: dict) -> None:
    if "note" in sens:
        typer.echo(f"    sensitivity: {sens['note']}")
        return
    t2 = sens["tau2_ci"]
    typer.echo(f"    tau^2 {t2['method']}: {_fmt(t2['lower'], 4)} to {_fmt(t2['upper'], 4)}")
    loo = sens["leave_one_out"]
    typer.echo(f"    leave-one-out: pooled {_fmt(loo['lowest'], 4)} to {_fmt(loo['highest'], 4)} "
               f"(analysis scale); most influential {loo['most_influential']} "
               f"(shift {_fmt(loo['shift'], 4)})")
    eg = sens["small_study"]
    if eg["run"]:
        typer.echo(f"    Egger test: intercept {_fmt(eg['intercept'])}, p {_fmt(eg['pvalue'])}")
    else:
        typer.echo(f"    Egger test not run: {eg['reason']}")


def register(app: typer.Typer) -> None:
    app.command("pool")(pool_cmd)
