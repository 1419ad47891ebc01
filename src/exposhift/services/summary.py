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
from exposhift.services.pooling import CAUTION, prepare_for_pooling
from exposhift.store.database import Store
from exposhift.store.queries import analysis_frame
from exposhift.synthesis.grouped import pool_groups
from exposhift.synthesis.independence import pooling_keys

COLUMNS = ["exposure", "outcome", "events", "status", "stratum", "k", "scale", "estimate",
           "ci_lower", "ci_upper", "tau2", "i2"]


def evidence_summary(store: Store, *, method: str = "reml", ci: str = "hksj") -> pd.DataFrame:
    """One row per exposure x outcome; ``estimate``/``ci_*`` are back-transformed on log scales."""
    with store.read() as conn:
        frame = analysis_frame(conn)
    if frame.empty:
        return pd.DataFrame(columns=COLUMNS)
    units, _ = independent_units(frame)
    statuses = replication_statuses(units)[["exposure", "outcome", "n_events", "status"]]
    kept, _ = prepare_for_pooling(frame)
    keys = ["exposure", "outcome", *pooling_keys()]
    kept = kept.copy()
    kept["increment"] = kept["increment"].fillna("")
    pooled = pool_groups(kept, by=keys, method=method, ci=ci)
    scale = kept.groupby(keys, sort=True)["scale"].first().reset_index(drop=True)
    pooled["scale"] = scale.to_numpy()
    main = (pooled.sort_values(["exposure", "outcome", "k"], ascending=[True, True, False],
                               kind="stable")
            .drop_duplicates(["exposure", "outcome"]))
    log = main["scale"] == "log"
    for col in ("estimate", "ci_lower", "ci_upper"):
        main[col] = np.where(log, np.exp(main[col]), main[col])
    main["stratum"] = (main["measure_group"] + "/" + main["estimate_kind"]
                       + np.where(main["increment"] != "", " " + main["increment"], ""))
    out = statuses.rename(columns={"n_events": "events"}).merge(
        main[["exposure", "outcome", "stratum", "k", "scale", "estimate", "ci_lower",
              "ci_upper", "tau2", "i2"]], on=["exposure", "outcome"], how="left")
    out["k"] = out["k"].fillna(0).astype(int)
    return out[COLUMNS].reset_index(drop=True)


SUMMARY_CAUTION = CAUTION
