"""The complete invented demo scenario: every study, in a fixed order."""

from __future__ import annotations

from exposhift.demo_scenario.model import Study
from exposhift.demo_scenario.studies_bans import DRAVONIL_STUDIES
from exposhift.demo_scenario.studies_sources import (
    QUORINATE_STUDIES,
    TRELOMENE_STUDIES,
    VELLIUM_STUDIES,
)
from exposhift.demo_scenario.studies_standards import CORVANE_STUDIES

STUDIES: tuple[Study, ...] = (
    *DRAVONIL_STUDIES,
    *CORVANE_STUDIES,
    *VELLIUM_STUDIES,
    *TRELOMENE_STUDIES,
    *QUORINATE_STUDIES,
)
