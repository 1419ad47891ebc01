"""The certainty scale, the domains and the ratings a committee may give (our own names).

The structure follows the domains of the GRADE approach as published (Guyatt et al. 2011,
J Clin Epidemiol 64:383, and the series that follows it; for exposure questions in
environmental health, Morgan et al. 2016, Environ Int 92-93:611), adapted to natural
experiments: the body of evidence for one exposure × outcome starts at a level the committee
sets (:mod:`exposhift.certainty.settings`), is rated down for concerns and up for strengths, and
ends at one of four levels. The names of the levels, domains and ratings are exposhift's.
"""

from __future__ import annotations

#: certainty levels, highest first (index 0 = highest)
LEVELS: tuple[str, ...] = ("firm", "fair", "limited", "very limited")
LEVEL_MEANING: dict[str, str] = {
    "firm": "further evidence is very unlikely to change what the committee concludes",
    "fair": "further evidence may change the size of the effect, unlikely its direction",
    "limited": "further evidence is likely to change the size and may change the direction",
    "very limited": "any conclusion about the effect is very uncertain",
}

#: domains that can lower the level: key -> what it asks
DOWN_DOMAINS: dict[str, str] = {
    "bias": "risk of bias: do the studies carrying the weight have weak or fatal appraisals?",
    "inconsistency": "do the events disagree beyond chance (τ², prediction interval, status)?",
    "imprecision": "is the confidence interval wide against the committee's decision threshold?",
    "indirectness": "do the exposure contrast, population or estimand differ from the question?",
    "small-study": "do small events show larger effects (Egger, with 10+ events)?",
}
#: domains that can raise the level: key -> what it asks
UP_DOMAINS: dict[str, str] = {
    "large-effect": "is the pooled effect large (thresholds stated in the settings)?",
    "dose-response": "does the effect grow with the size of the exposure change?",
    "reversal": "did the outcome move back when the exposure was restored?",
    "replication": "was the effect found again in another place or a later period?",
    "triangulation": "do design families whose main biases differ agree?",
}
#: the domain of the final certainty level (rating: a level of :data:`LEVELS`)
FINAL = "certainty"
DOMAINS: tuple[str, ...] = (*DOWN_DOMAINS, *UP_DOMAINS, FINAL)

#: ratings of a rate-down domain -> steps (not-assessable: no step, but no reassurance either)
DOWN_RATINGS: dict[str, int] = {"none": 0, "down-one": -1, "down-two": -2, "not-assessable": 0}
#: ratings of a rate-up domain -> steps
UP_RATINGS: dict[str, int] = {"none": 0, "up-one": 1, "up-two": 2, "not-assessable": 0}


def ratings_for(domain: str) -> tuple[str, ...]:
    """The ratings a domain accepts (the level names for :data:`FINAL`)."""
    if domain in DOWN_DOMAINS:
        return tuple(DOWN_RATINGS)
    if domain in UP_DOMAINS:
        return tuple(UP_RATINGS)
    if domain == FINAL:
        return LEVELS
    return ()


def steps(domain: str, rating: str) -> int:
    """Steps a rating moves the level (negative: down)."""
    if domain in DOWN_DOMAINS:
        return DOWN_RATINGS[rating]
    if domain in UP_DOMAINS:
        return UP_RATINGS[rating]
    return 0


def move(start: str, total_steps: int) -> str:
    """The level ``total_steps`` away from ``start`` (positive: up), kept on the scale."""
    i = LEVELS.index(start) - int(total_steps)
    return LEVELS[min(max(i, 0), len(LEVELS) - 1)]
