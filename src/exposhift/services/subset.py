"""A part of the evidence base for export: the records of one exposure (and one outcome), and
the consensus appraisal levels as extra sheet columns.

A subset is self-contained: every estimate kept brings its study, event and outcome; the
appraisals and ratings of the studies kept come along, so a filtered archive imports cleanly
into another evidence base. Pure: frames in, frames out.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import replace

import pandas as pd

from exposhift.io.frames import EvidenceFrames
from exposhift.services.lookup import resolve_name

#: prefix of the appraisal columns added to a sheet export
LEVEL_PREFIX = "consensus_"


def subset_frames(
    frames: EvidenceFrames, exposure: str | None = None, outcome: str | None = None
) -> EvidenceFrames:
    """The records of ``exposure`` (and ``outcome``); names are matched case-insensitively.

    Without ``outcome`` every event of the exposure is kept, evaluated or not; with it, only
    the events that carry an estimate of that outcome.
    """
    if exposure is None and outcome is None:
        return frames
    events, est = frames.events, frames.estimates
    if exposure is not None:
        exposure = resolve_name(sorted(frames.exposures["name"]), "exposure", exposure)
        events = events[events["exposure"] == exposure]
        est = est[est["event"].isin(set(events["key"]))]
    if outcome is not None:
        outcome = resolve_name(sorted(frames.outcomes["name"]), "outcome", outcome)
        est = est[est["outcome"] == outcome]
        events = events[events["key"].isin(set(est["event"]))]
    studies = frames.studies[frames.studies["key"].isin(set(est["study"]))]
    keep = set(studies["key"])
    exposures = frames.exposures[frames.exposures["name"].isin(set(events["exposure"]))]
    series = frames.series
    if series is not None and len(series):  # the series of the studies and events kept
        from exposhift.io.series_sheet import SeriesFrames

        keep_s = series.series["study"].isin(keep) & series.series["event"].isin(set(events["key"]))
        if outcome is not None:
            keep_s &= series.series["outcome"] == outcome
        kept = set(series.series.loc[keep_s, "key"])
        series = SeriesFrames(
            series=series.series[keep_s],
            points=series.points[series.points["series"].isin(kept)],
            fits=series.fits[
                series.fits["series"].isin(kept) & series.fits["estimate"].isin(set(est["key"]))
            ],
        )
    # the outcomes of the estimates kept, and of the series kept (a series may follow an
    # outcome its study reports no estimate of): an import of the part then finds them all
    named = set(est["outcome"])
    if series is not None and len(series):
        named |= set(series.series["outcome"])
    outcomes = frames.outcomes[frames.outcomes["name"].isin(named)]
    directions = frames.directions
    if directions is not None:  # the committee's directions of the pairs kept come along
        directions = directions[
            directions["exposure"].isin(set(exposures["name"]))
            & directions["outcome"].isin(set(outcomes["name"]))
        ]
    certainty = frames.certainty
    if certainty is not None:  # the committee's judgements of the pairs kept come along
        names = set(exposures["name"]), set(outcomes["name"])
        certainty = [r for r in certainty if r["exposure"] in names[0] and r["outcome"] in names[1]]
    return replace(
        frames,
        directions=directions,
        certainty=certainty,
        series=series,
        exposures=exposures,
        outcomes=outcomes,
        events=events,
        studies=studies,
        estimates=est,
        appraisals=frames.appraisals[frames.appraisals["study"].isin(keep)],
        ratings=frames.ratings[frames.ratings["study"].isin(keep)],
    )


def with_consensus_levels(
    sheet: pd.DataFrame, frames: EvidenceFrames, domains: Sequence[str]
) -> pd.DataFrame:
    """``sheet`` (one row per estimate) plus the consensus appraisal of each row's study:
    ``consensus_overall`` and ``consensus_<domain>`` per rubric domain (blank: no consensus).

    Only the consensus (appraisal of record) is exported; independent ratings stay in the
    evidence base, as blinding requires until both are in.
    """
    cons = frames.appraisals[frames.appraisals["stage"] == "consensus"]
    overall = dict(zip(cons["study"], cons["overall"], strict=True))
    ratings = frames.ratings[frames.ratings["stage"] == "consensus"]
    wide = ratings.pivot_table(index="study", columns="domain", values="level", aggfunc="first")
    out = sheet.copy()
    out[f"{LEVEL_PREFIX}overall"] = _text(out["study_id"].map(overall))
    for d in domains:
        col = wide[d] if d in wide.columns else pd.Series(dtype="float64")
        out[f"{LEVEL_PREFIX}{d}"] = _text(out["study_id"].map(col))
    return out


def _text(s: pd.Series) -> pd.Series:
    return s.map(lambda v: "" if v is None or pd.isna(v) else str(int(v))).astype("str")
