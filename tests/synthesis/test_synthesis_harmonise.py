"""Conversions checked against published worked examples, and harmonise() on frames.

Sources (tests/data/meta_checks.json, group "conversions"): Woodward 2019 (Heart 105:1701,
Table 4; published-confirmed), Altman & Bland 2011 (BMJ 343:d2090; published-confirmed, and
a secondary reproduction for the ratio example), Cochrane Handbook via a secondary page, Law,
Morris & Wald 2009 (secondary quote), Borenstein et al. 2009 ch. 7 (from memory).
"""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
import pytest
from synthesis_helpers import check

from exposhift.errors import AnalysisError
from exposhift.synthesis import harmonise as hm
from exposhift.synthesis.harmonise import ADDED_COLUMNS, harmonise


def approx(quantity: str):
    expected, tol = check("conversions", quantity)
    return pytest.approx(expected, abs=tol)


# ---------------------------------------------------------------- Woodward 2019 (published)


def test_woodward_log_scale_and_se_from_ci():
    # Woodward 2019 Table 4: RR 2.15 (95% CI 1.33 to 3.47)
    assert hm.to_analysis_scale("RR", 2.15) == approx("ln RR 2.15")
    assert hm.to_analysis_scale("RR", 1.33) == approx("ln 1.33")
    assert hm.to_analysis_scale("RR", 3.47) == approx("ln 3.47")
    # the paper divides by 3.92 = 2 x 1.96; we use the exact quantile 1.959964, so our SE is the
    # published one scaled by 1.96/1.959964 (a relative change of 1.8e-5)
    se = hm.se_from_ci(1.33, 3.47, 0.95, "log")
    assert se * hm.z_for_level(0.95) / 1.96 == approx(
        "SE = (ln hi - ln lo)/3.92 (= average of the two)"
    )
    assert se == pytest.approx(0.244637, rel=3e-5)


def test_woodward_half_widths_and_asymmetry():
    # Woodward 2019 Table 4 gives the SE from each half of the CI; our asymmetry measure is
    # |upper half - lower half| / full width on the log scale
    se_up, _ = check("conversions", "SE from upper side (ln hi - ln est)/1.96")
    se_lo, _ = check("conversions", "SE from lower side (ln est - ln lo)/1.96")
    y, lo, hi = (hm.to_analysis_scale("RR", x) for x in (2.15, 1.33, 3.47))
    assert (hi - y) / 1.96 == approx("SE from upper side (ln hi - ln est)/1.96")
    assert (y - lo) / 1.96 == approx("SE from lower side (ln est - ln lo)/1.96")
    assert hm.ci_asymmetry(y, lo, hi) == pytest.approx(
        abs(se_up - se_lo) / (se_up + se_lo), abs=5e-6
    )
    assert not hm.ci_asymmetric(y, lo, hi)  # 0.17 % of the width: well within rounding


def test_woodward_ratio_of_ratios_interval_and_back_transform():
    # Woodward 2019 Table 4: ln RRR 0.01878, variance 0.165301 -> 95% CI (-0.778101, 0.815661),
    # RRR 1.02 (0.46 to 2.26)
    y, _ = check("conversions", "ln ratio of RRs (women:men)")
    var, _ = check("conversions", "variance of ln RRR")
    lo, hi = hm.wald_ci(y, math.sqrt(var), 0.95)
    # the paper multiplies by 1.96; the exact quantile moves the limits by < 1e-5
    assert lo == pytest.approx(check("conversions", "ln RRR 95% CI lower")[0], abs=2e-5)
    assert hi == pytest.approx(check("conversions", "ln RRR 95% CI upper")[0], abs=2e-5)
    assert hm.from_analysis_scale("log", y) == approx("RRR (2 dp)")
    assert hm.from_analysis_scale("log", lo) == approx("RRR CI lower (2 dp)")
    assert hm.from_analysis_scale("log", hi) == approx("RRR CI upper (2 dp)")


# ---------------------------------------------------------------- Altman & Bland 2011


def test_altman_bland_difference_example():
    # Altman & Bland 2011: difference 17, P = 0.032 -> z 2.141, SE 7.94, 95% CI 1.4 to 32.6
    z = hm.z_from_p_approx(0.032)
    assert z == approx("z from P=0.032 (approximation formula, 3 dp)")
    assert 17 / z == approx("SE = 17/z (3 dp)")
    lo, hi = hm.wald_ci(17, 17 / z)
    assert lo == approx("95% CI lower (1 dp)")
    assert hi == approx("95% CI upper (1 dp)")
    # the library uses the exact normal quantile; it differs from the published approximation
    # by 3.4e-3 (meta_checks.json tolerance 0.005)
    assert hm.z_from_p(0.032) == approx("z from P=0.032 exact normal quantile vs published 2.141")
    assert hm.se_from_p(17, 0.032) == pytest.approx(17 / hm.z_from_p(0.032), rel=1e-15)


def test_altman_bland_ratio_example():
    # Altman & Bland 2011 ratio example, RR 0.30, P = 0.034 (secondary reproduction)
    y = hm.to_analysis_scale("RR", 0.30)
    assert hm.z_from_p_approx(0.034) == approx("ratio: z from P=0.034 (approx formula)")
    assert abs(y) / hm.z_from_p_approx(0.034) == approx("ratio: SE of ln RR")
    se = hm.se_from_p(y, 0.034)  # exact quantile
    lo, hi = hm.wald_ci(y, se)
    assert hm.from_analysis_scale("log", lo) == approx("ratio: CI lower (RR scale, 2 dp)")
    assert hm.from_analysis_scale("log", hi) == approx(
        "ratio: CI upper (RR scale; blog prints 0.90 after rounding to 1 dp)"
    )


def test_cochrane_z_for_p():
    # Cochrane Handbook (secondary source): two-sided P = 0.008 -> Z = 2.652
    assert hm.z_from_p(0.008) == approx("Z for two-sided P=0.008")


def test_z_for_level():
    # standard normal quantiles (scipy reference values)
    assert hm.z_for_level(0.95) == pytest.approx(1.959963985, abs=1e-9)
    assert hm.z_for_level(0.90) == pytest.approx(1.644853627, abs=1e-9)
    assert hm.se_from_ci(0.1, 0.5, 0.90, "identity") == pytest.approx(0.4 / (2 * 1.644853627))


# ---------------------------------------------------------------- other conversions


def test_law_rescaling_example():
    # Law, Morris & Wald 2009 (secondary quote): RR 0.7 per 8 mm Hg = 0.64 per 10 mm Hg
    beta = hm.to_analysis_scale("RR", 0.7)
    assert math.exp(hm.rescale_increment(beta, 8, 10)) == approx(
        "Rescale RR 0.7 per 8 mm Hg to per 10 mm Hg (2 dp)"
    )
    assert hm.rescale_factor(8, 10) == 1.25


def test_borenstein_log_or_to_smd():
    # Borenstein et al. 2009 ch. 7 (from memory): ln OR 0.9069, V 0.0676 -> d 0.5, Vd 0.0205
    d, vd = hm.log_or_to_smd(0.9069, 0.0676)
    assert d == approx("Borenstein 2009 ch.7: lnOR 0.9069 -> d")
    assert vd == approx("Borenstein 2009 ch.7: V 0.0676 -> Vd")
    lo, vlo = hm.smd_to_log_or(d, vd)  # round trip (Chinn 2000)
    assert (lo, vlo) == pytest.approx((0.9069, 0.0676), rel=1e-12)
    assert hm.smd_to_log_or(0.5)[1] is None


def test_zhang_yu_recovers_the_risk_ratio():
    # definition check: with risks p1 and p0, OR = [p1/(1-p1)]/[p0/(1-p0)] and the Zhang & Yu
    # (1998) formula returns exactly RR = p1/p0 (it is that identity solved for RR)
    for p0, p1 in [(0.2, 0.3), (0.05, 0.04), (0.6, 0.9)]:
        or_ = (p1 / (1 - p1)) / (p0 / (1 - p0))
        assert hm.or_to_rr(or_, p0) == pytest.approx(p1 / p0, rel=1e-12)
    rr = hm.or_to_rr(np.array([1.5, 2.0]), np.array([1e-9, 1e-9]))
    assert rr == pytest.approx([1.5, 2.0], rel=1e-8)  # rare outcome: RR ~ OR


def test_percent_change_scale():
    # log(1 + p/100): a 20 % fall is a ratio of 0.8
    assert hm.to_analysis_scale("pct_change", -20) == pytest.approx(math.log(0.8))
    assert hm.from_analysis_scale("log", hm.to_analysis_scale("pct_change", 50)) == 1.5


@pytest.mark.parametrize(
    ("call", "words"),
    [
        (lambda: hm.to_analysis_scale("RR", -1), "positive"),
        (lambda: hm.to_analysis_scale("XX", 1), "unknown measure"),
        (lambda: hm.se_from_ci(2, 1), "upper confidence limit"),
        (lambda: hm.se_from_ci(1, 2, 95), "fraction"),
        (lambda: hm.se_from_p(0.0, 0.5), "at the null"),
        (lambda: hm.z_from_p(1.5), r"\(0, 1\]"),
        (lambda: hm.or_to_rr(1.5, 1.2), "baseline risk"),
        (lambda: hm.rescale_factor(0, 10), "non-zero"),
    ],
)
def test_conversion_errors(call, words):
    with pytest.raises(AnalysisError, match=words):
        call()


# ---------------------------------------------------------------- harmonise()


def _row(**kw):
    base = {
        "measure": "RR",
        "estimate": 1.2,
        "ci_low": 1.0,
        "ci_high": 1.44,
        "change_direction": "increase",
    }
    base.update(kw)
    return base


def test_harmonise_woodward_row():
    frame = pd.DataFrame([_row(estimate=2.15, ci_low=1.33, ci_high=3.47)])
    out = harmonise(frame)
    assert set(ADDED_COLUMNS) <= set(out.columns)
    r = out.iloc[0]
    assert r["y"] == approx("ln RR 2.15")
    assert math.sqrt(r["v"]) * hm.z_for_level(0.95) / 1.96 == approx(
        "SE = (ln hi - ln lo)/3.92 (= average of the two)"
    )  # exact z, see above
    assert (r["scale"], r["se_source"], r["measure_group"]) == ("log", "ci", "ratio")
    assert not r["ci_asymmetric"] and not r["sign_flipped"]
    assert r["harmonise_note"] == "SE from 95% CI"
    assert r["estimate_kind"] == "change"


def test_uncertainty_precedence_ci_then_se_then_p():
    frame = pd.DataFrame(
        [
            _row(se=0.5, p_value=0.01),  # CI wins
            _row(ci_low=np.nan, ci_high=np.nan, se=0.5, p_value=0.01),  # SE next
            _row(ci_low=np.nan, ci_high=np.nan, p_value=0.01),  # p last
            _row(ci_high=np.nan, se=0.5),  # single limit: SE, with a note
        ]
    )
    out = harmonise(frame)
    assert list(out["se_source"]) == ["ci", "se", "p", "se"]
    y = math.log(1.2)
    assert out["v"].iloc[0] == pytest.approx(hm.se_from_ci(1.0, 1.44) ** 2)
    assert out["v"].iloc[1] == pytest.approx(0.25)
    assert out["v"].iloc[2] == pytest.approx((y / hm.z_from_p(0.01)) ** 2)
    assert "only one CI limit given" in out["harmonise_note"].iloc[3]


def test_ci_of_other_level_and_percent_change():
    frame = pd.DataFrame(
        [
            _row(measure="MD", estimate=3.0, ci_low=1.0, ci_high=5.0, ci_level=0.90),
            _row(measure="pct_change", estimate=-10.0, ci_low=-15.0, ci_high=-5.0),
        ]
    )
    out = harmonise(frame)
    assert out["v"].iloc[0] == pytest.approx((4.0 / (2 * 1.6448536269514722)) ** 2)
    assert out["scale"].iloc[0] == "identity" and out["measure_group"].iloc[0] == "mean_difference"
    assert out["y"].iloc[1] == pytest.approx(math.log(0.9))
    se = (math.log(0.95) - math.log(0.85)) / (2 * 1.959963984540054)
    assert out["v"].iloc[1] == pytest.approx(se**2)
    assert out["measure_group"].iloc[1] == "ratio"


def test_direction_alignment_is_explicit():
    frame = pd.DataFrame(
        [_row(estimate=0.8, ci_low=0.7, ci_high=0.914, change_direction="decrease")]
    )
    up = harmonise(frame, align_to="increase").iloc[0]
    assert up["y"] == pytest.approx(math.log(1.25))  # 1/RR
    assert up["sign_flipped"] and "sign flipped" in up["harmonise_note"]
    down = harmonise(frame, align_to="decrease").iloc[0]
    assert down["y"] == pytest.approx(math.log(0.8)) and not down["sign_flipped"]
    assert up["v"] == pytest.approx(down["v"])


def test_odds_ratio_kept_apart_unless_baseline_risk_given():
    frame = pd.DataFrame(
        [
            _row(measure="OR", estimate=1.5, ci_low=1.1, ci_high=2.0),
            _row(measure="OR", estimate=1.5, ci_low=1.1, ci_high=2.0, baseline_risk=0.2),
            _row(
                measure="OR", estimate=1.5, se=0.1, ci_low=np.nan, ci_high=np.nan, baseline_risk=0.2
            ),
        ]
    )
    out = harmonise(frame)
    assert list(out["measure_group"]) == ["odds_ratio", "ratio", "ratio"]
    rr = hm.or_to_rr(1.5, 0.2)
    assert out["y"].iloc[1] == pytest.approx(math.log(rr))
    lo, hi = hm.or_to_rr(1.1, 0.2), hm.or_to_rr(2.0, 0.2)
    assert out["v"].iloc[1] == pytest.approx(hm.se_from_ci(lo, hi) ** 2)
    assert "Zhang & Yu 1998" in out["harmonise_note"].iloc[1]
    assert out["se_source"].iloc[2] == "se"  # the original source is reported
    kept = harmonise(frame, convert_or=False)
    assert list(kept["measure_group"]) == ["odds_ratio"] * 3


def test_smd_conversion_option():
    frame = pd.DataFrame([_row(measure="SMD", estimate=0.5, ci_low=np.nan, ci_high=np.nan, se=0.1)])
    assert harmonise(frame)["measure_group"].iloc[0] == "smd"
    conv = harmonise(frame, smd_as_log_or=True).iloc[0]
    assert conv["measure_group"] == "odds_ratio" and conv["scale"] == "log"
    assert conv["y"] == pytest.approx(0.5 * math.pi / math.sqrt(3))  # Chinn 2000
    assert conv["v"] == pytest.approx(0.01 * math.pi**2 / 3)


def test_per_unit_rescaling():
    def pu(inc, est, unit="ug/m3"):
        return _row(
            estimate_kind="per-unit",
            per_unit=inc,
            change_unit=unit,
            estimate=est,
            ci_low=est / 1.05,
            ci_high=est * 1.05,
            change_direction=np.nan,
        )

    frame = pd.DataFrame([pu(10, 1.1), pu(10, 1.2), pu(5, 1.05), pu(1, 1.01, "ppb")])
    out = harmonise(frame)
    assert list(out["increment"]) == ["10 ug/m3", "10 ug/m3", "10 ug/m3", "1 ppb"]
    assert out["y"].iloc[2] == pytest.approx(2 * math.log(1.05))  # per 5 -> per 10
    v5 = hm.se_from_ci(1.0, 1.05 * 1.05) ** 2
    assert out["v"].iloc[2] == pytest.approx(4 * v5)
    assert "rescaled log-linearly from per 5 to per 10 ug/m3" in out["harmonise_note"].iloc[2]
    fixed = harmonise(frame, per_unit_to={"ug/m3": 1, "ppb": 10})
    assert fixed["y"].iloc[0] == pytest.approx(math.log(1.1) / 10)
    assert fixed["increment"].iloc[3] == "10 ppb"
    down = harmonise(frame, align_to="decrease", per_unit_to=10.0)
    assert down["y"].iloc[0] == pytest.approx(-math.log(1.1))
    assert down["sign_flipped"].all()
    with pytest.raises(AnalysisError, match="no target increment for change_unit 'ppb'"):
        harmonise(frame, per_unit_to={"ug/m3": 10})


def test_asymmetric_ci_is_flagged():
    # RR 1.5 with limits (1.4, 3.0): far from symmetric on the log scale
    out = harmonise(pd.DataFrame([_row(estimate=1.5, ci_low=1.4, ci_high=3.0)]))
    assert out["ci_asymmetric"].iloc[0]
    assert "asymmetric" in out["harmonise_note"].iloc[0]


def test_problems_are_reported_together_and_name_rows():
    frame = pd.DataFrame(
        [
            _row(estimate_uid="s1|e1", estimate=-1.0),
            _row(estimate_uid="s2|e1", ci_level=95),
            _row(estimate_uid="s3|e1", ci_low=np.nan, ci_high=np.nan),
            _row(estimate_uid="s4|e1", change_direction="up"),
            _row(estimate_uid="s5|e1", estimate=1.6),
            _row(estimate_uid="s6|e1", measure="RRR"),
            _row(estimate_uid="s7|e1", estimate_kind="per-unit"),
            _row(estimate_uid="s8|e1", estimate="abc"),
        ],
        index=[101, 102, 103, 104, 105, 106, 107, 108],
    )
    with pytest.raises(AnalysisError) as err:
        harmonise(frame)
    msg = str(err.value)
    assert "row 101 (estimate s1|e1): RR needs a positive estimate" in msg
    assert "row 102 (estimate s2|e1): ci_level 95 looks like a percentage" in msg
    assert "row 103 (estimate s3|e1): no confidence interval, SE or p value" in msg
    assert "row 104 (estimate s4|e1): change_direction must be decrease or increase" in msg
    assert "row 105 (estimate s5|e1): estimate 1.6 lies outside its interval" in msg
    assert "row 106 (estimate s6|e1): unknown measure 'RRR'" in msg
    assert "row 107 (estimate s7|e1): a per-unit estimate needs per_unit" in msg
    assert "row 108 (estimate s8|e1): estimate 'abc' is not a number" in msg


def test_p_value_at_the_null_cannot_give_an_se():
    frame = pd.DataFrame(
        [_row(measure="MD", estimate=0.0, ci_low=np.nan, ci_high=np.nan, p_value=0.5)]
    )
    with pytest.raises(AnalysisError, match="row 0: an SE cannot come from a p value"):
        harmonise(frame)


def test_large_frame_equals_small_frame_repeated_and_input_untouched():
    small = pd.DataFrame(
        [
            _row(),
            _row(measure="OR", baseline_risk=0.1, change_direction="decrease"),
            _row(measure="MD", estimate=2.0, ci_low=np.nan, ci_high=np.nan, p_value=0.04),
            _row(estimate_kind="per-unit", per_unit=5, change_unit="ug/m3"),
        ]
    )
    reps = 25_000  # 100,000 rows through the vectorised path
    big = pd.DataFrame({c: np.tile(small[c].to_numpy(dtype=object), reps) for c in small})
    before = big.copy()
    out = harmonise(big)
    ref = harmonise(small)
    assert np.allclose(out["y"].to_numpy(dtype=float), np.tile(ref["y"].to_numpy(), reps))
    assert np.allclose(out["v"].to_numpy(dtype=float), np.tile(ref["v"].to_numpy(), reps))
    assert (out["harmonise_note"].to_numpy()[:4] == ref["harmonise_note"].to_numpy()).all()
    pd.testing.assert_frame_equal(big, before)
