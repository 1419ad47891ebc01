"""Certainty judgements the invented demo committee recorded (INVENTED, flagged demo).

Two exposures, chosen because their own numbers support the ratings (``exposhift certainty``
on the demo shows the suggestions these confirm or override):

* dravonil x preterm birth — rated **down** for inconsistency (τ² with a Q-profile interval
  above 0, prediction interval 0.997 to 1.36 crossing no effect while the CI does not) and for
  imprecision (the CI reaches below the decision threshold 1.1); its dose-response gradient,
  replication in place and triangulation are confirmed, and the committee overrides the final
  level one step down, with its reason;
* corvane x asthma emergency visits — rated **up** for the Portuguese reversal (2012
  tightening, 2019 partial suspension: the outcome moved back), for replication and for
  triangulation; the dose-response is confirmed as not shown (its slope's CI includes 0: no
  demo cell has both a counting reversal and a gradient).

The sheet has the columns of :data:`exposhift.certainty.judgement.FIELDS`.
"""

from __future__ import annotations

import pandas as pd

from exposhift.certainty.judgement import FIELDS

DECIDED_BY = "demo committee (invented)"
DECIDED_AT = "2026-02-10T00:00:00Z"
_D = "DEMO, invented: "

#: (exposure, outcome, domain, rating, why)
JUDGEMENTS: tuple[tuple[str, str, str, str, str], ...] = (
    ("dravonil", "preterm birth", "bias", "none", _D + "most of the weight is adequate or strong"),
    (
        "dravonil",
        "preterm birth",
        "inconsistency",
        "down-one",
        _D + "the events differ beyond chance; the prediction interval reaches no effect",
    ),
    (
        "dravonil",
        "preterm birth",
        "imprecision",
        "down-one",
        _D + "the confidence interval reaches below the committee's decision threshold of 1.1",
    ),
    (
        "dravonil",
        "preterm birth",
        "dose-response",
        "up-one",
        _D + "larger cuts in exposure came with larger falls in preterm birth",
    ),
    (
        "dravonil",
        "preterm birth",
        "replication",
        "up-one",
        _D + "found again in several countries",
    ),
    (
        "dravonil",
        "preterm birth",
        "triangulation",
        "up-one",
        _D + "two design families agree",
    ),
    (
        "dravonil",
        "preterm birth",
        "certainty",
        "limited",
        _D + "replication and triangulation rest largely on the same synthetic-control events, "
        "so the committee counts one step up in all, not two; with two steps down the evidence "
        "is limited",
    ),
    (
        "corvane",
        "asthma emergency visits",
        "reversal",
        "up-one",
        _D + "visits fell after the 2012 tightening and rose after the 2019 suspension",
    ),
    (
        "corvane",
        "asthma emergency visits",
        "dose-response",
        "none",
        _D + "no gradient with the size of the change",
    ),
    (
        "corvane",
        "asthma emergency visits",
        "replication",
        "up-one",
        _D + "found in three countries and four periods",
    ),
    (
        "corvane",
        "asthma emergency visits",
        "triangulation",
        "up-one",
        _D + "trend and comparison-group designs agree",
    ),
    (
        "corvane",
        "asthma emergency visits",
        "certainty",
        "firm",
        _D + "the ratings add up to firm",
    ),
)


def judgements_frame() -> pd.DataFrame:
    """The demo's judgements sheet (columns :data:`exposhift.certainty.judgement.FIELDS`)."""
    rows = [dict(zip(FIELDS, (*j, DECIDED_BY, DECIDED_AT), strict=True)) for j in JUDGEMENTS]
    return pd.DataFrame(rows, columns=list(FIELDS))
