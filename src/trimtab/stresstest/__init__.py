"""Stress tests and historical replays on a factor model: what shocks and past windows do to today's book.

Pure numerics (no I/O). See docs/stress.md for every formula and its source.
"""

from trimtab.stresstest._moves import default_horizon, full_moves, plausibility, shock_set
from trimtab.stresstest._replay import ReplayResult, ReplaySummary, factor_history, replay, worst_windows
from trimtab.stresstest._stress import StressResult, StressSummary, stress

__all__ = [
    "ReplayResult",
    "ReplaySummary",
    "StressResult",
    "StressSummary",
    "default_horizon",
    "factor_history",
    "full_moves",
    "plausibility",
    "replay",
    "shock_set",
    "stress",
    "worst_windows",
]
