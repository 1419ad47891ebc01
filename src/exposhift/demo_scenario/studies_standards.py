"""Invented studies of the corvane vehicle emission standard (family 2 of the demo scenario).

Portugal tightened the standard three times and partly suspended it once, so one place holds
several non-overlapping events with the outcome falling each time and rising after the
suspension (a reversal). All authors, journals and numbers are invented.
"""

from __future__ import annotations

from exposhift.demo_scenario.model import Est, Study

ASTHMA = "asthma emergency visits"
CARDIO = "cardiovascular admissions"
METRO = "residents of the two largest metropolitan areas, Portugal"
MAINLAND = "residents of mainland Portugal"
HUN_POP = "residents of Hungarian regions bordering Slovakia"

CORVANE_STUDIES: tuple[Study, ...] = (
    Study(
        "Duarte1999", "Duarte, Whitcombe 1999, Demo Resp Med Rep", 1999, "its",
        doi="10.5555/exposhift.demo.017", population=METRO,
        data_source="national hospital emergency records", assignment_grade=2,
        pre_points=48, post_points=36, checks=("autocorrelation", "seasonality", "placebo-date"),
        tier=2,
        firm={"counterfactual": (2, "single series, 48 monthly points before and 36 after, "
                                    "seasonality modelled; no comparison series")},
        estimates=(
            Est("CRV-PRT-1996", ASTHMA, "pct_change", 0.025, form="ci95", kind="level",
                time_window="monthly 1992-1998"),
            Est("CRV-PRT-1996", ASTHMA, "pct_change", 0.008, form="ci95", kind="slope",
                truth=-0.012, primary=False, time_window="monthly 1992-1998, per year"),
        ),
    ),
    Study(
        "DuarteMarques2007", "Duarte, Marques et al. 2007, Demo J Environ Epidemiol", 2007,
        "rd-time", doi="10.5555/exposhift.demo.018",
        comparison="days just before the standard took effect", population=METRO,
        data_source="national hospital emergency records", assignment_grade=2,
        pre_points=180, post_points=180,
        checks=("narrow-window", "bandwidth-sensitivity", "placebo-date",
                "negative-control-outcome", "autocorrelation"), tier=2,
        estimates=(
            Est("CRV-PRT-2004", ASTHMA, "pct_change", 0.022, time_window="180 days each side"),
            Est("CRV-PRT-2004", CARDIO, "pct_change", 0.015, time_window="180 days each side"),
        ),
    ),
    Study(
        "Reis2010", "Reis, Adebayo 2010, Demo Environ Health Lett", 2010, "iv",
        doi="10.5555/exposhift.demo.019",
        comparison="monitor-level corvane instrumented by the standard's phase-in",
        population="residents near 42 monitoring stations, Portugal",
        data_source="national hospital emergency records", assignment_grade=2,
        checks=("first-stage-f", "exclusion-argued", "placebo-date"), tier=2,
        estimates=(Est("CRV-PRT-2004", ASTHMA, "RR", 0.05, form="ci95", truth=0.16,
                       kind="per-unit", per_unit=10.0, time_window="2002-2007"),),
    ),
    Study(
        "Marques2015", "Marques, Lindgren et al. 2015, Demo Int J Natural Exp", 2015,
        "controlled-its", doi="10.5555/exposhift.demo.020",
        comparison="autonomous island regions outside the standard", population=MAINLAND,
        data_source="national hospital admission database", assignment_grade=3,
        pre_points=36, post_points=36,
        checks=("pre-trends", "placebo-place", "negative-control-outcome", "autocorrelation"),
        tier=3,
        estimates=(
            Est("CRV-PRT-2012", ASTHMA, "RR", 0.02, form="ci95", time_window="2012-2014"),
            Est("CRV-PRT-2012", CARDIO, "RR", 0.015, form="ci90", time_window="2012-2014"),
        ),
    ),
    Study(
        "Teixeira2022", "Teixeira, Marques 2022, Demo Int J Natural Exp", 2022,
        "controlled-its", doi="10.5555/exposhift.demo.021",
        comparison="autonomous island regions outside the standard", population=MAINLAND,
        data_source="national hospital admission database", assignment_grade=2,
        pre_points=36, post_points=24,
        checks=("pre-trends", "placebo-date", "autocorrelation", "seasonality"), tier=2,
        estimates=(
            Est("CRV-PRT-2019", ASTHMA, "RR", 0.02, form="ci95", time_window="2019-2020"),
            Est("CRV-PRT-2019", CARDIO, "RR", 0.014, form="se", time_window="2019-2020"),
            Est("CRV-PRT-2019", ASTHMA, "RR", 0.035, primary=False, offset=0.02,
                subgroup="children under 15", time_window="2019-2020"),
        ),
    ),
    Study(
        "Nagy2011", "Nagy, Okonkwo 2011, Demo Resp Med Rep", 2011, "did",
        comparison="border regions of Slovakia without the standard", population=HUN_POP,
        data_source="hospital discharge register", assignment_grade=2,
        pre_points=4, post_points=3, checks=("pre-trends",), tier=2,
        estimates=(Est("CRV-HUN-2008", ASTHMA, "IRR", 0.03, time_window="2008-2010"),),
    ),
    Study(
        # same event, population and data source as Nagy2011: counted once when pooling
        "NagyFarkas2014", "Nagy, Farkas et al. 2014, Demo Public Health Notes", 2014, "its",
        population=HUN_POP, data_source="hospital discharge register", assignment_grade=2,
        pre_points=60, post_points=48, checks=("autocorrelation", "seasonality"), tier=2,
        firm={"counterfactual": (2, "single series, 60 monthly points before and 48 after")},
        estimates=(Est("CRV-HUN-2008", ASTHMA, "IRR", 0.025, form="ci95",
                       time_window="monthly 2003-2011"),),
    ),
    Study(
        "Novak2013", "Novak, Brennan-Hale 2013, Demo J Environ Epidemiol", 2013,
        "synthetic-control", doi="10.5555/exposhift.demo.024",
        comparison="synthetic Czechia from 10 European donor countries",
        population="residents of Czechia", data_source="national hospital statistics",
        assignment_grade=2, pre_points=10, post_points=3,
        checks=("pre-period-fit", "in-space-placebo", "leave-one-out"), tier=2,
        estimates=(Est("CRV-CZE-2010", ASTHMA, "RR", 0.03, form="ci+se",
                       time_window="2010-2012"),),
    ),
    Study(
        "Kowalczyk2017", "Kowalczyk, Amadi 2017, Demo Environ Health Lett", 2017, "rd",
        doi="10.5555/exposhift.demo.025",
        comparison="municipalities just below the 100 000-inhabitant threshold",
        population="residents of municipalities of 60 000-140 000 inhabitants, Poland",
        data_source="national health fund claims", assignment_grade=3,
        checks=("density-test", "covariate-continuity", "bandwidth-sensitivity"), tier=2,
        appraised=1,
        estimates=(
            Est("CRV-POL-2014", ASTHMA, "RR", 0.035, form="ci95", time_window="2014-2016"),
            Est("CRV-POL-2014", ASTHMA, "RR", 0.05, form="ci95", primary=False, offset=-0.03,
                subgroup="children under 15", time_window="2014-2016"),
        ),
    ),
    Study(
        "Santos2009", "Santos, Pereira 2009, Demo Public Health Notes", 2009, "before-after",
        population="residents of Portugal", data_source="national mortality statistics",
        assignment_grade=1, pre_points=1, post_points=1, checks=(), tier=1, bias=-0.03,
        firm={"counterfactual": (0, "one year before and one after, no comparison: fewer than "
                                    "3 points on a side")},
        estimates=(Est("CRV-PRT-2004", "all-cause mortality", "RR", 0.01, form="ci95",
                       time_window="2003 vs 2005"),),
    ),
)
