"""Choosing what to search: setups, bands and targets at a computing budget.

:mod:`.optimise` finds the segment setup and band that maximise the figure of merit of a
target at a budget and span (:func:`optimise_setup`, :func:`plan_search`), ranks a catalogue
and splits the budget between targets.
"""

from .optimise import (
    CASES,
    DEFAULT_BAND,
    MEASURES,
    OBJECTIVES,
    PowerLawModel,
    Ranking,
    SearchPlan,
    allocate_budget,
    as_budget,
    optimise_setup,
    plan_search,
    rank_targets,
)

__all__ = [
    "OBJECTIVES",
    "MEASURES",
    "CASES",
    "DEFAULT_BAND",
    "SearchPlan",
    "Ranking",
    "PowerLawModel",
    "as_budget",
    "optimise_setup",
    "plan_search",
    "allocate_budget",
    "rank_targets",
]
