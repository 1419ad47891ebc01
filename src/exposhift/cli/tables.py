"""Plain-text tables for terminal output (formatting only; no computation)."""

from __future__ import annotations

from typing import TYPE_CHECKING

from exposhift.cli.numbers import is_missing, number

if TYPE_CHECKING:
    import pandas as pd


def _effect(est: float, lo: float, hi: float) -> str:
    """``est (lo to hi)`` with one number of decimals for all three (none once any reaches
    100), so an estimate and its interval read alike."""
    known = [abs(x) for x in (est, lo, hi) if not is_missing(x)]
    digits = 0 if known and max(known) >= 100 else 2
    est_s, lo_s, hi_s = ("-" if is_missing(x) else number(x, digits) for x in (est, lo, hi))
    return f"{est_s} ({lo_s} to {hi_s}"


def render(rows: list[list[str]], header: list[str], indent: str = "  ") -> str:
    """A plain text table with left-aligned columns, each line indented."""
    widths = [max(len(str(r[i])) for r in [header, *rows]) for i in range(len(header))]
    line = lambda r: "  ".join(str(c).ljust(w) for c, w in zip(r, widths, strict=True))  # noqa: E731
    out = [line(header), line(["-" * w for w in widths])]
    out += [line(r) for r in rows]
    return "\n".join(indent + x.rstrip() for x in out)


def summary_table(summary: pd.DataFrame) -> str:
    """The per exposure x outcome summary of :func:`exposhift.services.summary.evidence_summary`."""
    from exposhift.replication.status import status_label  # pandas is loaded by now

    rows = []
    for r in summary.to_dict(orient="records"):
        kind = "ratio" if r["scale"] == "log" else "difference"
        if r["k_events"] >= 3:
            effect = (
                f"{kind} {_effect(r['estimate'], r['ci_lower'], r['ci_upper'])}), "
                f"{r['k_events']} events, "
                f"{r['k_estimates']} estimates"
            )
        elif r["k_events"] == 2:
            effect = (
                f"2 events only: {kind} "
                f"{_effect(r['estimate'], r['ci_lower'], r['ci_upper'])}, t on 1 df)"
            )
        elif r["k_events"] == 1:
            effect = f"1 event: {kind} {_effect(r['estimate'], r['ci_lower'], r['ci_upper'])})"
        else:
            effect = "no good event to pool"
        status = status_label(r["status"], bool(r.get("provisional")), bool(r.get("imprecise")))
        rows.append([r["exposure"], r["outcome"], str(r["events"]), status, effect])
    out = render(rows, ["exposure", "outcome", "events", "status", "pooled effect"])
    legend = [
        words
        for col, words in (
            (
                "provisional",
                "provisional: the expected direction was inferred from these same events",
            ),
            ("imprecise", "imprecise: the pooled interval beside the status includes no effect"),
        )
        if col in summary.columns and summary[col].astype(bool).any()
    ]
    return out + "".join(f"\n  {w}" for w in legend)
