"""The product's cautions: the words shown beside numbers that could mislead a decision.

Declared once here, outside the maths modules, so that every output (CLI, dashboard, dossier)
shows the same text and a change of wording is one edit. The computations carry the text they
are shown with (``PoolOutput.caution``, ``ReplicationReport.caution``...).
"""

from __future__ import annotations

#: beside pooled numbers and replication status labels (docs/methods.md)
POOLING = (
    "Pooled numbers and status labels support, never replace, expert judgement; hazard "
    "conclusions rest with the committee and with local regulation and licensed practice. "
    "Natural experiments remain vulnerable to bias that no rubric fully captures."
)

#: beside replication statuses: the same text as beside pooled numbers
REPLICATION = POOLING

#: beside reviewer agreement (weighted kappa)
AGREEMENT = (
    "Kappa depends on how ratings spread over the levels: read it beside the table of "
    "ratings, and compare values across domains or rubric versions with care."
)

#: beside a re-estimate from an extracted series
SERIES = (
    "a re-estimate from extracted points supports, never replaces, expert judgement, "
    "local regulation and licensed practice; digitised points carry reading error"
)

#: in a hazard dossier, beside its conclusions
HAZARD = (
    "Hazard conclusions rest with the committee, with local regulation and with "
    "licensed practice. A replication status says no more than its rule in "
    "words; a pooled estimate says no more than the estimates it pooled."
)
