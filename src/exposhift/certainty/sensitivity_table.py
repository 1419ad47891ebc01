"""The sensitivity table of one cell's main pooled result: what moves the number, and by how much.

Every row re-pools the main group's own harmonised independent units with the event-level
engine (:func:`exposhift.synthesis.event_pooling.pool_event_level`) or leaves one event out
(:func:`exposhift.synthesis.sensitivity.leave_one_out`); nothing is computed another way. Rows:

* good evidence only (overall consensus level ≥ 2; unappraised studies left out);
* leave one event out (one row per event);
* by design family (one row per family; the across-family number is the main result);
* fixed effect (inverse variance, Wald CI) against the random-effects main result;
* τ² by REML, Paule-Mandel and DerSimonian-Laird;
* without odds ratios converted to risk ratios (Zhang & Yu 1998; provenance flag
  ``or_converted``).

``change`` is the ratio of the row's pooled ratio to the main one (ratio measures) or the
difference of the two (differences).
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np
import pandas as pd

from exposhift.errors import AnalysisError
from exposhift.synthesis.conversions import from_analysis_scale
from exposhift.synthesis.event_pooling import pool_event_level
from exposhift.synthesis.independence import pooling_keys
from exposhift.synthesis.sensitivity import leave_one_out

GOOD_LEVEL = 2
FIELDS = ("analysis", "k_events", "estimate", "ci_lower", "ci_upper", "change", "note")


def _nat(scale: str, x: Any) -> float | None:
    if x is None or (isinstance(x, float) and math.isnan(x)):
        return None
    return float(from_analysis_scale(scale, float(x)))


def _row(label: str, rec: dict[str, Any] | None, main_y: float, scale: str, note: str = ""):
    if rec is None:
        return {
            "analysis": label,
            "k_events": 0,
            "estimate": None,
            "ci_lower": None,
            "ci_upper": None,
            "change": None,
            "note": note or "nothing left to pool",
        }
    y = float(rec["estimate"])
    change = math.exp(y - main_y) if scale == "log" else y - main_y
    return {
        "analysis": label,
        "k_events": int(rec.get("k_events", rec.get("k", 0)) or 0),
        "estimate": _nat(scale, y),
        "ci_lower": _nat(scale, rec.get("ci_lower")),
        "ci_upper": _nat(scale, rec.get("ci_upper")),
        "change": change,
        "note": note,
    }


def _pool(units: pd.DataFrame, options: dict[str, Any], **over: Any) -> dict[str, Any] | None:
    if units.empty:
        return None
    kw = {
        "method": options["method"],
        "ci": options["ci"],
        "alpha": options["alpha"],
        "hksj_floor": options["hksj_floor"],
        "within_event": options["within_event"],
        "rho": options["rho"] if options.get("rho") is not None else 0.8,
    }
    kw.update(over)
    keys = pooling_keys()
    units = units.copy()
    for k in keys:
        units[k] = units[k].astype(object).where(units[k].notna(), "")
    res = pool_event_level(units, keys, **kw)
    if res.table.empty:
        return None
    return res.table.iloc[0].to_dict()


def sensitivity_rows(
    group: dict[str, Any], units: pd.DataFrame, events: pd.DataFrame, options: dict[str, Any]
) -> list[dict[str, Any]]:
    """The table for one pooled ``group`` (as ``pool_evidence`` returns it); ``units``: the
    pool's harmonised unit rows; ``events``: the group's pooled rows (``event_id``, ``y``,
    ``v``); ``options``: the pool's options."""
    scale = str(group["scale"])
    mine = units[units["estimate_uid"].isin(group["estimates"])]
    main_y = float(group["estimate"])
    rows = [
        _row(
            f"main result ({options['method']}, {options['ci']})",
            {**group, "estimate": main_y},
            main_y,
            scale,
            "the pooled result of the pool command for this cell",
        )
    ]
    lv = mine["level"]
    good = mine[lv.notna() & (lv >= GOOD_LEVEL)]
    rows.append(
        _row(
            f"good evidence only (level ≥ {GOOD_LEVEL})",
            _pool(good, options),
            main_y,
            scale,
            f"{mine['study_id'].nunique() - good['study_id'].nunique()} of "
            f"{mine['study_id'].nunique()} studies left out",
        )
    )
    y, v = events["y"].to_numpy(float), events["v"].to_numpy(float)
    if y.size >= 2:
        try:
            loo = leave_one_out(
                y,
                v,
                labels=events["event_id"].astype(str).to_numpy(),
                method=options["method"],
                ci=options["ci"],
                alpha=options["alpha"],
                hksj_floor=options["hksj_floor"],
            )
        except AnalysisError as exc:
            rows.append(_row("leave one event out", None, main_y, scale, str(exc)))
        else:
            for r in loo.to_dict("records"):
                r["k_events"] = y.size - 1
                rows.append(_row(f"without event {r['omitted']}", r, main_y, scale))
    else:
        rows.append(_row("leave one event out", None, main_y, scale, "a single event"))
    for fam, part in sorted(mine.groupby("design_family", dropna=False), key=lambda t: str(t[0])):
        rows.append(_row(f"design family {fam}", _pool(part, options), main_y, scale))
    rows.append(
        _row(
            "fixed effect (inverse variance, Wald CI)",
            _pool(mine, options, method="fe", ci="wald"),
            main_y,
            scale,
        )
    )
    for m, name in (("reml", "REML"), ("pm", "Paule-Mandel"), ("dl", "DerSimonian-Laird")):
        rows.append(_row(f"τ² by {name}", _pool(mine, options, method=m), main_y, scale))
    conv = mine["or_converted"].to_numpy(bool) if "or_converted" in mine else np.zeros(len(mine))
    rows.append(
        _row(
            "without odds ratios converted to risk ratios",
            _pool(mine[~conv], options),
            main_y,
            scale,
            f"{int(conv.sum())} converted estimate(s) left out"
            if conv.any()
            else "no converted odds ratio: same as the main result",
        )
    )
    return rows
