"""Choosing what to search: setups, bands and targets at a computing budget.

:mod:`.optimise` finds the segment setup and band that maximise the figure of merit of a
target at a budget and span (:func:`optimise_setup`, :func:`plan_search`), ranks a catalogue
and splits the budget between targets.
"""

from cwlimits.planning import optimise
from cwlimits.planning.optimise import *  # noqa: F403

__all__ = [*optimise.__all__]
