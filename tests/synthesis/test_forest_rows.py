"""The per-event interval of a forest plot against scipy's normal interval."""

from __future__ import annotations

import numpy as np
import pandas as pd
from scipy import stats

from exposhift.synthesis.forest_rows import event_rows, wald_interval


def test_wald_interval_matches_scipy_normal_interval():
    # Outside reference: scipy.stats.norm.interval (a general-purpose reference library).
    y = np.array([0.10, -0.25, 1.3])
    v = np.array([0.04, 0.0025, 0.5])
    for alpha in (0.05, 0.1, 0.01):
        se, lo, hi = wald_interval(y, v, alpha)
        ref_lo, ref_hi = stats.norm.interval(1 - alpha, loc=y, scale=np.sqrt(v))
        np.testing.assert_allclose(lo, ref_lo, rtol=1e-12)
        np.testing.assert_allclose(hi, ref_hi, rtol=1e-12)
        np.testing.assert_allclose(se, np.sqrt(v), rtol=1e-12)


def test_event_rows_keep_every_event_in_group_and_date_order():
    rows = pd.DataFrame(
        {
            "group": [1, 0, 0],
            "event_id": ["C", "B", "A"],
            "change_date": ["2001", "1999", "1999"],
            "y": [0.1, 0.2, 0.3],
            "v": [0.01, 0.04, 0.09],
            "weight": [1.0, 0.6, 0.4],
            "study_id": ["s3", "s2", "s1"],
            "estimate_uids": [[3], [2, 5], [1]],
        }
    )
    out = event_rows(rows)
    assert out["event_id"].tolist() == ["A", "B", "C"]
    assert out["estimate_uid"].tolist() == ["1", "2; 5", "3"]
    # 1.959964 = z(0.975), handbook value of the standard normal quantile
    assert abs(out["ci_upper"].iat[0] - (0.3 + 1.959964 * 0.3)) < 1e-6
    assert out["weight"].tolist() == [0.4, 0.6, 1.0]
