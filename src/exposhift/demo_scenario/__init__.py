"""The invented demo scenario, generated deterministically, and its writer.

Parts: ``model`` (building blocks and the seed), ``events`` (events, outcomes, true effects),
``studies_*`` (the invented studies), ``catalogue`` (all studies in order), ``estimates``
(reported numbers), ``appraisals`` (dual review), ``expectations`` (what the demo should show)
and ``output`` (files).

``build_scenario()`` returns the demo evidence base as pandas DataFrames:

- ``estimates``: the extraction sheet (columns :data:`exposhift.io.columns.COLUMN_NAMES`, in
  that order, one row per estimate);
- ``events``: registered exposure-change events that no study evaluated (columns
  :data:`exposhift.io.columns.EVENT_COLUMNS` plus ``demo``);
- ``appraisals``: two invented reviewers' independent appraisals and their consensus
  (``study_id``, ``reviewer``, ``stage``, one column per rubric domain with levels 0-3, and a
  ``<domain>_why`` column per domain);
- ``directions``: the invented committee's expected directions for some exposure x outcome
  cells (columns :data:`exposhift.io.directions.FIELDS`).
- ``series``: extracted series of a few studies, one row per point (the series sheet, see
  :mod:`exposhift.demo_scenario.series`);
- ``judgements``: the invented committee's certainty judgements for two exposures (columns
  :data:`exposhift.certainty.judgement.FIELDS`; :mod:`exposhift.demo_scenario.judgements`).

Everything is INVENTED demonstration material (agents, studies, authors, journals, numbers),
flagged ``demo=yes``; see :mod:`exposhift.demo_scenario.events` for the scenario. The same
seed and keyed random draws give the same frames on every call and machine, with no dependence
on time.

``python -m exposhift.demo_scenario [OUT_DIR]`` writes ``evidence.csv``,
``registered_events.csv``, ``appraisals.csv``, ``directions.csv``, ``series.csv``,
``judgements.csv`` and ``README.md`` (default: the repository's ``seed_records/`` when run from
a source checkout, else ``./seed_records``).
"""

from __future__ import annotations

import sys
from pathlib import Path

import pandas as pd

from exposhift.demo_scenario.appraisals import appraisals_frame
from exposhift.demo_scenario.directions import directions_frame
from exposhift.demo_scenario.estimates import estimates_frame, events_frame
from exposhift.demo_scenario.expectations import EXPECTED, Expectation
from exposhift.demo_scenario.judgements import judgements_frame
from exposhift.demo_scenario.output import FILES, README, csv_text, readme_text, write
from exposhift.demo_scenario.series import series_frame

__all__ = [
    "EXPECTED",
    "FILES",
    "README",
    "Expectation",
    "build_scenario",
    "csv_text",
    "default_out_dir",
    "main",
    "readme_text",
    "write_seed_records",
]


def build_scenario() -> dict[str, pd.DataFrame]:
    """The demo evidence base: ``{"estimates", "events", "appraisals", "directions",
    "series", "judgements"}`` -> DataFrame."""
    return {
        "estimates": estimates_frame(),
        "events": events_frame(),
        "appraisals": appraisals_frame(),
        "directions": directions_frame(),
        "series": series_frame(),
        "judgements": judgements_frame(),
    }


def default_out_dir() -> Path:
    """``seed_records/`` of the source checkout this module sits in, else of the cwd."""
    root = Path(__file__).resolve().parents[3]
    if (root / "pyproject.toml").is_file():
        return root / "seed_records"
    return Path.cwd() / "seed_records"


def write_seed_records(out_dir: Path | None = None) -> list[Path]:
    """Generate the scenario and write its files; return the paths written."""
    return write(build_scenario(), default_out_dir() if out_dir is None else Path(out_dir))


def main(argv: list[str] | None = None) -> int:
    args = sys.argv[1:] if argv is None else argv
    if len(args) > 1 or (args and args[0] in ("-h", "--help")):
        print(
            "usage: python -m exposhift.demo_scenario [OUT_DIR]\n"
            "Write the INVENTED demo evidence base (CSV files and README) to OUT_DIR "
            "(default: seed_records/)."
        )
        return 0 if args and args[0] in ("-h", "--help") else 2
    paths = write_seed_records(Path(args[0]) if args else None)
    for path in paths:
        print(f"wrote {path}")
    return 0
