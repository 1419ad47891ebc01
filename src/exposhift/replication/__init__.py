"""Pure replication library: families of exposure change, replication statuses, the gap map.

Modules: :mod:`.settings` (the thresholds, also in ``evidence/replication.toml``),
:mod:`.families` (independent events, expected direction, concordance), :mod:`.spatial` (places,
sign test), :mod:`.temporal` (periods, reversals), :mod:`.triangulation` (design families,
Q-between), :mod:`.dose` (dose-response meta-regression), :mod:`.status` (one status per
exposure × outcome with its rule, for the whole evidence base at once), :mod:`.gaps` (gap map,
filters, opportunities), :mod:`.report` (one exposure × outcome in full), :mod:`.regions`.
No database, no user interface. The rules are in docs/replication.md.

Status labels support, never replace, expert judgement, local regulation and licensed practice.
"""

from exposhift.replication.gaps import GAP_STATES, filter_frame, gap_map, opportunities
from exposhift.replication.report import ReplicationReport, replication_report
from exposhift.replication.settings import DEFAULTS, ReplicationSettings, load_settings
from exposhift.replication.status import STATUSES, analyse, replication_statuses

__all__ = [
    "DEFAULTS",
    "GAP_STATES",
    "STATUSES",
    "ReplicationReport",
    "ReplicationSettings",
    "analyse",
    "filter_frame",
    "gap_map",
    "load_settings",
    "opportunities",
    "replication_report",
    "replication_statuses",
]
