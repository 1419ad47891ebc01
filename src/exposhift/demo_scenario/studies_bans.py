"""Invented studies of the dravonil bans (family 1 of the demo scenario).

All authors, journals and numbers are invented. DOIs use the 10.5555 test prefix.
"""

from __future__ import annotations

from exposhift.demo_scenario.model import Est, Study

PRE = "preterm birth"
LBW = "low birth weight"

DRAVONIL_STUDIES: tuple[Study, ...] = (
    Study(
        "Lindqvist1996", "Lindqvist, Okafor et al. 1996, Demo J Environ Epidemiol", 1996,
        "synthetic-control", doi="10.5555/exposhift.demo.001",
        comparison="synthetic Sweden from 14 donor countries without a ban",
        population="all singleton births, Sweden", data_source="national birth register",
        assignment_grade=3, pre_points=14, post_points=6,
        checks=("pre-period-fit", "in-space-placebo", "placebo-date"), tier=3,
        estimates=(
            Est("DRV-SWE-1988", PRE, "RR", 0.045, form="ci95", time_window="1989-1994"),
            Est("DRV-SWE-1988", LBW, "RR", 0.05, primary=False, time_window="1989-1994"),
            Est("DRV-SWE-1988", PRE, "RR", 0.06, primary=False, offset=-0.03,
                subgroup="mothers in farming districts", time_window="1989-1994"),
            Est("DRV-SWE-1988", PRE, "RR", 0.055, primary=False, offset=0.02,
                subgroup="mothers in cities", time_window="1989-1994"),
        ),
    ),
    Study(
        "Brandt1999", "Brandt, Mwangi et al. 1999, Demo Paediatr Perinat Rep", 1999,
        "synthetic-control", doi="10.5555/exposhift.demo.002",
        comparison="synthetic Denmark from 12 donor countries",
        population="all singleton births, Denmark", data_source="national birth register",
        assignment_grade=2, pre_points=12, post_points=6,
        checks=("pre-period-fit", "in-space-placebo"), tier=2,
        estimates=(
            Est("DRV-DNK-1991", PRE, "RR", 0.05, form="ci90", time_window="1992-1997"),
            Est("DRV-DNK-1991", PRE, "RR", 0.08, form="ci90", primary=False, offset=-0.03,
                subgroup="rural mothers", time_window="1992-1997"),
        ),
    ),
    Study(
        "Haverkamp2001", "Haverkamp, Sato et al. 2001, Demo Int J Natural Exp", 2001,
        "rd-geo", doi="10.5555/exposhift.demo.003",
        comparison="births just across the border in Belgium, where the ban came 12 years later",
        population="births in municipalities within 20 km of the Belgian border",
        data_source="municipal perinatal records", assignment_grade=3,
        checks=("density-test", "covariate-continuity", "bandwidth-sensitivity",
                "placebo-place"), tier=3,
        estimates=(Est("DRV-NLD-1994", PRE, "RR", 0.07, form="ci95", time_window="1994-1998"),),
    ),
    Study(
        "VanderMols2003", "Van der Mols, Achterberg 2003, Demo J Environ Epidemiol", 2003,
        "synthetic-control", doi="10.5555/exposhift.demo.004",
        comparison="synthetic Netherlands from 13 donor countries",
        population="all singleton births, Netherlands", data_source="national perinatal register",
        assignment_grade=2, pre_points=15, post_points=7,
        checks=("pre-period-fit", "in-space-placebo"), tier=2,
        estimates=(
            Est("DRV-NLD-1994", PRE, "RR", 0.045, time_window="1994-2000"),
            Est("DRV-NLD-1994", LBW, "RR", 0.05, form="se", primary=False,
                time_window="1994-2000"),
        ),
    ),
    Study(
        "Koskinen2004", "Koskinen, Abara 2004, Demo Paediatr Perinat Rep", 2004, "did",
        comparison="municipalities with no arable farming",
        population="births in farming municipalities, Finland",
        data_source="medical birth register",
        assignment_grade=2, pre_points=6, post_points=5,
        checks=("pre-trends", "negative-control-outcome"), tier=2,
        estimates=(Est("DRV-FIN-1997", PRE, "OR", 0.06, baseline_risk=0.055,
                       time_window="1997-2001"),),
    ),
    Study(
        "Whitford2007", "Whitford, Ngata et al. 2007, Demo Environ Health Lett", 2007, "did",
        doi="10.5555/exposhift.demo.006", comparison="urban districts with little dravonil use",
        population="all births, New Zealand", data_source="national maternity collection",
        assignment_grade=2, pre_points=5, post_points=5, checks=("pre-trends",), tier=2,
        estimates=(
            Est("DRV-NZL-2001", PRE, "RR", 0.05, time_window="2001-2005"),
            Est("DRV-NZL-2001", LBW, "RR", 0.06, form="ci+p", primary=False,
                time_window="2001-2005"),
        ),
    ),
    Study(
        # same event, population and data source as Whitford2007: counted once when pooling
        "WhitfordTane2009", "Whitford, Tane et al. 2009, Demo J Environ Epidemiol", 2009,
        "synthetic-control", doi="10.5555/exposhift.demo.007",
        comparison="synthetic New Zealand from 11 donor countries",
        population="all births, New Zealand", data_source="national maternity collection",
        assignment_grade=3, pre_points=13, post_points=7,
        checks=("pre-period-fit", "in-space-placebo", "placebo-date"), tier=3,
        estimates=(Est("DRV-NZL-2001", PRE, "RR", 0.045, form="ci95",
                       time_window="2001-2007"),),
    ),
    Study(
        "Gallagher2010", "Gallagher, Osei et al. 2010, Demo Int J Natural Exp", 2010,
        "staggered-did", doi="10.5555/exposhift.demo.008",
        comparison="states that had not yet banned dravonil",
        population="births in agricultural statistical areas, Australia",
        data_source="state perinatal data collections", assignment_grade=3,
        pre_points=8, post_points=6,
        checks=("robust-staggered-estimator", "pre-trends", "placebo-date"), tier=3,
        estimates=(
            Est("DRV-AUS-2003", PRE, "RR", 0.04, form="ci95", time_window="0-2 years after ban"),
            Est("DRV-AUS-2003", PRE, "RR", 0.05, form="ci95", primary=False, offset=-0.02,
                time_window="3-5 years after ban"),
            Est("DRV-AUS-2003", LBW, "RR", 0.05, form="p", primary=False,
                time_window="0-2 years after ban"),
        ),
    ),
    Study(
        "Pemberton2012", "Pemberton, Rahman 2012, Demo Environ Health Lett", 2012,
        "staggered-did", comparison="states that had not yet banned dravonil",
        population="all births, Australia", data_source="national perinatal statistics",
        assignment_grade=2, pre_points=6, post_points=6, checks=("pre-trends",), tier=2,
        firm={"design_checks": (1, "two-way fixed effects with staggered dates; no "
                                   "heterogeneity-robust estimator or decomposition")},
        appraised=1,
        estimates=(Est("DRV-AUS-2003", PRE, "RR", 0.035, time_window="2003-2008"),),
    ),
    Study(
        "Fuentes2014", "Fuentes, Lindqvist 2014, Demo Paediatr Perinat Rep", 2014,
        "synthetic-control", doi="10.5555/exposhift.demo.010",
        comparison="synthetic Chile from 16 Latin American and OECD donors",
        population="all births, Chile", data_source="vital statistics birth records",
        assignment_grade=2, pre_points=16, post_points=5,
        checks=("pre-period-fit", "in-space-placebo"), tier=2,
        estimates=(Est("DRV-CHL-2008", PRE, "RR", 0.05, form="se", time_window="2009-2013"),),
    ),
    Study(
        "Araya2016", "Araya, Castillo et al. 2016, Demo Public Health Notes", 2016, "did",
        comparison="regions without fruit farming",
        population="births in fruit-growing regions, Chile",
        data_source="vital statistics birth records", assignment_grade=2,
        pre_points=6, post_points=6, checks=("pre-trends", "placebo-place"), tier=2,
        estimates=(Est("DRV-CHL-2008", PRE, "RR", 0.06, form="p", time_window="2008-2014"),),
    ),
    Study(
        "Park2017", "Park, Nakamura et al. 2017, Demo J Environ Epidemiol", 2017, "its",
        doi="10.5555/exposhift.demo.012",
        population="all births, Republic of Korea", data_source="national birth statistics",
        assignment_grade=2, pre_points=60, post_points=48,
        checks=("autocorrelation", "seasonality", "placebo-date"), tier=2,
        firm={"counterfactual": (2, "single series with 60 monthly points before and 48 after; "
                                    "no comparison series")},
        estimates=(Est("DRV-KOR-2011", PRE, "RR", 0.04, form="ci95",
                       time_window="48 months after ban"),),
    ),
    Study(
        "Ferreira2021", "Ferreira, Okafor 2021, Demo Int J Natural Exp", 2021,
        "synthetic-control", doi="10.5555/exposhift.demo.013",
        comparison="synthetic Uruguay from 15 donor countries",
        population="all births, Uruguay", data_source="perinatal information system",
        assignment_grade=3, pre_points=18, post_points=5,
        checks=("pre-period-fit", "in-space-placebo", "negative-control-outcome"), tier=3,
        appraised=0,
        estimates=(Est("DRV-URY-2015", PRE, "RR", 0.055, form="ci90", time_window="2016-2020"),),
    ),
    Study(
        # one study, three countries: each row names its own event
        "Okafor2014", "Okafor, Lindqvist et al. 2014, Demo J Environ Epidemiol", 2014,
        "synthetic-control", doi="10.5555/exposhift.demo.014",
        comparison="one synthetic control per banning country from non-banning donors",
        population="all singleton births in Denmark, Finland and the Republic of Korea",
        data_source="national birth registers", assignment_grade=3,
        pre_points=10, post_points=3,
        checks=("pre-period-fit", "in-space-placebo", "placebo-date",
                "negative-control-exposure"), tier=3,
        estimates=(
            Est("DRV-DNK-1991", PRE, "RR", 0.05, time_window="3 years after ban"),
            Est("DRV-FIN-1997", PRE, "RR", 0.055, time_window="3 years after ban"),
            Est("DRV-KOR-2011", PRE, "RR", 0.045, time_window="3 years after ban"),
        ),
    ),
    Study(
        "Marsh2013", "Marsh, Eriksen 2013, Demo Environ Health Lett", 2013, "exposed-cohort",
        comparison="children born in low-use districts, before and after the ban",
        population="children born 1980-1996 in high-use farming districts, Sweden",
        data_source="national cancer register", assignment_grade=2,
        checks=("balance", "negative-control-outcome"), tier=2,
        estimates=(Est("DRV-SWE-1988", "childhood acute leukaemia", "HR", 0.12, form="ci95",
                       truth=-0.2, time_window="follow-up to age 15"),),
    ),
    Study(
        "Ionescu2018", "Ionescu, Herrera 2018, Demo Paediatr Perinat Rep", 2018, "iv",
        doi="10.5555/exposhift.demo.016",
        comparison="maternal metabolite instrumented by ban timing x regional crop share",
        population="mother-child pairs in a birth cohort, Chile",
        data_source="birth cohort follow-up", assignment_grade=2,
        checks=("balance",), tier=2,
        firm={"design_checks": (1, "no first-stage F statistic reported for the instrument")},
        estimates=(Est("DRV-CHL-2008", "neurodevelopmental score at age 2", "MD", 0.6,
                       truth=-1.1, kind="per-unit", per_unit=1.0, time_window="age 2"),),
    ),
)
