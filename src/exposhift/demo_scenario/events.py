"""Events of the invented demo scenario, their outcomes, and the true effects behind the numbers.

Five invented agents, each a family of exposure changes:

- **dravonil**, an invented farm insecticide, banned country by country (1988-2015; two later
  bans registered but never evaluated). Outcome: preterm birth. True log risk ratio of a ban
  = -0.06 x (drop in the maternal urinary metabolite, ug/g creatinine) + a country effect
  (SD 0.04): about -0.15 on average, between-country SD about 0.06.
- **corvane**, an invented traffic pollutant, whose vehicle emission standard Portugal
  tightened three times (1996, 2004, 2012) and partly suspended in 2019 (a reversal); Hungary,
  Czechia and Poland tightened it once each. Outcomes: asthma emergency visits, cardiovascular
  admissions (Portugal only), all-cause mortality (one weak study).
- **vellium**, an invented metal emitted by vellium smelters: closures in five countries, one
  opening (an increase), strike shutdowns in one town. Outcomes: child respiratory admissions,
  birth weight, wheeze.
- **trelomene**, an invented dry-cleaning solvent, restricted in three countries and evaluated
  only by weak designs.
- **quorinate**, an invented gas released once in an industrial accident (one event).
"""

from __future__ import annotations

from exposhift.demo_scenario.model import Event, keyed_rng

#: outcome -> outcome group
OUTCOMES: dict[str, str] = {
    "preterm birth": "birth outcomes",
    "low birth weight": "birth outcomes",
    "mean birth weight": "birth outcomes",
    "childhood acute leukaemia": "cancer",
    "neurodevelopmental score at age 2": "neurodevelopment",
    "asthma emergency visits": "respiratory",
    "child respiratory admissions": "respiratory",
    "wheeze prevalence": "respiratory",
    "persistent respiratory symptoms": "respiratory",
    "cardiovascular admissions": "cardiovascular",
    "all-cause mortality": "mortality",
    "elevated liver enzymes": "hepatic",
    "chronic kidney disease": "renal",
    "anxiety medication prescriptions": "mental health",
}

_DRV = dict(
    exposure="dravonil",
    change_kind="ban",
    change_direction="decrease",
    change_unit="ug/g creatinine (maternal urinary metabolite)",
    family="dravonil-ban",
)
_CRV = dict(
    exposure="corvane", change_unit="ug/m3 (annual mean)", family="corvane-vehicle-standard"
)
_VEL = dict(exposure="vellium", change_unit="ng/m3 (annual mean, particle-bound)")
_TRL = dict(
    exposure="trelomene",
    change_kind="restriction",
    change_direction="decrease",
    change_unit="mg/m3 (air near dry-cleaning machines)",
)


def _events(*events: Event) -> dict[str, Event]:
    return {e.event_id: e for e in events}


#: events analysed by at least one demo study
EVENTS: dict[str, Event] = _events(
    # dravonil bans: >= 6 countries over > 25 years
    Event("DRV-SWE-1988", country="SWE", change_date="1988-07", change_size=2.9, **_DRV),
    Event("DRV-DNK-1991", country="DNK", change_date="1991", change_size=2.4, **_DRV),
    Event("DRV-NLD-1994", country="NLD", change_date="1994-01", change_size=3.3, **_DRV),
    Event("DRV-FIN-1997", country="FIN", change_date="1997", change_size=1.6, **_DRV),
    Event("DRV-NZL-2001", country="NZL", change_date="2001-03", change_size=2.1, **_DRV),
    Event(
        "DRV-AUS-2003",
        country="AUS",
        change_date="2003",
        change_size=2.6,
        area="states, staggered 2003-2006",
        **_DRV,
    ),
    Event("DRV-CHL-2008", country="CHL", change_date="2008-09", change_size=3.6, **_DRV),
    Event("DRV-KOR-2011", country="KOR", change_date="2011-01", change_size=1.9, **_DRV),
    Event("DRV-URY-2015", country="URY", change_date="2015-06", change_size=2.8, **_DRV),
    # corvane vehicle standard: tightened three times in one country, then partly suspended
    Event(
        "CRV-PRT-1996",
        change_kind="standard",
        change_direction="decrease",
        country="PRT",
        change_date="1996-01",
        change_size=6.0,
        **_CRV,
    ),
    Event(
        "CRV-PRT-2004",
        change_kind="standard",
        change_direction="decrease",
        country="PRT",
        change_date="2004-07",
        change_size=4.5,
        **_CRV,
    ),
    Event(
        "CRV-PRT-2012",
        change_kind="standard",
        change_direction="decrease",
        country="PRT",
        change_date="2012-01",
        change_size=3.0,
        **_CRV,
    ),
    Event(
        "CRV-PRT-2019",
        change_kind="policy-removal",
        change_direction="increase",
        country="PRT",
        change_date="2019-03",
        change_size=2.0,
        **_CRV,
    ),
    Event(
        "CRV-HUN-2008",
        change_kind="standard",
        change_direction="decrease",
        country="HUN",
        change_date="2008-01",
        change_size=5.0,
        **_CRV,
    ),
    Event(
        "CRV-CZE-2010",
        change_kind="standard",
        change_direction="decrease",
        country="CZE",
        change_date="2010-09",
        change_size=4.0,
        **_CRV,
    ),
    Event(
        "CRV-POL-2014",
        change_kind="standard",
        change_direction="decrease",
        country="POL",
        change_date="2014-01",
        change_size=3.5,
        area="municipalities of 100 000 inhabitants or more",
        **_CRV,
    ),
    # vellium smelters: closures, one opening, strike shutdowns (a separate family)
    Event(
        "VEL-ZAF-1998",
        change_kind="closure",
        change_direction="decrease",
        country="ZAF",
        change_date="1998-05",
        change_size=38.0,
        area="smelter district",
        family="vellium-smelter",
        **_VEL,
    ),
    Event(
        "VEL-PER-2002",
        change_kind="closure",
        change_direction="decrease",
        country="PER",
        change_date="2002-11",
        change_size=55.0,
        area="smelter valley",
        family="vellium-smelter",
        **_VEL,
    ),
    Event(
        "VEL-MEX-2006",
        change_kind="closure",
        change_direction="decrease",
        country="MEX",
        change_date="2006-03",
        change_size=41.0,
        area="smelter municipality",
        family="vellium-smelter",
        **_VEL,
    ),
    Event(
        "VEL-AUS-2009",
        change_kind="closure",
        change_direction="decrease",
        country="AUS",
        change_date="2009-08",
        change_size=22.0,
        area="smelter town",
        family="vellium-smelter",
        **_VEL,
    ),
    Event(
        "VEL-CAN-2013",
        change_kind="closure",
        change_direction="decrease",
        country="CAN",
        change_date="2013-06",
        change_size=17.0,
        area="smelter town",
        family="vellium-smelter",
        **_VEL,
    ),
    Event(
        "VEL-IND-2011",
        change_kind="opening",
        change_direction="increase",
        country="IND",
        change_date="2011-10",
        change_size=30.0,
        area="districts downwind of a new smelter",
        family="vellium-smelter",
        **_VEL,
    ),
    Event(
        "VEL-NAM-2005",
        change_kind="temporary",
        change_direction="decrease",
        country="NAM",
        change_date="2005",
        change_size=25.0,
        area="smelter town (strike shutdowns)",
        family="vellium-strike-shutdown",
        **_VEL,
    ),
    # trelomene restrictions: weak evidence only
    Event("TRL-DEU-1993", country="DEU", change_date="1993", change_size=0.8, **_TRL),
    Event("TRL-IRL-1997", country="IRL", change_date="1997-09", **_TRL),
    Event("TRL-AUT-1999", country="AUT", change_date="1999", change_size=0.6, **_TRL),
    # quorinate: one accidental release
    Event(
        "QRN-ITA-2006",
        exposure="quorinate",
        change_kind="accident",
        change_direction="increase",
        country="ITA",
        change_date="2006-06-14",
        area="industrial town and surroundings",
    ),
)

#: registered events that no demo study evaluated (opportunities for researchers)
REGISTERED: dict[str, Event] = _events(
    Event("DRV-PRY-2019", country="PRY", change_date="2019-11", **_DRV),
    Event("DRV-LKA-2020", country="LKA", change_date="2020-01", change_size=2.2, **_DRV),
    Event(
        "CRV-GRC-2017",
        change_kind="standard",
        change_direction="decrease",
        country="GRC",
        change_date="2017-01",
        change_size=3.0,
        **_CRV,
    ),
    Event(
        "CRV-PRT-2023",
        change_kind="standard",
        change_direction="decrease",
        country="PRT",
        change_date="2023-01",
        change_size=2.0,
        **_CRV,
    ),
    Event(
        "VEL-ZMB-2017",
        change_kind="closure",
        change_direction="decrease",
        country="ZMB",
        change_date="2017-04",
        change_size=46.0,
        area="smelter town",
        family="vellium-smelter",
        **_VEL,
    ),
)


def _true_effects() -> dict[tuple[str, str], float]:
    """True effects on the analysis scale, by (event, outcome).

    Dravonil and vellium effects depend on the size of the exposure change (so that a
    dose-response analysis has something to find) plus a country effect drawn once per event.
    """
    out: dict[tuple[str, str], float] = {}
    for e in EVENTS.values():
        if e.exposure == "dravonil":
            u = keyed_rng("truth", e.event_id).normal(0.0, 0.04)
            preterm = -0.06 * (e.change_size or 0.0) + u
            out[(e.event_id, "preterm birth")] = preterm
            out[(e.event_id, "low birth weight")] = 0.7 * preterm
        elif e.exposure == "vellium":
            sign = -1.0 if e.change_direction == "decrease" else 1.0
            size = e.change_size or 0.0
            u = keyed_rng("truth", e.event_id).normal(0.0, 0.03)
            out[(e.event_id, "child respiratory admissions")] = sign * 0.004 * size + u
            # birth weight in grams rises when exposure falls
            out[(e.event_id, "mean birth weight")] = -sign * 0.8 * size
    # corvane: log scale, Portugal's effects shrink as the standard tightens further
    out.update(
        {
            ("CRV-PRT-1996", "asthma emergency visits"): -0.085,
            ("CRV-PRT-2004", "asthma emergency visits"): -0.070,
            ("CRV-PRT-2012", "asthma emergency visits"): -0.055,
            ("CRV-PRT-2019", "asthma emergency visits"): 0.050,
            ("CRV-HUN-2008", "asthma emergency visits"): -0.070,
            ("CRV-CZE-2010", "asthma emergency visits"): -0.060,
            ("CRV-POL-2014", "asthma emergency visits"): -0.050,
            ("CRV-PRT-2004", "cardiovascular admissions"): -0.040,
            ("CRV-PRT-2012", "cardiovascular admissions"): -0.035,
            ("CRV-PRT-2019", "cardiovascular admissions"): 0.030,
            ("CRV-PRT-2004", "all-cause mortality"): -0.010,
        }
    )
    return out


TRUE_EFFECTS: dict[tuple[str, str], float] = _true_effects()
