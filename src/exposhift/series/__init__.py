"""Re-estimation from extracted series (pure): interrupted time series, controlled
comparisons, and falsification by moved dates and places.

Entry points: :func:`estimate_its` (one series), :func:`placebo_dates`,
:func:`placebo_places`, :func:`estimate_controlled` (with a comparison series) and
:func:`analyse_series` (everything for one exposed series, with what a figure needs).
"""

from exposhift.series.analysis import SeriesAnalysis, SeriesFigure, analyse_series, choose_model
from exposhift.series.controlled import ControlledResult, estimate_controlled
from exposhift.series.its import ITSResult, TooFewPoints, estimate_its
from exposhift.series.placebo import PlaceboResult, placebo_dates, placebo_places

__all__ = [
    "ControlledResult",
    "ITSResult",
    "PlaceboResult",
    "SeriesAnalysis",
    "SeriesFigure",
    "TooFewPoints",
    "analyse_series",
    "choose_model",
    "estimate_controlled",
    "estimate_its",
    "placebo_dates",
    "placebo_places",
]
