"""The ``pool`` command: random-effects meta-analysis of comparable estimates."""

from __future__ import annotations

from collections.abc import Mapping
from pathlib import Path

import typer

from exposhift.cli.common import method_line, print_json, user_errors, with_method, workspace
from exposhift.cli.numbers import number

#: the --by choices (the keys of exposhift.services.pooling.STRATA; a test checks they agree)
_BY_HELP = (
    "Stratify: design-family, level, design, country, outcome-group; adds the result "
    "over all strata and the test of subgroup differences."
)
#: the default within-event correlation (exposhift.synthesis.events.DEFAULT_RHO; a test checks)
_DEFAULT_RHO = 0.8


def _fmt(x, digits=3):
    return number(x, digits, large=1000)


def _interval(nat: dict, lo: str, hi: str, digits: int = 3) -> str:
    if nat.get(lo) is None or nat.get(hi) is None:
        return "n/a"
    return f"{_fmt(nat[lo], digits)} to {_fmt(nat[hi], digits)}"


def _word(scale: str) -> str:
    return "ratio" if scale == "log" else "difference"


@user_errors
def pool_cmd(
    ctx: typer.Context,
    exposure: str = typer.Option(..., "--exposure", help="Exposure agent."),
    outcome: str = typer.Option(..., "--outcome", help="Outcome."),
    method: str = typer.Option("reml", "--method", help="tau^2 estimator: reml, dl, pm or fe."),
    ci: str = typer.Option(
        "hksj", "--ci", help="Interval: hksj (t on events - 1 df, scale floored at 1) or wald (z)."
    ),
    by: list[str] = typer.Option([], "--by", help=_BY_HELP),
    include_fatal: bool = typer.Option(
        False, "--include-fatal", help="Keep studies appraised fatal overall."
    ),
    min_level: int = typer.Option(
        None,
        "--min-level",
        help="Only studies appraised at this "
        "overall level or above (0-3); leaves out unappraised ones.",
    ),
    align: str = typer.Option(
        "increase", "--align", help="Express every effect for an exposure 'increase' or 'decrease'."
    ),
    no_hksj_floor: bool = typer.Option(
        False,
        "--no-hksj-floor",
        help="Untruncated Hartung-Knapp scale (can collapse to zero width).",
    ),
    within_event: str = typer.Option(
        "aggregate",
        "--within-event",
        help="Several estimates "
        "of one event: aggregate (one number per event, default), "
        "multilevel (three-level model, CR2 robust) or "
        "independent (counts the event more than once).",
    ),
    rho: float = typer.Option(
        _DEFAULT_RHO,
        "--rho",
        help="Within-event correlation used to aggregate estimates of one event (0-1).",
    ),
    details: bool = typer.Option(
        False,
        "--details",
        help="Add leave-one-event-out, cumulative by date of change and the small-study test.",
    ),
    as_json: bool = typer.Option(False, "--json", help="Print JSON: one object per group."),
    rubric: Path | None = typer.Option(
        None,
        "--rubric",
        help="One-run override: a rubric file used instead of the evidence base's rubric "
        "(exposhift method show; method set rubric FILE stores one).",
    ),
) -> None:
    """Pool comparable estimates of one exposure and one outcome, one number per event.

    Example: exposhift pool --exposure dravonil --outcome "preterm birth" --details
    """
    from exposhift.services.pooling import pool_evidence
    from exposhift.synthesis.event_pooling import WITHIN_EVENT

    with workspace(ctx, as_json=as_json, rubric=rubric) as ws:
        out = pool_evidence(
            ws.store,
            exposure,
            outcome,
            method=method,
            ci=ci,
            by=by,
            include_fatal=include_fatal,
            min_level=min_level,
            align_to=align,
            hksj_floor=not no_hksj_floor,
            within_event=within_event,
            rho=rho,
            details=details,
            rubric=ws.method.rubric,
        )
    if as_json:
        print_json(with_method(out.to_dict(), ws))
        return
    typer.echo(f"{out.exposure} -> {out.outcome}: effects of an exposure {out.align_to}")
    typer.echo(f"  evidence set: {out.evidence_set}")
    typer.echo(
        f"  method: {method.upper()} tau^2, {ci.upper()} interval"
        + (" (scale floored at 1)" if ci == "hksj" and not no_hksj_floor else "")
        + f"; within events: {WITHIN_EVENT[within_event]}"
        + (f", rho {rho:g}" if within_event == "aggregate" else "")
    )
    typer.echo(f"  {method_line(ws)}")
    if not out.groups:
        typer.echo("  nothing left to pool")
    for g in out.groups:
        _print_group(g)
    for o in out.overall:
        _print_overall(o)
    if out.excluded:
        typer.echo(f"\n  left out ({len(out.excluded)}):")
        for e in out.excluded:
            typer.echo(f"    {e['estimate_uid']}: {e['reason']}")
    typer.echo(f"\nnote: {out.caution}")


def _print_group(g: Mapping) -> None:
    from exposhift.services.pooling import STRATA

    strata = ", ".join(
        f"{k}={g[k]}"
        for k in g
        if g[k] != "" and k in ("measure_group", "estimate_kind", "increment", *STRATA.values())
    )
    word = _word(g["scale"])
    nat = g["natural"]
    typer.echo(
        f"\n  [{strata}]  events {g['k_events']}, estimates {g['k_estimates']}  "
        f"measure {g['measure']}"
    )
    if g["headline"] == "single-event":
        e = g["event_estimates"][0]
        typer.echo(
            f"    one event ({e['event_id']}): {word} {_fmt(e['natural']['estimate'])}  "
            f"95% CI {_interval(e['natural'], 'ci_lower', 'ci_upper')}  (nothing to pool)"
        )
    elif g["headline"] == "two-events":
        typer.echo(
            "    two events: shown side by side (a pooled t interval on 1 df is not a "
            "usable headline)"
        )
        for e in g["event_estimates"]:
            typer.echo(
                f"      {e['event_id']}: {word} {_fmt(e['natural']['estimate'])}  95% CI "
                f"{_interval(e['natural'], 'ci_lower', 'ci_upper')}"
                + (f"  ({e['k_units']} estimates combined)" if e["k_units"] > 1 else "")
            )
        fe = g["fixed_effect"]["natural"]
        typer.echo(
            f"    sensitivity, fixed effect: {word} {_fmt(fe['estimate'])}  95% CI "
            f"{_interval(fe, 'ci_lower', 'ci_upper')} (assumes one common effect)"
        )
        typer.echo(
            f"    random effects ({g['method'].upper()}, {g['ci_method'].upper()}, t on 1 "
            f"df): {word} {_fmt(nat['estimate'])}  95% CI "
            f"{_interval(nat, 'ci_lower', 'ci_upper')}"
        )
    else:
        df = "" if g.get("df") is None else f", t on {g['df']:.3g} df"
        typer.echo(
            f"    pooled {word} {_fmt(nat['estimate'])}  95% CI "
            f"{_interval(nat, 'ci_lower', 'ci_upper')}{df}  prediction "
            f"{_interval(nat, 'pi_lower', 'pi_upper')}"
        )
    if g["k_events"] >= 2:
        i2 = "n/a" if g["i2"] is None else f"{100 * g['i2']:.0f}%"
        t2 = g.get("tau2_ci")
        t2ci = (
            ""
            if not t2
            else f" (Q-profile 95% CI {_fmt(t2['lower'], 4)} to {_fmt(t2['upper'], 4)})"
        )
        typer.echo(
            f"    tau^2 {_fmt(g['tau2'], 4)}{t2ci}, I^2 {i2}, Q {_fmt(g['q'], 2)} "
            f"(p {_fmt(g['q_pvalue'], 3)}); analysis scale {_fmt(g['estimate'], 4)} "
            f"(SE {_fmt(g['se'], 4)})"
        )
    if g["scale"] == "log" and g["k_events"] >= 2:
        from exposhift.synthesis.evalue import e_value_of_pooled

        ev = e_value_of_pooled(nat, g["measure"])
        if ev.defined and ev.ci is not None:
            typer.echo(
                f"    E-value {ev.point:.2f}, of the CI limit nearest no effect {ev.ci:.2f} "
                "(VanderWeele & Ding 2017): the strength of unmeasured confounding, with both "
                "the exposure change and the outcome, that could explain the pooled ratio away"
            )
    if g.get("rho_sensitivity"):
        parts = [
            f"rho {r['rho']:g}: {_fmt(_back(g['scale'], r['estimate']))} "
            f"({_fmt(_back(g['scale'], r['ci_lower']))} to "
            f"{_fmt(_back(g['scale'], r['ci_upper']))})"
            for r in g["rho_sensitivity"]
        ]
        typer.echo("    within-event correlation: " + "; ".join(parts))
    for n in g["notes"]:
        typer.echo(f"    note: {n}")
    for line in g.get("provenance", []):
        typer.echo(f"    conversion: {line}")
    if "sensitivity" in g:
        _print_sensitivity(g["sensitivity"], word)
    if g["sign_flipped"]:
        typer.echo(
            f"    {g['sign_flipped']} estimate(s) from changes in the other "
            "direction had their sign flipped"
        )


def _back(scale: str, x):
    import math

    return None if x is None else (math.exp(x) if scale == "log" else x)


def _print_overall(o: dict) -> None:
    word = _word(o["scale"])
    nat = o["natural"]
    typer.echo(
        f"\n  over all strata [{o['measure_group']}, {o['estimate_kind']}]: events "
        f"{o['k_events']}, estimates {o['k_estimates']}: {word} "
        f"{_fmt(nat['estimate'])}  95% CI {_interval(nat, 'ci_lower', 'ci_upper')}"
    )
    st = o["subgroup_test"]
    if st["run"]:
        typer.echo(
            f"    subgroup differences: Q-between {st['q_between']:.2f} on {st['df']} df, "
            f"p {st['pvalue']:.3g} ({st['note']})"
        )
    else:
        typer.echo(f"    subgroup differences not tested: {st['reason']}")


def _print_sensitivity(sens: dict, word: str) -> None:
    if "note" in sens:
        typer.echo(f"    sensitivity: {sens['note']}")
        return
    loo = sens.get("leave_one_out")
    if loo:
        n = loo["natural"]
        typer.echo(
            f"    leave one event out: pooled {word} {_fmt(n['lowest'])} to "
            f"{_fmt(n['highest'])}; most influential {loo['most_influential']} "
            f"(without it {_fmt(n['without_most_influential'])})"
        )
    for c in sens.get("cumulative", []):
        typer.echo(
            f"    cumulative, {c['date']} +{c['added']}: {word} "
            f"{_fmt(c['natural']['estimate'])} "
            f"({_interval(c['natural'], 'ci_lower', 'ci_upper')}), "
            f"{c['k_events']} event(s)"
        )
    eg = sens["small_study"]
    if eg["run"]:
        typer.echo(f"    Egger test: intercept {_fmt(eg['intercept'])}, p {_fmt(eg['pvalue'])}")
    else:
        typer.echo(f"    Egger test {eg['reason']}")


def register(app: typer.Typer) -> None:
    app.command("pool")(pool_cmd)
