"""Invented studies of vellium smelters, trelomene restrictions and the quorinate accident
(families 3-5 of the demo scenario). All authors, journals and numbers are invented.
"""

from __future__ import annotations

from exposhift.demo_scenario.model import Est, Study

RESP = "child respiratory admissions"
BW = "mean birth weight"
LIVER = "elevated liver enzymes"
QRN_POP = "residents within 5 km of the release"
MEX_POP = "children under 5 in municipalities within 30 km of the smelter"

VELLIUM_STUDIES: tuple[Study, ...] = (
    Study(
        "Mokoena2003", "Mokoena, Visser 2003, Demo Environ Health Lett", 2003, "exposed-cohort",
        doi="10.5555/exposhift.demo.027",
        comparison="children in a matched district without a smelter",
        population="children under 5 in the smelter district and a comparison district",
        data_source="provincial hospital admission records", assignment_grade=2,
        pre_points=3, post_points=3, checks=("balance", "negative-control-outcome"), tier=2,
        estimates=(
            Est("VEL-ZAF-1998", RESP, "HR", 0.07, form="ci95", time_window="1998-2001"),
            Est("VEL-ZAF-1998", BW, "MD", 14.0, form="ci95", primary=False,
                time_window="births 1998-2001"),
        ),
    ),
    Study(
        "Quispe2006", "Quispe, Laurent 2006, Demo Resp Med Rep", 2006, "did",
        comparison="two valleys without smelting",
        population="children under 5, smelter valley and comparison valleys",
        data_source="regional health directorate admissions", assignment_grade=2,
        pre_points=4, post_points=3, checks=("pre-trends", "placebo-place"), tier=2,
        estimates=(Est("VEL-PER-2002", RESP, "IRR", 0.08, time_window="2003-2005"),),
    ),
    Study(
        "QuispeHuaman2008", "Quispe, Huaman et al. 2008, Demo Int J Natural Exp", 2008,
        "rd-geo", doi="10.5555/exposhift.demo.029",
        comparison="households just outside the designated exposure zone",
        population="children living within 3 km of the exposure-zone boundary",
        data_source="household health survey", assignment_grade=2,
        checks=("density-test", "covariate-continuity", "bandwidth-sensitivity"), tier=2,
        estimates=(Est("VEL-PER-2002", "wheeze prevalence", "RD", 0.012, form="ci95",
                       truth=-0.035, time_window="survey 2006"),),
    ),
    Study(
        "Hernandez2010", "Hernandez, Kaur et al. 2010, Demo J Environ Epidemiol", 2010, "did",
        doi="10.5555/exposhift.demo.030",
        comparison="municipalities 30-80 km from the smelter", population=MEX_POP,
        data_source="national hospital discharge database", assignment_grade=3,
        pre_points=5, post_points=4,
        checks=("pre-trends", "negative-control-outcome", "clustered-se"), tier=3,
        estimates=(
            Est("VEL-MEX-2006", RESP, "RR", 0.06, time_window="2006-2009"),
            Est("VEL-MEX-2006", BW, "MD", 12.0, form="se", primary=False,
                time_window="births 2006-2009"),
        ),
    ),
    Study(
        # same event, population and data source as Hernandez2010, but a per-unit estimate
        "HernandezRios2012", "Hernandez, Rios 2012, Demo Environ Health Lett", 2012, "iv",
        comparison="particle-bound vellium instrumented by the closure date",
        population=MEX_POP, data_source="national hospital discharge database",
        assignment_grade=2, checks=("first-stage-f", "balance", "placebo-date"), tier=2,
        estimates=(Est("VEL-MEX-2006", RESP, "RR", 0.015, form="ci95", truth=0.04,
                       kind="per-unit", per_unit=10.0, time_window="2004-2009"),),
    ),
    Study(
        "Carrick2013", "Carrick, Yilmaz 2013, Demo Resp Med Rep", 2013, "synthetic-control",
        doi="10.5555/exposhift.demo.032", comparison="synthetic town from 23 donor towns",
        population="children under 15 in the smelter town",
        data_source="state hospital admitted-patient data", assignment_grade=2,
        pre_points=12, post_points=4, checks=("pre-period-fit", "in-space-placebo"), tier=2,
        estimates=(
            Est("VEL-AUS-2009", RESP, "IRR", 0.09, form="ci90", time_window="2010-2013"),
            Est("VEL-AUS-2009", RESP, "IRR", 0.11, form="ci90", primary=False, offset=0.03,
                time_window="first year after closure"),
        ),
    ),
    Study(
        "Tremblay2017", "Tremblay, Osei-Bonsu et al. 2017, Demo J Environ Epidemiol", 2017, "did",
        doi="10.5555/exposhift.demo.033", comparison="similar towns in the same province",
        population="children under 10, smelter town and comparison towns",
        data_source="provincial health insurance claims", assignment_grade=3,
        pre_points=5, post_points=3,
        checks=("pre-trends", "placebo-date", "negative-control-exposure",
                "pre-trend-sensitivity"), tier=3,
        estimates=(
            Est("VEL-CAN-2013", RESP, "RR", 0.07, form="ci95",
                time_window="3 years after closure"),
            Est("VEL-CAN-2013", RESP, "RR", 0.1, form="ci95", primary=False, offset=-0.02,
                subgroup="age 0-4", time_window="3 years after closure"),
        ),
    ),
    Study(
        "Iyer2015", "Iyer, Mensah 2015, Demo Public Health Notes", 2015, "did",
        comparison="districts upwind of the new smelter",
        population="children under 5 in districts downwind of the smelter",
        data_source="district hospital records", assignment_grade=1,
        pre_points=3, post_points=3, checks=("pre-trends",), tier=2, appraised=0,
        estimates=(Est("VEL-IND-2011", RESP, "IRR", 0.06, form="ci95",
                       time_window="2011-2014"),),
    ),
    Study(
        "Naidoo2008", "Naidoo, Shikongo 2008, Demo Environ Health Lett", 2008, "as-if-random",
        doi="10.5555/exposhift.demo.035",
        comparison="weeks with the smelter operating (strike dates set by wage talks)",
        population="children under 5 in the smelter town",
        data_source="town hospital admission log", assignment_grade=3,
        checks=("balance", "placebo-date"), tier=2,
        estimates=(Est("VEL-NAM-2005", RESP, "RR", 0.05, form="ci95",
                       time_window="days 0-6 after shutdown start"),),
    ),
    Study(
        "Dlamini2009", "Dlamini, Mokoena 2009, Demo Paediatr Perinat Rep", 2009,
        "exposed-cohort", comparison="births in a matched district without a smelter",
        population="births in the smelter district and a comparison district",
        data_source="provincial birth notifications", assignment_grade=2,
        checks=("balance",), tier=2,
        firm={"outcome_data": (0, "birth weight recorded with different scales and rounding in "
                                  "the two districts, not harmonised")},
        estimates=(
            Est("VEL-ZAF-1998", BW, "MD", 18.0, form="ci95", time_window="births 1996-2002"),
            Est("VEL-ZAF-1998", "low birth weight", "OR", 0.12, form="ci95", truth=-0.12,
                primary=False, baseline_risk=0.12, time_window="births 1996-2002"),
        ),
    ),
)

TRELOMENE_STUDIES: tuple[Study, ...] = (
    Study(
        "Albrecht1998", "Albrecht, Nwosu 1998, Demo Occup Environ Rev", 1998, "before-after",
        population="dry-cleaning workers, Germany", data_source="occupational health examinations",
        assignment_grade=1, pre_points=1, post_points=1, tier=1, bias=-0.15,
        firm={"counterfactual": (0, "one examination round before and one after, no "
                                    "comparison: fewer than 3 points on a side")},
        estimates=(Est("TRL-DEU-1993", LIVER, "OR", 0.2, form="p", truth=-0.3,
                       time_window="1992 vs 1995"),),
    ),
    Study(
        "Brennan2002", "Brennan, Keane 2002, Demo Occup Environ Rev", 2002, "its",
        doi="10.5555/exposhift.demo.038",
        population="adults living beside dry cleaners, Ireland",
        data_source="general practice laboratory records", assignment_grade=1,
        pre_points=2, post_points=5, checks=("autocorrelation",), tier=1, bias=-0.1,
        firm={"counterfactual": (0, "only 2 yearly points before the change (fewer than 3)"),
              "design_checks": (0, "the minimum for a time series is 3 points on each side; "
                                   "only 2 before the change")},
        estimates=(Est("TRL-IRL-1997", LIVER, "RR", 0.12, form="ci95", truth=-0.2,
                       time_window="1995-2001"),),
    ),
    Study(
        "Gruber2003", "Gruber, Halloran 2003, Demo Occup Environ Rev", 2003, "before-after",
        population="dry-cleaning workers, Austria", data_source="occupational health examinations",
        assignment_grade=1, pre_points=3, post_points=3, tier=1, bias=-0.1,
        estimates=(
            Est("TRL-AUT-1999", "chronic kidney disease", "OR", 0.22, form="se", truth=-0.2,
                time_window="1996-2001"),
            Est("TRL-AUT-1999", LIVER, "OR", 0.18, form="ci90", truth=-0.25, primary=False,
                time_window="1996-2001"),
        ),
    ),
)

QUORINATE_STUDIES: tuple[Study, ...] = (
    Study(
        "Bellini2008", "Bellini, Achebe et al. 2008, Demo Environ Health Lett", 2008,
        "exposed-cohort", doi="10.5555/exposhift.demo.040",
        comparison="residents 10-20 km from the release", population=QRN_POP,
        data_source="regional health survey", assignment_grade=2,
        checks=("balance", "negative-control-outcome"), tier=2,
        estimates=(
            Est("QRN-ITA-2006", "persistent respiratory symptoms", "OR", 0.15, form="ci95",
                truth=0.45, baseline_risk=0.09, time_window="1 year after the release"),
            Est("QRN-ITA-2006", "persistent respiratory symptoms", "OR", 0.25, form="ci95",
                truth=0.55, primary=False, subgroup="children under 12",
                time_window="1 year after the release"),
        ),
    ),
    Study(
        # same event, population and data source as Bellini2008: one independent unit
        "BelliniConti2011", "Bellini, Conti 2011, Demo Resp Med Rep", 2011, "exposed-cohort",
        comparison="residents 10-20 km from the release", population=QRN_POP,
        data_source="regional health survey", assignment_grade=2,
        checks=("balance", "negative-control-outcome", "sensitivity-analyses"), tier=2,
        estimates=(Est("QRN-ITA-2006", "persistent respiratory symptoms", "OR", 0.14,
                       form="ci95", truth=0.35, baseline_risk=0.09,
                       time_window="4 years after the release"),),
    ),
    Study(
        "Rinaldi2012", "Rinaldi, Oyelaran 2012, Demo Public Health Notes", 2012, "did",
        comparison="neighbouring municipalities",
        population="residents of the affected municipality",
        data_source="regional prescription database", assignment_grade=2,
        pre_points=3, post_points=3, checks=("pre-trends", "negative-control-outcome"), tier=2,
        appraised=0,
        estimates=(Est("QRN-ITA-2006", "anxiety medication prescriptions", "RR", 0.05,
                       form="ci95", truth=0.12, time_window="2006-2009"),),
    ),
)
