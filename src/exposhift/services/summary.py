"""What the evidence says, one row per exposure x outcome: replication status and pooled effect.

The pooled effect is that of the largest poolable stratum (most independent estimates) of each
exposure x outcome, computed for all of them at once with the grouped pooling engine, after the
same steps as the ``pool`` action (fatal studies out, harmonised, independent estimates only).
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from exposhift.replication import replication_statuses
from exposhift.replication.families import independent_units
from exposhift.replication.settings import ReplicationSettings, load_settings
from exposhift.services.pooling import CAUTION, prepare_for_pooling
from exposhift.store.database import Store
from exposhift.store.queries import analysis_frame
from exposhift.synthesis.conversions import from_analysis_scale
from exposhift.synthesis.grouped import pool_groups
from exposhift.synthesis.harmonise import GROUP_SCALES
from exposhift.synthesis.independence import pooling_keys

COLUMNS = ["exposure", "outcome", "events", "status", "stratum", "k", "scale", "estimate",
           "ci_lower", "ci_upper", "tau2", "i2"]


def evidence_summary(store: Store, *, method: str = "reml", ci: str = "hksj",
                     settings: ReplicationSettings | None = None) -> pd.DataFrame:
    """One row per exposure x outcome; ``estimate``/``ci_*`` are back-transformed on log scales.

    Statuses use ``settings`` (default: the thresholds in force, as the ``replication`` action
    does), so both report the same status.
    """
    s = settings if settings is not None else load_settings()
    with store.read() as conn:
        frame = analysis_frame(conn)
    if frame.empty:
        return pd.DataFrame(columns=COLUMNS)
    units, _ = independent_units(frame)
    statuses = replication_statuses(units, settings=s)[
        ["exposure", "outcome", "n_events", "status"]]
    kept, _ = prepare_for_pooling(frame)
    keys = ["exposure", "outcome", *pooling_keys()]
    kept = kept.copy()
    kept["increment"] = kept["increment"].fillna("")
    pooled = pool_groups(kept, by=keys, method=method, ci=ci)
    pooled["scale"] = pooled["measure_group"].map(GROUP_SCALES)
    main = (pooled.sort_values(["exposure", "outcome", "k"], ascending=[True, True, False],
                               kind="stable")
            .drop_duplicates(["exposure", "outcome"]))
    for col in ("estimate", "ci_lower", "ci_upper"):
        main[col] = from_analysis_scale(main["scale"].to_numpy(), main[col].to_numpy(float))
    main["stratum"] = (main["measure_group"] + "/" + main["estimate_kind"]
                       + np.where(main["increment"] != "", " " + main["increment"], ""))
    out = statuses.rename(columns={"n_events": "events"}).merge(
        main[["exposure", "outcome", "stratum", "k", "scale", "estimate", "ci_lower",
              "ci_upper", "tau2", "i2"]], on=["exposure", "outcome"], how="left")
    out["k"] = out["k"].fillna(0).astype(int)
    return out[COLUMNS].reset_index(drop=True)


SUMMARY_CAUTION = CAUTION
