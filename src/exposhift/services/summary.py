"""What the evidence says, one row per exposure x outcome: replication status and pooled effect.

The pooled effect is the *headline* number of the replication analysis: the event-level pool of
the good events (overall level >= ``min_level``, one number per event) in the cell's main
stratum, so the status and the number beside it rest on the same evidence set
(:mod:`exposhift.replication.headline`). ``events`` counts every independent event,
``k_events`` / ``k_estimates`` those behind the pooled number.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from exposhift.replication import replication_statuses
from exposhift.replication.families import independent_kept
from exposhift.replication.settings import ReplicationSettings
from exposhift.services.pooling import CAUTION
from exposhift.services.snapshot import EvidenceSnapshot
from exposhift.store.database import Store
from exposhift.store.directions import directions_frame
from exposhift.store.queries import analysis_frame
from exposhift.synthesis.conversions import from_analysis_scale

COLUMNS = [
    "exposure",
    "outcome",
    "events",
    "status",
    "provisional",
    "imprecise",
    "stratum",
    "k_events",
    "k_estimates",
    "scale",
    "estimate",
    "ci_lower",
    "ci_upper",
    "tau2",
    "i2",
]
EVIDENCE_SET = (
    "good events only (overall appraisal level >= {min_level}), one number per "
    "event, in the stratum with the most good events"
)


def evidence_summary(
    store: Store,
    *,
    settings: ReplicationSettings | None = None,
    directions: pd.DataFrame | None = None,
    snapshot: EvidenceSnapshot | None = None,
) -> pd.DataFrame:
    """One row per exposure x outcome; ``estimate``/``ci_*`` on the natural scale.

    Statuses use ``settings`` (default: the thresholds in force, as the ``replication`` action
    does), so both report the same status and the same pooled number. ``snapshot``: read from
    it instead of the store (:mod:`exposhift.services.snapshot`); with the snapshot's own
    directions, the statuses are the snapshot's shared analysis
    (:meth:`~exposhift.services.snapshot.EvidenceSnapshot.replication`).
    """
    if settings is None:
        from exposhift.services.workspace import stored_settings

        settings = stored_settings(store)
    s = settings
    shared = snapshot is not None and directions is None  # the snapshot's analysis applies
    if snapshot is not None:
        frame = snapshot.analysis
        directions = snapshot.directions if directions is None else directions
    else:
        with store.read() as conn:
            frame = analysis_frame(conn)
            if directions is None:
                directions = directions_frame(conn)
    if frame.empty:
        return pd.DataFrame(columns=COLUMNS)
    if shared and snapshot is not None:
        st = snapshot.replication(s).statuses  # shared with the unfiltered gap map
    else:
        units = independent_kept(frame) if snapshot is None else snapshot.units
        st = replication_statuses(units, settings=s, directions=directions)
    out = st.rename(
        columns={
            "n_events": "events",
            "pooled_k_events": "k_events",
            "pooled_k_estimates": "k_estimates",
            "pooled_stratum": "stratum",
            "pooled_scale": "scale",
            "pooled_tau2": "tau2",
            "pooled_i2": "i2",
        }
    )
    scale = out["scale"].replace("", "identity").to_numpy()
    for col in ("estimate", "ci_lower", "ci_upper"):
        vals = out[f"pooled_{col}"].to_numpy(float)
        out[col] = np.where(np.isfinite(vals), from_analysis_scale(scale, vals), np.nan)
    out["k_events"] = out["k_events"].fillna(0).astype(int)
    out["k_estimates"] = out["k_estimates"].fillna(0).astype(int)
    return out[COLUMNS].reset_index(drop=True)


SUMMARY_CAUTION = CAUTION
